//! Design storms: a hyetograph (rain depth per step, mm) built from an IDF description for a
//! return period and a duration, written into a caller's slice (no heap).
//!
//! Three patterns ([`Pattern`]):
//!
//! - **Uniform block**: the IDF intensity for the whole duration, `i(Td)`, in every step, so
//!   each step holds `i(Td)·dt` and the storm holds `i(Td)·Td`.
//! - **Alternating block** (Chow, Maidment & Mays 1988, *Applied Hydrology*, McGraw-Hill,
//!   §14.4; described here from memory): the cumulative depths `D(k·dt)` of the IDF
//!   depth–duration curve for k = 1..n give incremental blocks `D(k·dt) − D((k−1)·dt)`; they
//!   are ranked largest first, the largest is put in the peak step and the rest alternately
//!   to its right and left (first right), continuing on one side once the other is full. The
//!   peak step is the one holding `r·Td` (r = [`DesignStorm::peak_ratio`], 0.5 = centre).
//!   The k largest blocks then always sit side by side, so the deepest window of k steps
//!   holds `D(k·dt)` exactly whenever the blocks fall with k (a concave depth–duration
//!   curve: every Talbot curve, every Sherman curve with c ≤ 1); otherwise it holds the sum
//!   of the k largest blocks, which is at least `D(k·dt)`.
//! - **Chicago storm** (Keifer & Chu 1957, "Synthetic storm pattern for drainage design",
//!   J. Hydraulics Div. ASCE 83(HY4)): the intensity at a time `tb` before the peak is the
//!   slope of the depth–duration curve at `tb/r`, at `ta` after it the slope at `ta/(1−r)`;
//!   for Sherman `i = a/(t+b)^c` this is the closed form
//!   `i_after(ta) = a·((1−c)·ta/(1−r) + b) / (ta/(1−r) + b)^(1+c)` (and `r` for `1−r` before),
//!   given by [`keifer_chu_intensity_mm_h`]. Integrating it gives the mass curve exactly:
//!   rain from the peak to `ta` after it is `(1−r)·D(ta/(1−r))`, from `tb` before it to the
//!   peak `r·D(tb/r)`. The intensity peaks at `r·Td`; on a grid of steps the deepest step
//!   is the one holding `r·Td` or a neighbour of it (a peak near a step edge splits its
//!   rain). Each step's depth is the difference of that mass curve
//!   ([`DesignStorm::chicago_mass_mm`]) across the step, so it is the exact integral of the
//!   intensity over the step for **any** IDF (formula or table) without quadrature, and the
//!   steps sum to `D(Td)`. Every window that starts `r·d` before the peak and ends
//!   `(1−r)·d` after it holds `D(d)`. For a table, whose intensity has no closed form, the
//!   instantaneous intensity [`DesignStorm::chicago_intensity_mm_h`] is the central
//!   difference of the same mass curve over ±[`NUMERIC_HALF_STEP_S`].
//!
//! ## Units and invariants
//!
//! Durations and steps are whole seconds (`u32`); the IDF is asked in minutes (`f32`);
//! depths are mm per step, intensities mm/h, return periods years. A [`DesignStorm`] is
//! validated once: return period finite and > 0, `1 ≤ dt_s ≤ duration_s ≤`
//! [`MAX_STORM_DURATION_S`], the duration a whole number of steps, at most
//! [`MAX_STORM_STEPS`] steps, peak ratio in \[0, 1\]. Filling fails only when the caller's
//! slice is shorter than the storm. A depth–duration curve that falls with duration (possible
//! only for a power law with exponent > 1 or a Sherman curve with c > 1 beyond `b/(c−1)`)
//! would give negative blocks: they are written as 0, so depths are never negative and the
//! storm total is then more than `D(Td)`. No step ever panics; NaN never comes out of a
//! validated IDF at a positive duration.

use core::fmt;

use super::idf::{Idf, IdfFormula};
use crate::math;
use crate::validate::{self, Invalid};

/// Longest design storm, s (10 days).
pub const MAX_STORM_DURATION_S: u32 = 864_000;

/// Most steps in one design storm (the alternating-block arrangement costs at most
/// O(n²) moves in place, so n is bounded).
pub const MAX_STORM_STEPS: usize = 4096;

/// Half-width of the central difference used for the Chicago intensity of any IDF, s: wide
/// enough that f32 rounding of the mass curve (≈ 1e-5 mm) costs < 0.1 % of the intensity,
/// narrow enough that the truncation error is small where the intensity varies over minutes.
/// Within this distance of the peak the slope's kink is averaged.
pub const NUMERIC_HALF_STEP_S: f32 = 10.0;

/// Why a design storm could not be built or written.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DesignStormError {
    /// One number broke its rule.
    Invalid(Invalid),
    /// The duration is not a whole number of steps.
    NotWholeSteps {
        /// Storm duration, s.
        duration_s: u32,
        /// Step, s.
        dt_s: u32,
    },
    /// More steps than [`MAX_STORM_STEPS`].
    TooManySteps {
        /// Steps the storm would have.
        steps: usize,
        /// The most allowed.
        max: usize,
    },
    /// The caller's slice cannot hold the storm.
    BufferTooShort {
        /// Steps needed.
        needed: usize,
        /// Length of the slice given.
        got: usize,
    },
}

impl From<Invalid> for DesignStormError {
    fn from(e: Invalid) -> Self {
        DesignStormError::Invalid(e)
    }
}

impl fmt::Display for DesignStormError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Invalid(e) => write!(f, "{e}"),
            Self::NotWholeSteps { duration_s, dt_s } => write!(
                f,
                "duration_s = {duration_s}: must be a whole number of {dt_s} s steps"
            ),
            Self::TooManySteps { steps, max } => {
                write!(f, "design storm of {steps} steps: at most {max}")
            }
            Self::BufferTooShort { needed, got } => {
                write!(
                    f,
                    "hyetograph buffer of {got} steps: the storm needs {needed}"
                )
            }
        }
    }
}

impl core::error::Error for DesignStormError {}

/// The time pattern of a design storm.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Pattern {
    /// Constant IDF intensity for the whole duration.
    Uniform,
    /// Alternating-block hyetograph (Chow, Maidment & Mays 1988, §14.4).
    AlternatingBlock,
    /// Chicago storm (Keifer & Chu 1957).
    Chicago,
}

/// A design storm: return period, duration, step and peak position (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DesignStorm {
    return_period_years: f32,
    duration_s: u32,
    dt_s: u32,
    peak_ratio: f32,
}

/// IDF depth for a duration in seconds, 0 for a duration ≤ 0 or NaN.
fn depth_s(idf: &impl Idf, return_period_years: f32, t_s: f32) -> f32 {
    if t_s > 0.0 {
        idf.depth_mm(t_s / 60.0, return_period_years)
    } else {
        0.0
    }
}

impl DesignStorm {
    /// A storm of return period `return_period_years` (> 0) lasting `duration_s`, in steps of
    /// `dt_s` (`1 ≤ dt_s ≤ duration_s ≤` [`MAX_STORM_DURATION_S`], a whole number of steps,
    /// at most [`MAX_STORM_STEPS`]), peaking at the centre (ratio 0.5).
    pub fn new(
        return_period_years: f32,
        duration_s: u32,
        dt_s: u32,
    ) -> Result<Self, DesignStormError> {
        validate::positive("return_period_years", return_period_years)?;
        validate::within(
            "duration_s",
            duration_s as f32,
            1.0,
            MAX_STORM_DURATION_S as f32,
            "must be in [1, 864000] s",
        )?;
        validate::within(
            "dt_s",
            dt_s as f32,
            1.0,
            duration_s as f32,
            "must be in [1, duration_s] s",
        )?;
        let steps = duration_s.checked_div(dt_s).unwrap_or(0);
        if duration_s.checked_rem(dt_s) != Some(0) {
            return Err(DesignStormError::NotWholeSteps { duration_s, dt_s });
        }
        let steps = steps as usize;
        if steps > MAX_STORM_STEPS {
            return Err(DesignStormError::TooManySteps {
                steps,
                max: MAX_STORM_STEPS,
            });
        }
        Ok(Self {
            return_period_years,
            duration_s,
            dt_s,
            peak_ratio: 0.5,
        })
    }

    /// The same storm with its peak at `peak_ratio · duration` (ratio in \[0, 1\]: 0 peaks at
    /// the start, 1 at the end).
    pub fn with_peak_ratio(self, peak_ratio: f32) -> Result<Self, DesignStormError> {
        let r = validate::within("peak_ratio", peak_ratio, 0.0, 1.0, "must be in [0, 1]")?;
        Ok(Self {
            peak_ratio: r,
            ..self
        })
    }

    /// Return period, years.
    pub fn return_period_years(&self) -> f32 {
        self.return_period_years
    }

    /// Duration, s.
    pub fn duration_s(&self) -> u32 {
        self.duration_s
    }

    /// Step, s.
    pub fn dt_s(&self) -> u32 {
        self.dt_s
    }

    /// Peak position as a fraction of the duration.
    pub fn peak_ratio(&self) -> f32 {
        self.peak_ratio
    }

    /// Number of steps, `duration_s / dt_s` (≤ [`MAX_STORM_STEPS`]).
    pub fn steps(&self) -> usize {
        self.duration_s.checked_div(self.dt_s).unwrap_or(0) as usize
    }

    /// Time of the peak, s from the start: `peak_ratio · duration_s`.
    pub fn peak_time_s(&self) -> f32 {
        self.peak_ratio * self.duration_s as f32
    }

    /// Index of the step holding the peak time (the last step when the peak is at the end).
    pub fn peak_step(&self) -> usize {
        let n = self.steps();
        // peak_ratio in [0, 1] and n ≤ MAX_STORM_STEPS, so the product is a small whole number.
        let k = (self.peak_ratio * n as f32) as usize;
        k.min(n.saturating_sub(1))
    }

    /// The IDF depth for the whole duration, mm.
    pub fn total_depth_mm(&self, idf: &impl Idf) -> f32 {
        depth_s(idf, self.return_period_years, self.duration_s as f32)
    }

    /// Writes the storm in `pattern` into `out[..steps]` (mm per step) and returns the number
    /// of steps; an error (nothing written) when `out` is shorter than the storm.
    pub fn fill(
        &self,
        idf: &impl Idf,
        pattern: Pattern,
        out: &mut [f32],
    ) -> Result<usize, DesignStormError> {
        match pattern {
            Pattern::Uniform => self.uniform(idf, out),
            Pattern::AlternatingBlock => self.alternating_block(idf, out),
            Pattern::Chicago => self.chicago(idf, out),
        }
    }

    fn slots<'a>(&self, out: &'a mut [f32]) -> Result<&'a mut [f32], DesignStormError> {
        let n = self.steps();
        let got = out.len();
        out.get_mut(..n)
            .ok_or(DesignStormError::BufferTooShort { needed: n, got })
    }

    /// Uniform block: every step holds `i(Td)·dt` = `D(Td)·dt/Td`, mm.
    pub fn uniform(&self, idf: &impl Idf, out: &mut [f32]) -> Result<usize, DesignStormError> {
        let slots = self.slots(out)?;
        let per_step = self.total_depth_mm(idf) * (self.dt_s as f32 / self.duration_s as f32);
        slots.fill(per_step);
        Ok(slots.len())
    }

    /// Alternating-block hyetograph (see the module doc), mm per step.
    pub fn alternating_block(
        &self,
        idf: &impl Idf,
        out: &mut [f32],
    ) -> Result<usize, DesignStormError> {
        let dt = self.dt_s as f32;
        let t = self.return_period_years;
        let slots = self.slots(out)?;
        let n = slots.len();
        let mut prev = 0.0_f32;
        for (k, slot) in slots.iter_mut().enumerate() {
            // k + 1 ≤ MAX_STORM_STEPS: exact in f32.
            let d = depth_s(idf, t, (k as f32 + 1.0) * dt);
            let block = d - prev;
            *slot = if block > 0.0 { block } else { 0.0 };
            prev = d;
        }
        slots.sort_unstable_by(|a, b| b.total_cmp(a));
        permute_by_rank(slots, self.peak_step(), n);
        Ok(n)
    }

    /// Chicago-storm mass curve: rain from the start to `t_s` seconds after it, mm (0 before
    /// the start, `D(Td)` after the end).
    pub fn chicago_mass_mm(&self, idf: &impl Idf, t_s: f32) -> f32 {
        let total_s = self.duration_s as f32;
        let r = self.peak_ratio;
        let tp = self.peak_time_s();
        let rp = self.return_period_years;
        let s = math::clamp(t_s, 0.0, total_s);
        let d_total = depth_s(idf, rp, total_s);
        if s <= tp {
            if r > 0.0 {
                r * (d_total - depth_s(idf, rp, (tp - s) / r))
            } else {
                0.0
            }
        } else if r < 1.0 {
            r * d_total + (1.0 - r) * depth_s(idf, rp, (s - tp) / (1.0 - r))
        } else {
            d_total
        }
    }

    /// Chicago storm (Keifer & Chu 1957), mm per step: the mass curve's rise over each step,
    /// i.e. the exact integral of the Keifer–Chu intensity over the step.
    pub fn chicago(&self, idf: &impl Idf, out: &mut [f32]) -> Result<usize, DesignStormError> {
        let dt = self.dt_s as f32;
        let slots = self.slots(out)?;
        let mut prev = self.chicago_mass_mm(idf, 0.0);
        for (k, slot) in slots.iter_mut().enumerate() {
            let m = self.chicago_mass_mm(idf, (k as f32 + 1.0) * dt);
            let d = m - prev;
            *slot = if d > 0.0 { d } else { 0.0 };
            prev = m;
        }
        Ok(slots.len())
    }

    /// Chicago-storm intensity at `t_s` seconds from the start, mm/h, for any IDF: the
    /// central difference of [`Self::chicago_mass_mm`] over ±[`NUMERIC_HALF_STEP_S`]
    /// (one-sided within that distance of the start or end; 0 outside the storm).
    pub fn chicago_intensity_mm_h(&self, idf: &impl Idf, t_s: f32) -> f32 {
        let total_s = self.duration_s as f32;
        if !(t_s >= 0.0 && t_s <= total_s) {
            return 0.0;
        }
        let lo = math::clamp(t_s - NUMERIC_HALF_STEP_S, 0.0, total_s);
        let hi = math::clamp(t_s + NUMERIC_HALF_STEP_S, 0.0, total_s);
        if hi <= lo {
            return 0.0;
        }
        let dm = self.chicago_mass_mm(idf, hi) - self.chicago_mass_mm(idf, lo);
        dm / (hi - lo) * 3600.0
    }
}

/// Keifer–Chu intensity of the Chicago storm for one IDF formula, mm/h, at
/// `time_from_peak_min` (negative before the peak) with peak ratio `peak_ratio` in \[0, 1\]:
/// the slope `d(i·t)/dt` of the formula's depth curve at `t = |time|/r` before the peak,
/// `time/(1−r)` after it. Closed forms (Keifer & Chu 1957):
///
/// - Sherman `a/(t+b)^c`: `a·((1−c)·t + b) / (t + b)^(1+c)`;
/// - Talbot `a/(t+b)` (c = 1): `a·b / (t + b)²`;
/// - power law `a·t^(−b)`: `a·(1−b)·t^(−b)` (infinite at the peak).
///
/// A side of zero length (before the peak when r = 0, after it when r = 1) gives 0.
pub fn keifer_chu_intensity_mm_h(
    formula: &IdfFormula,
    peak_ratio: f32,
    time_from_peak_min: f32,
) -> f32 {
    let side = if time_from_peak_min < 0.0 {
        peak_ratio
    } else {
        1.0 - peak_ratio
    };
    if side.is_nan() || side <= 0.0 {
        return 0.0;
    }
    let t = math::abs(time_from_peak_min) / side;
    match *formula {
        IdfFormula::Talbot { a, b } => a * b / ((t + b) * (t + b)),
        IdfFormula::Sherman { a, b, c } => a * ((1.0 - c) * t + b) / math::powf(t + b, 1.0 + c),
        IdfFormula::PowerLaw { a, b } => a * (1.0 - b) * math::powf(t, -b),
    }
}

/// Rank (0 = largest block) of position `q` in the alternating arrangement around peak `p`
/// of `n` steps: right of the peak first, then left, alternately; one side continues alone
/// once the other is full.
fn rank_of(q: usize, p: usize, n: usize) -> usize {
    let left = p;
    let right = n.saturating_sub(1).saturating_sub(p);
    if q > p {
        let m = q.saturating_sub(p);
        if m <= left {
            m.saturating_mul(2).saturating_sub(1)
        } else {
            left.saturating_add(m)
        }
    } else if q < p {
        let m = p.saturating_sub(q);
        if m <= right {
            m.saturating_mul(2)
        } else {
            right.saturating_add(m)
        }
    } else {
        0
    }
}

/// In place: `v[q] ← v[rank_of(q)]` for every q, following each permutation cycle once from
/// its smallest index (no scratch memory; at most O(n²) index steps for n ≤
/// [`MAX_STORM_STEPS`]).
fn permute_by_rank(v: &mut [f32], p: usize, n: usize) {
    for i in 0..n {
        // i leads its cycle when no index in the cycle is smaller.
        let mut k = rank_of(i, p, n);
        let mut leader = true;
        for _ in 0..n {
            if k == i {
                break;
            }
            if k < i {
                leader = false;
                break;
            }
            k = rank_of(k, p, n);
        }
        if !leader {
            continue;
        }
        let tmp = v.get(i).copied().unwrap_or(0.0);
        let mut j = i;
        for _ in 0..n {
            let k = rank_of(j, p, n);
            if k == i {
                if let Some(x) = v.get_mut(j) {
                    *x = tmp;
                }
                break;
            }
            let src = v.get(k).copied().unwrap_or(0.0);
            if let Some(x) = v.get_mut(j) {
                *x = src;
            }
            j = k;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The rank map is a bijection onto 0..n for every peak position (a permutation).
    #[test]
    fn rank_map_is_a_permutation() {
        for n in 1..40 {
            for p in 0..n {
                let mut seen = vec![false; n];
                for q in 0..n {
                    let r = rank_of(q, p, n);
                    assert!(r < n && !seen[r], "n={n} p={p} q={q} r={r}");
                    seen[r] = true;
                }
            }
        }
    }

    /// Chow's arrangement for 5 blocks centred: 5 3 1 2 4 (rank+1 by position).
    #[test]
    fn arrangement_alternates_right_then_left() {
        let mut v = [10.0, 8.0, 6.0, 4.0, 2.0];
        permute_by_rank(&mut v, 2, 5);
        assert_eq!(v, [2.0, 6.0, 10.0, 8.0, 4.0]);
        let mut v = [10.0, 8.0, 6.0, 4.0, 2.0];
        permute_by_rank(&mut v, 0, 5);
        assert_eq!(v, [10.0, 8.0, 6.0, 4.0, 2.0]);
        let mut v = [10.0, 8.0, 6.0, 4.0, 2.0];
        permute_by_rank(&mut v, 4, 5);
        assert_eq!(v, [2.0, 4.0, 6.0, 8.0, 10.0]);
        let mut v = [10.0, 8.0, 6.0, 4.0, 2.0];
        permute_by_rank(&mut v, 1, 5);
        assert_eq!(v, [6.0, 10.0, 8.0, 4.0, 2.0]);
    }

    #[test]
    fn bad_storms_are_rejected() {
        assert!(DesignStorm::new(0.0, 3600, 300).is_err());
        assert!(DesignStorm::new(10.0, 0, 300).is_err());
        assert!(DesignStorm::new(10.0, 3600, 0).is_err());
        assert!(DesignStorm::new(10.0, 300, 600).is_err());
        assert!(matches!(
            DesignStorm::new(10.0, 3600, 700),
            Err(DesignStormError::NotWholeSteps { .. })
        ));
        assert!(matches!(
            DesignStorm::new(10.0, 864_000, 60),
            Err(DesignStormError::TooManySteps { .. })
        ));
        let s = DesignStorm::new(10.0, 3600, 300).unwrap();
        assert!(s.with_peak_ratio(1.1).is_err());
        assert!(s.with_peak_ratio(f32::NAN).is_err());
        assert_eq!(s.steps(), 12);
        assert_eq!(s.peak_step(), 6);
        assert_eq!(s.with_peak_ratio(1.0).unwrap().peak_step(), 11);
    }
}
