//! Sharp-crested rectangular and V-notch weirs, and the broad-crested weir.
//!
//! Units: m, m³/s, degrees for the notch angle. `h` is the stage above the crest (the notch
//! vertex for a V-notch), `t` the tailwater above it.
//!
//! - Rectangular sharp-crested: `Q = Cd·(2/3)·√(2g)·L·h^1.5` with the Francis end-contraction
//!   rule `L = b − 0.1·n·h` for `n` = 0, 1 or 2 contractions (Francis, Lowell Hydraulic
//!   Experiments, 1883; USBR Water Measurement Manual ch. 7 gives it as
//!   `Q = 3.33·(L − 0.2H)·H^1.5` in ft-units). Francis' rule makes `L·h^1.5` decrease once
//!   `h > 6b/n`, far outside its range (h < b/3). To keep the law monotone, the head used in
//!   the contraction term is `min(h, 3b/n)`: below the cap `d/dh[(b − 0.1nh)·h^1.5]` is still
//!   positive, above it `L` is frozen and `h^1.5` grows, so the law is continuous and strictly
//!   increasing for every head.
//! - V-notch: `Q = Cd·(8/15)·√(2g)·tan(θ/2)·h^2.5` (the Kindsvater–Shen form without head
//!   correction; USBR Water Measurement Manual ch. 7, eq. 7-3), θ in [10°, 170°].
//! - Sharp-crested submergence (tailwater above the crest): Villemonte,
//!   `Q = Q_free·(1 − (t/h)^n)^0.385` with `n` = 1.5 or 2.5. Continuous at `t = 0`.
//! - Broad-crested: critical depth on the crest. Free flow `Q = Cd·b·√g·(2h/3)^1.5`
//!   (critical depth `2h/3` of the energy head `h`, approach velocity neglected as in a pond).
//!   Drowned when `t > 2h/3`: `Q = Cd·b·t·√(2g·(h − t))`, the flow at depth `t` on the crest
//!   with the velocity of the head drop. At `t = 2h/3` both give the same value, and the
//!   drowned law decreases in `t` beyond it (its maximum over `t` is exactly at `2h/3`), so
//!   the transition is continuous and monotone.

use crate::hydraulics::{
    HydraulicsError, exceeds, head_above, length, level, sqrt_2g, tail_head, villemonte,
};
use crate::validate::{self, Invalid};
use crate::{G_M_S2, math};

/// A sharp-crested rectangular weir, suppressed (0 end contractions) or contracted (1 or 2).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RectangularWeir {
    crest_m: f32,
    width_m: f32,
    cd: f32,
    end_contractions: u8,
    /// `Cd·(2/3)·√(2g)`.
    k: f32,
    /// Cap on the head used in the contraction term, m (∞ when suppressed).
    contraction_head_cap_m: f32,
}

impl RectangularWeir {
    /// A weir of crest width `width_m` in (0, 1000] at `crest_m`, coefficient `cd` in (0, 1]
    /// (≈ 0.62 for a sharp crest — from memory), `end_contractions` 0, 1 or 2.
    pub fn new(
        crest_m: f32,
        width_m: f32,
        cd: f32,
        end_contractions: u8,
    ) -> Result<Self, HydraulicsError> {
        let crest_m = level("crest_m", crest_m)?;
        let width_m = length("width_m", width_m)?;
        let cd = validate::coefficient("cd", cd)?;
        if end_contractions > 2 {
            return Err(Invalid {
                field: "end_contractions",
                value: f32::from(end_contractions),
                rule: "must be 0, 1 or 2",
            }
            .into());
        }
        let contraction_head_cap_m = if end_contractions == 0 {
            f32::INFINITY
        } else {
            3.0 * width_m / f32::from(end_contractions)
        };
        let k = cd * (2.0 / 3.0) * sqrt_2g();
        Ok(Self {
            crest_m,
            width_m,
            cd,
            end_contractions,
            k,
            contraction_head_cap_m,
        })
    }

    /// Crest level, m.
    pub fn crest_m(&self) -> f32 {
        self.crest_m
    }

    /// Crest width, m.
    pub fn width_m(&self) -> f32 {
        self.width_m
    }

    /// Discharge coefficient.
    pub fn cd(&self) -> f32 {
        self.cd
    }

    /// Number of end contractions (0, 1, 2).
    pub fn end_contractions(&self) -> u8 {
        self.end_contractions
    }

    /// Effective crest length at head `h` (Francis, with the documented cap), m.
    #[inline]
    pub fn effective_width_m(&self, head_m: f32) -> f32 {
        let hc = if head_m < self.contraction_head_cap_m {
            head_m
        } else {
            self.contraction_head_cap_m
        };
        let hc = if hc > 0.0 { hc } else { 0.0 };
        self.width_m - 0.1 * f32::from(self.end_contractions) * hc
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.crest_m);
        if h <= 0.0 {
            return 0.0;
        }
        let t = tail_head(tailwater_m, self.crest_m);
        let q = self.k * self.effective_width_m(h) * math::pow1_5(h);
        let q = q * villemonte(h, t, 1.5);
        if q > 0.0 { q } else { 0.0 }
    }
}

/// A sharp-crested V-notch (triangular) weir with its vertex at `crest_m`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct VNotchWeir {
    crest_m: f32,
    angle_deg: f32,
    cd: f32,
    /// `Cd·(8/15)·√(2g)·tan(θ/2)`.
    k: f32,
}

impl VNotchWeir {
    /// A notch of included angle `angle_deg` in [10, 170] with its vertex at `crest_m` and
    /// coefficient `cd` in (0, 1] (≈ 0.58 for 90° — from memory).
    pub fn new(crest_m: f32, angle_deg: f32, cd: f32) -> Result<Self, HydraulicsError> {
        let crest_m = level("crest_m", crest_m)?;
        let angle_deg = validate::within(
            "angle_deg",
            angle_deg,
            10.0,
            170.0,
            "must be in [10, 170] degrees",
        )?;
        let cd = validate::coefficient("cd", cd)?;
        let half = 0.5 * angle_deg * core::f32::consts::PI / 180.0;
        let k = cd * (8.0 / 15.0) * sqrt_2g() * math::tan(half);
        Ok(Self {
            crest_m,
            angle_deg,
            cd,
            k,
        })
    }

    /// Vertex level, m.
    pub fn crest_m(&self) -> f32 {
        self.crest_m
    }

    /// Included angle, degrees.
    pub fn angle_deg(&self) -> f32 {
        self.angle_deg
    }

    /// Discharge coefficient.
    pub fn cd(&self) -> f32 {
        self.cd
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.crest_m);
        if h <= 0.0 {
            return 0.0;
        }
        let t = tail_head(tailwater_m, self.crest_m);
        self.k * math::pow2_5(h) * villemonte(h, t, 2.5)
    }
}

/// A broad-crested weir of width `width_m` (critical-depth control on the crest).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BroadCrestedWeir {
    crest_m: f32,
    width_m: f32,
    cd: f32,
}

impl BroadCrestedWeir {
    /// A crest of `width_m` in (0, 1000] at `crest_m`, coefficient `cd` in (0, 1] (1 = ideal
    /// critical flow; ≈ 0.85–0.95 in practice — from memory).
    pub fn new(crest_m: f32, width_m: f32, cd: f32) -> Result<Self, HydraulicsError> {
        let crest_m = level("crest_m", crest_m)?;
        let width_m = length("width_m", width_m)?;
        let cd = validate::coefficient("cd", cd)?;
        Ok(Self {
            crest_m,
            width_m,
            cd,
        })
    }

    /// Crest level, m.
    pub fn crest_m(&self) -> f32 {
        self.crest_m
    }

    /// Crest width, m.
    pub fn width_m(&self) -> f32 {
        self.width_m
    }

    /// Discharge coefficient.
    pub fn cd(&self) -> f32 {
        self.cd
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.crest_m);
        let t = tail_head(tailwater_m, self.crest_m);
        self.cd * self.width_m * unit_critical_or_drowned(h, t)
    }
}

/// Discharge per unit width over a rectangular control with energy head `h` and tailwater
/// `t` above the crest: `√g·(2h/3)^1.5` free, `t·√(2g(h − t))` when `t > 2h/3`, 0 if `t ≥ h`.
#[inline]
pub(crate) fn unit_critical_or_drowned(h: f32, t: f32) -> f32 {
    if !exceeds(h, 0.0) {
        return 0.0;
    }
    let yc = (2.0 / 3.0) * h;
    if t > yc {
        let dh = h - t;
        if dh > 0.0 {
            t * math::sqrt(2.0 * G_M_S2 * dh)
        } else {
            0.0
        }
    } else {
        math::sqrt(G_M_S2) * math::pow1_5(yc)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Ideal broad-crested weir: q = √g·(2E/3)^1.5 (source: critical-depth theory).
    #[test]
    fn broad_crested_ideal_is_critical_flow() {
        let w = BroadCrestedWeir::new(0.0, 2.0, 1.0).unwrap();
        let e = 0.9_f64;
        let want = 2.0 * 9.80665_f64.sqrt() * (2.0 * e / 3.0).powf(1.5);
        let q = w.discharge_m3s(0.9, None) as f64;
        assert!((q / want - 1.0).abs() < 1e-6);
    }

    #[test]
    fn validation_errors_name_field_and_value() {
        let e = RectangularWeir::new(0.0, 1.0, 0.62, 3).unwrap_err();
        assert_eq!(format!("{e}"), "end_contractions = 3: must be 0, 1 or 2");
        let e = RectangularWeir::new(0.0, -2.0, 0.62, 0).unwrap_err();
        assert!(format!("{e}").starts_with("width_m = -2"));
        let e = VNotchWeir::new(0.0, 5.0, 0.58).unwrap_err();
        assert_eq!(
            format!("{e}"),
            "angle_deg = 5: must be in [10, 170] degrees"
        );
        let e = VNotchWeir::new(0.0, 175.0, 0.58).unwrap_err();
        assert!(format!("{e}").starts_with("angle_deg = 175"));
        let e = VNotchWeir::new(0.0, 90.0, -0.1).unwrap_err();
        assert!(format!("{e}").starts_with("cd = -0.1"));
        let e = BroadCrestedWeir::new(f32::INFINITY, 1.0, 0.9).unwrap_err();
        assert!(format!("{e}").starts_with("crest_m = inf"));
        let e = BroadCrestedWeir::new(0.0, 0.0, 0.9).unwrap_err();
        assert!(format!("{e}").starts_with("width_m = 0"));
    }

    #[test]
    fn weirs_are_zero_at_the_crest_and_for_nan() {
        let r = RectangularWeir::new(1.0, 1.0, 0.62, 2).unwrap();
        let v = VNotchWeir::new(1.0, 90.0, 0.58).unwrap();
        for s in [1.0, 0.5, f32::NAN] {
            assert_eq!(r.discharge_m3s(s, None), 0.0);
            assert_eq!(v.discharge_m3s(s, None), 0.0);
        }
        assert_eq!(r.discharge_m3s(2.0, Some(2.0)), 0.0);
        assert!(r.discharge_m3s(f32::INFINITY, None).is_finite());
    }
}
