//! Sluice (slide) gate: underflow at any opening, free or submerged, and free-surface flow
//! over the sill once the gate no longer touches the water.
//!
//! Units: m, m³/s. `h` is the stage above the sill, `a` the opening (clamped to
//! `[0, max_opening_m]`, NaN → 0), `t` the tailwater above the sill, `b` the gate width.
//!
//! ## The law
//!
//! The jet leaves the gate at the vena contracta depth `j = Cc·a`. Energy from the pond (no
//! approach velocity) to the vena contracta gives `Q = Cv·b·j·√(2g·(h − j))` (Henderson,
//! Open Channel Flow, 1966, §6.4, written for a reservoir — from memory). Relative to the
//! conventional `Q = Cd·b·a·√(2gh)` that is an opening/head-dependent coefficient
//! `Cd = Cv·Cc·√(1 − Cc·a/h)` ([`SluiceGate::underflow_cd`]).
//!
//! `j·√(h − j)` is largest at `j = 2h/3`, where it equals critical flow on the sill,
//! `b·√g·(2h/3)^1.5`: that is where the gate stops controlling. So the depth used is
//! `j = min(Cc·a, y_free)`, with `y_free = max(2h/3, t)` the depth on the sill without a gate
//! (critical, or the tailwater when that drowns the sill), and
//!
//! `Q = Cv·b·j·√(2g·(h − max(j, t)))`.
//!
//! - free underflow (`t ≤ Cc·a < 2h/3`): the energy law above;
//! - submerged underflow (`t > Cc·a`): `Cv·b·Cc·a·√(2g(h − t))`, the drowned-orifice form;
//! - gate clear (`Cc·a ≥ y_free`, i.e. `a ≳ 1.09·h` for Cc = 0.61): free-surface flow over the
//!   sill, critical `Cv·b·√g·(2h/3)^1.5` or drowned `Cv·b·t·√(2g(h − t))` — the broad-crested
//!   law of [`crate::hydraulics::BroadCrestedWeir`] with `Cd = Cv`.
//!
//! Continuity: `j` and `max(j, t)` are continuous in `h`, `a` and `t`, so `Q` is. Monotone: `Q`
//! is non-decreasing in `j` while `j ≤ 2h/3` or `j ≤ t`, which the `min` guarantees; it is
//! non-increasing in `t` (the drowned laws decrease beyond `2h/3`), and non-decreasing in `h`.
//! Opening 0 gives 0.

use crate::hydraulics::{HydraulicsError, exceeds, head_above, length, level, tail_head};
use crate::validate;
use crate::{G_M_S2, math};

/// Contraction coefficient of a sharp-edged vertical gate lip (≈ 0.61 — from memory, the
/// value widely tabulated for small openings).
pub const DEFAULT_CONTRACTION_CC: f32 = 0.61;

/// A motorised sluice/slide gate over a sill.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SluiceGate {
    sill_m: f32,
    width_m: f32,
    max_opening_m: f32,
    cc: f32,
    cv: f32,
}

impl SluiceGate {
    /// A gate of `width_m` over a sill at `sill_m`, travelling up to `max_opening_m`
    /// (each length in (0, 1000]); contraction coefficient `cc` and velocity (loss)
    /// coefficient `cv`, each in (0, 1] (e.g. [`DEFAULT_CONTRACTION_CC`] and 0.98).
    pub fn new(
        sill_m: f32,
        width_m: f32,
        max_opening_m: f32,
        cc: f32,
        cv: f32,
    ) -> Result<Self, HydraulicsError> {
        let sill_m = level("sill_m", sill_m)?;
        let width_m = length("width_m", width_m)?;
        let max_opening_m = length("max_opening_m", max_opening_m)?;
        let cc = validate::coefficient("cc", cc)?;
        let cv = validate::coefficient("cv", cv)?;
        Ok(Self {
            sill_m,
            width_m,
            max_opening_m,
            cc,
            cv,
        })
    }

    /// Sill level, m.
    pub fn sill_m(&self) -> f32 {
        self.sill_m
    }

    /// Gate width, m.
    pub fn width_m(&self) -> f32 {
        self.width_m
    }

    /// Largest opening, m.
    pub fn max_opening_m(&self) -> f32 {
        self.max_opening_m
    }

    /// Contraction coefficient.
    pub fn cc(&self) -> f32 {
        self.cc
    }

    /// Velocity coefficient.
    pub fn cv(&self) -> f32 {
        self.cv
    }

    /// `opening_m` clamped to `[0, max_opening_m]` (NaN → 0).
    #[inline]
    pub fn clamp_opening_m(&self, opening_m: f32) -> f32 {
        math::clamp(opening_m, 0.0, self.max_opening_m)
    }

    /// The conventional free-underflow coefficient `Cd` in `Q = Cd·b·a·√(2gh)`:
    /// `Cv·Cc·√(1 − Cc·a/h)` while the gate controls (see the module doc); 0 without head.
    pub fn underflow_cd(&self, head_m: f32, opening_m: f32) -> f32 {
        let a = self.clamp_opening_m(opening_m);
        if !exceeds(head_m, 0.0) {
            return 0.0;
        }
        let r = 1.0 - self.cc * a / head_m;
        if r > 0.0 {
            self.cv * self.cc * math::sqrt(r)
        } else {
            0.0
        }
    }

    /// Opening (m) above which the gate no longer controls free flow at `stage_m`:
    /// `Cc·a = 2h/3`.
    pub fn clear_opening_m(&self, stage_m: f32) -> f32 {
        let h = head_above(stage_m, self.sill_m);
        (2.0 / 3.0) * h / self.cc
    }

    /// Discharge (m³/s) at `stage_m`, gate `opening_m` (clamped) and optional `tailwater_m`.
    pub fn discharge_m3s(&self, stage_m: f32, opening_m: f32, tailwater_m: Option<f32>) -> f32 {
        let a = self.clamp_opening_m(opening_m);
        if !exceeds(a, 0.0) {
            return 0.0;
        }
        self.at_stage(stage_m, tailwater_m).discharge_within_m3s(a)
    }

    /// The gate at one stage and tailwater, for the discharge at many openings: the parts of
    /// [`Self::discharge_m3s`] that do not depend on the opening are worked out once (what
    /// the opening inverse's bisection saves on every halving).
    pub(crate) fn at_stage(&self, stage_m: f32, tailwater_m: Option<f32>) -> GateAtStage {
        let h = head_above(stage_m, self.sill_m);
        let t = tail_head(tailwater_m, self.sill_m);
        let yc = (2.0 / 3.0) * h;
        GateAtStage {
            h,
            t,
            y_free: if t > yc { t } else { yc },
            cc: self.cc,
            cv_width: self.cv * self.width_m,
        }
    }
}

/// A [`SluiceGate`] at one stage and tailwater ([`SluiceGate::at_stage`]).
#[derive(Debug, Clone, Copy)]
pub(crate) struct GateAtStage {
    /// Head above the sill, m.
    h: f32,
    /// Tailwater head above the sill, m.
    t: f32,
    /// Depth below the gate in free flow (critical depth, or the tailwater when higher), m.
    y_free: f32,
    cc: f32,
    /// `cv·width`, m (the product [`SluiceGate::discharge_m3s`] forms first).
    cv_width: f32,
}

impl GateAtStage {
    /// Discharge (m³/s) at an opening already within `(0, max_opening_m]`: what
    /// [`SluiceGate::discharge_m3s`] gives there, bit for bit, without its clamp.
    #[inline]
    pub(crate) fn discharge_within_m3s(&self, opening_m: f32) -> f32 {
        if !exceeds(self.h, 0.0) {
            return 0.0;
        }
        let jet = self.cc * opening_m;
        let j = if jet < self.y_free { jet } else { self.y_free };
        let down = if j > self.t { j } else { self.t };
        let dh = self.h - down;
        if dh > 0.0 {
            self.cv_width * j * math::sqrt(2.0 * G_M_S2 * dh)
        } else {
            0.0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn closed_gate_passes_nothing_and_opening_is_clamped() {
        let g = SluiceGate::new(0.0, 1.0, 0.8, 0.61, 0.98).unwrap();
        assert_eq!(g.discharge_m3s(2.0, 0.0, None), 0.0);
        assert_eq!(g.discharge_m3s(2.0, -1.0, None), 0.0);
        assert_eq!(g.discharge_m3s(2.0, f32::NAN, None), 0.0);
        assert_eq!(
            g.discharge_m3s(2.0, 5.0, None),
            g.discharge_m3s(2.0, 0.8, None)
        );
    }

    /// Gate clear of the water: critical flow over the sill, Cv·b·√g·(2h/3)^1.5 (source:
    /// critical-depth theory).
    #[test]
    fn clear_gate_gives_critical_flow_over_the_sill() {
        let g = SluiceGate::new(0.0, 2.0, 3.0, 0.61, 1.0).unwrap();
        let q = g.discharge_m3s(1.0, 3.0, None) as f64;
        let want = 2.0 * 9.80665_f64.sqrt() * (2.0_f64 / 3.0).powf(1.5);
        assert!((q / want - 1.0).abs() < 1e-6);
    }

    #[test]
    fn validation_errors_name_field_and_value() {
        let e = SluiceGate::new(0.0, -1.0, 1.0, 0.61, 0.98).unwrap_err();
        assert!(format!("{e}").starts_with("width_m = -1"));
        let e = SluiceGate::new(0.0, 1.0, 0.0, 0.61, 0.98).unwrap_err();
        assert!(format!("{e}").starts_with("max_opening_m = 0"));
        let e = SluiceGate::new(0.0, 1.0, 1.0, 1.61, 0.98).unwrap_err();
        assert!(format!("{e}").starts_with("cc = 1.61"));
        let e = SluiceGate::new(0.0, 1.0, 1.0, 0.61, 0.0).unwrap_err();
        assert!(format!("{e}").starts_with("cv = 0"));
        let e = SluiceGate::new(f32::NEG_INFINITY, 1.0, 1.0, 0.61, 0.9).unwrap_err();
        assert!(format!("{e}").starts_with("sill_m = -inf"));
    }
}
