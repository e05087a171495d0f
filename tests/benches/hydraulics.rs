//! Outlet hydraulics cost on the host: one composite evaluation (orifice + riser + spillway +
//! gate), the opening inverse, and a 64-point rating build. Run with
//! `cargo bench -p holdback-tests --bench hydraulics`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use holdback_core::hydraulics::*;

/// An invented demo outlet: low-flow orifice, riser, emergency spillway, new gate.
fn demo_outlet() -> Outlet {
    let orifice = CircularOrifice::new(100.0, 0.15, 0.6).unwrap();
    let riser = Riser::circular(101.2, 1.2, 0.6, 0.6).unwrap();
    let spillway = Spillway::new(102.0, 8.0, 3.0, 0.9).unwrap();
    let gate = SluiceGate::new(100.0, 0.6, 0.6, 0.61, 0.98).unwrap();
    Outlet::new(
        &[orifice.into(), riser.into(), spillway.into()],
        Some(gate),
        Some(100.3),
    )
    .unwrap()
}

fn bench(c: &mut Criterion) {
    let o = demo_outlet();
    c.bench_function("outlet_discharge_orifice_riser_spillway_gate", |b| {
        let mut s = 100.0_f32;
        b.iter(|| {
            s = if s > 102.6 { 100.0 } else { s + 0.0137 };
            black_box(o.discharge_m3s(black_box(s), black_box(0.25)))
        })
    });
    c.bench_function("outlet_opening_for", |b| {
        let target = o.discharge_m3s(101.5, 0.2);
        b.iter(|| black_box(o.opening_for(black_box(101.5), black_box(target))))
    });
    c.bench_function("outlet_rating_64_points", |b| {
        b.iter(|| black_box(o.rating::<64>(black_box(0.3), 100.0, 102.6)))
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
