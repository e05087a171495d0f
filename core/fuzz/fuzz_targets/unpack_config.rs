//! Fuzz the packed pond-config reader: any bytes give a config or an error, never a panic,
//! and a spec that decodes re-packs to a frame that decodes and re-packs to the same bytes.
//! Inputs whose first byte is odd are wrapped in a right magic, version and CRC (out of the
//! fuzzer's reach), so the payload decoder and the spec's rules are searched too.
#![no_main]

use holdback_core::event::crc32;
use holdback_core::packed::{MAX_PACKED_LEN, PACK_MAGIC, PACK_VERSION, pack, unpack, unpack_spec};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let owned;
    let data = match data.split_first() {
        Some((&sel, payload)) if sel & 1 == 1 => {
            let mut f = PACK_MAGIC.to_vec();
            f.push(PACK_VERSION);
            f.extend_from_slice(payload);
            let crc = crc32(&f);
            f.extend_from_slice(&crc.to_le_bytes());
            owned = f;
            owned.as_slice()
        }
        _ => data,
    };
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
