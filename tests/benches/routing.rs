//! Benchmarks: one level-pool routing step and stage↔storage lookups.
//! Run with `cargo bench -p holdback-tests --bench routing`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use holdback_core::G_M_S2;
use holdback_core::math;
use holdback_core::routing::{Inflow, step};
use holdback_core::storage::{BasinGeometry, StageStorage, VolumeMethod};

fn survey(method: VolumeMethod) -> StageStorage {
    let rows: Vec<(f32, f32)> = (0..12)
        .map(|i| {
            let y = i as f32 * 0.25;
            (100.0 + y, (40.0 + 6.0 * y) * (20.0 + 6.0 * y))
        })
        .collect();
    StageStorage::from_areas(&rows, method).unwrap()
}

fn basin() -> StageStorage {
    StageStorage::from_basin(BasinGeometry {
        floor_m: 100.0,
        length_m: 40.0,
        width_m: 20.0,
        side_slope_h_per_v: 3.0,
        depth_m: 2.75,
    })
    .unwrap()
}

fn outlet(h: f32) -> f32 {
    let mut q = 0.0;
    if h > 100.15 {
        q += 0.61 * 0.0707 * math::sqrt(2.0 * G_M_S2 * (h - 100.15));
    }
    if h > 101.8 {
        q += 1.7 * 3.0 * math::pow1_5(h - 101.8);
    }
    q
}

fn lookups(c: &mut Criterion) {
    for (name, pond) in [
        ("frustum table 12 rows", survey(VolumeMethod::Frustum)),
        (
            "average-end-area table 12 rows",
            survey(VolumeMethod::AverageEndArea),
        ),
        ("basin analytic", basin()),
    ] {
        c.bench_function(&format!("storage_m3 / {name}"), |b| {
            b.iter(|| pond.storage_m3(black_box(101.37)))
        });
        let v = pond.storage_m3(101.37);
        c.bench_function(&format!("stage_m / {name}"), |b| {
            b.iter(|| pond.stage_m(black_box(v)))
        });
    }
}

fn steps(c: &mut Criterion) {
    let pond = survey(VolumeMethod::Frustum);
    let s = pond.storage_m3(101.9);
    c.bench_function(
        "routing step / frustum table, orifice + weir, dt 60 s",
        |b| {
            b.iter(|| {
                step(
                    &pond,
                    &outlet,
                    black_box(s),
                    Inflow::ramp(1.2, 1.1),
                    black_box(60),
                )
            })
        },
    );
    let stiff = |h: f32| {
        if h > 100.0 {
            5.0 * math::sqrt(2.0 * G_M_S2 * (h - 100.0))
        } else {
            0.0
        }
    };
    c.bench_function(
        "routing step / stiff orifice (backward Euler), dt 300 s",
        |b| {
            b.iter(|| {
                step(
                    &pond,
                    &stiff,
                    black_box(s),
                    Inflow::steady(0.5),
                    black_box(300),
                )
            })
        },
    );
    let pond = basin();
    c.bench_function(
        "routing step / basin analytic, orifice + weir, dt 60 s",
        |b| {
            b.iter(|| {
                step(
                    &pond,
                    &outlet,
                    black_box(s),
                    Inflow::ramp(1.2, 1.1),
                    black_box(60),
                )
            })
        },
    );
}

criterion_group!(benches, lookups, steps);
criterion_main!(benches);
