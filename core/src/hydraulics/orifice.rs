//! Circular and rectangular orifices, free and submerged, partly full below the soffit.
//!
//! Units: m, m², m³/s. The invert is the bottom of the opening; the soffit its top.
//!
//! ## Free flow, `Φ(h)` with `h` the stage above the invert and `D` the opening height
//!
//! - Above the soffit (`h ≥ D`): the orifice equation with the head on the centroid,
//!   `Φ = Cd·A·√(2g·(h − D/2))` (Torricelli's velocity times a discharge coefficient).
//! - Below the soffit (`0 < h < D`, weir-like flow): the same law applied to the wetted part
//!   of the opening with the head taken to mid-depth of the flow,
//!   `Φ = Cd·A_w(h)·√(2g·h/2) = Cd·A_w(h)·√(g·h)`.
//!   For a rectangle `A_w = b·h`, so this is the weir law `Cd·√g·b·h^1.5`, i.e. a
//!   sharp-crested weir coefficient `(3/2)·Cd/√2 ≈ 1.06·Cd` (0.64 for Cd = 0.6).
//!
//! Why this transition: at `h = D`, `A_w = A` and `h/2 = h − D/2`, so both branches give
//! `Cd·A·√(g·D)` — continuous by construction, with no blending constant. Each branch is a
//! product of non-negative non-decreasing factors, so `Φ` is monotone. The slope has a kink
//! at the soffit (weir side steeper), which routing does not mind.
//!
//! ## Tailwater (submerged flow)
//!
//! With `t` the tailwater above the invert, `Q = √(Φ(h)² − Φ(t)²)` (0 when `t ≥ h`). When both
//! levels are above the soffit this is exactly the submerged orifice equation
//! `Cd·A·√(2g·(h − t))`; with `t ≤ 0` it is the free flow; between (tailwater in the opening)
//! it interpolates continuously — common practice, no source for that partly-drowned band.
//! It is continuous, non-increasing in `t` and non-decreasing in `h`.

use crate::hydraulics::{HydraulicsError, exceeds, head_above, length, level, tail_head};
use crate::validate;
use crate::{G_M_S2, math};

/// Coefficients (constant term first) of `g(u) = (θ − sin θ)/u^1.5`, `θ = 4·asin(√u)`, on
/// `0 ≤ u ≤ 1/2`: the circular segment's excess over its chord. Chebyshev fit of degree 11
/// to 50-digit values, made and checked by `tools/fit/orifice_segment.py` (numpy 2.4.6,
/// mpmath 1.3.0): largest relative error 1.4e-7 evaluated in f32 by [`segment_g`].
#[allow(clippy::excessive_precision)]
const SEGMENT_G: [f32; 12] = [
    10.666666984558105,
    -3.200000047683716,
    -0.5714282393455505,
    -0.22223368287086487,
    -0.11342263221740723,
    -0.0696408823132515,
    -0.02777881920337677,
    -0.10119322687387466,
    0.18278621137142181,
    -0.392436683177948,
    0.39157456159591675,
    -0.214291051030159,
];

/// `g(v)` of [`SEGMENT_G`] by second-order Horner: the even and the odd coefficients as
/// two Horner sums in `v²`, side by side, then `even + v·odd`. The same polynomial as one
/// Horner sum with about half the chain of dependent multiply–adds (that chain is the
/// latency of most orifice evaluations in a long replay); its f32 error is checked in
/// `tools/fit/orifice_segment.py`, evaluated in this order.
#[inline]
fn segment_g(v: f32) -> f32 {
    let [c0, c1, c2, c3, c4, c5, c6, c7, c8, c9, c10, c11] = SEGMENT_G;
    let w = v * v;
    let even = ((((c10 * w + c8) * w + c6) * w + c4) * w + c2) * w + c0;
    let odd = ((((c11 * w + c9) * w + c7) * w + c5) * w + c3) * w + c1;
    even + v * odd
}

/// Free-flow law shared by both shapes: `wetted_area_m2` is `A_w(h)` for `0 < h < D`.
#[inline]
fn free_q(
    cd: f32,
    area_m2: f32,
    height_m: f32,
    h: f32,
    wetted_area_m2: impl Fn(f32) -> f32,
) -> f32 {
    if !exceeds(h, 0.0) {
        0.0
    } else if h < height_m {
        cd * wetted_area_m2(h) * math::sqrt(G_M_S2 * h)
    } else {
        cd * area_m2 * math::sqrt(2.0 * G_M_S2 * (h - 0.5 * height_m))
    }
}

/// Submerged combination `√(Φ(h)² − Φ(t)²)`.
#[inline]
fn submerged(q_up: f32, h: f32, t: f32, q_down: impl Fn(f32) -> f32) -> f32 {
    if !exceeds(t, 0.0) {
        return q_up;
    }
    if !exceeds(h, t) {
        return 0.0;
    }
    let qd = q_down(t);
    let d = q_up * q_up - qd * qd;
    if d > 0.0 { math::sqrt(d) } else { 0.0 }
}

/// A circular orifice (culvert mouth, drilled plate) with its invert at `invert_m`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CircularOrifice {
    invert_m: f32,
    diameter_m: f32,
    cd: f32,
    area_m2: f32,
}

impl CircularOrifice {
    /// An orifice of `diameter_m` in (0, 1000] with invert `invert_m` and discharge
    /// coefficient `cd` in (0, 1] (0.6 is typical for a sharp edge — from memory).
    pub fn new(invert_m: f32, diameter_m: f32, cd: f32) -> Result<Self, HydraulicsError> {
        let invert_m = level("invert_m", invert_m)?;
        let diameter_m = length("diameter_m", diameter_m)?;
        let cd = validate::coefficient("cd", cd)?;
        let area_m2 = core::f32::consts::FRAC_PI_4 * diameter_m * diameter_m;
        Ok(Self {
            invert_m,
            diameter_m,
            cd,
            area_m2,
        })
    }

    /// Invert (bottom of the opening), m.
    pub fn invert_m(&self) -> f32 {
        self.invert_m
    }

    /// Soffit (top of the opening), m.
    pub fn soffit_m(&self) -> f32 {
        self.invert_m + self.diameter_m
    }

    /// Diameter, m.
    pub fn diameter_m(&self) -> f32 {
        self.diameter_m
    }

    /// Discharge coefficient.
    pub fn cd(&self) -> f32 {
        self.cd
    }

    /// Full area, m².
    pub fn area_m2(&self) -> f32 {
        self.area_m2
    }

    /// Wetted area of the circle at depth `y` (0 < y < D): segment `D²/8·(θ − sin θ)` with
    /// `θ = 4·asin(√u)`, `u = y/D`.
    ///
    /// For `u ≤ 1/2` the excess is `θ − sin θ = u^1.5·g(u)`, `g` analytic on `|u| < 1`
    /// (`g(0) = 32/3`); [`SEGMENT_G`] is a degree-11 fit of `g` on `[0, 1/2]`, so the excess
    /// costs one square root and a polynomial ([`segment_g`]), with full f32 precision at
    /// every depth (the shallow end included, where a direct `θ − sin θ` cancels). Above half
    /// full the segment is the circle less the dry segment above the water:
    /// `2π − (1 − u)^1.5·g(1 − u)`, `1 − u` exact there.
    #[inline]
    fn wetted_area_m2(&self, y: f32) -> f32 {
        let d = self.diameter_m;
        let u = math::clamp(y / d, 0.0, 1.0);
        let (v, above_half) = if u > 0.5 { (1.0 - u, true) } else { (u, false) };
        let g = segment_g(v);
        // `v^1.5` without `math::pow1_5`'s guards: v is in [0, 1/2] here (38 instructions a
        // step of a long replay).
        let dry_or_wet = v * math::sqrt(v) * g;
        let excess = if above_half {
            2.0 * core::f32::consts::PI - dry_or_wet
        } else {
            dry_or_wet
        };
        let a = 0.125 * d * d * excess;
        math::clamp(a, 0.0, self.area_m2)
    }

    #[inline]
    fn free(&self, h: f32) -> f32 {
        free_q(self.cd, self.area_m2, self.diameter_m, h, |y| {
            self.wetted_area_m2(y)
        })
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.invert_m);
        let t = tail_head(tailwater_m, self.invert_m);
        submerged(self.free(h), h, t, |t| self.free(t))
    }
}

/// A rectangular orifice (slot, box culvert mouth) with its invert at `invert_m`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RectangularOrifice {
    invert_m: f32,
    width_m: f32,
    height_m: f32,
    cd: f32,
}

impl RectangularOrifice {
    /// An opening `width_m` × `height_m` (each in (0, 1000]) with invert `invert_m` and
    /// discharge coefficient `cd` in (0, 1].
    pub fn new(
        invert_m: f32,
        width_m: f32,
        height_m: f32,
        cd: f32,
    ) -> Result<Self, HydraulicsError> {
        let invert_m = level("invert_m", invert_m)?;
        let width_m = length("width_m", width_m)?;
        let height_m = length("height_m", height_m)?;
        let cd = validate::coefficient("cd", cd)?;
        Ok(Self {
            invert_m,
            width_m,
            height_m,
            cd,
        })
    }

    /// Invert (bottom of the opening), m.
    pub fn invert_m(&self) -> f32 {
        self.invert_m
    }

    /// Soffit (top of the opening), m.
    pub fn soffit_m(&self) -> f32 {
        self.invert_m + self.height_m
    }

    /// Full area, m².
    pub fn area_m2(&self) -> f32 {
        self.width_m * self.height_m
    }

    #[inline]
    fn free(&self, h: f32) -> f32 {
        let b = self.width_m;
        free_q(self.cd, self.area_m2(), self.height_m, h, |y| b * y)
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.invert_m);
        let t = tail_head(tailwater_m, self.invert_m);
        submerged(self.free(h), h, t, |t| self.free(t))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hydraulics::HydraulicsError as E;

    /// Orifice equation Q = Cd·A·√(2gH), H on the centroid (source: Torricelli's theorem).
    #[test]
    fn full_orifice_follows_the_orifice_equation() {
        let o = CircularOrifice::new(10.0, 0.3, 0.6).unwrap();
        let q = o.discharge_m3s(12.15, None);
        let want = 0.6 * core::f64::consts::FRAC_PI_4 * 0.09 * (2.0 * 9.80665 * 2.0_f64).sqrt();
        assert!((q as f64 / want - 1.0).abs() < 1e-5, "{q} vs {want}");
    }

    /// The segment polynomial gives the circle's wetted area over the whole depth, to f32
    /// precision: against `r²·acos((r − y)/r) − (r − y)·√(2ry − y²)` in f64 (the segment
    /// area of plane geometry, different algebra from the fit), y/D from 1e-5 to 1 − 1e-5,
    /// within 4e-7 relative; full at the soffit and continuous at half full.
    #[test]
    fn wetted_area_is_the_circular_segment() {
        let d = 0.45_f32;
        let o = CircularOrifice::new(0.0, d, 0.6).unwrap();
        let reference = |y: f64| {
            let r = f64::from(d) / 2.0;
            r * r * ((r - y) / r).acos() - (r - y) * (2.0 * r * y - y * y).sqrt()
        };
        let mut worst = 0.0_f64;
        for k in 0..=20_000 {
            // u from 1e-5 to 1/2, evenly in its logarithm, and its mirror 1 − u; below 1e-5
            // the f64 reference's own cancellation grows past 1e-9.
            let u = 10f64.powf(-5.0 + f64::from(k) * (5.0 - 2f64.log10()) / 20_000.0);
            for u in [u, 1.0 - u] {
                let y = (u * f64::from(d)) as f32;
                if y <= 0.0 || y >= d {
                    continue;
                }
                let want = reference(f64::from(y));
                let got = f64::from(o.wetted_area_m2(y));
                worst = worst.max((got - want).abs() / want);
            }
        }
        assert!(worst < 4e-7, "worst relative error {worst:e}");
        let full = o.wetted_area_m2(d * (1.0 - f32::EPSILON));
        assert!((full / o.area_m2() - 1.0).abs() < 1e-6);
        let (below, above) = (
            o.wetted_area_m2(0.5 * d * 0.999_999),
            o.wetted_area_m2(0.5 * d),
        );
        assert!(above >= below && (above / below - 1.0) < 1e-5);
    }

    #[test]
    fn zero_at_invert_and_for_nan() {
        let o = RectangularOrifice::new(1.0, 0.5, 0.2, 0.6).unwrap();
        assert_eq!(o.discharge_m3s(1.0, None), 0.0);
        assert_eq!(o.discharge_m3s(0.2, None), 0.0);
        assert_eq!(o.discharge_m3s(f32::NAN, None), 0.0);
        assert!(o.discharge_m3s(f32::INFINITY, None).is_finite());
        assert_eq!(o.discharge_m3s(2.0, Some(2.0)), 0.0);
    }

    #[test]
    fn validation_names_field_and_value() {
        let e = CircularOrifice::new(0.0, -0.3, 0.6).unwrap_err();
        assert!(matches!(e, E::Invalid(i) if i.field == "diameter_m"));
        assert!(format!("{e}").starts_with("diameter_m = -0.3"));
        let e = CircularOrifice::new(0.0, 0.3, 1.2).unwrap_err();
        assert!(format!("{e}").starts_with("cd = 1.2"));
        let e = CircularOrifice::new(f32::NAN, 0.3, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("invert_m = NaN"));
        let e = RectangularOrifice::new(0.0, 0.5, 0.0, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("height_m = 0"));
        let e = RectangularOrifice::new(0.0, -1.0, 0.2, 0.6).unwrap_err();
        assert!(format!("{e}").starts_with("width_m = -1"));
        let e = RectangularOrifice::new(0.0, 1.0, 0.2, 0.0).unwrap_err();
        assert!(format!("{e}").starts_with("cd = 0"));
    }
}
