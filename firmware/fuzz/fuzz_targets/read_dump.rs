//! Fuzz the raw flash dump reader: any image (whole pages of the log's geometry, as a dump
//! pulled from a device would be) must decode without panicking, every entry must lie inside
//! the image, and the reader must end (it may not loop on damage).
#![no_main]

use holdback_firmware::eventlog::dump::{DumpEntry, DumpReader, Geometry};
use libfuzzer_sys::fuzz_target;

/// The geometry of the reference board's log flash (4-byte words, 512-byte pages).
const PAGE: usize = 512;

fuzz_target!(|data: &[u8]| {
    let pages = data.len() / PAGE;
    if pages == 0 {
        return;
    }
    let image = &data[..pages * PAGE];
    let g = Geometry::new(4, 4, PAGE).expect("valid geometry");
    let Ok(reader) = DumpReader::new(image, g) else {
        return;
    };
    let mut entries = 0usize;
    for e in reader {
        let (offset, len) = match e {
            DumpEntry::Record { offset, .. } => (offset, 1),
            DumpEntry::Corrupt { offset, len, .. } => (offset, len),
        };
        assert!(offset < image.len() && offset + len <= image.len());
        entries += 1;
        assert!(entries <= image.len(), "reader does not end");
    }
});
