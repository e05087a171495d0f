//! Telemetry event messages as JSON lines, one record per line, so that a device's log can be
//! rebuilt from what it sent:
//!
//! ```text
//! {"device":"pond-07","seq":12,"time_s":1735689600,"kind":"sample","stage_m":1.02,
//!  "storage_m3":812.5,"release_m3s":0.031,"opening":0.25,"mode":"capture","health":0}
//! ```
//!
//! `kind` and the fields per kind (names as in `holdback_core::event::EventBody`, codes as
//! their snake_case names):
//!
//! | kind | fields |
//! |---|---|
//! | `mode_change` | `from`, `to` (mode), `reason` (u8) |
//! | `decision` | `target_release_m3s`, `opening_cmd` |
//! | `fault_raised`, `fault_cleared` | `source` (fault source), `fault` (fault kind) |
//! | `permit_exceedance` | `release_m3s`, `permit_m3s`, `reason` (exceed reason) |
//! | `alarm` | `alarm` (alarm kind), `value` |
//! | `sample` | `stage_m`, `storage_m3`, `release_m3s`, `opening`, `mode`, `health` (u8 bits) |
//! | `rain_total` | `window_s`, `depth_mm` |
//!
//! Numbers are written as the shortest decimal that reads back to the same `f32`; a
//! non-finite value is written as `null` and read back as NaN. Unknown extra fields are
//! ignored (a later writer may add some); a missing field, an unknown kind or code, or a line
//! that is not JSON is a [`Problem`] at the line's byte offset, and reading goes on.
//!
//! **Alignment.** The firmware's own JSON telemetry schema is being written in parallel
//! (`firmware/TELEMETRY.md`); when it lands, the two must be aligned (same names, same
//! codes), and this reader is the place to adapt.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use holdback_core::event::{
    AlarmKind, CommandOutcome, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource,
    HealthFlags, ModeCode,
};
use serde_json::{Map, Value};

use crate::read::{DecodedLog, Located, Problem, SourceKind};

/// `CamelCase` → `snake_case`.
fn snake(name: &str) -> String {
    let mut out = String::with_capacity(name.len() + 4);
    for (i, c) in name.chars().enumerate() {
        if c.is_ascii_uppercase() {
            if i > 0 {
                out.push('_');
            }
            out.push(c.to_ascii_lowercase());
        } else {
            out.push(c);
        }
    }
    out
}

/// The snake_case name of a code value (`ModeCode::Capture` → `capture`).
pub fn code_name<T: std::fmt::Debug>(v: T) -> String {
    snake(&format!("{v:?}"))
}

fn code_from<T: std::fmt::Debug + Copy>(all: &[T], name: &str) -> Option<T> {
    all.iter().copied().find(|v| code_name(*v) == name)
}

/// The `kind` name of a body.
pub fn kind_name(body: &EventBody) -> &'static str {
    match body {
        EventBody::ModeChange { .. } => "mode_change",
        EventBody::Decision { .. } => "decision",
        EventBody::FaultRaised { .. } => "fault_raised",
        EventBody::FaultCleared { .. } => "fault_cleared",
        EventBody::PermitExceedance { .. } => "permit_exceedance",
        EventBody::Alarm { .. } => "alarm",
        EventBody::Sample { .. } => "sample",
        EventBody::RainTotal { .. } => "rain_total",
        EventBody::CommandRejected { .. } => "command_rejected",
        EventBody::RemoteCommand { .. } => "remote_command",
    }
}

fn num(out: &mut String, key: &str, x: f32) {
    if x.is_finite() {
        let _ = write!(out, ",\"{key}\":{x}");
    } else {
        let _ = write!(out, ",\"{key}\":null");
    }
}

/// One record as a JSON line (no trailing newline).
pub fn to_line(device: &str, r: &EventRecord) -> String {
    let dev = serde_json::to_string(device).unwrap_or_else(|_| "\"\"".into());
    let mut s = format!(
        "{{\"device\":{dev},\"seq\":{},\"time_s\":{},\"kind\":\"{}\"",
        r.seq,
        r.time_s,
        kind_name(&r.body)
    );
    match r.body {
        EventBody::ModeChange { from, to, reason } => {
            let _ = write!(
                s,
                ",\"from\":\"{}\",\"to\":\"{}\",\"reason\":{reason}",
                code_name(from),
                code_name(to)
            );
        }
        EventBody::Decision {
            target_release_m3s,
            opening_cmd,
        } => {
            num(&mut s, "target_release_m3s", target_release_m3s);
            num(&mut s, "opening_cmd", opening_cmd);
        }
        EventBody::FaultRaised { source, kind } | EventBody::FaultCleared { source, kind } => {
            let _ = write!(
                s,
                ",\"source\":\"{}\",\"fault\":\"{}\"",
                code_name(source),
                code_name(kind)
            );
        }
        EventBody::PermitExceedance {
            release_m3s,
            permit_m3s,
            reason,
        } => {
            num(&mut s, "release_m3s", release_m3s);
            num(&mut s, "permit_m3s", permit_m3s);
            let _ = write!(s, ",\"reason\":\"{}\"", code_name(reason));
        }
        EventBody::Alarm { kind, value } => {
            let _ = write!(s, ",\"alarm\":\"{}\"", code_name(kind));
            num(&mut s, "value", value);
        }
        EventBody::Sample {
            stage_m,
            storage_m3,
            release_m3s,
            opening,
            mode,
            health,
        } => {
            num(&mut s, "stage_m", stage_m);
            num(&mut s, "storage_m3", storage_m3);
            num(&mut s, "release_m3s", release_m3s);
            num(&mut s, "opening", opening);
            let _ = write!(
                s,
                ",\"mode\":\"{}\",\"health\":{}",
                code_name(mode),
                health.0
            );
        }
        EventBody::RainTotal { window_s, depth_mm } => {
            let _ = write!(s, ",\"window_s\":{window_s}");
            num(&mut s, "depth_mm", depth_mm);
        }
        EventBody::CommandRejected { command, value } => {
            let _ = write!(s, ",\"command\":{command}");
            num(&mut s, "value", value);
        }
        EventBody::RemoteCommand {
            counter,
            kind,
            outcome,
        } => {
            let _ = write!(
                s,
                ",\"counter\":{counter},\"command\":{kind},\"outcome\":\"{}\"",
                code_name(outcome)
            );
        }
    }
    s.push('}');
    s
}

/// All records as JSON lines, each ending in a newline.
pub fn to_lines(device: &str, records: &[EventRecord]) -> String {
    let mut s = String::with_capacity(records.len() * 150);
    for r in records {
        s.push_str(&to_line(device, r));
        s.push('\n');
    }
    s
}

struct Fields<'a>(&'a Map<String, Value>);

impl Fields<'_> {
    fn get(&self, k: &str) -> Result<&Value, String> {
        self.0.get(k).ok_or_else(|| format!("field {k}: missing"))
    }
    fn f32(&self, k: &str) -> Result<f32, String> {
        match self.get(k)? {
            Value::Null => Ok(f32::NAN),
            v => v
                .as_f64()
                .map(|x| x as f32)
                .ok_or_else(|| format!("field {k} = {v}: must be a number")),
        }
    }
    fn uint<T: TryFrom<u64>>(&self, k: &str) -> Result<T, String> {
        let v = self.get(k)?;
        v.as_u64()
            .and_then(|x| T::try_from(x).ok())
            .ok_or_else(|| format!("field {k} = {v}: must be an unsigned integer in range"))
    }
    fn code<T: std::fmt::Debug + Copy>(&self, k: &str, all: &[T]) -> Result<T, String> {
        let v = self.get(k)?;
        v.as_str()
            .and_then(|s| code_from(all, s))
            .ok_or_else(|| format!("field {k} = {v}: not a known code"))
    }
}

/// Parse one JSON line into `(device, record)`.
pub fn parse_line(line: &str) -> Result<(String, EventRecord), String> {
    let v: Value = serde_json::from_str(line).map_err(|e| format!("not JSON: {e}"))?;
    let Value::Object(m) = v else {
        return Err("not a JSON object".into());
    };
    let f = Fields(&m);
    let device = f
        .get("device")?
        .as_str()
        .ok_or("field device: must be a string")?
        .to_string();
    let seq = f.uint::<u32>("seq")?;
    let time_s = f.uint::<u32>("time_s")?;
    let kind = f
        .get("kind")?
        .as_str()
        .ok_or("field kind: must be a string")?;
    let body = match kind {
        "mode_change" => EventBody::ModeChange {
            from: f.code("from", ModeCode::ALL)?,
            to: f.code("to", ModeCode::ALL)?,
            reason: f.uint::<u8>("reason")?,
        },
        "decision" => EventBody::Decision {
            target_release_m3s: f.f32("target_release_m3s")?,
            opening_cmd: f.f32("opening_cmd")?,
        },
        "fault_raised" => EventBody::FaultRaised {
            source: f.code("source", FaultSource::ALL)?,
            kind: f.code("fault", FaultKind::ALL)?,
        },
        "fault_cleared" => EventBody::FaultCleared {
            source: f.code("source", FaultSource::ALL)?,
            kind: f.code("fault", FaultKind::ALL)?,
        },
        "permit_exceedance" => EventBody::PermitExceedance {
            release_m3s: f.f32("release_m3s")?,
            permit_m3s: f.f32("permit_m3s")?,
            reason: f.code("reason", ExceedReason::ALL)?,
        },
        "alarm" => EventBody::Alarm {
            kind: f.code("alarm", AlarmKind::ALL)?,
            value: f.f32("value")?,
        },
        "sample" => EventBody::Sample {
            stage_m: f.f32("stage_m")?,
            storage_m3: f.f32("storage_m3")?,
            release_m3s: f.f32("release_m3s")?,
            opening: f.f32("opening")?,
            mode: f.code("mode", ModeCode::ALL)?,
            health: HealthFlags(f.uint::<u8>("health")?),
        },
        "rain_total" => EventBody::RainTotal {
            window_s: f.uint::<u32>("window_s")?,
            depth_mm: f.f32("depth_mm")?,
        },
        "command_rejected" => EventBody::CommandRejected {
            command: f.uint::<u8>("command")?,
            value: f.f32("value")?,
        },
        "remote_command" => EventBody::RemoteCommand {
            counter: f.uint::<u32>("counter")?,
            kind: f.uint::<u8>("command")?,
            outcome: f.code("outcome", CommandOutcome::ALL)?,
        },
        other => return Err(format!("field kind = {other:?}: not a known kind")),
    };
    Ok((device, EventRecord { seq, time_s, body }))
}

/// Read JSON lines; one [`DecodedLog`] per device, in the order devices first appear. Within
/// a device, records are put in sequence order and exact repeats (a message delivered twice)
/// are dropped; a repeat that differs is kept and reported. Bad lines are problems of the
/// first device's log (or of a log with no device when no line was readable).
pub fn read_lines(bytes: &[u8]) -> Vec<DecodedLog> {
    let mut order: Vec<String> = Vec::new();
    let mut logs: BTreeMap<String, DecodedLog> = BTreeMap::new();
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
        match parse_line(line) {
            Ok((device, record)) => {
                let log = logs.entry(device.clone()).or_insert_with(|| {
                    order.push(device.clone());
                    DecodedLog {
                        kind: SourceKind::Telemetry,
                        device: Some(device),
                        records: Vec::new(),
                        problems: Vec::new(),
                    }
                });
                log.records.push(Located {
                    offset: here,
                    record,
                });
            }
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
                    if k.record != l.record {
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
            }),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bodies() -> Vec<EventBody> {
        vec![
            EventBody::ModeChange {
                from: ModeCode::Standby,
                to: ModeCode::Capture,
                reason: 3,
            },
            EventBody::Decision {
                target_release_m3s: 0.1,
                opening_cmd: 0.333,
            },
            EventBody::FaultRaised {
                source: FaultSource::GatePosition,
                kind: FaultKind::LimitConflict,
            },
            EventBody::FaultCleared {
                source: FaultSource::RainGauge,
                kind: FaultKind::Implausible,
            },
            EventBody::PermitExceedance {
                release_m3s: 0.71,
                permit_m3s: 0.5,
                reason: ExceedReason::GateUnable,
            },
            EventBody::Alarm {
                kind: AlarmKind::LowFreeboard,
                value: 0.123_456_7,
            },
            EventBody::Sample {
                stage_m: 1.000_001,
                storage_m3: 1.0e7,
                release_m3s: 3.4e-5,
                opening: 1.0,
                mode: ModeCode::Failsafe,
                health: HealthFlags(0b1_0101),
            },
            EventBody::RainTotal {
                window_s: 300,
                depth_mm: 0.2,
            },
        ]
    }

    /// Every kind round-trips exactly through a JSON line (f32 bits preserved).
    #[test]
    fn every_kind_round_trips() {
        for (i, body) in bodies().into_iter().enumerate() {
            let r = EventRecord {
                seq: i as u32 * 1000,
                time_s: u32::MAX - i as u32,
                body,
            };
            let line = to_line("p\"1", &r);
            assert_eq!(parse_line(&line), Ok(("p\"1".to_string(), r)), "{line}");
        }
    }

    /// Bad lines are reported at their byte offset with the field named; good lines around
    /// them are read; repeats are dropped; devices are split.
    #[test]
    fn bad_lines_reported_and_skipped() {
        let r = |seq| EventRecord {
            seq,
            time_s: 10 * seq,
            body: bodies()[7],
        };
        let mut text = to_line("a", &r(1));
        text.push('\n');
        let bad_at = text.len();
        text.push_str("{\"device\":\"a\",\"seq\":2,\"time_s\":20,\"kind\":\"alarm\",\"alarm\":\"loud\",\"value\":1}\n");
        text.push_str(&to_line("b", &r(1)));
        text.push('\n');
        text.push_str(&to_line("a", &r(3)));
        text.push('\n');
        text.push_str(&to_line("a", &r(1)));
        text.push_str("\nnot json\n");
        let logs = read_lines(text.as_bytes());
        assert_eq!(logs.len(), 2);
        assert_eq!(logs[0].device.as_deref(), Some("a"));
        assert_eq!(
            logs[0].records().iter().map(|r| r.seq).collect::<Vec<_>>(),
            [1, 3]
        );
        assert_eq!(logs[1].records().len(), 1);
        assert_eq!(logs[0].problems.len(), 2);
        assert_eq!(logs[0].problems[0].offset, bad_at);
        assert!(
            logs[0].problems[0].why.contains("line 2: field alarm"),
            "{:?}",
            logs[0].problems
        );
        assert!(logs[0].problems[1].why.contains("line 6: not JSON"));
    }
}
