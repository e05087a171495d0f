//! Stage–discharge ratings: a fixed-capacity table for one gate opening, and filling a
//! caller's slices.
//!
//! Units: m, m³/s. A [`Rating`] holds `N` evenly spaced stages from `stage_lo_m` to
//! `stage_hi_m` inclusive and the outlet's discharge at each; between points it interpolates
//! linearly in O(1) (the index comes from the even spacing), below the first point it gives
//! the first discharge and above the last the last one — so it is a [`StageDischarge`] that
//! keeps the trait's invariants (never negative, never NaN, non-decreasing).

use crate::flow::StageDischarge;
use crate::hydraulics::{HydraulicsError, Outlet, exceeds, level};
use crate::validate::Invalid;

/// A stage–discharge table of `N` points for one gate opening.
#[derive(Debug, Clone, PartialEq)]
pub struct Rating<const N: usize> {
    stages_m: [f32; N],
    discharges_m3s: [f32; N],
    opening_m: f32,
    step_m: f32,
}

impl<const N: usize> Rating<N> {
    /// The rating of `outlet` at gate `opening_m` on `N ≥ 2` stages evenly spaced over
    /// `[stage_lo_m, stage_hi_m]` (`stage_hi_m > stage_lo_m`).
    pub fn build(
        outlet: &Outlet,
        opening_m: f32,
        stage_lo_m: f32,
        stage_hi_m: f32,
    ) -> Result<Self, HydraulicsError> {
        if N < 2 {
            return Err(HydraulicsError::RatingTooShort { points: N });
        }
        let lo = level("stage_lo_m", stage_lo_m)?;
        let hi = level("stage_hi_m", stage_hi_m)?;
        if !exceeds(hi, lo) {
            return Err(Invalid {
                field: "stage_hi_m",
                value: hi,
                rule: "must be > stage_lo_m",
            }
            .into());
        }
        let span = hi - lo;
        let last = N.saturating_sub(1) as f32;
        let step_m = span / last;
        let mut stages_m = [0.0_f32; N];
        let mut discharges_m3s = [0.0_f32; N];
        for (i, (s, q)) in stages_m
            .iter_mut()
            .zip(discharges_m3s.iter_mut())
            .enumerate()
        {
            let stage = if (i as f32) < last {
                lo + span * (i as f32 / last)
            } else {
                hi
            };
            *s = stage;
            *q = outlet.discharge_m3s(stage, opening_m);
        }
        Ok(Self {
            stages_m,
            discharges_m3s,
            opening_m,
            step_m,
        })
    }

    /// The stages, m, ascending.
    pub fn stages_m(&self) -> &[f32] {
        &self.stages_m
    }

    /// The discharges, m³/s, one per stage.
    pub fn discharges_m3s(&self) -> &[f32] {
        &self.discharges_m3s
    }

    /// The gate opening this rating is for, m.
    pub fn opening_m(&self) -> f32 {
        self.opening_m
    }

    /// Linear interpolation in the table; clamped to the end values outside it; NaN → first.
    pub fn interpolate_m3s(&self, stage_m: f32) -> f32 {
        let (Some(&s0), Some(&q0)) = (self.stages_m.first(), self.discharges_m3s.first()) else {
            return 0.0;
        };
        let x = (stage_m - s0) / self.step_m;
        if !exceeds(x, 0.0) {
            return q0;
        }
        let last = N.saturating_sub(1);
        let i = if x < last as f32 { x as usize } else { last };
        let (Some(&qa), Some(&sa)) = (self.discharges_m3s.get(i), self.stages_m.get(i)) else {
            return q0;
        };
        match self.discharges_m3s.get(i.saturating_add(1)) {
            Some(&qb) => {
                let f = crate::math::clamp((stage_m - sa) / self.step_m, 0.0, 1.0);
                qa + f * (qb - qa)
            }
            None => qa,
        }
    }
}

impl<const N: usize> StageDischarge for Rating<N> {
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        self.interpolate_m3s(stage_m)
    }
}

impl Outlet {
    /// A rating of `N` points at gate `opening_m` over `[stage_lo_m, stage_hi_m]`; see
    /// [`Rating::build`].
    pub fn rating<const N: usize>(
        &self,
        opening_m: f32,
        stage_lo_m: f32,
        stage_hi_m: f32,
    ) -> Result<Rating<N>, HydraulicsError> {
        Rating::build(self, opening_m, stage_lo_m, stage_hi_m)
    }

    /// Fills `discharges_m3s` with the discharge at each of the caller's `stages_m` at gate
    /// `opening_m`; an error if the slices differ in length.
    pub fn fill_rating(
        &self,
        opening_m: f32,
        stages_m: &[f32],
        discharges_m3s: &mut [f32],
    ) -> Result<(), HydraulicsError> {
        if stages_m.len() != discharges_m3s.len() {
            return Err(HydraulicsError::LengthMismatch {
                stages: stages_m.len(),
                discharges: discharges_m3s.len(),
            });
        }
        for (q, &s) in discharges_m3s.iter_mut().zip(stages_m) {
            *q = self.discharge_m3s(s, opening_m);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hydraulics::{CircularOrifice, SluiceGate};

    fn outlet() -> Outlet {
        let o = CircularOrifice::new(0.0, 0.3, 0.6).unwrap();
        let g = SluiceGate::new(0.5, 1.0, 1.0, 0.61, 0.98).unwrap();
        Outlet::new(&[o.into()], Some(g), None).unwrap()
    }

    #[test]
    fn rating_matches_outlet_at_nodes_and_interpolates_between() {
        let o = outlet();
        let r: Rating<11> = o.rating(0.4, 0.0, 2.0).unwrap();
        for (s, q) in r.stages_m().iter().zip(r.discharges_m3s()) {
            assert_eq!(*q, o.discharge_m3s(*s, 0.4));
        }
        assert_eq!(*r.stages_m().last().unwrap(), 2.0);
        let mid = r.interpolate_m3s(1.1);
        let (qa, qb) = (r.discharges_m3s()[5], r.discharges_m3s()[6]);
        assert!((mid - 0.5 * (qa + qb)).abs() < 1e-5 * qb);
        assert_eq!(r.interpolate_m3s(-5.0), r.discharges_m3s()[0]);
        assert_eq!(r.interpolate_m3s(9.0), r.discharges_m3s()[10]);
        assert_eq!(r.interpolate_m3s(f32::NAN), r.discharges_m3s()[0]);
    }

    #[test]
    fn rating_errors() {
        let o = outlet();
        assert_eq!(
            o.rating::<1>(0.0, 0.0, 1.0).unwrap_err(),
            HydraulicsError::RatingTooShort { points: 1 }
        );
        let e = o.rating::<4>(0.0, 1.0, 1.0).unwrap_err();
        assert_eq!(format!("{e}"), "stage_hi_m = 1: must be > stage_lo_m");
        let mut q = [0.0; 3];
        let e = o.fill_rating(0.0, &[0.0, 1.0], &mut q).unwrap_err();
        assert_eq!(
            e,
            HydraulicsError::LengthMismatch {
                stages: 2,
                discharges: 3
            }
        );
        o.fill_rating(0.2, &[0.0, 1.0, 2.0], &mut q).unwrap();
        assert_eq!(q[2], o.discharge_m3s(2.0, 0.2));
    }
}
