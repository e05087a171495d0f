//! Outlet hydraulics: orifices, weirs, gates, risers, spillways, composite outlets, ratings.
//!
//! Units: stages, inverts, crests, openings and lengths in m on one common datum; discharge
//! in m³/s; angles in degrees at the boundary. Gravity is [`crate::G_M_S2`].
//!
//! Invariants every structure keeps, for any stage, tailwater and opening:
//! - discharge is zero at and below the structure's invert (crest, sill);
//! - discharge is never negative and never NaN. A NaN stage gives 0; a stage of `+inf` (or any
//!   head above [`MAX_HEAD_M`]) is evaluated at the head [`MAX_HEAD_M`], so results stay finite.
//!   A NaN or `-inf` tailwater is treated as a free outfall (`None`); there is no reverse flow
//!   (tailwater at or above the stage gives 0);
//! - discharge is monotone non-decreasing in stage and in gate opening, and non-increasing in
//!   tailwater, up to f32 rounding (a few ulps);
//! - discharge is continuous across every regime change (weir-like ↔ orifice flow at a soffit,
//!   free ↔ submerged, gate underflow ↔ free-surface flow over the sill, weir ↔ orifice control
//!   of a riser). Each module documents the transition it uses and why it is continuous.
//!
//! Evaluation is loop-free except the trapezoidal critical-depth solve of the spillway (three
//! Newton steps) and the opening inverse ([`MAX_INVERSE_ITERATIONS`] bisection steps).
//! Geometry is validated once in each constructor; evaluation cannot fail.

use core::fmt;

use crate::validate::Invalid;
use crate::{G_M_S2, math};

pub mod gate;
pub mod orifice;
pub mod outlet;
pub mod rating;
pub mod riser;
pub mod spillway;
pub mod weir;

pub use gate::SluiceGate;
pub use orifice::{CircularOrifice, RectangularOrifice};
pub use outlet::{FixedStructure, MAX_FIXED, MAX_INVERSE_ITERATIONS, Outlet, OutletAt};
pub use rating::Rating;
pub use riser::{Riser, RiserCrest};
pub use spillway::Spillway;
pub use weir::{BroadCrestedWeir, RectangularWeir, VNotchWeir};

/// The largest head (m) a structure is evaluated at; larger heads (including `+inf`) are
/// clamped to it so that discharges stay finite. Far above any pond.
pub const MAX_HEAD_M: f32 = 1.0e4;

/// The largest length (width, diameter, height, opening) accepted by the constructors, m.
pub const MAX_LENGTH_M: f32 = 1.0e3;

/// Villemonte's submergence exponent (Villemonte 1947, "Submerged-weir discharge studies",
/// Engineering News-Record 139): `Q/Q_free = (1 − (h2/h1)^n)^0.385`.
pub const VILLEMONTE_EXPONENT: f32 = 0.385;

/// What can go wrong building or inverting an outlet.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum HydraulicsError {
    /// A geometry value or coefficient broke its rule.
    Invalid(Invalid),
    /// More fixed structures than an [`Outlet`] holds.
    TooManyStructures {
        /// The capacity, [`MAX_FIXED`].
        capacity: usize,
    },
    /// An opening was asked of an outlet without a controlled gate.
    NoGate,
    /// No gate opening gives the target discharge at this stage: the target is below the
    /// closed-gate flow (the fixed structures already pass more) or above the full-open flow.
    Unreachable {
        /// The discharge asked for, m³/s.
        target_m3s: f32,
        /// Total discharge with the gate closed, m³/s.
        min_m3s: f32,
        /// Total discharge with the gate fully open, m³/s.
        max_m3s: f32,
    },
    /// A rating table needs at least two points.
    RatingTooShort {
        /// Points asked for.
        points: usize,
    },
    /// Caller slices for a rating differ in length.
    LengthMismatch {
        /// Length of the stage slice.
        stages: usize,
        /// Length of the discharge slice.
        discharges: usize,
    },
}

impl From<Invalid> for HydraulicsError {
    fn from(e: Invalid) -> Self {
        HydraulicsError::Invalid(e)
    }
}

impl fmt::Display for HydraulicsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            HydraulicsError::Invalid(e) => write!(f, "{e}"),
            HydraulicsError::TooManyStructures { capacity } => {
                write!(f, "an outlet holds at most {capacity} fixed structures")
            }
            HydraulicsError::NoGate => write!(f, "the outlet has no controlled gate"),
            HydraulicsError::Unreachable {
                target_m3s,
                min_m3s,
                max_m3s,
            } => write!(
                f,
                "target_m3s = {target_m3s}: unreachable, the gate gives {min_m3s} (closed) to \
                 {max_m3s} (fully open) m3/s at this stage"
            ),
            HydraulicsError::RatingTooShort { points } => {
                write!(f, "rating points = {points}: must be >= 2")
            }
            HydraulicsError::LengthMismatch { stages, discharges } => write!(
                f,
                "rating slices differ: {stages} stages, {discharges} discharges"
            ),
        }
    }
}

impl core::error::Error for HydraulicsError {}

/// `a > b`, false when either is NaN (spelled out so NaN handling reads plainly).
#[inline]
pub(crate) fn exceeds(a: f32, b: f32) -> bool {
    a > b
}

/// Head of `stage_m` above `level_m`, clamped to `[0, MAX_HEAD_M]`; NaN gives 0.
#[inline]
pub(crate) fn head_above(stage_m: f32, level_m: f32) -> f32 {
    let h = stage_m - level_m;
    if h > 0.0 {
        if h < MAX_HEAD_M { h } else { MAX_HEAD_M }
    } else {
        0.0
    }
}

/// Tailwater head above `level_m`; `None`, NaN or below the level gives 0 (free outfall).
#[inline]
pub(crate) fn tail_head(tailwater_m: Option<f32>, level_m: f32) -> f32 {
    match tailwater_m {
        Some(t) => head_above(t, level_m),
        None => 0.0,
    }
}

/// Villemonte's submergence factor `(1 − (h2/h1)^n)^0.385` for a free-flow law `Q ∝ h^n`;
/// 1 with no tailwater head, 0 when the tailwater reaches the upstream head.
/// Continuous, non-increasing in `h2`, non-decreasing in `h1`.
#[inline]
pub(crate) fn villemonte(h1: f32, h2: f32, n: f32) -> f32 {
    if !exceeds(h2, 0.0) {
        return 1.0;
    }
    if !exceeds(h1, h2) {
        return 0.0;
    }
    let r = h2 / h1;
    let rn = if n == 1.5 {
        math::pow1_5(r)
    } else if n == 2.5 {
        math::pow2_5(r)
    } else {
        math::powf(r, n)
    };
    let base = 1.0 - rn;
    if base > 0.0 {
        math::powf(base, VILLEMONTE_EXPONENT)
    } else {
        0.0
    }
}

/// `√(2g)`, m^½/s.
#[inline]
pub(crate) fn sqrt_2g() -> f32 {
    math::sqrt(2.0 * G_M_S2)
}

/// Validation shared by the constructors: a length in `(0, MAX_LENGTH_M]`.
pub(crate) fn length(field: &'static str, value: f32) -> Result<f32, Invalid> {
    crate::validate::within(
        field,
        value,
        f32::MIN_POSITIVE,
        MAX_LENGTH_M,
        "must be a finite length in (0, 1000] m",
    )
}

/// A finite level (invert, crest, sill, tailwater) on the common datum.
pub(crate) fn level(field: &'static str, value: f32) -> Result<f32, Invalid> {
    crate::validate::within(
        field,
        value,
        -1.0e6,
        1.0e6,
        "must be a finite level within ±1e6 m",
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn head_is_clamped_and_nan_free() {
        assert_eq!(head_above(f32::NAN, 0.0), 0.0);
        assert_eq!(head_above(-1.0, 0.0), 0.0);
        assert_eq!(head_above(f32::INFINITY, 0.0), MAX_HEAD_M);
        assert_eq!(tail_head(Some(f32::NAN), 0.0), 0.0);
        assert_eq!(tail_head(None, 0.0), 0.0);
    }

    /// Villemonte's factor: 1 free, 0 fully drowned, (1 − 0.5^1.5)^0.385 at half submergence
    /// (source: Villemonte 1947, evaluated by hand).
    #[test]
    fn villemonte_factor_limits() {
        assert_eq!(villemonte(1.0, 0.0, 1.5), 1.0);
        assert_eq!(villemonte(1.0, 1.0, 1.5), 0.0);
        let f = villemonte(1.0, 0.5, 1.5);
        let want = (1.0_f64 - 0.5_f64.powf(1.5)).powf(0.385);
        assert!((f as f64 - want).abs() < 1e-6);
    }

    #[test]
    fn error_messages_name_the_problem() {
        let e = HydraulicsError::Unreachable {
            target_m3s: 2.0,
            min_m3s: 0.5,
            max_m3s: 1.5,
        };
        let s = format!("{e}");
        assert!(s.contains("target_m3s = 2") && s.contains("0.5") && s.contains("1.5"));
        assert!(format!("{}", HydraulicsError::RatingTooShort { points: 1 }).contains("1"));
    }
}
