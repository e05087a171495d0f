//! Reading what devices wrote, from any of three sources, into one [`DecodedLog`]:
//!
//! - a raw flash dump of the log range, read by the firmware's own
//!   [`DumpReader`] (every item's CRC and every frame's CRC checked);
//! - an exported log file ([`crate::logfile`]): header + core event frames;
//! - the firmware's telemetry messages, one JSON object a line ([`crate::telemetry`]), so a
//!   log can be rebuilt from telemetry (to the schema's quantisation).
//!
//! Invariants: every byte that is not part of a valid record is covered by a [`Problem`] with
//! its offset (byte offset in the file; for JSON lines the offset of the line) and reason,
//! and decoding always goes on after it. Sequence gaps between consecutive valid records are
//! reported as [`Gap`]s (records lost on the device: power cut mid-write, overwritten ring).

use std::path::Path;
use std::sync::Arc;

use holdback_core::event::{
    self, DecodeError, EventRecord, FORMAT_VERSION, FRAME_OVERHEAD, MAX_PAYLOAD_LEN,
};
use holdback_firmware::eventlog::dump::{Corruption, DumpEntry, DumpReader, Geometry};

use crate::error::ReviewError;
use crate::{logfile, telemetry};

/// Which kind of source a log came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SourceKind {
    /// Raw flash dump.
    Dump,
    /// Exported log file.
    LogFile,
    /// Telemetry messages (JSON lines).
    Telemetry,
}

/// A valid record and where it was found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Located {
    /// Byte offset in the source (item header for a dump, frame for a log file, line for
    /// telemetry).
    pub offset: usize,
    /// The record.
    pub record: EventRecord,
}

/// A region that could not be read as records.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// Byte offset in the source.
    pub offset: usize,
    /// Length of the region, bytes.
    pub len: usize,
    /// Why.
    pub why: String,
}

/// Records missing between two valid ones (by sequence number).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Gap {
    /// Sequence number of the record before the gap.
    pub after_seq: u32,
    /// How many sequence numbers are missing.
    pub missing: u32,
}

/// Everything read from one source.
#[derive(Debug, Clone, PartialEq)]
pub struct DecodedLog {
    /// What kind of source.
    pub kind: SourceKind,
    /// The device id, when the source says (log file header; telemetry `device_id` in decimal).
    pub device: Option<String>,
    /// Valid records, in the order the source holds them (oldest first).
    pub records: Vec<Located>,
    /// Regions that were not valid records.
    pub problems: Vec<Problem>,
    /// For an exported log file, the file's bytes: each record's `offset` is where its core
    /// event frame starts in them (see [`DecodedLog::frame`]), so the store keeps the frame
    /// exactly as read instead of encoding the record again. `None` for other sources.
    pub source: Option<Arc<[u8]>>,
}

impl DecodedLog {
    /// The records alone.
    pub fn records(&self) -> Vec<EventRecord> {
        self.records.iter().map(|l| l.record).collect()
    }

    /// The core event frame of record `i` as the source holds it (an exported log file;
    /// `None` for other sources, whose records are encoded again when stored).
    pub fn frame(&self, i: usize) -> Option<&[u8]> {
        let src = self.source.as_deref()?;
        let at = self.records.get(i)?.offset;
        let len = usize::from(*src.get(at.checked_add(1)?)?) + FRAME_OVERHEAD;
        src.get(at..at.checked_add(len)?)
    }

    /// Sequence gaps between consecutive valid records (wrapping arithmetic; a step back or
    /// a repeat is not a gap).
    pub fn gaps(&self) -> Vec<Gap> {
        self.records
            .windows(2)
            .filter_map(|w| {
                let d = w[1].record.seq.wrapping_sub(w[0].record.seq);
                (d > 1 && d < u32::MAX / 2).then(|| Gap {
                    after_seq: w[0].record.seq,
                    missing: d - 1,
                })
            })
            .collect()
    }
}

/// Options for reading a file whose kind is detected from its first bytes.
#[derive(Debug, Clone, Copy)]
pub struct ReadOptions {
    /// Flash geometry for raw dumps: `(read_size, write_size, erase_size)`.
    pub geometry: (usize, usize, usize),
}

impl Default for ReadOptions {
    /// The demo devices' flash: byte reads, 4-byte words, 4 KiB pages.
    fn default() -> Self {
        ReadOptions {
            geometry: (1, 4, 4096),
        }
    }
}

/// Read a file: an exported log file (magic), telemetry JSON lines (first non-blank byte
/// `{`; one log per device in the file), otherwise a raw flash dump with `opts.geometry`.
pub fn read_file(path: &Path, opts: &ReadOptions) -> Result<Vec<DecodedLog>, ReviewError> {
    let bytes = std::fs::read(path).map_err(|e| ReviewError::io(path, e))?;
    read_bytes(&bytes, path, opts)
}

/// [`read_file`] over bytes already in memory; `path` labels errors.
pub fn read_bytes(
    bytes: &[u8],
    path: &Path,
    opts: &ReadOptions,
) -> Result<Vec<DecodedLog>, ReviewError> {
    if logfile::looks_like(bytes) {
        return read_logfile(bytes, path).map(|l| vec![l]);
    }
    if bytes.iter().find(|b| !b.is_ascii_whitespace()) == Some(&b'{') {
        return Ok(telemetry::read_lines(bytes));
    }
    let (r, w, e) = opts.geometry;
    let g = Geometry::new(r, w, e).map_err(|err| ReviewError::Format {
        path: path.to_path_buf(),
        offset: 0,
        what: format!("flash geometry read={r} write={w} erase={e}: {err}"),
    })?;
    Ok(vec![read_dump(bytes, g, e)])
}

fn corruption_text(c: &Corruption) -> String {
    match c {
        Corruption::PageState => {
            "page state: end marker without start marker (interrupted erase)".into()
        }
        Corruption::ItemHeader => {
            "item header failed its length check; rest of page skipped".into()
        }
        Corruption::ItemLength => "item length runs past the page; rest of page skipped".into(),
        Corruption::ItemData => "item data failed its crc (write cut off or bits flipped)".into(),
        Corruption::Frame(d) => format!("item intact but not an event frame: {d}"),
        other => format!("{other:?}"),
    }
}

/// Read a raw dump of the log range with the firmware's [`DumpReader`]. An image whose length
/// is not a whole number of pages is read up to its last whole page and the tail is reported
/// as truncated.
pub fn read_dump(image: &[u8], g: Geometry, erase_size: usize) -> DecodedLog {
    let whole = image.len() - image.len() % erase_size.max(1);
    let mut log = DecodedLog {
        kind: SourceKind::Dump,
        device: None,
        records: Vec::new(),
        problems: Vec::new(),
        source: None,
    };
    if whole > 0 {
        match DumpReader::new(&image[..whole], g) {
            Ok(reader) => {
                for entry in reader {
                    match entry {
                        DumpEntry::Record { offset, record } => {
                            log.records.push(Located { offset, record })
                        }
                        DumpEntry::Corrupt { offset, len, why } => log.problems.push(Problem {
                            offset,
                            len,
                            why: corruption_text(&why),
                        }),
                    }
                }
            }
            Err(e) => log.problems.push(Problem {
                offset: 0,
                len: whole,
                why: format!("dump not readable: {e}"),
            }),
        }
    }
    if whole < image.len() {
        log.problems.push(Problem {
            offset: whole,
            len: image.len() - whole,
            why: format!(
                "truncated page: {} bytes of a {erase_size}-byte page",
                image.len() - whole
            ),
        });
    }
    log
}

/// Read an exported log file (header checked, then frames with resynchronisation).
pub fn read_logfile(bytes: &[u8], path: &Path) -> Result<DecodedLog, ReviewError> {
    let h = logfile::header(bytes, path)?;
    let (records, problems) = decode_frames(&bytes[h.header_len..], h.header_len);
    Ok(DecodedLog {
        kind: SourceKind::LogFile,
        device: Some(h.device),
        records,
        problems,
        source: Some(Arc::from(bytes)),
    })
}

/// Whether a whole valid frame starts at the front of `bytes`.
fn frame_at(bytes: &[u8]) -> Option<(EventRecord, usize)> {
    match bytes {
        [v, l, ..] if *v == FORMAT_VERSION && usize::from(*l) <= MAX_PAYLOAD_LEN => {
            event::decode(bytes).ok()
        }
        _ => None,
    }
}

/// Decode concatenated core event frames. Offsets are `base` plus the position in `bytes`.
/// After a bad frame the reader looks for the next offset where a whole valid frame starts
/// (version byte, length, CRC and payload all check); the bytes skipped become one problem.
pub fn decode_frames(bytes: &[u8], base: usize) -> (Vec<Located>, Vec<Problem>) {
    let mut records = Vec::with_capacity(bytes.len() / 24);
    let mut problems = Vec::new();
    let mut p = 0;
    while p < bytes.len() {
        match event::decode(&bytes[p..]) {
            Ok((record, used)) => {
                records.push(Located {
                    offset: base + p,
                    record,
                });
                p += used;
            }
            Err(first) => {
                let start = p;
                let mut q = p + 1;
                while q < bytes.len() && frame_at(&bytes[q..]).is_none() {
                    q += 1;
                }
                let why = match first {
                    DecodeError::Truncated { .. } if q >= bytes.len() => {
                        format!("truncated frame at end of file: {first}")
                    }
                    other => format!("bad frame: {other}; skipped to the next valid frame"),
                };
                problems.push(Problem {
                    offset: base + start,
                    len: q - start,
                    why,
                });
                p = q;
            }
        }
    }
    (records, problems)
}

#[cfg(test)]
mod tests {
    use super::*;
    use holdback_core::event::{EventBody, HealthFlags, ModeCode};

    fn rec(seq: u32) -> EventRecord {
        // Times below 128 keep every frame the same length (one varint byte).
        EventRecord {
            seq,
            time_s: 100 + seq,
            body: EventBody::Sample {
                stage_m: 1.0 + seq as f32 * 0.01,
                storage_m3: 10.0,
                release_m3s: 0.1,
                opening: 0.5,
                mode: ModeCode::Capture,
                health: HealthFlags(0),
            },
        }
    }

    /// A damaged frame in the middle of a log file is reported at its offset and every frame
    /// after it is still read; a cut-off tail is reported as truncated.
    #[test]
    fn logfile_resyncs_after_damage_and_reports_truncated_tail() {
        let recs: Vec<_> = (0..10).map(rec).collect();
        let mut bytes = logfile::write_bytes("pond-a", &recs).unwrap();
        let h = logfile::header(&bytes, Path::new("x")).unwrap();
        let frame_len = (bytes.len() - h.header_len) / 10;
        bytes[h.header_len + 3 * frame_len + 5] ^= 0x40;
        bytes.truncate(bytes.len() - 3);
        let log = read_bytes(&bytes, Path::new("x"), &ReadOptions::default())
            .unwrap()
            .remove(0);
        assert_eq!(log.device.as_deref(), Some("pond-a"));
        let seqs: Vec<u32> = log.records.iter().map(|l| l.record.seq).collect();
        assert_eq!(seqs, [0, 1, 2, 4, 5, 6, 7, 8]);
        assert_eq!(log.problems.len(), 2);
        assert_eq!(log.problems[0].offset, h.header_len + 3 * frame_len);
        assert_eq!(log.problems[0].len, frame_len);
        assert!(
            log.problems[1].why.contains("truncated"),
            "{:?}",
            log.problems[1]
        );
        assert_eq!(log.problems[1].len, frame_len - 3);
        assert_eq!(
            log.gaps(),
            [Gap {
                after_seq: 2,
                missing: 1
            }]
        );
    }

    /// A broken header is an error naming the file and offset, not a panic.
    #[test]
    fn bad_header_is_a_clear_error() {
        let mut bytes = logfile::write_bytes("p", &[rec(0)]).unwrap();
        bytes[12] = b'q';
        let e = read_bytes(&bytes, Path::new("f.hblog"), &ReadOptions::default()).unwrap_err();
        let msg = e.to_string();
        assert!(
            msg.contains("f.hblog") && msg.contains("offset 13"),
            "{msg}"
        );
        for n in 0..bytes.len() {
            let _ = read_bytes(&bytes[..n], Path::new("f"), &ReadOptions::default());
        }
    }
}
