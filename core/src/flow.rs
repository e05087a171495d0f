//! The seam between outlets and routing: anything that releases water as a function of the
//! water-surface stage.
//!
//! Routing and the forecast take `&impl StageDischarge`, so they work with a composite outlet
//! at a fixed gate opening, a single structure, or a test closure, without knowing which.
//!
//! Invariants an implementation must keep (routing relies on them for stability):
//! - zero at and below the lowest invert, never negative, never NaN for a finite stage;
//! - monotone non-decreasing in stage.

/// Discharge (m³/s) at a water-surface stage (m, same datum as the structure inverts).
pub trait StageDischarge {
    /// Discharge in m³/s at `stage_m`. Must be ≥ 0, finite, and non-decreasing in stage.
    fn discharge_m3s(&self, stage_m: f32) -> f32;
}

impl<F: Fn(f32) -> f32> StageDischarge for F {
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        self(stage_m)
    }
}
