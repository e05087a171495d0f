//! The firmware's telemetry messages, read back: status and event messages exactly as
//! `holdback_firmware::telemetry` writes them and `firmware/TELEMETRY.md` documents them, one
//! JSON object per line, so that a device's log can be rebuilt from what it sent when its
//! flash cannot be reached.
//!
//! ```text
//! {"v":1,"type":"event","device_id":17,"seq":306,"time_s":65,"kind":"sample","stage_mm":null,
//!  "storage_l":1000000,"release_ml_s":125,"opening_permille":750,"mode":"drawdown","health":2}
//! ```
//!
//! One vocabulary: the words (`mode`, `alarm`, `source`, `fault`, `reason`, `outcome`, the
//! event `kind`) are looked up through the firmware's own word functions
//! (`holdback_firmware::telemetry::mode_word`…), and the scale is the firmware's
//! [`MILLI`]. Encoding ([`event_line`], [`to_lines`]) is the firmware's `encode_event`.
//!
//! **Numbers.** Every quantity arrives as a scaled integer (core unit × 1000, rounded half
//! away from zero) and is read back as `n / 1000` in the core's unit; `null` (not finite on
//! the device) is read back as NaN. So a value read back is within half a unit of the last
//! place sent (0.5 mm, 0.5 L, 0.5 mL/s, 0.5 ‰) plus `f32` rounding of the original, not the
//! original bits. A finite value beyond the `i32` range was saturated by the device and
//! cannot be told from `i32::MAX`/`i32::MIN` thousandths.
//!
//! **Lines.** A device is named by its decimal `device_id` (`"17"`): a pond that reports by
//! telemetry is registered with that `pond_id`. Unknown extra fields are ignored (the schema
//! only ever adds fields). A line that is not JSON, has another schema version, another
//! `type`, a missing or ill-typed field, a word this reader does not know (including the
//! firmware's `"unknown"`), or a number that is not an integer in range is a [`Problem`] at
//! the line's byte offset whose reason starts with `line N:`; reading goes on with the next
//! line. Status messages are decoded too ([`read`] returns them) but carry no log record.

use std::collections::BTreeMap;

use holdback_core::event::{
    self, AlarmKind, CommandOutcome, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource,
    HealthFlags, MAX_FRAME_LEN, ModeCode,
};
use holdback_firmware::telemetry::{
    self as fw, AlarmSet, MAX_EVENT_LEN, MILLI, SCHEMA_VERSION, Status,
};
use serde_json::{Map, Value};

use crate::read::{DecodedLog, Located, Problem, SourceKind};

/// A code with a telemetry word (the firmware's word functions).
pub trait Word: Copy + 'static {
    /// Every code, in code order.
    const ALL: &'static [Self];
    /// The word the firmware sends for this code.
    fn word(self) -> &'static str;
}

macro_rules! word {
    ($t:ty, $f:path) => {
        impl Word for $t {
            const ALL: &'static [Self] = <$t>::ALL;
            fn word(self) -> &'static str {
                $f(self)
            }
        }
    };
}
word!(ModeCode, fw::mode_word);
word!(AlarmKind, fw::alarm_word);
word!(FaultSource, fw::source_word);
word!(FaultKind, fw::fault_word);
word!(ExceedReason, fw::exceed_word);
word!(CommandOutcome, fw::outcome_word);

/// The telemetry word of a code, owned (`ModeCode::Capture` → `"capture"`).
pub fn code_name<T: Word>(v: T) -> String {
    v.word().to_string()
}

/// The code whose telemetry word is `w` (`"unknown"` names no code).
pub fn from_word<T: Word>(w: &str) -> Option<T> {
    T::ALL
        .iter()
        .copied()
        .find(|v| v.word() == w && w != "unknown")
}

/// The `kind` word of a body (the firmware's `event_word`).
pub fn kind_name(body: &EventBody) -> &'static str {
    fw::event_word(body)
}

/// The device name the review gives a telemetry `device_id`: its decimal form.
pub fn device_name(device_id: u32) -> String {
    device_id.to_string()
}

/// One message read from a line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Message {
    /// A status message (`"type":"status"`).
    Status {
        /// The sending device.
        device_id: u32,
        /// Its contents, in the core's units (quantities as read back, see the module doc).
        status: Status,
    },
    /// An event message (`"type":"event"`): one event-log record.
    Event {
        /// The sending device.
        device_id: u32,
        /// The record (quantities as read back, see the module doc).
        record: EventRecord,
    },
}

/// The event message for `record` from `device_id`, as the firmware writes it (its
/// `encode_event`), without a newline.
pub fn event_line(device_id: u32, record: &EventRecord) -> String {
    let mut buf = [0u8; MAX_EVENT_LEN];
    // The firmware guarantees MAX_EVENT_LEN suffices for every record; its output is ASCII.
    let n = fw::encode_event(device_id, record, &mut buf).unwrap_or(0);
    String::from_utf8_lossy(&buf[..n]).into_owned()
}

/// The event messages of `records` from `device_id`, each line ending in a newline.
pub fn to_lines(device_id: u32, records: &[EventRecord]) -> String {
    let mut s = String::with_capacity(records.len() * 160);
    for r in records {
        s.push_str(&event_line(device_id, r));
        s.push('\n');
    }
    s
}

struct Fields<'a>(&'a Map<String, Value>);

impl Fields<'_> {
    fn get(&self, k: &str) -> Result<&Value, String> {
        self.0.get(k).ok_or_else(|| format!("field {k}: missing"))
    }
    fn uint<T: TryFrom<u64>>(&self, k: &str) -> Result<T, String> {
        let v = self.get(k)?;
        v.as_u64()
            .and_then(|x| T::try_from(x).ok())
            .ok_or_else(|| format!("field {k} = {v}: must be an unsigned integer in range"))
    }
    /// A scaled quantity: an `i32` integer (or `null`) divided by [`MILLI`].
    fn milli(&self, k: &str) -> Result<f32, String> {
        match self.get(k)? {
            Value::Null => Ok(f32::NAN),
            v => v
                .as_i64()
                .and_then(|n| i32::try_from(n).ok())
                .map(|n| (f64::from(n) / f64::from(MILLI)) as f32)
                .ok_or_else(|| {
                    format!("field {k} = {v}: must be an integer (value × 1000) in the i32 range")
                }),
        }
    }
    fn str(&self, k: &str) -> Result<&str, String> {
        let v = self.get(k)?;
        v.as_str()
            .ok_or_else(|| format!("field {k} = {v}: must be a string"))
    }
    fn word<T: Word>(&self, k: &str) -> Result<T, String> {
        let w = self.str(k)?;
        from_word(w).ok_or_else(|| format!("field {k} = {w:?}: not a known word"))
    }
}

/// Decode one line (a whole JSON object) into a [`Message`]; the error says which field is
/// wrong and why.
pub fn decode_line(line: &str) -> Result<Message, String> {
    let v: Value = serde_json::from_str(line).map_err(|e| format!("not JSON: {e}"))?;
    let Value::Object(m) = v else {
        return Err("not a JSON object".into());
    };
    let f = Fields(&m);
    let version = f.uint::<u64>("v")?;
    if version != u64::from(SCHEMA_VERSION) {
        return Err(format!(
            "field v = {version}: schema version not known (this reader: {SCHEMA_VERSION})"
        ));
    }
    let device_id = f.uint::<u32>("device_id")?;
    let seq = f.uint::<u32>("seq")?;
    let time_s = f.uint::<u32>("time_s")?;
    match f.str("type")? {
        "status" => {
            let alarms = match f.get("alarms")? {
                Value::Array(words) => {
                    let mut set = AlarmSet::EMPTY;
                    for w in words {
                        let kind = w
                            .as_str()
                            .and_then(from_word::<AlarmKind>)
                            .ok_or_else(|| format!("field alarms: {w} is not a known word"))?;
                        set.insert(kind);
                    }
                    set
                }
                other => return Err(format!("field alarms = {other}: must be an array")),
            };
            let status = Status {
                seq,
                time_s,
                stage_m: f.milli("stage_mm")?,
                storage_m3: f.milli("storage_l")?,
                release_m3s: f.milli("release_ml_s")?,
                permit_m3s: f.milli("permit_ml_s")?,
                mode: f.word("mode")?,
                alarms,
                opening_m: f.milli("opening_mm")?,
                health: HealthFlags(f.uint::<u8>("health")?),
            };
            Ok(Message::Status { device_id, status })
        }
        "event" => {
            let body = event_body(&f)?;
            Ok(Message::Event {
                device_id,
                record: EventRecord { seq, time_s, body },
            })
        }
        other => Err(format!(
            "field type = {other:?}: not a known message type (status, event)"
        )),
    }
}

fn event_body(f: &Fields<'_>) -> Result<EventBody, String> {
    Ok(match f.str("kind")? {
        "mode_change" => EventBody::ModeChange {
            from: f.word("from")?,
            to: f.word("to")?,
            reason: f.uint::<u8>("reason")?,
        },
        "decision" => EventBody::Decision {
            target_release_m3s: f.milli("target_release_ml_s")?,
            opening_cmd: f.milli("opening_cmd_permille")?,
        },
        "fault_raised" => EventBody::FaultRaised {
            source: f.word("source")?,
            kind: f.word("fault")?,
        },
        "fault_cleared" => EventBody::FaultCleared {
            source: f.word("source")?,
            kind: f.word("fault")?,
        },
        "permit_exceedance" => EventBody::PermitExceedance {
            release_m3s: f.milli("release_ml_s")?,
            permit_m3s: f.milli("permit_ml_s")?,
            reason: f.word("reason")?,
        },
        "alarm" => EventBody::Alarm {
            kind: f.word("alarm")?,
            value: f.milli("value_milli")?,
        },
        "sample" => EventBody::Sample {
            stage_m: f.milli("stage_mm")?,
            storage_m3: f.milli("storage_l")?,
            release_m3s: f.milli("release_ml_s")?,
            opening: f.milli("opening_permille")?,
            mode: f.word("mode")?,
            health: HealthFlags(f.uint::<u8>("health")?),
        },
        "command_rejected" => EventBody::CommandRejected {
            command: f.uint::<u8>("command")?,
            value: f.milli("value_milli")?,
        },
        "remote_command" => EventBody::RemoteCommand {
            counter: f.uint::<u32>("counter")?,
            kind: f.uint::<u8>("command")?,
            outcome: f.word("outcome")?,
        },
        "rain_total" => EventBody::RainTotal {
            window_s: f.uint::<u32>("window_s")?,
            depth_mm: f.milli("depth_um")?,
        },
        other => return Err(format!("field kind = {other:?}: not a known kind")),
    })
}

/// A status message read from a line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StatusLine {
    /// Byte offset of the line.
    pub offset: usize,
    /// Line number, from 1.
    pub line: usize,
    /// The sending device.
    pub device_id: u32,
    /// What it said.
    pub status: Status,
}

/// Everything read from a telemetry file.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TelemetryRead {
    /// One log per device, in the order devices first appear (see [`read`]).
    pub logs: Vec<DecodedLog>,
    /// Every status message, in file order.
    pub statuses: Vec<StatusLine>,
}

/// Whether two records are the same bits (NaN fields included), through the core frame.
fn same_record(a: &EventRecord, b: &EventRecord) -> bool {
    let (mut x, mut y) = ([0u8; MAX_FRAME_LEN], [0u8; MAX_FRAME_LEN]);
    match (event::encode(a, &mut x), event::encode(b, &mut y)) {
        (Ok(n), Ok(m)) => x[..n] == y[..m],
        _ => a == b,
    }
}

/// Read telemetry lines. Event messages become one [`DecodedLog`] per device (named by
/// [`device_name`]), in the order devices first appear; within a device, records are put in
/// sequence order and exact repeats (a message delivered twice) are dropped, while a repeat
/// that differs is kept and reported. Status messages are returned beside the logs. Bad
/// lines are problems (reason `line N: ...`) of the first device's log, or of a log with no
/// device when no event line was readable.
pub fn read(bytes: &[u8]) -> TelemetryRead {
    let mut order: Vec<u32> = Vec::new();
    let mut logs: BTreeMap<u32, DecodedLog> = BTreeMap::new();
    let mut statuses = Vec::new();
    let mut orphan: Vec<Problem> = Vec::new();
    let mut offset = 0usize;
    for (i, raw) in bytes.split(|&b| b == b'\n').enumerate() {
        let here = offset;
        offset += raw.len() + 1;
        let line = match std::str::from_utf8(raw) {
            Ok(l) => l.trim(),
            Err(e) => {
                orphan.push(Problem {
                    offset: here,
                    len: raw.len(),
                    why: format!("line {}: not UTF-8: {e}", i + 1),
                });
                continue;
            }
        };
        if line.is_empty() {
            continue;
        }
        match decode_line(line) {
            Ok(Message::Event { device_id, record }) => {
                let log = logs.entry(device_id).or_insert_with(|| {
                    order.push(device_id);
                    DecodedLog {
                        kind: SourceKind::Telemetry,
                        device: Some(device_name(device_id)),
                        records: Vec::new(),
                        problems: Vec::new(),
                        source: None,
                    }
                });
                log.records.push(Located {
                    offset: here,
                    record,
                });
            }
            Ok(Message::Status { device_id, status }) => statuses.push(StatusLine {
                offset: here,
                line: i + 1,
                device_id,
                status,
            }),
            Err(why) => orphan.push(Problem {
                offset: here,
                len: raw.len(),
                why: format!("line {}: {why}", i + 1),
            }),
        }
    }
    let mut out: Vec<DecodedLog> = order.iter().filter_map(|d| logs.remove(d)).collect();
    for log in &mut out {
        log.records.sort_by_key(|l| l.record.seq);
        let mut kept: Vec<Located> = Vec::with_capacity(log.records.len());
        for l in log.records.drain(..) {
            match kept.last() {
                Some(k) if k.record.seq == l.record.seq => {
                    if !same_record(&k.record, &l.record) {
                        log.problems.push(Problem {
                            offset: l.offset,
                            len: 0,
                            why: format!(
                                "seq {} sent twice with different contents; both kept",
                                l.record.seq
                            ),
                        });
                        kept.push(l);
                    }
                }
                _ => kept.push(l),
            }
        }
        log.records = kept;
    }
    if !orphan.is_empty() {
        match out.first_mut() {
            Some(first) => {
                first.problems.extend(orphan);
                first.problems.sort_by_key(|p| p.offset);
            }
            None => out.push(DecodedLog {
                kind: SourceKind::Telemetry,
                device: None,
                records: Vec::new(),
                problems: orphan,
                source: None,
            }),
        }
    }
    TelemetryRead {
        logs: out,
        statuses,
    }
}

/// The logs of [`read`] alone (status messages dropped).
pub fn read_lines(bytes: &[u8]) -> Vec<DecodedLog> {
    read(bytes).logs
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(seq: u32) -> EventRecord {
        EventRecord {
            seq,
            time_s: 10 * seq,
            body: EventBody::RainTotal {
                window_s: 300,
                depth_mm: 0.2,
            },
        }
    }

    /// Every word of every code set maps back to its code through the firmware's own word
    /// functions, and `"unknown"` maps to none.
    #[test]
    fn every_word_maps_back_to_its_code() {
        fn check<T: Word + PartialEq + std::fmt::Debug>() {
            for c in T::ALL {
                assert_eq!(from_word::<T>(c.word()), Some(*c));
            }
            assert_eq!(from_word::<T>("unknown"), None);
        }
        check::<ModeCode>();
        check::<AlarmKind>();
        check::<FaultSource>();
        check::<FaultKind>();
        check::<ExceedReason>();
        check::<CommandOutcome>();
    }

    /// Bad lines are reported at their byte offset with their line number and the field
    /// named; good lines around them are read; repeats are dropped; devices are split; a
    /// status line is returned beside the logs.
    #[test]
    fn bad_lines_reported_with_line_numbers_and_skipped() {
        let mut text = event_line(5, &rec(1));
        text.push('\n');
        let bad_at = text.len();
        text.push_str(
            "{\"v\":1,\"type\":\"event\",\"device_id\":5,\"seq\":2,\"time_s\":20,\"kind\":\"alarm\",\"alarm\":\"loud\",\"value_milli\":1}\n",
        );
        text.push_str(&event_line(6, &rec(1)));
        text.push('\n');
        text.push_str(&event_line(5, &rec(3)));
        text.push('\n');
        text.push_str(&event_line(5, &rec(1)));
        text.push_str("\nnot json\n");
        text.push_str("{\"v\":2,\"type\":\"event\",\"device_id\":5,\"seq\":9,\"time_s\":1}\n");
        text.push_str(
            "{\"v\":1,\"type\":\"event\",\"device_id\":5,\"seq\":9,\"time_s\":1,\"kind\":\"decision\",\"target_release_ml_s\":1.5,\"opening_cmd_permille\":3}\n",
        );
        text.push_str(
            "{\"v\":1,\"type\":\"status\",\"device_id\":5,\"seq\":1,\"time_s\":7,\"stage_mm\":1250,\"storage_l\":null,\"release_ml_s\":0,\"permit_ml_s\":250,\"mode\":\"capture\",\"alarms\":[\"high_stage\"],\"opening_mm\":63,\"health\":1}\n",
        );
        let got = read(text.as_bytes());
        let logs = &got.logs;
        assert_eq!(logs.len(), 2);
        assert_eq!(logs[0].device.as_deref(), Some("5"));
        assert_eq!(
            logs[0].records().iter().map(|r| r.seq).collect::<Vec<_>>(),
            [1, 3]
        );
        assert_eq!(logs[1].records().len(), 1);
        let why: Vec<&str> = logs[0].problems.iter().map(|p| p.why.as_str()).collect();
        assert_eq!(why.len(), 4, "{why:?}");
        assert_eq!(logs[0].problems[0].offset, bad_at);
        assert!(why[0].starts_with("line 2: field alarm"), "{why:?}");
        assert!(why[1].starts_with("line 6: not JSON"), "{why:?}");
        assert!(why[2].starts_with("line 7: field v = 2"), "{why:?}");
        assert!(
            why[3].starts_with("line 8: field target_release_ml_s"),
            "{why:?}"
        );
        assert_eq!(got.statuses.len(), 1);
        let s = got.statuses[0];
        assert_eq!((s.line, s.device_id, s.status.time_s), (9, 5, 7));
        assert_eq!(s.status.stage_m, 1.25);
        assert!(s.status.storage_m3.is_nan());
        assert!(s.status.alarms.contains(AlarmKind::HighStage));
    }

    /// A record with a NaN field sent twice is one record, not a conflict.
    #[test]
    fn a_repeat_with_null_fields_is_dropped() {
        let r = EventRecord {
            seq: 4,
            time_s: 9,
            body: EventBody::Decision {
                target_release_m3s: f32::NAN,
                opening_cmd: 0.5,
            },
        };
        let text = to_lines(1, &[r, r]);
        let logs = read_lines(text.as_bytes());
        assert_eq!(logs[0].records.len(), 1);
        assert!(logs[0].problems.is_empty(), "{:?}", logs[0].problems);
    }
}
