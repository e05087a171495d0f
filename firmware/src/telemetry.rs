//! Telemetry messages: periodic status and event records as compact JSON.
//!
//! Two message types, each one JSON object written into a caller-supplied buffer with
//! `serde-json-core`'s slice API (no heap, no heapless types):
//!
//! - **status** ([`encode_status`]): the pond's state now — stage, storage, release, permit,
//!   mode, active alarms, gate opening, sensor health.
//! - **event** ([`encode_event`]): one [`EventRecord`] of the event log, its kind as a word
//!   and its fields flattened beside the header.
//!
//! The schema (fields, units, types, examples) is in `firmware/TELEMETRY.md`; tests pin it
//! with golden strings.
//!
//! ## Scaled integers, not floats
//!
//! Every quantity goes out as a rounded, scaled **integer** with its unit in the field name
//! (`stage_mm`, `storage_l`, `release_ml_s`, `opening_mm`, `opening_permille`): floating-point
//! printing costs several KiB of flash on the device, integer printing a few hundred bytes.
//! Rounding is half away from zero. A value that is not finite (a sensor in fault) is sent as
//! `null`; a finite value beyond the `i32` range saturates at `i32::MIN`/`i32::MAX`.
//!
//! Invariants: encoding never panics; a buffer of [`MAX_STATUS_LEN`] or [`MAX_EVENT_LEN`] bytes
//! always suffices; a shorter one gives [`TelemetryError::BufferTooSmall`] and the buffer's
//! contents are then unspecified.

use core::fmt;

use holdback_core::event::{
    AlarmKind, CommandOutcome, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource,
    HealthFlags, ModeCode,
};
use serde::Serialize;
use serde::ser::{SerializeSeq, SerializeStruct, Serializer};

/// Schema version, the `"v"` field of every message. Fields are only ever added; a change to
/// an existing field's meaning bumps it.
pub const SCHEMA_VERSION: u8 = 1;

/// A buffer this long holds any status message. The worst case (every number at its longest,
/// every alarm active) is 326 bytes today, checked by a test; the rest is room for new alarms.
pub const MAX_STATUS_LEN: usize = 384;

/// A buffer this long holds any event message (worst case 227 bytes today, checked by a test).
pub const MAX_EVENT_LEN: usize = 256;

/// Why a message could not be written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum TelemetryError {
    /// The output buffer is too short for this message (give [`MAX_STATUS_LEN`] or
    /// [`MAX_EVENT_LEN`] bytes).
    BufferTooSmall {
        /// Length of the buffer given.
        len: usize,
    },
}

impl fmt::Display for TelemetryError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::BufferTooSmall { len } => {
                write!(f, "buffer len = {len}: too short for this message")
            }
        }
    }
}

impl core::error::Error for TelemetryError {}

/// A set of active alarms, one bit per [`AlarmKind`] code (codes 0–31).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AlarmSet(u32);

impl AlarmSet {
    /// No alarm active.
    pub const EMPTY: AlarmSet = AlarmSet(0);

    /// The set with `kind` added (a code of 32 or more cannot be held and is ignored).
    #[must_use]
    pub fn with(self, kind: AlarmKind) -> AlarmSet {
        AlarmSet(self.0 | Self::bit(kind))
    }

    /// Add `kind`.
    pub fn insert(&mut self, kind: AlarmKind) {
        self.0 |= Self::bit(kind);
    }

    /// Remove `kind`.
    pub fn remove(&mut self, kind: AlarmKind) {
        self.0 &= !Self::bit(kind);
    }

    /// Whether `kind` is in the set.
    pub fn contains(self, kind: AlarmKind) -> bool {
        let bit = Self::bit(kind);
        bit != 0 && self.0 & bit == bit
    }

    /// Whether no alarm is active.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// The raw bits (bit `n` = alarm code `n`).
    pub const fn bits(self) -> u32 {
        self.0
    }

    /// The active alarms, in code order.
    pub fn iter(self) -> impl Iterator<Item = AlarmKind> {
        AlarmKind::ALL
            .iter()
            .copied()
            .filter(move |k| self.contains(*k))
    }

    fn bit(kind: AlarmKind) -> u32 {
        1u32.checked_shl(u32::from(kind.code())).unwrap_or(0)
    }
}

impl Serialize for AlarmSet {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut seq = s.serialize_seq(None)?;
        for kind in self.iter() {
            seq.serialize_element(alarm_word(kind))?;
        }
        seq.end()
    }
}

/// The pond's state for one status message. Units as in the core: m, m³, m³/s, s.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Status {
    /// Message sequence number (the caller's counter of status messages; wraps).
    pub seq: u32,
    /// Seconds since boot (or the device's clock epoch).
    pub time_s: u32,
    /// Filtered stage, m on the survey datum (NaN when the stage sensor is in fault).
    pub stage_m: f32,
    /// Storage at that stage, m³.
    pub storage_m3: f32,
    /// Total release now, m³/s.
    pub release_m3s: f32,
    /// Permitted release, m³/s.
    pub permit_m3s: f32,
    /// Controller mode.
    pub mode: ModeCode,
    /// Active alarms.
    pub alarms: AlarmSet,
    /// Gate opening measured, m (NaN when the position feedback is in fault).
    pub opening_m: f32,
    /// Sensor health (a set bit = that input in fault).
    pub health: HealthFlags,
}

/// Write the status message for device `device_id` into `buf`; returns its length in bytes.
pub fn encode_status(
    device_id: u32,
    status: &Status,
    buf: &mut [u8],
) -> Result<usize, TelemetryError> {
    to_slice(&StatusMessage { device_id, status }, buf)
}

/// Write the event message for `record` from device `device_id` into `buf`; returns its
/// length in bytes.
pub fn encode_event(
    device_id: u32,
    record: &EventRecord,
    buf: &mut [u8],
) -> Result<usize, TelemetryError> {
    to_slice(&EventMessage { device_id, record }, buf)
}

fn to_slice<T: Serialize>(msg: &T, buf: &mut [u8]) -> Result<usize, TelemetryError> {
    let len = buf.len();
    // serde-json-core's only serializer error is a full buffer.
    serde_json_core::to_slice(msg, buf).map_err(|_| TelemetryError::BufferTooSmall { len })
}

/// `x · scale` rounded half away from zero; `None` (JSON `null`) when `x` is not finite.
/// Finite values beyond the `i32` range saturate (Rust's `as` cast from float saturates).
pub fn scaled(x: f32, scale: f32) -> Option<i32> {
    if !x.is_finite() {
        return None;
    }
    let s = x * scale;
    let r = if s >= 0.0 { s + 0.5 } else { s - 0.5 };
    Some(r as i32)
}

/// The one scale of every quantity sent: m → mm, m³ → L, m³/s → mL/s, fraction → ‰, alarm
/// unit → thousandths, mm of rain → µm; all × 1000. A receiver divides by it
/// (`holdback-review`'s telemetry reader does).
pub const MILLI: f32 = 1000.0;

struct StatusMessage<'a> {
    device_id: u32,
    status: &'a Status,
}

impl Serialize for StatusMessage<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let st = self.status;
        let mut m = s.serialize_struct("status", 14)?;
        m.serialize_field("v", &SCHEMA_VERSION)?;
        m.serialize_field("type", "status")?;
        m.serialize_field("device_id", &self.device_id)?;
        m.serialize_field("seq", &st.seq)?;
        m.serialize_field("time_s", &st.time_s)?;
        m.serialize_field("stage_mm", &scaled(st.stage_m, MILLI))?;
        m.serialize_field("storage_l", &scaled(st.storage_m3, MILLI))?;
        m.serialize_field("release_ml_s", &scaled(st.release_m3s, MILLI))?;
        m.serialize_field("permit_ml_s", &scaled(st.permit_m3s, MILLI))?;
        m.serialize_field("mode", mode_word(st.mode))?;
        m.serialize_field("alarms", &st.alarms)?;
        m.serialize_field("opening_mm", &scaled(st.opening_m, MILLI))?;
        m.serialize_field("health", &st.health.0)?;
        m.end()
    }
}

struct EventMessage<'a> {
    device_id: u32,
    record: &'a EventRecord,
}

impl Serialize for EventMessage<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let r = self.record;
        let mut m = s.serialize_struct("event", 12)?;
        m.serialize_field("v", &SCHEMA_VERSION)?;
        m.serialize_field("type", "event")?;
        m.serialize_field("device_id", &self.device_id)?;
        m.serialize_field("seq", &r.seq)?;
        m.serialize_field("time_s", &r.time_s)?;
        m.serialize_field("kind", event_word(&r.body))?;
        match r.body {
            EventBody::ModeChange { from, to, reason } => {
                m.serialize_field("from", mode_word(from))?;
                m.serialize_field("to", mode_word(to))?;
                m.serialize_field("reason", &reason)?;
            }
            EventBody::Decision {
                target_release_m3s,
                opening_cmd,
            } => {
                m.serialize_field("target_release_ml_s", &scaled(target_release_m3s, MILLI))?;
                m.serialize_field("opening_cmd_permille", &scaled(opening_cmd, MILLI))?;
            }
            EventBody::FaultRaised { source, kind } | EventBody::FaultCleared { source, kind } => {
                m.serialize_field("source", source_word(source))?;
                m.serialize_field("fault", fault_word(kind))?;
            }
            EventBody::PermitExceedance {
                release_m3s,
                permit_m3s,
                reason,
            } => {
                m.serialize_field("release_ml_s", &scaled(release_m3s, MILLI))?;
                m.serialize_field("permit_ml_s", &scaled(permit_m3s, MILLI))?;
                m.serialize_field("reason", exceed_word(reason))?;
            }
            EventBody::Alarm { kind, value } => {
                m.serialize_field("alarm", alarm_word(kind))?;
                m.serialize_field("value_milli", &scaled(value, MILLI))?;
            }
            EventBody::Sample {
                stage_m,
                storage_m3,
                release_m3s,
                opening,
                mode,
                health,
            } => {
                m.serialize_field("stage_mm", &scaled(stage_m, MILLI))?;
                m.serialize_field("storage_l", &scaled(storage_m3, MILLI))?;
                m.serialize_field("release_ml_s", &scaled(release_m3s, MILLI))?;
                m.serialize_field("opening_permille", &scaled(opening, MILLI))?;
                m.serialize_field("mode", mode_word(mode))?;
                m.serialize_field("health", &health.0)?;
            }
            EventBody::CommandRejected { command, value } => {
                m.serialize_field("command", &command)?;
                m.serialize_field("value_milli", &scaled(value, MILLI))?;
            }
            EventBody::RemoteCommand {
                counter,
                kind,
                outcome,
            } => {
                m.serialize_field("counter", &counter)?;
                m.serialize_field("command", &kind)?;
                m.serialize_field("outcome", outcome_word(outcome))?;
            }
            EventBody::RainTotal { window_s, depth_mm } => {
                m.serialize_field("window_s", &window_s)?;
                m.serialize_field("depth_um", &scaled(depth_mm, MILLI))?;
            }
        }
        m.end()
    }
}

/// The word for an event kind (`"mode_change"`, `"sample"`…).
pub fn event_word(body: &EventBody) -> &'static str {
    match body {
        EventBody::ModeChange { .. } => "mode_change",
        EventBody::Decision { .. } => "decision",
        EventBody::FaultRaised { .. } => "fault_raised",
        EventBody::FaultCleared { .. } => "fault_cleared",
        EventBody::PermitExceedance { .. } => "permit_exceedance",
        EventBody::Alarm { .. } => "alarm",
        EventBody::Sample { .. } => "sample",
        EventBody::CommandRejected { .. } => "command_rejected",
        EventBody::RemoteCommand { .. } => "remote_command",
        EventBody::RainTotal { .. } => "rain_total",
    }
}

/// Name for a code this firmware was built without (a newer core).
const UNKNOWN: &str = "unknown";

/// The lower-case word for a controller mode (`"standby"`, `"capture"`…).
pub fn mode_word(mode: ModeCode) -> &'static str {
    match mode {
        ModeCode::Standby => "standby",
        ModeCode::Capture => "capture",
        ModeCode::Drawdown => "drawdown",
        ModeCode::Surcharge => "surcharge",
        ModeCode::Failsafe => "failsafe",
        ModeCode::Manual => "manual",
        _ => UNKNOWN,
    }
}

/// The word for an alarm (`"high_stage"`…).
pub fn alarm_word(kind: AlarmKind) -> &'static str {
    match kind {
        AlarmKind::HighStage => "high_stage",
        AlarmKind::LowFreeboard => "low_freeboard",
        AlarmKind::SlowDrawdown => "slow_drawdown",
        AlarmKind::Overtopping => "overtopping",
        AlarmKind::LowSupply => "low_supply",
        AlarmKind::LogFull => "log_full",
        _ => UNKNOWN,
    }
}

/// The word for a fault source (`"stage_sensor"`…).
pub fn source_word(source: FaultSource) -> &'static str {
    match source {
        FaultSource::StageSensor => "stage_sensor",
        FaultSource::RainGauge => "rain_gauge",
        FaultSource::GateActuator => "gate_actuator",
        FaultSource::GatePosition => "gate_position",
        FaultSource::GateLimit => "gate_limit",
        FaultSource::Flash => "flash",
        FaultSource::Clock => "clock",
        FaultSource::Config => "config",
        _ => UNKNOWN,
    }
}

/// The word for a fault kind (`"under_range"`…).
pub fn fault_word(kind: FaultKind) -> &'static str {
    match kind {
        FaultKind::Bus => "bus",
        FaultKind::Timeout => "timeout",
        FaultKind::UnderRange => "under_range",
        FaultKind::OverRange => "over_range",
        FaultKind::Implausible => "implausible",
        FaultKind::Stall => "stall",
        FaultKind::LimitConflict => "limit_conflict",
        FaultKind::Corrupt => "corrupt",
        FaultKind::Stuck => "stuck",
        FaultKind::Spike => "spike",
        FaultKind::RateOfChange => "rate_of_change",
        FaultKind::Missing => "missing",
        FaultKind::Clogged => "clogged",
        FaultKind::Chatter => "chatter",
        FaultKind::Disagree => "disagree",
        FaultKind::DriverFault => "driver_fault",
        _ => UNKNOWN,
    }
}

/// The word for a permit exceedance reason (`"surcharge"`…).
pub fn exceed_word(reason: ExceedReason) -> &'static str {
    match reason {
        ExceedReason::Surcharge => "surcharge",
        ExceedReason::GateUnable => "gate_unable",
        ExceedReason::Uncontrolled => "uncontrolled",
        ExceedReason::Manual => "manual",
        ExceedReason::Failsafe => "failsafe",
        _ => UNKNOWN,
    }
}

/// The word for a remote command outcome (`"accepted"`, `"bad_tag"`…).
pub fn outcome_word(outcome: CommandOutcome) -> &'static str {
    match outcome {
        CommandOutcome::Accepted => "accepted",
        CommandOutcome::Malformed => "malformed",
        CommandOutcome::UnknownVersion => "unknown_version",
        CommandOutcome::WrongDevice => "wrong_device",
        CommandOutcome::BadTag => "bad_tag",
        CommandOutcome::Replay => "replay",
        CommandOutcome::UnknownKind => "unknown_kind",
        CommandOutcome::BadLength => "bad_length",
        CommandOutcome::BadOpening => "bad_opening",
        CommandOutcome::BadDuration => "bad_duration",
        CommandOutcome::ModeNotAllowed => "mode_not_allowed",
        CommandOutcome::BadChunk => "bad_chunk",
        _ => UNKNOWN,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scaled_rounds_half_away_and_maps_non_finite_to_none() {
        assert_eq!(scaled(1.2344, 1000.0), Some(1234));
        assert_eq!(scaled(1.2346, 1000.0), Some(1235));
        assert_eq!(scaled(-0.0015, 1000.0), Some(-2));
        assert_eq!(scaled(0.0, 1000.0), Some(0));
        assert_eq!(scaled(f32::NAN, 1000.0), None);
        assert_eq!(scaled(f32::INFINITY, 1000.0), None);
        assert_eq!(scaled(1.0e30, 1000.0), Some(i32::MAX));
        assert_eq!(scaled(-1.0e30, 1000.0), Some(i32::MIN));
    }

    #[test]
    fn alarm_set_holds_each_kind() {
        let mut set = AlarmSet::EMPTY;
        for k in AlarmKind::ALL {
            assert!(!set.contains(*k));
            set.insert(*k);
            assert!(set.contains(*k));
        }
        assert_eq!(set.iter().count(), AlarmKind::ALL.len());
        set.remove(AlarmKind::HighStage);
        assert!(!set.contains(AlarmKind::HighStage));
    }
}
