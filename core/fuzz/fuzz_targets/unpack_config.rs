//! Fuzz the packed pond-config reader: any bytes give a config or an error, never a panic,
//! and a frame that unpacks re-packs to the same bytes.
#![no_main]

use holdback_core::packed::{MAX_PACKED_LEN, pack, unpack, unpack_spec};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = unpack(data);
    if let Ok(spec) = unpack_spec(data) {
        let mut buf = [0u8; MAX_PACKED_LEN];
        let n = pack(&spec, &mut buf).expect("a decoded spec re-packs");
        assert_eq!(&buf[..n], data, "re-packed bytes differ");
    }
});
