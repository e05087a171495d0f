//! Logs written by the real firmware code path (`EventLog` on a NOR flash) decode back to the
//! same events, from the raw image, from an exported log file and (to the telemetry's
//! quantisation) from the firmware's telemetry messages;
//! a damaged image decodes everything intact and reports the rest with offsets.

use std::path::Path;

use holdback_core::event::{EventBody, EventRecord, FaultKind, FaultSource, HealthFlags, ModeCode};
use holdback_firmware::eventlog::{EventLog, SamplePolicy};
use holdback_review::flash::VecFlash;
use holdback_review::read::{self, ReadOptions};
use holdback_review::{logfile, telemetry};

type Flash = VecFlash<1, 4, 1024>;
const PAGES: usize = 16;

fn body(i: u32) -> EventBody {
    match i % 4 {
        0 => EventBody::Sample {
            stage_m: 0.3 + 0.001 * i as f32,
            storage_m3: 12.5 * i as f32,
            release_m3s: 0.01,
            opening: 0.25,
            mode: ModeCode::Capture,
            health: HealthFlags(0),
        },
        1 => EventBody::RainTotal {
            window_s: 300,
            depth_mm: 0.2 * (i % 7) as f32,
        },
        2 => EventBody::Decision {
            target_release_m3s: 0.1,
            opening_cmd: 0.02 * (i % 50) as f32,
        },
        _ => EventBody::FaultRaised {
            source: FaultSource::StageSensor,
            kind: FaultKind::Implausible,
        },
    }
}

/// Write `n` records through the firmware's EventLog; returns the flash and what the log
/// itself reads back.
fn write(n: u32) -> (Flash, Vec<EventRecord>) {
    let mut log = EventLog::new(
        Flash::new(PAGES),
        0..(PAGES * 1024) as u32,
        SamplePolicy::new(1),
    )
    .unwrap();
    for i in 0..n {
        log.append(1_735_689_600 + i * 60, body(i)).unwrap();
    }
    let mut back = Vec::new();
    log.for_each(|r| back.push(r.unwrap())).unwrap();
    (log.release(), back)
}

fn expected(seq: u32) -> EventRecord {
    EventRecord {
        seq,
        time_s: 1_735_689_600 + seq * 60,
        body: body(seq),
    }
}

fn dump(image: &[u8]) -> read::DecodedLog {
    read::read_dump(image, Flash::geometry().unwrap(), 1024)
}

/// The raw image read by the review equals what the firmware log reads back and what was
/// appended, including after the ring wrapped (oldest pages erased).
#[test]
fn firmware_image_decodes_to_the_same_events() {
    for n in [10u32, 200, 900] {
        let (flash, back) = write(n);
        let log = dump(flash.image());
        assert!(log.problems.is_empty(), "{n}: {:?}", log.problems);
        assert_eq!(log.records(), back, "{n}");
        let first = back[0].seq;
        assert_eq!(back, (first..n).map(expected).collect::<Vec<_>>());
        if n == 900 {
            assert!(first > 0, "900 records must wrap the 16 KiB ring");
        }
        // Exported log file and telemetry give the same records again.
        let bytes = logfile::write_bytes("hb-x", &back).unwrap();
        let again = read::read_bytes(&bytes, Path::new("x"), &ReadOptions::default()).unwrap();
        assert_eq!(again[0].records(), back);
        // Telemetry (the firmware's encoder) rebuilds the same sequence of records, each
        // within the scaling's quantisation (checked field by field in tests/telemetry.rs).
        let lines = telemetry::to_lines(77, &back);
        let t =
            read::read_bytes(lines.as_bytes(), Path::new("t"), &ReadOptions::default()).unwrap();
        assert_eq!(t.len(), 1);
        assert_eq!(t[0].device.as_deref(), Some("77"));
        assert!(t[0].problems.is_empty());
        let rebuilt = t[0].records();
        assert_eq!(rebuilt.len(), back.len());
        for (a, b) in rebuilt.iter().zip(&back) {
            assert_eq!((a.seq, a.time_s), (b.seq, b.time_s));
            assert_eq!(telemetry::kind_name(&a.body), telemetry::kind_name(&b.body));
        }
    }
}

/// Damage: flipped bits in an item, a page erased in the middle, an interrupted erase (end
/// marker only), and the image cut mid-page. Every record still intact decodes to exactly
/// the record written; every damaged region is reported with its offset; records after each
/// damaged region are still read.
#[test]
fn damaged_dump_decodes_everything_intact_and_reports_the_rest() {
    let (flash, back) = write(300);
    let clean = dump(flash.image());
    let offsets: Vec<(usize, u32)> = clean
        .records
        .iter()
        .map(|l| (l.offset, l.record.seq))
        .collect();
    let mut img = flash.image().to_vec();
    // 1. Flip a bit in the data of one item of page 2.
    let (off_a, seq_a) = *offsets
        .iter()
        .find(|(o, _)| *o / 1024 == 2 && *o % 1024 > 100)
        .unwrap();
    img[off_a + 10] ^= 0x08;
    // 2. Erase page 5 in the middle of the log.
    img[5 * 1024..6 * 1024].fill(0xFF);
    // 3. Interrupted erase of page 8: start marker erased, the rest as it was.
    img[8 * 1024..8 * 1024 + 4].fill(0xFF);
    // 4. Cut the image 300 bytes into its last page.
    let cut = (PAGES - 1) * 1024 + 300;
    img.truncate(cut);
    let log = dump(&img);
    for r in &log.records {
        assert_eq!(
            r.record,
            expected(r.record.seq),
            "a damaged record was accepted"
        );
    }
    let got: Vec<u32> = log.records.iter().map(|l| l.record.seq).collect();
    let lost_pages = [5usize, 8, PAGES - 1];
    for &(o, s) in &offsets {
        let damaged = s == seq_a || lost_pages.contains(&(o / 1024));
        assert_eq!(got.contains(&s), !damaged, "seq {s} at offset {o}");
    }
    assert!(
        log.problems
            .iter()
            .any(|p| p.offset == off_a && p.why.contains("crc")),
        "{:?}",
        log.problems
    );
    assert!(
        log.problems
            .iter()
            .any(|p| p.offset == 8 * 1024 && p.len == 1024),
        "{:?}",
        log.problems
    );
    assert!(
        log.problems
            .iter()
            .any(|p| p.offset == cut - 300 && p.len == 300 && p.why.contains("truncated"))
    );
    // The erased page leaves a sequence gap, reported as such.
    assert!(!log.gaps().is_empty());
    assert!(got.len() > back.len() / 2);
}

/// Arbitrary damage never panics the readers, and every valid record they return is one
/// that was written (seeded pseudo-random damage, 256 cases).
#[test]
fn random_damage_never_accepts_a_wrong_record() {
    let (flash, _) = write(400);
    let mut x = 0x1234_5678_u64;
    let mut rnd = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    };
    let file = logfile::write_bytes("hb-y", &dump(flash.image()).records()).unwrap();
    for _ in 0..256 {
        let mut img = flash.image().to_vec();
        let mut f = file.clone();
        for _ in 0..(rnd() % 8 + 1) {
            let i = (rnd() as usize) % img.len();
            img[i] ^= 1 << (rnd() % 8);
            let j = 28 + (rnd() as usize) % (f.len() - 28);
            f[j] = rnd() as u8;
        }
        for r in dump(&img).records {
            assert_eq!(r.record, expected(r.record.seq));
        }
        for r in read::read_bytes(&f, Path::new("f"), &ReadOptions::default()).unwrap()[0].records()
        {
            assert_eq!(r, expected(r.seq));
        }
    }
}
