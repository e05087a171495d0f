//! Fuzz the raw flash dump reader: any image (whole pages of the log's geometry, as a dump
//! pulled from a device would be) must decode without panicking, every entry must lie inside
//! the image, and the reader must end (it may not loop on damage).
//!
//! Random bytes rarely hold an item whose header and CRC check, so inputs whose first byte is
//! odd describe damage to a real log instead: that many records are appended through the
//! firmware's own `EventLog` on the fake NOR flash (wrapping when full), power is optionally
//! cut after a number of flash events, and then bits are flipped at the given places. With no
//! bit flipped, every record the reader finds must be one the log wrote, and with no power cut
//! either, the newest record written must be among them.
#![no_main]

use holdback_core::event::{EventBody, ModeCode};
use holdback_firmware::eventlog::dump::{DumpEntry, DumpReader, Geometry};
use holdback_firmware::eventlog::ram_flash::RamFlash;
use holdback_firmware::eventlog::{EventLog, SamplePolicy};
use libfuzzer_sys::fuzz_target;

/// The geometry of the reference board's log flash (4-byte words, 512-byte pages).
const PAGE: usize = 512;
const PAGES: usize = 4;
type Flash = RamFlash<{ PAGES * PAGE }, 4, 4, PAGE>;

/// Body of record `i`: two kinds, with values that tell records apart.
fn body(i: u32) -> EventBody {
    if i % 2 == 0 {
        EventBody::Decision {
            target_release_m3s: 0.25,
            opening_cmd: i as f32 * 0.001,
        }
    } else {
        EventBody::ModeChange {
            from: ModeCode::Standby,
            to: ModeCode::Capture,
            reason: (i % 7) as u8,
        }
    }
}

/// Reads `image`, checks the entries' bounds and termination, returns the records' seqs.
fn read(image: &[u8]) -> Option<Vec<u32>> {
    let g = Geometry::new(4, 4, PAGE).expect("valid geometry");
    let reader = DumpReader::new(image, g).ok()?;
    let mut seqs = Vec::new();
    let mut entries = 0usize;
    for e in reader {
        let (offset, len) = match e {
            DumpEntry::Record { offset, record } => {
                seqs.push(record.seq);
                (offset, 1)
            }
            DumpEntry::Corrupt { offset, len, .. } => (offset, len),
        };
        assert!(offset < image.len() && offset + len <= image.len());
        entries += 1;
        assert!(entries <= image.len(), "reader does not end");
    }
    Some(seqs)
}

fuzz_target!(|data: &[u8]| {
    let Some((&sel, rest)) = data.split_first() else {
        return;
    };
    if sel & 1 == 0 {
        let pages = rest.len() / PAGE;
        if pages > 0 {
            read(&rest[..pages * PAGE]);
        }
        return;
    }
    let [n, cut_hi, cut_lo, flips @ ..] = rest else {
        return;
    };
    let n = u32::from(*n);
    let mut flash = Flash::new(true);
    let cut = sel & 2 != 0;
    if cut {
        flash.cut_after(usize::from(u16::from_le_bytes([*cut_lo, *cut_hi])));
    }
    let mut written = 0u32;
    if let Ok(mut log) = EventLog::new(&mut flash, 0..(PAGES * PAGE) as u32, SamplePolicy::new(1)) {
        for i in 0..n {
            if log.append(i * 60, body(i)).is_err() {
                break;
            }
            written += 1;
        }
    }
    let mut image = flash.image().to_vec();
    let mut flipped = false;
    for f in flips.chunks_exact(3) {
        let at = usize::from(u16::from_le_bytes([f[0], f[1]])) % image.len();
        image[at] ^= f[2];
        flipped |= f[2] != 0;
    }
    let Some(seqs) = read(&image) else {
        return;
    };
    if !flipped {
        // An append cut off by the power may or may not have reached the flash.
        let limit = if cut { written + 1 } else { written };
        assert!(
            seqs.iter().all(|s| *s < limit.max(1)),
            "a record the log never wrote: {seqs:?}"
        );
        if !cut && written > 0 {
            assert!(
                seqs.contains(&(written - 1)),
                "the newest record is lost: {seqs:?}"
            );
        }
    }
});
