//! `holdback fleet ...`: the asset manager's commands, as a `clap` definition the desktop
//! tool embeds, and [`run`] that carries one out. Output goes to stdout; problems found in a
//! log go to stderr and give exit code 2 (the rest of the log is still read and used).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use clap::{Args, Subcommand};

use crate::error::ReviewError;
use crate::pond::Pond;
use crate::read::{self, DecodedLog, ReadOptions};
use crate::report::{self, FleetData, ReportOptions};
use crate::store::Store;
use crate::storm::{self, SummaryOptions};
use crate::time::stamp;
use crate::{logfile, rain, telemetry};

/// `holdback fleet`: review event logs of a fleet of ponds.
#[derive(Debug, Args)]
pub struct FleetArgs {
    /// What to do.
    #[command(subcommand)]
    pub cmd: FleetCmd,
}

/// Store location shared by the store commands.
#[derive(Debug, Args, Clone)]
pub struct DbArg {
    /// Fleet store: a SQLite file path, or a PostgreSQL connection string
    /// (`postgresql://user@host:port/db` or `host=... user=...`).
    #[arg(long, env = "HOLDBACK_DB", default_value = "holdback-fleet.sqlite")]
    pub db: String,
}

/// Flash geometry of raw dumps.
#[derive(Debug, Args, Clone)]
pub struct GeometryArg {
    /// Flash geometry of raw dumps: read,write,erase sizes in bytes.
    #[arg(long, default_value = "1,4,4096", value_parser = parse_geometry)]
    pub geometry: (usize, usize, usize),
}

fn parse_geometry(s: &str) -> Result<(usize, usize, usize), String> {
    let v: Vec<usize> = s
        .split(',')
        .map(|x| x.trim().parse::<usize>().map_err(|e| format!("{x:?}: {e}")))
        .collect::<Result<_, _>>()?;
    match v.as_slice() {
        [r, w, e] => Ok((*r, *w, *e)),
        _ => Err(format!("{s:?}: give read,write,erase (three numbers)")),
    }
}

/// The fleet subcommands.
#[derive(Debug, Subcommand)]
pub enum FleetCmd {
    /// Decode a dump, exported log or telemetry file: records as the firmware's telemetry
    /// event messages (firmware/TELEMETRY.md), one a line, on stdout; problems (offset,
    /// length, why) on stderr.
    Decode {
        /// The file.
        file: PathBuf,
        /// `device_id` written in each message when the log does not name a numeric device
        /// (a raw dump, or a log file of a named device).
        #[arg(long, default_value_t = 0)]
        device_id: u32,
        /// Flash geometry.
        #[command(flatten)]
        geometry: GeometryArg,
    },
    /// Convert a dump or telemetry file into an exported log file (one per device).
    Export {
        /// The file.
        file: PathBuf,
        /// Device id, for a raw dump (which does not name its device).
        #[arg(long)]
        device: Option<String>,
        /// Output file (a telemetry file with several devices: `<out>.<device>`).
        #[arg(long)]
        out: PathBuf,
        /// Flash geometry.
        #[command(flatten)]
        geometry: GeometryArg,
    },
    /// Storm summaries of one log, without a store.
    Storms {
        /// The log file.
        file: PathBuf,
        /// The fleet's pond record: a JSON object (pond_id, name, permit_m3s, normal_m,
        /// crest_m, freeboard_min_m, drawdown_target_s, design_return_period_yr, idf, wear),
        /// not the TOML pond file of `holdback check`.
        #[arg(long)]
        pond: PathBuf,
        /// Rain CSV, for a log without rain records.
        #[arg(long)]
        rain: Option<PathBuf>,
        /// Flash geometry.
        #[command(flatten)]
        geometry: GeometryArg,
    },
    /// Register or update ponds from pond files.
    AddPond {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// The fleet's pond records (JSON, as for `fleet storms --pond`; not TOML pond files).
        files: Vec<PathBuf>,
    },
    /// Import logs (dumps, exported logs, telemetry); importing twice changes nothing.
    Import {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// Device id for raw dumps.
        #[arg(long)]
        device: Option<String>,
        /// Rain CSV to store for the device.
        #[arg(long)]
        rain: Option<PathBuf>,
        /// Flash geometry.
        #[command(flatten)]
        geometry: GeometryArg,
        /// Files.
        files: Vec<PathBuf>,
    },
    /// Ponds that exceeded their permit in a year, and how often.
    Exceedances {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// Calendar year (UTC).
        #[arg(long)]
        year: i32,
    },
    /// Freeboard used against storm return period.
    Freeboard {
        /// The store.
        #[command(flatten)]
        db: DbArg,
    },
    /// Drawdown time trend per pond.
    Drawdown {
        /// The store.
        #[command(flatten)]
        db: DbArg,
    },
    /// Gate wear ranking.
    GateWear {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// Only this year.
        #[arg(long)]
        year: Option<i32>,
    },
    /// Sensor health ranking.
    SensorHealth {
        /// The store.
        #[command(flatten)]
        db: DbArg,
    },
    /// Write the fleet report (one HTML file) and, optionally, every table as CSV.
    Report {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// The HTML file.
        #[arg(long, default_value = "fleet-report.html")]
        out: PathBuf,
        /// Also write every table as CSV into this folder.
        #[arg(long)]
        csv_dir: Option<PathBuf>,
        /// Storms per pond with a plot.
        #[arg(long, default_value_t = 6)]
        plots_per_pond: usize,
    },
    /// Every report table as CSV.
    ExportCsv {
        /// The store.
        #[command(flatten)]
        db: DbArg,
        /// Folder.
        #[arg(long)]
        dir: PathBuf,
    },
    /// Write an invented demo fleet (pond files and monthly raw dumps written by the
    /// firmware's event log) and, with --db, import it.
    Demo {
        /// Folder.
        #[arg(long)]
        out: PathBuf,
        /// Ponds.
        #[arg(long, default_value_t = 8)]
        ponds: usize,
        /// Seed.
        #[arg(long, default_value_t = 7)]
        seed: u64,
        /// Year (UTC) the demo starts.
        #[arg(long, default_value_t = 2025)]
        year: i32,
        /// Days simulated.
        #[arg(long, default_value_t = 365)]
        days: u32,
        /// Import into this store too.
        #[arg(long)]
        db: Option<String>,
    },
}

fn report_problems(label: &Path, log: &DecodedLog) -> bool {
    for p in &log.problems {
        eprintln!(
            "{}: offset {} len {}: {}",
            label.display(),
            p.offset,
            p.len,
            p.why
        );
    }
    for g in log.gaps() {
        eprintln!(
            "{}: {} record(s) missing after seq {}",
            label.display(),
            g.missing,
            g.after_seq
        );
    }
    !log.problems.is_empty()
}

fn opts(g: &GeometryArg) -> ReadOptions {
    ReadOptions {
        geometry: g.geometry,
    }
}

/// Everything the report needs, read from the store.
type Fleet = (
    Vec<Pond>,
    Vec<storm::StormSummary>,
    Vec<storm::PondHealth>,
    BTreeMap<String, usize>,
);

fn fleet_data(store: &mut Store) -> Result<Fleet, ReviewError> {
    let ponds = store.ponds()?;
    let storms = store.storms(None)?;
    let health = store.health()?;
    let mut problems = BTreeMap::new();
    for p in &ponds {
        problems.insert(
            p.info.pond_id.clone(),
            store.problems(&p.info.pond_id)?.len(),
        );
    }
    Ok((ponds, storms, health, problems))
}

/// Import every file of a demo (or any) folder layout: pond files first, then dumps whose
/// parent folder names the device.
pub fn import_tree(
    store: &mut Store,
    ponds: &[PathBuf],
    dumps: &[PathBuf],
    o: &ReadOptions,
) -> Result<bool, ReviewError> {
    store.set_deferred(true)?;
    for p in ponds {
        store.put_pond(&Pond::load(p)?)?;
    }
    let mut any = false;
    for d in dumps {
        let dev = d
            .parent()
            .and_then(|p| p.file_name())
            .map(|s| s.to_string_lossy().into_owned());
        for log in read::read_file(d, o)? {
            any |= report_problems(d, &log);
            store.import(
                &log,
                &d.display().to_string(),
                log.device.clone().or(dev.clone()).as_deref(),
            )?;
        }
    }
    store.set_deferred(false)?;
    Ok(any)
}

/// Carry out one fleet command.
pub fn run(args: FleetArgs) -> Result<ExitCode, ReviewError> {
    let mut problems = false;
    match args.cmd {
        FleetCmd::Decode {
            file,
            device_id,
            geometry,
        } => {
            for log in read::read_file(&file, &opts(&geometry))? {
                let dev = log
                    .device
                    .as_deref()
                    .and_then(|d| d.parse::<u32>().ok())
                    .unwrap_or(device_id);
                for l in &log.records {
                    println!("{}", telemetry::event_line(dev, &l.record));
                }
                problems |= report_problems(&file, &log);
            }
        }
        FleetCmd::Export {
            file,
            device,
            out,
            geometry,
        } => {
            let logs = read::read_file(&file, &opts(&geometry))?;
            let many = logs.len() > 1;
            for log in logs {
                problems |= report_problems(&file, &log);
                let dev = device.clone().or(log.device.clone()).ok_or_else(|| {
                    ReviewError::Usage(format!(
                        "{}: a raw dump does not name its device: give --device",
                        file.display()
                    ))
                })?;
                let path = if many {
                    PathBuf::from(format!("{}.{dev}", out.display()))
                } else {
                    out.clone()
                };
                logfile::write_file(&path, &dev, &log.records())?;
                println!("{}: {} records of {dev}", path.display(), log.records.len());
            }
        }
        FleetCmd::Storms {
            file,
            pond,
            rain: rain_file,
            geometry,
        } => {
            let pond = Pond::load(&pond)?;
            let csv = rain_file.as_deref().map(rain::read_csv).transpose()?;
            for log in read::read_file(&file, &opts(&geometry))? {
                problems |= report_problems(&file, &log);
                let storms = storm::summarise(
                    &pond,
                    &log.records(),
                    csv.as_deref(),
                    &SummaryOptions::default(),
                );
                println!(
                    "start (UTC)\thours\train mm\trarest\tpeak stage m\tfreeboard left m\tpeak/permit\tover permit h\tdrawdown h\tmoves\tflags"
                );
                for s in storms {
                    println!(
                        "{}\t{:.1}\t{}\t{}\t{:.2}\t{:.2}\t{:.2}\t{:.2}\t{}\t{}\t{}",
                        stamp(s.start_s),
                        f64::from(s.end_s - s.start_s) / 3600.0,
                        s.rain_depth_mm.map_or("-".into(), |d| format!("{d:.1}")),
                        s.rarest
                            .map_or("-".into(), |r| format!("{} @ {} min", r.0.text(), r.1)),
                        s.peak_stage_m,
                        s.freeboard_left_m,
                        s.peak_release_ratio,
                        f64::from(s.over_permit_s) / 3600.0,
                        s.drawdown_s
                            .map_or("-".into(), |d| format!("{:.1}", f64::from(d) / 3600.0)),
                        s.gate_moves,
                        s.flags
                            .iter()
                            .map(|f| f.code())
                            .collect::<Vec<_>>()
                            .join(" ")
                    );
                }
            }
        }
        FleetCmd::AddPond { db, files } => {
            let mut store = Store::open(&db.db)?;
            for f in files {
                let p = Pond::load(&f)?;
                store.put_pond(&p)?;
                println!("pond {} registered", p.info.pond_id);
            }
        }
        FleetCmd::Import {
            db,
            device,
            rain: rain_file,
            geometry,
            files,
        } => {
            let mut store = Store::open(&db.db)?;
            for f in &files {
                for log in read::read_file(f, &opts(&geometry))? {
                    problems |= report_problems(f, &log);
                    let r = store.import(&log, &f.display().to_string(), device.as_deref())?;
                    problems |= r.conflicts > 0;
                    println!(
                        "{}: device {}: {} records ({} new, {} conflicting), {} problems, {} gaps, {}",
                        f.display(),
                        r.device,
                        r.records,
                        r.new_records,
                        r.conflicts,
                        r.problems,
                        r.gaps,
                        r.storms.map_or(
                            "pond not registered: records stored, no summary".into(),
                            |n| format!("{n} storms")
                        )
                    );
                }
            }
            if let Some(rf) = rain_file {
                let dev =
                    device.ok_or_else(|| ReviewError::Usage("--rain needs --device".into()))?;
                let n = store.put_rain(&dev, &rain::read_csv(&rf)?)?;
                println!("{}: {n} new rain intervals for {dev}", rf.display());
            }
        }
        FleetCmd::Exceedances { db, year } => {
            let mut store = Store::open(&db.db)?;
            println!("pond\tname\tstorms\tstorms over permit\thours over\tm3 over");
            for r in store.exceedances(year)? {
                println!(
                    "{}\t{}\t{}\t{}\t{:.1}\t{:.0}",
                    r.pond_id,
                    r.name,
                    r.storms,
                    r.exceeded_storms,
                    r.over_permit_s as f64 / 3600.0,
                    r.over_permit_m3
                );
            }
        }
        FleetCmd::Freeboard { db } => {
            let mut store = Store::open(&db.db)?;
            println!(
                "pond\tstorm start\treturn period\tduration min\tfreeboard used %\tfreeboard left m"
            );
            for r in store.freeboard_vs_return_period()? {
                println!(
                    "{}\t{}\t{}\t{}\t{:.0}\t{:.2}",
                    r.pond_id,
                    stamp(r.start_s),
                    r.rp_text,
                    r.rp_duration_min.map_or("-".into(), |d| d.to_string()),
                    r.freeboard_used_frac * 100.0,
                    r.freeboard_left_m
                );
            }
        }
        FleetCmd::Drawdown { db } => {
            let mut store = Store::open(&db.db)?;
            println!("pond\tstorms\tmean h\tlast h\tmax h\ttarget h\ttrend h/yr");
            for r in store.drawdown_trend()? {
                println!(
                    "{}\t{}\t{:.1}\t{:.1}\t{:.1}\t{:.0}\t{}",
                    r.pond_id,
                    r.storms,
                    r.mean_h,
                    r.last_h,
                    r.max_h,
                    r.target_h,
                    r.trend_h_per_year
                        .map_or("-".into(), |t| format!("{t:+.1}"))
                );
            }
        }
        FleetCmd::GateWear { db, year } => {
            let mut store = Store::open(&db.db)?;
            println!("pond\tyear\tmoves\ttravel strokes\tdays\tbudget used\tover budget");
            for r in store.gate_wear_ranking(year)? {
                println!(
                    "{}\t{}\t{}\t{:.1}\t{:.0}\t{:.2}\t{}",
                    r.pond_id,
                    r.year,
                    r.moves,
                    r.travel,
                    r.days_covered,
                    r.budget_ratio,
                    if r.over_budget { "yes" } else { "no" }
                );
            }
        }
        FleetCmd::SensorHealth { db } => {
            let mut store = Store::open(&db.db)?;
            println!(
                "pond\tscore\tdrift m/yr\tdry offset m\tunhealthy %\tgauge suspect\tfaults\tdrift flag"
            );
            for h in store.sensor_health_ranking()? {
                println!(
                    "{}\t{:.2}\t{}\t{}\t{:.1}\t{}\t{}\t{}",
                    h.pond_id,
                    h.sensor_score,
                    h.drift_m_per_year
                        .map_or("-".into(), |d| format!("{d:+.3}")),
                    h.dry_offset_m.map_or("-".into(), |d| format!("{d:+.3}")),
                    h.unhealthy_frac * 100.0,
                    h.gauge_suspect,
                    h.faults.values().sum::<u32>(),
                    if h.drift_flag { "yes" } else { "no" }
                );
            }
        }
        FleetCmd::Report {
            db,
            out,
            csv_dir,
            plots_per_pond,
        } => {
            let mut store = Store::open(&db.db)?;
            let (ponds, storms, health, probs) = fleet_data(&mut store)?;
            let d = FleetData {
                ponds: &ponds,
                storms: &storms,
                health: &health,
                problems: &probs,
            };
            let html = report::html(&d, &ReportOptions { plots_per_pond });
            std::fs::write(&out, html).map_err(|e| ReviewError::io(&out, e))?;
            println!(
                "{}: {} ponds, {} storms",
                out.display(),
                ponds.len(),
                storms.len()
            );
            if let Some(dir) = csv_dir {
                for p in report::write_csv(&dir, &d)? {
                    println!("{}", p.display());
                }
            }
        }
        FleetCmd::ExportCsv { db, dir } => {
            let mut store = Store::open(&db.db)?;
            let (ponds, storms, health, probs) = fleet_data(&mut store)?;
            let d = FleetData {
                ponds: &ponds,
                storms: &storms,
                health: &health,
                problems: &probs,
            };
            for p in report::write_csv(&dir, &d)? {
                println!("{}", p.display());
            }
        }
        FleetCmd::Demo {
            out,
            ponds,
            seed,
            year,
            days,
            db,
        } => {
            let (demo, dumps) = crate::demo::write_fleet(&out, ponds, seed, year, days, 30, 256)?;
            println!(
                "{}: {} ponds, {} dumps",
                out.display(),
                demo.len(),
                dumps.len()
            );
            if let Some(url) = db {
                let mut store = Store::open(&url)?;
                let pond_files: Vec<PathBuf> = demo
                    .iter()
                    .map(|p| {
                        out.join("ponds")
                            .join(format!("{}.json", p.pond.info.pond_id))
                    })
                    .collect();
                problems |= import_tree(&mut store, &pond_files, &dumps, &ReadOptions::default())?;
                let (r, pr, s, p) = store.counts()?;
                println!("{url}: {p} ponds, {r} records, {s} storms, {pr} problems");
            }
        }
    }
    Ok(if problems {
        ExitCode::from(2)
    } else {
        ExitCode::SUCCESS
    })
}
