//! Fuzz the event frame decoder with arbitrary bytes: it must never panic, and whatever it
//! accepts must re-encode to a frame that decodes to the same bytes again.
#![no_main]

use holdback_core::event::{self, MAX_FRAME_LEN};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
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
