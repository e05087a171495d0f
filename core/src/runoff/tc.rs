//! Time of concentration Tc: the travel time from the hydraulically most distant point of a
//! catchment to its outlet.
//!
//! ## Units and invariants
//!
//! - Tc is carried as a whole number of seconds ([`TimeOfConcentration`], `u32`), rounded to
//!   the nearest second, in 1..=[`MAX_TC_S`] (48 h: longer than any catchment the rational
//!   method is meant for, and it keeps every sum of times far from `u32` overflow).
//! - Lengths in m, velocities in m/s, slopes in m/m, Manning's n in s/m^(1/3); the US Kirpich
//!   form alone takes feet.
//! - A [`Segment`] is validated and its velocity computed once, at construction: length > 0,
//!   velocity > 0, so its travel time is finite and > 0. A [`FlowPath`] holds at most
//!   [`MAX_PATH_SEGMENTS`] segments.
//!
//! ## Formulas
//!
//! - Manning (SI): V = (1/n)·R^(2/3)·S^(1/2), R = flow area / wetted perimeter. Full circular
//!   pipe: R = D/4. Rectangular channel at depth y: R = b·y/(b + 2y). Trapezoidal channel with
//!   side slope z (horizontal per vertical): A = (b + z·y)·y, P = b + 2·y·√(1 + z²).
//! - Kirpich (1940): tc \[min\] = 0.0078·L^0.77·S^−0.385 with L in ft, and the same formula with
//!   L in m: tc \[min\] = 0.0195·L^0.77·S^−0.385 (0.0078 · 0.3048^−0.77 = 0.019 47). Constants
//!   from memory.

use heapless::Vec;

use super::RunoffError;
use crate::{math, validate};

/// Longest time of concentration accepted, s (48 h).
pub const MAX_TC_S: u32 = 172_800;

/// How many segments a [`FlowPath`] can hold.
pub const MAX_PATH_SEGMENTS: usize = 16;

/// Kirpich constant for L in metres, tc in minutes (from memory).
pub const KIRPICH_SI: f32 = 0.0195;

/// Kirpich constant for L in feet, tc in minutes (from memory).
pub const KIRPICH_US: f32 = 0.0078;

/// Kirpich exponent of the length (from memory).
pub const KIRPICH_LENGTH_EXP: f32 = 0.77;

/// Kirpich exponent of the slope, applied as S^−0.385 (from memory).
pub const KIRPICH_SLOPE_EXP: f32 = 0.385;

/// A time of concentration, whole seconds in 1..=[`MAX_TC_S`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(transparent)]
pub struct TimeOfConcentration(u32);

impl TimeOfConcentration {
    /// A Tc stated in seconds (1..=[`MAX_TC_S`]).
    pub fn from_s(tc_s: u32) -> Result<Self, RunoffError> {
        if (1..=MAX_TC_S).contains(&tc_s) {
            Ok(Self(tc_s))
        } else {
            Err(validate::Invalid {
                field: "tc_s",
                value: tc_s as f32,
                rule: "must be in [1, 172800] s",
            }
            .into())
        }
    }

    /// A Tc stated in minutes, rounded to the nearest second; must round to 1..=[`MAX_TC_S`] s.
    pub fn from_min(tc_min: f32) -> Result<Self, RunoffError> {
        Self::from_s_f32("tc_min", tc_min, tc_min * 60.0)
    }

    /// Rounds `seconds` (finite, in \[0.5, MAX_TC_S\]) to whole seconds; errors name `field`
    /// and its `value` as the user gave it.
    fn from_s_f32(field: &'static str, value: f32, seconds: f32) -> Result<Self, RunoffError> {
        if seconds.is_finite() && seconds >= 0.5 && seconds <= MAX_TC_S as f32 {
            // In range, so the saturating float-to-int cast is exact after rounding.
            Ok(Self((seconds + 0.5) as u32))
        } else {
            Err(validate::Invalid {
                field,
                value,
                rule: "must give a Tc in [1 s, 48 h]",
            }
            .into())
        }
    }

    /// Kirpich Tc from the flow length in m and the average slope in m/m.
    pub fn kirpich_si(length_m: f32, slope_m_m: f32) -> Result<Self, RunoffError> {
        Self::from_min(kirpich_si_min(length_m, slope_m_m)?)
    }

    /// Kirpich Tc from the flow length in ft and the average slope in ft/ft.
    pub fn kirpich_us(length_ft: f32, slope_ft_ft: f32) -> Result<Self, RunoffError> {
        Self::from_min(kirpich_us_min(length_ft, slope_ft_ft)?)
    }

    /// Tc in seconds.
    pub fn s(self) -> u32 {
        self.0
    }

    /// Tc in minutes.
    pub fn min(self) -> f32 {
        self.0 as f32 / 60.0
    }
}

/// Kirpich (1940), SI form: tc \[min\] = 0.0195·L^0.77·S^−0.385, L in m (> 0), S in m/m (> 0).
pub fn kirpich_si_min(length_m: f32, slope_m_m: f32) -> Result<f32, RunoffError> {
    let l = validate::positive("length_m", length_m)?;
    let s = validate::positive("slope_m_m", slope_m_m)?;
    Ok(kirpich(KIRPICH_SI, l, s))
}

/// Kirpich (1940), US form: tc \[min\] = 0.0078·L^0.77·S^−0.385, L in ft (> 0), S in ft/ft (> 0).
pub fn kirpich_us_min(length_ft: f32, slope_ft_ft: f32) -> Result<f32, RunoffError> {
    let l = validate::positive("length_ft", length_ft)?;
    let s = validate::positive("slope_ft_ft", slope_ft_ft)?;
    Ok(kirpich(KIRPICH_US, l, s))
}

fn kirpich(k: f32, l: f32, s: f32) -> f32 {
    k * math::powf(l, KIRPICH_LENGTH_EXP) * math::powf(s, -KIRPICH_SLOPE_EXP)
}

/// Manning velocity (SI), m/s: V = (1/n)·R^(2/3)·S^(1/2). `manning_n` > 0, hydraulic radius
/// > 0 (m), slope > 0 (m/m).
pub fn manning_velocity_m_s(
    manning_n: f32,
    hydraulic_radius_m: f32,
    slope_m_m: f32,
) -> Result<f32, RunoffError> {
    let n = validate::positive("manning_n", manning_n)?;
    let r = validate::positive("hydraulic_radius_m", hydraulic_radius_m)?;
    let s = validate::positive("slope_m_m", slope_m_m)?;
    Ok(manning(n, r, s))
}

fn manning(n: f32, r: f32, s: f32) -> f32 {
    math::powf(r, 2.0 / 3.0) * math::sqrt(s) / n
}

/// One reach of a flow path: its length and the velocity water travels it at.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Segment {
    length_m: f32,
    velocity_m_s: f32,
}

impl Segment {
    /// A reach of `length_m` (> 0) travelled at a stated `velocity_m_s` (> 0).
    pub fn at_velocity(length_m: f32, velocity_m_s: f32) -> Result<Self, RunoffError> {
        Ok(Self {
            length_m: validate::positive("length_m", length_m)?,
            velocity_m_s: validate::positive("velocity_m_s", velocity_m_s)?,
        })
    }

    /// A circular pipe flowing full: Manning velocity with R = D/4.
    pub fn full_pipe(
        length_m: f32,
        diameter_m: f32,
        slope_m_m: f32,
        manning_n: f32,
    ) -> Result<Self, RunoffError> {
        let d = validate::positive("diameter_m", diameter_m)?;
        let v = manning_velocity_m_s(manning_n, d / 4.0, slope_m_m)?;
        Self::at_velocity(length_m, v)
    }

    /// A rectangular channel of `width_m` flowing at `depth_m`: Manning velocity with
    /// R = b·y/(b + 2y).
    pub fn rectangular(
        length_m: f32,
        width_m: f32,
        depth_m: f32,
        slope_m_m: f32,
        manning_n: f32,
    ) -> Result<Self, RunoffError> {
        let b = validate::positive("width_m", width_m)?;
        let y = validate::positive("depth_m", depth_m)?;
        let v = manning_velocity_m_s(manning_n, b * y / (b + 2.0 * y), slope_m_m)?;
        Self::at_velocity(length_m, v)
    }

    /// A trapezoidal channel (bottom width ≥ 0, side slope z ≥ 0 horizontal per vertical, not
    /// both zero) flowing at `depth_m`: Manning velocity with A = (b + z·y)·y,
    /// P = b + 2·y·√(1 + z²).
    pub fn trapezoidal(
        length_m: f32,
        bottom_width_m: f32,
        depth_m: f32,
        side_slope_h_per_v: f32,
        slope_m_m: f32,
        manning_n: f32,
    ) -> Result<Self, RunoffError> {
        let b = validate::non_negative("bottom_width_m", bottom_width_m)?;
        let y = validate::positive("depth_m", depth_m)?;
        let z = validate::non_negative("side_slope_h_per_v", side_slope_h_per_v)?;
        let area_m2 = (b + z * y) * y;
        let perimeter_m = b + 2.0 * y * math::sqrt(1.0 + z * z);
        // b = z = 0 gives R = 0, which Manning's validation rejects as hydraulic_radius_m.
        let v = manning_velocity_m_s(manning_n, area_m2 / perimeter_m, slope_m_m)?;
        Self::at_velocity(length_m, v)
    }

    /// Length of the reach, m.
    pub fn length_m(&self) -> f32 {
        self.length_m
    }

    /// Velocity along the reach, m/s.
    pub fn velocity_m_s(&self) -> f32 {
        self.velocity_m_s
    }

    /// Travel time along the reach, s (length / velocity).
    pub fn travel_s(&self) -> f32 {
        self.length_m / self.velocity_m_s
    }
}

/// A flow path: an inlet (overland) time, then reaches in series. Tc = inlet time + Σ travel.
#[derive(Debug, Clone, PartialEq)]
pub struct FlowPath {
    inlet_s: u32,
    segments: Vec<Segment, MAX_PATH_SEGMENTS>,
    tc: TimeOfConcentration,
}

impl FlowPath {
    /// A path with `inlet_s` of inlet time and up to [`MAX_PATH_SEGMENTS`] reaches; the total
    /// must round to 1..=[`MAX_TC_S`] s.
    pub fn new(inlet_s: u32, segments: &[Segment]) -> Result<Self, RunoffError> {
        let stored = Vec::from_slice(segments).map_err(|_| RunoffError::Capacity {
            what: "flow-path segments",
            capacity: MAX_PATH_SEGMENTS,
        })?;
        let travel_s = segments.iter().map(Segment::travel_s).sum::<f32>();
        let total_s = inlet_s as f32 + travel_s;
        let tc = TimeOfConcentration::from_s_f32("flow_path_tc_s", total_s, total_s)?;
        Ok(Self {
            inlet_s,
            segments: stored,
            tc,
        })
    }

    /// The time of concentration of the path.
    pub fn tc(&self) -> TimeOfConcentration {
        self.tc
    }

    /// The inlet time, s.
    pub fn inlet_s(&self) -> u32 {
        self.inlet_s
    }

    /// Travel time along the reaches alone, s.
    pub fn travel_s(&self) -> f32 {
        self.segments.iter().map(Segment::travel_s).sum()
    }

    /// The reaches as given.
    pub fn segments(&self) -> &[Segment] {
        &self.segments
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn minutes_round_to_the_nearest_second() {
        assert_eq!(TimeOfConcentration::from_min(10.0).unwrap().s(), 600);
        assert_eq!(TimeOfConcentration::from_min(0.0251).unwrap().s(), 2);
        assert_eq!(TimeOfConcentration::from_s(90).unwrap().min(), 1.5);
    }

    #[test]
    fn tc_out_of_range_is_rejected() {
        assert!(TimeOfConcentration::from_s(0).is_err());
        assert!(TimeOfConcentration::from_s(MAX_TC_S + 1).is_err());
        assert!(TimeOfConcentration::from_min(0.0).is_err());
        assert!(TimeOfConcentration::from_min(-3.0).is_err());
        assert!(TimeOfConcentration::from_min(f32::NAN).is_err());
        assert!(TimeOfConcentration::from_min(3000.0).is_err());
        assert!(FlowPath::new(0, &[]).is_err());
    }

    #[test]
    fn segments_reject_bad_geometry() {
        assert!(Segment::at_velocity(100.0, 0.0).is_err());
        assert!(Segment::at_velocity(-1.0, 1.0).is_err());
        assert!(Segment::full_pipe(100.0, 0.3, 0.0, 0.013).is_err());
        assert!(Segment::full_pipe(100.0, 0.3, 0.01, 0.0).is_err());
        assert!(Segment::rectangular(100.0, 1.0, -0.2, 0.01, 0.03).is_err());
        assert!(Segment::trapezoidal(100.0, 0.0, 0.5, 0.0, 0.01, 0.03).is_err());
        assert!(Segment::trapezoidal(100.0, 0.0, 0.5, 2.0, 0.01, 0.03).is_ok());
    }

    #[test]
    fn too_many_segments_is_a_capacity_error() {
        let s = Segment::at_velocity(10.0, 1.0).unwrap();
        assert!(matches!(
            FlowPath::new(60, &[s; MAX_PATH_SEGMENTS + 1]),
            Err(RunoffError::Capacity { .. })
        ));
    }
}
