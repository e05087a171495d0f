//! Event log records and their wire format.
//!
//! Every decision, mode change, fault and periodic sample the device makes becomes one
//! [`EventRecord`]: a sequence number, a time stamp (integer seconds since boot, `u32`) and a
//! [`EventBody`]. The firmware writes them to flash and the desktop tool reads them back, so
//! the encoding is a stable, versioned contract.
//!
//! ## Frame
//!
//! ```text
//! [version u8][len u8][payload: len bytes, postcard][crc32 u32 little-endian]
//! ```
//!
//! - `version` is [`FORMAT_VERSION`]. A frame with another version is refused with
//!   [`DecodeError::UnknownVersion`] (a later reader may choose to understand it).
//! - `payload` is the record in postcard 1.x (serde), positional: fields in declaration order,
//!   enum variants as a varint index in declaration order, `u32` as varints, `f32` as 4
//!   little-endian bytes.
//! - `crc32` is CRC-32/ISO-HDLC (the common "CRC-32": reflected polynomial 0xEDB88320, init
//!   and xor-out 0xFFFFFFFF) over `version`, `len` and `payload`.
//!
//! ## Invariants
//!
//! - **Append only.** New [`EventBody`] variants and new codes in the small code enums are
//!   only ever added at the end; existing variants never change their fields. A change that
//!   would alter an existing layout bumps [`FORMAT_VERSION`] instead.
//! - The small enums ([`ModeCode`], [`FaultSource`], [`FaultKind`], [`ExceedReason`],
//!   [`AlarmKind`], [`CommandOutcome`]) travel as their explicit `u8` code, not as a serde variant index, so the
//!   code printed in a log and the code on the wire are the same number. An unknown code is a
//!   decode error, never a guess.
//! - [`decode`] never panics on any input: every failure is a [`DecodeError`].
//! - Units: stage m, storage m³, release and permit m³/s, gate opening as a fraction of full
//!   travel in `[0, 1]`, time s.

use core::fmt;

use serde::{Deserialize, Serialize};

/// Version byte at the start of every frame.
pub const FORMAT_VERSION: u8 = 1;

/// Bytes of framing around the payload: version, length, CRC-32.
pub const FRAME_OVERHEAD: usize = 1 + 1 + 4;

/// Largest payload a frame may carry (the length byte allows up to 255; records are far
/// smaller, and a reader refuses anything larger as corrupt).
pub const MAX_PAYLOAD_LEN: usize = 64;

/// Largest encoded frame: a buffer this long always holds any record.
pub const MAX_FRAME_LEN: usize = MAX_PAYLOAD_LEN + FRAME_OVERHEAD;

macro_rules! code_enum {
    (
        $(#[$meta:meta])*
        $name:ident { $( $(#[$vmeta:meta])* $variant:ident = $code:literal ),+ $(,)? }
    ) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[serde(into = "u8", try_from = "u8")]
        #[repr(u8)]
        #[non_exhaustive]
        pub enum $name {
            $( $(#[$vmeta])* $variant = $code, )+
        }

        impl $name {
            /// Every code, in code order.
            pub const ALL: &'static [$name] = &[$($name::$variant),+];

            /// The explicit wire code.
            pub const fn code(self) -> u8 {
                self as u8
            }

            /// The value with this wire code, if there is one.
            pub const fn from_code(code: u8) -> Option<Self> {
                match code {
                    $( $code => Some($name::$variant), )+
                    _ => None,
                }
            }
        }

        impl From<$name> for u8 {
            fn from(v: $name) -> u8 {
                v.code()
            }
        }

        impl TryFrom<u8> for $name {
            type Error = UnknownCode;
            fn try_from(code: u8) -> Result<Self, UnknownCode> {
                $name::from_code(code).ok_or(UnknownCode { what: stringify!($name), code })
            }
        }
    };
}

/// A code byte that names no value of its enum (a newer writer, or corruption).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct UnknownCode {
    /// The enum that was being decoded.
    pub what: &'static str,
    /// The byte found.
    pub code: u8,
}

impl fmt::Display for UnknownCode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} code = {}: not a known code", self.what, self.code)
    }
}

impl core::error::Error for UnknownCode {}

code_enum! {
    /// Controller mode as logged. The controller maps its own mode type to these codes.
    ModeCode {
        /// Dry weather, gate at its resting opening.
        Standby = 0,
        /// A storm is coming or under way: holding water back.
        Capture = 1,
        /// After a storm: emptying the pond within the permit.
        Drawdown = 2,
        /// Stage near the freeboard limit: releasing as much as needed to avoid overtopping.
        Surcharge = 3,
        /// A fault left the controller without trusted inputs: gate to its safe opening.
        Failsafe = 4,
        /// An operator drives the gate.
        Manual = 5,
    }
}

code_enum! {
    /// Which sensor, actuator or subsystem a fault concerns.
    FaultSource {
        /// The stage sensor (transducer, ADC, current loop).
        StageSensor = 0,
        /// The tipping-bucket rain gauge.
        RainGauge = 1,
        /// The gate motor drive.
        GateActuator = 2,
        /// The gate position feedback.
        GatePosition = 3,
        /// A gate limit switch.
        GateLimit = 4,
        /// The event log flash.
        Flash = 5,
        /// The clock.
        Clock = 6,
        /// The configuration.
        Config = 7,
    }
}

code_enum! {
    /// What went wrong.
    FaultKind {
        /// Bus or I/O error talking to the device.
        Bus = 0,
        /// No answer in time (conversion not ready, move not finished).
        Timeout = 1,
        /// Reading below the valid range (e.g. current loop open).
        UnderRange = 2,
        /// Reading above the valid range.
        OverRange = 3,
        /// Value not plausible against other readings or its own history.
        Implausible = 4,
        /// Driven but not moving.
        Stall = 5,
        /// Both limit switches active, or a limit where the position says it cannot be.
        LimitConflict = 6,
        /// Stored data failed its check.
        Corrupt = 7,
        /// A reading that does not change at all while a change is expected.
        Stuck = 8,
        /// A jump that reverted within a step or two (the reading was discarded).
        Spike = 9,
        /// A change faster than the pond can physically make that did not revert.
        RateOfChange = 10,
        /// Readings missing several steps in a row.
        Missing = 11,
        /// A rain gauge that counts no rain while the pond rises.
        Clogged = 12,
        /// A rain gauge tipping faster than plausible rain.
        Chatter = 13,
        /// Position feedback disagreeing with the settled command.
        Disagree = 14,
        /// The drive itself reported a fault (timeout, stall, overcurrent).
        DriverFault = 15,
    }
}

code_enum! {
    /// Why a release went over the permitted rate.
    ExceedReason {
        /// Stage high enough that overtopping had to be avoided (surcharge).
        Surcharge = 0,
        /// The gate could not close far enough (fault, minimum opening).
        GateUnable = 1,
        /// Uncontrolled outlets alone pass more than the permit at this stage.
        Uncontrolled = 2,
        /// An operator command in manual mode.
        Manual = 3,
        /// Failsafe opening after a fault.
        Failsafe = 4,
    }
}

code_enum! {
    /// Alarms for the operator.
    AlarmKind {
        /// Stage above the high-level alarm.
        HighStage = 0,
        /// Freeboard below its minimum.
        LowFreeboard = 1,
        /// Drawdown taking longer than its limit.
        SlowDrawdown = 2,
        /// Overtopping (stage above the crest of the embankment or spillway).
        Overtopping = 3,
        /// Supply voltage low.
        LowSupply = 4,
        /// Event log is dropping records.
        LogFull = 5,
    }
}

code_enum! {
    /// What became of a remote command frame: accepted, or the one reason it was refused.
    /// The firmware's command verifier checks in code order (1 to 5 before the command's
    /// authenticity and freshness are known, 6 and up after) and reports the first failure.
    /// [`Accepted`](Self::Accepted) and every code from [`UnknownKind`](Self::UnknownKind) up
    /// mean the frame was authentic and fresh, so its counter was used up.
    CommandOutcome {
        /// Authentic, fresh and in range: handed to the controller.
        Accepted = 0,
        /// Shorter or longer than any frame can be.
        Malformed = 1,
        /// A frame version this device does not know.
        UnknownVersion = 2,
        /// Addressed to another device.
        WrongDevice = 3,
        /// The authentication tag does not match (forged or corrupted).
        BadTag = 4,
        /// Authentic, but its counter is not above the last accepted one.
        Replay = 5,
        /// Authentic, but of a kind this firmware does not know.
        UnknownKind = 6,
        /// Authentic, but its arguments are not the length its kind needs.
        BadLength = 7,
        /// Manual opening negative, not finite or above the gate's maximum.
        BadOpening = 8,
        /// Manual duration zero or above the manual limit.
        BadDuration = 9,
        /// A mode that may not be commanded remotely.
        ModeNotAllowed = 10,
        /// A configuration chunk that is empty, too long or outside the blob.
        BadChunk = 11,
    }
}

/// Sensor health flags carried by a periodic sample, one bit each; a set bit means
/// "this input is in fault". Unknown bits are kept as they are (bits are only appended).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(transparent)]
pub struct HealthFlags(pub u8);

impl HealthFlags {
    /// Stage sensor in fault.
    pub const STAGE: u8 = 1 << 0;
    /// Rain gauge in fault.
    pub const RAIN: u8 = 1 << 1;
    /// Gate actuator in fault.
    pub const GATE: u8 = 1 << 2;
    /// Gate position feedback in fault.
    pub const POSITION: u8 = 1 << 3;
    /// Event log flash in fault.
    pub const FLASH: u8 = 1 << 4;

    /// Whether every bit of `mask` is set.
    pub const fn has(self, mask: u8) -> bool {
        self.0 & mask == mask
    }
}

/// What happened. Variants are only ever appended (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EventBody {
    /// The controller changed mode.
    ModeChange {
        /// Mode before.
        from: ModeCode,
        /// Mode after.
        to: ModeCode,
        /// Why, as a controller-defined reason code.
        reason: u8,
    },
    /// The controller's decision for one step.
    Decision {
        /// Release the controller aims for, m³/s.
        target_release_m3s: f32,
        /// Gate opening commanded, fraction of full travel in `[0, 1]`.
        opening_cmd: f32,
    },
    /// A fault was detected.
    FaultRaised {
        /// Where.
        source: FaultSource,
        /// What.
        kind: FaultKind,
    },
    /// A fault went away.
    FaultCleared {
        /// Where.
        source: FaultSource,
        /// What.
        kind: FaultKind,
    },
    /// The release went over the permitted rate.
    PermitExceedance {
        /// Release at the time, m³/s.
        release_m3s: f32,
        /// Permitted release, m³/s.
        permit_m3s: f32,
        /// Why.
        reason: ExceedReason,
    },
    /// An operator alarm.
    Alarm {
        /// Which alarm.
        kind: AlarmKind,
        /// The value that raised it, in the unit of the alarm (stage m, freeboard m, time s…).
        value: f32,
    },
    /// A periodic sample of the pond's state.
    Sample {
        /// Stage, m.
        stage_m: f32,
        /// Storage, m³.
        storage_m3: f32,
        /// Total release, m³/s.
        release_m3s: f32,
        /// Gate opening measured, fraction of full travel.
        opening: f32,
        /// Controller mode.
        mode: ModeCode,
        /// Sensor health.
        health: HealthFlags,
    },
    /// An operator command was refused because a value was out of range.
    CommandRejected {
        /// Which command (controller-defined code: 0 manual opening, 1 manual duration).
        command: u8,
        /// The value refused.
        value: f32,
    },
    /// A remote command frame was received and accepted or refused.
    RemoteCommand {
        /// The frame's counter. Authenticated only when `outcome` is
        /// [`CommandOutcome::Accepted`] or from [`CommandOutcome::Replay`] on; otherwise what
        /// the unauthenticated frame claimed (0 when too short to say).
        counter: u32,
        /// The frame's command-kind byte (firmware-defined; 0 when the frame was too short).
        kind: u8,
        /// Accepted, or why not.
        outcome: CommandOutcome,
    },
    /// Rain counted by the gauge over the `window_s` seconds ending at the record's time
    /// (an interval total; the desktop review rebuilds storm depths and peak intensities
    /// from these). Appended after `RemoteCommand`: variant index 9.
    RainTotal {
        /// Length of the interval, s (> 0).
        window_s: u32,
        /// Depth counted in it, mm.
        depth_mm: f32,
    },
}

/// One log record: sequence number, time and what happened.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EventRecord {
    /// Sequence number, one more for every record written (wraps at `u32::MAX`).
    pub seq: u32,
    /// Seconds since boot (or since the clock epoch the device uses).
    pub time_s: u32,
    /// What happened.
    pub body: EventBody,
}

/// Why a record could not be encoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum EncodeError {
    /// The output buffer is shorter than the frame (give [`MAX_FRAME_LEN`] bytes).
    BufferTooSmall {
        /// Length of the buffer given.
        len: usize,
    },
    /// The payload came out longer than [`MAX_PAYLOAD_LEN`] (a broken invariant of this
    /// module: every record fits).
    PayloadTooLong,
}

impl fmt::Display for EncodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::BufferTooSmall { len } => {
                write!(f, "buffer len = {len}: must be >= {MAX_FRAME_LEN}")
            }
            Self::PayloadTooLong => write!(f, "payload longer than {MAX_PAYLOAD_LEN} bytes"),
        }
    }
}

impl core::error::Error for EncodeError {}

/// Why bytes are not a valid frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum DecodeError {
    /// Fewer bytes than the frame needs.
    Truncated {
        /// Bytes the frame needs.
        needed: usize,
        /// Bytes available.
        got: usize,
    },
    /// A version byte this reader does not know.
    UnknownVersion(u8),
    /// The length byte is over [`MAX_PAYLOAD_LEN`].
    LengthTooLong(u8),
    /// The CRC does not match.
    CrcMismatch {
        /// CRC stored in the frame.
        stored: u32,
        /// CRC computed over the frame.
        computed: u32,
    },
    /// The CRC matched but the payload is not a valid record (unknown variant or code,
    /// truncated field).
    BadPayload,
    /// The payload decoded but left bytes unused.
    TrailingPayload {
        /// Bytes left over.
        extra: usize,
    },
}

impl fmt::Display for DecodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Truncated { needed, got } => {
                write!(f, "frame truncated: needs {needed} bytes, got {got}")
            }
            Self::UnknownVersion(v) => write!(f, "version = {v}: must be {FORMAT_VERSION}"),
            Self::LengthTooLong(l) => write!(f, "len = {l}: must be <= {MAX_PAYLOAD_LEN}"),
            Self::CrcMismatch { stored, computed } => {
                write!(f, "crc = {stored:#010x}: computed {computed:#010x}")
            }
            Self::BadPayload => write!(f, "payload is not a valid record"),
            Self::TrailingPayload { extra } => {
                write!(f, "payload has {extra} unused bytes")
            }
        }
    }
}

impl core::error::Error for DecodeError {}

/// CRC-32/ISO-HDLC (reflected poly 0xEDB88320, init 0xFFFFFFFF, xor-out 0xFFFFFFFF), bitwise.
///
/// Small and table-free: a frame is under 80 bytes, so speed does not matter here.
pub fn crc32(data: &[u8]) -> u32 {
    let mut crc: u32 = 0xFFFF_FFFF;
    for &byte in data {
        crc ^= u32::from(byte);
        for _ in 0..8 {
            let mask = 0u32.wrapping_sub(crc & 1);
            crc = (crc >> 1) ^ (0xEDB8_8320 & mask);
        }
    }
    !crc
}

/// Encode `record` as one frame at the start of `buf`; returns the frame length.
pub fn encode(record: &EventRecord, buf: &mut [u8]) -> Result<usize, EncodeError> {
    let len = buf.len();
    let (head, rest) = buf
        .split_at_mut_checked(2)
        .ok_or(EncodeError::BufferTooSmall { len })?;
    let payload_len = {
        let room = rest.len().min(MAX_PAYLOAD_LEN);
        let out = rest
            .get_mut(..room)
            .ok_or(EncodeError::BufferTooSmall { len })?;
        match postcard::to_slice(record, out) {
            Ok(used) => used.len(),
            Err(_) if room < MAX_PAYLOAD_LEN => return Err(EncodeError::BufferTooSmall { len }),
            Err(_) => return Err(EncodeError::PayloadTooLong),
        }
    };
    let len_byte = u8::try_from(payload_len).map_err(|_| EncodeError::PayloadTooLong)?;
    if let [v, l] = head {
        *v = FORMAT_VERSION;
        *l = len_byte;
    }
    let body_len = payload_len.saturating_add(2);
    let crc = crc32(
        buf.get(..body_len)
            .ok_or(EncodeError::BufferTooSmall { len })?,
    );
    let frame_len = body_len.saturating_add(4);
    buf.get_mut(body_len..frame_len)
        .ok_or(EncodeError::BufferTooSmall { len })?
        .copy_from_slice(&crc.to_le_bytes());
    Ok(frame_len)
}

/// Decode the frame at the start of `bytes`. Returns the record and the frame's length (the
/// bytes after it are not looked at). Never panics.
pub fn decode(bytes: &[u8]) -> Result<(EventRecord, usize), DecodeError> {
    let got = bytes.len();
    let (&version, &len_byte) = match bytes {
        [v, l, ..] => (v, l),
        _ => {
            return Err(DecodeError::Truncated {
                needed: FRAME_OVERHEAD,
                got,
            });
        }
    };
    if version != FORMAT_VERSION {
        return Err(DecodeError::UnknownVersion(version));
    }
    let payload_len = usize::from(len_byte);
    if payload_len > MAX_PAYLOAD_LEN {
        return Err(DecodeError::LengthTooLong(len_byte));
    }
    let body_len = payload_len.saturating_add(2);
    let frame_len = body_len.saturating_add(4);
    let frame = bytes.get(..frame_len).ok_or(DecodeError::Truncated {
        needed: frame_len,
        got,
    })?;
    let (body, crc_bytes) = frame
        .split_at_checked(body_len)
        .ok_or(DecodeError::Truncated {
            needed: frame_len,
            got,
        })?;
    let stored = match crc_bytes {
        [a, b, c, d] => u32::from_le_bytes([*a, *b, *c, *d]),
        _ => {
            return Err(DecodeError::Truncated {
                needed: frame_len,
                got,
            });
        }
    };
    let computed = crc32(body);
    if stored != computed {
        return Err(DecodeError::CrcMismatch { stored, computed });
    }
    let payload = body.get(2..).ok_or(DecodeError::BadPayload)?;
    let (record, rest) =
        postcard::take_from_bytes::<EventRecord>(payload).map_err(|_| DecodeError::BadPayload)?;
    if !rest.is_empty() {
        return Err(DecodeError::TrailingPayload { extra: rest.len() });
    }
    Ok((record, frame_len))
}

/// Decode a buffer that must hold exactly one frame and nothing else.
pub fn decode_exact(bytes: &[u8]) -> Result<EventRecord, DecodeError> {
    let (record, used) = decode(bytes)?;
    if used == bytes.len() {
        Ok(record)
    } else {
        Err(DecodeError::TrailingPayload {
            extra: bytes.len().saturating_sub(used),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn all_bodies() -> [EventBody; 9] {
        [
            EventBody::ModeChange {
                from: ModeCode::Standby,
                to: ModeCode::Capture,
                reason: 3,
            },
            EventBody::Decision {
                target_release_m3s: 0.25,
                opening_cmd: 0.5,
            },
            EventBody::FaultRaised {
                source: FaultSource::StageSensor,
                kind: FaultKind::UnderRange,
            },
            EventBody::FaultCleared {
                source: FaultSource::GateActuator,
                kind: FaultKind::Stall,
            },
            EventBody::PermitExceedance {
                release_m3s: 1.5,
                permit_m3s: 1.0,
                reason: ExceedReason::Surcharge,
            },
            EventBody::Alarm {
                kind: AlarmKind::HighStage,
                value: 2.0,
            },
            EventBody::Sample {
                stage_m: 1.0,
                storage_m3: 1000.0,
                release_m3s: 0.125,
                opening: 0.75,
                mode: ModeCode::Drawdown,
                health: HealthFlags(HealthFlags::RAIN),
            },
            EventBody::CommandRejected {
                command: 1,
                value: 0.0,
            },
            EventBody::RemoteCommand {
                counter: 70_000,
                kind: 1,
                outcome: CommandOutcome::Replay,
            },
        ]
    }

    /// CRC-32/ISO-HDLC check value for "123456789" is 0xCBF43926 (Greg Cook's "Catalogue of
    /// parametrised CRC algorithms", entry CRC-32/ISO-HDLC; also the zlib/PNG CRC).
    #[test]
    fn crc32_matches_catalogue_check_value() {
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
        assert_eq!(crc32(b""), 0);
    }

    /// Golden bytes: the wire format of every variant is pinned, so a change to field order,
    /// variant order or codes fails here. Bytes follow the postcard 1.x wire spec (varint u32,
    /// varint variant index, f32 little-endian), worked out by hand for the first record.
    #[test]
    fn golden_bytes_mode_change() {
        let rec = EventRecord {
            seq: 300,
            time_s: 5,
            body: EventBody::ModeChange {
                from: ModeCode::Standby,
                to: ModeCode::Surcharge,
                reason: 7,
            },
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&rec, &mut buf).unwrap();
        // payload: seq 300 = varint [0xAC, 0x02]; time 5 = [0x05]; variant 0 = [0x00];
        // from = 0, to = 3 (u8 is one raw byte in postcard); reason = 7.
        let payload = [0xAC, 0x02, 0x05, 0x00, 0x00, 0x03, 0x07];
        assert_eq!(&buf[..2], &[FORMAT_VERSION, payload.len() as u8]);
        assert_eq!(&buf[2..2 + payload.len()], &payload);
        let crc = crc32(&buf[..2 + payload.len()]);
        assert_eq!(&buf[2 + payload.len()..n], &crc.to_le_bytes());
        assert_eq!(n, payload.len() + FRAME_OVERHEAD);
    }

    #[test]
    fn golden_bytes_sample() {
        let rec = EventRecord {
            seq: 1,
            time_s: 60,
            body: EventBody::Sample {
                stage_m: 1.0,
                storage_m3: 2.0,
                release_m3s: 0.5,
                opening: 0.0,
                mode: ModeCode::Capture,
                health: HealthFlags(0b1_0001),
            },
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&rec, &mut buf).unwrap();
        // f32 LE (IEEE 754 binary32): 1.0 = 0x3F800000, 2.0 = 0x40000000, 0.5 = 0x3F000000.
        let payload = [
            0x01, 0x3C, 0x06, // seq, time, variant 6
            0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x00, 0x40, 0x00, 0x00, 0x00, 0x3F, 0x00, 0x00,
            0x00, 0x00, // four f32
            0x01, 0x11, // mode Capture, health
        ];
        assert_eq!(&buf[2..n - 4], &payload);
        assert_eq!(buf[1] as usize, payload.len());
    }

    /// Golden bytes of the appended remote-command record (postcard 1.x wire spec: varint
    /// u32, varint variant index, `u8` raw), worked out by hand.
    #[test]
    fn golden_bytes_remote_command() {
        let rec = EventRecord {
            seq: 2,
            time_s: 200,
            body: EventBody::RemoteCommand {
                counter: 70_000,
                kind: 4,
                outcome: CommandOutcome::BadTag,
            },
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&rec, &mut buf).unwrap();
        // seq 2 = [0x02]; time 200 = varint [0xC8, 0x01]; variant 8 = [0x08];
        // counter 70 000 = 0x11170 = varint [0xF0, 0xA2, 0x04]; kind 4; outcome BadTag = 4.
        let payload = [0x02, 0xC8, 0x01, 0x08, 0xF0, 0xA2, 0x04, 0x04, 0x04];
        assert_eq!(&buf[2..n - 4], &payload);
        assert_eq!(decode_exact(&buf[..n]), Ok(rec));
        assert_eq!(CommandOutcome::BadChunk.code(), 11);
        assert_eq!(CommandOutcome::from_code(12), None);
    }

    #[test]
    fn every_variant_round_trips_and_fits() {
        for (i, body) in all_bodies().into_iter().enumerate() {
            let rec = EventRecord {
                seq: u32::MAX - i as u32,
                time_s: u32::MAX,
                body,
            };
            let mut buf = [0u8; MAX_FRAME_LEN];
            let n = encode(&rec, &mut buf).unwrap();
            assert!(n <= MAX_FRAME_LEN);
            assert_eq!(decode_exact(&buf[..n]), Ok(rec));
            let mut longer = buf;
            longer[n..].fill(0xFF);
            assert_eq!(decode(&longer), Ok((rec, n)));
        }
    }

    #[test]
    fn variant_indices_are_append_only() {
        // The postcard variant index is the byte after seq and time (both one byte here).
        let expected = [0u8, 1, 2, 3, 4, 5, 6, 7, 8];
        for (body, idx) in all_bodies().into_iter().zip(expected) {
            let mut buf = [0u8; MAX_FRAME_LEN];
            encode(
                &EventRecord {
                    seq: 0,
                    time_s: 0,
                    body,
                },
                &mut buf,
            )
            .unwrap();
            assert_eq!(buf[4], idx, "{body:?}");
        }
    }

    /// The appended `RainTotal` variant takes index 9 (after `CommandRejected` 7 and `RemoteCommand` 8) and leaves every earlier layout as
    /// pinned above. Bytes by the postcard 1.x wire spec: seq 2, time 300 = varint
    /// [0xAC, 0x02], variant 9, window 300 = [0xAC, 0x02], 1.5 f32 LE = 0x3FC00000.
    #[test]
    fn golden_bytes_rain_total() {
        let rec = EventRecord {
            seq: 2,
            time_s: 300,
            body: EventBody::RainTotal {
                window_s: 300,
                depth_mm: 1.5,
            },
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&rec, &mut buf).unwrap();
        let payload = [0x02, 0xAC, 0x02, 0x09, 0xAC, 0x02, 0x00, 0x00, 0xC0, 0x3F];
        assert_eq!(&buf[2..n - 4], &payload);
        assert_eq!(decode_exact(&buf[..n]), Ok(rec));
    }

    #[test]
    fn codes_are_explicit_and_dense() {
        assert_eq!(ModeCode::Standby.code(), 0);
        assert_eq!(ModeCode::Manual.code(), 5);
        for (i, m) in ModeCode::ALL.iter().enumerate() {
            assert_eq!(m.code() as usize, i);
            assert_eq!(ModeCode::from_code(m.code()), Some(*m));
        }
        assert_eq!(ModeCode::from_code(6), None);
        assert_eq!(
            FaultKind::from_code(FaultKind::Corrupt.code()),
            Some(FaultKind::Corrupt)
        );
    }

    #[test]
    fn every_single_bit_flip_is_refused() {
        let rec = EventRecord {
            seq: 9,
            time_s: 99,
            body: all_bodies()[6],
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&rec, &mut buf).unwrap();
        for byte in 0..n {
            for bit in 0..8 {
                let mut b = buf;
                b[byte] ^= 1 << bit;
                assert!(decode(&b[..n]).is_err(), "flip byte {byte} bit {bit}");
            }
        }
    }

    #[test]
    fn typed_errors() {
        assert_eq!(
            decode(&[]),
            Err(DecodeError::Truncated {
                needed: FRAME_OVERHEAD,
                got: 0
            })
        );
        assert_eq!(
            decode(&[2, 0, 0, 0, 0, 0]),
            Err(DecodeError::UnknownVersion(2))
        );
        assert_eq!(decode(&[1, 200]), Err(DecodeError::LengthTooLong(200)));
        assert_eq!(
            decode(&[1, 3, 0]),
            Err(DecodeError::Truncated { needed: 9, got: 3 })
        );
        // Valid CRC over a payload with an unknown mode code (9).
        let mut f = [1u8, 7, 0, 0, 0, 0, 9, 0, 0, 0, 0, 0, 0];
        let crc = crc32(&f[..9]);
        f[9..].copy_from_slice(&crc.to_le_bytes());
        assert_eq!(decode(&f), Err(DecodeError::BadPayload));
        let mut small = [0u8; 4];
        assert!(matches!(
            encode(
                &EventRecord {
                    seq: 0,
                    time_s: 0,
                    body: all_bodies()[0]
                },
                &mut small
            ),
            Err(EncodeError::BufferTooSmall { len: 4 })
        ));
    }

    mod props {
        use super::super::*;
        use proptest::prelude::*;

        fn body() -> impl Strategy<Value = EventBody> {
            let mode = (0u8..6).prop_map(|c| ModeCode::from_code(c).unwrap());
            prop_oneof![
                (mode.clone(), mode.clone(), any::<u8>())
                    .prop_map(|(from, to, reason)| EventBody::ModeChange { from, to, reason }),
                (any::<f32>(), any::<f32>()).prop_map(|(t, o)| EventBody::Decision {
                    target_release_m3s: t,
                    opening_cmd: o
                }),
                (
                    any::<f32>(),
                    any::<f32>(),
                    any::<f32>(),
                    any::<f32>(),
                    mode,
                    any::<u8>()
                )
                    .prop_map(|(s, v, r, o, mode, h)| EventBody::Sample {
                        stage_m: s,
                        storage_m3: v,
                        release_m3s: r,
                        opening: o,
                        mode,
                        health: HealthFlags(h)
                    }),
            ]
        }

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(256))]
            /// Encode → decode → encode gives the same bytes (bytes, not floats: NaN != NaN).
            #[test]
            fn round_trip_bytes(seq: u32, time_s: u32, body in body()) {
                let rec = EventRecord { seq, time_s, body };
                let mut a = [0u8; MAX_FRAME_LEN];
                let n = encode(&rec, &mut a).unwrap();
                let back = decode_exact(&a[..n]).unwrap();
                let mut b = [0u8; MAX_FRAME_LEN];
                let m = encode(&back, &mut b).unwrap();
                prop_assert_eq!(&a[..n], &b[..m]);
            }

            /// Arbitrary bytes never panic the decoder.
            #[test]
            fn decode_total(bytes in proptest::collection::vec(any::<u8>(), 0..90)) {
                if let Ok((_, used)) = decode(&bytes) {
                    prop_assert!(used >= FRAME_OVERHEAD && used <= bytes.len());
                }
            }
        }
    }
}
