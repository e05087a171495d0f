//! Fuzz the packed pond-config reader: any bytes give a config or an error, never a panic,
//! and a spec that decodes re-packs to a frame that decodes and re-packs to the same bytes.
#![no_main]

use holdback_core::packed::{MAX_PACKED_LEN, pack, unpack, unpack_spec};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = unpack(data);
    if let Ok(spec) = unpack_spec(data) {
        let mut a = [0u8; MAX_PACKED_LEN];
        let n = pack(&spec, &mut a).expect("a decoded spec re-packs");
        let again = unpack_spec(&a[..n]).expect("a re-packed spec decodes");
        let mut b = [0u8; MAX_PACKED_LEN];
        let k = pack(&again, &mut b).expect("re-packs");
        assert_eq!(&a[..n], &b[..k], "re-packed bytes differ");
    }
});
