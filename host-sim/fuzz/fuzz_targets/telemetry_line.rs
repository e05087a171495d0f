//! Fuzz the review's reader of the firmware's telemetry messages: any bytes must give
//! records, statuses and problems naming their line, never a panic; each single line must
//! decode to a message or an error.
#![no_main]

use holdback_review::telemetry::{decode_line, read};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let got = read(data);
    for log in &got.logs {
        for p in &log.problems {
            assert!(p.why.starts_with("line ") || p.why.starts_with("seq "), "{}", p.why);
        }
    }
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = decode_line(text);
    }
});
