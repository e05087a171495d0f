//! Sizing invariants as properties over random cases (inputs drawn at random; the checks
//! are against definitions: rational-method volume C·i·A·Tr, monotonicity in the permit,
//! the critical duration as a maximum).

use holdback_core::rain::{Idf, IdfCurves, IdfFormula};
use holdback_core::runoff::{
    AreaHa, Catchment, RunoffCoefficient, SubCatchment, TimeOfConcentration,
};
use holdback_core::sizing::{DurationGrid, SizingCase};
use holdback_core::storage::{BasinGeometry, StageStorage};
use holdback_tests::runoff64;
use proptest::prelude::*;

fn case_inputs(a: f32, b: f32, parts: &[(f32, f32, u32, u32)]) -> (IdfCurves, Catchment) {
    let idf = IdfCurves::new(&[(10.0, IdfFormula::Talbot { a, b })], 5.0, 1440.0).unwrap();
    let subs: Vec<SubCatchment> = parts
        .iter()
        .map(|&(c, ha, tc, lag)| {
            SubCatchment::new(
                RunoffCoefficient::new(c).unwrap(),
                AreaHa::new(ha).unwrap(),
                TimeOfConcentration::from_s(tc).unwrap(),
                lag,
            )
            .unwrap()
        })
        .collect();
    (idf, Catchment::new(&subs).unwrap())
}

fn parts() -> impl Strategy<Value = Vec<(f32, f32, u32, u32)>> {
    prop::collection::vec((0.1f32..0.95, 0.2f32..20.0, 300u32..3600, 0u32..1800), 1..4)
}

fn pond() -> StageStorage {
    StageStorage::from_basin(BasinGeometry {
        floor_m: 0.0,
        length_m: 40.0,
        width_m: 20.0,
        side_slope_h_per_v: 3.0,
        depth_m: 3.0,
    })
    .unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Hydrograph volume = Σ C·i·A·Tr (rational method, SI: 1 mm/h on 1 ha = 1/360 m³/s,
    /// f64 via runoff64), with i the IDF intensity for Tr.
    #[test]
    fn hydrograph_volume_is_c_i_a_tr(a in 500.0f32..5000.0, b in 2.0f32..30.0, p in parts(), tr in 60u32..14_400) {
        let (idf, c) = case_inputs(a, b, &p);
        let case = SizingCase::new(&idf, 10.0, &c, 0.1).unwrap();
        let i = idf.intensity_mm_h(tr as f32 / 60.0, 10.0) as f64;
        let want: f64 = p.iter().map(|&(cc, ha, _, _)| runoff64::rational_si_m3s(cc as f64, i, ha as f64) * tr as f64).sum();
        let bp = case.balance_at(tr).unwrap();
        prop_assert!((bp.inflow_volume_m3 as f64 - want).abs() <= 1e-5 * want);
        prop_assert!((case.hydrograph(tr).unwrap().volume_m3() as f64 - want).abs() <= 1e-5 * want);
    }

    /// Volume balance: storage ≥ 0 and non-increasing in the permit (more release at every
    /// time holds less at every time), for every duration and for the critical one.
    #[test]
    fn volume_balance_is_non_negative_and_falls_with_the_permit(
        a in 500.0f32..5000.0, b in 2.0f32..30.0, p in parts(), q1 in 0.0f32..2.0, dq in 0.0f32..2.0,
    ) {
        let (idf, c) = case_inputs(a, b, &p);
        let lo = SizingCase::new(&idf, 10.0, &c, q1).unwrap();
        let hi = SizingCase::new(&idf, 10.0, &c, q1 + dq).unwrap();
        let grid = DurationGrid::new(300, 10_800, 300).unwrap();
        for d in grid.durations_s() {
            let (x, y) = (lo.balance_at(d).unwrap(), hi.balance_at(d).unwrap());
            prop_assert!(y.storage_m3 >= 0.0 && y.storage_m3 <= x.storage_m3 * (1.0 + 1e-5) + 1e-3);
        }
        let (x, y) = (lo.volume_balance(&grid).unwrap(), hi.volume_balance(&grid).unwrap());
        prop_assert!(y.storage_m3 >= 0.0 && y.storage_m3 <= x.storage_m3 * (1.0 + 1e-5) + 1e-3);
    }

    /// The critical duration is a maximum: its grid neighbours need no more storage.
    #[test]
    fn critical_duration_is_a_maximum(a in 500.0f32..5000.0, b in 2.0f32..30.0, p in parts(), q in 0.01f32..1.0) {
        let (idf, c) = case_inputs(a, b, &p);
        let case = SizingCase::new(&idf, 10.0, &c, q).unwrap();
        let grid = DurationGrid::new(120, 14_400, 120).unwrap();
        let best = case.volume_balance(&grid).unwrap();
        for d in [best.duration_s.saturating_sub(120), best.duration_s + 120] {
            if (120..=14_400).contains(&d) {
                prop_assert!(case.balance_at(d).unwrap().storage_m3 <= best.storage_m3);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(32))]

    /// Routed with a perfect controller (capacity 1e3 m³/s capped at the permit): detention
    /// ≥ 0, non-increasing in the permit, never above the volume balance for one
    /// sub-catchment without lag (module doc), and the critical duration is a maximum.
    #[test]
    fn routed_storage_is_bounded_and_falls_with_the_permit(
        a in 500.0f32..5000.0, b in 2.0f32..30.0, cc in 0.1f32..0.95, ha in 0.2f32..5.0,
        tc in 300u32..1800, q1 in 0.01f32..0.5, dq in 0.0f32..0.5,
    ) {
        let (idf, c) = case_inputs(a, b, &[(cc, ha, tc, 0)]);
        let pond = pond();
        let lo = SizingCase::new(&idf, 10.0, &c, q1).unwrap();
        let hi = SizingCase::new(&idf, 10.0, &c, q1 + dq).unwrap();
        let big = |_h: f32| 1.0e3f32;
        let grid = DurationGrid::new(600, 7200, 600).unwrap();
        let x = lo.routed(&pond, &lo.capped(&big), 0.0, 60, &grid).unwrap();
        let y = hi.routed(&pond, &hi.capped(&big), 0.0, 60, &grid).unwrap();
        prop_assert!(y.detention_m3 >= 0.0 && y.detention_m3 <= x.detention_m3 * (1.0 + 1e-4) + 1e-2);
        prop_assert!(x.peak_release_m3s <= q1 * (1.0 + 1e-6));
        prop_assert!(lo.volume_balance(&grid).unwrap().storage_m3 >= x.detention_m3 * (1.0 - 1e-4) - 1e-2);
        for d in [x.duration_s.saturating_sub(600), x.duration_s + 600] {
            if (600..=7200).contains(&d) {
                let r = lo.route_at(&pond, &lo.capped(&big), 0.0, 60, d).unwrap();
                prop_assert!(r.peak_storage_m3 <= x.peak_storage_m3);
            }
        }
    }
}
