//! Property tests of the storage forecast: invariants that must hold for any pond state,
//! outlook and policy (sources named on each).

use holdback_core::flow::StageDischarge;
use holdback_core::forecast::{Limits, Outlook, Policy, predict, release_to_hold};
use holdback_core::hydraulics::{CircularOrifice, Outlet, SluiceGate};
use holdback_core::storage::{BasinGeometry, StageStorage};
use proptest::prelude::*;

/// Invented basin, 30 m × 20 m floor at 50 m, 2.5:1 sides, 2.5 m deep (checks only).
fn basin() -> StageStorage {
    StageStorage::from_basin(BasinGeometry {
        floor_m: 50.0,
        length_m: 30.0,
        width_m: 20.0,
        side_slope_h_per_v: 2.5,
        depth_m: 2.5,
    })
    .unwrap()
}

/// Invented outlet: a 100 mm orifice 0.1 m above the floor and a 0.5 m gate at the floor.
fn outlet() -> Outlet {
    let o = CircularOrifice::new(50.1, 0.1, 0.6).unwrap();
    let g = SluiceGate::new(50.0, 0.5, 0.4, 0.61, 0.98).unwrap();
    Outlet::new(&[o.into()], Some(g), None).unwrap()
}

fn outlook() -> impl Strategy<Value = Vec<f32>> {
    prop::collection::vec(0.0_f32..1.5, 1..=60)
}

fn policy() -> impl Strategy<Value = Policy> {
    prop_oneof![
        (0.0_f32..0.5).prop_map(|opening_m| Policy::Fixed { opening_m }),
        (0.0_f32..2.0).prop_map(|cap_m3s| Policy::CapRelease { cap_m3s }),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Storage never goes negative, the peak is never below the current state, and the
    /// forecast conserves volume (continuity: S0 + inflow − released = end storage).
    #[test]
    fn storage_never_negative_and_peak_not_below_now(
        q in outlook(), s0 in 0.0_f32..3000.0, pol in policy(), step in 60_u32..=600,
    ) {
        let pond = basin();
        let look = Outlook::from_samples(step, &q).unwrap();
        let lim = Limits::new(0.1, 52.0, 52.5).unwrap();
        let p = predict(&pond, &outlet(), s0, &look, pol, &lim);
        let h0 = pond.stage_m(s0);
        prop_assert!(p.end_storage_m3 >= 0.0 && p.peak_storage_m3 >= 0.0);
        prop_assert!(p.peak_stage_m >= h0, "{p:?} vs {h0}");
        prop_assert!(p.peak_stage_m >= p.end_stage_m);
        prop_assert!(p.released_m3 >= 0.0);
        let bal = s0 + p.inflow_m3 - p.released_m3 - p.end_storage_m3;
        prop_assert!(bal.abs() <= 1e-4 * (s0 + p.inflow_m3) + 1e-2, "balance {bal}");
    }

    /// `CapRelease { permit }` never releases more than max(permit, fixed-structure flow):
    /// "release ≤ permit where the gate can achieve it" (DESIGN.md, the perfect-foresight
    /// schedule), checked at every stage the pond can take.
    #[test]
    fn capped_release_is_at_most_permit_or_fixed_flow(
        h in 49.0_f32..55.0, permit in 0.0_f32..2.0,
    ) {
        let o = outlet();
        let q = Policy::CapRelease { cap_m3s: permit }.on(&o).discharge_m3s(h);
        let fixed = o.fixed_discharge_m3s(h);
        prop_assert!(q <= permit.max(fixed), "{q} > max({permit}, {fixed})");
        prop_assert!(q >= fixed);
    }

    /// The cap `release_to_hold` returns is minimal: it holds the stage limit and the cap
    /// minus the bisection tolerance (plus a margin for the solver's own tolerance) does not
    /// (bisection invariant; the forecast peak falls as the cap rises).
    #[test]
    fn hold_cap_is_minimal(
        q in outlook(), s0 in 0.0_f32..1500.0, permit in 0.01_f32..0.3,
    ) {
        let pond = basin();
        let o = outlet();
        let look = Outlook::from_samples(180, &q).unwrap();
        let lim = Limits::new(permit, 51.8, 52.5).unwrap();
        let hold = release_to_hold(&pond, &o, s0, &look, &lim);
        prop_assert!(hold.cap_m3s >= permit);
        if hold.feasible {
            prop_assert!(hold.prediction.peak_stage_m <= lim.stage_limit_m);
            if hold.cap_m3s > permit {
                let eps = 2.0 * (1e-3_f32).max(1e-3 * hold.cap_m3s);
                let below = (hold.cap_m3s - eps).max(permit);
                let p = predict(&pond, &o, s0, &look, Policy::CapRelease { cap_m3s: below }, &lim);
                prop_assert!(p.peak_stage_m > lim.stage_limit_m, "{hold:?} {p:?}");
            }
        } else {
            let open = Policy::Fixed { opening_m: o.max_opening_m() };
            let p = predict(&pond, &o, s0, &look, open, &lim);
            prop_assert!(p.peak_stage_m > lim.stage_limit_m);
        }
    }
}
