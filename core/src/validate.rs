//! Validation at the boundary, shared by every module.
//!
//! Constructors check each number once and, when one is wrong, return an [`Invalid`] that
//! names the field, the value and the rule it broke, e.g.
//! `width_m = -0.4: must be > 0`. Module error enums wrap it; after validation, accessors and
//! evaluation cannot fail.

use core::fmt;

/// One rejected value: which field, what it was, and the rule it broke.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Invalid {
    /// Name of the field as the user knows it, unit included (`"width_m"`).
    pub field: &'static str,
    /// The rejected value (NaN when the value was not a number).
    pub value: f32,
    /// The rule, phrased to follow a colon (`"must be > 0"`).
    pub rule: &'static str,
}

impl fmt::Display for Invalid {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} = {}: {}", self.field, self.value, self.rule)
    }
}

impl core::error::Error for Invalid {}

/// A value that is finite, else an error naming `field`.
pub fn finite(field: &'static str, value: f32) -> Result<f32, Invalid> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(Invalid { field, value, rule: "must be a finite number" })
    }
}

/// A finite value `> 0`.
pub fn positive(field: &'static str, value: f32) -> Result<f32, Invalid> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(Invalid { field, value, rule: "must be a finite number > 0" })
    }
}

/// A finite value `>= 0`.
pub fn non_negative(field: &'static str, value: f32) -> Result<f32, Invalid> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(Invalid { field, value, rule: "must be a finite number >= 0" })
    }
}

/// A discharge (or similar) coefficient in `(0, 1]`.
pub fn coefficient(field: &'static str, value: f32) -> Result<f32, Invalid> {
    if value.is_finite() && value > 0.0 && value <= 1.0 {
        Ok(value)
    } else {
        Err(Invalid { field, value, rule: "must be in (0, 1]" })
    }
}

/// A finite value in the closed interval `[lo, hi]`; `rule` is the message shown on failure
/// (e.g. `"must be in [10, 170] degrees"`).
pub fn within(
    field: &'static str,
    value: f32,
    lo: f32,
    hi: f32,
    rule: &'static str,
) -> Result<f32, Invalid> {
    if value.is_finite() && value >= lo && value <= hi {
        Ok(value)
    } else {
        Err(Invalid { field, value, rule })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn error_text_names_field_value_and_rule() {
        let e = positive("width_m", -0.4).unwrap_err();
        assert_eq!(format!("{e}"), "width_m = -0.4: must be a finite number > 0");
    }

    #[test]
    fn nan_and_infinity_are_rejected_everywhere() {
        for v in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
            assert!(finite("x", v).is_err());
            assert!(positive("x", v).is_err());
            assert!(non_negative("x", v).is_err());
            assert!(coefficient("x", v).is_err());
            assert!(within("x", v, 0.0, 1.0, "r").is_err());
        }
    }

    #[test]
    fn coefficient_bounds_are_open_at_zero_closed_at_one() {
        assert!(coefficient("cd", 0.0).is_err());
        assert!(coefficient("cd", 1.0).is_ok());
        assert!(coefficient("cd", 1.000_001).is_err());
    }
}
