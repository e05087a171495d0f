//! From a release target to a gate opening, and how long drawdown will take.
//!
//! Units: stage m, storage m³, release m³/s, opening m, time s.

use crate::hydraulics::{HydraulicsError, Outlet};
use crate::storage::StageStorage;

/// Slices of the stage range in the drawdown-time estimate.
pub const DRAIN_SLICES: u32 = 16;

/// How an opening relates to its target.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Fit {
    /// The opening gives the target.
    Exact,
    /// The fixed structures alone pass more than the target: the gate is closed.
    FixedExceeds,
    /// Even full open passes less than the target: the gate is full open.
    CapacityLimited,
}

/// The gate opening (m) giving total release `target_m3s` at `stage_m` (rating inverse),
/// closed where the fixed structures already pass more, full open where even that is less.
pub(crate) fn opening_for_target(outlet: &Outlet, stage_m: f32, target_m3s: f32) -> (f32, Fit) {
    let target = if target_m3s > 0.0 { target_m3s } else { 0.0 };
    match outlet.opening_for(stage_m, target) {
        Ok(a) => (a, Fit::Exact),
        Err(HydraulicsError::Unreachable { min_m3s, .. }) if target < min_m3s => {
            (0.0, Fit::FixedExceeds)
        }
        Err(HydraulicsError::Unreachable { .. }) => (outlet.max_opening_m(), Fit::CapacityLimited),
        Err(_) => (0.0, Fit::FixedExceeds),
    }
}

/// Release under a cap at `stage_m`: `max(fixed, min(cap, full open))`, m³/s (the
/// [`crate::forecast::Policy::CapRelease`] law).
pub(crate) fn capped_release_m3s(outlet: &Outlet, stage_m: f32, cap_m3s: f32) -> f32 {
    let fixed = outlet.fixed_discharge_m3s(stage_m);
    let full = fixed + outlet.gate_discharge_m3s(stage_m, outlet.max_opening_m());
    fixed.max(full.min(cap_m3s))
}

/// Time (s) to drain from `stage_m` down to `to_stage_m` releasing under `cap_m3s`, with no
/// inflow: `Σ ΔV / Q(mid-slice stage)` over [`DRAIN_SLICES`] equal stage slices (midpoint
/// rule on `t = ∫ dV / Q`). `None` when some slice releases nothing (the pond cannot get
/// there). 0 when already at or below.
pub(crate) fn drain_time_s(
    pond: &StageStorage,
    outlet: &Outlet,
    stage_m: f32,
    to_stage_m: f32,
    cap_m3s: f32,
) -> Option<f32> {
    if stage_m.is_nan() || stage_m <= to_stage_m {
        return Some(0.0);
    }
    let dh = (stage_m - to_stage_m) / DRAIN_SLICES as f32;
    let mut t = 0.0_f32;
    let mut v_lo = pond.storage_m3(to_stage_m);
    for k in 0..DRAIN_SLICES {
        let lo = to_stage_m + dh * k as f32;
        let hi = lo + dh;
        let v_hi = pond.storage_m3(hi);
        let q = capped_release_m3s(outlet, lo + 0.5 * dh, cap_m3s);
        if q.is_nan() || q <= 1.0e-9 {
            return None;
        }
        t += (v_hi - v_lo) / q;
        v_lo = v_hi;
    }
    Some(t)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hydraulics::SluiceGate;
    use crate::storage::VolumeMethod;

    /// A prismatic pond drained at a constant capped release takes V / Q (continuity).
    #[test]
    fn drain_time_at_a_constant_release_is_volume_over_rate() {
        let pond = StageStorage::from_areas(&[(0.0, 1000.0), (3.0, 1000.0)], VolumeMethod::Frustum)
            .unwrap();
        let g = SluiceGate::new(0.0, 2.0, 1.0, 0.61, 0.98).unwrap();
        let o = Outlet::new(&[], Some(g), None).unwrap();
        // Full open at 0.5 m passes far more than 0.01 m³/s, so the cap binds above ~0.
        let t = drain_time_s(&pond, &o, 1.0, 0.5, 0.01).unwrap();
        assert!((t - 500.0 / 0.01).abs() < 1.0, "{t}");
        assert_eq!(drain_time_s(&pond, &o, 0.4, 0.5, 0.01), Some(0.0));
        assert_eq!(drain_time_s(&pond, &o, 1.0, 0.5, 0.0), None);
        let (a, fit) = opening_for_target(&o, 1.0, 100.0);
        assert_eq!((a, fit), (1.0, Fit::CapacityLimited));
        assert_eq!(opening_for_target(&o, 1.0, 0.0).0, 0.0);
    }
}
