//! Cost of the storage forecast on the host, as exact instruction counts under callgrind
//! (`scripts/icount-host.sh`) and as a rough wall time (`cargo bench -p holdback-tests
//! --bench forecast`).
//!
//! Scenario (invented): a side-sloped basin, a composite outlet (low-flow orifice, riser,
//! emergency spillway, sluice gate, fixed tailwater), a catchment with a 30 min Tc at a 60 s
//! runoff step with 40 min of rain already fallen, persistence of 25 mm/h for an hour, a 3 h
//! horizon at 180 s (60 steps). `kernel_fast_*` run the same work on a `Forecaster` (fixed
//! structures tabulated); `kernel_fast_twenty_kept` on one built beforehand. Each kernel is
//! `#[inline(never)]` and named `kernel_*`, so callgrind's `--toggle-collect=*kernel_*`
//! counts exactly one call of it.

use std::hint::black_box;
use std::time::Instant;

use holdback_core::forecast::{
    Forecaster, Outlook, Policy, predict, predict_release, release_to_hold,
};
use holdback_core::routing::{Inflow, step};

/// Candidates per forecast in the cost target.
const CANDIDATES: usize = 20;

use holdback_tests::ponds::{ForecastScene as Scene, forecast_scene as scene};

fn build(s: &Scene) -> Outlook {
    s.outlook()
}

#[inline(never)]
fn kernel_outlook(s: &Scene) -> f32 {
    build(black_box(s)).volume_m3()
}

#[inline(never)]
fn kernel_one(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let p = predict(
        &s.pond,
        &s.outlet,
        s.storage_m3,
        &look,
        Policy::Fixed { opening_m: 0.2 },
        &s.limits,
    );
    p.peak_stage_m
}

#[inline(never)]
fn kernel_twenty(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let mut acc = 0.0;
    for k in 0..CANDIDATES {
        let a = s.outlet.max_opening_m() * k as f32 / (CANDIDATES - 1) as f32;
        let p = predict(
            &s.pond,
            &s.outlet,
            s.storage_m3,
            &look,
            Policy::Fixed { opening_m: a },
            &s.limits,
        );
        acc += p.peak_stage_m;
    }
    acc
}

#[inline(never)]
fn kernel_hold(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    release_to_hold(&s.pond, &s.outlet, s.storage_m3, &look, &s.limits).cap_m3s
}

/// One candidate on the fast path: a `Forecaster` built for this forecast (its table
/// included in the count).
#[inline(never)]
fn kernel_fast_one(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let fc = Forecaster::reaching(&s.pond, &s.outlet, s.storage_m3, &look);
    fc.predict(
        s.storage_m3,
        &look,
        Policy::Fixed { opening_m: 0.2 },
        &s.limits,
    )
    .peak_stage_m
}

/// The 20 candidates on the fast path, the `Forecaster` built for this forecast.
#[inline(never)]
fn kernel_fast_twenty(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let fc = Forecaster::reaching(&s.pond, &s.outlet, s.storage_m3, &look);
    twenty_on(s, &fc, &look)
}

/// The 20 candidates on a `Forecaster` built beforehand and kept (not counted).
#[inline(never)]
fn kernel_fast_twenty_kept(s: &Scene, fc: &Forecaster<'_>) -> f32 {
    let s = black_box(s);
    let look = build(s);
    twenty_on(s, fc, &look)
}

fn twenty_on(s: &Scene, fc: &Forecaster<'_>, look: &Outlook) -> f32 {
    let mut acc = 0.0;
    for k in 0..CANDIDATES {
        let a = s.outlet.max_opening_m() * k as f32 / (CANDIDATES - 1) as f32;
        acc += fc
            .predict(
                s.storage_m3,
                look,
                Policy::Fixed { opening_m: a },
                &s.limits,
            )
            .peak_stage_m;
    }
    acc
}

/// `release_to_hold` on the fast path, the `Forecaster` built for this forecast.
#[inline(never)]
fn kernel_fast_hold(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let fc = Forecaster::reaching(&s.pond, &s.outlet, s.storage_m3, &look);
    fc.release_to_hold(s.storage_m3, &look, &s.limits).cap_m3s
}

/// The same 20 candidates routed with the accurate `routing::step` (bisection), for the
/// speed-up the fast integrator gives.
#[inline(never)]
fn kernel_reference_twenty(s: &Scene) -> f32 {
    let s = black_box(s);
    let look = build(s);
    let mut acc = 0.0;
    for k in 0..CANDIDATES {
        let a = s.outlet.max_opening_m() * k as f32 / (CANDIDATES - 1) as f32;
        let o = s.outlet.at(a);
        let mut st = s.storage_m3;
        let mut peak = 0.0_f32;
        for &q in look.inflow_m3s() {
            let r = step(&s.pond, &o, st, Inflow::steady(q), 180);
            st = r.storage_m3;
            peak = peak.max(r.stage_m);
        }
        acc += peak;
    }
    acc
}

fn main() {
    let s = scene();
    // Under callgrind: one call of each kernel (counts toggled by name).
    if std::env::var_os("FORECAST_ICOUNT").is_some() {
        black_box(kernel_outlook(&s));
        black_box(kernel_one(&s));
        black_box(kernel_twenty(&s));
        black_box(kernel_hold(&s));
        black_box(kernel_reference_twenty(&s));
        black_box(kernel_fast_one(&s));
        black_box(kernel_fast_twenty(&s));
        let kept = Forecaster::new(&s.pond, &s.outlet, s.pond.top_m());
        black_box(kernel_fast_twenty_kept(&s, &kept));
        black_box(kernel_fast_hold(&s));
        return;
    }
    // Agreement of the two integrators on this scene, printed beside the timings.
    let look = build(&s);
    let fast = predict_release(&s.pond, &s.outlet.at(0.2), s.storage_m3, &look, &s.limits);
    println!(
        "scene: outlook {:.0} m3, opening 0.2 m: peak {:.4} m at {} s",
        look.volume_m3(),
        fast.peak_stage_m,
        fast.peak_at_s
    );
    type Kernel = fn(&Scene) -> f32;
    let kernels: [(&str, Kernel); 8] = [
        ("outlook", kernel_outlook),
        ("one candidate", kernel_one),
        ("20 candidates", kernel_twenty),
        ("release_to_hold", kernel_hold),
        ("20 candidates, routing::step", kernel_reference_twenty),
        ("fast: one candidate", kernel_fast_one),
        ("fast: 20 candidates", kernel_fast_twenty),
        ("fast: release_to_hold", kernel_fast_hold),
    ];
    for (name, f) in kernels {
        let n = 200;
        let t = Instant::now();
        for _ in 0..n {
            black_box(f(&s));
        }
        let us = t.elapsed().as_secs_f64() * 1e6 / n as f64;
        println!("{name:32} {us:10.1} us per call");
    }
}
