//! Emergency spillway: a broad crest with a trapezoidal section (bottom width and side slopes).
//!
//! Units: m, m², m³/s; side slope as horizontal per vertical (m/m). `h` is the stage above the
//! crest, taken as the energy head (pond approach velocity neglected); `t` the tailwater above
//! the crest.
//!
//! Free flow passes critical depth `y_c` on the crest: for a section of area `A(y)` and top
//! width `T(y)`, `Q² = g·A³/T` and `E = y_c + A/(2T)` (critical-depth theory). For a trapezoid
//! `A = (b + z·y)·y`, `T = b + 2z·y` and `y_c` lies between `2E/3` (rectangle) and `4E/5`
//! (triangle). It is found by three Newton steps on `f(y) = y + A/(2T) − E` from the guess
//! `E·(2/3 + (2/15)·zE/(b + zE))`, exact for the two limiting shapes; `f′ = 3/2 − zA/T²` lies in
//! [5/4, 3/2], so the steps converge to f32 precision. `Q = Cd·A·√(g·A/T)`.
//!
//! Drowned when `t > y_c`: `Q = Cd·A(t)·√(2g·(h − t))`. At `t = y_c` this equals the free value
//! (because `h − y_c = A/(2T)`), and it decreases in `t` beyond `y_c`, so the transition is
//! continuous and the law non-increasing in tailwater.

use crate::hydraulics::{HydraulicsError, MAX_LENGTH_M, exceeds, head_above, level, tail_head};
use crate::validate::{self, Invalid};
use crate::{G_M_S2, math};

/// Newton steps for the trapezoidal critical depth (fixed, no loop on a tolerance).
pub const CRITICAL_DEPTH_NEWTON_STEPS: usize = 3;

/// A trapezoidal broad-crested spillway.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Spillway {
    crest_m: f32,
    bottom_width_m: f32,
    side_slope_h_per_v: f32,
    cd: f32,
}

impl Spillway {
    /// A crest at `crest_m` with `bottom_width_m` in [0, 1000], side slopes
    /// `side_slope_h_per_v` in [0, 100] (0 = vertical walls), coefficient `cd` in (0, 1].
    /// A zero bottom width needs sloped sides.
    pub fn new(
        crest_m: f32,
        bottom_width_m: f32,
        side_slope_h_per_v: f32,
        cd: f32,
    ) -> Result<Self, HydraulicsError> {
        let crest_m = level("crest_m", crest_m)?;
        let bottom_width_m = validate::within(
            "bottom_width_m",
            bottom_width_m,
            0.0,
            MAX_LENGTH_M,
            "must be a finite width in [0, 1000] m",
        )?;
        let side_slope_h_per_v = validate::within(
            "side_slope_h_per_v",
            side_slope_h_per_v,
            0.0,
            100.0,
            "must be in [0, 100] m/m",
        )?;
        let cd = validate::coefficient("cd", cd)?;
        if bottom_width_m <= 0.0 && side_slope_h_per_v <= 0.0 {
            return Err(Invalid {
                field: "bottom_width_m",
                value: bottom_width_m,
                rule: "must be > 0 when side_slope_h_per_v is 0",
            }
            .into());
        }
        Ok(Self {
            crest_m,
            bottom_width_m,
            side_slope_h_per_v,
            cd,
        })
    }

    /// Crest level, m.
    pub fn crest_m(&self) -> f32 {
        self.crest_m
    }

    /// Bottom width, m.
    pub fn bottom_width_m(&self) -> f32 {
        self.bottom_width_m
    }

    /// Side slope, horizontal per vertical.
    pub fn side_slope_h_per_v(&self) -> f32 {
        self.side_slope_h_per_v
    }

    /// Discharge coefficient.
    pub fn cd(&self) -> f32 {
        self.cd
    }

    #[inline]
    fn area_m2(&self, y: f32) -> f32 {
        (self.bottom_width_m + self.side_slope_h_per_v * y) * y
    }

    #[inline]
    fn top_width_m(&self, y: f32) -> f32 {
        self.bottom_width_m + 2.0 * self.side_slope_h_per_v * y
    }

    /// Critical depth (m) for energy head `e_m` > 0 above the crest.
    pub fn critical_depth_m(&self, e_m: f32) -> f32 {
        if !exceeds(e_m, 0.0) {
            return 0.0;
        }
        let (b, z) = (self.bottom_width_m, self.side_slope_h_per_v);
        let ze = z * e_m;
        let mut y = e_m * (2.0 / 3.0 + (2.0 / 15.0) * ze / (b + ze));
        for _ in 0..CRITICAL_DEPTH_NEWTON_STEPS {
            let a = self.area_m2(y);
            let t = self.top_width_m(y);
            let f = y + a / (2.0 * t) - e_m;
            let df = 1.5 - z * a / (t * t);
            y -= f / df;
        }
        math::clamp(y, (2.0 / 3.0) * e_m, 0.8 * e_m)
    }

    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        let h = head_above(stage_m, self.crest_m);
        if h <= 0.0 {
            return 0.0;
        }
        let t = tail_head(tailwater_m, self.crest_m);
        let yc = self.critical_depth_m(h);
        if t > yc {
            let dh = h - t;
            if dh > 0.0 {
                self.cd * self.area_m2(t) * math::sqrt(2.0 * G_M_S2 * dh)
            } else {
                0.0
            }
        } else {
            let a = self.area_m2(yc);
            self.cd * a * math::sqrt(G_M_S2 * a / self.top_width_m(yc))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Triangular critical section: y_c = 4E/5 and Q = z·√(g/2)·y_c^2.5 (source:
    /// critical-depth theory, Q² = gA³/T with A = z·y², T = 2z·y).
    #[test]
    fn triangular_limit_matches_critical_depth_theory() {
        let s = Spillway::new(0.0, 0.0, 3.0, 1.0).unwrap();
        let e = 0.5_f64;
        let yc = 0.8 * e;
        let want = 3.0 * (9.80665_f64 / 2.0).sqrt() * yc.powf(2.5);
        let q = s.discharge_m3s(0.5, None) as f64;
        assert!((q / want - 1.0).abs() < 1e-5, "{q} {want}");
    }

    #[test]
    fn validation_errors_name_field_and_value() {
        let e = Spillway::new(0.0, 0.0, 0.0, 0.9).unwrap_err();
        assert_eq!(
            format!("{e}"),
            "bottom_width_m = 0: must be > 0 when side_slope_h_per_v is 0"
        );
        let e = Spillway::new(0.0, -1.0, 2.0, 0.9).unwrap_err();
        assert!(format!("{e}").starts_with("bottom_width_m = -1"));
        let e = Spillway::new(0.0, 5.0, -2.0, 0.9).unwrap_err();
        assert!(format!("{e}").starts_with("side_slope_h_per_v = -2"));
        let e = Spillway::new(0.0, 5.0, 2.0, 1.5).unwrap_err();
        assert!(format!("{e}").starts_with("cd = 1.5"));
    }
}
