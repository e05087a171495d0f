//! The stage filter and the stage sensor's plausibility checks.
//!
//! Units: stage m, time s.
//!
//! ## Plausibility (per reading)
//!
//! - Missing (`None` or NaN): counted; `missing_steps` in a row is a fault.
//! - Out of range (below `stage_min_m`, above `stage_max_m`): a fault from the first reading;
//!   the reading is not used.
//! - A reading is a *candidate jump* when it differs from the last accepted reading by more
//!   than `spike_m`, or by more than `max_stage_rate_m_s · Δt + noise_m` (Δt since that
//!   reading). A candidate is held back, not filtered. If the next reading is back near the
//!   accepted one, the candidate was a **spike** (fault kind `Spike`, detected on that next
//!   reading: 2 readings). If two more readings agree with the candidate (3 readings), the
//!   jump is real: it is accepted as the new level, and when it was faster than
//!   `max_stage_rate_m_s` allows it is a **rate-of-change** fault (detected on the third
//!   reading). `missing_steps` held-back readings in a row are an **implausible** sensor.
//! - **Stuck**: a reading bit-for-bit equal to the previous one while a change is expected
//!   (inflow or release above a small share of the permit) for `stuck_s` is a fault; any
//!   change of the reading ends it.
//!
//! ## Filter
//!
//! Accepted readings go through a median of the last 3, then a moving average of the last 4
//! medians. For a ramp the median lags by 1 reading and the average by 1.5 more: the filtered
//! stage is **2.5 control steps late** on a steady rise (25 s at a 10 s step). The controller
//! therefore uses `max(filtered, latest accepted reading)` wherever a high stage means danger
//! (surcharge, permit protection) and the filtered stage for the gate opening.

use crate::config::SensorLimits;

/// Readings in the median.
const MEDIAN_N: usize = 3;
/// Medians in the moving average.
const AVERAGE_N: usize = 4;
/// Readings that confirm a jump (the candidate and two more).
const CONFIRM_READINGS: u8 = 3;

/// What one reading showed (each flag is "present in this step").
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct StageObs {
    pub under_range: bool,
    pub over_range: bool,
    pub missing: bool,
    pub stuck: bool,
    pub spike: bool,
    pub rate: bool,
    pub erratic: bool,
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct StageMonitor {
    ref_stage_m: Option<f32>,
    ref_s: u32,
    last_bits: Option<u32>,
    unchanged_since_s: u32,
    cand_m: f32,
    cand_s: u32,
    cand_count: u8,
    held_in_row: u16,
    missing_in_row: u16,
    median: [f32; MEDIAN_N],
    average: [f32; AVERAGE_N],
    head: usize,
    avg_head: usize,
    filtered_m: Option<f32>,
}

fn median3(a: f32, b: f32, c: f32) -> f32 {
    a.max(b).min(a.min(b).max(c))
}

impl StageMonitor {
    pub(crate) fn new(now_s: u32) -> Self {
        Self {
            ref_stage_m: None,
            ref_s: now_s,
            last_bits: None,
            unchanged_since_s: now_s,
            cand_m: 0.0,
            cand_s: now_s,
            cand_count: 0,
            held_in_row: 0,
            missing_in_row: 0,
            median: [0.0; MEDIAN_N],
            average: [0.0; AVERAGE_N],
            head: 0,
            avg_head: 0,
            filtered_m: None,
        }
    }

    /// The filtered stage (None before the first accepted reading).
    pub(crate) fn filtered_m(&self) -> Option<f32> {
        self.filtered_m
    }

    /// The latest accepted reading.
    pub(crate) fn latest_m(&self) -> Option<f32> {
        self.ref_stage_m
    }

    fn reset_filter(&mut self, stage_m: f32) {
        self.median = [stage_m; MEDIAN_N];
        self.average = [stage_m; AVERAGE_N];
        self.filtered_m = Some(stage_m);
    }

    fn feed(&mut self, stage_m: f32) {
        self.head = (self.head.saturating_add(1)) % MEDIAN_N;
        if let Some(slot) = self.median.get_mut(self.head) {
            *slot = stage_m;
        }
        let [a, b, c] = self.median;
        let m = median3(a, b, c);
        self.avg_head = (self.avg_head.saturating_add(1)) % AVERAGE_N;
        if let Some(slot) = self.average.get_mut(self.avg_head) {
            *slot = m;
        }
        let [p, q, r, s] = self.average;
        self.filtered_m = Some(((p + q) + (r + s)) * 0.25);
    }

    fn accept(&mut self, stage_m: f32, now_s: u32) {
        if self.ref_stage_m.is_none() {
            self.reset_filter(stage_m);
        } else {
            self.feed(stage_m);
        }
        self.ref_stage_m = Some(stage_m);
        self.ref_s = now_s;
    }

    /// Takes one reading. `change_expected`: inflow or release is large enough that the
    /// stage should move (for the stuck check).
    pub(crate) fn update(
        &mut self,
        raw: Option<f32>,
        now_s: u32,
        s: &SensorLimits,
        change_expected: bool,
    ) -> StageObs {
        let mut obs = StageObs::default();
        let Some(x) = raw.filter(|v| !v.is_nan()) else {
            self.missing_in_row = self.missing_in_row.saturating_add(1);
            obs.missing = self.missing_in_row >= s.missing_steps;
            self.unchanged_since_s = now_s;
            return obs;
        };
        self.missing_in_row = 0;
        if x < s.stage_min_m {
            obs.under_range = true;
            return obs;
        }
        if x > s.stage_max_m {
            obs.over_range = true;
            return obs;
        }
        let bits = x.to_bits();
        if self.last_bits != Some(bits) || !change_expected {
            self.unchanged_since_s = now_s;
        }
        self.last_bits = Some(bits);
        obs.stuck = now_s.saturating_sub(self.unchanged_since_s) >= s.stuck_s;

        let Some(r) = self.ref_stage_m else {
            self.accept(x, now_s);
            return obs;
        };
        let allowed =
            |since_s: u32| s.max_stage_rate_m_s * now_s.saturating_sub(since_s) as f32 + s.noise_m;
        let jump = crate::math::abs(x - r);
        let candidate = jump > s.spike_m || jump > allowed(self.ref_s);
        if !candidate {
            if self.cand_count > 0 {
                obs.spike = true;
            }
            self.cand_count = 0;
            self.held_in_row = 0;
            self.accept(x, now_s);
            return obs;
        }
        let agrees =
            self.cand_count > 0 && crate::math::abs(x - self.cand_m) <= allowed(self.cand_s);
        if agrees {
            self.cand_count = self.cand_count.saturating_add(1);
        } else {
            self.cand_m = x;
            self.cand_s = now_s;
            self.cand_count = 1;
        }
        if self.cand_count >= CONFIRM_READINGS {
            obs.rate = jump > allowed(self.ref_s);
            self.cand_count = 0;
            self.held_in_row = 0;
            self.ref_stage_m = Some(x);
            self.ref_s = now_s;
            self.reset_filter(x);
            return obs;
        }
        self.held_in_row = self.held_in_row.saturating_add(1);
        obs.erratic = self.held_in_row >= s.missing_steps;
        obs
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn limits() -> SensorLimits {
        super::super::test_sensor_limits()
    }

    #[test]
    fn median_and_average_reject_one_outlier_and_lag_a_ramp() {
        assert_eq!(median3(1.0, 5.0, 2.0), 2.0);
        assert_eq!(median3(5.0, 1.0, 1.0), 1.0);
        let mut m = StageMonitor::new(0);
        let s = limits();
        for k in 0..20u32 {
            m.update(Some(1.0 + 0.001 * k as f32), k * 10, &s, true);
        }
        // Ramp of 1 mm per reading: the filter is 2.5 readings behind.
        let f = m.filtered_m().unwrap();
        assert!((f - (1.0 + 0.001 * 16.5)).abs() < 1e-5, "{f}");
    }

    #[test]
    fn spike_reverts_and_jump_confirms() {
        let s = limits();
        let mut m = StageMonitor::new(0);
        m.update(Some(1.0), 0, &s, true);
        assert!(!m.update(Some(1.5), 10, &s, true).spike);
        assert!(m.update(Some(1.0), 20, &s, true).spike);
        assert_eq!(m.latest_m(), Some(1.0));
        m.update(Some(2.0), 30, &s, true);
        m.update(Some(2.0), 40, &s, true);
        let o = m.update(Some(2.0), 50, &s, true);
        assert!(o.rate);
        assert_eq!(m.filtered_m(), Some(2.0));
    }
}
