//! The storage a pond needs to hold a design storm's runoff back to a permitted release, and
//! the critical rain duration that needs the most.
//!
//! A [`SizingCase`] is an IDF description, a return period, a [`Catchment`] and the permitted
//! release. For each rain duration Tr of a [`DurationGrid`] the inflow is the summed
//! modified-rational hydrograph of rain at `i(Tr, T)` for Tr ([`Catchment::hydrograph`]), whose
//! volume is Σ C·i·A·Tr. Two ways to get the storage from it:
//!
//! ## 1. Volume balance ([`SizingCase::volume_balance`])
//!
//! **Release assumption (documented choice).** The release rises linearly from 0 at the start
//! of rain to the permit Qp at the time the inflow first peaks, then stays at Qp. The storage
//! needed for the duration is the most water ever held under that assumption,
//! `max over t of ∫₀ᵗ (I − R) dt` (never below 0), evaluated exactly: inflow and release are
//! both piecewise linear, so the integral is exact on each piece and the maximum is at a
//! corner or where I − R changes sign from + to −. For one sub-catchment with Tr ≥ Tc and
//! Qp < Qe = C·i·A this is the closed form
//! `V(Tr) = (Qe − Qp)·(Tr − Tc·Qp/(2·Qe))`,
//! reached when the falling limb meets the permit at `Tr + Tc·(1 − Qp/Qe)`. The critical
//! duration is the grid duration with the largest V (ties: the shortest).
//!
//! ## 2. Routing ([`SizingCase::routed`])
//!
//! Each hydrograph is routed through the real pond ([`StageStorage`]) and a release law given
//! as any [`StageDischarge`]: an [`Outlet`](crate::hydraulics::Outlet) with its gate held at
//! one opening (`outlet.at(opening_m)`), or the outlet capped at the permit like a perfect
//! controller, `release = min(permit, capacity)` ([`SizingCase::capped`]). Steps of `dt_s`
//! ([`routing::step`]) are split at every corner of the hydrograph, so the inflow is linear
//! within each step and its volume is exact. The run ends when the inflow ends: after that
//! the storage can only fall. The result is the peak storage, its stage and time, the peak
//! release, and the critical duration (the largest peak storage).
//!
//! ## Which is conservative, and why
//!
//! For one sub-catchment the volume balance is never below the routed storage of a perfect
//! controller with ample capacity (release = Qp whenever water is stored, the inflow itself
//! before that). Proof: on the rising limb I = Qe·t/Tc ≥ Qp·t/Tc = R, so the ideal release
//! min(I, Qp) ≥ R at every time, and with more released at every time less is held at every
//! time. The margin is `(Qe − Qp)·Tc·Qp/(2·Qe)` (the ideal holds `(Qe − Qp)(Tr − Tc·Qp/Qe)`).
//! The routed storage can exceed the volume balance when the real release lags further than
//! the assumed ramp: a passive outlet, or a capped outlet whose capacity at low stage is below
//! the permit, releases little until the pond has filled, so more is held. The volume balance
//! is therefore a screening estimate that is safe only for an outlet able to reach the
//! permit early; size the pond from the routed result. (The tests verify both statements.)
//!
//! ## Units and invariants
//!
//! Volumes m³, flows m³/s, stages m, times whole seconds (`u32`), IDF durations asked in
//! minutes. A [`SizingCase`] holds a return period > 0 and a permit ≥ 0, both finite; a
//! [`DurationGrid`] at most [`MAX_GRID_DURATIONS`] durations in
//! 1..=[`MAX_RAIN_DURATION_S`]; one routed duration at most [`MAX_ROUTED_STEPS`] steps.
//! Results are finite and ≥ 0 for a validated case; nothing panics.

use core::fmt;

use heapless::Vec;

use crate::flow::StageDischarge;
use crate::math;
use crate::rain::Idf;
use crate::routing::{self, Inflow};
use crate::runoff::hydrograph::{MAX_RAIN_DURATION_S, MAX_SUB_CATCHMENTS};
use crate::runoff::{Catchment, CatchmentHydrograph, RunoffError};
use crate::storage::StageStorage;
use crate::validate::{self, Invalid};

/// Most durations in one [`DurationGrid`].
pub const MAX_GRID_DURATIONS: usize = 4096;

/// Most routing steps for one duration.
pub const MAX_ROUTED_STEPS: u32 = 500_000;

/// Corners of a summed hydrograph: start, rise end, fall start, end per part, plus the
/// release ramp's end and the run's start.
const MAX_CORNERS: usize = MAX_SUB_CATCHMENTS * 4 + 2;

/// Why a sizing could not be done.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SizingError {
    /// One number broke its rule.
    Invalid(Invalid),
    /// The hydrograph of a duration could not be built.
    Runoff(RunoffError),
    /// A grid of more than [`MAX_GRID_DURATIONS`] durations.
    TooManyDurations {
        /// Durations the grid would hold.
        count: usize,
        /// The most allowed.
        max: usize,
    },
    /// Routing one duration would take more than [`MAX_ROUTED_STEPS`] steps.
    TooManySteps {
        /// Steps needed.
        steps: u32,
        /// The most allowed.
        max: u32,
    },
}

impl From<Invalid> for SizingError {
    fn from(e: Invalid) -> Self {
        SizingError::Invalid(e)
    }
}

impl From<RunoffError> for SizingError {
    fn from(e: RunoffError) -> Self {
        SizingError::Runoff(e)
    }
}

impl fmt::Display for SizingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Invalid(e) => write!(f, "{e}"),
            Self::Runoff(e) => write!(f, "{e}"),
            Self::TooManyDurations { count, max } => {
                write!(f, "duration grid of {count} durations: at most {max}")
            }
            Self::TooManySteps { steps, max } => {
                write!(f, "routing one duration needs {steps} steps: at most {max}")
            }
        }
    }
}

impl core::error::Error for SizingError {}

/// Rain durations to search: `first_s, first_s + step_s, …` up to `last_s` inclusive.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DurationGrid {
    first_s: u32,
    last_s: u32,
    step_s: u32,
}

impl DurationGrid {
    /// Durations from `first_s` to `last_s` (`1 ≤ first_s ≤ last_s ≤`
    /// [`MAX_RAIN_DURATION_S`]) every `step_s` (≥ 1), at most [`MAX_GRID_DURATIONS`].
    pub fn new(first_s: u32, last_s: u32, step_s: u32) -> Result<Self, SizingError> {
        let max = MAX_RAIN_DURATION_S as f32;
        validate::within(
            "first_s",
            first_s as f32,
            1.0,
            max,
            "must be in [1, 864000] s",
        )?;
        validate::within(
            "last_s",
            last_s as f32,
            first_s as f32,
            max,
            "must be in [first_s, 864000] s",
        )?;
        validate::within(
            "step_s",
            step_s as f32,
            1.0,
            max,
            "must be in [1, 864000] s",
        )?;
        let grid = Self {
            first_s,
            last_s,
            step_s,
        };
        let count = grid.len();
        if count > MAX_GRID_DURATIONS {
            return Err(SizingError::TooManyDurations {
                count,
                max: MAX_GRID_DURATIONS,
            });
        }
        Ok(grid)
    }

    /// Number of durations.
    pub fn len(&self) -> usize {
        let span = self.last_s.saturating_sub(self.first_s);
        span.checked_div(self.step_s).unwrap_or(0).saturating_add(1) as usize
    }

    /// Never empty (a grid holds at least `first_s`).
    pub fn is_empty(&self) -> bool {
        false
    }

    /// The durations, s, in increasing order.
    pub fn durations_s(&self) -> impl Iterator<Item = u32> + '_ {
        (0..self.len()).map(|k| {
            self.first_s
                .saturating_add(self.step_s.saturating_mul(k as u32))
        })
    }
}

/// The volume balance for one rain duration.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BalancePoint {
    /// Rain duration Tr, s.
    pub duration_s: u32,
    /// IDF intensity for Tr, mm/h.
    pub intensity_mm_h: f32,
    /// Peak of the summed inflow, m³/s.
    pub peak_inflow_m3s: f32,
    /// Runoff volume Σ C·i·A·Tr, m³.
    pub inflow_volume_m3: f32,
    /// Storage needed under the release assumption, m³ (≥ 0).
    pub storage_m3: f32,
    /// When that storage is reached, s after the start of rain.
    pub time_s: f32,
    /// Volume released (under the assumption) by then, m³.
    pub released_m3: f32,
}

/// One duration routed through the pond.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RoutedPoint {
    /// Rain duration Tr, s.
    pub duration_s: u32,
    /// Peak storage, m³ (from the pond floor, start storage included).
    pub peak_storage_m3: f32,
    /// Peak storage above the start storage, m³: the detention volume the storm needs.
    pub detention_m3: f32,
    /// Stage at peak storage, m.
    pub peak_stage_m: f32,
    /// When the peak storage is reached, s after the start of rain (a step end).
    pub peak_time_s: u32,
    /// Largest release at any step end, m³/s.
    pub peak_release_m3s: f32,
    /// Runoff volume, m³.
    pub inflow_volume_m3: f32,
    /// The peak stage is above the top of the stage–storage relation.
    pub overtops: bool,
}

/// A sizing problem: IDF, return period, catchment and permitted release.
#[derive(Debug, Clone, Copy)]
pub struct SizingCase<'a, I: Idf> {
    idf: &'a I,
    return_period_years: f32,
    catchment: &'a Catchment,
    permit_m3s: f32,
}

impl<'a, I: Idf> SizingCase<'a, I> {
    /// A case; `return_period_years` finite and > 0, `permit_m3s` finite and ≥ 0.
    pub fn new(
        idf: &'a I,
        return_period_years: f32,
        catchment: &'a Catchment,
        permit_m3s: f32,
    ) -> Result<Self, SizingError> {
        validate::positive("return_period_years", return_period_years)?;
        validate::non_negative("permit_m3s", permit_m3s)?;
        Ok(Self {
            idf,
            return_period_years,
            catchment,
            permit_m3s,
        })
    }

    /// The permitted release, m³/s.
    pub fn permit_m3s(&self) -> f32 {
        self.permit_m3s
    }

    /// IDF intensity for a rain of `duration_s`, mm/h (finite and ≥ 0).
    pub fn intensity_mm_h(&self, duration_s: u32) -> f32 {
        let i = self
            .idf
            .intensity_mm_h(duration_s as f32 / 60.0, self.return_period_years);
        if i.is_finite() && i > 0.0 { i } else { 0.0 }
    }

    /// The summed modified-rational hydrograph of the design rain of `duration_s`
    /// (1..=[`MAX_RAIN_DURATION_S`]).
    pub fn hydrograph(&self, duration_s: u32) -> Result<CatchmentHydrograph, SizingError> {
        Ok(self
            .catchment
            .hydrograph(self.intensity_mm_h(duration_s), duration_s)?)
    }

    /// `outlet` capped at the permit, `min(permit, capacity)`: the release of a perfect
    /// controller that never exceeds the permit. NaN or negative capacity reads as 0.
    pub fn capped<'o, O: StageDischarge>(&self, outlet: &'o O) -> impl Fn(f32) -> f32 + 'o {
        let permit = self.permit_m3s;
        move |stage_m: f32| math::clamp(outlet.discharge_m3s(stage_m), 0.0, permit)
    }

    /// The volume balance for one rain duration (see the module doc).
    pub fn balance_at(&self, duration_s: u32) -> Result<BalancePoint, SizingError> {
        let h = self.hydrograph(duration_s)?;
        let (peak_inflow_m3s, t_peak_s) = h.peak();
        let qp = self.permit_m3s;
        let ramp_s = t_peak_s as f32;
        let release = |t: f32| {
            if ramp_s > 0.0 && t < ramp_s {
                qp * (t / ramp_s)
            } else {
                qp
            }
        };
        let mut corners = corners(&h);
        let _ = corners.push(t_peak_s);
        corners.sort_unstable();
        let mut best = (0.0_f32, 0.0_f32, 0.0_f32); // (storage, time, released)
        let (mut s, mut out) = (0.0_f32, 0.0_f32);
        let mut prev: Option<u32> = None;
        for &c in corners.iter() {
            let Some(t0) = prev else {
                prev = Some(c);
                continue;
            };
            if c <= t0 {
                continue;
            }
            prev = Some(c);
            let (a, b) = (t0 as f32, c as f32);
            let (i0, i1) = (h.inflow_m3s(t0), h.inflow_m3s(c));
            let (r0, r1) = (release(a), release(b));
            let (e0, e1) = (i0 - r0, i1 - r1);
            // A sign change + → − inside the piece is a maximum of the held volume.
            if e0 > 0.0 && e1 < 0.0 {
                let f = e0 / (e0 - e1);
                let tx = a + f * (b - a);
                let sx = s + 0.5 * e0 * (tx - a);
                let ox = out + 0.5 * (r0 + release(tx)) * (tx - a);
                if sx > best.0 {
                    best = (sx, tx, ox);
                }
            }
            s += 0.5 * (e0 + e1) * (b - a);
            out += 0.5 * (r0 + r1) * (b - a);
            if s > best.0 {
                best = (s, b, out);
            }
        }
        Ok(BalancePoint {
            duration_s,
            intensity_mm_h: self.intensity_mm_h(duration_s),
            peak_inflow_m3s,
            inflow_volume_m3: h.volume_m3(),
            storage_m3: best.0,
            time_s: best.1,
            released_m3: best.2,
        })
    }

    /// The volume balance over every duration of `grid`: the point of the critical duration
    /// (largest storage; the shortest of equals).
    pub fn volume_balance(&self, grid: &DurationGrid) -> Result<BalancePoint, SizingError> {
        let mut best: Option<BalancePoint> = None;
        for d in grid.durations_s() {
            let p = self.balance_at(d)?;
            if best.is_none_or(|b| p.storage_m3 > b.storage_m3) {
                best = Some(p);
            }
        }
        // A grid is never empty; the fallback is the first duration's own point.
        match best {
            Some(b) => Ok(b),
            None => self.balance_at(grid.first_s),
        }
    }

    /// Routes the design rain of `duration_s` through `pond` and `release` from
    /// `start_storage_m3` (finite, ≥ 0) in steps of at most `dt_s` (≥ 1) split at the
    /// hydrograph's corners (see the module doc).
    pub fn route_at(
        &self,
        pond: &StageStorage,
        release: &impl StageDischarge,
        start_storage_m3: f32,
        dt_s: u32,
        duration_s: u32,
    ) -> Result<RoutedPoint, SizingError> {
        let s0 = validate::non_negative("start_storage_m3", start_storage_m3)?;
        validate::within(
            "dt_s",
            dt_s as f32,
            1.0,
            MAX_RAIN_DURATION_S as f32,
            "must be in [1, 864000] s",
        )?;
        let h = self.hydrograph(duration_s)?;
        let mut corners = corners(&h);
        corners.sort_unstable();
        let end_s = h.end_s();
        let steps = end_s.div_ceil(dt_s).saturating_add(corners.len() as u32);
        if steps > MAX_ROUTED_STEPS {
            return Err(SizingError::TooManySteps {
                steps,
                max: MAX_ROUTED_STEPS,
            });
        }
        let stage0 = pond.stage_m(s0);
        let mut best = RoutedPoint {
            duration_s,
            peak_storage_m3: s0,
            detention_m3: 0.0,
            peak_stage_m: stage0,
            peak_time_s: 0,
            peak_release_m3s: {
                let q = release.discharge_m3s(stage0);
                if q > 0.0 { q } else { 0.0 }
            },
            inflow_volume_m3: h.volume_m3(),
            overtops: stage0 > pond.top_m(),
        };
        let (mut t, mut s) = (0_u32, s0);
        for _ in 0..steps {
            if t >= end_s {
                break;
            }
            let mut t1 = t.saturating_add(dt_s).min(end_s);
            if let Some(&c) = corners.iter().find(|&&c| c > t) {
                t1 = t1.min(c);
            }
            let inflow = Inflow::ramp(h.inflow_m3s(t), h.inflow_m3s(t1));
            let r = routing::step(pond, release, s, inflow, t1.saturating_sub(t));
            s = r.storage_m3;
            t = t1;
            if r.outflow_m3s > best.peak_release_m3s {
                best.peak_release_m3s = r.outflow_m3s;
            }
            if s > best.peak_storage_m3 {
                best.peak_storage_m3 = s;
                best.peak_stage_m = r.stage_m;
                best.peak_time_s = t;
            }
        }
        best.detention_m3 = best.peak_storage_m3 - s0;
        best.overtops = best.peak_stage_m > pond.top_m();
        Ok(best)
    }

    /// Routes every duration of `grid` (see [`Self::route_at`]) and returns the critical one
    /// (largest peak storage; the shortest of equals).
    pub fn routed(
        &self,
        pond: &StageStorage,
        release: &impl StageDischarge,
        start_storage_m3: f32,
        dt_s: u32,
        grid: &DurationGrid,
    ) -> Result<RoutedPoint, SizingError> {
        let mut best: Option<RoutedPoint> = None;
        for d in grid.durations_s() {
            let p = self.route_at(pond, release, start_storage_m3, dt_s, d)?;
            if best.is_none_or(|b| p.peak_storage_m3 > b.peak_storage_m3) {
                best = Some(p);
            }
        }
        match best {
            Some(b) => Ok(b),
            None => self.route_at(pond, release, start_storage_m3, dt_s, grid.first_s),
        }
    }
}

/// Every corner of the summed hydrograph (where some part's rise, plateau or fall starts or
/// ends), unsorted.
fn corners(h: &CatchmentHydrograph) -> Vec<u32, MAX_CORNERS> {
    let mut v: Vec<u32, MAX_CORNERS> = Vec::new();
    let _ = v.push(0);
    for (p, lag_s) in h.parts() {
        for c in [0, p.time_to_peak_s(), p.peak_end_s(), p.end_s()] {
            // Capacity is 4 per part plus 2, so no push can fail.
            let _ = v.push(lag_s.saturating_add(c));
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rain::{IdfCurves, IdfFormula};
    use crate::runoff::{AreaHa, RunoffCoefficient, SubCatchment, TimeOfConcentration};

    fn case_parts() -> (IdfCurves, Catchment) {
        let idf = IdfCurves::new(
            &[(10.0, IdfFormula::Talbot { a: 4000.0, b: 20.0 })],
            5.0,
            1440.0,
        )
        .unwrap();
        let sub = SubCatchment::new(
            RunoffCoefficient::new(0.5).unwrap(),
            AreaHa::new(3.6).unwrap(),
            TimeOfConcentration::from_s(600).unwrap(),
            0,
        )
        .unwrap();
        (idf, Catchment::new(&[sub]).unwrap())
    }

    /// With Tr = Tc = 600 s, i = 4000/30 mm/h, Qe = 0.5·i·3.6/360 = 0.6667 m³/s, Qp = 0.2:
    /// V = (Qe − Qp)(Tr − Tc·Qp/(2Qe)) (the module's closed form, derived by hand there).
    #[test]
    fn triangle_balance_matches_hand_value() {
        let (idf, c) = case_parts();
        let case = SizingCase::new(&idf, 10.0, &c, 0.2).unwrap();
        let p = case.balance_at(600).unwrap();
        let qe = 0.5 * (4000.0 / 30.0) * 3.6 / 360.0;
        let v = (qe - 0.2) * (600.0 - 600.0 * 0.2 / (2.0 * qe));
        assert!((p.storage_m3 - v).abs() < 1e-3 * v, "{p:?} vs {v}");
        assert!((p.time_s - (1200.0 - 600.0 * 0.2 / qe)).abs() < 0.01);
    }

    #[test]
    fn bad_cases_are_rejected() {
        let (idf, c) = case_parts();
        assert!(SizingCase::new(&idf, 0.0, &c, 0.2).is_err());
        assert!(SizingCase::new(&idf, 10.0, &c, -0.1).is_err());
        assert!(SizingCase::new(&idf, 10.0, &c, f32::NAN).is_err());
        assert!(DurationGrid::new(0, 10, 1).is_err());
        assert!(DurationGrid::new(10, 5, 1).is_err());
        assert!(DurationGrid::new(10, 20, 0).is_err());
        assert!(matches!(
            DurationGrid::new(1, 100_000, 1),
            Err(SizingError::TooManyDurations { .. })
        ));
        let g = DurationGrid::new(300, 1000, 300).unwrap();
        assert_eq!(
            g.durations_s().collect::<std::vec::Vec<_>>(),
            [300, 600, 900]
        );
    }
}
