//! The closed loop, on the emulated board and on the host: the firmware's main loop
//! (`holdback_firmware::App`) over the plant-backed `VirtualBoard`, configured by the packed
//! demo pond and driven by a design storm.
//!
//! - `device_trace_equals_host_trace` (QEMU; `#[ignore]`d unless run by `scripts/verify.sh`
//!   with `HOLDBACK_BOARD_ELF` set): the board image's `closed-loop` command and the same
//!   code on x86-64 write the same decision trace, bit for bit. Source of the expectation:
//!   IEEE 754 (2019, clauses 5.4.1 and 6.2) gives correctly rounded +, −, ×, ÷ and square root
//!   on both machines, and the control step is specified as a pure function of its inputs
//!   (docs/DESIGN.md), so equal inputs must give equal bits. The first differing step is
//!   printed.
//! - `device_log_decodes_to_the_host_log` (QEMU, likewise): the event-log flash the board
//!   exports at the end of the same run, decoded by the desktop review, is the host's log
//!   record for record.
//! - host-only checks of the loop against the pond file's own permit and crest, and of the
//!   unreadable-config path (the documented fallback opening and the config alarm).
//!
//! The demo pond is invented (host-sim/examples/demo-pond.toml); the checks below are against
//! its stated permit and crest, not against invented expected values.

use std::path::{Path, PathBuf};
use std::process::Command;

use holdback_core::config::PondConfig;
use holdback_core::event::{
    EventBody, EventRecord, FaultKind, FaultSource, MAX_FRAME_LEN, ModeCode,
};
use holdback_core::packed::{self, MAX_PACKED_LEN};
use holdback_core::rain::design::{DesignStorm, MAX_STORM_STEPS, Pattern};
use holdback_firmware::app::{CONFIG_INVALID, load_config};
use holdback_firmware::eventlog::ram_flash::RamFlash;
use holdback_firmware::virtual_board::{
    SliceRain, TraceRecord, VIRTUAL_FALLBACK_SAFE_OPENING_M, VirtualBoard, run_closed_loop,
};
use holdback_firmware::{App, AppOptions};

/// The same in-RAM log flash as the board image (firmware/src/bin/qemu_board/closed_loop.rs).
type LogFlash = RamFlash<2048, 4, 4, 512>;

/// Storm: 5-year alternating block over 1 h; run: 12 h in all (drawdown included).
const RETURN_PERIOD_YR: f32 = 5.0;
const STORM_S: u32 = 3600;
const RUN_S: u32 = 12 * 3600;

fn demo_pond() -> (PondConfig, Vec<u8>) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../host-sim/examples/demo-pond.toml");
    let pond = holdback_sim::pondfile::load_path(&path).unwrap();
    let mut buf = vec![0u8; MAX_PACKED_LEN];
    let n = packed::pack(&pond.spec, &mut buf).unwrap();
    buf.truncate(n);
    (pond.config, buf)
}

/// Rain per control step: the design storm, then dry steps to the end of the run.
fn storm(cfg: &PondConfig) -> Vec<f32> {
    storm_of(cfg, RETURN_PERIOD_YR)
}

fn storm_of(cfg: &PondConfig, return_period_yr: f32) -> Vec<f32> {
    let step_s = cfg.control().step_s;
    let s = DesignStorm::new(return_period_yr, STORM_S, step_s).unwrap();
    let mut rain = vec![0.0f32; MAX_STORM_STEPS];
    let n = s
        .fill(cfg.idf(), Pattern::AlternatingBlock, &mut rain)
        .unwrap();
    rain.truncate(n);
    rain.resize((RUN_S / step_s) as usize, 0.0);
    rain
}

struct HostRun {
    trace: Vec<TraceRecord>,
    peak_stage_m: f32,
    peak_release_m3s: f32,
    events: Vec<EventBody>,
    /// Every record the firmware's log reads back at the end of the run.
    records: Vec<EventRecord>,
    /// The log flash at the end of the run.
    image: Vec<u8>,
}

/// The host replay: the same `App` + `VirtualBoard` + `run_closed_loop` as the board image.
fn host_run(pond: &PondConfig, blob: &[u8], rain: &[f32], steps: u32) -> HostRun {
    let mut flash = LogFlash::new(false);
    let board = VirtualBoard::new(pond, SliceRain(rain.iter()), &mut flash, 0..2048).unwrap();
    // The controller's config is the device's own, unpacked from the blob.
    let config = load_config(blob);
    let mut app = App::boot(
        board,
        config.as_ref().map_err(|e| *e),
        AppOptions::default(),
    );
    let mut trace = Vec::new();
    run_closed_loop(&mut app, steps, |r| {
        trace.push(TraceRecord::of(r));
        Ok::<(), ()>(())
    })
    .unwrap();
    let mut records = Vec::new();
    if let Some(log) = app.log_mut() {
        log.for_each(|r| records.push(r.unwrap())).unwrap();
    }
    let (peak_stage_m, peak_release_m3s) =
        (app.board().peak_stage_m(), app.board().peak_release_m3s());
    drop(app);
    HostRun {
        trace,
        peak_stage_m,
        peak_release_m3s,
        events: records.iter().map(|r| r.body).collect(),
        records,
        image: flash.image().to_vec(),
    }
}

fn storm_file(rain: &[f32]) -> Vec<u8> {
    let mut b = (rain.len() as u32).to_le_bytes().to_vec();
    for r in rain {
        b.extend(r.to_bits().to_le_bytes());
    }
    b
}

/// Over the demo storm the loop keeps the release at or under the pond's permit and the stage
/// under its crest − freeboard (the pond file's own limits), and feeds the watchdog every step.
#[test]
fn main_loop_keeps_the_permit_and_the_freeboard_on_the_demo_storm() {
    let (pond, blob) = demo_pond();
    let rain = storm(&pond);
    let steps = rain.len() as u32;
    let run = host_run(&pond, &blob, &rain, steps);
    assert_eq!(run.trace.len(), rain.len());
    let permit = pond.permit().release_m3s;
    let limit = pond.stage_limit_m();
    let normal = pond.levels().normal_m;
    eprintln!(
        "peak stage {} m (limit {limit}), peak release {} m3/s (permit {permit})",
        run.peak_stage_m, run.peak_release_m3s
    );
    assert!(
        run.peak_stage_m > normal + 0.5,
        "the storm must fill the pond"
    );
    assert!(run.peak_stage_m < limit, "{} >= {limit}", run.peak_stage_m);
    assert!(
        run.peak_release_m3s <= permit,
        "{} > {permit}",
        run.peak_release_m3s
    );
    let modes: Vec<ModeCode> = run.trace.iter().filter_map(|t| t.mode()).collect();
    assert!(modes.contains(&ModeCode::Capture));
    assert!(
        run.events
            .iter()
            .any(|e| matches!(e, EventBody::ModeChange { .. }))
    );
    assert!(
        run.events
            .iter()
            .any(|e| matches!(e, EventBody::Sample { .. }))
    );
    assert_eq!(
        modes.last(),
        Some(&ModeCode::Standby),
        "drained within the run"
    );
}

/// A rarer (10-year) storm: the controller may go over the permit in Surcharge (its priority
/// 1), but the stage stays under crest − freeboard, so the pond never overtops.
#[test]
fn main_loop_does_not_overtop_on_a_rarer_storm() {
    let (pond, blob) = demo_pond();
    let rain = storm_of(&pond, 10.0);
    let run = host_run(&pond, &blob, &rain, rain.len() as u32);
    let limit = pond.stage_limit_m();
    assert!(run.peak_stage_m < limit, "{} >= {limit}", run.peak_stage_m);
    if run.peak_release_m3s > pond.permit().release_m3s {
        assert!(
            run.trace
                .iter()
                .any(|t| t.mode() == Some(ModeCode::Surcharge))
        );
    }
}

/// A blob with one flipped payload bit fails its CRC: the gate goes to the board's fallback
/// opening at every step, the mode is Failsafe, the config alarm is raised and a
/// `FaultRaised { Config, Corrupt }` is in the log.
#[test]
fn corrupted_blob_holds_the_fallback_opening_with_an_alarm() {
    let (pond, mut blob) = demo_pond();
    blob[9] ^= 0x04;
    assert!(matches!(
        packed::unpack(&blob),
        Err(packed::PackError::BadCrc { .. })
    ));
    let rain = storm(&pond);
    let mut flash = LogFlash::new(false);
    let board = VirtualBoard::new(&pond, SliceRain(rain.iter()), &mut flash, 0..2048).unwrap();
    // The controller's config is the device's own, unpacked from the blob.
    let config = load_config(&blob);
    let mut app = App::boot(
        board,
        config.as_ref().map_err(|e| *e),
        AppOptions::default(),
    );
    assert!(app.config_error().is_some());
    let mut reports = Vec::new();
    run_closed_loop(&mut app, 60, |r| {
        reports.push(r.clone());
        Ok::<(), ()>(())
    })
    .unwrap();
    for r in &reports {
        assert_eq!(r.opening_cmd_m, VIRTUAL_FALLBACK_SAFE_OPENING_M);
        assert_eq!(r.mode, ModeCode::Failsafe);
        assert!(r.alarms.has(CONFIG_INVALID));
    }
    assert_eq!(
        app.board().plant().command_m(),
        VIRTUAL_FALLBACK_SAFE_OPENING_M
    );
    assert_eq!(app.board().feeds(), 60);
    let mut events = Vec::new();
    app.log_mut()
        .unwrap()
        .for_each(|r| events.extend(r.ok().map(|r| r.body)))
        .unwrap();
    assert!(events.contains(&EventBody::FaultRaised {
        source: FaultSource::Config,
        kind: FaultKind::Corrupt,
    }));
}

fn elf() -> PathBuf {
    PathBuf::from(std::env::var_os("HOLDBACK_BOARD_ELF").expect(
        "HOLDBACK_BOARD_ELF must name the qemu_board device-profile ELF (scripts/verify.sh sets it)",
    ))
}

/// Runs the board image's `closed-loop` command on the demo pond and storm in the folder
/// `name` under the test's tmp dir; returns the trace file's bytes and the event-log flash
/// image the board wrote at the end of the run.
fn board_run(name: &str, blob: &[u8], rain: &[f32]) -> (Vec<u8>, Vec<u8>) {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(name);
    std::fs::create_dir_all(&dir).unwrap();
    assert!(
        !dir.to_string_lossy().contains([' ', ',']),
        "{}",
        dir.display()
    );
    let (blob_p, storm_p, trace_p, log_p) = (
        dir.join("pond.bin"),
        dir.join("storm.bin"),
        dir.join("trace.bin"),
        dir.join("log.bin"),
    );
    std::fs::write(&blob_p, blob).unwrap();
    std::fs::write(&storm_p, storm_file(rain)).unwrap();
    let _ = std::fs::remove_file(&trace_p);
    let _ = std::fs::remove_file(&log_p);

    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("../scripts/qemu-run.sh");
    let out = Command::new("bash")
        .arg(script)
        .arg(elf())
        .arg("closed-loop")
        .args([&blob_p, &storm_p, &trace_p, &log_p])
        .env("QEMU_TIMEOUT", "600")
        .output()
        .unwrap();
    let console =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "board failed:\n{console}");
    eprintln!("{console}");
    (
        std::fs::read(&trace_p).unwrap(),
        std::fs::read(&log_p).unwrap(),
    )
}

/// The board image's closed-loop trace equals the host's, bit for bit (see the module doc).
#[test]
#[ignore = "boots the board under QEMU; scripts/verify.sh runs it with HOLDBACK_BOARD_ELF set"]
fn device_trace_equals_host_trace() {
    let (pond, blob) = demo_pond();
    let rain = storm(&pond);
    // scripts/verify.sh reuses pond.bin and storm.bin of this folder for its stack probe.
    let (bytes, _) = board_run("qemu_closed_loop", &blob, &rain);
    assert_eq!(bytes.len() % TraceRecord::BYTES, 0, "whole records");
    let device: Vec<TraceRecord> = bytes
        .chunks_exact(TraceRecord::BYTES)
        .map(|c| TraceRecord::from_bytes(c).unwrap())
        .collect();
    let host = host_run(&pond, &blob, &rain, rain.len() as u32).trace;
    if let Some(k) = (0..host.len().min(device.len())).find(|&k| host[k] != device[k]) {
        let show = |t: &TraceRecord| {
            format!(
                "t = {} s, stage {:e} ({:#010x}), opening {:e} ({:#010x}), mode {}",
                t.time_s,
                f32::from_bits(t.stage_bits),
                t.stage_bits,
                f32::from_bits(t.opening_cmd_bits),
                t.opening_cmd_bits,
                t.mode
            )
        };
        panic!(
            "traces differ first at step {k}:\n  device: {}\n  host:   {}",
            show(&device[k]),
            show(&host[k])
        );
    }
    assert_eq!(device.len(), host.len(), "trace lengths");
    assert_eq!(device.len(), rain.len());
}

/// The event log the board image wrote (its flash exported at the end of the run), decoded
/// by the desktop review (`holdback_review::read::read_dump`, the firmware's own
/// `DumpReader` under it), equals record for record — sequence number, time and body, bit
/// for bit — what the host's device model (the same `App` on the `VirtualBoard`, same pond
/// and storm) logged, as the firmware's log itself reads it back. Source of the expectation:
/// the same one as for the trace (bit-identical control steps on both machines, see the
/// module doc) and a deterministic log writer, so the two flash images must be the same
/// bytes too; the review must find every record and no damage in either.
#[test]
#[ignore = "boots the board under QEMU; scripts/verify.sh runs it with HOLDBACK_BOARD_ELF set"]
fn device_log_decodes_to_the_host_log() {
    use holdback_firmware::eventlog::dump::Geometry;
    use holdback_review::read::read_dump;

    let (pond, blob) = demo_pond();
    let rain = storm(&pond);
    let (_, image) = board_run("qemu_closed_loop_log", &blob, &rain);
    let host = host_run(&pond, &blob, &rain, rain.len() as u32);
    assert_eq!(image.len(), 2048, "the whole log range");
    // The in-RAM log flash: reads and writes of 4 bytes, 512-byte erase pages.
    let g = Geometry::new(4, 4, 512).unwrap();
    let device = read_dump(&image, g, 512);
    assert!(device.problems.is_empty(), "{:?}", device.problems);
    let from_host_image = read_dump(&host.image, g, 512);
    assert!(from_host_image.problems.is_empty());
    assert_eq!(from_host_image.records(), host.records);
    assert!(
        host.records.len() > 10,
        "{} records: the run must log something",
        host.records.len()
    );
    let same_bits = |a: &EventRecord, b: &EventRecord| {
        let (mut x, mut y) = ([0u8; MAX_FRAME_LEN], [0u8; MAX_FRAME_LEN]);
        let n = holdback_core::event::encode(a, &mut x).unwrap();
        let m = holdback_core::event::encode(b, &mut y).unwrap();
        x[..n] == y[..m]
    };
    let got = device.records();
    if let Some(k) =
        (0..got.len().min(host.records.len())).find(|&k| !same_bits(&got[k], &host.records[k]))
    {
        panic!(
            "logs differ first at record {k}:\n  device: {:?}\n  host:   {:?}",
            got[k], host.records[k]
        );
    }
    assert_eq!(got.len(), host.records.len(), "record counts");
    assert_eq!(image, host.image, "flash images");
}

/// A remote manual command signed with the device key drives the gate through the real main
/// loop and is logged as accepted; the same frame again (a replay), a frame with one flipped
/// tag bit (a forgery) and a frame for another device are refused, logged with their reasons,
/// and change nothing. Source of the rule: the HMAC-SHA256 construction (RFC 2104, test
/// vectors RFC 4231, checked in firmware/tests/command.rs) with a monotonic counter.
#[test]
fn remote_commands_through_the_main_loop_are_authenticated_logged_and_replay_proof() {
    use holdback_core::control::Command as ControlCommand;
    use holdback_core::event::CommandOutcome;
    use holdback_firmware::command::{RemoteCommand, Verifier, sign};

    let key = [0x5au8; 32];
    let device = 0x00c0_ffee;
    let (pond, blob) = demo_pond();
    let rain = vec![0.0_f32; 64];
    let mut flash = LogFlash::new(false);
    let board = VirtualBoard::new(&pond, SliceRain(rain.iter()), &mut flash, 0..2048).unwrap();
    let config = load_config(&blob).unwrap();
    let mut app = App::boot(board, Ok(&config), AppOptions::default());
    let mut verifier = Verifier::new(device, &key).unwrap();

    let manual = RemoteCommand::Manual {
        opening_m: 0.2,
        for_s: 600,
    };
    let mut frame = [0u8; 128];
    let n = sign(&key, device, 7, &manual, &mut frame).unwrap();
    let frame = &frame[..n];

    let accepted = app.remote_frame(&mut verifier, frame, 4096);
    assert_eq!(
        accepted,
        Some(ControlCommand::Manual {
            opening_m: 0.2,
            for_s: 600
        })
    );
    let report = app.step(accepted);
    assert_eq!(report.opening_cmd_m, 0.2, "manual opening commanded");

    // Replay of the accepted frame.
    assert_eq!(app.remote_frame(&mut verifier, frame, 4096), None);
    // Forgery: one bit of the tag flipped.
    let mut forged = frame.to_vec();
    *forged.last_mut().unwrap() ^= 0x01;
    assert_eq!(app.remote_frame(&mut verifier, &forged, 4096), None);
    // Another device's frame, correctly signed with this key.
    let mut other = [0u8; 128];
    let m = sign(&key, device + 1, 8, &manual, &mut other).unwrap();
    assert_eq!(app.remote_frame(&mut verifier, &other[..m], 4096), None);
    assert_eq!(verifier.last_counter(), 7);

    let mut outcomes = Vec::new();
    app.log_mut()
        .unwrap()
        .for_each(|r| {
            if let Ok(r) = r
                && let EventBody::RemoteCommand { outcome, .. } = r.body
            {
                outcomes.push(outcome);
            }
        })
        .unwrap();
    assert_eq!(
        outcomes,
        vec![
            CommandOutcome::Accepted,
            CommandOutcome::Replay,
            CommandOutcome::BadTag,
            CommandOutcome::WrongDevice
        ]
    );
}
