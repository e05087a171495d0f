//! Overflow riser: a vertical pipe or box whose open top is the crest.
//!
//! Units: m, m², m³/s. `h` is the stage above the crest, `t` the tailwater above it.
//!
//! At low head the crest acts as a sharp-crested weir along its whole perimeter `P`,
//! `Q_w = Cw·(2/3)·√(2g)·P·h^1.5`; at high head the throat acts as an orifice of area `A`
//! with the head on the crest, `Q_o = Co·A·√(2g·h)`. The riser passes the controlling, i.e.
//! smaller, of the two: `Q = min(Q_w, Q_o)` — the minimum of two continuous non-decreasing
//! laws is itself continuous and non-decreasing, so the weir ↔ orifice switch has no jump.
//! With tailwater above the crest the weir is reduced by Villemonte (n = 1.5) and the
//! orifice works on the head difference `h − t`; both are continuous at `t = 0`.
//! The barrel below the riser is not modelled: add it as a separate orifice if it controls.

use crate::hydraulics::{
    HydraulicsError, head_above, length, level, sqrt_2g, tail_head, villemonte,
};
use crate::math;
use crate::validate;

/// Shape of a riser's crest.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RiserCrest {
    /// A round pipe of inside diameter `diameter_m`.
    Circular {
        /// Inside diameter, m.
        diameter_m: f32,
    },
    /// A rectangular box of inside plan dimensions `length_m` × `width_m`.
    Rectangular {
        /// Inside length, m.
        length_m: f32,
        /// Inside width, m.
        width_m: f32,
    },
}

/// An overflow riser (weir on the perimeter, orifice on the throat, the smaller controls).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Riser {
    crest_m: f32,
    crest: RiserCrest,
    weir_cd: f32,
    orifice_cd: f32,
    /// `Cw·(2/3)·√(2g)·P`.
    k_weir: f32,
    /// `Co·A·√(2g)`.
    k_orifice: f32,
}

impl Riser {
    /// A round riser of inside `diameter_m` in (0, 1000] with its rim at `crest_m`; weir
    /// coefficient `weir_cd` and orifice coefficient `orifice_cd`, each in (0, 1].
    pub fn circular(
        crest_m: f32,
        diameter_m: f32,
        weir_cd: f32,
        orifice_cd: f32,
    ) -> Result<Self, HydraulicsError> {
        let diameter_m = length("diameter_m", diameter_m)?;
        Self::build(
            crest_m,
            RiserCrest::Circular { diameter_m },
            weir_cd,
            orifice_cd,
        )
    }

    /// A box riser `length_m` × `width_m` (each in (0, 1000]) with its rim at `crest_m`.
    pub fn rectangular(
        crest_m: f32,
        length_m: f32,
        width_m: f32,
        weir_cd: f32,
        orifice_cd: f32,
    ) -> Result<Self, HydraulicsError> {
        let length_m = length("length_m", length_m)?;
        let width_m = length("width_m", width_m)?;
        Self::build(
            crest_m,
            RiserCrest::Rectangular { length_m, width_m },
            weir_cd,
            orifice_cd,
        )
    }

    fn build(
        crest_m: f32,
        crest: RiserCrest,
        weir_cd: f32,
        orifice_cd: f32,
    ) -> Result<Self, HydraulicsError> {
        let crest_m = level("crest_m", crest_m)?;
        let weir_cd = validate::coefficient("weir_cd", weir_cd)?;
        let orifice_cd = validate::coefficient("orifice_cd", orifice_cd)?;
        let (perimeter_m, area_m2) = match crest {
            RiserCrest::Circular { diameter_m } => (
                core::f32::consts::PI * diameter_m,
                core::f32::consts::FRAC_PI_4 * diameter_m * diameter_m,
            ),
            RiserCrest::Rectangular { length_m, width_m } => {
                (2.0 * (length_m + width_m), length_m * width_m)
            }
        };
        let k_weir = weir_cd * (2.0 / 3.0) * sqrt_2g() * perimeter_m;
        let k_orifice = orifice_cd * area_m2 * sqrt_2g();
        Ok(Self {
            crest_m,
            crest,
            weir_cd,
            orifice_cd,
            k_weir,
            k_orifice,
        })
    }

    /// Crest (rim) level, m.
    pub fn crest_m(&self) -> f32 {
        self.crest_m
    }

    /// Crest shape.
    pub fn crest(&self) -> RiserCrest {
        self.crest
    }

    /// Weir coefficient on the perimeter.
    pub fn weir_cd(&self) -> f32 {
        self.weir_cd
    }

    /// Orifice coefficient on the throat.
    pub fn orifice_cd(&self) -> f32 {
        self.orifice_cd
    }

    /// Head above the crest (m) where weir and orifice control give the same free discharge:
    /// `k_o/k_w` from `k_w·h^1.5 = k_o·h^0.5` (for a round riser with equal coefficients,
    /// `3D/8`).
    pub fn transition_head_m(&self) -> f32 {
        self.k_orifice / self.k_weir
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.crest_m);
        if h <= 0.0 {
            return 0.0;
        }
        let t = tail_head(tailwater_m, self.crest_m);
        let q_weir = self.k_weir * math::pow1_5(h) * villemonte(h, t, 1.5);
        let dh = h - t;
        let q_orifice = if dh > 0.0 {
            self.k_orifice * math::sqrt(dh)
        } else {
            0.0
        };
        if q_weir < q_orifice {
            q_weir
        } else {
            q_orifice
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weir_controls_low_orifice_controls_high() {
        let r = Riser::circular(2.0, 0.9, 0.6, 0.6).unwrap();
        let h0 = r.transition_head_m();
        let lo = r.discharge_m3s(2.0 + 0.5 * h0, None);
        let hi = r.discharge_m3s(2.0 + 2.0 * h0, None);
        let k_w = 0.6 * (2.0 / 3.0) * (2.0 * 9.80665_f32).sqrt() * core::f32::consts::PI * 0.9;
        assert!((lo / (k_w * (0.5 * h0).powf(1.5)) - 1.0).abs() < 1e-5);
        let k_o = 0.6 * core::f32::consts::FRAC_PI_4 * 0.81 * (2.0 * 9.80665_f32).sqrt();
        assert!((hi / (k_o * (2.0 * h0).sqrt()) - 1.0).abs() < 1e-5);
    }

    #[test]
    fn validation_errors_name_field_and_value() {
        let e = Riser::circular(0.0, -0.9, 0.6, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("diameter_m = -0.9"));
        let e = Riser::rectangular(0.0, 1.0, 0.0, 0.6, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("width_m = 0"));
        let e = Riser::rectangular(0.0, f32::NAN, 1.0, 0.6, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("length_m = NaN"));
        let e = Riser::circular(0.0, 0.9, 0.0, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("weir_cd = 0"));
        let e = Riser::circular(0.0, 0.9, 0.6, 2.0).unwrap_err();
        assert!(format!("{e}").starts_with("orifice_cd = 2"));
    }
}
