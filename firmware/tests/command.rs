//! Remote-command frames: HMAC-SHA256 against RFC 4231, the frame layout against a tag
//! computed outside the project, and every refusal the verifier must make.

use holdback_core::event::{CommandOutcome, EventBody};
use holdback_firmware::command::{
    self, Accepted, CommandError, CommandSink, ConfigChunk, Limits, MAX_CHUNK_LEN, MAX_FRAME_LEN,
    MIN_FRAME_LEN, Reject, RemoteCommand, SafeMode, TAG_LEN, Verifier, kind,
};
use proptest::prelude::*;

const DEVICE: u32 = 0x0102_0304;
const KEY: [u8; 32] = {
    let mut k = [0u8; 32];
    let mut i = 0;
    while i < 32 {
        k[i] = i as u8;
        i += 1;
    }
    k
};

fn limits() -> Limits {
    Limits::new(1.5, 4 * 3600, 4096).unwrap()
}

fn hex(s: &str) -> Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

fn signed(counter: u32, cmd: &RemoteCommand<'_>) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_LEN];
    let n = command::sign(&KEY, DEVICE, counter, cmd, &mut buf).unwrap();
    buf[..n].to_vec()
}

fn signed_raw(counter: u32, kind: u8, args: &[u8]) -> Vec<u8> {
    let mut buf = [0u8; 256];
    let n = command::sign_raw(&KEY, DEVICE, counter, kind, args, &mut buf).unwrap();
    buf[..n].to_vec()
}

fn verifier() -> Verifier {
    Verifier::new(DEVICE, &KEY).unwrap()
}

/// RFC 4231 §4.2–4.5, test cases 1–4 (key, data, HMAC-SHA-256), checked through the same
/// `check_tag` the verifier uses and through the signer's `hmac_sha256`. The four digests
/// were also recomputed with CPython 3.11's `hmac`/`hashlib` and agree.
#[test]
fn hmac_sha256_matches_rfc4231_cases_1_to_4() {
    let cases: [(Vec<u8>, Vec<u8>, &str); 4] = [
        (
            vec![0x0b; 20],
            b"Hi There".to_vec(),
            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7",
        ),
        (
            b"Jefe".to_vec(),
            b"what do ya want for nothing?".to_vec(),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
        ),
        (
            vec![0xaa; 20],
            vec![0xdd; 50],
            "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe",
        ),
        (
            (1u8..=25).collect(),
            vec![0xcd; 50],
            "82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b",
        ),
    ];
    for (i, (key, data, digest)) in cases.iter().enumerate() {
        let expected = hex(digest);
        let v = Verifier::new(0, key).unwrap();
        assert!(v.check_tag(data, &expected), "case {}", i + 1);
        assert_eq!(
            command::hmac_sha256(key, data).unwrap().as_slice(),
            expected.as_slice(),
            "case {}",
            i + 1
        );
        // A wrong or short tag never passes.
        let mut wrong = expected.clone();
        wrong[31] ^= 1;
        assert!(!v.check_tag(data, &wrong));
        assert!(!v.check_tag(data, &expected[..16]));
        assert!(!v.check_tag(data, &[]));
    }
}

/// The frame layout of the module doc, byte by byte, and its tag as computed outside the
/// project: CPython 3.11 `hmac.new(bytes(range(32)), body, hashlib.sha256)` over
/// `struct.pack('<B IIB fI', 1, 0x01020304, 7, 1, 0.5, 600)`.
#[test]
fn manual_frame_golden_bytes_and_external_tag() {
    let frame = signed(
        7,
        &RemoteCommand::Manual {
            opening_m: 0.5,
            for_s: 600,
        },
    );
    let body = hex("010403020107000000010000003f58020000");
    let tag = hex("995071d0c53d968f1fc828b732b1f13c37bc4c12fe0a5da87a02e8c9162f2b43");
    assert_eq!(&frame[..body.len()], body.as_slice());
    assert_eq!(&frame[body.len()..], tag.as_slice());
    assert_eq!(frame.len(), 18 + TAG_LEN);
    let mut v = verifier();
    let ok = v.verify(&frame, &limits()).unwrap();
    assert_eq!(
        ok,
        Accepted {
            counter: 7,
            command: RemoteCommand::Manual {
                opening_m: 0.5,
                for_s: 600
            }
        }
    );
    assert_eq!(v.last_counter(), 7);
    assert_eq!(
        ok.event_body(),
        EventBody::RemoteCommand {
            counter: 7,
            kind: kind::MANUAL,
            outcome: CommandOutcome::Accepted
        }
    );
}

/// Every kind signs and verifies back to itself, in increasing counter order.
#[test]
fn every_kind_round_trips() {
    let blob = [0x5Au8; MAX_CHUNK_LEN];
    let cmds = [
        RemoteCommand::Manual {
            opening_m: 0.0,
            for_s: 1,
        },
        RemoteCommand::Manual {
            opening_m: 1.5,
            for_s: 4 * 3600,
        },
        RemoteCommand::Resume,
        RemoteCommand::AcknowledgeAlarms,
        RemoteCommand::SetMode(SafeMode::Drawdown),
        RemoteCommand::SetMode(SafeMode::Failsafe),
        RemoteCommand::UpdateConfig(ConfigChunk {
            offset: 0,
            total_len: 100,
            bytes: &blob[..1],
        }),
        RemoteCommand::UpdateConfig(ConfigChunk {
            offset: 4096 - 64,
            total_len: 4096,
            bytes: &blob,
        }),
    ];
    let mut v = verifier();
    for (i, cmd) in cmds.iter().enumerate() {
        let counter = 10 + i as u32 * 3;
        let frame = signed(counter, cmd);
        assert!((MIN_FRAME_LEN..=MAX_FRAME_LEN).contains(&frame.len()));
        let ok = v.verify(&frame, &limits()).unwrap();
        assert_eq!(ok.command, *cmd);
        assert_eq!(ok.counter, counter);
        assert_eq!(v.last_counter(), counter);
    }
    // The longest frame is exactly MAX_FRAME_LEN.
    assert_eq!(signed(100, &cmds[7]).len(), MAX_FRAME_LEN);
    assert_eq!(signed(100, &RemoteCommand::Resume).len(), MIN_FRAME_LEN);
}

/// Flipping any single bit of a signed frame (header, arguments or tag) gets it refused.
#[test]
fn every_single_bit_flip_is_refused() {
    let frame = signed(
        5,
        &RemoteCommand::Manual {
            opening_m: 0.25,
            for_s: 60,
        },
    );
    for byte in 0..frame.len() {
        for bit in 0..8 {
            let mut f = frame.clone();
            f[byte] ^= 1 << bit;
            let mut v = verifier();
            let r = v.verify(&f, &limits()).unwrap_err();
            let expected = match byte {
                0 => CommandOutcome::UnknownVersion,
                1..=4 => CommandOutcome::WrongDevice,
                _ => CommandOutcome::BadTag,
            };
            assert_eq!(r.reason.outcome(), expected, "byte {byte} bit {bit}");
            assert_eq!(v.last_counter(), 0, "a refused forgery uses no counter");
        }
    }
}

/// An authentic frame is accepted once; the same frame again, and any older counter, is a
/// replay. A restored counter survives a restart, and restore never lowers it.
#[test]
fn replays_are_refused_and_restore_only_rises() {
    let mut v = verifier();
    let f9 = signed(9, &RemoteCommand::Resume);
    assert!(v.verify(&f9, &limits()).is_ok());
    let again = v.verify(&f9, &limits()).unwrap_err();
    assert_eq!(
        again.reason,
        Reject::Replay {
            counter: 9,
            last: 9
        }
    );
    assert_eq!(
        again.event_body(),
        EventBody::RemoteCommand {
            counter: 9,
            kind: kind::RESUME,
            outcome: CommandOutcome::Replay
        }
    );
    assert!(!again.counter_used());
    let f3 = signed(3, &RemoteCommand::AcknowledgeAlarms);
    assert!(matches!(
        v.verify(&f3, &limits()).unwrap_err().reason,
        Reject::Replay {
            counter: 3,
            last: 9
        }
    ));
    // Counter 0 is never fresh.
    let f0 = signed(0, &RemoteCommand::Resume);
    assert!(matches!(
        verifier().verify(&f0, &limits()).unwrap_err().reason,
        Reject::Replay { .. }
    ));

    // After a restart the persisted counter is restored: the old frame is still a replay.
    let mut fresh = verifier();
    fresh.restore(v.last_counter());
    fresh.restore(2); // stale: ignored
    assert_eq!(fresh.last_counter(), 9);
    assert!(fresh.verify(&f9, &limits()).is_err());
    assert!(
        fresh
            .verify(&signed(10, &RemoteCommand::Resume), &limits())
            .is_ok()
    );
    // At u32::MAX nothing more is accepted.
    fresh.restore(u32::MAX);
    assert!(
        fresh
            .verify(&signed(u32::MAX, &RemoteCommand::Resume), &limits())
            .is_err()
    );
}

/// A frame for another device, or one signed with another key, is refused, and the two
/// reasons are told apart.
#[test]
fn wrong_device_and_wrong_key_are_refused() {
    let mut buf = [0u8; MAX_FRAME_LEN];
    let n = command::sign(&KEY, DEVICE + 1, 1, &RemoteCommand::Resume, &mut buf).unwrap();
    let r = verifier().verify(&buf[..n], &limits()).unwrap_err();
    assert_eq!(r.reason, Reject::WrongDevice(DEVICE + 1));
    let mut other_key = KEY;
    other_key[0] ^= 0x80;
    let n = command::sign(&other_key, DEVICE, 1, &RemoteCommand::Resume, &mut buf).unwrap();
    let r = verifier().verify(&buf[..n], &limits()).unwrap_err();
    assert_eq!(r.reason, Reject::BadTag);
    assert_eq!(r.reason.outcome(), CommandOutcome::BadTag);
}

/// Every refusal reason is distinct, and those after authentication use up the counter.
#[test]
fn each_refusal_has_its_own_reason() {
    let nan = f32::NAN.to_le_bytes();
    let manual = |opening: f32, for_s: u32| {
        let mut a = opening.to_le_bytes().to_vec();
        a.extend_from_slice(&for_s.to_le_bytes());
        a
    };
    let chunk = |offset: u32, total: u32, len: usize| {
        let mut a = offset.to_le_bytes().to_vec();
        a.extend_from_slice(&total.to_le_bytes());
        a.extend(std::iter::repeat_n(7u8, len));
        a
    };
    let cases: Vec<(Vec<u8>, CommandOutcome)> = vec![
        (vec![1u8; MIN_FRAME_LEN - 1], CommandOutcome::Malformed),
        (vec![1u8; MAX_FRAME_LEN + 1], CommandOutcome::Malformed),
        (
            {
                let mut f = signed(1, &RemoteCommand::Resume);
                f[0] = 2;
                f
            },
            CommandOutcome::UnknownVersion,
        ),
        (signed_raw(1, 0, &[]), CommandOutcome::UnknownKind),
        (signed_raw(1, 6, &[]), CommandOutcome::UnknownKind),
        (signed_raw(1, 255, &[1, 2]), CommandOutcome::UnknownKind),
        (signed_raw(1, kind::RESUME, &[0]), CommandOutcome::BadLength),
        (
            signed_raw(1, kind::MANUAL, &[0; 7]),
            CommandOutcome::BadLength,
        ),
        (
            signed_raw(1, kind::SET_MODE, &[]),
            CommandOutcome::BadLength,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &[0; 7]),
            CommandOutcome::BadLength,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(-0.001, 60)),
            CommandOutcome::BadOpening,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(-0.0, 60)),
            CommandOutcome::Accepted,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(1.5001, 60)),
            CommandOutcome::BadOpening,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(f32::INFINITY, 60)),
            CommandOutcome::BadOpening,
        ),
        (
            signed_raw(
                1,
                kind::MANUAL,
                &[nan[0], nan[1], nan[2], nan[3], 60, 0, 0, 0],
            ),
            CommandOutcome::BadOpening,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(0.5, 0)),
            CommandOutcome::BadDuration,
        ),
        (
            signed_raw(1, kind::MANUAL, &manual(0.5, 4 * 3600 + 1)),
            CommandOutcome::BadDuration,
        ),
        (
            signed_raw(1, kind::SET_MODE, &[0]),
            CommandOutcome::ModeNotAllowed,
        ), // standby
        (
            signed_raw(1, kind::SET_MODE, &[1]),
            CommandOutcome::ModeNotAllowed,
        ), // capture
        (
            signed_raw(1, kind::SET_MODE, &[3]),
            CommandOutcome::ModeNotAllowed,
        ), // surcharge
        (
            signed_raw(1, kind::SET_MODE, &[5]),
            CommandOutcome::ModeNotAllowed,
        ), // manual
        (
            signed_raw(1, kind::SET_MODE, &[200]),
            CommandOutcome::ModeNotAllowed,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &chunk(0, 10, 0)),
            CommandOutcome::BadChunk,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &chunk(8, 10, 3)),
            CommandOutcome::BadChunk,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &chunk(u32::MAX, u32::MAX, 1)),
            CommandOutcome::BadChunk,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &chunk(0, 4097, 1)),
            CommandOutcome::BadChunk,
        ),
        (
            signed_raw(1, kind::UPDATE_CONFIG, &chunk(7, 10, 3)),
            CommandOutcome::Accepted,
        ),
    ];
    for (frame, expected) in &cases {
        let mut v = verifier();
        let got = match v.verify(frame, &limits()) {
            Ok(_) => CommandOutcome::Accepted,
            Err(r) => {
                assert_eq!(r.counter_used(), v.last_counter() == 1, "{r:?}");
                assert_eq!(
                    r.event_body(),
                    EventBody::RemoteCommand {
                        counter: r.counter,
                        kind: r.kind,
                        outcome: r.reason.outcome()
                    }
                );
                assert!(!r.reason.to_string().is_empty());
                r.reason.outcome()
            }
        };
        assert_eq!(got, *expected, "frame {frame:02x?}");
        assert_eq!(
            v.last_counter() == 1,
            command::consumes_counter(got),
            "counter use for {got:?}"
        );
    }
    // An authentic command refused for its arguments cannot be replayed later.
    let mut v = verifier();
    let f = signed_raw(4, kind::MANUAL, &manual(2.0, 60));
    assert!(v.verify(&f, &limits()).is_err());
    let wider = Limits::new(3.0, 4 * 3600, 4096).unwrap();
    assert!(matches!(
        v.verify(&f, &wider).unwrap_err().reason,
        Reject::Replay { .. }
    ));
}

/// No kind byte, whatever its arguments, turns off overtopping protection: the only modes a
/// frame can set are drawdown and failsafe, and every kind code maps to one documented
/// command or is refused.
#[test]
fn no_command_can_select_surcharge_or_an_unsafe_mode() {
    for code in 0..=255u8 {
        let mode = SafeMode::from_code(code);
        assert!(
            matches!(
                (code, mode),
                (2, Some(SafeMode::Drawdown)) | (4, Some(SafeMode::Failsafe)) | (_, None)
            ),
            "mode code {code}"
        );
    }
    for k in 0..=255u8 {
        let mut v = verifier();
        for args in [&[][..], &[3u8][..], &[0u8; 8][..], &[0u8; 9][..]] {
            if let Ok(ok) = v.verify(&signed_raw(v.last_counter() + 1, k, args), &limits()) {
                assert!(
                    (kind::MANUAL..=kind::UPDATE_CONFIG).contains(&ok.command.kind()),
                    "kind {k}"
                );
                assert_eq!(ok.command.kind(), k);
            }
        }
    }
}

#[derive(Default)]
struct Recorder(Vec<String>);
impl CommandSink for Recorder {
    fn manual(&mut self, opening_m: f32, for_s: u32) {
        self.0.push(format!("manual {opening_m} {for_s}"));
    }
    fn resume(&mut self) {
        self.0.push("resume".into());
    }
    fn acknowledge_alarms(&mut self) {
        self.0.push("ack".into());
    }
    fn set_mode(&mut self, mode: SafeMode) {
        self.0.push(format!("mode {mode:?}"));
    }
    fn config_chunk(&mut self, chunk: &ConfigChunk<'_>) {
        self.0.push(format!(
            "chunk {} {} {}",
            chunk.offset,
            chunk.total_len,
            chunk.bytes.len()
        ));
    }
}

/// `dispatch` calls the sink method matching each command, with its arguments.
#[test]
fn dispatch_reaches_the_matching_sink_method() {
    let mut sink = Recorder::default();
    for cmd in [
        RemoteCommand::Manual {
            opening_m: 0.5,
            for_s: 9,
        },
        RemoteCommand::Resume,
        RemoteCommand::AcknowledgeAlarms,
        RemoteCommand::SetMode(SafeMode::Failsafe),
        RemoteCommand::UpdateConfig(ConfigChunk {
            offset: 2,
            total_len: 5,
            bytes: &[1, 2, 3],
        }),
    ] {
        command::dispatch(&cmd, &mut sink);
    }
    assert_eq!(
        sink.0,
        [
            "manual 0.5 9",
            "resume",
            "ack",
            "mode Failsafe",
            "chunk 2 5 3"
        ]
    );
}

/// The controller's commands come from the three kinds of the same name; the others are the
/// main loop's.
#[test]
fn control_mapping() {
    use holdback_core::control::Command;
    let m = RemoteCommand::Manual {
        opening_m: 0.25,
        for_s: 30,
    };
    assert_eq!(
        command::control_command(&m),
        Some(Command::Manual {
            opening_m: 0.25,
            for_s: 30
        })
    );
    assert_eq!(
        command::control_command(&RemoteCommand::Resume),
        Some(Command::Resume)
    );
    assert_eq!(
        command::control_command(&RemoteCommand::AcknowledgeAlarms),
        Some(Command::AcknowledgeAlarms)
    );
    assert_eq!(
        command::control_command(&RemoteCommand::SetMode(SafeMode::Failsafe)),
        None
    );
}

/// Constructors and the signer refuse what they cannot honour.
#[test]
fn constructor_and_signer_errors() {
    assert_eq!(Verifier::new(1, &[]).unwrap_err(), CommandError::EmptyKey);
    assert!(Limits::new(0.0, 10, 0).is_err());
    assert!(Limits::new(f32::NAN, 10, 0).is_err());
    assert!(Limits::new(1.0, 0, 0).is_err());
    let mut small = [0u8; MIN_FRAME_LEN - 1];
    assert_eq!(
        command::sign(&KEY, 1, 1, &RemoteCommand::Resume, &mut small),
        Err(CommandError::BufferTooSmall {
            len: MIN_FRAME_LEN - 1,
            needed: MIN_FRAME_LEN
        })
    );
    let mut buf = [0u8; MAX_FRAME_LEN];
    let too_long = [0u8; MAX_CHUNK_LEN + 1];
    let chunk = RemoteCommand::UpdateConfig(ConfigChunk {
        offset: 0,
        total_len: 100,
        bytes: &too_long,
    });
    assert_eq!(
        command::sign(&KEY, 1, 1, &chunk, &mut buf),
        Err(CommandError::Unencodable)
    );
    assert_eq!(
        command::sign(&[], 1, 1, &RemoteCommand::Resume, &mut buf),
        Err(CommandError::EmptyKey)
    );
    // The Debug form never shows the key.
    let shown = format!("{:?}", verifier());
    assert!(shown.contains("last_counter") && !shown.contains("31"));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Arbitrary bytes never panic the verifier and are never accepted without the key.
    #[test]
    fn random_bytes_are_never_accepted(bytes in proptest::collection::vec(any::<u8>(), 0..160)) {
        let mut v = verifier();
        prop_assert!(v.verify(&bytes, &limits()).is_err());
        prop_assert_eq!(v.last_counter(), 0);
    }

    /// Well-formed frames for this device with any counter, kind and arguments but a tag not
    /// made with the key are refused as forged; the same fields signed with the key verify or
    /// are refused only for their contents.
    #[test]
    fn frames_without_the_key_are_forged(
        counter in 1u32..,
        k in any::<u8>(),
        args in proptest::collection::vec(any::<u8>(), 0..=72),
        tag in proptest::array::uniform32(any::<u8>()),
        key in proptest::collection::vec(any::<u8>(), 1..80),
    ) {
        let mut frame = vec![1u8];
        frame.extend_from_slice(&DEVICE.to_le_bytes());
        frame.extend_from_slice(&counter.to_le_bytes());
        frame.push(k);
        frame.extend_from_slice(&args);
        frame.extend_from_slice(&tag);
        let mut v = verifier();
        prop_assert_eq!(v.verify(&frame, &limits()).unwrap_err().reason, Reject::BadTag);

        // Signed with some other key: also forged (unless that key is the device key).
        let mut buf = [0u8; 256];
        let n = command::sign_raw(&key, DEVICE, counter, k, &args, &mut buf).unwrap();
        let r = v.verify(&buf[..n], &limits());
        if key != KEY {
            prop_assert_eq!(r.unwrap_err().reason, Reject::BadTag);
        }

        // Signed with the key: authentic, so anything but a forgery or replay.
        let n = command::sign_raw(&KEY, DEVICE, counter, k, &args, &mut buf).unwrap();
        match v.verify(&buf[..n], &limits()) {
            Ok(ok) => prop_assert_eq!(ok.counter, counter),
            Err(r) => prop_assert!(r.counter_used(), "{:?}", r),
        }
        prop_assert_eq!(v.last_counter(), counter);
    }
}
