//! Telemetry JSON: golden strings for every message type, an independent parse with
//! `serde_json` (a general-purpose JSON library the project did not write), buffer limits and
//! totality on arbitrary values.

use holdback_core::event::{
    AlarmKind, CommandOutcome, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource,
    HealthFlags, ModeCode,
};
use holdback_firmware::telemetry::{
    self, AlarmSet, MAX_EVENT_LEN, MAX_STATUS_LEN, SCHEMA_VERSION, Status, TelemetryError,
};
use proptest::prelude::*;
use serde_json::Value;

const DEVICE: u32 = 17;

fn status_json(s: &Status) -> String {
    let mut buf = [0u8; MAX_STATUS_LEN];
    let n = telemetry::encode_status(DEVICE, s, &mut buf).unwrap();
    String::from_utf8(buf[..n].to_vec()).unwrap()
}

fn event_json(r: &EventRecord) -> String {
    let mut buf = [0u8; MAX_EVENT_LEN];
    let n = telemetry::encode_event(DEVICE, r, &mut buf).unwrap();
    String::from_utf8(buf[..n].to_vec()).unwrap()
}

fn example_status() -> Status {
    Status {
        seq: 42,
        time_s: 3600,
        stage_m: 1.25,
        storage_m3: 512.5,
        release_m3s: 0.125,
        permit_m3s: 0.25,
        mode: ModeCode::Capture,
        alarms: AlarmSet::EMPTY
            .with(AlarmKind::LowSupply)
            .with(AlarmKind::HighStage),
        opening_m: 0.0625,
        health: HealthFlags(HealthFlags::STAGE | HealthFlags::GATE),
    }
}

/// The status example of TELEMETRY.md, byte for byte. All inputs are exact binary fractions,
/// so the scaled values are exact: 1.25 m = 1250 mm, 512.5 m³ = 512 500 L,
/// 0.125 m³/s = 125 mL/s… and 0.0625 m = 62.5 mm rounds half away from zero to 63.
#[test]
fn status_golden_string() {
    assert_eq!(
        status_json(&example_status()),
        r#"{"v":1,"type":"status","device_id":17,"seq":42,"time_s":3600,"stage_mm":1250,"storage_l":512500,"release_ml_s":125,"permit_ml_s":250,"mode":"capture","alarms":["high_stage","low_supply"],"opening_mm":63,"health":5}"#
    );
}

/// A sensor in fault (NaN) goes out as `null`; no alarms as `[]`.
#[test]
fn status_with_faulted_inputs_sends_null() {
    let s = Status {
        stage_m: f32::NAN,
        opening_m: f32::NEG_INFINITY,
        alarms: AlarmSet::EMPTY,
        mode: ModeCode::Failsafe,
        ..example_status()
    };
    let v: Value = serde_json::from_str(&status_json(&s)).unwrap();
    assert_eq!(v["stage_mm"], Value::Null);
    assert_eq!(v["opening_mm"], Value::Null);
    assert_eq!(v["alarms"], serde_json::json!([]));
    assert_eq!(v["mode"], "failsafe");
}

fn rec(seq: u32, time_s: u32, body: EventBody) -> EventRecord {
    EventRecord { seq, time_s, body }
}

/// One golden string per event kind (the TELEMETRY.md examples).
#[test]
fn event_golden_strings() {
    let head = |seq: u32, t: u32, kind: &str| {
        format!(r#"{{"v":1,"type":"event","device_id":17,"seq":{seq},"time_s":{t},"kind":"{kind}""#)
    };
    let cases = [
        (
            rec(
                300,
                5,
                EventBody::ModeChange {
                    from: ModeCode::Standby,
                    to: ModeCode::Surcharge,
                    reason: 7,
                },
            ),
            head(300, 5, "mode_change") + r#","from":"standby","to":"surcharge","reason":7}"#,
        ),
        (
            rec(
                301,
                15,
                EventBody::Decision {
                    target_release_m3s: 0.25,
                    opening_cmd: 0.5,
                },
            ),
            head(301, 15, "decision") + r#","target_release_ml_s":250,"opening_cmd_permille":500}"#,
        ),
        (
            rec(
                302,
                25,
                EventBody::FaultRaised {
                    source: FaultSource::StageSensor,
                    kind: FaultKind::UnderRange,
                },
            ),
            head(302, 25, "fault_raised") + r#","source":"stage_sensor","fault":"under_range"}"#,
        ),
        (
            rec(
                303,
                35,
                EventBody::FaultCleared {
                    source: FaultSource::GateActuator,
                    kind: FaultKind::Stall,
                },
            ),
            head(303, 35, "fault_cleared") + r#","source":"gate_actuator","fault":"stall"}"#,
        ),
        (
            rec(
                304,
                45,
                EventBody::PermitExceedance {
                    release_m3s: 1.5,
                    permit_m3s: 1.0,
                    reason: ExceedReason::Surcharge,
                },
            ),
            head(304, 45, "permit_exceedance")
                + r#","release_ml_s":1500,"permit_ml_s":1000,"reason":"surcharge"}"#,
        ),
        (
            rec(
                305,
                55,
                EventBody::Alarm {
                    kind: AlarmKind::HighStage,
                    value: 2.0,
                },
            ),
            head(305, 55, "alarm") + r#","alarm":"high_stage","value_milli":2000}"#,
        ),
        (
            rec(
                306,
                65,
                EventBody::Sample {
                    stage_m: f32::NAN,
                    storage_m3: 1000.0,
                    release_m3s: 0.125,
                    opening: 0.75,
                    mode: ModeCode::Drawdown,
                    health: HealthFlags(HealthFlags::RAIN),
                },
            ),
            head(306, 65, "sample")
                + r#","stage_mm":null,"storage_l":1000000,"release_ml_s":125,"opening_permille":750,"mode":"drawdown","health":2}"#,
        ),
        (
            rec(
                307,
                75,
                EventBody::RemoteCommand {
                    counter: 70_000,
                    kind: 1,
                    outcome: CommandOutcome::Replay,
                },
            ),
            head(307, 75, "remote_command") + r#","counter":70000,"command":1,"outcome":"replay"}"#,
        ),
    ];
    for (r, expected) in &cases {
        assert_eq!(&event_json(r), expected);
    }
}

/// Every code of every enum has its own word: a code appended in the core without a word
/// here would go out as "unknown" and fails this test.
#[test]
fn every_code_has_its_own_word() {
    fn distinct(words: Vec<&'static str>) {
        let mut sorted = words.clone();
        sorted.sort_unstable();
        sorted.dedup();
        assert_eq!(sorted.len(), words.len(), "{words:?}");
        assert!(!words.contains(&"unknown"), "{words:?}");
        for w in words {
            assert!(
                w.bytes().all(|b| b.is_ascii_lowercase() || b == b'_'),
                "{w}"
            );
        }
    }
    distinct(
        ModeCode::ALL
            .iter()
            .map(|m| telemetry::mode_word(*m))
            .collect(),
    );
    distinct(
        AlarmKind::ALL
            .iter()
            .map(|m| telemetry::alarm_word(*m))
            .collect(),
    );
    distinct(
        FaultSource::ALL
            .iter()
            .map(|m| telemetry::source_word(*m))
            .collect(),
    );
    distinct(
        FaultKind::ALL
            .iter()
            .map(|m| telemetry::fault_word(*m))
            .collect(),
    );
    distinct(
        ExceedReason::ALL
            .iter()
            .map(|m| telemetry::exceed_word(*m))
            .collect(),
    );
    distinct(
        CommandOutcome::ALL
            .iter()
            .map(|m| telemetry::outcome_word(*m))
            .collect(),
    );
}

/// The longest message each type can be fits the published buffer sizes.
#[test]
fn worst_case_lengths_fit_the_published_maxima() {
    let all = AlarmKind::ALL
        .iter()
        .fold(AlarmSet::EMPTY, |set, k| set.with(*k));
    let mut longest_status = 0;
    for mode in ModeCode::ALL {
        let s = Status {
            seq: u32::MAX,
            time_s: u32::MAX,
            stage_m: -1.0e30,
            storage_m3: -1.0e30,
            release_m3s: -1.0e30,
            permit_m3s: -1.0e30,
            mode: *mode,
            alarms: all,
            opening_m: -1.0e30,
            health: HealthFlags(u8::MAX),
        };
        longest_status = longest_status.max(status_json(&s).len());
    }
    println!("longest status message: {longest_status} bytes");
    assert!(longest_status <= MAX_STATUS_LEN, "{longest_status}");

    let big = -1.0e30;
    let mut bodies = vec![
        EventBody::Decision {
            target_release_m3s: big,
            opening_cmd: big,
        },
        EventBody::Alarm {
            kind: AlarmKind::LowFreeboard,
            value: big,
        },
    ];
    for m in ModeCode::ALL {
        bodies.push(EventBody::Sample {
            stage_m: big,
            storage_m3: big,
            release_m3s: big,
            opening: big,
            mode: *m,
            health: HealthFlags(u8::MAX),
        });
        bodies.push(EventBody::ModeChange {
            from: *m,
            to: *m,
            reason: u8::MAX,
        });
    }
    for r in ExceedReason::ALL {
        bodies.push(EventBody::PermitExceedance {
            release_m3s: big,
            permit_m3s: big,
            reason: *r,
        });
    }
    for s in FaultSource::ALL {
        for k in FaultKind::ALL {
            bodies.push(EventBody::FaultCleared {
                source: *s,
                kind: *k,
            });
        }
    }
    bodies.push(EventBody::CommandRejected {
        command: u8::MAX,
        value: big,
    });
    for o in CommandOutcome::ALL {
        bodies.push(EventBody::RemoteCommand {
            counter: u32::MAX,
            kind: u8::MAX,
            outcome: *o,
        });
    }
    let longest_event = bodies
        .into_iter()
        .map(|b| event_json(&rec(u32::MAX, u32::MAX, b)).len())
        .max()
        .unwrap();
    println!("longest event message: {longest_event} bytes");
    assert!(longest_event <= MAX_EVENT_LEN, "{longest_event}");
}

/// A buffer one byte short (or any shorter) is an error naming its length, never a panic or
/// a cut-off message; the exact length succeeds.
#[test]
fn buffer_too_small_is_an_error() {
    let mut full = [0u8; MAX_STATUS_LEN];
    let n = telemetry::encode_status(DEVICE, &example_status(), &mut full).unwrap();
    for len in 0..n {
        let mut buf = vec![0u8; len];
        assert_eq!(
            telemetry::encode_status(DEVICE, &example_status(), &mut buf),
            Err(TelemetryError::BufferTooSmall { len })
        );
    }
    let mut exact = vec![0u8; n];
    assert_eq!(
        telemetry::encode_status(DEVICE, &example_status(), &mut exact),
        Ok(n)
    );
    assert_eq!(exact, full[..n]);

    let r = rec(
        1,
        2,
        EventBody::Alarm {
            kind: AlarmKind::Overtopping,
            value: 3.0,
        },
    );
    let m = event_json(&r).len();
    for len in 0..m {
        let mut buf = vec![0u8; len];
        assert_eq!(
            telemetry::encode_event(DEVICE, &r, &mut buf),
            Err(TelemetryError::BufferTooSmall { len })
        );
    }
    assert!(
        !TelemetryError::BufferTooSmall { len: 3 }
            .to_string()
            .is_empty()
    );
}

/// `x` m (or m³, m³/s, fraction) scaled by 1000 as an f64 reference: round half away from
/// zero, saturate at the i32 range, `null` when not finite.
fn reference_milli(x: f32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let r = (f64::from(x) * 1000.0).round();
    Value::from(r.clamp(f64::from(i32::MIN), f64::from(i32::MAX)) as i64)
}

/// Equal to the f64 reference within one unit plus two f32 rounding steps: the device
/// scales in f32 (`x·1000` and `+0.5` each round to nearest, within half an ulp, 2^-24
/// relative), so near a half-unit boundary or for large values it may differ slightly.
fn close(got: &Value, want: &Value) -> bool {
    match (got.as_i64(), want.as_i64()) {
        (Some(g), Some(w)) => ((g - w).abs() as f64) <= 1.0 + (w.abs() as f64) * 2.0f64.powi(-23),
        _ => got == want,
    }
}

fn any_f32_or_special() -> impl Strategy<Value = f32> {
    prop_oneof![
        4 => -10_000.0f32..10_000.0,
        1 => any::<f32>(),
        1 => Just(f32::NAN),
    ]
}

fn mode() -> impl Strategy<Value = ModeCode> {
    proptest::sample::select(ModeCode::ALL)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Any status encodes within MAX_STATUS_LEN, parses as JSON with serde_json, and every
    /// field is what the schema says, against an f64 reference for the scaled values.
    #[test]
    fn status_parses_and_matches_reference(
        seq: u32, time_s: u32,
        stage_m in any_f32_or_special(),
        storage_m3 in any_f32_or_special(),
        release_m3s in any_f32_or_special(),
        permit_m3s in any_f32_or_special(),
        opening_m in any_f32_or_special(),
        mode in mode(),
        alarm_bits in 0u32..64,
        health: u8,
    ) {
        let alarms = AlarmKind::ALL
            .iter()
            .filter(|k| alarm_bits & (1 << k.code()) != 0)
            .fold(AlarmSet::EMPTY, |s, k| s.with(*k));
        let s = Status { seq, time_s, stage_m, storage_m3, release_m3s, permit_m3s, mode,
            alarms, opening_m, health: HealthFlags(health) };
        let text = status_json(&s);
        let v: Value = serde_json::from_str(&text).unwrap();
        prop_assert_eq!(v.as_object().unwrap().len(), 13);
        prop_assert_eq!(&v["v"], &Value::from(SCHEMA_VERSION));
        prop_assert_eq!(&v["type"], "status");
        prop_assert_eq!(&v["device_id"], &Value::from(DEVICE));
        prop_assert_eq!(&v["seq"], &Value::from(seq));
        prop_assert_eq!(&v["time_s"], &Value::from(time_s));
        prop_assert!(close(&v["stage_mm"], &reference_milli(stage_m)), "{}", text);
        prop_assert!(close(&v["storage_l"], &reference_milli(storage_m3)), "{}", text);
        prop_assert!(close(&v["release_ml_s"], &reference_milli(release_m3s)), "{}", text);
        prop_assert!(close(&v["permit_ml_s"], &reference_milli(permit_m3s)), "{}", text);
        prop_assert!(close(&v["opening_mm"], &reference_milli(opening_m)), "{}", text);
        prop_assert_eq!(&v["mode"], telemetry::mode_word(mode));
        prop_assert_eq!(&v["health"], &Value::from(health));
        let words: Vec<&str> = v["alarms"].as_array().unwrap().iter()
            .map(|w| w.as_str().unwrap()).collect();
        let expected: Vec<&str> = alarms.iter().map(telemetry::alarm_word).collect();
        prop_assert_eq!(words, expected);
    }

    /// Any event record encodes within MAX_EVENT_LEN as JSON that serde_json parses, with
    /// the record's header and kind word.
    #[test]
    fn event_parses(
        seq: u32, time_s: u32,
        a in any_f32_or_special(), b in any_f32_or_special(),
        m in mode(), raw: u8, which in 0usize..9,
    ) {
        let body = match which {
            0 => EventBody::ModeChange { from: m, to: m, reason: raw },
            1 => EventBody::Decision { target_release_m3s: a, opening_cmd: b },
            2 => EventBody::FaultRaised { source: FaultSource::ALL[raw as usize % FaultSource::ALL.len()],
                kind: FaultKind::ALL[raw as usize % FaultKind::ALL.len()] },
            3 => EventBody::FaultCleared { source: FaultSource::Clock, kind: FaultKind::Timeout },
            4 => EventBody::PermitExceedance { release_m3s: a, permit_m3s: b,
                reason: ExceedReason::ALL[raw as usize % ExceedReason::ALL.len()] },
            5 => EventBody::Alarm { kind: AlarmKind::ALL[raw as usize % AlarmKind::ALL.len()], value: a },
            6 => EventBody::Sample { stage_m: a, storage_m3: b, release_m3s: a, opening: b, mode: m,
                health: HealthFlags(raw) },
            7 => EventBody::CommandRejected { command: raw, value: a },
            _ => EventBody::RemoteCommand { counter: seq, kind: raw,
                outcome: CommandOutcome::ALL[raw as usize % CommandOutcome::ALL.len()] },
        };
        let r = rec(seq, time_s, body);
        let mut buf = [0u8; MAX_EVENT_LEN];
        let n = telemetry::encode_event(DEVICE, &r, &mut buf).unwrap();
        let v: Value = serde_json::from_slice(&buf[..n]).unwrap();
        prop_assert_eq!(&v["type"], "event");
        prop_assert_eq!(&v["seq"], &Value::from(seq));
        prop_assert_eq!(&v["time_s"], &Value::from(time_s));
        prop_assert_eq!(&v["kind"], telemetry::event_word(&body));
    }

    /// Any buffer length: a whole message or a BufferTooSmall error, never a panic.
    #[test]
    fn any_buffer_length_is_total(len in 0usize..400, stage_m in any_f32_or_special()) {
        let s = Status { stage_m, ..example_status() };
        let mut buf = vec![0u8; len];
        match telemetry::encode_status(DEVICE, &s, &mut buf) {
            Ok(n) => { prop_assert!(n <= len); serde_json::from_slice::<Value>(&buf[..n]).unwrap(); }
            Err(e) => prop_assert_eq!(e, TelemetryError::BufferTooSmall { len }),
        }
    }
}
