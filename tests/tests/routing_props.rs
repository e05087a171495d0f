//! Property tests of level-pool routing invariants. Sources: continuity (storage change =
//! inflow volume − released volume); the exact solution of dS/dt = I − O(S) with steady
//! inflow and a non-decreasing outlet is monotone in time and never passes its equilibrium
//! or the outlet invert (a scalar autonomous ODE cannot cross an equilibrium).

use holdback_core::G_M_S2;
use holdback_core::math;
use holdback_core::routing::{Inflow, step};
use holdback_core::storage::{BasinGeometry, StageStorage};
use proptest::prelude::*;

fn basin() -> impl Strategy<Value = StageStorage> {
    (1.0_f32..60.0, 1.0_f32..60.0, 0.0_f32..4.0, 0.5_f32..4.0).prop_map(|(l, w, z, d)| {
        StageStorage::from_basin(BasinGeometry {
            floor_m: 20.0,
            length_m: l,
            width_m: w,
            side_slope_h_per_v: z,
            depth_m: d,
        })
        .unwrap()
    })
}

/// Torricelli orifice `Cd·a·√(2g(h − invert))`, 0 at and below the invert.
fn orifice(cd_a: f32, invert_m: f32) -> impl Fn(f32) -> f32 {
    move |h: f32| {
        if h > invert_m {
            cd_a * math::sqrt(2.0 * G_M_S2 * (h - invert_m))
        } else {
            0.0
        }
    }
}

/// True if the significant storage changes all share one sign.
fn monotone(storages: &[f32], tol: f32) -> bool {
    let mut sign = 0.0_f32;
    for w in storages.windows(2) {
        let ds = w[1] - w[0];
        if ds.abs() <= tol {
            continue;
        }
        if sign != 0.0 && ds.signum() != sign {
            return false;
        }
        sign = ds.signum();
    }
    true
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Over many steps, end storage = start + inflow volume − released volume (f64 sums of
    /// what the steps report), storage never negative, each step's balance error at rounding.
    #[test]
    fn volume_balance_holds_over_many_steps(
        pond in basin(),
        cd_a in 1e-4_f32..3.0,
        invert in 19.5_f32..23.0,
        s0 in 0.0_f32..5000.0,
        inflows in prop::collection::vec(0.0_f32..5.0, 2..80),
        dt in 1_u32..=300,
    ) {
        let outlet = orifice(cd_a, invert);
        let mut s = s0;
        let (mut vin, mut vout) = (0.0_f64, 0.0_f64);
        for w in inflows.windows(2) {
            let r = step(&pond, &outlet, s, Inflow::ramp(w[0], w[1]), dt);
            prop_assert!(r.storage_m3 >= 0.0 && r.released_m3 >= 0.0, "{:?}", r);
            prop_assert!(r.stage_m >= pond.floor_m());
            let v_step = 0.5 * dt as f64 * (w[0] as f64 + w[1] as f64);
            prop_assert!(r.balance_error_m3.abs() <= 1e-6 * (s as f64 + v_step) as f32 + 1e-6);
            vin += v_step;
            vout += r.released_m3 as f64;
            s = r.storage_m3;
        }
        let expect = s0 as f64 + vin - vout;
        let scale = s0 as f64 + vin + 1.0;
        prop_assert!((s as f64 - expect).abs() <= 2e-6 * scale * inflows.len() as f64,
            "end {} expected {}", s, expect);
    }

    /// A very large orifice on a small pond at dt = 300 s (dt·dO/dS up to ~10⁴): with steady
    /// inflow the routed storage moves monotonically (no sign alternation of dS), never
    /// below 0, and the stage never drops below the invert once above it.
    #[test]
    fn stiff_orifice_at_300s_does_not_oscillate(
        l in 1.0_f32..10.0, w in 1.0_f32..10.0,
        cd_a in 0.05_f32..5.0,
        invert in 20.0_f32..21.0,
        h0 in 20.0_f32..23.0,
        inflow in prop_oneof![Just(0.0_f32), 0.0_f32..3.0],
    ) {
        let pond = StageStorage::from_basin(BasinGeometry {
            floor_m: 20.0, length_m: l, width_m: w, side_slope_h_per_v: 1.0, depth_m: 3.0,
        }).unwrap();
        let outlet = orifice(cd_a, invert);
        let mut s = pond.storage_m3(h0);
        let mut storages = vec![s];
        let start_above = h0 > invert;
        for _ in 0..40 {
            let r = step(&pond, &outlet, s, Inflow::steady(inflow), 300);
            prop_assert!(r.storage_m3 >= 0.0);
            if start_above {
                prop_assert!(r.stage_m >= invert - 1e-4, "{:?} invert {}", r, invert);
            }
            s = r.storage_m3;
            storages.push(s);
        }
        let tol = 1e-5 * storages.iter().cloned().fold(1.0, f32::max);
        prop_assert!(monotone(&storages, tol), "{:?}", storages);
    }

    /// Stiff linear reservoir (k from 0.5 s to 100 s, dt = 300 s): monotone approach to I·k.
    #[test]
    fn stiff_linear_reservoir_at_300s_is_monotone(
        k in 0.5_f32..100.0, inflow in 0.0_f32..3.0, h0 in 0.0_f32..2.0,
    ) {
        let pond = StageStorage::from_basin(BasinGeometry {
            floor_m: 0.0, length_m: 10.0, width_m: 10.0, side_slope_h_per_v: 0.0, depth_m: 3.0,
        }).unwrap();
        let outlet = move |h: f32| 100.0 * h.max(0.0) / k;
        let mut s = pond.storage_m3(h0);
        let mut storages = vec![s];
        for _ in 0..30 {
            s = step(&pond, &outlet, s, Inflow::steady(inflow), 300).storage_m3;
            storages.push(s);
        }
        let eq = inflow * k;
        prop_assert!(monotone(&storages, 1e-4 * (eq + 200.0)), "{:?}", storages);
        prop_assert!((s - eq).abs() <= 1e-3 * eq + 1e-3);
    }

    /// Any finite or non-finite input gives a finite, non-negative result (no panic).
    #[test]
    fn arbitrary_inputs_give_finite_results(
        s in prop::num::f32::ANY, a in prop::num::f32::ANY, b in prop::num::f32::ANY,
        dt in 0_u32..=u32::MAX, cd_a in 0.0_f32..10.0,
    ) {
        let pond = StageStorage::from_basin(BasinGeometry {
            floor_m: 0.0, length_m: 10.0, width_m: 10.0, side_slope_h_per_v: 2.0, depth_m: 3.0,
        }).unwrap();
        let r = step(&pond, &orifice(cd_a, 0.2), s, Inflow::ramp(a, b), dt);
        prop_assert!(r.storage_m3.is_finite() && r.storage_m3 >= 0.0, "{:?}", r);
        prop_assert!(r.released_m3.is_finite() && r.released_m3 >= 0.0, "{:?}", r);
        prop_assert!(r.stage_m.is_finite(), "{:?}", r);
    }
}
