//! Stage–storage volumes against the prismoidal formula, hand values and the f64 reference.

use holdback_core::storage::{BasinGeometry, StageStorage, StorageError, VolumeMethod};
use holdback_tests::storage64::{Basin64, Method64, Table64};

const BASIN: BasinGeometry = BasinGeometry {
    floor_m: 100.0,
    length_m: 40.0,
    width_m: 20.0,
    side_slope_h_per_v: 3.0,
    depth_m: 2.5,
};

fn basin_areas(n: usize) -> Vec<(f32, f32)> {
    let b = Basin64 {
        floor_m: 100.0,
        length_m: 40.0,
        width_m: 20.0,
        z: 3.0,
    };
    (0..n)
        .map(|i| {
            let h = 100.0 + 2.5 * i as f64 / (n - 1) as f64;
            (h as f32, b.area_m2(h) as f32)
        })
        .collect()
}

/// Hand value from the prismoidal formula V = y/6·(A0 + 4·Am + A1) for the 40 × 20 m basin,
/// 3:1 sides, 2.5 m deep: A0 = 800, Am = 47.5·27.5 = 1306.25, A1 = 55·35 = 1925 m²,
/// V = 2.5/6·7950 = 3312.5 m³ (worked by hand; the prismoidal formula is exact for a solid
/// whose section area is quadratic in height).
#[test]
fn basin_geometry_matches_hand_prismoidal_volume() {
    let s = StageStorage::from_basin(BASIN).unwrap();
    assert!(
        (s.top_storage_m3() - 3312.5).abs() < 0.01,
        "{}",
        s.top_storage_m3()
    );
    assert!((s.area_m2(102.5) - 1925.0).abs() < 0.01);
    assert!((s.area_m2(101.25) - 1306.25).abs() < 0.01);
    assert_eq!(s.floor_m(), 100.0);
    assert_eq!(s.top_m(), 102.5);
}

/// One segment over the same basin. Average-end-area: 2.5·(800 + 1925)/2 = 3406.25 m³,
/// over by Δh³/12·A'' = 15.625/12·72 = 93.75 m³ (trapezoid-rule error, A'' = 8z²).
/// Frustum: 2.5/3·(800 + 1925 + √(800·1925)) = 3304.97 m³ (hand value).
#[test]
fn one_segment_average_end_area_and_frustum_hand_values() {
    let rows = basin_areas(2);
    let aea = StageStorage::from_areas(&rows, VolumeMethod::AverageEndArea).unwrap();
    let fru = StageStorage::from_areas(&rows, VolumeMethod::Frustum).unwrap();
    assert!((aea.top_storage_m3() - 3406.25).abs() < 0.01);
    assert!((aea.top_storage_m3() - 3312.5 - 93.75).abs() < 0.01);
    let hand_frustum = 2.5 / 3.0 * (800.0 + 1925.0 + (800.0_f64 * 1925.0).sqrt());
    assert!((fru.top_storage_m3() as f64 - hand_frustum).abs() < 0.01);
}

/// Frustum of a square pyramid, bottom side 2 m, top side 4 m, height 3 m:
/// V = h/3·(a² + ab + b²) = 28 m³ (Heron's formula). The frustum method is exact here and at
/// any intermediate stage (side linear in height); average-end-area gives 3·(4 + 16)/2 = 30.
#[test]
fn truncated_square_pyramid_is_exact_by_frustum() {
    let rows = [(0.0, 4.0), (3.0, 16.0)];
    let fru = StageStorage::from_areas(&rows, VolumeMethod::Frustum).unwrap();
    let aea = StageStorage::from_areas(&rows, VolumeMethod::AverageEndArea).unwrap();
    assert!((fru.top_storage_m3() - 28.0).abs() < 1e-4);
    assert!((aea.top_storage_m3() - 30.0).abs() < 1e-4);
    // Halfway up the side is 3 m: V = 1.5/3·(4 + 6 + 9) = 9.5 m³.
    assert!((fru.storage_m3(1.5) - 9.5).abs() < 1e-4);
    assert!((fru.area_m2(1.5) - 9.0).abs() < 1e-4);
}

/// A square basin (30 × 30 m bottom, 3:1, 2 m) has √A linear in stage, so the frustum on any
/// table of its areas equals the prismoidal volume: 2/6·(900 + 4·1296 + 1764) = 2616 m³.
#[test]
fn square_basin_frustum_equals_prismoidal_at_every_stage() {
    let g = BasinGeometry {
        floor_m: 0.0,
        length_m: 30.0,
        width_m: 30.0,
        side_slope_h_per_v: 3.0,
        depth_m: 2.0,
    };
    let exact = StageStorage::from_basin(g).unwrap();
    let fru =
        StageStorage::from_areas(&[(0.0, 900.0), (2.0, 1764.0)], VolumeMethod::Frustum).unwrap();
    assert!((exact.top_storage_m3() - 2616.0).abs() < 0.01);
    for i in 0..=40 {
        let h = i as f32 * 0.05;
        let (a, b) = (exact.storage_m3(h), fru.storage_m3(h));
        assert!((a - b).abs() <= 1e-5 * 2616.0 + 1e-4, "h={h}: {a} vs {b}");
    }
}

/// Average-end-area over n equal segments of the rectangular basin errs by
/// A''·Y³/(12 n²) = 72·15.625/(12·n²) (composite trapezoid-rule error, exact here because
/// A is quadratic); the frustum errs far less. Both against the prismoidal volume.
#[test]
fn table_errors_shrink_as_the_trapezoid_rule_says() {
    for n_rows in [3_usize, 5, 9, 17] {
        let n = (n_rows - 1) as f32;
        let rows = basin_areas(n_rows);
        let aea = StageStorage::from_areas(&rows, VolumeMethod::AverageEndArea).unwrap();
        let fru = StageStorage::from_areas(&rows, VolumeMethod::Frustum).unwrap();
        let expected_over = 72.0 * 15.625 / (12.0 * n * n);
        let over = aea.top_storage_m3() - 3312.5;
        assert!(
            (over - expected_over).abs() < 0.02,
            "n={n}: {over} vs {expected_over}"
        );
        assert!((fru.top_storage_m3() - 3312.5).abs() < over, "n={n}");
    }
}

/// f32 core against the f64 reference (tests/src/storage64.rs, written from the same
/// published formulas): storage and area within 0.2 %, stage of a storage within 1 mm.
#[test]
fn f32_lookups_match_f64_reference() {
    let survey: Vec<(f32, f32)> = vec![
        (99.80, 0.0),
        (100.00, 310.0),
        (100.40, 820.0),
        (101.10, 1460.0),
        (101.50, 1500.0),
        (102.30, 2650.0),
        (103.00, 3120.0),
    ];
    for (m, m64) in [
        (VolumeMethod::AverageEndArea, Method64::AverageEndArea),
        (VolumeMethod::Frustum, Method64::Frustum),
    ] {
        let s = StageStorage::from_areas(&survey, m).unwrap();
        let r = Table64 {
            rows: survey.iter().map(|&(h, a)| (h as f64, a as f64)).collect(),
            method: m64,
        };
        for i in 0..=400 {
            let h = 99.7 + i as f64 * 0.01;
            let (v, v64) = (s.storage_m3(h as f32) as f64, r.storage_m3(h));
            assert!(
                (v - v64).abs() <= 2e-3 * v64 + 1e-3,
                "{m:?} h={h}: {v} vs {v64}"
            );
            let (a, a64) = (s.area_m2(h as f32) as f64, r.area_m2(h));
            assert!(
                (a - a64).abs() <= 2e-3 * a64 + 1e-3,
                "{m:?} h={h}: {a} vs {a64}"
            );
            if v64 > 0.0 {
                let back = s.stage_m(v64 as f32) as f64;
                assert!(
                    (back - r.stage_m(v64)).abs() < 1e-3,
                    "{m:?} v={v64}: {back}"
                );
            }
        }
    }
    let b = StageStorage::from_basin(BASIN).unwrap();
    let b64 = Basin64 {
        floor_m: 100.0,
        length_m: 40.0,
        width_m: 20.0,
        z: 3.0,
    };
    for i in 0..=300 {
        let h = 99.9 + i as f64 * 0.01;
        let (v, v64) = (b.storage_m3(h as f32) as f64, b64.storage_m3(h.min(102.5)));
        let v64 = v64 + if h > 102.5 { 1925.0 * (h - 102.5) } else { 0.0 };
        assert!(
            (v - v64).abs() <= 2e-3 * v64 + 1e-3,
            "basin h={h}: {v} vs {v64}"
        );
        if v64 > 0.0 && h <= 102.5 {
            assert!((b.stage_m(v64 as f32) as f64 - b64.stage_m(v64)).abs() < 1e-3);
        }
    }
}

/// A volume table is linear between rows (hand values) and extends with the last segment's
/// area above the top.
#[test]
fn volume_table_interpolates_linearly_and_extends_with_last_area() {
    let s = StageStorage::from_volumes(&[(5.0, 0.0), (6.0, 400.0), (7.0, 1000.0)]).unwrap();
    assert!((s.storage_m3(6.5) - 700.0).abs() < 1e-3);
    assert!((s.area_m2(6.5) - 600.0).abs() < 1e-3);
    assert!((s.storage_m3(8.0) - 1600.0).abs() < 1e-3);
    assert!((s.stage_m(200.0) - 5.5).abs() < 1e-5);
    assert!((s.stage_m(1600.0) - 8.0).abs() < 1e-5);
}

/// Every validation rule gives a typed error naming row, field and value.
#[test]
fn validation_errors_are_typed() {
    let e = StageStorage::from_areas(
        &[(1.0, 10.0), (2.0, 20.0), (1.5, 30.0)],
        VolumeMethod::Frustum,
    );
    assert_eq!(
        e,
        Err(StorageError::StageNotIncreasing {
            row: 2,
            stage_m: 1.5,
            previous_stage_m: 2.0
        })
    );
    match StageStorage::from_areas(&[(1.0, 10.0), (f32::NAN, 20.0)], VolumeMethod::Frustum) {
        Err(StorageError::BadValue { row: 1, invalid }) => assert_eq!(invalid.field, "stage_m"),
        other => panic!("{other:?}"),
    }
    match StageStorage::from_volumes(&[(1.0, 0.0), (2.0, -3.0)]) {
        Err(StorageError::BadValue { row: 1, invalid }) => {
            assert_eq!((invalid.field, invalid.value), ("volume_m3", -3.0))
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(
        StageStorage::from_volumes(&[(1.0, 0.0), (2.0, 9.0), (3.0, 8.0)]),
        Err(StorageError::VolumeDecreasing {
            row: 2,
            volume_m3: 8.0,
            previous_volume_m3: 9.0
        })
    );
    assert_eq!(
        StageStorage::from_volumes(&[(1.0, 2.0), (2.0, 9.0)]),
        Err(StorageError::FloorVolumeNotZero { volume_m3: 2.0 })
    );
    let rows: Vec<(f32, f32)> = (0..40).map(|i| (i as f32, 10.0)).collect();
    assert_eq!(
        StageStorage::from_areas(&rows, VolumeMethod::AverageEndArea),
        Err(StorageError::TooManyRows { rows: 40, max: 32 })
    );
    assert!(StageStorage::from_areas(&rows[..32], VolumeMethod::AverageEndArea).is_ok());
    assert_eq!(
        StageStorage::from_areas(&[], VolumeMethod::Frustum),
        Err(StorageError::TooFewRows { rows: 0, min: 2 })
    );
    let bad = BasinGeometry {
        side_slope_h_per_v: -1.0,
        ..BASIN
    };
    match StageStorage::from_basin(bad) {
        Err(StorageError::Geometry(i)) => assert_eq!(i.field, "side_slope_h_per_v"),
        other => panic!("{other:?}"),
    }
}
