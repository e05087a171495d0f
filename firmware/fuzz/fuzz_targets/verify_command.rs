//! Fuzz the remote-command verifier.
//!
//! - Raw mode (first byte even): the rest is a frame from the air. It must never panic and,
//!   without the key, never be accepted or use up a counter.
//! - Signed mode (first byte odd): the rest is `counter u32, kind u8, args…`, signed with the
//!   device key, so the checks after authentication (kind, lengths, ranges) are reached. It
//!   must never panic; an accepted command re-signs to the very same frame.
#![no_main]

use holdback_firmware::command::{self, Limits, MAX_FRAME_LEN, Verifier};
use libfuzzer_sys::fuzz_target;

const DEVICE: u32 = 0x0102_0304;
const KEY: [u8; 32] = [0x42; 32];

fuzz_target!(|data: &[u8]| {
    let Some((&mode, rest)) = data.split_first() else {
        return;
    };
    let limits = Limits::new(1.5, 4 * 3600, 4096).expect("valid limits");
    let mut v = Verifier::new(DEVICE, &KEY).expect("non-empty key");
    if mode & 1 == 0 {
        assert!(v.verify(rest, &limits).is_err(), "accepted without the key");
        assert_eq!(v.last_counter(), 0);
        return;
    }
    let [c0, c1, c2, c3, kind, args @ ..] = rest else {
        return;
    };
    let counter = u32::from_le_bytes([*c0, *c1, *c2, *c3]);
    let mut frame = [0u8; 512];
    let Ok(n) = command::sign_raw(&KEY, DEVICE, counter, *kind, args, &mut frame) else {
        return;
    };
    match v.verify(&frame[..n], &limits) {
        Ok(ok) => {
            assert_eq!(ok.counter, counter);
            assert_eq!(v.last_counter(), counter);
            let mut again = [0u8; MAX_FRAME_LEN];
            let m = command::sign(&KEY, DEVICE, counter, &ok.command, &mut again)
                .expect("an accepted command re-signs");
            assert_eq!(&again[..m], &frame[..n]);
        }
        Err(r) => {
            assert_eq!(
                r.counter_used(),
                v.last_counter() == counter && counter != 0
            );
        }
    }
});
