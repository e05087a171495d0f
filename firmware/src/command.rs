//! Authenticated remote commands: the binary frame, its verifier and the host-side signer.
//!
//! ## Frame (version 1)
//!
//! ```text
//! offset  len  field
//!      0    1  version      = FRAME_VERSION (1)
//!      1    4  device_id    u32 little-endian
//!      5    4  counter      u32 little-endian, > the last counter this device accepted
//!      9    1  kind         command kind code (table below)
//!     10    n  args         kind-specific, little-endian
//!   10+n   32  tag          HMAC-SHA256(device key, bytes 0 .. 10+n), full length
//! ```
//!
//! The frame's length comes from the transport (one datagram, one frame). Frames are
//! [`MIN_FRAME_LEN`] (42) to [`MAX_FRAME_LEN`] (114) bytes.
//!
//! | kind | code | args | n |
//! |---|---|---|---|
//! | `Manual` | 1 | `opening_m` f32, `for_s` u32 | 8 |
//! | `Resume` | 2 | — | 0 |
//! | `AcknowledgeAlarms` | 3 | — | 0 |
//! | `SetMode` | 4 | `mode` u8 ([`ModeCode`] code; only `drawdown` 2, `failsafe` 4) | 1 |
//! | `UpdateConfig` | 5 | `offset` u32, `total_len` u32, chunk bytes | 9..=72 |
//!
//! Code 0 is never a kind.
//!
//! ## Checks, in order
//!
//! 1. length within [`MIN_FRAME_LEN`]`..=`[`MAX_FRAME_LEN`] → else `Malformed`;
//! 2. version → `UnknownVersion`; 3. device id → `WrongDevice`;
//! 4. tag, compared in constant time (`hmac`'s `verify_slice`) → `BadTag`;
//! 5. counter > [`Verifier::last_counter`] → else `Replay`;
//! 6. from here the frame is authentic and fresh: its counter is **used up** whatever
//!    follows, so a refused command can never be replayed later (e.g. after the limits change);
//! 7. kind → `UnknownKind`; args length → `BadLength`; args in range (`BadOpening`,
//!    `BadDuration`, `ModeNotAllowed`, `BadChunk`) against the caller's [`Limits`].
//!
//! Each refusal is a distinct [`Reject`], and [`Rejected::event_body`] /
//! [`Accepted::event_body`] give the [`EventBody::RemoteCommand`] record the main loop logs.
//!
//! ## Counter persistence
//!
//! The verifier's only state is the last used counter (`u32`). The main loop logs the
//! `RemoteCommand` record **before** acting on a command, and at start-up calls
//! [`Verifier::restore`] with the newest counter found in a record whose outcome
//! [`consumes_counter`]. A device that has used counter `u32::MAX` accepts no more commands
//! until it is given a new key (and the verifier is started afresh).
//!
//! ## What cannot be commanded
//!
//! No command kind disables or overrides overtopping protection: the controller's surcharge
//! response (releasing what is needed to keep the stage below the crest) stays above every
//! remote command, including `Manual`, and `SetMode` cannot select `surcharge`, `standby`,
//! `capture` or `manual`. Only `drawdown` (empty within the permit) and `failsafe` (the
//! commissioned safe opening) may be set remotely.
//!
//! Invariants: [`Verifier::verify`] never panics on any input and never accepts a frame
//! without a tag made with the device key; no heap.

use core::fmt;

use hmac::{Hmac, KeyInit, Mac};
use holdback_core::config::PondConfig;
use holdback_core::control::Command;
use holdback_core::event::{CommandOutcome, EventBody, ModeCode};
use sha2::Sha256;

type HmacSha256 = Hmac<Sha256>;

/// The frame version this firmware reads and writes.
pub const FRAME_VERSION: u8 = 1;
/// Bytes before the arguments: version, device id, counter, kind.
pub const HEADER_LEN: usize = 1 + 4 + 4 + 1;
/// Length of the authentication tag (full HMAC-SHA256 output).
pub const TAG_LEN: usize = 32;
/// Recommended device key length: 32 random bytes, the HMAC-SHA256 output length
/// (RFC 2104 §3: keys shorter than the output length are discouraged).
pub const KEY_LEN: usize = 32;
/// Longest configuration chunk one frame carries.
pub const MAX_CHUNK_LEN: usize = 64;
/// Bytes of `UpdateConfig` arguments before the chunk: offset, total length.
pub const CHUNK_HEADER_LEN: usize = 4 + 4;
/// Shortest frame (a kind without arguments).
pub const MIN_FRAME_LEN: usize = HEADER_LEN + TAG_LEN;
/// Longest frame (an `UpdateConfig` with a full chunk).
pub const MAX_FRAME_LEN: usize = HEADER_LEN + CHUNK_HEADER_LEN + MAX_CHUNK_LEN + TAG_LEN;

/// Command kind codes (the `kind` byte).
pub mod kind {
    /// `Manual { opening_m, for_s }`.
    pub const MANUAL: u8 = 1;
    /// `Resume`.
    pub const RESUME: u8 = 2;
    /// `AcknowledgeAlarms`.
    pub const ACKNOWLEDGE_ALARMS: u8 = 3;
    /// `SetMode(mode)`.
    pub const SET_MODE: u8 = 4;
    /// `UpdateConfig(chunk)`.
    pub const UPDATE_CONFIG: u8 = 5;
}

/// A mode an operator may set remotely (see the module doc for why only these).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SafeMode {
    /// Empty the pond within the permit now.
    Drawdown,
    /// Go to the commissioned safe opening.
    Failsafe,
}

impl SafeMode {
    /// The logged mode this is.
    pub const fn mode(self) -> ModeCode {
        match self {
            SafeMode::Drawdown => ModeCode::Drawdown,
            SafeMode::Failsafe => ModeCode::Failsafe,
        }
    }

    /// The safe mode with this [`ModeCode`] code, if it may be set remotely.
    pub fn from_code(code: u8) -> Option<SafeMode> {
        match ModeCode::from_code(code)? {
            ModeCode::Drawdown => Some(SafeMode::Drawdown),
            ModeCode::Failsafe => Some(SafeMode::Failsafe),
            _ => None,
        }
    }
}

/// One chunk of a new packed configuration blob, borrowed from the frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConfigChunk<'a> {
    /// Where the chunk goes in the blob, bytes.
    pub offset: u32,
    /// Length of the whole blob, bytes.
    pub total_len: u32,
    /// The chunk (1 to [`MAX_CHUNK_LEN`] bytes; `offset + len <= total_len`).
    pub bytes: &'a [u8],
}

/// A verified remote command, as the main loop hands it on.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RemoteCommand<'a> {
    /// Drive the gate to `opening_m` (m) for `for_s` seconds, then return to automatic.
    Manual {
        /// Gate opening, m, in `[0, Limits::max_opening_m]`.
        opening_m: f32,
        /// How long, s, in `1..=Limits::manual_max_s`.
        for_s: u32,
    },
    /// End a manual override or a set mode: back to automatic control.
    Resume,
    /// Acknowledge the active alarms.
    AcknowledgeAlarms,
    /// Set one of the remotely settable modes.
    SetMode(SafeMode),
    /// A chunk of a new packed configuration; the main loop stages it and switches only to a
    /// whole blob that validates.
    UpdateConfig(ConfigChunk<'a>),
}

impl RemoteCommand<'_> {
    /// The kind code of this command.
    pub const fn kind(&self) -> u8 {
        match self {
            RemoteCommand::Manual { .. } => kind::MANUAL,
            RemoteCommand::Resume => kind::RESUME,
            RemoteCommand::AcknowledgeAlarms => kind::ACKNOWLEDGE_ALARMS,
            RemoteCommand::SetMode(_) => kind::SET_MODE,
            RemoteCommand::UpdateConfig(_) => kind::UPDATE_CONFIG,
        }
    }
}

/// What the main loop does with each command; it connects these to the controller's inputs
/// (`Manual`, `Resume`, `AcknowledgeAlarms`) and to its configuration staging.
pub trait CommandSink {
    /// Drive the gate by hand.
    fn manual(&mut self, opening_m: f32, for_s: u32);
    /// Back to automatic control.
    fn resume(&mut self);
    /// Acknowledge the active alarms.
    fn acknowledge_alarms(&mut self);
    /// Set a remotely settable mode.
    fn set_mode(&mut self, mode: SafeMode);
    /// Stage a chunk of a new configuration.
    fn config_chunk(&mut self, chunk: &ConfigChunk<'_>);
}

/// The controller input for `command`: `Manual`, `Resume` and `AcknowledgeAlarms` map to the
/// [`Command`] of the same name (the controller checks the bounds again); `SetMode` and
/// `UpdateConfig` are the main loop's to handle and give `None`.
pub fn control_command(command: &RemoteCommand<'_>) -> Option<Command> {
    match command {
        RemoteCommand::Manual { opening_m, for_s } => Some(Command::Manual {
            opening_m: *opening_m,
            for_s: *for_s,
        }),
        RemoteCommand::Resume => Some(Command::Resume),
        RemoteCommand::AcknowledgeAlarms => Some(Command::AcknowledgeAlarms),
        RemoteCommand::SetMode(_) | RemoteCommand::UpdateConfig(_) => None,
    }
}

/// Hand `command` to the matching method of `sink`.
pub fn dispatch<S: CommandSink + ?Sized>(command: &RemoteCommand<'_>, sink: &mut S) {
    match command {
        RemoteCommand::Manual { opening_m, for_s } => sink.manual(*opening_m, *for_s),
        RemoteCommand::Resume => sink.resume(),
        RemoteCommand::AcknowledgeAlarms => sink.acknowledge_alarms(),
        RemoteCommand::SetMode(mode) => sink.set_mode(*mode),
        RemoteCommand::UpdateConfig(chunk) => sink.config_chunk(chunk),
    }
}

/// Error building a [`Verifier`] or [`Limits`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CommandError {
    /// The device key is empty.
    EmptyKey,
    /// A limit broke its rule.
    Limit {
        /// Which limit.
        field: &'static str,
        /// Its value.
        value: f32,
        /// The rule.
        rule: &'static str,
    },
    /// The output buffer is shorter than the frame.
    BufferTooSmall {
        /// Length of the buffer given.
        len: usize,
        /// Bytes the frame needs.
        needed: usize,
    },
    /// The command cannot be encoded (a chunk empty or over [`MAX_CHUNK_LEN`]).
    Unencodable,
}

impl fmt::Display for CommandError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::EmptyKey => f.write_str("key len = 0: must be > 0 (use 32 random bytes)"),
            Self::Limit { field, value, rule } => write!(f, "{field} = {value}: {rule}"),
            Self::BufferTooSmall { len, needed } => {
                write!(f, "buffer len = {len}: must be >= {needed}")
            }
            Self::Unencodable => write!(f, "chunk must be 1 to {MAX_CHUNK_LEN} bytes"),
        }
    }
}

impl core::error::Error for CommandError {}

/// Bounds for command arguments, given by the caller (usually from the pond config).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Limits {
    max_opening_m: f32,
    manual_max_s: u32,
    max_config_len: u32,
}

impl Limits {
    /// Manual openings in `[0, max_opening_m]` m, manual durations in `1..=manual_max_s` s,
    /// configuration blobs up to `max_config_len` bytes.
    pub fn new(
        max_opening_m: f32,
        manual_max_s: u32,
        max_config_len: u32,
    ) -> Result<Limits, CommandError> {
        if !(max_opening_m.is_finite() && max_opening_m > 0.0) {
            return Err(CommandError::Limit {
                field: "max_opening_m",
                value: max_opening_m,
                rule: "must be finite and > 0",
            });
        }
        if manual_max_s == 0 {
            return Err(CommandError::Limit {
                field: "manual_max_s",
                value: 0.0,
                rule: "must be > 0 s",
            });
        }
        Ok(Limits {
            max_opening_m,
            manual_max_s,
            max_config_len,
        })
    }

    /// The limits of `config`: the gate's maximum opening and the manual override limit.
    pub fn from_config(config: &PondConfig, max_config_len: u32) -> Result<Limits, CommandError> {
        let max_opening_m = config
            .outlet()
            .gate()
            .map_or(f32::NAN, |g| g.max_opening_m());
        Limits::new(max_opening_m, config.control().manual_max_s, max_config_len)
    }

    /// Largest manual opening, m.
    pub fn max_opening_m(&self) -> f32 {
        self.max_opening_m
    }
    /// Longest manual override, s.
    pub fn manual_max_s(&self) -> u32 {
        self.manual_max_s
    }
    /// Largest configuration blob, bytes.
    pub fn max_config_len(&self) -> u32 {
        self.max_config_len
    }
}

/// Why a frame was refused. Each maps to one [`CommandOutcome`] code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Reject {
    /// Shorter than [`MIN_FRAME_LEN`] or longer than [`MAX_FRAME_LEN`].
    Malformed {
        /// The frame's length.
        len: usize,
    },
    /// A version other than [`FRAME_VERSION`].
    UnknownVersion(u8),
    /// Addressed to this device id.
    WrongDevice(u32),
    /// The tag does not match.
    BadTag,
    /// The counter is not above the last used one.
    Replay {
        /// The frame's counter.
        counter: u32,
        /// The last used counter.
        last: u32,
    },
    /// A kind code this firmware does not know.
    UnknownKind(u8),
    /// Arguments not the length the kind needs.
    BadLength {
        /// The kind code.
        kind: u8,
        /// Argument bytes found.
        len: usize,
    },
    /// Manual opening negative, not finite or above the limit (the f32's bits).
    BadOpening(u32),
    /// Manual duration zero or above the limit, s.
    BadDuration(u32),
    /// A mode code that may not be set remotely.
    ModeNotAllowed(u8),
    /// A chunk empty, over [`MAX_CHUNK_LEN`], outside its blob, or a blob over the limit.
    BadChunk {
        /// Where the chunk goes.
        offset: u32,
        /// Chunk length.
        len: usize,
        /// Blob length claimed.
        total_len: u32,
    },
}

impl Reject {
    /// The log code for this refusal.
    pub const fn outcome(&self) -> CommandOutcome {
        match self {
            Reject::Malformed { .. } => CommandOutcome::Malformed,
            Reject::UnknownVersion(_) => CommandOutcome::UnknownVersion,
            Reject::WrongDevice(_) => CommandOutcome::WrongDevice,
            Reject::BadTag => CommandOutcome::BadTag,
            Reject::Replay { .. } => CommandOutcome::Replay,
            Reject::UnknownKind(_) => CommandOutcome::UnknownKind,
            Reject::BadLength { .. } => CommandOutcome::BadLength,
            Reject::BadOpening(_) => CommandOutcome::BadOpening,
            Reject::BadDuration(_) => CommandOutcome::BadDuration,
            Reject::ModeNotAllowed(_) => CommandOutcome::ModeNotAllowed,
            Reject::BadChunk { .. } => CommandOutcome::BadChunk,
        }
    }
}

impl fmt::Display for Reject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Reject::Malformed { len } => write!(
                f,
                "frame len = {len}: must be {MIN_FRAME_LEN} to {MAX_FRAME_LEN}"
            ),
            Reject::UnknownVersion(v) => write!(f, "version = {v}: must be {FRAME_VERSION}"),
            Reject::WrongDevice(d) => write!(f, "device_id = {d}: not this device"),
            Reject::BadTag => f.write_str("tag does not match"),
            Reject::Replay { counter, last } => {
                write!(f, "counter = {counter}: must be > {last} (replay)")
            }
            Reject::UnknownKind(k) => write!(f, "kind = {k}: not a known command"),
            Reject::BadLength { kind, len } => {
                write!(f, "kind {kind} args len = {len}: wrong length")
            }
            Reject::BadOpening(bits) => write!(
                f,
                "opening_m = {}: must be in [0, max_opening_m]",
                f32::from_bits(*bits)
            ),
            Reject::BadDuration(s) => write!(f, "for_s = {s}: must be in 1..=manual_max_s"),
            Reject::ModeNotAllowed(m) => {
                write!(f, "mode = {m}: only drawdown (2) or failsafe (4)")
            }
            Reject::BadChunk {
                offset,
                len,
                total_len,
            } => write!(
                f,
                "chunk offset = {offset} len = {len} total_len = {total_len}: must be 1 to \
                 {MAX_CHUNK_LEN} bytes inside a blob within max_config_len"
            ),
        }
    }
}

impl core::error::Error for Reject {}

/// A refused frame: why, and what it claimed (for the log).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rejected {
    /// Why.
    pub reason: Reject,
    /// The frame's counter: authenticated for `Replay` and whenever
    /// [`Rejected::counter_used`], otherwise as claimed (0 if the frame was too short).
    pub counter: u32,
    /// The frame's kind byte (0 if too short).
    pub kind: u8,
}

impl Rejected {
    /// Whether the frame was authentic and fresh, so its counter is now used up.
    pub const fn counter_used(&self) -> bool {
        consumes_counter(self.reason.outcome())
    }

    /// The record to log.
    pub const fn event_body(&self) -> EventBody {
        EventBody::RemoteCommand {
            counter: self.counter,
            kind: self.kind,
            outcome: self.reason.outcome(),
        }
    }
}

/// An accepted frame.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Accepted<'a> {
    /// The frame's counter (now the verifier's last counter).
    pub counter: u32,
    /// The command.
    pub command: RemoteCommand<'a>,
}

impl Accepted<'_> {
    /// The record to log (before acting on the command).
    pub const fn event_body(&self) -> EventBody {
        EventBody::RemoteCommand {
            counter: self.counter,
            kind: self.command.kind(),
            outcome: CommandOutcome::Accepted,
        }
    }
}

/// Whether a logged outcome means the frame's counter was used up (accepted, or authentic and
/// fresh but refused afterwards). The main loop restores the verifier from the newest such
/// record.
pub const fn consumes_counter(outcome: CommandOutcome) -> bool {
    matches!(
        outcome,
        CommandOutcome::Accepted
            | CommandOutcome::UnknownKind
            | CommandOutcome::BadLength
            | CommandOutcome::BadOpening
            | CommandOutcome::BadDuration
            | CommandOutcome::ModeNotAllowed
            | CommandOutcome::BadChunk
    )
}

/// Checks frames for one device: its id, key and last used counter.
#[derive(Clone)]
pub struct Verifier {
    device_id: u32,
    /// HMAC keyed once; each check works on a copy.
    mac: HmacSha256,
    last_counter: u32,
}

impl fmt::Debug for Verifier {
    /// Never prints the key.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Verifier")
            .field("device_id", &self.device_id)
            .field("last_counter", &self.last_counter)
            .finish_non_exhaustive()
    }
}

impl Verifier {
    /// A verifier for `device_id` with its key (any non-empty length; provision
    /// [`KEY_LEN`] random bytes). The last counter starts at 0: call [`Verifier::restore`]
    /// with the persisted one before the first frame.
    pub fn new(device_id: u32, key: &[u8]) -> Result<Verifier, CommandError> {
        if key.is_empty() {
            return Err(CommandError::EmptyKey);
        }
        let mac = HmacSha256::new_from_slice(key).map_err(|_| CommandError::EmptyKey)?;
        Ok(Verifier {
            device_id,
            mac,
            last_counter: 0,
        })
    }

    /// This device's id.
    pub fn device_id(&self) -> u32 {
        self.device_id
    }

    /// The last used counter (persist it; see the module doc).
    pub fn last_counter(&self) -> u32 {
        self.last_counter
    }

    /// Restore the last used counter from flash. It only ever rises: a `counter` below the
    /// current one is ignored, so a stale record cannot reopen the replay window.
    pub fn restore(&mut self, counter: u32) {
        self.last_counter = self.last_counter.max(counter);
    }

    /// Whether `tag` is HMAC-SHA256 of `message` under this device's key, compared in
    /// constant time. `tag` must be the full [`TAG_LEN`] bytes.
    pub fn check_tag(&self, message: &[u8], tag: &[u8]) -> bool {
        let mut mac = self.mac.clone();
        mac.update(message);
        mac.verify_slice(tag).is_ok()
    }

    /// Check `frame` (see the module doc for the order of checks) against `limits`. On
    /// acceptance, and on any refusal after the frame proved authentic and fresh, the frame's
    /// counter becomes [`Verifier::last_counter`].
    pub fn verify<'f>(
        &mut self,
        frame: &'f [u8],
        limits: &Limits,
    ) -> Result<Accepted<'f>, Rejected> {
        let len = frame.len();
        let counter = frame.get(5..9).map_or(0, le_u32);
        let kind = frame.get(9).copied().unwrap_or(0);
        let reject = |reason| Rejected {
            reason,
            counter,
            kind,
        };
        if !(MIN_FRAME_LEN..=MAX_FRAME_LEN).contains(&len) {
            return Err(reject(Reject::Malformed { len }));
        }
        let body_len = len.saturating_sub(TAG_LEN);
        let (message, tag) = frame
            .split_at_checked(body_len)
            .ok_or(reject(Reject::Malformed { len }))?;
        let version = message.first().copied().unwrap_or(0);
        if version != FRAME_VERSION {
            return Err(reject(Reject::UnknownVersion(version)));
        }
        let device_id = message.get(1..5).map_or(0, le_u32);
        if device_id != self.device_id {
            return Err(reject(Reject::WrongDevice(device_id)));
        }
        if !self.check_tag(message, tag) {
            return Err(reject(Reject::BadTag));
        }
        if counter <= self.last_counter {
            return Err(reject(Reject::Replay {
                counter,
                last: self.last_counter,
            }));
        }
        self.last_counter = counter;
        let args = message.get(HEADER_LEN..).unwrap_or(&[]);
        match parse_args(kind, args, limits) {
            Ok(command) => Ok(Accepted { counter, command }),
            Err(reason) => Err(reject(reason)),
        }
    }
}

fn le_u32(b: &[u8]) -> u32 {
    match b {
        [a, b, c, d, ..] => u32::from_le_bytes([*a, *b, *c, *d]),
        _ => 0,
    }
}

fn parse_args<'f>(kind: u8, args: &'f [u8], limits: &Limits) -> Result<RemoteCommand<'f>, Reject> {
    let bad_len = Reject::BadLength {
        kind,
        len: args.len(),
    };
    match kind {
        kind::MANUAL => {
            let [a0, a1, a2, a3, d0, d1, d2, d3] = args else {
                return Err(bad_len);
            };
            let opening_m = f32::from_le_bytes([*a0, *a1, *a2, *a3]);
            let for_s = u32::from_le_bytes([*d0, *d1, *d2, *d3]);
            // `contains` is false for NaN; ±infinity are outside the finite range.
            if !(0.0..=limits.max_opening_m).contains(&opening_m) {
                return Err(Reject::BadOpening(opening_m.to_bits()));
            }
            if !(1..=limits.manual_max_s).contains(&for_s) {
                return Err(Reject::BadDuration(for_s));
            }
            Ok(RemoteCommand::Manual { opening_m, for_s })
        }
        kind::RESUME | kind::ACKNOWLEDGE_ALARMS => {
            if !args.is_empty() {
                return Err(bad_len);
            }
            Ok(if kind == kind::RESUME {
                RemoteCommand::Resume
            } else {
                RemoteCommand::AcknowledgeAlarms
            })
        }
        kind::SET_MODE => {
            let [code] = args else {
                return Err(bad_len);
            };
            SafeMode::from_code(*code)
                .map(RemoteCommand::SetMode)
                .ok_or(Reject::ModeNotAllowed(*code))
        }
        kind::UPDATE_CONFIG => {
            let (head, bytes) = args.split_at_checked(CHUNK_HEADER_LEN).ok_or(bad_len)?;
            let offset = le_u32(head);
            let total_len = head.get(4..).map_or(0, le_u32);
            let chunk_len = u32::try_from(bytes.len()).unwrap_or(u32::MAX);
            let inside = offset
                .checked_add(chunk_len)
                .is_some_and(|end| end <= total_len);
            if bytes.is_empty()
                || bytes.len() > MAX_CHUNK_LEN
                || !inside
                || total_len > limits.max_config_len
            {
                return Err(Reject::BadChunk {
                    offset,
                    len: bytes.len(),
                    total_len,
                });
            }
            Ok(RemoteCommand::UpdateConfig(ConfigChunk {
                offset,
                total_len,
                bytes,
            }))
        }
        other => Err(Reject::UnknownKind(other)),
    }
}

/// Sign `command` for `device_id` with `counter` under `key` into `buf`; returns the frame
/// length. For the desktop tool and tests: the device never calls it (the linker drops it
/// from the image). Arguments are encoded as given, not range-checked: the device checks.
pub fn sign(
    key: &[u8],
    device_id: u32,
    counter: u32,
    command: &RemoteCommand<'_>,
    buf: &mut [u8],
) -> Result<usize, CommandError> {
    let mut args = [0u8; CHUNK_HEADER_LEN + MAX_CHUNK_LEN];
    let args_len = encode_args(command, &mut args)?;
    let args = args.get(..args_len).ok_or(CommandError::Unencodable)?;
    sign_raw(key, device_id, counter, command.kind(), args, buf)
}

/// Sign a frame with any kind byte and argument bytes (also ones the device will refuse: for
/// tests and for newer kinds). Returns the frame length.
pub fn sign_raw(
    key: &[u8],
    device_id: u32,
    counter: u32,
    kind: u8,
    args: &[u8],
    buf: &mut [u8],
) -> Result<usize, CommandError> {
    if key.is_empty() {
        return Err(CommandError::EmptyKey);
    }
    let body_len = HEADER_LEN.saturating_add(args.len());
    let needed = body_len.saturating_add(TAG_LEN);
    let len = buf.len();
    let too_small = CommandError::BufferTooSmall { len, needed };
    let frame = buf.get_mut(..needed).ok_or(too_small)?;
    let (body, tag) = frame.split_at_mut_checked(body_len).ok_or(too_small)?;
    let (head, rest) = body.split_at_mut_checked(HEADER_LEN).ok_or(too_small)?;
    let fields = [FRAME_VERSION]
        .into_iter()
        .chain(device_id.to_le_bytes())
        .chain(counter.to_le_bytes())
        .chain([kind]);
    for (dst, src) in head.iter_mut().zip(fields) {
        *dst = src;
    }
    for (dst, src) in rest.iter_mut().zip(args) {
        *dst = *src;
    }
    let out = hmac_sha256(key, body).ok_or(CommandError::EmptyKey)?;
    for (dst, src) in tag.iter_mut().zip(out) {
        *dst = src;
    }
    Ok(needed)
}

/// HMAC-SHA256 of `message` under `key` (`None` only for an empty key).
pub fn hmac_sha256(key: &[u8], message: &[u8]) -> Option<[u8; TAG_LEN]> {
    if key.is_empty() {
        return None;
    }
    let mut mac = HmacSha256::new_from_slice(key).ok()?;
    mac.update(message);
    let out = mac.finalize().into_bytes();
    let mut tag = [0u8; TAG_LEN];
    for (dst, src) in tag.iter_mut().zip(out.iter()) {
        *dst = *src;
    }
    Some(tag)
}

fn encode_args(command: &RemoteCommand<'_>, out: &mut [u8]) -> Result<usize, CommandError> {
    let mut w = Writer { out, at: 0 };
    match command {
        RemoteCommand::Manual { opening_m, for_s } => {
            w.put(&opening_m.to_le_bytes())?;
            w.put(&for_s.to_le_bytes())?;
        }
        RemoteCommand::Resume | RemoteCommand::AcknowledgeAlarms => {}
        RemoteCommand::SetMode(mode) => w.put(&[mode.mode().code()])?,
        RemoteCommand::UpdateConfig(chunk) => {
            if chunk.bytes.is_empty() || chunk.bytes.len() > MAX_CHUNK_LEN {
                return Err(CommandError::Unencodable);
            }
            w.put(&chunk.offset.to_le_bytes())?;
            w.put(&chunk.total_len.to_le_bytes())?;
            w.put(chunk.bytes)?;
        }
    }
    Ok(w.at)
}

struct Writer<'a> {
    out: &'a mut [u8],
    at: usize,
}

impl Writer<'_> {
    fn put(&mut self, bytes: &[u8]) -> Result<(), CommandError> {
        let end = self
            .at
            .checked_add(bytes.len())
            .ok_or(CommandError::Unencodable)?;
        self.out
            .get_mut(self.at..end)
            .ok_or(CommandError::Unencodable)?
            .copy_from_slice(bytes);
        self.at = end;
        Ok(())
    }
}
