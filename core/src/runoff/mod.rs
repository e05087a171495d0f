//! Rational-method runoff, time of concentration, hydrographs and the time–area convolution.
//!
//! - [`rational`]: the peak Q = C·i·A in SI (m³/s from mm/h and ha) and US customary units
//!   (cfs from in/h and acres), the area-weighted runoff coefficient over land-cover parts and
//!   the frequency factor applied to C for rarer storms.
//! - [`tc`]: time of concentration, as an integer number of seconds: stated directly, inlet
//!   time plus travel along a flow path (each segment at a given velocity or a Manning
//!   velocity), or by the Kirpich formula (SI and US forms).
//! - [`hydrograph`]: the modified-rational hydrograph of one sub-catchment for constant rain,
//!   and several lagged sub-catchments summed at the pond.
//! - [`time_area`]: a catchment as effective-area ordinates per time step, convolved with a
//!   hyetograph (mm per step), in batch or one step at a time as rain arrives.
//!
//! ## Invariants and units
//!
//! - Inside: SI. Area at the boundary in hectares (`area_ha`), intensity in mm/h
//!   (`intensity_mm_h`), rain depth per step in mm (`rain_mm`), discharge in m³/s (`_m3s`),
//!   volume in m³ (`_m3`), time as integer seconds (`_s`, `u32`). US customary only in the
//!   functions whose names say so (`_cfs`, `_in_h`, `_acres`, `_ft`).
//! - Every type is validated once by its constructor; evaluation never fails and never
//!   panics. Live inputs that are not validated (an intensity or a rain depth pushed step by
//!   step) are read as 0 when negative or NaN, so a faulty gauge can never make a negative or
//!   NaN inflow.
//! - Capacities are fixed at compile time ([`rational::MAX_LAND_COVER_PARTS`],
//!   [`tc::MAX_PATH_SEGMENTS`], [`hydrograph::MAX_SUB_CATCHMENTS`],
//!   [`time_area::MAX_TIME_AREA_STEPS`]); more parts than that is an error, not a crash.
//! - Nothing here depends on the rain module: intensities are plain `f32` mm/h and
//!   hyetographs plain slices.

use core::fmt;

use crate::validate::Invalid;

pub mod hydrograph;
pub mod rational;
pub mod tc;
pub mod time_area;

pub use hydrograph::{Catchment, CatchmentHydrograph, ModifiedRational, SubCatchment};
pub use rational::{
    AreaAcres, AreaHa, DesignFrequency, LandCoverMix, LandCoverPart, RunoffCoefficient,
};
pub use tc::{FlowPath, Segment, TimeOfConcentration};
pub use time_area::{TimeAreaInflow, TimeAreaResponse};

/// What can go wrong building a runoff description.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RunoffError {
    /// A number outside its allowed range (names the field, the value and the rule).
    Invalid(Invalid),
    /// More parts than the fixed capacity allows.
    Capacity {
        /// What was being filled (`"land-cover parts"`, `"sub-catchments"`…).
        what: &'static str,
        /// The compile-time capacity.
        capacity: usize,
    },
    /// A description with nothing in it where at least one part is needed.
    Empty {
        /// What was empty.
        what: &'static str,
    },
}

impl From<Invalid> for RunoffError {
    fn from(e: Invalid) -> Self {
        RunoffError::Invalid(e)
    }
}

impl fmt::Display for RunoffError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RunoffError::Invalid(e) => write!(f, "{e}"),
            RunoffError::Capacity { what, capacity } => {
                write!(f, "too many {what}: at most {capacity}")
            }
            RunoffError::Empty { what } => write!(f, "no {what}: at least one is needed"),
        }
    }
}

impl core::error::Error for RunoffError {}

/// Reads a live, unvalidated input: negative, NaN and −∞ become 0, +∞ becomes `f32::MAX`.
#[inline]
pub(crate) fn live_non_negative(x: f32) -> f32 {
    crate::math::clamp(x, 0.0, f32::MAX)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn error_messages_name_what_went_wrong() {
        let e = RunoffError::Capacity {
            what: "sub-catchments",
            capacity: 8,
        };
        assert_eq!(format!("{e}"), "too many sub-catchments: at most 8");
        let e = RunoffError::Empty {
            what: "land-cover parts",
        };
        assert_eq!(
            format!("{e}"),
            "no land-cover parts: at least one is needed"
        );
    }

    #[test]
    fn live_inputs_never_go_negative_or_nan() {
        assert_eq!(live_non_negative(f32::NAN), 0.0);
        assert_eq!(live_non_negative(-3.0), 0.0);
        assert_eq!(live_non_negative(f32::INFINITY), f32::MAX);
        assert_eq!(live_non_negative(2.5), 2.5);
    }
}
