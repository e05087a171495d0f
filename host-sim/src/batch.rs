//! Batch runs: many storms × policies × seeds in parallel (rayon), a progress bar on stderr,
//! a table.

use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;

use crate::pondfile::Pond;
use crate::sim::{self, PolicyKind, RunOptions, Storm};
use crate::summary::{self, Summary};

/// One batch row: the storm, the policy, the seed and the run's summary.
#[derive(Debug, Clone)]
pub struct BatchRow {
    /// The pond-file settings this run changed (`--vary`), empty for the file as it is.
    pub variant: String,
    /// The summary (its `policy` and `seed` say which run this is).
    pub summary: Summary,
    /// Passed every criterion.
    pub pass: bool,
}

/// The policy whose rows decide a batch's exit code: the controller when it was run (the
/// baselines are there for comparison, and the old fixed outlet is expected to fail the
/// permit), otherwise every policy run.
pub fn judged(policies: &[PolicyKind]) -> Option<PolicyKind> {
    policies
        .contains(&PolicyKind::Controller)
        .then_some(PolicyKind::Controller)
}

/// Runs every policy of `policies` (duplicates once) on every storm with the `seeds` seeds
/// `first_seed, first_seed + 1, …`, in parallel; rows in a fixed order (storm, then policy
/// in the order given, then seed) whatever the thread timing. The bound is computed once
/// per storm and seed and shared by that job's policies.
pub fn run(
    pond: &Pond,
    storms: &[Storm],
    policies: &[PolicyKind],
    first_seed: u64,
    seeds: u64,
    opts: &RunOptions,
) -> Vec<BatchRow> {
    let mut unique: Vec<PolicyKind> = Vec::new();
    for &p in policies {
        if !unique.contains(&p) {
            unique.push(p);
        }
    }
    let jobs: Vec<(usize, u64)> = (0..storms.len())
        .flat_map(|i| (0..seeds).map(move |k| (i, first_seed.saturating_add(k))))
        .collect();
    let bar = ProgressBar::new((jobs.len() * unique.len()) as u64);
    if jobs.len() >= 8 {
        bar.set_style(
            ProgressStyle::with_template("holdback: batch {bar:40} {pos}/{len} runs {eta}")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
    } else {
        bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
    }
    let per_job: Vec<Vec<BatchRow>> = jobs
        .par_iter()
        .map(|&(i, seed)| {
            let storm = &storms[i];
            let mut o = opts.clone();
            o.seed = seed;
            let bound = sim::run(pond, storm, PolicyKind::Bound, &o);
            unique
                .iter()
                .map(|&policy| {
                    let r = if policy == PolicyKind::Bound {
                        bound.clone()
                    } else {
                        sim::run(pond, storm, policy, &o)
                    };
                    let s = summary::summarise(pond, storm, &r, seed, &o.faults, Some(&bound));
                    bar.inc(1);
                    BatchRow {
                        variant: String::new(),
                        pass: s.pass,
                        summary: s,
                    }
                })
                .collect()
        })
        .collect();
    bar.finish_and_clear();
    // Regroup: storm, then policy, then seed.
    let mut rows = Vec::with_capacity(jobs.len() * unique.len());
    for storm_jobs in per_job.chunks(seeds.max(1) as usize) {
        for k in 0..unique.len() {
            rows.extend(storm_jobs.iter().filter_map(|job| job.get(k).cloned()));
        }
    }
    rows
}

/// The batch table (fixed-width text).
pub fn table(rows: &[BatchRow]) -> String {
    let mut s = format!(
        "{:<36} {:<24} {:<10} {:>4} {:>8} {:>9} {:>9} {:>8} {:>7} {:>7} {:>5}\n",
        "storm",
        "variant",
        "policy",
        "seed",
        "rain_mm",
        "peak_m",
        "peak_m3s",
        "over_s",
        "ratio",
        "draw_h",
        "pass"
    );
    for r in rows {
        let m = &r.summary;
        s.push_str(&format!(
            "{:<36} {:<24} {:<10} {:>4} {:>8.1} {:>9.3} {:>9.3} {:>8} {:>7} {:>7} {:>5}\n",
            m.storm,
            if r.variant.is_empty() {
                "as filed"
            } else {
                &r.variant
            },
            m.policy,
            m.seed,
            m.rain_mm,
            m.peak_stage_m,
            m.peak_release_m3s,
            m.time_over_permit_s,
            m.storage_ratio_to_bound
                .map_or("-".to_string(), |x| format!("{x:.3}")),
            m.drawdown_s
                .map_or("-".to_string(), |d| format!("{:.1}", d as f64 / 3600.0)),
            if r.pass { "yes" } else { "NO" }
        ));
    }
    s
}

/// The batch table as CSV.
pub fn csv(rows: &[BatchRow]) -> String {
    let mut s = String::from(
        "storm,variant,seed,policy,rain_mm,peak_stage_m,freeboard_left_m,peak_release_m3s,time_over_permit_s,volume_over_permit_m3,overtopped,drawdown_s,gate_moves,storage_ratio_to_bound,pass\n",
    );
    for r in rows {
        let m = &r.summary;
        s.push_str(&format!(
            "\"{}\",\"{}\",{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
            m.storm.replace('"', "'"),
            r.variant.replace('"', "'"),
            m.seed,
            m.policy,
            m.rain_mm,
            m.peak_stage_m,
            m.freeboard_left_m,
            m.peak_release_m3s,
            m.time_over_permit_s,
            m.volume_over_permit_m3,
            m.overtopped,
            m.drawdown_s.map_or(String::new(), |d| d.to_string()),
            m.gate_moves,
            m.storage_ratio_to_bound
                .map_or(String::new(), |x| x.to_string()),
            r.pass
        ));
    }
    s
}
