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
            // 1: the bytes as the frames of an exported log file behind a valid header
            // (its CRC is out of the fuzzer's reach), so the frame reader is searched too.
            let owned;
            let rest = if sel % 4 == 1 {
                let Ok(mut file) = logfile::write_bytes("fuzz", &[]) else {
                    return;
                };
                file.extend_from_slice(rest);
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
