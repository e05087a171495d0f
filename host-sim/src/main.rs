//! `holdback`, the desktop tool: check and pack pond files, print ratings, replay recorded and
//! design storms against the control policies with injected faults, and write the CSV, JSON,
//! plots and the sign-off report. Data go to stdout or files, messages to stderr.
//!
//! Exit codes: 0 ok, 1 a criterion failed, 2 bad input.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};
use holdback_sim::batch;
use holdback_sim::pondfile::{self, DEMO_POND, Pond};
use holdback_sim::rainfile::{self, DepthUnit, RainFormat, RainKind, Stamp, TimeFormat};
use holdback_sim::report;
use holdback_sim::sim::{self, Fault, Models, PolicyKind, RunOptions, Storm};
use holdback_sim::storms::{self, Shape};
use holdback_sim::summary::{self, Summary};

/// The caution every command prints to stderr.
const CAUTION: &str = "holdback: CAUTION: results are for review by a qualified engineer; local \
codes, permits and licensed practice govern; a controller must fail to a safe state.";

#[derive(Parser)]
#[command(
    name = "holdback",
    version,
    about = "Check, pack and simulate a detention pond fitted with a controlled gate",
    long_about = "Check, pack and simulate a detention pond fitted with a controlled gate.\n\n\
        Data go to stdout or to files, messages to stderr. Exit codes: 0 ok, 1 a criterion \
        failed, 2 bad input.\n\n\
        Results are for review by a qualified engineer; local codes, permits and licensed \
        practice govern; a controller must fail to a safe state."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// The asset manager's side: decode device logs and dumps, import them into the fleet
    /// store (SQLite file or PostgreSQL), storm summaries, fleet questions and the fleet report.
    Fleet(holdback_review::cli::FleetArgs),
    /// Run the built-in demo pond: rating table, a 10-year design storm routed under the
    /// gate controller, the forecast at the heaviest rain next to what happened, and the
    /// controller, baselines and bound side by side (no arguments needed).
    Demo {
        /// Write the CSV, JSON, plots and HTML report into this folder.
        #[arg(long, default_value = "holdback-demo")]
        out: PathBuf,
        /// Write the demo pond file here (to copy and edit) and stop; an existing file is
        /// left alone unless --force is given.
        #[arg(long)]
        write_pond: Option<PathBuf>,
        /// With --write-pond: replace an existing file.
        #[arg(long, requires = "write_pond")]
        force: bool,
    },
    /// Validate a pond file: errors (with their path in the file) and warnings.
    Check {
        /// The pond file (TOML).
        pond: PathBuf,
        /// Treat warnings as a failed criterion (exit 1).
        #[arg(long)]
        strict: bool,
    },
    /// Print the stage-discharge-storage rating of the outlet.
    Rating {
        /// The pond file (TOML).
        pond: PathBuf,
        /// Gate opening, m (default: closed, half and fully open).
        #[arg(long)]
        opening: Option<f32>,
        /// Stage step of the table, m (at least 0.001; the table runs from the pond floor to
        /// 0.5 m over the spillway crest).
        #[arg(long, default_value_t = 0.1)]
        step: f32,
    },
    /// Pack a pond file into the compact device configuration.
    Pack {
        /// The pond file (TOML).
        pond: PathBuf,
        /// Output file.
        #[arg(short, long)]
        output: PathBuf,
    },
    /// Read a packed device configuration back, validate it and print it as JSON.
    Unpack {
        /// The packed file.
        packed: PathBuf,
    },
    /// Print a design storm from the pond's IDF as CSV (t_s, rain_mm, intensity_mm_h).
    DesignStorm {
        /// The pond file (TOML).
        pond: PathBuf,
        #[command(flatten)]
        design: DesignArgs,
    },
    /// Replay a recorded or design storm against the control policies.
    Replay {
        /// The pond file (TOML).
        pond: PathBuf,
        #[command(flatten)]
        storm: StormArgs,
        #[command(flatten)]
        sim: SimArgs,
        /// Write CSV, JSON, plots and the HTML report into this folder.
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Many design storms × policies × seeds in parallel; a summary table; exit 1 if any run
    /// of the controller fails a criterion (of any policy run, when the controller is not).
    Batch {
        /// The pond file (TOML).
        pond: PathBuf,
        /// Return periods, years.
        #[arg(long, value_delimiter = ',', default_values_t = vec![2.0, 10.0, 100.0])]
        return_periods: Vec<f32>,
        /// Durations, min.
        #[arg(long, value_delimiter = ',', default_values_t = vec![30, 60, 180, 360])]
        durations_min: Vec<u32>,
        /// Shapes.
        #[arg(long, value_delimiter = ',', value_enum, default_values = ["chicago"])]
        shapes: Vec<Shape>,
        /// Number of seeds per storm and policy: --seed, --seed + 1, … (at least 1).
        #[arg(long, default_value_t = 1)]
        seeds: u64,
        /// Step of the design storms, s.
        #[arg(long, default_value_t = 300)]
        dt_s: u32,
        #[command(flatten)]
        sim: SimArgs,
        /// Vary a pond-file setting: KEY=V1,V2,… with KEY dotted as the file writes it
        /// (`control.deadband_m=0.01,0.05`; `outlet.fixed[0].cd=0.6,0.62`). Repeat for more keys:
        /// every combination is run (at most 64).
        #[arg(long = "vary", value_name = "KEY=V1,V2")]
        vary: Vec<String>,
        /// Write the table as CSV here too.
        #[arg(long)]
        csv: Option<PathBuf>,
    },
}

#[derive(Args, Clone)]
struct DesignArgs {
    /// Return period, years.
    #[arg(long, default_value_t = 10.0)]
    return_period: f32,
    /// Duration, min.
    #[arg(long, default_value_t = 60)]
    duration_min: u32,
    /// Shape.
    #[arg(long, value_enum, default_value_t = Shape::Chicago)]
    shape: Shape,
    /// Step, s.
    #[arg(long, default_value_t = 300)]
    dt_s: u32,
    /// Peak position as a fraction of the duration.
    #[arg(long, default_value_t = 0.5)]
    peak_ratio: f32,
}

#[derive(Args, Clone)]
struct StormArgs {
    /// Recorded rain CSV (interval depths or tip times).
    #[arg(long, conflicts_with = "design")]
    rain: Option<PathBuf>,
    /// A design storm instead: RETURN_PERIOD_YR:DURATION_MIN:SHAPE (e.g. 10:60:chicago).
    #[arg(long)]
    design: Option<String>,
    /// What the rows hold (for tips, each tip is the pond file's sensors.gauge.bucket_mm).
    #[arg(long, value_enum, default_value_t = RainKind::Interval)]
    kind: RainKind,
    /// Time column: header name or 1-based number.
    #[arg(long, default_value = "1")]
    time_col: String,
    /// Depth column: header name or 1-based number.
    #[arg(long, default_value = "2")]
    depth_col: String,
    /// Time format.
    #[arg(long, value_enum, default_value_t = TimeFormat::Iso)]
    time_format: TimeFormat,
    /// Depth unit.
    #[arg(long, value_enum, default_value_t = DepthUnit::Mm)]
    unit: DepthUnit,
    /// Interval of the rows (or of the hyetograph built from tips), s.
    #[arg(long, default_value_t = 300)]
    interval_s: u32,
    /// Whether a row's stamp is the end or the start of its interval.
    #[arg(long, value_enum, default_value_t = Stamp::End)]
    stamp: Stamp,
    /// The file lists wet intervals only; missing ones are dry (not gaps).
    #[arg(long)]
    sparse: bool,
    /// Bad rows and gaps are errors (exit 2) instead of warnings.
    #[arg(long)]
    strict: bool,
    /// Replay only event N (numbered from 1) of the recorded rain, the events being split by
    /// --inter-event-s of dry time; the replay starts from the normal level.
    #[arg(long)]
    event: Option<usize>,
    /// With --event N: start the replay at the first of the events before N that each ended
    /// less than the pond's drawdown target before the next began, so that the water they
    /// left carries over into N (the summary then covers them all).
    #[arg(long, requires = "event")]
    carry_over: bool,
    /// Dry time that separates events, s (default: the pond's control.inter_event_s).
    #[arg(long)]
    inter_event_s: Option<u32>,
    /// Print the recorded rain's events as CSV to stdout (number, start, end, duration,
    /// depth, dry time before; gaps without data count as dry, as they are replayed) and
    /// stop without replaying.
    #[arg(long, conflicts_with = "event")]
    list_events: bool,
}

#[derive(Args, Clone)]
struct SimArgs {
    /// Policies to run side by side.
    #[arg(long, value_delimiter = ',', value_enum, default_values = ["controller", "threshold", "fixed", "bound"])]
    policy: Vec<PolicyKind>,
    /// Seed of the sensor noise.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// A fault: TARGET:KIND@START[-END] (stage|rain|gate : stuck|dropout|stall|drift=R|offset=B), s.
    #[arg(long)]
    fault: Vec<String>,
    /// A TOML file of faults (`[[fault]]`: at_s, until_s, target, kind, per_h or by) and
    /// `[models]` settings.
    #[arg(long)]
    faults_file: Option<PathBuf>,
    /// Longest simulated time after the rain ends, h.
    #[arg(long, default_value_t = 72.0)]
    tail_h: f64,
    /// Time-series row interval, s.
    #[arg(long, default_value_t = 60)]
    record_s: u32,
}

/// A failure with its exit code.
struct Fail {
    code: u8,
    message: String,
}

fn bad(message: impl Into<String>) -> Fail {
    Fail {
        code: 2,
        message: message.into(),
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    eprintln!("{CAUTION}");
    match dispatch(cli.command) {
        Ok(code) => ExitCode::from(code),
        Err(f) => {
            for line in f.message.lines() {
                eprintln!("holdback: {line}");
            }
            ExitCode::from(f.code)
        }
    }
}

fn load(path: &Path) -> Result<Pond, Fail> {
    pondfile::load_path(path).map_err(|ps| refused(&ps, ""))
}

/// A pond file's problems, one `error:` line each, `tag` before each (the `--vary` variant).
fn refused(problems: &[pondfile::Problem], tag: &str) -> Fail {
    bad(problems
        .iter()
        .map(|p| format!("error: {tag}{p}"))
        .collect::<Vec<_>>()
        .join("\n"))
}

fn dispatch(cmd: Command) -> Result<u8, Fail> {
    match cmd {
        Command::Fleet(args) => match holdback_review::cli::run(args) {
            Ok(code) if code == ExitCode::SUCCESS => Ok(0),
            // A log had problems; they were reported on stderr and the rest was used.
            Ok(_) => Ok(2),
            Err(e) => Err(bad(e.to_string())),
        },
        Command::Demo {
            out,
            write_pond,
            force,
        } => {
            if let Some(p) = write_pond {
                if p.exists() && !force {
                    return Err(bad(format!(
                        "--write-pond: {} already exists; left as it is (give --force to replace it)",
                        p.display()
                    )));
                }
                std::fs::write(&p, DEMO_POND)
                    .map_err(|e| bad(format!("cannot write {}: {e}", p.display())))?;
                eprintln!("holdback: wrote the demo pond file to {}", p.display());
                return Ok(0);
            }
            let mut pond = pondfile::load_str(DEMO_POND)
                .map_err(|ps| bad(format!("the built-in demo pond does not load: {}", ps[0])))?;
            add_storage_check(&mut pond, false);
            demo(&pond, &out)
        }
        Command::Check { pond, strict } => {
            let mut p = load(&pond)?;
            println!("{}: ok ({})", pond.display(), p.name);
            add_storage_check(&mut p, true);
            for w in &p.warnings {
                eprintln!("holdback: warning: {w}");
            }
            Ok(if strict && !p.warnings.is_empty() {
                1
            } else {
                0
            })
        }
        Command::Rating {
            pond,
            opening,
            step,
        } => {
            let p = load(&pond)?;
            if !(step.is_finite() && step >= 0.001) {
                return Err(bad(format!(
                    "--step = {step}: must be at least 0.001 m (the table prints stages to the millimetre)"
                )));
            }
            let span = p.config.levels().crest_m + 0.5 - p.config.storage().floor_m();
            if span / step > 100_000.0 {
                return Err(bad(format!(
                    "--step = {step}: gives {:.0} rows from the floor to 0.5 m over the crest; at most 100000",
                    (span / step).ceil()
                )));
            }
            if let Some(a) = opening {
                let max = p.config.outlet().max_opening_m();
                if !(a.is_finite() && (0.0..=max).contains(&a)) {
                    return Err(bad(format!(
                        "--opening = {a}: must be in [0, {max}] m (the gate's max_opening_m)"
                    )));
                }
            }
            print!("{}", report::rating_table(&p, opening, step));
            Ok(0)
        }
        Command::Pack { pond, output } => {
            let p = load(&pond)?;
            let mut buf = vec![0u8; holdback_core::packed::MAX_PACKED_LEN];
            let n = holdback_core::packed::pack(&p.spec, &mut buf)
                .map_err(|e| bad(format!("pack: {e}")))?;
            std::fs::write(&output, &buf[..n])
                .map_err(|e| bad(format!("cannot write {}: {e}", output.display())))?;
            eprintln!(
                "holdback: packed {} into {} ({n} bytes, format version {})",
                pond.display(),
                output.display(),
                holdback_core::packed::PACK_VERSION
            );
            Ok(0)
        }
        Command::Unpack { packed } => {
            let bytes = std::fs::read(&packed)
                .map_err(|e| bad(format!("cannot read {}: {e}", packed.display())))?;
            let spec = holdback_core::packed::unpack_spec(&bytes)
                .map_err(|e| bad(format!("{}: {e}", packed.display())))?;
            spec.build()
                .map_err(|e| bad(format!("{}: {e}", packed.display())))?;
            let json = serde_json::to_string_pretty(&spec)
                .map_err(|e| bad(format!("cannot print the config: {e}")))?;
            println!("{json}");
            eprintln!(
                "holdback: {} is a valid packed config ({} bytes)",
                packed.display(),
                bytes.len()
            );
            Ok(0)
        }
        Command::DesignStorm { pond, design } => {
            let p = load(&pond)?;
            let s = design_storm(&p, &design)?;
            print!("{}", report::hyetograph_csv(&s));
            eprintln!(
                "holdback: {}: {:.2} mm (IDF depth {:.2} mm)",
                s.name,
                s.total_mm(),
                storms::idf_depth_mm(&p, design.return_period, design.duration_min)
            );
            Ok(0)
        }
        Command::Replay {
            pond,
            storm,
            sim,
            out,
        } => {
            let mut p = load(&pond)?;
            add_storage_check(&mut p, false);
            for w in &p.warnings {
                eprintln!("holdback: warning: {w}");
            }
            let Some(s) = storm_from(&p, &storm)? else {
                return Ok(0);
            };
            for n in &s.notes {
                eprintln!("holdback: warning: {n}");
            }
            let opts = run_options(&p, &sim)?;
            let outcome = replay(&p, &s, &sim.policy, &opts, out.as_deref())?;
            Ok(outcome)
        }
        Command::Batch {
            pond,
            return_periods,
            durations_min,
            shapes,
            seeds,
            dt_s,
            sim,
            vary,
            csv,
        } => {
            let text = std::fs::read_to_string(&pond)
                .map_err(|e| bad(format!("cannot read pond file {}: {e}", pond.display())))?;
            let variants = variants(&vary)?;
            if sim.policy.is_empty() {
                return Err(bad("--policy: name at least one policy to run"));
            }
            // Every variant is loaded and checked before any runs, so a refused value costs
            // nothing.
            let mut ponds = Vec::new();
            for v in &variants {
                let label = v
                    .iter()
                    .map(ToString::to_string)
                    .collect::<Vec<_>>()
                    .join(" ");
                let tag = if label.is_empty() {
                    String::new()
                } else {
                    format!("[{label}] ")
                };
                let mut p = pondfile::load_str_with(&text, v).map_err(|ps| refused(&ps, &tag))?;
                add_storage_check(&mut p, false);
                for w in &p.warnings {
                    eprintln!("holdback: warning: {tag}{w}");
                }
                let opts = run_options(&p, &sim)?;
                let mut storms_list = Vec::new();
                for &t in &return_periods {
                    for &d in &durations_min {
                        for &sh in &shapes {
                            storms_list.push(storms::design(&p, t, d, dt_s, sh, 0.5).map_err(bad)?);
                        }
                    }
                }
                ponds.push((label, p, opts, storms_list));
            }
            let mut rows = Vec::new();
            for (label, p, opts, storms_list) in &ponds {
                let mut these =
                    batch::run(p, storms_list, &sim.policy, sim.seed, seeds.max(1), opts);
                for r in &mut these {
                    r.variant.clone_from(label);
                }
                rows.extend(these);
            }
            let table = batch::table(&rows);
            print!("{table}");
            if let Some(c) = csv {
                std::fs::write(&c, batch::csv(&rows))
                    .map_err(|e| bad(format!("cannot write {}: {e}", c.display())))?;
            }
            let judged = batch::judged(&sim.policy);
            let counted: Vec<&batch::BatchRow> = rows
                .iter()
                .filter(|r| judged.is_none_or(|j| r.summary.policy == j.name()))
                .collect();
            let failed = counted.iter().filter(|r| !r.pass).count();
            let baseline_failed = rows.iter().filter(|r| !r.pass).count() - failed;
            eprintln!(
                "holdback: {} runs; {} of {} {} failed a criterion{}",
                rows.len(),
                failed,
                counted.len(),
                judged.map_or("runs".to_string(), |j| format!("{} runs", j.name())),
                if judged.is_some() && baseline_failed > 0 {
                    format!(" (and {baseline_failed} baseline runs, shown for comparison)")
                } else {
                    String::new()
                }
            );
            Ok(if failed > 0 { 1 } else { 0 })
        }
    }
}

/// Every combination of the `--vary KEY=V1,V2,…` settings (one empty variant without any).
fn variants(vary: &[String]) -> Result<Vec<Vec<pondfile::Override>>, Fail> {
    let mut out: Vec<Vec<pondfile::Override>> = vec![Vec::new()];
    for spec in vary {
        let o = pondfile::Override::parse(spec).map_err(|_| {
            bad(format!(
                "--vary {spec:?}: write KEY=V1,V2,… (e.g. control.deadband_m=0.01,0.05)"
            ))
        })?;
        let values: Vec<&str> = o.value.split(',').map(str::trim).collect();
        let key = &o.key;
        if key.is_empty() || values.iter().any(|v| v.is_empty()) {
            return Err(bad(format!(
                "--vary {spec:?}: a key and non-empty values are needed"
            )));
        }
        out = out
            .into_iter()
            .flat_map(|v| {
                values.iter().map(move |x| {
                    let mut w = v.clone();
                    w.push(pondfile::Override {
                        key: key.clone(),
                        value: (*x).to_string(),
                    });
                    w
                })
            })
            .collect();
        if out.len() > 64 {
            return Err(bad(format!(
                "--vary: {} combinations or more; at most 64",
                out.len()
            )));
        }
    }
    Ok(out)
}

fn design_storm(p: &Pond, d: &DesignArgs) -> Result<Storm, Fail> {
    storms::design(
        p,
        d.return_period,
        d.duration_min,
        d.dt_s,
        d.shape,
        d.peak_ratio,
    )
    .map_err(bad)
}

/// The storm to replay, or `None` when `--list-events` asked only for the record's events
/// (printed to stdout).
fn storm_from(p: &Pond, a: &StormArgs) -> Result<Option<Storm>, Fail> {
    if let Some(spec) = &a.design {
        let parts: Vec<&str> = spec.split(':').collect();
        let [t, d, shape] = parts[..] else {
            return Err(bad(format!(
                "--design {spec:?}: write RETURN_PERIOD_YR:DURATION_MIN:SHAPE"
            )));
        };
        let t: f32 = t.parse().map_err(|_| {
            bad(format!(
                "--design {spec:?}: return period {t:?} is not a number"
            ))
        })?;
        let d: u32 = d.parse().map_err(|_| {
            bad(format!(
                "--design {spec:?}: duration {d:?} is not whole minutes"
            ))
        })?;
        let shape = <Shape as clap::ValueEnum>::from_str(shape, true).map_err(|_| {
            bad(format!(
                "--design {spec:?}: shape must be uniform, alternating-block or chicago"
            ))
        })?;
        if a.list_events {
            return Err(bad(
                "--list-events: only a recorded rain file (--rain) has events",
            ));
        }
        return storms::design(p, t, d, a.interval_s.min(d * 60).max(1), shape, 0.5)
            .map(Some)
            .map_err(bad);
    }
    let Some(path) = &a.rain else {
        return Err(bad("give --rain FILE.csv or --design T:D:SHAPE"));
    };
    let text = std::fs::read_to_string(path)
        .map_err(|e| bad(format!("cannot read {}: {e}", path.display())))?;
    let fmt = RainFormat {
        kind: a.kind,
        time_col: a.time_col.clone(),
        depth_col: a.depth_col.clone(),
        time_format: a.time_format,
        unit: a.unit,
        interval_s: a.interval_s,
        bucket_mm: p.config.sensors().gauge.bucket_mm as f64,
        stamp: a.stamp,
        sparse: a.sparse,
    };
    let rec = rainfile::parse(&text, &fmt).map_err(|e| bad(format!("{}: {e}", path.display())))?;
    let name = path.display().to_string();
    for b in &rec.bad_rows {
        eprintln!(
            "holdback: {}: {name}: {b}",
            if a.strict { "error" } else { "warning" }
        );
    }
    for g in &rec.gaps {
        eprintln!(
            "holdback: {}: {name}: {g}",
            if a.strict { "error" } else { "warning" }
        );
    }
    if a.strict && (!rec.bad_rows.is_empty() || !rec.gaps.is_empty()) {
        return Err(bad(format!(
            "{name}: {} bad rows and {} gaps (--strict)",
            rec.bad_rows.len(),
            rec.gaps.len()
        )));
    }
    eprintln!(
        "holdback: {name}: {} rows read, {:.2} mm over {:.1} h",
        rec.rows_read,
        rec.total_mm(),
        rec.rain_mm.len() as f64 * rec.dt_s as f64 / 3600.0
    );
    let inter = a.inter_event_s.unwrap_or(p.config.control().inter_event_s);
    let events = rainfile::split_events(&rec, inter);
    let at = |step: usize| rec.start_s + (step as i64) * i64::from(rec.dt_s);
    let clock = |step: usize| rainfile::clock_text(at(step), a.time_format);
    // Dry time before each event (None for the first: the record says nothing before it).
    let dry_before_s = |i: usize| -> Option<i64> {
        let e = events.get(i)?;
        let prev = events.get(i.checked_sub(1)?)?;
        Some((e.first_step - prev.end_step) as i64 * i64::from(rec.dt_s))
    };
    if a.list_events {
        println!("event,start,end,duration_h,depth_mm,dry_before_h");
        for (i, e) in events.iter().enumerate() {
            println!(
                "{},{},{},{:.2},{:.2},{}",
                i + 1,
                clock(e.first_step),
                clock(e.end_step),
                (e.end_step - e.first_step) as f64 * rec.dt_s as f64 / 3600.0,
                e.depth_mm,
                dry_before_s(i).map_or(String::new(), |d| format!("{:.2}", d as f64 / 3600.0))
            );
        }
        eprintln!(
            "holdback: {name}: {} events (separated by at least {inter} s without rain)",
            events.len()
        );
        return Ok(None);
    }
    eprintln!(
        "holdback: {name}: {} events (separated by at least {inter} s without rain; list them with --list-events, replay one with --event N)",
        events.len()
    );
    let mut notes = Vec::new();
    // The rain replayed and, for --event, the number of the first event in it.
    let (rain, first_event) = match a.event {
        None => (rec.rain_mm.clone(), None),
        Some(n) => {
            let i = n
                .checked_sub(1)
                .filter(|&i| i < events.len())
                .ok_or_else(|| {
                    bad(format!(
                        "--event {n}: the record has {} events (numbered from 1)",
                        events.len()
                    ))
                })?;
            let e = &events[i];
            eprintln!(
                "holdback: event {n}: {} to {}, {:.2} mm",
                clock(e.first_step),
                clock(e.end_step),
                e.depth_mm
            );
            let drawdown_s = i64::from(p.config.control().drawdown_target_s);
            let undrained = |k: usize| dry_before_s(k).filter(|&d| d < drawdown_s);
            // With --carry-over, back to the first event of the chain that began with the pond
            // drained (at least the drawdown target dry before it, or the record's start).
            let mut first = i;
            while a.carry_over && first > 0 && undrained(first).is_some() {
                first -= 1;
            }
            if first < i {
                notes.push(format!(
                    "event {n} is replayed from event {} ({}), the first of the events before it that each followed the last by less than the {:.1} h drawdown target, so the water they left carries over; the summary covers events {}-{n}",
                    first + 1,
                    clock(events[first].first_step),
                    drawdown_s as f64 / 3600.0,
                    first + 1
                ));
            }
            if let Some(d) = undrained(first) {
                notes.push(format!(
                    "event {} is replayed from the normal level, but the event before it ended only {:.1} h earlier, less than the {:.1} h drawdown target: the pond may not have been empty when it began (--carry-over replays the events before it too; the whole record carries all the water over)",
                    first + 1,
                    d as f64 / 3600.0,
                    drawdown_s as f64 / 3600.0
                ));
            }
            if first == 0 && a.carry_over && i > 0 {
                notes.push(
                    "the chain begins with the record's first event: the record says nothing of the pond before it".to_string(),
                );
            }
            (
                rec.rain_mm[events[first].first_step..e.end_step].to_vec(),
                Some(first + 1),
            )
        }
    };
    if !rec.bad_rows.is_empty() {
        notes.push(format!(
            "{name}: {} rows left out (first: {})",
            rec.bad_rows.len(),
            rec.bad_rows
                .first()
                .map_or(String::new(), |b| b.to_string())
        ));
    }
    if !rec.gaps.is_empty() {
        let missing: i64 = rec.gaps.iter().map(|g| g.missing_s).sum();
        notes.push(format!(
            "{name}: {} gaps without data, {:.1} h in all, replayed as dry",
            rec.gaps.len(),
            missing as f64 / 3600.0
        ));
    }
    Ok(Some(Storm {
        name: match (a.event, first_event) {
            (Some(n), Some(m)) if m < n => format!("{name} events {m}-{n}"),
            (Some(n), _) => format!("{name} event {n}"),
            (None, _) => name,
        },
        dt_s: rec.dt_s,
        rain_mm: rain,
        notes,
    }))
}

/// Adds the storage check's warning (storage the pond needs for the design storms against
/// what it holds) to the pond's warnings, so every summary and report of a run carries it.
/// Prints the check's line when `print` is set.
fn add_storage_check(p: &mut Pond, print: bool) {
    match pondfile::storage_check(p) {
        Ok(c) => {
            if print {
                println!("{}", c.line());
            }
            if let Some(w) = c.warning() {
                p.warnings.push(w);
            }
        }
        Err(e) => p.warnings.push(format!("storage check not done: {e}")),
    }
}

fn run_options(p: &Pond, a: &SimArgs) -> Result<RunOptions, Fail> {
    let mut faults = Vec::new();
    let mut models = Models::default();
    if let Some(path) = &a.faults_file {
        #[derive(serde::Deserialize)]
        #[serde(deny_unknown_fields)]
        struct FaultFile {
            #[serde(default)]
            fault: Vec<Fault>,
            #[serde(default)]
            models: Option<Models>,
        }
        let text = std::fs::read_to_string(path)
            .map_err(|e| bad(format!("cannot read {}: {e}", path.display())))?;
        let f: FaultFile = toml::from_str(&text)
            .map_err(|e| bad(format!("{}: {}", path.display(), e.message())))?;
        for fault in &f.fault {
            fault
                .check()
                .map_err(|e| bad(format!("{}: {e}", path.display())))?;
        }
        faults.extend(f.fault);
        if let Some(m) = f.models {
            m.check()
                .map_err(|e| bad(format!("{}: {e}", path.display())))?;
            models = m;
        }
    }
    for s in &a.fault {
        faults.push(Fault::parse(s).map_err(bad)?);
    }
    if !(a.tail_h.is_finite() && a.tail_h > 0.0 && a.tail_h <= 24.0 * 30.0) {
        return Err(bad(format!(
            "--tail-h = {}: must be in (0, 720] h",
            a.tail_h
        )));
    }
    let _ = p;
    Ok(RunOptions {
        seed: a.seed,
        models,
        faults,
        tail_s: (a.tail_h * 3600.0) as u32,
        record_s: a.record_s,
        forecast_at_s: Vec::new(),
    })
}

/// Runs the policies, prints their summaries, writes the files; the exit code is the first
/// policy's verdict.
fn replay(
    p: &Pond,
    s: &Storm,
    policies: &[PolicyKind],
    opts: &RunOptions,
    out: Option<&Path>,
) -> Result<u8, Fail> {
    let bound = sim::run(p, s, PolicyKind::Bound, opts);
    let mut summaries: Vec<(sim::Run, Summary)> = Vec::new();
    for &k in policies {
        if k == PolicyKind::Fixed && p.existing.is_none() {
            eprintln!("holdback: warning: no [existing] outlet in the pond file; skipping fixed");
            continue;
        }
        let r = if k == PolicyKind::Bound {
            bound.clone()
        } else {
            sim::run(p, s, k, opts)
        };
        let sm = summary::summarise(p, s, &r, opts.seed, &opts.faults, Some(&bound));
        summaries.push((r, sm));
    }
    if summaries.is_empty() {
        return Err(bad(
            "no policy left to run (fixed needs an [existing] outlet in the pond file)",
        ));
    }
    print!("{}", report::summary_table(&summaries));
    if let Some(dir) = out {
        report::write_all(p, s, &summaries, dir).map_err(bad)?;
        eprintln!("holdback: wrote results into {}", dir.display());
    }
    // The exit code judges the controller when it ran (the policy the device runs), else
    // the first policy listed.
    let judged = summaries
        .iter()
        .find(|(r, _)| r.policy == PolicyKind::Controller)
        .or(summaries.first());
    let pass = judged.is_none_or(|(_, sm)| sm.pass);
    Ok(if pass { 0 } else { 1 })
}

fn demo(p: &Pond, out: &Path) -> Result<u8, Fail> {
    println!("# {}", p.name);
    for w in &p.warnings {
        eprintln!("holdback: warning: {w}");
    }
    println!("# rating: stage, storage and discharge (gate closed, half, fully open)");
    print!("{}", report::rating_table(p, None, 0.25));
    let storm = storms::design(p, 10.0, 60, 300, Shape::Chicago, 0.5).map_err(bad)?;
    println!();
    println!("# storm: {} ({:.1} mm)", storm.name, storm.total_mm());
    // The forecast is shown from the start of the heaviest rain step.
    let heaviest = storm
        .rain_mm
        .iter()
        .enumerate()
        .fold(
            (0usize, 0.0f64),
            |b, (k, d)| if *d > b.1 { (k, *d) } else { b },
        )
        .0;
    let opts = RunOptions {
        seed: 1,
        models: Models::default(),
        faults: Vec::new(),
        tail_s: 72 * 3600,
        record_s: 60,
        forecast_at_s: vec![heaviest as u32 * storm.dt_s],
    };
    let run = sim::run(p, &storm, PolicyKind::Controller, &opts);
    println!("# routed outflow, policy controller, every 10 min for the first 4 h");
    println!("t_min,rain_mm,inflow_m3s,stage_m,release_m3s,gate_m,mode");
    let mut rain = 0.0;
    for r in &run.rows {
        rain += r.rain_mm;
        if r.t_s % 600 == 0 && r.t_s <= 4 * 3600 {
            println!(
                "{},{:.2},{:.3},{:.3},{:.3},{:.3},{}",
                r.t_s / 60,
                rain,
                r.inflow_m3s,
                r.stage_m,
                r.release_m3s,
                r.gate_m,
                r.mode
            );
            rain = 0.0;
        }
    }
    for fc in &run.forecast_checks {
        println!();
        print!("{}", report::forecast_table(fc));
    }
    println!();
    println!("# controller events");
    for e in &run.events {
        println!("{:>6} s  {:<18} {}", e.t_s, e.kind, e.detail);
    }
    println!();
    eprintln!(
        "holdback: demo: writing the plots, summaries and report into {}",
        out.display()
    );
    replay(
        p,
        &storm,
        &[
            PolicyKind::Controller,
            PolicyKind::Threshold,
            PolicyKind::Fixed,
            PolicyKind::Bound,
        ],
        &opts,
        Some(out),
    )
}
