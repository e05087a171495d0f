//! The asset manager's inputs: any bytes given to the fleet reader (exported log file,
//! telemetry lines or raw flash dump, told apart by their first bytes), to the review's rain
//! CSV and to its JSON pond file give records or errors, never a panic; every record and
//! problem the reader reports lies inside the bytes it was given, and a log file's records
//! are found again, bit for bit, in the frames they were read from (arbitrary frames are
//! also given behind a valid log file header, which the fuzzer could not forge).
#![no_main]

use std::path::Path;

use holdback_core::event;
use holdback_review::pond::Pond;
use holdback_review::read::{ReadOptions, SourceKind, read_bytes};
use holdback_review::{logfile, rain};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&sel, rest)) = data.split_first() else {
        return;
    };
    let path = Path::new("fuzz");
    match sel % 4 {
        0 | 1 => {
            // 1: the bytes as the frames of an exported log file behind a valid header, each
            // frame's CRC made right (CRCs are out of the fuzzer's reach), so the payload
            // decoder and the reader's resynchronisation are searched too.
            let owned;
            let rest = if sel % 4 == 1 {
                let Ok(mut file) = logfile::write_bytes("fuzz", &[]) else {
                    return;
                };
                file.extend_from_slice(&framed(rest));
                owned = file;
                owned.as_slice()
            } else {
                rest
            };
            // Small pages, so that short inputs still hold whole pages of a dump.
            let opts = ReadOptions {
                geometry: (1, 4, 256),
            };
            let Ok(logs) = read_bytes(rest, path, &opts) else {
                return;
            };
            for log in &logs {
                if log.kind == SourceKind::Telemetry {
                    continue;
                }
                for p in &log.problems {
                    assert!(
                        p.offset.saturating_add(p.len) <= rest.len(),
                        "problem {}+{} past the end {}",
                        p.offset,
                        p.len,
                        rest.len()
                    );
                }
                for (i, r) in log.records.iter().enumerate() {
                    assert!(
                        r.offset < rest.len(),
                        "record offset {} past the end",
                        r.offset
                    );
                    if log.kind == SourceKind::LogFile {
                        let frame = log.frame(i).expect("a log file's record has its frame");
                        let (again, _) = event::decode(frame).expect("its frame decodes");
                        // Compared as encoded bytes: a record may hold a NaN.
                        let (mut a, mut b) =
                            ([0u8; event::MAX_FRAME_LEN], [0u8; event::MAX_FRAME_LEN]);
                        let n = event::encode(&again, &mut a).expect("re-encodes");
                        let m = event::encode(&r.record, &mut b).expect("re-encodes");
                        assert_eq!(a.get(..n), b.get(..m), "the frame holds another record");
                    }
                }
            }
        }
        2 => {
            if let Ok(text) = std::str::from_utf8(rest)
                && let Ok(rows) = rain::parse_csv(text, path)
            {
                assert!(
                    rows.windows(2).all(|w| w[0].end_s <= w[1].end_s),
                    "rows not in time order"
                );
                assert!(rows.iter().all(|r| r.window_s > 0 && r.depth_mm >= 0.0));
            }
        }
        _ => {
            if let Ok(text) = std::str::from_utf8(rest) {
                let _ = Pond::from_json(text, path);
            }
        }
    }
});

/// Chunks of `bytes` as core event frames with a right CRC: a chunk is a control byte, then
/// its payload (length from the control byte, at most the frame limit); a control byte with
/// its top bit set puts the chunk in as it is, junk for the reader to skip.
fn framed(mut bytes: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    while let Some((&ctl, tail)) = bytes.split_first() {
        let len = (usize::from(ctl & 0x7f) % (event::MAX_PAYLOAD_LEN + 1)).min(tail.len());
        let (payload, next) = tail.split_at(len);
        if ctl & 0x80 != 0 {
            out.extend_from_slice(payload);
        } else {
            let start = out.len();
            out.push(event::FORMAT_VERSION);
            out.push(len as u8);
            out.extend_from_slice(payload);
            let crc = event::crc32(&out[start..]);
            out.extend_from_slice(&crc.to_le_bytes());
        }
        bytes = next;
    }
    out
}
