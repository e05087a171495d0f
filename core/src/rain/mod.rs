//! Rain: a live gauge read through sliding windows, rain events, and IDF curves.
//!
//! - [`gauge`]: tipping-bucket pulses or interval totals (e.g. 5-min depths) into one ring
//!   buffer of rain records; depth and mean intensity over several sliding windows at once;
//!   chatter and clog supervision; rain events split by an inter-event dry time.
//! - [`idf`]: intensity–duration–frequency relations (Talbot, Sherman, power law, or a table),
//!   intensity and depth for a duration and return period, and the return period of an
//!   observed intensity by inverting them.
//! - [`design`]: design storms (uniform, alternating block, Chicago) from an IDF, written
//!   into a caller's slice.
//!
//! Units: time is integer seconds (`u32`) in the gauge; IDF durations are minutes (`f32`),
//! intensities mm/h, depths mm, return periods years. Invariants: every constructor validates
//! once and returns [`RainError`]; after that no method fails or panics, capacity is fixed at
//! compile time and running out of it is reported (a saturated window), never a crash.

pub mod design;
pub mod gauge;
pub mod idf;

pub use design::{
    DesignStorm, DesignStormError, MAX_STORM_DURATION_S, MAX_STORM_STEPS, Pattern,
    keifer_chu_intensity_mm_h,
};
pub use gauge::{
    GaugeSettings, GaugeStatus, IntervalOutcome, MAX_WINDOWS, RainEvent, RainGauge, Readings,
    TipOutcome, WindowPeak, WindowReading,
};
pub use idf::{
    EventRarity, Idf, IdfCurves, IdfFormula, IdfTable, MAX_DURATIONS, MAX_RETURN_PERIODS,
    ReturnPeriod,
};

use crate::validate::Invalid;
use core::fmt;

/// Why a gauge or IDF description was rejected.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RainError {
    /// One number broke its rule.
    Invalid(Invalid),
    /// More items than the fixed capacity holds.
    TooMany {
        /// What was counted (`"windows_s"`, `"return_periods_years"`…).
        what: &'static str,
        /// The capacity.
        max: usize,
    },
    /// Fewer items than needed.
    TooFew {
        /// What was counted.
        what: &'static str,
        /// The least number accepted.
        min: usize,
    },
    /// A list that must rise strictly does not, at `index` (compared with `index - 1`).
    NotIncreasing {
        /// Which list.
        what: &'static str,
        /// The first offending position.
        index: usize,
    },
    /// A table of `len` cells was given where `expected` were needed.
    LengthMismatch {
        /// Cells needed (durations × return periods).
        expected: usize,
        /// Cells given.
        got: usize,
    },
    /// IDF intensity rises with duration (it must not).
    IntensityIncreasesWithDuration {
        /// Return period of the offending curve or column, years.
        return_period_years: f32,
        /// Duration where the rise was found, minutes.
        duration_min: f32,
    },
    /// IDF intensity does not rise strictly with return period.
    IntensityNotIncreasingWithReturnPeriod {
        /// Return period of the offending (higher) curve or column, years.
        return_period_years: f32,
        /// Duration where it was found, minutes.
        duration_min: f32,
    },
}

impl From<Invalid> for RainError {
    fn from(e: Invalid) -> Self {
        RainError::Invalid(e)
    }
}

impl fmt::Display for RainError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RainError::Invalid(e) => write!(f, "{e}"),
            RainError::TooMany { what, max } => write!(f, "{what}: more than {max} items"),
            RainError::TooFew { what, min } => write!(f, "{what}: fewer than {min} items"),
            RainError::NotIncreasing { what, index } => {
                write!(f, "{what}: item {index} is not greater than the one before")
            }
            RainError::LengthMismatch { expected, got } => {
                write!(f, "intensity table: {got} cells given, {expected} needed")
            }
            RainError::IntensityIncreasesWithDuration {
                return_period_years,
                duration_min,
            } => {
                write!(
                    f,
                    "IDF T = {return_period_years} years: intensity rises with duration at {duration_min} min"
                )
            }
            RainError::IntensityNotIncreasingWithReturnPeriod {
                return_period_years,
                duration_min,
            } => write!(
                f,
                "IDF T = {return_period_years} years: intensity not above the shorter return period's at {duration_min} min"
            ),
        }
    }
}

impl core::error::Error for RainError {}
