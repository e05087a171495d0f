//! End-to-end checks of the `holdback` binary on real files in a temp dir, plus the pond-file
//! round trip through the packed device form.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use holdback_core::packed::{MAX_PACKED_LEN, pack, unpack, unpack_spec};
use holdback_sim::pondfile::{self, DEMO_POND};
use holdback_sim::storms::{self, Shape};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_holdback"))
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().expect("the binary runs")
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// `holdback replay POND ARGS... --out OUT`; the exit code must say the run was judged (0 or
/// 1), not that the input was refused (2).
fn replay(pond: &Path, args: &[&str], out: &Path) -> Output {
    let o = bin()
        .arg("replay")
        .arg(pond)
        .args(args)
        .arg("--out")
        .arg(out)
        .output()
        .expect("the binary runs");
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        text(&o.stderr)
    );
    o
}

/// The JSON summary of `policy` in a replay's output folder.
fn summary(out: &Path, policy: &str) -> serde_json::Value {
    let path = out.join(format!("summary-{policy}.json"));
    serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap()
}

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The arguments that read the recorded Singapore excerpt (`tests/data/rain`, see its README)
/// and split it at 1 h of dry time.
fn sg_rain_args() -> Vec<String> {
    let rain = repo().join("tests/data/rain/sg_s117_storms.csv");
    [
        "--rain",
        rain.to_str().unwrap(),
        "--time-col",
        "timestamp_sgt",
        "--depth-col",
        "value",
        "--inter-event-s",
        "3600",
    ]
    .map(String::from)
    .to_vec()
}

fn demo_file(dir: &Path) -> PathBuf {
    let p = dir.join("pond.toml");
    std::fs::write(&p, DEMO_POND).unwrap();
    p
}

/// A temp dir with the demo pond file in it (the dir lives as long as the first value).
fn demo_dir() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = demo_file(dir.path());
    (dir, p)
}

/// `holdback batch POND ARGS... --tail-h 24 --csv DIR/batch.csv`: the output and the CSV.
fn batch(dir: &Path, pond: &Path, args: &[&str]) -> (Output, String) {
    let csv = dir.join("batch.csv");
    let o = bin()
        .arg("batch")
        .arg(pond)
        .args(args)
        .args(["--tail-h", "24", "--csv"])
        .arg(&csv)
        .output()
        .expect("the binary runs");
    let c = std::fs::read_to_string(&csv).unwrap_or_default();
    (o, c)
}

/// Every command prints the caution line on stderr.
#[test]
fn demo_prints_rating_and_routed_storm_and_the_caution() {
    let dir = tempfile::tempdir().unwrap();
    let o = bin().arg("demo").current_dir(dir.path()).output().unwrap();
    let out = text(&o.stdout);
    let err = text(&o.stderr);
    // Without --out the files go to ./holdback-demo, said on stderr.
    assert!(err.contains("into holdback-demo"), "{err}");
    assert!(dir.path().join("holdback-demo/report.html").exists());
    assert!(
        err.contains("CAUTION") && err.contains("qualified engineer"),
        "{err}"
    );
    assert!(out.contains("stage_m,storage_m3,q_open_0.000_m3s"), "{out}");
    assert!(
        out.contains("t_min,rain_mm,inflow_m3s,stage_m,release_m3s"),
        "{out}"
    );
    assert!(out.contains("bound"), "{out}");
    assert!(
        out.contains("ahead_min,inflow_pred_m3s,inflow_sim_m3s,stage_pred_m,stage_sim_m"),
        "{out}"
    );
    // The judged policy is the controller: exit 0 exactly when its summary passes.
    let sm: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("holdback-demo/summary-controller.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(sm["policy"], "controller");
    let pass = sm["pass"].as_bool().unwrap();
    assert_eq!(o.status.code(), Some(if pass { 0 } else { 1 }), "{err}");
    // Every controller mode change in the events matches the mode column of the series.
    let series =
        std::fs::read_to_string(dir.path().join("holdback-demo/series-controller.csv")).unwrap();
    let modes: Vec<&str> = series
        .lines()
        .skip(1)
        .filter_map(|l| l.rsplit(',').next())
        .collect();
    assert!(modes.contains(&"capture") && modes.contains(&"drawdown"));
    let changes = sm["events"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["kind"] == "mode-change")
        .count();
    assert!(changes >= 2, "{changes}");
}

/// The storage check routes the design storms through the pond at min(permit, capacity):
/// cutting the permit to a fifth must raise the storage needed above what the pond holds.
#[test]
fn check_reports_the_storage_needed_and_warns_when_short() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("small.toml");
    std::fs::write(
        &p,
        DEMO_POND.replace("release_m3s = 0.25", "release_m3s = 0.05"),
    )
    .unwrap();
    let o = run(&["check", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0));
    assert!(text(&o.stdout).contains("m3 needed above the normal level"));
    assert!(
        text(&o.stderr).contains("warning: storage: the 10-year storm"),
        "{}",
        text(&o.stderr)
    );
}

#[test]
fn check_accepts_the_demo_and_names_the_path_of_a_bad_value() {
    let (dir, p) = demo_dir();
    let o = run(&["check", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert!(text(&o.stdout).contains(": ok"));

    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, DEMO_POND.replace("width_m = 0.60", "width_m = -0.4")).unwrap();
    let o = run(&["check", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = text(&o.stderr);
    assert!(
        err.contains("outlet.gate.width_m = -0.4: must be a finite length in (0, 1000] m"),
        "{err}"
    );

    let bad = dir.path().join("bad2.toml");
    std::fs::write(
        &bad,
        DEMO_POND.replace("normal_m = 41.00", "normal_m = 43.40"),
    )
    .unwrap();
    let o = run(&["check", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("levels.normal_m = 43.4: must be below crest_m - freeboard_m")
    );

    let o = run(&["check", dir.path().join("missing.toml").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("cannot read pond file"));
}

/// A permit above the old outlet's capacity, and a drawdown target shorter than a full-open
/// drain, are legal but warned about.
#[test]
fn suspicious_values_are_warnings() {
    let t = DEMO_POND
        .replace("release_m3s = 0.25", "release_m3s = 2.5")
        .replace("drawdown_target_s = 172800", "drawdown_target_s = 3600");
    let p = pondfile::load_str(&t).unwrap();
    let w = p.warnings.join("\n");
    assert!(
        w.contains("permit.release_m3s = 2.5: above what the existing"),
        "{w}"
    );
    assert!(
        w.contains("control.drawdown_target_s = 3600: unreachable"),
        "{w}"
    );
}

#[test]
fn rating_rejects_an_opening_beyond_the_gate() {
    let (_dir, p) = demo_dir();
    let o = run(&["rating", p.to_str().unwrap(), "--opening", "0.3"]);
    assert_eq!(o.status.code(), Some(0));
    assert!(text(&o.stdout).starts_with("stage_m,storage_m3,q_open_0.300_m3s\n"));
    let o = run(&["rating", p.to_str().unwrap(), "--opening", "2"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("--opening = 2: must be in [0, 0.6]"));
}

/// `demo --write-pond` writes the demo pond file and never replaces an operator's file
/// without `--force` (before, it overwrote silently).
#[test]
fn write_pond_leaves_an_existing_file_alone_without_force() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("my-pond.toml");
    let o = run(&["demo", "--write-pond", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(std::fs::read_to_string(&p).unwrap(), DEMO_POND);
    std::fs::write(&p, "# my own survey\n").unwrap();
    let o = run(&["demo", "--write-pond", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("already exists"),
        "{}",
        text(&o.stderr)
    );
    assert_eq!(std::fs::read_to_string(&p).unwrap(), "# my own survey\n");
    let o = run(&["demo", "--write-pond", p.to_str().unwrap(), "--force"]);
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(std::fs::read_to_string(&p).unwrap(), DEMO_POND);
}

/// A record interval longer than the run still writes the run's last step (before, the
/// time series was a header alone), and the last row is the end of the run.
#[test]
fn a_record_interval_longer_than_the_run_still_writes_the_end_state() {
    let (dir, p) = demo_dir();
    let out = dir.path().join("out");
    let o = replay(
        &p,
        &[
            "--design",
            "2:30:uniform",
            "--policy",
            "fixed",
            "--record-s",
            "10000000",
        ],
        &out,
    );
    assert!(
        o.status.code().is_some_and(|c| c <= 1),
        "{}",
        text(&o.stderr)
    );
    let csv = std::fs::read_to_string(out.join("series-fixed.csv")).unwrap();
    assert_eq!(csv.lines().count(), 2, "{csv}");
    let s = summary(&out, "fixed");
    let last_t: f64 = csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    // The run's length: its time in modes (a baseline has one, named after the policy).
    let length: u64 = s["time_in_mode_s"]
        .as_object()
        .unwrap()
        .values()
        .map(|v| v.as_u64().unwrap())
        .sum();
    assert_eq!(last_t, length as f64, "{csv}");
}

/// A stage step finer than the printed millimetre is refused at once (before, `--step
/// 1e-9` set out to print billions of rows and never ended); a millimetre step works.
#[test]
fn rating_refuses_a_step_finer_than_it_prints() {
    let (_dir, p) = demo_dir();
    let o = run(&["rating", p.to_str().unwrap(), "--step", "1e-9"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("--step = 0.000000001: must be at least 0.001 m"),
        "{}",
        text(&o.stderr)
    );
    let o = run(&["rating", p.to_str().unwrap(), "--step", "0.001"]);
    assert_eq!(o.status.code(), Some(0));
    // Floor 41.00 to crest + 0.5 = 44.00 m in millimetres, and the header.
    assert_eq!(text(&o.stdout).lines().count(), 3002);
}

/// TOML → PondConfig → pack → unpack → the same config and, re-packed, the same bytes.
#[test]
fn pond_file_round_trips_through_the_packed_form() {
    let pond = pondfile::load_str(DEMO_POND).unwrap();
    let mut a = vec![0u8; MAX_PACKED_LEN];
    let n = pack(&pond.spec, &mut a).unwrap();
    let cfg = unpack(&a[..n]).unwrap();
    assert_eq!(cfg, pond.config);
    let spec = unpack_spec(&a[..n]).unwrap();
    let mut b = vec![0u8; MAX_PACKED_LEN];
    let m = pack(&spec, &mut b).unwrap();
    assert_eq!(a[..n], b[..m]);

    // The same through the CLI, on disk.
    let (dir, p) = demo_dir();
    let bin_path = dir.path().join("pond.bin");
    let o = run(&[
        "pack",
        p.to_str().unwrap(),
        "-o",
        bin_path.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert_eq!(std::fs::read(&bin_path).unwrap(), a[..n]);
    let o = run(&["unpack", bin_path.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0));
    assert!(text(&o.stdout).contains("\"permit_m3s\": 0.25"));
    let mut bytes = std::fs::read(&bin_path).unwrap();
    bytes[10] ^= 0xff;
    std::fs::write(&bin_path, &bytes).unwrap();
    let o = run(&["unpack", bin_path.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("CRC"));
}

/// The storm totals equal the IDF depth D = i(Td)·Td, with i from the demo's Sherman curve
/// i = a/(t + b)^c (10-year: a = 1350, b = 10, c = 0.8; the published Sherman form) evaluated
/// here in f64. Each pattern is defined to hold exactly D (uniform block; alternating block,
/// Chow, Maidment & Mays 1988 §14.4; Chicago, Keifer & Chu 1957).
#[test]
fn design_storm_totals_match_the_idf_depth() {
    let pond = pondfile::load_str(DEMO_POND).unwrap();
    for d_min in [30u32, 60, 180] {
        let want = 1350.0 / (d_min as f64 + 10.0).powf(0.8) * d_min as f64 / 60.0;
        for shape in [Shape::Uniform, Shape::AlternatingBlock, Shape::Chicago] {
            let s = storms::design(&pond, 10.0, d_min, 300, shape, 0.5).unwrap();
            let got = s.total_mm();
            assert!(
                (got / want - 1.0).abs() < 1e-4,
                "{shape:?} {d_min} min: {got} mm, IDF {want} mm"
            );
        }
    }
}

#[test]
fn design_storm_command_prints_csv() {
    let (_dir, p) = demo_dir();
    let o = run(&[
        "design-storm",
        p.to_str().unwrap(),
        "--return-period",
        "10",
        "--duration-min",
        "60",
        "--shape",
        "chicago",
    ]);
    assert_eq!(o.status.code(), Some(0));
    let out = text(&o.stdout);
    assert!(out.starts_with("t_s,rain_mm,intensity_mm_h\n"));
    assert_eq!(out.lines().count(), 1 + 12);
}

/// The recorded Singapore excerpt (tests/data/rain, see its README) holds three storms of
/// more than 50 mm in three spans months apart; split at 1 h of dry time the first span also
/// has a 0.4 mm shower (rows 12-13 of its 5-min steps) before its storm: four events. The
/// months between the spans are reported as gaps, with their line numbers.
#[test]
fn recorded_rain_is_split_into_events_and_replayed() {
    let (dir, p) = demo_dir();
    let out = dir.path().join("out");
    let mut args = sg_rain_args();
    args.extend(
        [
            "--interval-s",
            "300",
            "--event",
            "2",
            "--policy",
            "threshold,bound",
        ]
        .map(String::from),
    );
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = replay(&p, &args, &out);
    let err = text(&o.stderr);
    assert!(
        err.contains(": 4 events (separated by at least 3600 s"),
        "{err}"
    );
    // Steps 47..82 of the 5-min record (2.9 h), whose first interval ends 2017-01-01 12:29:59
    // (stamps mark the end of their interval): 16:15 to 19:10 on the file's clock.
    assert!(
        err.contains("event 2: 2017-01-01 16:15 to 2017-01-01 19:10, 71.40 mm"),
        "{err}"
    );
    // The shower before it ended 2.75 h earlier, less than the 48 h drawdown target: the
    // replay from an empty pond is flagged.
    assert!(
        err.contains("event 2 is replayed from the normal level, but the event before it ended only 2.8 h earlier"),
        "{err}"
    );
    assert!(
        err.contains("lines 95-96:") && err.contains("lines 144-145:"),
        "{err}"
    );
    for f in [
        "series-threshold.csv",
        "summary-threshold.json",
        "summary-bound.json",
        "plots.svg",
        "plots.png",
        "report.html",
    ] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("<svg") && html.contains("qualified engineer"));
    let csv = std::fs::read_to_string(out.join("series-threshold.csv")).unwrap();
    assert!(csv.starts_with("t_s,rain_mm,inflow_m3s,stage_m,stage_read_m,storage_m3"));
}

/// `--event N --carry-over` replays from the first of the events before N that followed each
/// other by less than the drawdown target (in the Singapore excerpt, the 0.4 mm shower that
/// ended 2.75 h before event 2), so the water they left carries over: the summary's rain is
/// both events' (0.4 + 71.4 mm, as `--list-events` gives them), its storm is named for both,
/// and the notes say where the replay began and that nothing is known before the record's
/// first event. Without `--carry-over` event 2 alone is replayed, with the warning.
#[test]
fn carry_over_replays_the_undrained_events_before_the_one_asked_for() {
    let (dir, p) = demo_dir();
    let go = |extra: &[&str], out: &Path| {
        let mut args = sg_rain_args();
        args.extend(["--interval-s", "300", "--policy", "threshold"].map(String::from));
        args.extend(extra.iter().map(|a| a.to_string()));
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = replay(&p, &args, out);
        let j = summary(out, "threshold");
        (
            text(&o.stderr),
            j["rain_mm"].as_f64().unwrap(),
            j["storm"].as_str().unwrap().to_string(),
        )
    };
    let (err, mm, storm) = go(&["--event", "2", "--carry-over"], &dir.path().join("both"));
    assert!(
        err.contains("event 2 is replayed from event 1 (2017-01-01 13:20)"),
        "{err}"
    );
    assert!(
        err.contains("the record says nothing of the pond before it"),
        "{err}"
    );
    assert!(!err.contains("replayed from the normal level"), "{err}");
    assert!((mm - (0.4 + 71.4)).abs() < 1e-6, "{mm}");
    assert!(storm.ends_with("events 1-2"), "{storm}");
    let (err, mm, storm) = go(&["--event", "2"], &dir.path().join("alone"));
    assert!(
        err.contains("event 2 is replayed from the normal level"),
        "{err}"
    );
    assert!(
        err.contains("--carry-over replays the events before it too"),
        "{err}"
    );
    assert!((mm - 71.4).abs() < 1e-6, "{mm}");
    assert!(storm.ends_with("event 2"), "{storm}");
}

/// `--list-events` prints the record's events to stdout as CSV, on the file's own calendar,
/// and replays nothing (before, the event list went to stderr as step indices only).
#[test]
fn list_events_prints_the_events_as_csv_and_stops() {
    let (dir, p) = demo_dir();
    let o = bin()
        .arg("replay")
        .arg(&p)
        .args(sg_rain_args())
        .args(["--list-events", "--out"])
        .arg(dir.path().join("out"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let out = text(&o.stdout);
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines[0], "event,start,end,duration_h,depth_mm,dry_before_h");
    assert_eq!(lines.len(), 5, "{out}");
    assert_eq!(
        lines[2],
        "2,2017-01-01 16:15,2017-01-01 19:10,2.92,71.40,2.75"
    );
    // The three storms of the excerpt: 71.4 + 53.4 + 66.8 mm, and the 0.4 mm shower.
    let total: f64 = lines[1..]
        .iter()
        .map(|l| l.split(',').nth(4).unwrap().parse::<f64>().unwrap())
        .sum();
    assert!((total - 192.0).abs() < 1e-9, "{total}");
    assert!(!dir.path().join("out").exists(), "nothing replayed");
}

/// Bad rows and gaps are reported with line numbers; --strict makes them fatal (exit 2).
#[test]
fn bad_rain_rows_are_reported_with_line_numbers() {
    let (dir, p) = demo_dir();
    let rain = dir.path().join("rain.csv");
    std::fs::write(
        &rain,
        "time,mm\n2024-05-01 10:05,1.0\n2024-05-01 10:10,oops\n2024-05-01 10:15,2.0\n\
         2024-05-01 10:30,1.5\n",
    )
    .unwrap();
    let args = |strict: bool| {
        let mut a = vec![
            "replay".to_string(),
            p.to_str().unwrap().into(),
            "--rain".into(),
            rain.to_str().unwrap().into(),
            "--time-col".into(),
            "time".into(),
            "--depth-col".into(),
            "mm".into(),
            "--policy".into(),
            "threshold".into(),
            "--tail-h".into(),
            "2".into(),
        ];
        if strict {
            a.push("--strict".into());
        }
        a
    };
    let o = bin().args(args(false)).output().unwrap();
    let err = text(&o.stderr);
    assert!(
        err.contains("line 3: depth \"oops\" is not a number"),
        "{err}"
    );
    assert!(err.contains("lines 4-5: 600 s without data"), "{err}");
    assert!(err.contains("3 rows read, 4.50 mm"), "{err}");
    let o = bin().args(args(true)).output().unwrap();
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn faults_parse_and_bad_ones_are_input_errors() {
    let (_dir, p) = demo_dir();
    let base = [
        "replay",
        p.to_str().unwrap(),
        "--design",
        "10:60:chicago",
        "--policy",
        "threshold",
        "--tail-h",
        "24",
    ];
    let mut a = base.to_vec();
    a.extend([
        "--fault",
        "stage:dropout@1200-2400",
        "--fault",
        "gate:stall@3000",
    ]);
    let o = run(&a);
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        text(&o.stderr)
    );
    let mut a = base.to_vec();
    a.extend(["--fault", "stage:melt@10"]);
    let o = run(&a);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("--fault \"stage:melt@10\""));
}

/// The demo's summaries are deterministic (seeded noise, integer clock) and equal the
/// committed golden files. Regenerate with HOLDBACK_BLESS=1 after a deliberate change.
#[test]
fn demo_summaries_match_the_golden_files() {
    let dir = tempfile::tempdir().unwrap();
    let o = run(&["demo", "--out", dir.path().to_str().unwrap()]);
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        text(&o.stderr)
    );
    let golden = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden");
    for policy in ["controller", "threshold", "fixed", "bound"] {
        let name = format!("summary-{policy}.json");
        let got = std::fs::read_to_string(dir.path().join(&name)).unwrap();
        let path = golden.join(format!("demo-{name}"));
        if std::env::var_os("HOLDBACK_BLESS").is_some() {
            std::fs::write(&path, &got).unwrap();
        }
        let want = std::fs::read_to_string(&path).unwrap();
        assert_eq!(got, want, "{name} differs from {}", path.display());
    }
}

#[test]
fn batch_runs_in_parallel_and_fails_when_a_run_fails() {
    let (dir, p) = demo_dir();
    let (o, c) = batch(
        dir.path(),
        &p,
        &[
            "--return-periods",
            "2,100",
            "--durations-min",
            "60",
            "--policy",
            "bound",
        ],
    );
    let out = text(&o.stdout);
    assert_eq!(out.lines().count(), 3, "{out}");
    assert_eq!(c.lines().count(), 3);
    // The 100-year storm overtops the freeboard of the demo pond even at the bound.
    let any_fail = c.lines().skip(1).any(|l| l.ends_with(",false"));
    assert_eq!(o.status.code(), Some(if any_fail { 1 } else { 0 }));
}

/// `batch --policy` runs every policy listed (before, only the first one ran) and
/// `--seed` sets the first seed (before, batch ignored it and always began at 1); the exit
/// code judges the controller's rows, the baselines are shown for comparison.
#[test]
fn batch_runs_every_policy_listed_from_the_seed_given() {
    let (dir, p) = demo_dir();
    let (o, c) = batch(
        dir.path(),
        &p,
        &[
            "--return-periods",
            "2",
            "--durations-min",
            "60",
            "--policy",
            "controller,fixed",
            "--seed",
            "7",
            "--seeds",
            "2",
        ],
    );
    let rows: Vec<Vec<&str>> = c.lines().skip(1).map(|l| l.split(',').collect()).collect();
    // Columns: storm, variant, seed, policy, …
    let runs: Vec<(&str, &str)> = rows.iter().map(|r| (r[3], r[2])).collect();
    assert_eq!(
        runs,
        [
            ("controller", "7"),
            ("controller", "8"),
            ("fixed", "7"),
            ("fixed", "8")
        ],
        "{c}"
    );
    let controller_failed = rows
        .iter()
        .any(|r| r[3] == "controller" && r.last() == Some(&"false"));
    assert_eq!(
        o.status.code(),
        Some(if controller_failed { 1 } else { 0 }),
        "{}",
        text(&o.stderr)
    );
    assert!(text(&o.stdout).contains("fixed"), "{}", text(&o.stdout));
}

/// `batch --vary` runs every combination of the pond-file settings given (the "settings" of
/// storms × settings): each variant is named in the table and the CSV, and a value the pond
/// file would refuse is refused with its key before anything runs.
#[test]
fn batch_varies_pond_file_settings() {
    let (dir, p) = demo_dir();
    let (o, c) = batch(
        dir.path(),
        &p,
        &[
            "--return-periods",
            "2",
            "--durations-min",
            "60",
            "--policy",
            "controller",
            "--vary",
            "control.deadband_m=0.01,0.05",
            "--vary",
            "permit.margin=0.05,0.1",
        ],
    );
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        text(&o.stderr)
    );
    let variants: Vec<&str> = c
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap())
        .collect();
    assert_eq!(
        variants,
        [
            "\"control.deadband_m=0.01 permit.margin=0.05\"",
            "\"control.deadband_m=0.01 permit.margin=0.1\"",
            "\"control.deadband_m=0.05 permit.margin=0.05\"",
            "\"control.deadband_m=0.05 permit.margin=0.1\"",
        ],
        "{c}"
    );
    assert!(text(&o.stdout).contains("control.deadband_m=0.05"));
    let o = run(&[
        "batch",
        p.to_str().unwrap(),
        "--vary",
        "outlet.gate.width_m=0.6,-0.4",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("[outlet.gate.width_m=-0.4] outlet.gate.width_m = -0.4"),
        "{}",
        text(&o.stderr)
    );
}

/// A replay cut short by `--tail-h` while runoff is still arriving never reads as a pass:
/// its peak criteria fail and say "NOT JUDGED" (before, the permit and freeboard criteria
/// showed "pass" on a run that ended before the peak), and the exit code says it failed.
#[test]
fn a_run_cut_short_before_the_runoff_has_arrived_is_not_judged_a_pass() {
    let (dir, p) = demo_dir();
    let out = dir.path().join("out");
    let o = replay(
        &p,
        &[
            "--design",
            "10:60:chicago",
            "--policy",
            "controller",
            "--tail-h",
            "0.01",
        ],
        &out,
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    let s = summary(&out, "controller");
    assert_eq!(s["pass"], false);
    for c in s["criteria"].as_array().unwrap() {
        if ["permit", "freeboard", "overtopping"].contains(&c["id"].as_str().unwrap()) {
            assert_eq!(c["pass"], false, "{c}");
            assert!(
                c["measured"].as_str().unwrap().contains("NOT JUDGED"),
                "{c}"
            );
        }
    }
}

/// What a reviewer must know besides the criteria reaches the summary, not only stderr: the
/// storage check's warning (the demo pond is short of storage for its 10-year, 160-min
/// storm) and a design storm read beyond the IDF's declared return periods.
#[test]
fn storage_and_extrapolation_warnings_reach_the_summary() {
    let (dir, p) = demo_dir();
    let out = dir.path().join("out");
    replay(
        &p,
        &["--design", "500:60:chicago", "--policy", "bound"],
        &out,
    );
    let s = summary(&out, "bound");
    let w: Vec<&str> = s["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert!(w.iter().any(|x| x.starts_with("storage: ")), "{w:?}");
    assert!(
        w.iter()
            .any(|x| x.contains("500-year storm is extrapolated")),
        "{w:?}"
    );
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("<h2>Warnings</h2>") && html.contains("extrapolated"));
}

/// SI → US key suffixes and the factor to divide an SI value by (per column of a
/// `[stage, x]` row), longest suffix first. Factors: 1 ft = 0.3048 m, 1 acre =
/// 0.404 685 642 24 ha, 1 in = 25.4 mm (NIST SP 811, appendix B, exact).
const TO_US: [(&str, &str, [f64; 2]); 11] = [
    ("_m_m2", "_ft_ft2", [0.3048, 0.3048 * 0.3048]),
    ("_m_m3", "_ft_ft3", [0.3048, 0.3048 * 0.3048 * 0.3048]),
    ("_m_m", "_ft_ft", [1.0, 1.0]),
    ("_ha", "_acres", [0.404_685_642_24, 0.0]),
    ("_m_s", "_ft_s", [0.3048, 0.0]),
    ("_mm_h", "_in_h", [25.4, 0.0]),
    ("_m3s", "_cfs", [0.3048 * 0.3048 * 0.3048, 0.0]),
    ("_m2", "_ft2", [0.3048 * 0.3048, 0.0]),
    ("_m3", "_ft3", [0.3048 * 0.3048 * 0.3048, 0.0]),
    ("_m", "_ft", [0.3048, 0.0]),
    ("_mm", "_in", [25.4, 0.0]),
];

/// The test's own SI → US rewrite of a pond file tree (the inverse of what the tool does).
fn to_us(v: &mut toml::Value) {
    let scale = |x: &mut toml::Value, f: f64| {
        let si = x.as_float().or(x.as_integer().map(|i| i as f64)).unwrap();
        *x = toml::Value::Float(si / f);
    };
    match v {
        toml::Value::Table(t) => {
            let keys: Vec<String> = t.keys().cloned().collect();
            for k in keys {
                let Some(&(si, us, f)) = TO_US.iter().find(|(si, _, _)| k.ends_with(si)) else {
                    to_us(t.get_mut(&k).unwrap());
                    continue;
                };
                let mut val = t.remove(&k).unwrap();
                match &mut val {
                    toml::Value::Array(rows) if rows.iter().all(|r| r.is_array()) => {
                        for r in rows {
                            let r = r.as_array_mut().unwrap();
                            scale(&mut r[0], f[0]);
                            scale(&mut r[1], f[1]);
                        }
                    }
                    toml::Value::Array(xs) => xs.iter_mut().for_each(|x| scale(x, f[0])),
                    x => scale(x, f[0]),
                }
                t.insert(format!("{}{us}", k.trim_end_matches(si)), val);
            }
        }
        toml::Value::Array(xs) => xs.iter_mut().for_each(to_us),
        _ => {}
    }
}

/// The demo pond written in US customary units (by this test's own conversion) is the same
/// pond: it checks, packs to the same device bytes as the SI file, and a replay on it gives
/// the same summary. Before, no end-to-end test read a US file.
#[test]
fn a_us_customary_pond_file_is_the_same_pond() {
    let dir = tempfile::tempdir().unwrap();
    let si = demo_file(dir.path());
    let mut tree: toml::Value = toml::from_str(DEMO_POND).unwrap();
    to_us(&mut tree);
    tree.as_table_mut()
        .unwrap()
        .insert("units".into(), toml::Value::String("us".into()));
    let us_text = toml::to_string(&tree).unwrap();
    assert!(us_text.contains("width_ft") && !us_text.contains("width_m"));
    let us = dir.path().join("pond-us.toml");
    std::fs::write(&us, &us_text).unwrap();
    let o = run(&["check", us.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let (a, b) = (dir.path().join("si.bin"), dir.path().join("us.bin"));
    for (pond, packed) in [(&si, &a), (&us, &b)] {
        let o = run(&[
            "pack",
            pond.to_str().unwrap(),
            "-o",
            packed.to_str().unwrap(),
        ]);
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    }
    assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
    let mut summaries = Vec::new();
    for (pond, name) in [(&si, "si"), (&us, "us")] {
        let out = dir.path().join(name);
        replay(
            pond,
            &["--design", "10:60:chicago", "--policy", "controller"],
            &out,
        );
        summaries.push(std::fs::read_to_string(out.join("summary-controller.json")).unwrap());
    }
    assert_eq!(summaries[0], summaries[1]);
}

/// Tipping-bucket input: one row per tip, each worth the pond file's bucket (0.2 mm), read
/// into a 1-minute hyetograph: 300 tips over an hour replay as 60 mm of rain.
#[test]
fn tip_times_replay_as_rain_of_one_bucket_each() {
    let (dir, p) = demo_dir();
    let mut csv = String::from("tip_time\n");
    for k in 0..300 {
        let s = 12 * k + 5;
        csv.push_str(&format!(
            "2024-07-14T15:{:02}:{:02}+02:00\n",
            s / 60,
            s % 60
        ));
    }
    let rain = dir.path().join("tips.csv");
    std::fs::write(&rain, csv).unwrap();
    let out = dir.path().join("out");
    let o = run(&[
        "replay",
        p.to_str().unwrap(),
        "--rain",
        rain.to_str().unwrap(),
        "--kind",
        "tips",
        "--time-col",
        "tip_time",
        "--interval-s",
        "60",
        "--policy",
        "bound",
        "--out",
        out.to_str().unwrap(),
    ]);
    let err = text(&o.stderr);
    assert!(matches!(o.status.code(), Some(0 | 1)), "{err}");
    assert!(err.contains("300 rows read, 60.00 mm over 1.0 h"), "{err}");
    let s = summary(&out, "bound");
    assert!((s["rain_mm"].as_f64().unwrap() - 60.0).abs() < 1e-9, "{s}");
}

/// The plots carry their labels on any machine: with `HOLDBACK_FONT` naming a file that is
/// not a font, the built-in DejaVu Sans is used and the SVG has its captions (before, a
/// machine without the system's DejaVu font got plots with no text at all).
#[test]
fn plots_are_labelled_without_a_system_font() {
    let (dir, p) = demo_dir();
    let not_a_font = dir.path().join("not-a-font.ttf");
    std::fs::write(&not_a_font, b"not a font").unwrap();
    let out = dir.path().join("out");
    let o = bin()
        .args([
            "replay",
            p.to_str().unwrap(),
            "--design",
            "2:30:uniform",
            "--policy",
            "bound",
            "--out",
            out.to_str().unwrap(),
        ])
        .env("HOLDBACK_FONT", &not_a_font)
        .output()
        .unwrap();
    let err = text(&o.stderr);
    assert!(matches!(o.status.code(), Some(0 | 1)), "{err}");
    assert!(err.contains("using the built-in DejaVu Sans"), "{err}");
    assert!(!err.contains("no labels"), "{err}");
    let svg = std::fs::read_to_string(out.join("plots.svg")).unwrap();
    assert!(svg.contains("<text") && svg.contains("Rain (mm per record step)"));
}
