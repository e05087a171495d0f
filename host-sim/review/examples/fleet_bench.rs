//! Timed example: a fleet of 200 pond-years (100 invented ponds × 2 years, dry-weather
//! samples thinned as the devices do, 1-minute samples in storms) imported into a SQLite
//! store, then the fleet report (HTML + every table as CSV). Target for the report: < 30 s.
//!
//! `cargo run --release -p holdback-review --example fleet_bench [ponds] [years]`

use std::time::Instant;

use holdback_review::demo::{self, DRY_EVERY, MemorySink};
use holdback_review::read::{self, ReadOptions};
use holdback_review::report::{self, FleetData, ReportOptions};
use holdback_review::store::Store;

fn main() -> Result<(), holdback_review::ReviewError> {
    let args: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let (n, years) = (
        args.first().copied().unwrap_or(100),
        args.get(1).copied().unwrap_or(2),
    );
    let dir = tempfile::tempdir()
        .map_err(|e| holdback_review::ReviewError::io(std::path::Path::new("tmp"), e))?;
    let url = dir.path().join("fleet.sqlite").display().to_string();
    let fleet = demo::fleet(n, 42)?;
    let mut store = Store::open(&url)?;
    let (mut t_gen, mut t_import, mut records) = (0.0, 0.0, 0usize);
    for p in &fleet {
        store.put_pond(&p.pond)?;
        let mut seq = 0;
        for y in 0..years {
            let t = Instant::now();
            let mut sink = MemorySink::new(u32::from(DRY_EVERY)).first_seq(seq);
            demo::simulate(
                p,
                holdback_review::time::start_of_year_s(2025 + y as i32),
                365,
                &mut sink,
                |_, _| Ok(()),
            )?;
            let bytes = holdback_review::logfile::write_bytes(&p.pond.info.pond_id, &sink.records)?;
            t_gen += t.elapsed().as_secs_f64();
            records += sink.records.len();
            seq = sink.next_seq();
            let t = Instant::now();
            let logs = read::read_bytes(
                &bytes,
                std::path::Path::new("year"),
                &ReadOptions::default(),
            )?;
            let r = store.import(&logs[0], &format!("{}-{y}", p.pond.info.pond_id), None)?;
            assert_eq!((r.new_records, r.conflicts), (r.records, 0));
            t_import += t.elapsed().as_secs_f64();
        }
    }
    println!(
        "{} pond-years, {records} records: generate {t_gen:.1} s, import + summarise {t_import:.1} s",
        n * years
    );
    let t = Instant::now();
    let ponds = store.ponds()?;
    let storms = store.storms(None)?;
    let health = store.health()?;
    let mut problems = std::collections::BTreeMap::new();
    for p in &ponds {
        problems.insert(
            p.info.pond_id.clone(),
            store.problems(&p.info.pond_id)?.len(),
        );
    }
    let d = FleetData {
        ponds: &ponds,
        storms: &storms,
        health: &health,
        problems: &problems,
    };
    let html = report::html(&d, &ReportOptions::default());
    let out = dir.path().join("fleet.html");
    std::fs::write(&out, &html).map_err(|e| holdback_review::ReviewError::io(&out, e))?;
    let csv = report::write_csv(&dir.path().join("csv"), &d)?;
    println!(
        "fleet report: {:.2} s ({} ponds, {} storms, HTML {:.1} MB, {} CSV tables)",
        t.elapsed().as_secs_f64(),
        ponds.len(),
        storms.len(),
        html.len() as f64 / 1e6,
        csv.len()
    );
    let t = Instant::now();
    let ex = store.exceedances(2025)?.len();
    let fb = store.freeboard_vs_return_period()?.len();
    let dd = store.drawdown_trend()?.len();
    let gw = store.gate_wear_ranking(None)?.len();
    let sh = store.sensor_health_ranking()?.len();
    println!(
        "five fleet questions: {:.3} s ({ex}, {fb}, {dd}, {gw}, {sh} rows)",
        t.elapsed().as_secs_f64()
    );
    Ok(())
}
