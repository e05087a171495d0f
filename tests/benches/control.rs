//! Controller step cost on the invented demo pond "quillmere": one step without a fresh
//! forecast, one step with a fresh forecast low in the pond (where the forecast's volume
//! bound shows no view of the rain can bring the pond near its limit, so nothing is routed),
//! one with a fresh forecast 1.6 m above normal (where the bound cannot rule that out and
//! every view is routed over the horizon), and every step of a whole design storm (10-year,
//! 60-minute block, to back at normal + 2 h) through the closed-loop plant.
//!
//! Criterion times the first two (`cargo bench -p holdback-tests --bench control`). With
//! `CONTROL_ICOUNT=1` the binary instead runs each `kernel_*` once (the storm kernel once per
//! step) for exact instruction counts under callgrind (scripts/icount-control.sh).

use std::hint::black_box;

use criterion::{BatchSize, Criterion};
use holdback_core::config::PondConfig;
use holdback_core::control::{Controller, Inputs, Outputs};
use holdback_tests::closed_loop::{self, Driver, Injection, PlantOptions, block_storm};
use holdback_tests::ponds;

/// A controller 30 min into a storm rising from `base_m` above normal: (state, inputs, time)
/// for the next step without a fresh forecast and for the next step with one.
type Case = (Controller, Inputs, u32);
fn mid_storm(cfg: &PondConfig, base_m: f32) -> (Case, Case) {
    let mut c = Controller::new(cfg, 0);
    let normal = cfg.levels().normal_m + base_m;
    let input = |k: u32| Inputs {
        stage_m: Some(normal + 0.0004 * k as f32),
        rain_tips: u16::from(k.is_multiple_of(2)),
        gate_position_m: None,
        ..Inputs::default()
    };
    let mut k = 0;
    while k < 180 {
        c_pos(&mut c, cfg, &input(k), 10 * k);
        k += 1;
    }
    let mut fresh = None;
    let mut plain = None;
    while fresh.is_none() || plain.is_none() {
        let i = input(k);
        let before = c.clone();
        let n = c.forecasts();
        c.step(cfg, &i, 10 * k);
        if c.forecasts() > n {
            fresh.get_or_insert((before, i, 10 * k));
        } else {
            plain.get_or_insert((before, i, 10 * k));
        }
        k += 1;
    }
    (plain.unwrap(), fresh.unwrap())
}

/// Steps `c` and returns its command (used as the ideal gate's position next step).
fn c_pos(c: &mut Controller, cfg: &PondConfig, i: &Inputs, t: u32) -> f32 {
    c.step(cfg, i, t).opening_cmd_m
}

#[inline(never)]
fn kernel_step_plain(c: &mut Controller, cfg: &PondConfig, i: &Inputs, t: u32) -> Outputs {
    // A distinct body, so the linker cannot fold the three kernels into one symbol.
    black_box(1u8);
    c.step(cfg, i, t)
}

#[inline(never)]
fn kernel_step_forecast(c: &mut Controller, cfg: &PondConfig, i: &Inputs, t: u32) -> Outputs {
    // A distinct body, so the linker cannot fold the three kernels into one symbol.
    black_box(2u8);
    c.step(cfg, i, t)
}

#[inline(never)]
fn kernel_step_forecast_routed(
    c: &mut Controller,
    cfg: &PondConfig,
    i: &Inputs,
    t: u32,
) -> Outputs {
    // A distinct body, so the linker cannot fold the kernels into one symbol.
    black_box(4u8);
    c.step(cfg, i, t)
}

#[inline(never)]
fn kernel_storm_step(c: &mut Controller, cfg: &PondConfig, i: &Inputs, t: u32) -> Outputs {
    // A distinct body, so the linker cannot fold the three kernels into one symbol.
    black_box(3u8);
    c.step(cfg, i, t)
}

struct Counted<'a> {
    cfg: &'a PondConfig,
    c: Controller,
    steps: u32,
    forecasts: u32,
}

impl Driver for Counted<'_> {
    fn command(&mut self, t_s: u32, inputs: &Inputs) -> f32 {
        self.steps += 1;
        let o = kernel_storm_step(&mut self.c, self.cfg, inputs, t_s);
        self.forecasts = self.c.forecasts();
        o.opening_cmd_m
    }
}

fn storm_run(cfg: &PondConfig) -> (u32, u32) {
    let rain = block_storm(cfg.idf(), 10.0, 60, cfg.catchment().dt_s());
    let mut d = Counted {
        cfg,
        c: Controller::new(cfg, 0),
        steps: 0,
        forecasts: 0,
    };
    closed_loop::run(
        cfg,
        &rain,
        &mut d,
        PlantOptions::default(),
        (Injection::None, 0),
    );
    (d.steps, d.forecasts)
}

fn main() {
    let cfg = PondConfig::new(ponds::quillmere()).unwrap();
    let ((pc, pi, pt), (fc, fi, ft)) = mid_storm(&cfg, 0.0);
    let (_, (rc, ri, rt)) = mid_storm(&cfg, 1.6);
    if std::env::var_os("CONTROL_ICOUNT").is_some() {
        let mut a = pc.clone();
        black_box(kernel_step_plain(&mut a, &cfg, &pi, pt));
        let mut b = fc.clone();
        black_box(kernel_step_forecast(&mut b, &cfg, &fi, ft));
        let mut r = rc.clone();
        black_box(kernel_step_forecast_routed(&mut r, &cfg, &ri, rt));
        let (steps, forecasts) = storm_run(&cfg);
        eprintln!("storm_steps {steps} forecasts {forecasts}");
        return;
    }
    let mut crit = Criterion::default().configure_from_args();
    crit.bench_function("control step, no fresh forecast", |b| {
        b.iter_batched(
            || pc.clone(),
            |mut x| black_box(kernel_step_plain(&mut x, &cfg, &pi, pt)),
            BatchSize::SmallInput,
        )
    });
    crit.bench_function("control step, fresh forecast", |b| {
        b.iter_batched(
            || fc.clone(),
            |mut x| black_box(kernel_step_forecast(&mut x, &cfg, &fi, ft)),
            BatchSize::SmallInput,
        )
    });
    crit.bench_function("control step, fresh forecast routed", |b| {
        b.iter_batched(
            || rc.clone(),
            |mut x| black_box(kernel_step_forecast_routed(&mut x, &cfg, &ri, rt)),
            BatchSize::SmallInput,
        )
    });
    crit.final_summary();
}
