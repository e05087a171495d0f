//! Power-fail-safe event log on NOR flash.
//!
//! Records ([`holdback_core::event::EventRecord`], one framed postcard record each) go into a
//! `sequential-storage` queue over a range of NOR flash. The queue is append-only with
//! per-item CRCs and survives power loss at any point: a record whose write returned `Ok` is
//! on flash, a record cut off mid-write is dropped on read (its CRC fails), and the next
//! operation repairs the queue. When the range is full, the oldest page is erased to make room
//! (oldest records go first).
//!
//! sequential-storage 8 has an async-only API. The device's flash drivers are blocking, so
//! [`Blocking`] adapts a blocking `embedded-storage` NOR flash to the async traits (its
//! futures are ready on first poll) and every call is driven by `embassy_futures::block_on`,
//! which needs no executor.
//!
//! ## Sample-rate reduction: storm records stay longest
//!
//! Periodic samples ([`EventBody::Sample`]) logged through [`EventLog::log_sample`] follow a
//! [`SamplePolicy`]: in dry weather (mode [`ModeCode::Standby`]) only every `dry_every`-th
//! sample is written, in every other mode (storm, drawdown, surcharge, failsafe, manual) every
//! sample. A dry hour thus costs `dry_every` times less flash than a storm hour, so after a
//! storm the ring takes `dry_every` times longer to reach (and erase) the storm's records
//! than it would at a constant rate. The first sample after any mode change is always
//! written, so every transition is bracketed by samples. Events other than samples are always
//! written.
//!
//! Invariants: sequence numbers increase by one per append attempt (wrapping), so a gap in a
//! read-back log is a record lost to a power cut; on start the log continues after the
//! newest sequence number found on flash. No panics, no heap.

pub mod dump;
pub mod ram_flash;

use core::fmt;
use core::ops::Range;

use embassy_futures::block_on;
use embedded_storage::nor_flash as blocking;
use embedded_storage_async::nor_flash as nb;
use holdback_core::event::{
    self, DecodeError, EncodeError, EventBody, EventRecord, MAX_FRAME_LEN, ModeCode,
};
use sequential_storage::cache::{Cache, Uncached};
use sequential_storage::queue::{QueueConfig, QueueConfigError, QueueStorage};

/// A blocking NOR flash seen through the async `embedded-storage-async` traits.
pub struct Blocking<F>(pub F);

impl<F: blocking::ErrorType> nb::ErrorType for Blocking<F> {
    type Error = F::Error;
}

impl<F: blocking::ReadNorFlash> nb::ReadNorFlash for Blocking<F> {
    const READ_SIZE: usize = F::READ_SIZE;

    async fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.0.read(offset, bytes)
    }

    fn capacity(&self) -> usize {
        self.0.capacity()
    }
}

impl<F: blocking::NorFlash> nb::NorFlash for Blocking<F> {
    const WRITE_SIZE: usize = F::WRITE_SIZE;
    const ERASE_SIZE: usize = F::ERASE_SIZE;

    async fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.0.erase(from, to)
    }

    async fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.0.write(offset, bytes)
    }
}

impl<F: blocking::MultiwriteNorFlash> nb::MultiwriteNorFlash for Blocking<F> {}

/// How often periodic samples are written (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SamplePolicy {
    dry_every: u16,
}

impl SamplePolicy {
    /// Write every `dry_every`-th sample in [`ModeCode::Standby`] (`0` is taken as `1`:
    /// every sample), every sample in any other mode.
    pub const fn new(dry_every: u16) -> Self {
        Self {
            dry_every: if dry_every == 0 { 1 } else { dry_every },
        }
    }

    /// Samples per written sample in dry weather.
    pub const fn dry_every(&self) -> u16 {
        self.dry_every
    }
}

/// Event log error.
#[derive(Debug, Clone, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum LogError<E> {
    /// The flash driver failed.
    Flash(E),
    /// The flash range is unusable for a queue (not page aligned, too small…).
    Config(QueueConfigError),
    /// The queue found corruption it could not repair (erase the range to recover).
    Corrupted,
    /// The queue is full and could not make room (a broken invariant: the log overwrites).
    Full,
    /// A record could not be encoded.
    Encode(EncodeError),
    /// sequential-storage reported something this log never expects (a broken invariant).
    Internal,
}

impl<E: fmt::Debug> fmt::Display for LogError<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Flash(e) => write!(f, "event log flash error: {e:?}"),
            Self::Config(e) => write!(f, "event log flash range: {e:?}"),
            Self::Corrupted => write!(f, "event log corrupted beyond repair"),
            Self::Full => write!(f, "event log full"),
            Self::Encode(e) => write!(f, "event log encode: {e}"),
            Self::Internal => write!(f, "event log internal error"),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for LogError<E> {}

impl<E> From<sequential_storage::Error<E>> for LogError<E> {
    fn from(e: sequential_storage::Error<E>) -> Self {
        match e {
            sequential_storage::Error::Storage { value, .. } => Self::Flash(value),
            sequential_storage::Error::FullStorage => Self::Full,
            sequential_storage::Error::Corrupted { .. } => Self::Corrupted,
            _ => Self::Internal,
        }
    }
}

type Queue<F> = QueueStorage<Blocking<F>, Cache<Uncached, Uncached, Uncached>>;

/// The event log over a blocking NOR flash.
pub struct EventLog<F: blocking::NorFlash> {
    queue: Queue<F>,
    next_seq: u32,
    policy: SamplePolicy,
    last_sample_mode: Option<ModeCode>,
    dry_skipped: u16,
}

impl<F: blocking::NorFlash> EventLog<F> {
    /// Open the log on `range` of `flash` (page aligned, at least one page; two or more so
    /// that making room never erases the only page). Reads the queue once to continue the
    /// sequence numbers.
    pub fn new(
        flash: F,
        range: Range<u32>,
        policy: SamplePolicy,
    ) -> Result<Self, LogError<F::Error>> {
        let config = QueueConfig::<Blocking<F>>::try_new(range).map_err(LogError::Config)?;
        let queue = QueueStorage::new(Blocking(flash), config, Cache::new_uncached());
        let mut log = Self {
            queue,
            next_seq: 0,
            policy,
            last_sample_mode: None,
            dry_skipped: 0,
        };
        let mut newest = None;
        log.for_each(|r| {
            if let Ok(rec) = r {
                newest = Some(rec.seq);
            }
        })?;
        log.next_seq = newest.map_or(0, |s| s.wrapping_add(1));
        Ok(log)
    }

    /// Give back the flash.
    pub fn release(self) -> F {
        self.queue.destroy().0.0
    }

    /// Sequence number the next record gets.
    pub fn next_seq(&self) -> u32 {
        self.next_seq
    }

    /// Append one record stamped `time_s`; returns its sequence number. When the range is
    /// full, the oldest page is erased first.
    pub fn append(&mut self, time_s: u32, body: EventBody) -> Result<u32, LogError<F::Error>> {
        let seq = self.next_seq;
        self.next_seq = seq.wrapping_add(1);
        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = event::encode(&EventRecord { seq, time_s, body }, &mut buf)
            .map_err(LogError::Encode)?;
        let frame = buf.get(..n).ok_or(LogError::Internal)?;
        block_on(self.queue.push(frame, true))?;
        Ok(seq)
    }

    /// Log a periodic sample under the [`SamplePolicy`]; `Ok(None)` when thinned out. A body
    /// that is not a [`EventBody::Sample`] is appended as is.
    pub fn log_sample(
        &mut self,
        time_s: u32,
        body: EventBody,
    ) -> Result<Option<u32>, LogError<F::Error>> {
        let EventBody::Sample { mode, .. } = body else {
            return self.append(time_s, body).map(Some);
        };
        let changed = self.last_sample_mode != Some(mode);
        self.last_sample_mode = Some(mode);
        if mode == ModeCode::Standby && !changed {
            self.dry_skipped = self.dry_skipped.saturating_add(1);
            if self.dry_skipped < self.policy.dry_every {
                return Ok(None);
            }
        }
        self.dry_skipped = 0;
        self.append(time_s, body).map(Some)
    }

    /// Call `f` with every stored record, oldest first; a stored item that is not a valid
    /// frame is passed as its decode error (and skipped otherwise).
    pub fn for_each(
        &mut self,
        mut f: impl FnMut(Result<EventRecord, DecodeError>),
    ) -> Result<(), LogError<F::Error>> {
        block_on(async {
            let mut buf = [0u8; MAX_FRAME_LEN.next_multiple_of(32)];
            let mut it = self.queue.iter().await?;
            while let Some(entry) = it.next(&mut buf).await? {
                f(event::decode_exact(&entry));
            }
            Ok(())
        })
    }

    /// Erase the whole range (all records lost); sequence numbers go on.
    pub fn erase_all(&mut self) -> Result<(), LogError<F::Error>> {
        block_on(self.queue.erase_all()).map_err(LogError::from)
    }
}

impl<F: blocking::MultiwriteNorFlash> EventLog<F> {
    /// Remove and return the oldest record (`Ok(None)` when empty). A stored item that is not
    /// a valid frame is removed and returned as its decode error.
    pub fn pop_oldest(
        &mut self,
    ) -> Result<Option<Result<EventRecord, DecodeError>>, LogError<F::Error>> {
        let mut buf = [0u8; MAX_FRAME_LEN.next_multiple_of(32)];
        let popped = block_on(self.queue.pop(&mut buf))?;
        Ok(popped.map(|b| event::decode_exact(b)))
    }
}
