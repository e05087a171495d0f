//! The review reads the firmware's own telemetry: records and statuses encoded by the
//! firmware's code path (`holdback_firmware::telemetry::encode_event` / `encode_status`),
//! decoded by `holdback_review::telemetry`, equal the originals up to the quantisation of the
//! documented scaling; every example line of `firmware/TELEMETRY.md` decodes and encodes back
//! to the same text.
//!
//! **Tolerance, and why.** The schema (firmware/TELEMETRY.md, "Numbers are scaled integers")
//! sends `n = round_half_away(x · 1000)`, computed in `f32`, and the review reads `x̂ = n / 1000`
//! rounded to `f32`. With the binary32 unit roundoff u = 2⁻²⁴ (IEEE 754-2019, clause 4.3 and
//! 6.2: each of `x·1000`, `+0.5` and the final `f32` conversion rounds once), `|n − 1000x| ≤
//! 0.5 + 2u·|1000x|` and `|x̂ − n/1000| ≤ u·|n/1000|`, so `|x̂ − x| ≤ 0.0005 + 3u·|x|` (plus
//! terms of order u²). The tests allow `0.0005 + 2⁻²¹·|x|` (8u, margin for the u² terms):
//! half a unit of the last place sent (0.5 mm, 0.5 L, 0.5 mL/s, 0.5 ‰), not the original bits.
//! Values are drawn within ±2·10⁶ so that `x · 1000` stays inside the `i32` range (beyond it
//! the device saturates, documented and not round-trippable). A non-finite value is sent as
//! `null` and read back as NaN.

use holdback_core::event::{
    AlarmKind, CommandOutcome, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource,
    HealthFlags, ModeCode,
};
use holdback_firmware::telemetry::{self as fw, AlarmSet, MAX_EVENT_LEN, MAX_STATUS_LEN, Status};
use holdback_review::telemetry::{self, Message, decode_line};
use proptest::prelude::*;

/// Quantisation bound derived in the module doc.
fn within_quantisation(got: f32, want: f32) -> bool {
    if !want.is_finite() {
        return got.is_nan();
    }
    let (g, w) = (f64::from(got), f64::from(want));
    (g - w).abs() <= 0.0005 + w.abs() * 2f64.powi(-21)
}

fn fw_event(device_id: u32, r: &EventRecord) -> String {
    let mut buf = [0u8; MAX_EVENT_LEN];
    let n = fw::encode_event(device_id, r, &mut buf).unwrap();
    String::from_utf8(buf[..n].to_vec()).unwrap()
}

fn fw_status(device_id: u32, s: &Status) -> String {
    let mut buf = [0u8; MAX_STATUS_LEN];
    let n = fw::encode_status(device_id, s, &mut buf).unwrap();
    String::from_utf8(buf[..n].to_vec()).unwrap()
}

/// The floats of a body, and the body with them zeroed (everything that must be exact).
fn split(b: &EventBody) -> (EventBody, Vec<f32>) {
    let mut b = *b;
    let mut fl = Vec::new();
    let mut take = |x: &mut f32| {
        fl.push(*x);
        *x = 0.0;
    };
    match &mut b {
        EventBody::Decision {
            target_release_m3s,
            opening_cmd,
        } => {
            take(target_release_m3s);
            take(opening_cmd);
        }
        EventBody::PermitExceedance {
            release_m3s,
            permit_m3s,
            ..
        } => {
            take(release_m3s);
            take(permit_m3s);
        }
        EventBody::Alarm { value, .. } | EventBody::CommandRejected { value, .. } => take(value),
        EventBody::Sample {
            stage_m,
            storage_m3,
            release_m3s,
            opening,
            ..
        } => {
            take(stage_m);
            take(storage_m3);
            take(release_m3s);
            take(opening);
        }
        EventBody::RainTotal { depth_mm, .. } => take(depth_mm),
        EventBody::ModeChange { .. }
        | EventBody::FaultRaised { .. }
        | EventBody::FaultCleared { .. }
        | EventBody::RemoteCommand { .. } => {}
    }
    (b, fl)
}

fn assert_event_round_trip(device_id: u32, r: &EventRecord) -> Result<(), TestCaseError> {
    let line = fw_event(device_id, r);
    let got = decode_line(&line).map_err(|e| TestCaseError::fail(format!("{e}: {line}")))?;
    let Message::Event {
        device_id: d,
        record,
    } = got
    else {
        return Err(TestCaseError::fail(format!("not an event: {line}")));
    };
    prop_assert_eq!(d, device_id);
    prop_assert_eq!((record.seq, record.time_s), (r.seq, r.time_s));
    let (exact_got, fl_got) = split(&record.body);
    let (exact_want, fl_want) = split(&r.body);
    prop_assert_eq!(exact_got, exact_want, "{}", line);
    for (g, w) in fl_got.iter().zip(&fl_want) {
        prop_assert!(within_quantisation(*g, *w), "{} vs {}: {}", g, w, line);
    }
    Ok(())
}

fn quantity() -> impl Strategy<Value = f32> {
    prop_oneof![
        8 => -2.0e6f32..2.0e6,
        8 => -10.0f32..10.0,
        2 => -0.01f32..0.01,
        1 => Just(f32::NAN),
        1 => Just(f32::INFINITY),
        1 => Just(f32::NEG_INFINITY),
        1 => Just(0.0f32),
        1 => Just(0.0005f32),
    ]
}

fn pick<T: Copy>(all: &[T], i: u8) -> T {
    all[usize::from(i) % all.len()]
}

fn body(which: u8, [a, b, c, d]: [f32; 4], i: u8, j: u8, n: u32) -> EventBody {
    match which % 10 {
        0 => EventBody::ModeChange {
            from: pick(ModeCode::ALL, i),
            to: pick(ModeCode::ALL, j),
            reason: j,
        },
        1 => EventBody::Decision {
            target_release_m3s: a,
            opening_cmd: b,
        },
        2 => EventBody::FaultRaised {
            source: pick(FaultSource::ALL, i),
            kind: pick(FaultKind::ALL, j),
        },
        3 => EventBody::FaultCleared {
            source: pick(FaultSource::ALL, j),
            kind: pick(FaultKind::ALL, i),
        },
        4 => EventBody::PermitExceedance {
            release_m3s: a,
            permit_m3s: b,
            reason: pick(ExceedReason::ALL, i),
        },
        5 => EventBody::Alarm {
            kind: pick(AlarmKind::ALL, i),
            value: a,
        },
        6 => EventBody::Sample {
            stage_m: a,
            storage_m3: b,
            release_m3s: c,
            opening: d,
            mode: pick(ModeCode::ALL, i),
            health: HealthFlags(j),
        },
        7 => EventBody::CommandRejected {
            command: i,
            value: a,
        },
        8 => EventBody::RemoteCommand {
            counter: n,
            kind: i,
            outcome: pick(CommandOutcome::ALL, j),
        },
        _ => EventBody::RainTotal {
            window_s: n,
            depth_mm: a,
        },
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Any record of any kind, through the firmware's encoder and the review's decoder:
    /// header, words and integers exact, quantities within the quantisation bound.
    #[test]
    fn event_messages_round_trip_within_quantisation(
        device_id: u32, seq: u32, time_s: u32, which in 0u8..10,
        a in quantity(), b in quantity(), c in quantity(), d in quantity(),
        i: u8, j: u8, n: u32,
    ) {
        let r = EventRecord { seq, time_s, body: body(which, [a, b, c, d], i, j, n) };
        assert_event_round_trip(device_id, &r)?;
    }

    /// Any status through the firmware's encoder and the review's decoder: header, mode,
    /// alarms, health exact, quantities within the quantisation bound.
    #[test]
    fn status_messages_round_trip_within_quantisation(
        device_id: u32, seq: u32, time_s: u32,
        a in quantity(), b in quantity(), c in quantity(), d in quantity(), e in quantity(),
        i: u8, alarm_bits in 0u32..64, health: u8,
    ) {
        let alarms = AlarmKind::ALL
            .iter()
            .filter(|k| alarm_bits & (1 << k.code()) != 0)
            .fold(AlarmSet::EMPTY, |s, k| s.with(*k));
        let s = Status { seq, time_s, stage_m: a, storage_m3: b, release_m3s: c,
            permit_m3s: d, mode: pick(ModeCode::ALL, i), alarms, opening_m: e,
            health: HealthFlags(health) };
        let line = fw_status(device_id, &s);
        let Ok(Message::Status { device_id: got_id, status: g }) = decode_line(&line) else {
            return Err(TestCaseError::fail(line));
        };
        prop_assert_eq!(got_id, device_id);
        prop_assert_eq!((g.seq, g.time_s, g.mode, g.alarms, g.health),
            (s.seq, s.time_s, s.mode, s.alarms, s.health));
        for (x, y) in [(g.stage_m, a), (g.storage_m3, b), (g.release_m3s, c), (g.permit_m3s, d),
            (g.opening_m, e)] {
            prop_assert!(within_quantisation(x, y), "{} vs {}: {}", x, y, line);
        }
    }

    /// Whatever the bytes, reading never panics and every line is a record, a status, a
    /// problem naming its line, or blank.
    #[test]
    fn any_text_is_read_without_panic(text in "[ -~\n]{0,300}") {
        let got = telemetry::read(text.as_bytes());
        for p in got.logs.iter().flat_map(|l| &l.problems) {
            prop_assert!(p.why.starts_with("line ") || p.why.starts_with("seq "), "{}", p.why);
        }
    }
}

/// Every example line of firmware/TELEMETRY.md decodes, and the firmware's encoder writes the
/// decoded message back as exactly the same line (the examples' values are exact in the
/// scaling, so nothing is lost).
#[test]
fn documented_examples_decode_and_encode_back_to_the_same_line() {
    let doc = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../firmware/TELEMETRY.md"),
    )
    .unwrap();
    let lines: Vec<&str> = doc.lines().filter(|l| l.starts_with("{\"v\":1,")).collect();
    assert!(lines.len() >= 9, "{} example lines", lines.len());
    for line in lines {
        let again = match decode_line(line).unwrap_or_else(|e| panic!("{e}: {line}")) {
            Message::Status { device_id, status } => fw_status(device_id, &status),
            Message::Event { device_id, record } => fw_event(device_id, &record),
        };
        assert_eq!(again, line);
    }
}

/// The documented sample example in the core's units: `null` stage (sensor in fault) is
/// NaN, 1 000 000 L is 1000 m³, 125 mL/s is 0.125 m³/s, 750 ‰ is 0.75 (TELEMETRY.md units).
#[test]
fn documented_sample_reads_in_core_units() {
    let line = r#"{"v":1,"type":"event","device_id":17,"seq":306,"time_s":65,"kind":"sample","stage_mm":null,"storage_l":1000000,"release_ml_s":125,"opening_permille":750,"mode":"drawdown","health":2}"#;
    let Ok(Message::Event { device_id, record }) = decode_line(line) else {
        panic!("{line}");
    };
    assert_eq!((device_id, record.seq, record.time_s), (17, 306, 65));
    let EventBody::Sample {
        stage_m,
        storage_m3,
        release_m3s,
        opening,
        mode,
        health,
    } = record.body
    else {
        panic!("{:?}", record.body);
    };
    assert!(stage_m.is_nan());
    assert_eq!(
        (storage_m3, release_m3s, opening, mode, health),
        (1000.0, 0.125, 0.75, ModeCode::Drawdown, HealthFlags(2))
    );
}

/// The firmware's `"unknown"` word (a code it was built without) and a number that is not an
/// integer are refused with the field named: such a line cannot rebuild a record.
#[test]
fn unknown_words_and_float_text_are_refused() {
    for (line, field) in [
        (
            r#"{"v":1,"type":"event","device_id":1,"seq":1,"time_s":1,"kind":"fault_raised","source":"unknown","fault":"bus"}"#,
            "field source",
        ),
        (
            r#"{"v":1,"type":"event","device_id":1,"seq":1,"time_s":1,"kind":"alarm","alarm":"high_stage","value_milli":12.5}"#,
            "field value_milli",
        ),
        (
            r#"{"v":1,"type":"event","device_id":1,"seq":1,"time_s":1,"kind":"alarm","alarm":"high_stage","value_milli":2147483648}"#,
            "field value_milli",
        ),
        (
            r#"{"v":1,"type":"heartbeat","device_id":1,"seq":1,"time_s":1}"#,
            "field type",
        ),
    ] {
        let e = decode_line(line).unwrap_err();
        assert!(e.starts_with(field), "{e}: {line}");
    }
}
