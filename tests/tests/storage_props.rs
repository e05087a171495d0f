//! Property tests of stage–storage invariants (invariants of any stage–storage relation:
//! storage is the integral of a non-negative area, so it is monotone in stage, and the
//! inverse undoes the forward map).

use holdback_core::storage::{BasinGeometry, StageStorage, VolumeMethod};
use proptest::prelude::*;

fn survey() -> impl Strategy<Value = Vec<(f32, f32)>> {
    (
        90.0_f32..110.0,
        prop::collection::vec((0.01_f32..1.5, 0.0_f32..5000.0), 1..31),
        1.0_f32..5000.0,
    )
        .prop_map(|(floor, steps, top_area)| {
            let mut h = floor;
            let mut rows = vec![(h, 0.0)];
            let n = steps.len();
            for (i, (dh, a)) in steps.into_iter().enumerate() {
                h += dh;
                rows.push((h, if i + 1 == n { top_area } else { a }));
            }
            rows
        })
}

fn method() -> impl Strategy<Value = VolumeMethod> {
    prop_oneof![
        Just(VolumeMethod::AverageEndArea),
        Just(VolumeMethod::Frustum)
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Storage never decreases with stage, and area is never negative.
    #[test]
    fn storage_is_monotone_in_stage(rows in survey(), m in method(), a in 0.0_f32..1.0, b in 0.0_f32..1.0) {
        let s = StageStorage::from_areas(&rows, m).unwrap();
        let span = s.top_m() - s.floor_m() + 1.0;
        let (lo, hi) = if a < b { (a, b) } else { (b, a) };
        let (h1, h2) = (s.floor_m() - 0.5 + lo * span, s.floor_m() - 0.5 + hi * span);
        prop_assert!(s.storage_m3(h1) <= s.storage_m3(h2) * (1.0 + 1e-6));
        prop_assert!(s.storage_m3(h1) >= 0.0);
        prop_assert!(s.area_m2(h1) >= 0.0);
    }

    /// stage(storage(h)) = h within 1 mm wherever the area is not ~0 (where the area is 0 the
    /// stage is not determined by the storage and the inverse returns the lowest stage).
    #[test]
    fn stage_of_storage_round_trips_within_1mm(rows in survey(), m in method(), t in 0.0_f32..1.0) {
        let s = StageStorage::from_areas(&rows, m).unwrap();
        let h = s.floor_m() + t * (s.top_m() - s.floor_m() + 0.5);
        let back = s.stage_m(s.storage_m3(h));
        if s.area_m2(h) > 1.0 {
            prop_assert!((back - h).abs() < 1e-3, "h={} back={}", h, back);
        } else {
            prop_assert!(back <= h + 1e-3);
        }
    }

    /// The same for the analytic basin, where the area is never 0.
    #[test]
    fn basin_round_trips_within_1mm(l in 1.0_f32..200.0, w in 1.0_f32..200.0, z in 0.0_f32..6.0,
                                    d in 0.2_f32..6.0, t in 0.0_f32..1.2) {
        let g = BasinGeometry { floor_m: 50.0, length_m: l, width_m: w, side_slope_h_per_v: z, depth_m: d };
        let s = StageStorage::from_basin(g).unwrap();
        let h = 50.0 + t * d;
        prop_assert!((s.stage_m(s.storage_m3(h)) - h).abs() < 1e-3);
    }

    /// Volume tables: same two invariants.
    #[test]
    fn volume_table_monotone_and_round_trips(incs in prop::collection::vec((0.01_f32..2.0, 0.1_f32..900.0), 1..31),
                                              t in 0.0_f32..1.0) {
        let mut rows = vec![(0.0_f32, 0.0_f32)];
        for (dh, dv) in incs {
            let &(h, v) = rows.last().unwrap();
            rows.push((h + dh, v + dv));
        }
        let s = StageStorage::from_volumes(&rows).unwrap();
        let h = t * (s.top_m() + 0.5);
        prop_assert!((s.stage_m(s.storage_m3(h)) - h).abs() < 1e-3);
        prop_assert!(s.storage_m3(h) <= s.storage_m3(h + 0.01));
    }
}
