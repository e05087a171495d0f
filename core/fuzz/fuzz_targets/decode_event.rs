//! Fuzz the event frame decoder with arbitrary bytes: it must never panic, and whatever it
//! accepts must re-encode to a frame that decodes to the same bytes again. Inputs whose
//! first byte is odd are made into a frame with a right header and CRC around the rest
//! (the CRC is out of the fuzzer's reach), so the payload decoder is searched too.
#![no_main]

use holdback_core::event::{self, MAX_FRAME_LEN};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let owned;
    let data = match data.split_first() {
        Some((&sel, payload)) if sel & 1 == 1 => {
            let payload = payload.get(..event::MAX_PAYLOAD_LEN).unwrap_or(payload);
            let mut f = vec![event::FORMAT_VERSION, payload.len() as u8];
            f.extend_from_slice(payload);
            let crc = event::crc32(&f);
            f.extend_from_slice(&crc.to_le_bytes());
            owned = f;
            owned.as_slice()
        }
        _ => data,
    };
    if let Ok((record, used)) = event::decode(data) {
        assert!(used <= data.len());
        let mut a = [0u8; MAX_FRAME_LEN];
        let n = event::encode(&record, &mut a).expect("a decoded record re-encodes");
        let (again, m) = event::decode(&a[..n]).expect("a re-encoded record decodes");
        assert_eq!(m, n);
        let mut b = [0u8; MAX_FRAME_LEN];
        let k = event::encode(&again, &mut b).expect("re-encodes");
        assert_eq!(&a[..n], &b[..k]);
    }
    let _ = event::decode_exact(data);
});
