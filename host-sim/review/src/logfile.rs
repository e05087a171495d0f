//! The exported log file: a small header of our own, then the device's core event frames
//! back to back. It is what `holdback fleet export` writes and what a device's log rebuilt
//! from telemetry is saved as.
//!
//! ```text
//! offset     size  field
//! 0          8     magic "HBLOG01\n"
//! 8          2     header_len, u16 little-endian: bytes from offset 0 to the first frame
//! 10         1     dev_len: length of the device id in bytes (1..=64)
//! 11         1     reserved, 0
//! 12         n     device id, UTF-8, n = dev_len
//! 12+n       4     CRC-32/ISO-HDLC (the core's `event::crc32`) over bytes 0..12+n
//! 16+n ..    -     header_len − (16+n) bytes a later writer may add; skipped
//! header_len -     frames: [version u8][len u8][payload][crc32 u32 LE], see `holdback_core::event`
//! ```
//!
//! Every frame carries its own version and CRC, so frames are read one after another; a frame
//! that fails is reported with its offset and the reader resynchronises on the next offset
//! where a whole valid frame starts. A truncated tail is reported too. Nothing is dropped
//! without a report, and nothing stops the reading of what follows.

use std::path::Path;

use holdback_core::event::{self, EventRecord, MAX_FRAME_LEN};

use crate::error::ReviewError;

/// The file's first eight bytes.
pub const MAGIC: &[u8; 8] = b"HBLOG01\n";

/// Longest device id, bytes.
pub const MAX_DEVICE_LEN: usize = 64;

/// The header of an exported log file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Header {
    /// The device that wrote the records.
    pub device: String,
    /// Offset of the first frame.
    pub header_len: usize,
}

/// Encode `records` of `device` as an exported log file.
pub fn write_bytes(device: &str, records: &[EventRecord]) -> Result<Vec<u8>, ReviewError> {
    let dev = device.as_bytes();
    if dev.is_empty() || dev.len() > MAX_DEVICE_LEN {
        return Err(ReviewError::Usage(format!(
            "device id = {device:?}: must be 1..={MAX_DEVICE_LEN} bytes"
        )));
    }
    let header_len = 16 + dev.len();
    let mut out = Vec::with_capacity(header_len + records.len() * 24);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&(header_len as u16).to_le_bytes());
    out.push(dev.len() as u8);
    out.push(0);
    out.extend_from_slice(dev);
    let crc = event::crc32(&out);
    out.extend_from_slice(&crc.to_le_bytes());
    let mut buf = [0u8; MAX_FRAME_LEN];
    for r in records {
        let n = event::encode(r, &mut buf)
            .map_err(|e| ReviewError::Usage(format!("record seq {}: cannot encode: {e}", r.seq)))?;
        out.extend_from_slice(&buf[..n]);
    }
    Ok(out)
}

/// Write an exported log file.
pub fn write_file(path: &Path, device: &str, records: &[EventRecord]) -> Result<(), ReviewError> {
    let bytes = write_bytes(device, records)?;
    std::fs::write(path, bytes).map_err(|e| ReviewError::io(path, e))
}

/// Whether `bytes` start like an exported log file.
pub fn looks_like(bytes: &[u8]) -> bool {
    bytes.starts_with(MAGIC)
}

/// Parse and check the header; `path` only labels errors.
pub fn header(bytes: &[u8], path: &Path) -> Result<Header, ReviewError> {
    let fail = |offset: usize, what: String| ReviewError::Format {
        path: path.to_path_buf(),
        offset,
        what,
    };
    if !looks_like(bytes) {
        return Err(fail(
            0,
            "magic: not an exported log file (\"HBLOG01\\n\")".into(),
        ));
    }
    let (Some(&h0), Some(&h1), Some(&dev_len)) = (bytes.get(8), bytes.get(9), bytes.get(10)) else {
        return Err(fail(8, "header truncated".into()));
    };
    let header_len = usize::from(u16::from_le_bytes([h0, h1]));
    let dev_len = usize::from(dev_len);
    if dev_len == 0 || dev_len > MAX_DEVICE_LEN {
        return Err(fail(
            10,
            format!("dev_len = {dev_len}: must be 1..={MAX_DEVICE_LEN}"),
        ));
    }
    let crc_at = 12 + dev_len;
    if header_len < crc_at + 4 {
        return Err(fail(
            8,
            format!("header_len = {header_len}: must be >= {}", crc_at + 4),
        ));
    }
    let Some(crc_bytes) = bytes.get(crc_at..crc_at + 4) else {
        return Err(fail(crc_at, "header truncated".into()));
    };
    let stored = u32::from_le_bytes([crc_bytes[0], crc_bytes[1], crc_bytes[2], crc_bytes[3]]);
    let computed = event::crc32(&bytes[..crc_at]);
    if stored != computed {
        return Err(fail(
            crc_at,
            format!("header crc = {stored:#010x}: computed {computed:#010x}"),
        ));
    }
    if bytes.len() < header_len {
        return Err(fail(
            bytes.len(),
            format!("header_len = {header_len}: file shorter"),
        ));
    }
    let device = std::str::from_utf8(&bytes[12..crc_at])
        .map_err(|e| fail(12, format!("device id: not UTF-8: {e}")))?
        .to_string();
    Ok(Header { device, header_len })
}
