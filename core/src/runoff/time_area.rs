//! The time–area method: a catchment as a fixed-length unit response (effective contributing
//! area per time step of travel), convolved with a hyetograph (rain depth per step) to give the
//! inflow to the pond.
//!
//! ## Definitions
//!
//! With time steps of `dt_s`, rain depth Pₙ (mm) in step n and ordinates Aₖ (m² of effective,
//! fully contributing area, i.e. C·A shares), the mean inflow over step n is
//!
//! Qₙ \[m³/s\] = Σₖ 0.001·Pₙ₋ₖ·Aₖ / dt.
//!
//! So Σ Qₙ·dt = 0.001·Σ P·Σ A: the convolution conserves volume exactly once the response has
//! drained. Ordinates come either from user fractions (which must sum to 1 within 1 %, and are
//! scaled to sum to exactly 1) times C·A, or from a [`Catchment`]: each sub-catchment's
//! cumulative time–area curve F(τ) is linear from 0 at its lag L to 1 at L + Tc, and its
//! ordinates are C·A·(W(k) − W(k−1)), W(k) = the mean of F over step k. These are the exact
//! step means of the continuous linear time–area response to rain that is uniform within each
//! step, so for constant rain they reproduce the step means of the modified-rational
//! hydrograph.
//!
//! ## Invariants and units
//!
//! - `dt_s` in 1..=[`MAX_DT_S`]; 1..=[`MAX_TIME_AREA_STEPS`] ordinates, each finite and ≥ 0.
//! - Rain pushed in is read as 0 when negative or NaN (a live input, never an error), so the
//!   inflow is always finite-or-+∞ and ≥ 0.
//! - [`TimeAreaInflow::push_step`] costs one multiply-add per ordinate, no allocation.

use heapless::Vec;

use super::hydrograph::Catchment;
use super::rational::{AreaHa, RunoffCoefficient};
use super::{RunoffError, live_non_negative};
use crate::validate;

/// How many ordinates (steps of travel time) a [`TimeAreaResponse`] can hold.
pub const MAX_TIME_AREA_STEPS: usize = 128;

/// Longest time step accepted, s (1 h).
pub const MAX_DT_S: u32 = 3600;

/// m³ per (mm · m²).
const M3_PER_MM_M2: f32 = 0.001;

/// How far user fractions may sum from 1 before they are rejected.
const FRACTION_SUM_TOLERANCE: f32 = 0.01;

/// A catchment's unit response: effective contributing area per step of travel time.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeAreaResponse {
    dt_s: u32,
    ordinates_m2: Vec<f32, MAX_TIME_AREA_STEPS>,
}

fn step(dt_s: u32) -> Result<u32, RunoffError> {
    if (1..=MAX_DT_S).contains(&dt_s) {
        Ok(dt_s)
    } else {
        Err(validate::Invalid {
            field: "dt_s",
            value: dt_s as f32,
            rule: "must be in [1, 3600] s",
        }
        .into())
    }
}

/// ∫ over \[a, b\] of F(u) = clamp((u − lag)/tc, 0, 1), in s.
fn linear_time_area_integral(a: f32, b: f32, lag: f32, tc: f32) -> f32 {
    let p = if a > lag { a - lag } else { 0.0 };
    let q = if b < lag + tc { b - lag } else { tc };
    let rising = if q > p {
        (q - p) * (q + p) / (2.0 * tc)
    } else {
        0.0
    };
    let full_from = if a > lag + tc { a } else { lag + tc };
    let full = if b > full_from { b - full_from } else { 0.0 };
    rising + full
}

impl TimeAreaResponse {
    /// A response from contributing-area fractions per step (each finite and ≥ 0, 1..=
    /// [`MAX_TIME_AREA_STEPS`] of them, summing to 1 within 1 %; they are scaled to sum to 1)
    /// for a catchment of coefficient `c` and area `area`.
    pub fn from_fractions(
        dt_s: u32,
        c: RunoffCoefficient,
        area: AreaHa,
        fractions: &[f32],
    ) -> Result<Self, RunoffError> {
        let dt_s = step(dt_s)?;
        if fractions.is_empty() {
            return Err(RunoffError::Empty {
                what: "time-area fractions",
            });
        }
        if fractions.len() > MAX_TIME_AREA_STEPS {
            return Err(RunoffError::Capacity {
                what: "time-area steps",
                capacity: MAX_TIME_AREA_STEPS,
            });
        }
        for &f in fractions {
            validate::non_negative("time_area_fraction", f)?;
        }
        let sum = fractions.iter().sum::<f32>();
        validate::within(
            "time_area_fraction_sum",
            sum,
            1.0 - FRACTION_SUM_TOLERANCE,
            1.0 + FRACTION_SUM_TOLERANCE,
            "must be 1 within 0.01",
        )?;
        let effective_m2 = c.value() * area.m2();
        let mut ordinates_m2 = Vec::new();
        for &f in fractions {
            ordinates_m2
                .push(effective_m2 * (f / sum))
                .map_err(|_| RunoffError::Capacity {
                    what: "time-area steps",
                    capacity: MAX_TIME_AREA_STEPS,
                })?;
        }
        Ok(Self { dt_s, ordinates_m2 })
    }

    /// The response of a set of sub-catchments: each one's linear time–area over its Tc,
    /// shifted by its lag, as step means (see the module doc). Needs
    /// ⌈max(lag + Tc) / dt⌉ + 1 ≤ [`MAX_TIME_AREA_STEPS`] steps.
    pub fn from_catchment(catchment: &Catchment, dt_s: u32) -> Result<Self, RunoffError> {
        let dt_s = step(dt_s)?;
        let steps = catchment.max_arrival_s().div_ceil(dt_s).saturating_add(1);
        if steps as usize > MAX_TIME_AREA_STEPS {
            return Err(RunoffError::Capacity {
                what: "time-area steps",
                capacity: MAX_TIME_AREA_STEPS,
            });
        }
        let dt = dt_s as f32;
        let mut ordinates_m2: Vec<f32, MAX_TIME_AREA_STEPS> = Vec::new();
        for k in 0..steps {
            // Times stay below 128 · 3600 < 2²⁴ s, so they are exact in f32.
            let a = k as f32 * dt;
            let mut ord = 0.0_f32;
            for s in catchment.sub_catchments() {
                let lag = s.lag_s() as f32;
                let tc = s.tc().s() as f32;
                let w_now = linear_time_area_integral(a, a + dt, lag, tc) / dt;
                let w_before = linear_time_area_integral(a - dt, a, lag, tc) / dt;
                let d = w_now - w_before;
                ord += s.effective_area_m2() * if d > 0.0 { d } else { 0.0 };
            }
            ordinates_m2.push(ord).map_err(|_| RunoffError::Capacity {
                what: "time-area steps",
                capacity: MAX_TIME_AREA_STEPS,
            })?;
        }
        Ok(Self { dt_s, ordinates_m2 })
    }

    /// The time step, s.
    pub fn dt_s(&self) -> u32 {
        self.dt_s
    }

    /// Effective contributing area per step of travel, m² (index 0: rain of this step).
    pub fn ordinates_m2(&self) -> &[f32] {
        &self.ordinates_m2
    }

    /// Σ of the ordinates, m²: the catchment's C·A.
    pub fn effective_area_m2(&self) -> f32 {
        self.ordinates_m2.iter().sum()
    }

    /// Mean inflow per step (m³/s) for a whole hyetograph: `inflow_m3s\[n\]` =
    /// Σₖ 0.001·rain_mm\[n − k\]·Aₖ / dt, rain beyond the end of `rain_mm` taken as 0 (so an
    /// output longer than the rain holds the recession). Negative or NaN rain reads as 0.
    pub fn convolve(&self, rain_mm: &[f32], inflow_m3s: &mut [f32]) {
        let scale = M3_PER_MM_M2 / self.dt_s as f32;
        for (n, out) in inflow_m3s.iter_mut().enumerate() {
            let mut sum = 0.0_f32;
            for (k, a) in self.ordinates_m2.iter().enumerate() {
                let Some(age) = n.checked_sub(k) else { break };
                let p = rain_mm.get(age).copied().map_or(0.0, live_non_negative);
                sum += p * a;
            }
            *out = sum * scale;
        }
    }
}

/// The running time–area inflow from live rain: push one step of rain, get the mean inflow
/// over that step. Holds the last `ordinates` steps of rain in a ring.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeAreaInflow {
    response: TimeAreaResponse,
    /// Rain depth per step (mm) in a ring of `response.ordinates_m2.len()` slots; `head` is
    /// the newest.
    history_mm: [f32; MAX_TIME_AREA_STEPS],
    head: usize,
    /// How many of the newest pushes were zero, counted up to the ring's length (the
    /// ordinate count): at that length every live slot is zero. A function of the ring's
    /// contents, so equality of two estimates is unchanged by it.
    dry_steps: usize,
}

impl TimeAreaInflow {
    /// A running estimate with no rain fallen yet.
    pub fn new(response: TimeAreaResponse) -> Self {
        let dry_steps = response.ordinates_m2.len();
        Self {
            response,
            history_mm: [0.0; MAX_TIME_AREA_STEPS],
            head: 0,
            dry_steps,
        }
    }

    /// The response in use.
    pub fn response(&self) -> &TimeAreaResponse {
        &self.response
    }

    /// Forgets all rain.
    pub fn reset(&mut self) {
        self.history_mm = [0.0; MAX_TIME_AREA_STEPS];
        self.head = 0;
        self.dry_steps = self.response.ordinates_m2.len();
    }

    /// Whether every live slot of the ring holds zero rain (no runoff is on its way).
    pub fn all_dry(&self) -> bool {
        self.dry_steps >= self.response.ordinates_m2.len()
    }

    /// The ring's live part (as many slots as ordinates).
    fn ring(&self) -> &[f32] {
        let n = self.response.ordinates_m2.len();
        self.history_mm.get(..n).unwrap_or(&self.history_mm)
    }

    /// Past rain newest first: step n, n − 1, …
    fn newest_first(&self) -> impl Iterator<Item = &f32> {
        let ring = self.ring();
        let (older_tail, rest) = ring
            .split_at_checked(self.head.saturating_add(1))
            .unwrap_or((ring, &[]));
        older_tail.iter().rev().chain(rest.iter().rev())
    }

    /// Σ ords[k] · rain of age k (newest first), as two plain zipped loops over the ring's two
    /// halves (the same terms in the same order as [`Self::newest_first`], so the same bits).
    fn dot_newest_first(&self, ords: &[f32]) -> f32 {
        let ring = self.ring();
        let (recent, older) = ring
            .split_at_checked(self.head.saturating_add(1))
            .unwrap_or((ring, &[]));
        let (o_recent, o_older) = ords.split_at_checked(recent.len()).unwrap_or((ords, &[]));
        let acc = o_recent
            .iter()
            .zip(recent.iter().rev())
            .fold(0.0_f32, |acc, (a, p)| acc + a * p);
        o_older
            .iter()
            .zip(older.iter().rev())
            .fold(acc, |acc, (a, p)| acc + a * p)
    }

    /// Takes the rain depth (mm) of the step just ended and returns the mean inflow over that
    /// step, m³/s. Negative or NaN rain reads as 0.
    pub fn push_step(&mut self, rain_mm: f32) -> f32 {
        let n = self.response.ordinates_m2.len();
        let next = self.head.saturating_add(1);
        self.head = if next < n { next } else { 0 };
        let rain_mm = live_non_negative(rain_mm);
        if let Some(slot) = self.history_mm.get_mut(self.head) {
            *slot = rain_mm;
        }
        self.dry_steps = if rain_mm == 0.0 {
            self.dry_steps.saturating_add(1).min(n)
        } else {
            0
        };
        self.projected_inflow_m3s(0, 0.0)
    }

    /// The mean inflow `ahead_steps` steps after the latest pushed one, m³/s, if every step
    /// from now on brings `rain_mm_per_step` (negative or NaN reads as 0). `ahead_steps = 0` is
    /// the inflow [`Self::push_step`] last returned.
    pub fn projected_inflow_m3s(&self, ahead_steps: usize, rain_mm_per_step: f32) -> f32 {
        let future = live_non_negative(rain_mm_per_step);
        let ords = &self.response.ordinates_m2;
        // No future rain gives exactly +0 (a finite sum times +0), so the sum is skipped.
        let from_future = if future == 0.0 {
            0.0
        } else {
            ords.iter().take(ahead_steps).sum::<f32>() * future
        };
        // A dry ring gives exactly +0 (every term is ±0 and the sum starts at +0), so the dot
        // product is skipped: same bits, no work in dry weather.
        let from_past = if self.all_dry() {
            0.0
        } else {
            self.dot_newest_first(ords.get(ahead_steps..).unwrap_or(&[]))
        };
        (from_future + from_past) * (M3_PER_MM_M2 / self.response.dt_s as f32)
    }

    /// Volume still to reach the pond from rain already fallen, m³ (if no more rain falls and
    /// the latest step's inflow is counted as delivered).
    pub fn pending_volume_m3(&self) -> f32 {
        let ords = &self.response.ordinates_m2;
        let total = ords.iter().sum::<f32>();
        let mut delivered_share = 0.0_f32;
        let mut pending = 0.0_f32;
        for (a, p) in ords.iter().zip(self.newest_first()) {
            delivered_share += a;
            let rest = total - delivered_share;
            pending += p * if rest > 0.0 { rest } else { 0.0 };
        }
        pending * M3_PER_MM_M2
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::runoff::{SubCatchment, TimeOfConcentration};

    fn one_sub(tc_s: u32, lag_s: u32) -> Catchment {
        let s = SubCatchment::new(
            RunoffCoefficient::new(0.5).unwrap(),
            AreaHa::new(2.0).unwrap(),
            TimeOfConcentration::from_s(tc_s).unwrap(),
            lag_s,
        )
        .unwrap();
        Catchment::new(&[s]).unwrap()
    }

    /// Tc = 10 steps, no lag: half-weight first and last ordinates, equal weights between
    /// (step means of a linear time–area curve; analytic).
    #[test]
    fn linear_time_area_ordinates_have_half_ends() {
        let r = TimeAreaResponse::from_catchment(&one_sub(600, 0), 60).unwrap();
        let ca = 0.5 * 20_000.0;
        let o = r.ordinates_m2();
        assert_eq!(o.len(), 11);
        assert!((o[0] - ca / 20.0).abs() < 1e-2);
        for x in &o[1..10] {
            assert!((x - ca / 10.0).abs() < 1e-2);
        }
        assert!((o[10] - ca / 20.0).abs() < 1e-2);
        assert!((r.effective_area_m2() - ca).abs() < 0.1);
    }

    #[test]
    fn lag_shifts_the_ordinates() {
        let r = TimeAreaResponse::from_catchment(&one_sub(600, 120), 60).unwrap();
        let o = r.ordinates_m2();
        assert_eq!(o.len(), 13);
        assert_eq!(o[0], 0.0);
        assert_eq!(o[1], 0.0);
        assert!(o[2] > 0.0);
    }

    #[test]
    fn streaming_matches_batch_and_tracks_pending_volume() {
        let r = TimeAreaResponse::from_catchment(&one_sub(600, 60), 60).unwrap();
        let rain = [1.0, 3.0, 0.0, 2.0, 0.5];
        let mut batch = [0.0; 20];
        r.convolve(&rain, &mut batch);
        let mut s = TimeAreaInflow::new(r.clone());
        let mut delivered = 0.0;
        for (n, b) in batch.iter().enumerate() {
            let q = s.push_step(rain.get(n).copied().unwrap_or(0.0));
            assert!(
                (q - b).abs() <= 1e-6 * b.abs().max(1e-3),
                "step {n}: {q} vs {b}"
            );
            delivered += q * 60.0;
            if n == 2 {
                let expect = 0.001 * 4.0 * r.effective_area_m2() - delivered;
                assert!((s.pending_volume_m3() - expect).abs() < 1e-3 * expect);
            }
        }
        assert!(s.pending_volume_m3().abs() < 1e-3);
    }

    #[test]
    fn projection_with_no_more_rain_equals_pushing_zeros() {
        let r = TimeAreaResponse::from_catchment(&one_sub(300, 0), 60).unwrap();
        let mut s = TimeAreaInflow::new(r);
        s.push_step(2.0);
        s.push_step(1.0);
        let ahead = s.projected_inflow_m3s(2, 0.5);
        let mut t = s.clone();
        t.push_step(0.5);
        assert!((t.push_step(0.5) - ahead).abs() < 1e-7);
    }

    #[test]
    fn bad_inputs_are_rejected() {
        let c = RunoffCoefficient::new(0.5).unwrap();
        let a = AreaHa::new(1.0).unwrap();
        assert!(TimeAreaResponse::from_fractions(0, c, a, &[1.0]).is_err());
        assert!(TimeAreaResponse::from_fractions(60, c, a, &[]).is_err());
        assert!(TimeAreaResponse::from_fractions(60, c, a, &[0.5, 0.3]).is_err());
        assert!(TimeAreaResponse::from_fractions(60, c, a, &[1.5, -0.5]).is_err());
        assert!(TimeAreaResponse::from_fractions(60, c, a, &[f32::NAN]).is_err());
        assert!(TimeAreaResponse::from_fractions(60, c, a, &[0.5, 0.499]).is_ok());
        let many = [1.0 / 200.0; 200];
        assert!(matches!(
            TimeAreaResponse::from_fractions(60, c, a, &many),
            Err(RunoffError::Capacity { .. })
        ));
        assert!(matches!(
            TimeAreaResponse::from_catchment(&one_sub(20_000, 0), 60),
            Err(RunoffError::Capacity { .. })
        ));
    }

    #[test]
    fn bad_rain_never_gives_negative_inflow() {
        let r = TimeAreaResponse::from_catchment(&one_sub(300, 0), 60).unwrap();
        let mut s = TimeAreaInflow::new(r);
        assert_eq!(s.push_step(f32::NAN), 0.0);
        assert_eq!(s.push_step(-4.0), 0.0);
    }

    /// Storms separated by dry spells longer than the response (where the dry shortcut
    /// applies) give the same bits from the running estimate as from the batch convolution,
    /// and exactly 0 once the response has drained (Σ of zero terms; the shortcut's claim).
    #[test]
    fn dry_spells_give_the_batch_bits_and_exact_zero() {
        let r = TimeAreaResponse::from_catchment(&one_sub(600, 120), 60).unwrap();
        let n = r.ordinates_m2().len();
        let mut rain = [0.0_f32; 200];
        for (k, p) in rain.iter_mut().enumerate() {
            // Two wet bursts, a lone -0 and a lone NaN in the dry spells.
            *p = match k {
                3..=9 => 0.1 * k as f32,
                40 => -0.0,
                60 => f32::NAN,
                90..=94 => 2.0,
                _ => 0.0,
            };
        }
        let mut batch = [0.0_f32; 200];
        r.convolve(&rain, &mut batch);
        let mut s = TimeAreaInflow::new(r);
        for (k, (p, b)) in rain.iter().zip(&batch).enumerate() {
            let q = s.push_step(*p);
            assert_eq!(q.to_bits(), b.to_bits(), "step {k}");
            if (10 + n..90).contains(&k) || k >= 95 + n {
                assert_eq!(q.to_bits(), 0.0_f32.to_bits(), "step {k}");
                assert_eq!(s.projected_inflow_m3s(3, 0.0).to_bits(), 0);
            }
        }
    }
}
