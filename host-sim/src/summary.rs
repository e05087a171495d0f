//! The run summary (JSON, schema in `host-sim/SUMMARY-SCHEMA.md`), the pass/fail criteria, and
//! the CSV time series.

use std::io::Write;

use serde::Serialize;

use crate::pondfile::Pond;
use crate::sim::{Fault, ForecastCheck, Run, SimEvent, Storm};

/// Version of the summary schema; bumped on any change of meaning or removal of a field.
pub const SUMMARY_SCHEMA_VERSION: u32 = 1;

/// One criterion's verdict.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Criterion {
    /// Stable identifier (`permit`, `freeboard`, `overtopping`, `drawdown`).
    pub id: &'static str,
    /// What it asks, in words.
    pub rule: String,
    /// The measured value in words.
    pub measured: String,
    /// Passed.
    pub pass: bool,
}

/// Summary of one run.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Summary {
    /// Schema version.
    pub schema: u32,
    /// Pond name.
    pub pond: String,
    /// Storm name.
    pub storm: String,
    /// Policy name.
    pub policy: &'static str,
    /// Seed.
    pub seed: u64,
    /// Rain total, mm.
    pub rain_mm: f64,
    /// Peak inflow, m³/s.
    pub peak_inflow_m3s: f64,
    /// Inflow volume, m³.
    pub inflow_volume_m3: f64,
    /// Peak stage, m.
    pub peak_stage_m: f64,
    /// Crest − peak stage, m (negative: overtopped).
    pub freeboard_left_m: f64,
    /// Peak storage, m³.
    pub peak_storage_m3: f64,
    /// Peak release, m³/s.
    pub peak_release_m3s: f64,
    /// Permit, m³/s.
    pub permit_m3s: f64,
    /// Time with the release above the permit, s.
    pub time_over_permit_s: u64,
    /// Volume above the permit, m³.
    pub volume_over_permit_m3: f64,
    /// Stage went above the spillway crest.
    pub overtopped: bool,
    /// Time above the crest, s.
    pub time_over_crest_s: u64,
    /// Time from the end of rain back to the normal level, s (null: not within the run).
    pub drawdown_s: Option<u64>,
    /// Gate moves started.
    pub gate_moves: u32,
    /// Faults injected.
    pub faults: Vec<Fault>,
    /// Peak storage of the perfect-foresight bound, m³ (null when not computed).
    pub bound_peak_storage_m3: Option<f64>,
    /// Peak storage / bound's (1.00 is the limit; null when not computed).
    pub storage_ratio_to_bound: Option<f64>,
    /// What a reviewer must know besides the criteria: the pond file's warnings (the
    /// storage check among them) and how the storm was made (rain-file rows left out, gaps,
    /// IDF extrapolation). Added in schema 1.
    pub warnings: Vec<String>,
    /// Verdicts.
    pub criteria: Vec<Criterion>,
    /// All criteria passed.
    pub pass: bool,
    /// Time in each mode, s, by mode name (added in schema 1; the baselines have one mode).
    pub time_in_mode_s: std::collections::BTreeMap<&'static str, u64>,
    /// The controller's events: mode changes, faults, exceedances with reasons, alarms
    /// (added in schema 1; empty for the baselines).
    pub events: Vec<SimEvent>,
    /// The controller's forecasts next to what happened (added in schema 1; empty unless
    /// asked for, e.g. by `demo`).
    pub forecast_checks: Vec<ForecastCheck>,
}

fn round(x: f64, digits: i32) -> f64 {
    let p = 10f64.powi(digits);
    (x * p).round() / p
}

/// Builds the summary and its verdicts.
pub fn summarise(
    pond: &Pond,
    storm: &Storm,
    run: &Run,
    seed: u64,
    faults: &[Fault],
    bound: Option<&Run>,
) -> Summary {
    let cfg = &pond.config;
    let crest = cfg.levels().crest_m as f64;
    let limit = cfg.stage_limit_m() as f64;
    let permit = cfg.permit().release_m3s as f64;
    let target = cfg.control().drawdown_target_s as u64;
    // A run cut short while runoff was still arriving is not judged on its peaks: each peak
    // criterion then fails and says why, so a truncated run never reads as a pass.
    let cut = if run.cut_short {
        format!(
            "; NOT JUDGED: the run ended at {:.1} h while runoff was still arriving (lengthen --tail-h)",
            run.length_s as f64 / 3600.0
        )
    } else {
        String::new()
    };
    let whole = !run.cut_short;
    let mut criteria = vec![
        Criterion {
            id: "permit",
            rule: format!("release never above the permit {permit} m3/s"),
            measured: format!(
                "peak {:.3} m3/s; {} s and {:.1} m3 above{cut}",
                run.peak_release_m3s, run.time_over_permit_s, run.volume_over_permit_m3
            ),
            pass: whole && run.time_over_permit_s == 0,
        },
        Criterion {
            id: "freeboard",
            rule: format!("peak stage at most crest - freeboard = {limit:.3} m"),
            measured: format!("peak stage {:.3} m{cut}", run.peak_stage_m),
            pass: whole && run.peak_stage_m <= limit + 1e-4,
        },
        Criterion {
            id: "overtopping",
            rule: format!("stage never above the crest {crest:.3} m"),
            measured: format!("{} s above the crest{cut}", run.time_over_crest_s),
            pass: whole && run.time_over_crest_s == 0,
        },
    ];
    let drawdown_ok = match run.drawdown_s {
        Some(d) => d <= target,
        None => run.peak_stage_m <= cfg.levels().normal_m as f64 + 0.01,
    };
    criteria.push(Criterion {
        id: "drawdown",
        rule: format!(
            "back at the normal level within {:.1} h of the end of rain",
            target as f64 / 3600.0
        ),
        measured: match run.drawdown_s {
            Some(d) => format!("{:.1} h", d as f64 / 3600.0),
            None if drawdown_ok => "never left the normal level".into(),
            None => "not back within the run".into(),
        },
        pass: drawdown_ok,
    });
    let pass = criteria.iter().all(|c| c.pass);
    let bound_peak = bound.map(|b| b.peak_storage_m3 - storage_at_normal(pond));
    let own = run.peak_storage_m3 - storage_at_normal(pond);
    Summary {
        schema: SUMMARY_SCHEMA_VERSION,
        pond: pond.name.clone(),
        storm: storm.name.clone(),
        policy: run.policy.name(),
        seed,
        rain_mm: round(storm.total_mm(), 3),
        peak_inflow_m3s: round(run.peak_inflow_m3s, 4),
        inflow_volume_m3: round(run.inflow_volume_m3, 1),
        peak_stage_m: round(run.peak_stage_m, 4),
        freeboard_left_m: round(crest - run.peak_stage_m, 4),
        peak_storage_m3: round(run.peak_storage_m3, 1),
        peak_release_m3s: round(run.peak_release_m3s, 4),
        permit_m3s: permit,
        time_over_permit_s: run.time_over_permit_s,
        volume_over_permit_m3: round(run.volume_over_permit_m3, 1),
        overtopped: run.time_over_crest_s > 0,
        time_over_crest_s: run.time_over_crest_s,
        drawdown_s: run.drawdown_s,
        gate_moves: run.gate_moves,
        faults: faults.to_vec(),
        bound_peak_storage_m3: bound_peak.map(|b| round(b, 1)),
        storage_ratio_to_bound: bound_peak.and_then(|b| (b > 0.0).then(|| round(own / b, 3))),
        warnings: pond
            .warnings
            .iter()
            .chain(storm.notes.iter())
            .cloned()
            .collect(),
        criteria,
        pass,
        time_in_mode_s: run.time_in_mode_s.clone(),
        events: run.events.clone(),
        forecast_checks: run
            .forecast_checks
            .iter()
            .map(|f| ForecastCheck {
                from_stage_m: round(f.from_stage_m as f64, 4) as f32,
                future_rain_mm: round(f.future_rain_mm as f64, 2) as f32,
                rows: f
                    .rows
                    .iter()
                    .map(|r| crate::sim::ForecastRow {
                        ahead_s: r.ahead_s,
                        inflow_m3s: round(r.inflow_m3s as f64, 4) as f32,
                        predicted_stage_m: round(r.predicted_stage_m as f64, 4) as f32,
                        actual_stage_m: round(r.actual_stage_m as f64, 4) as f32,
                        actual_inflow_m3s: round(r.actual_inflow_m3s as f64, 4) as f32,
                    })
                    .collect(),
                ..f.clone()
            })
            .collect(),
    }
}

fn storage_at_normal(pond: &Pond) -> f64 {
    let c = &pond.config;
    c.storage().storage_m3(c.levels().normal_m) as f64
}

/// Writes the time series as CSV (header + one row per record interval).
pub fn write_csv(run: &Run, out: &mut impl Write) -> std::io::Result<()> {
    writeln!(
        out,
        "t_s,rain_mm,inflow_m3s,stage_m,stage_read_m,storage_m3,release_m3s,gate_m,command_m,mode"
    )?;
    for r in &run.rows {
        let read = if r.stage_read_m.is_nan() {
            String::new()
        } else {
            format!("{:.4}", r.stage_read_m)
        };
        writeln!(
            out,
            "{},{:.3},{:.5},{:.4},{},{:.2},{:.5},{:.4},{:.4},{}",
            r.t_s,
            r.rain_mm,
            r.inflow_m3s,
            r.stage_m,
            read,
            r.storage_m3,
            r.release_m3s,
            r.gate_m,
            r.command_m,
            r.mode
        )?;
    }
    Ok(())
}
