//! Long-record benchmark: simulated seconds per wall second with the gate controller stepped
//! every control step over a century of rain (see `host-sim/BENCH.md`).
//!
//! The record is real: the DWD 5-min series of station 01684 (Görlitz, 1991–2020, sparse
//! listing, `../shared/data/rain/`, read from outside the repository and never by a test).
//! Runs of missing data are cut out (not read as dry), the observed 5-min steps are
//! concatenated and repeated until the record is `YEARS` long, and the rain is spread
//! uniformly within each 5-min step, i.e. replayed as 1-minute rain: the demo pond is
//! stepped at `control.step_s = 60` (rain, runoff and control all on 1-minute steps).
//!
//! ```sh
//! cargo run --release -p holdback-sim --example longrun -- [DWD_CSV] [YEARS] [rating.csv]
//! ```
//! With a third argument it also writes the fixed outlet's stage–storage–discharge table and
//! the 1-minute inflow of the first year for `host-sim/bench/level_pool.py`. With
//! `LONGRUN_POLICY=fixed` or `controller` in the environment only that run is made (for
//! instruction counts, `scripts/icount-longrun.sh`), and `threshold` runs the level-threshold
//! rule (same plant and sensors, no controller); with `LONGRUN_QUIET=1` the record is one
//! 50-mm storm and then dry (the cost of a quiet step); `LONGRUN_FORECAST_S=N` sets
//! `control.forecast_every_s` (a diagnostic: the benchmark keeps the demo pond's 60 s).

use std::time::Instant;

use holdback_sim::pondfile::{self, DEMO_POND};
use holdback_sim::rainfile::days_from_civil;
use holdback_sim::sim::{self, Models, PolicyKind, RunOptions, Storm};

/// Minutes since the epoch of `YYYY-MM-DDTHH:MMZ`.
fn minutes(stamp: &str) -> Option<i64> {
    let n = |a: usize, b: usize| stamp.get(a..b)?.parse::<i64>().ok();
    let d = days_from_civil(n(0, 4)?, n(5, 7)?, n(8, 10)?);
    Some(d * 1440 + n(11, 13)? * 60 + n(14, 16)?)
}

/// The observed 5-min steps of the sparse listing, missing runs cut out.
fn read_dwd(text: &str) -> Vec<f64> {
    let (start, end) = (
        minutes("1991-01-01T00:00Z").unwrap_or(0),
        minutes("2021-01-01T00:00Z").unwrap_or(0),
    );
    let n = ((end - start) / 5) as usize;
    let mut rain = vec![0.0f64; n];
    let mut missing = vec![false; n];
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let mut f = line.split(',');
        let (Some(t), Some(m), Some(v)) = (f.next(), f.next(), f.next()) else {
            continue;
        };
        let (Some(t), Ok(m)) = (minutes(t), m.parse::<i64>()) else {
            continue;
        };
        let k = ((t - start) / 5).max(0) as usize;
        if v == "NaN" {
            for x in missing.iter_mut().skip(k).take((m / 5) as usize) {
                *x = true;
            }
        } else if let (Some(r), Ok(v)) = (rain.get_mut(k), v.parse::<f64>()) {
            *r = v;
        }
    }
    rain.iter()
        .zip(&missing)
        .filter(|(_, m)| !**m)
        .map(|(r, _)| *r)
        .collect()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let path = args
        .get(1)
        .cloned()
        .unwrap_or_else(|| "../shared/data/rain/dwd_01684_goerlitz_5min_1991-2020.csv".into());
    let years: f64 = args.get(2).and_then(|a| a.parse().ok()).unwrap_or(100.0);
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let observed = read_dwd(&text);
    let steps = (years * 365.25 * 288.0) as usize;
    let mut rain: Vec<f64> = observed.iter().copied().cycle().take(steps).collect();
    if std::env::var_os("LONGRUN_QUIET").is_some() {
        // The cost of a quiet step: one storm (0.5 mm every 5 min for 8 h 20 min, 50 mm),
        // then dry for the rest of the record while the pond drains through its orifice.
        for (k, r) in rain.iter_mut().enumerate() {
            *r = if k < 100 { 0.5 } else { 0.0 };
        }
    }
    let storm = Storm {
        name: format!("DWD 01684 repeated to {years} years"),
        dt_s: 300,
        rain_mm: rain,
        notes: Vec::new(),
    };
    eprintln!(
        "record: {} observed 5-min steps ({:.1} years, {:.0} mm), repeated to {} steps \
         ({years} years, {:.0} mm)",
        observed.len(),
        observed.len() as f64 / 288.0 / 365.25,
        observed.iter().sum::<f64>(),
        storm.rain_mm.len(),
        storm.total_mm()
    );
    let mut src = DEMO_POND.replace("step_s = 10\n", "step_s = 60\n");
    if let Ok(every) = std::env::var("LONGRUN_FORECAST_S") {
        // A diagnostic, not the benchmark: the cost of forecasting less often.
        src = src.replace(
            "forecast_every_s = 60\n",
            &format!("forecast_every_s = {every}\n"),
        );
        eprintln!("control.forecast_every_s = {every} (LONGRUN_FORECAST_S)");
    }
    let pond = pondfile::load_str(&src).unwrap_or_else(|e| panic!("{}", e[0]));
    if let Some(out) = args.get(3) {
        write_python_inputs(&pond, &storm, out);
    }
    let opts = RunOptions {
        seed: 1,
        models: Models::default(),
        faults: Vec::new(),
        tail_s: 3600,
        record_s: 86_400,
        forecast_at_s: Vec::new(),
    };
    let only = std::env::var("LONGRUN_POLICY").ok();
    // The level-threshold rule only when asked for: the same plant and sensor models with a
    // policy of a few comparisons, so that its time less the controller's is the controller's.
    for kind in [
        PolicyKind::Fixed,
        PolicyKind::Threshold,
        PolicyKind::Controller,
    ]
    .into_iter()
    .filter(|k| match only.as_deref() {
        None => *k != PolicyKind::Threshold,
        Some(o) => o == k.name(),
    }) {
        let t0 = Instant::now();
        let r = sim::run(&pond, &storm, kind, &opts);
        let wall = t0.elapsed().as_secs_f64();
        let sim_s = r.length_s as f64;
        println!(
            "{:<10} simulated {:.1} years ({} steps) in {wall:.2} s wall: {:.3e} simulated s \
             per wall s ({:.0} ns per 60-s step); peak stage {:.3} m, {} events, time over \
             permit {} s, {} gate moves, fingerprint {:016x}",
            kind.name(),
            sim_s / 365.25 / 86_400.0,
            r.length_s / 60,
            sim_s / wall,
            wall * 1e9 / (sim_s / 60.0),
            r.peak_stage_m,
            r.events.len(),
            r.time_over_permit_s,
            r.gate_moves,
            fingerprint(&r)
        );
        // Never hidden: every time the controller logged the release over the permit, with
        // its reason and the time into the record.
        for e in r.events.iter().filter(|e| e.kind == "permit-exceedance") {
            println!(
                "  permit exceedance at day {:.3} of the record: {}",
                e.t_s as f64 / 86_400.0,
                e.detail
            );
        }
    }
}

/// FNV-1a over every event and every daily row's bits: two builds that print the same
/// fingerprint made the same decisions and saw the same water.
fn fingerprint(r: &sim::Run) -> u64 {
    let mut h = 0xcbf2_9ce4_8422_2325_u64;
    let mut eat = |bytes: &[u8]| {
        for b in bytes {
            h = (h ^ u64::from(*b)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    };
    for e in &r.events {
        eat(&e.t_s.to_le_bytes());
        eat(e.detail.as_bytes());
    }
    for row in &r.rows {
        for x in [
            row.rain_mm,
            row.inflow_m3s,
            row.stage_m,
            row.stage_read_m,
            row.storage_m3,
            row.release_m3s,
            row.gate_m,
            row.command_m,
        ] {
            eat(&x.to_bits().to_le_bytes());
        }
        eat(row.mode.as_bytes());
    }
    h
}

/// The fixed outlet's table (stage, storage, discharge) and the first year's 1-minute inflow
/// (the same time–area convolution as the plant) for the Python baseline.
fn write_python_inputs(pond: &pondfile::Pond, storm: &Storm, out: &str) {
    use std::fmt::Write as _;
    let cfg = &pond.config;
    let ex = pond.existing.as_ref().unwrap_or(cfg.outlet());
    let mut s = String::from("stage_m,storage_m3,discharge_m3s\n");
    let (lo, hi) = (cfg.storage().floor_m(), cfg.levels().crest_m + 1.0);
    for i in 0..=2000 {
        let h = lo + (hi - lo) * i as f32 / 2000.0;
        let _ = writeln!(
            s,
            "{h},{},{}",
            cfg.storage().storage_m3(h),
            ex.discharge_m3s(h, 0.0)
        );
    }
    std::fs::write(format!("{out}.rating.csv"), s).unwrap_or_else(|e| panic!("{out}: {e}"));
    let n = 365 * 1440;
    let rain: Vec<f32> = storm
        .rain_mm
        .iter()
        .flat_map(|d| std::iter::repeat_n((*d / 5.0) as f32, 5))
        .take(n)
        .collect();
    let mut q = vec![0.0f32; n];
    cfg.catchment().convolve(&rain, &mut q);
    let mut s = String::from("inflow_m3s\n");
    for x in q {
        let _ = writeln!(s, "{x}");
    }
    std::fs::write(format!("{out}.inflow.csv"), s).unwrap_or_else(|e| panic!("{out}: {e}"));
}
