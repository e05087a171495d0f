//! Event log on the fake NOR flash: read-back, wrap-around, sample thinning, the dump reader,
//! and a power-cut campaign that cuts power after every single flash event of a workload.

use holdback_core::event::{
    AlarmKind, EventBody, EventRecord, FaultKind, FaultSource, HealthFlags, ModeCode,
};
use holdback_firmware::eventlog::dump::{DumpEntry, DumpReader, Geometry};
use holdback_firmware::eventlog::ram_flash::RamFlash;
use holdback_firmware::eventlog::{EventLog, SamplePolicy};

const SIZE: usize = 1024;
const PAGE: usize = 256;
type Flash = RamFlash<SIZE, 1, 4, PAGE>;

fn geometry() -> Geometry {
    Geometry::new(1, 4, PAGE).unwrap()
}

/// Record body number `i` of a workload: every kind of record in turn.
fn body(i: u32) -> EventBody {
    let x = i as f32;
    match i % 5 {
        0 => EventBody::Sample {
            stage_m: 0.01 * x,
            storage_m3: 10.0 * x,
            release_m3s: 0.001 * x,
            opening: 0.5,
            mode: ModeCode::Capture,
            health: HealthFlags(0),
        },
        1 => EventBody::Decision {
            target_release_m3s: 0.2,
            opening_cmd: 0.01 * x,
        },
        2 => EventBody::FaultRaised {
            source: FaultSource::RainGauge,
            kind: FaultKind::Timeout,
        },
        3 => EventBody::ModeChange {
            from: ModeCode::Standby,
            to: ModeCode::Surcharge,
            reason: 1,
        },
        _ => EventBody::Alarm {
            kind: AlarmKind::LowFreeboard,
            value: x,
        },
    }
}

fn expected(seq: u32) -> EventRecord {
    EventRecord {
        seq,
        time_s: seq * 60,
        body: body(seq),
    }
}

fn read_all(log: &mut EventLog<&mut Flash>) -> Vec<EventRecord> {
    let mut out = vec![];
    log.for_each(|r| out.push(r.expect("stored item is a valid frame")))
        .unwrap();
    out
}

fn dump_records(image: &[u8]) -> (Vec<EventRecord>, usize) {
    let mut recs = vec![];
    let mut corrupt = 0;
    for e in DumpReader::new(image, geometry()).unwrap() {
        match e {
            DumpEntry::Record { record, .. } => recs.push(record),
            DumpEntry::Corrupt { .. } => corrupt += 1,
        }
    }
    (recs, corrupt)
}

/// Run `n` appends; returns the seqs whose append returned Ok, stopping at the first error.
fn workload(flash: &mut Flash, n: u32) -> Vec<u32> {
    let mut committed = vec![];
    let Ok(mut log) = EventLog::new(flash, 0..SIZE as u32, SamplePolicy::new(1)) else {
        return committed;
    };
    for i in 0..n {
        match log.append(i * 60, body(i)) {
            Ok(seq) => {
                assert_eq!(seq, i);
                committed.push(seq);
            }
            Err(_) => break,
        }
    }
    committed
}

#[test]
fn records_read_back_in_order_and_log_continues_after_reopen() {
    let mut flash = Flash::new(true);
    let committed = workload(&mut flash, 12);
    assert_eq!(committed.len(), 12);
    let mut log = EventLog::new(&mut flash, 0..SIZE as u32, SamplePolicy::new(1)).unwrap();
    let recs = read_all(&mut log);
    assert_eq!(recs, (0..12).map(expected).collect::<Vec<_>>());
    assert_eq!(log.next_seq(), 12);
    assert_eq!(log.append(12 * 60, body(12)).unwrap(), 12);
    assert_eq!(read_all(&mut log).last(), Some(&expected(12)));
}

/// Over-full: the oldest records go, the newest stay, no holes; the push path never
/// programs a flash word twice between erases (`strict_once`).
#[test]
fn when_full_the_oldest_records_go_first() {
    let mut flash = Flash::new(true);
    let committed = workload(&mut flash, 100);
    assert_eq!(committed.len(), 100);
    let mut log = EventLog::new(&mut flash, 0..SIZE as u32, SamplePolicy::new(1)).unwrap();
    let recs = read_all(&mut log);
    assert!(recs.len() >= 12 && recs.len() < 100, "{}", recs.len());
    let first = recs[0].seq;
    assert_eq!(recs, (first..100).map(expected).collect::<Vec<_>>());
    let _ = log.release();
    let (dumped, corrupt) = dump_records(flash.image());
    assert_eq!(dumped, recs);
    assert_eq!(corrupt, 0);
}

/// Standby samples are thinned to one in N; storm-mode samples are all kept; the first
/// sample after a mode change is always kept; other records are never thinned.
#[test]
fn sample_policy_thins_dry_weather_only() {
    let mut flash = Flash::new(false);
    let mut log = EventLog::new(&mut flash, 0..SIZE as u32, SamplePolicy::new(4)).unwrap();
    let sample = |mode| EventBody::Sample {
        stage_m: 0.1,
        storage_m3: 1.0,
        release_m3s: 0.0,
        opening: 0.0,
        mode,
        health: HealthFlags(0),
    };
    let mut written = vec![];
    for t in 0..8 {
        written.push(
            log.log_sample(t, sample(ModeCode::Standby))
                .unwrap()
                .is_some(),
        );
    }
    for t in 8..11 {
        written.push(
            log.log_sample(t, sample(ModeCode::Capture))
                .unwrap()
                .is_some(),
        );
    }
    written.push(
        log.log_sample(11, sample(ModeCode::Standby))
            .unwrap()
            .is_some(),
    );
    written.push(
        log.log_sample(12, sample(ModeCode::Standby))
            .unwrap()
            .is_some(),
    );
    let alarm = EventBody::Alarm {
        kind: AlarmKind::HighStage,
        value: 1.0,
    };
    written.push(log.log_sample(13, alarm).unwrap().is_some());
    let t = true;
    let f = false;
    assert_eq!(written, [t, f, f, f, t, f, f, f, t, t, t, t, f, t]);
    let times: Vec<u32> = read_all(&mut log).iter().map(|r| r.time_s).collect();
    assert_eq!(times, [0, 4, 8, 9, 10, 11, 13]);
}

/// The dump reader reports a damaged item with its offset and reads on past it.
#[test]
fn dump_reader_reports_corrupt_item_and_continues() {
    let mut flash = Flash::new(false);
    workload(&mut flash, 5);
    let mut image = *flash.image();
    let (clean, _) = dump_records(&image);
    assert_eq!(clean, (0..5).map(expected).collect::<Vec<_>>());
    // Damage one data byte of the second item.
    let offsets: Vec<usize> = DumpReader::new(&image, geometry())
        .unwrap()
        .filter_map(|e| match e {
            DumpEntry::Record { offset, .. } => Some(offset),
            _ => None,
        })
        .collect();
    image[offsets[1] + 10] ^= 0x01;
    let entries: Vec<DumpEntry> = DumpReader::new(&image, geometry()).unwrap().collect();
    assert_eq!(entries.len(), 5);
    match entries[1] {
        DumpEntry::Corrupt { offset, len, .. } => {
            assert_eq!(offset, offsets[1]);
            assert_eq!(len, offsets[2] - offsets[1]);
        }
        other => panic!("expected corrupt, got {other:?}"),
    }
    assert!(matches!(entries[4], DumpEntry::Record { record, .. } if record == expected(4)));
}

/// Cut power after every flash event (byte programmed or page erased) of a workload, for
/// every event count from 0 to the whole workload. After each cut, power on and reopen:
///
/// - the log opens;
/// - every record read back is exactly the record appended with that sequence number (no
///   corrupt or half-written record accepted), in increasing order with no holes;
/// - it ends at the last committed record, or at the one whose write was cut (it may have
///   completed before the error);
/// - without wrap-around, every committed record reads back;
/// - the dump reader, run on the image before reopening, yields the same records;
/// - the log goes on: a new append works and reads back.
fn campaign(n: u32) -> (usize, usize) {
    let mut reference = Flash::new(false);
    assert_eq!(workload(&mut reference, n).len(), n as usize);
    let total_events = reference.events();
    let kept = EventLog::new(&mut reference, 0..SIZE as u32, SamplePolicy::new(1))
        .map(|mut l| read_all(&mut l).len())
        .unwrap();
    assert_eq!(
        kept == n as usize,
        reference_fits(n),
        "workload of {n} must (not) wrap"
    );
    let mut corrupt_regions = 0;
    for cut in 0..=total_events {
        let mut flash = Flash::new(false);
        flash.cut_after(cut);
        let committed = workload(&mut flash, n);
        flash.power_on();
        let (dumped, corrupt) = dump_records(flash.image());
        corrupt_regions += corrupt;
        let mut log = EventLog::new(&mut flash, 0..SIZE as u32, SamplePolicy::new(1))
            .unwrap_or_else(|e| panic!("cut {cut}: reopen failed: {e:?}"));
        let recs = read_all(&mut log);
        for r in &recs {
            assert_eq!(*r, expected(r.seq), "cut {cut}: wrong record accepted");
        }
        for w in recs.windows(2) {
            assert_eq!(w[1].seq, w[0].seq + 1, "cut {cut}: hole in the log");
        }
        let last_committed = committed.last().copied();
        let newest = recs.last().map(|r| r.seq);
        let in_flight = last_committed.map_or(0, |s| s + 1);
        assert!(
            newest == last_committed || newest == Some(in_flight),
            "cut {cut}: newest {newest:?}, last committed {last_committed:?}"
        );
        if reference_fits(n) {
            let read: Vec<u32> = recs.iter().map(|r| r.seq).collect();
            for s in &committed {
                assert!(read.contains(s), "cut {cut}: committed record {s} lost");
            }
        }
        assert_eq!(
            dumped, recs,
            "cut {cut}: dump reader disagrees with the queue"
        );
        let next = log.next_seq();
        log.append(next * 60, body(next)).unwrap();
        assert_eq!(
            read_all(&mut log).last(),
            Some(&expected(next)),
            "cut {cut}"
        );
    }
    (total_events + 1, corrupt_regions)
}

fn reference_fits(n: u32) -> bool {
    n <= 12
}

#[test]
fn power_cut_campaign() {
    let (small, c1) = campaign(12);
    let (wrap, c2) = campaign(60);
    println!(
        "power-cut campaign: {small} cut points without wrap, {wrap} with wrap-around, \
         {} in all; dump reader reported {} corrupt regions",
        small + wrap,
        c1 + c2
    );
    // Every item is at least 24 bytes (8-byte header + 13-byte frame padded to 16).
    assert!(small > 12 * 24);
    assert!(
        c1 + c2 > 0,
        "some cuts must leave a half-written item for the reader to report"
    );
}
