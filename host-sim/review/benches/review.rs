//! Import + summarise one pond-year of 1-minute samples (every sample logged, no dry-weather
//! thinning: 525,600 samples plus the events), from an exported log file into a fresh
//! SQLite store. Target: under 1 s on the project's 2-core machine. The fleet-sized run
//! (200 pond-years and the fleet report) is the timed example `fleet_bench`.

use std::path::Path;

use criterion::{BatchSize, Criterion, criterion_group, criterion_main};
use holdback_review::demo::{self, MemorySink};
use holdback_review::logfile;
use holdback_review::read::{self, ReadOptions};
use holdback_review::store::Store;

fn pond_year(c: &mut Criterion) {
    let fleet = demo::fleet(1, 3).unwrap();
    let p = &fleet[0];
    let mut sink = MemorySink::new(1);
    demo::simulate(
        p,
        holdback_review::time::start_of_year_s(2025),
        365,
        &mut sink,
        |_, _| Ok(()),
    )
    .unwrap();
    let bytes = logfile::write_bytes(&p.pond.info.pond_id, &sink.records).unwrap();
    eprintln!(
        "pond-year: {} records, {} bytes",
        sink.records.len(),
        bytes.len()
    );
    let dir = tempfile::tempdir().unwrap();
    let mut k = 0;
    let mut g = c.benchmark_group("review");
    g.sample_size(10);
    g.bench_function("pond_year_1min_import_and_summarise", |b| {
        b.iter_batched(
            || {
                k += 1;
                dir.path()
                    .join(format!("s{k}.sqlite"))
                    .display()
                    .to_string()
            },
            |url| {
                let logs =
                    read::read_bytes(&bytes, Path::new("pond-year"), &ReadOptions::default())
                        .unwrap();
                let mut store = Store::open(&url).unwrap();
                store.put_pond(&p.pond).unwrap();
                let r = store.import(&logs[0], "pond-year", None).unwrap();
                assert!(r.storms.unwrap() > 0);
                r
            },
            BatchSize::PerIteration,
        )
    });
    g.finish();
}

criterion_group!(benches, pond_year);
criterion_main!(benches);
