//! Fuzz the pond-file reader: any text must give a pond or a list of problems, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = holdback_sim::pondfile::load_str(text);
    }
});
