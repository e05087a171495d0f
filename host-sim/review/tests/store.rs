//! The fleet store on SQLite (always) and PostgreSQL (`#[ignore]`d; `scripts/pg-test.sh`
//! runs them against a throwaway server with `HOLDBACK_PG_URL`): idempotent import by
//! (device, seq), the v1 → v2 migration without losing rows, and the fleet questions, on
//! demo logs written by the firmware's event log.

use std::path::{Path, PathBuf};

use holdback_review::cli::import_tree;
use holdback_review::demo;
use holdback_review::read::{self, ReadOptions};
use holdback_review::store::Store;

struct Fleet {
    dir: PathBuf,
    ponds: Vec<PathBuf>,
    dumps: Vec<PathBuf>,
}

/// A small demo fleet on disk (3 ponds, 75 days, dumps every 25 days, written by the
/// firmware's EventLog), made once and shared by the tests of this file.
fn demo_fleet() -> &'static Fleet {
    static FLEET: std::sync::OnceLock<Fleet> = std::sync::OnceLock::new();
    FLEET.get_or_init(|| {
        let tmp = PathBuf::from(env!("CARGO_TARGET_TMPDIR"));
        remove_stale_fleets(&tmp);
        let dir = tmp.join(format!("review-store-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let (ponds, dumps) = demo::write_fleet(&dir, 3, 11, 2025, 75, 25, 256).unwrap();
        let ponds = ponds
            .iter()
            .map(|p| {
                dir.join("ponds")
                    .join(format!("{}.json", p.pond.info.pond_id))
            })
            .collect();
        Fleet { dir, ponds, dumps }
    })
}

/// Fleets of earlier runs: one folder per test process (processes may run side by side, so
/// each writes its own), about 17 MB each, which a static cannot remove at exit. Those not
/// touched for an hour are removed here, so that the folder does not grow run after run.
fn remove_stale_fleets(tmp: &Path) {
    let Ok(entries) = std::fs::read_dir(tmp) else {
        return;
    };
    for e in entries.flatten() {
        let stale = e
            .metadata()
            .and_then(|m| m.modified())
            .ok()
            .and_then(|t| t.elapsed().ok())
            .is_some_and(|age| age > std::time::Duration::from_secs(3600));
        if stale && e.file_name().to_string_lossy().starts_with("review-store-") {
            let _ = std::fs::remove_dir_all(e.path());
        }
    }
}

fn snapshot(store: &mut Store) -> (Vec<String>, (i64, i64, i64, i64)) {
    let storms = store
        .storms(None)
        .unwrap()
        .iter()
        .map(|s| serde_json::to_string(s).unwrap())
        .collect();
    (storms, store.counts().unwrap())
}

/// Importing the same dumps twice (and overlapping monthly dumps, which repeat records)
/// changes nothing the second time: same rows, same storms.
fn idempotent_import(url: &str, ponds: &[PathBuf], dumps: &[PathBuf]) {
    let mut store = Store::open(url).unwrap();
    import_tree(&mut store, ponds, dumps, &ReadOptions::default()).unwrap();
    let first = snapshot(&mut store);
    let (records, _, storms, nponds) = first.1;
    assert_eq!(nponds, 3);
    assert!(storms > 3, "{storms} storms");
    // Every record of every dump is in the store exactly once.
    let mut distinct = std::collections::BTreeSet::new();
    for d in dumps {
        let dev = d
            .parent()
            .unwrap()
            .file_name()
            .unwrap()
            .to_string_lossy()
            .into_owned();
        for l in read::read_file(d, &ReadOptions::default()).unwrap() {
            for r in l.records {
                distinct.insert((dev.clone(), r.record.seq));
            }
        }
    }
    assert_eq!(records as usize, distinct.len());
    let report = {
        let logs = read::read_file(&dumps[0], &ReadOptions::default()).unwrap();
        let dev = dumps[0]
            .parent()
            .unwrap()
            .file_name()
            .unwrap()
            .to_string_lossy()
            .into_owned();
        store
            .import(&logs[0], &dumps[0].display().to_string(), Some(&dev))
            .unwrap()
    };
    assert_eq!(report.new_records, 0);
    import_tree(&mut store, ponds, dumps, &ReadOptions::default()).unwrap();
    assert_eq!(
        snapshot(&mut store),
        first,
        "second import changed the store"
    );
    drop(store);
    let mut again = Store::open(url).unwrap();
    assert_eq!(snapshot(&mut again), first, "reopening changed the store");
}

/// A v1 store (records only) migrates to v2: no record, pond or problem row lost, and the
/// derived tables are filled with the same storms a fresh v2 import makes.
fn migration(url_v1: &str, url_v2: &str, ponds: &[PathBuf], dumps: &[PathBuf]) {
    let mut old = Store::open_at(url_v1, 1).unwrap();
    assert_eq!(old.version().unwrap(), 1);
    import_tree(&mut old, ponds, dumps, &ReadOptions::default()).unwrap();
    let before: Vec<_> = old
        .ponds()
        .unwrap()
        .iter()
        .map(|p| old.records(&p.info.pond_id).unwrap())
        .collect();
    assert!(before.iter().all(|r| !r.is_empty()));
    drop(old);
    let mut new = Store::open(url_v1).unwrap();
    assert_eq!(new.version().unwrap(), 2);
    let after: Vec<_> = new
        .ponds()
        .unwrap()
        .iter()
        .map(|p| new.records(&p.info.pond_id).unwrap())
        .collect();
    assert_eq!(before, after, "migration lost or changed records");
    let mut fresh = Store::open(url_v2).unwrap();
    import_tree(&mut fresh, ponds, dumps, &ReadOptions::default()).unwrap();
    assert_eq!(snapshot(&mut new), snapshot(&mut fresh));
}

/// The fleet questions answer from the store and agree with the storms they summarise.
fn questions(url: &str, ponds: &[PathBuf], dumps: &[PathBuf]) {
    let mut store = Store::open(url).unwrap();
    import_tree(&mut store, ponds, dumps, &ReadOptions::default()).unwrap();
    let storms = store.storms(None).unwrap();
    let ex = store.exceedances(2025).unwrap();
    for r in &ex {
        let n = storms
            .iter()
            .filter(|s| s.pond_id == r.pond_id && s.year == 2025)
            .filter(|s| {
                s.flags
                    .contains(&holdback_review::storm::Flag::PermitExceeded)
            })
            .count();
        assert_eq!(r.exceeded_storms as usize, n);
        assert!(n > 0);
    }
    let fb = store.freeboard_vs_return_period().unwrap();
    assert_eq!(fb.len(), storms.len());
    assert!(
        fb.windows(2)
            .all(|w| w[0].rp_years.unwrap_or(f64::MIN) >= w[1].rp_years.unwrap_or(f64::MIN))
    );
    assert!(!store.drawdown_trend().unwrap().is_empty());
    let wear = store.gate_wear_ranking(Some(2025)).unwrap();
    assert_eq!(wear.len(), 3);
    assert!(
        wear.windows(2)
            .all(|w| w[0].budget_ratio >= w[1].budget_ratio)
    );
    let health = store.sensor_health_ranking().unwrap();
    assert_eq!(health.len(), 3);
    assert!(
        health
            .windows(2)
            .all(|w| w[0].sensor_score >= w[1].sensor_score)
    );
}

fn sqlite(dir: &Path, name: &str) -> String {
    dir.join(name).display().to_string()
}

#[test]
fn sqlite_import_is_idempotent() {
    let f = demo_fleet();
    idempotent_import(&sqlite(&f.dir, "a.sqlite"), &f.ponds, &f.dumps);
}

#[test]
fn sqlite_migration_v1_to_v2_keeps_every_row() {
    let f = demo_fleet();
    migration(
        &sqlite(&f.dir, "v1.sqlite"),
        &sqlite(&f.dir, "v2.sqlite"),
        &f.ponds,
        &f.dumps,
    );
}

#[test]
fn sqlite_answers_the_fleet_questions() {
    let f = demo_fleet();
    questions(&sqlite(&f.dir, "q.sqlite"), &f.ponds, &f.dumps);
}

/// `HOLDBACK_PG_URL` with a fresh schema per use, so runs never see each other's rows.
fn pg_url(schema: &str) -> String {
    let base = std::env::var("HOLDBACK_PG_URL")
        .expect("HOLDBACK_PG_URL must point at a PostgreSQL server");
    let mut c = postgres::Client::connect(&base, postgres::NoTls).unwrap();
    c.batch_execute(&format!(
        "DROP SCHEMA IF EXISTS {schema} CASCADE; CREATE SCHEMA {schema};"
    ))
    .unwrap();
    format!("{base} options='-c search_path={schema}'")
}

#[test]
#[ignore = "needs a PostgreSQL server: scripts/pg-test.sh"]
fn postgres_store_import_is_idempotent_migrates_and_answers() {
    let f = demo_fleet();
    let (ponds, dumps) = (&f.ponds, &f.dumps);
    idempotent_import(&pg_url("hb_idem"), ponds, dumps);
    migration(&pg_url("hb_v1"), &pg_url("hb_v2"), ponds, dumps);
    questions(&pg_url("hb_q"), ponds, dumps);
    // SQLite and PostgreSQL hold the same storms for the same logs.
    let dir = tempfile::tempdir().unwrap();
    let mut a = Store::open(&sqlite(dir.path(), "s.sqlite")).unwrap();
    import_tree(&mut a, ponds, dumps, &ReadOptions::default()).unwrap();
    let mut b = Store::open(&pg_url("hb_q")).unwrap();
    import_tree(&mut b, ponds, dumps, &ReadOptions::default()).unwrap();
    assert_eq!(snapshot(&mut a), snapshot(&mut b));
}

/// A device whose sequence numbers restarted sends records under seqs already stored: they
/// are not stored over the old ones, and each is reported as a problem (never dropped
/// silently); the same file again adds nothing new.
#[test]
fn sqlite_conflicting_seq_is_reported_not_dropped_silently() {
    use holdback_core::event::{EventBody, EventRecord};
    let dir = tempfile::tempdir().unwrap();
    let mut store = Store::open(&sqlite(dir.path(), "c.sqlite")).unwrap();
    let recs = |t0: u32| -> Vec<EventRecord> {
        (0..20)
            .map(|k| EventRecord {
                seq: k,
                time_s: t0 + k * 300,
                body: EventBody::RainTotal {
                    window_s: 300,
                    depth_mm: 0.2,
                },
            })
            .collect()
    };
    let as_log = |r: &[EventRecord]| {
        let bytes = holdback_review::logfile::write_bytes("hb-c", r).unwrap();
        read::read_bytes(&bytes, Path::new("c"), &ReadOptions::default())
            .unwrap()
            .remove(0)
    };
    let first = store.import(&as_log(&recs(1_000_000)), "a", None).unwrap();
    assert_eq!((first.new_records, first.conflicts), (20, 0));
    let second = store.import(&as_log(&recs(2_000_000)), "b", None).unwrap();
    assert_eq!((second.new_records, second.conflicts), (0, 20));
    assert_eq!(store.records("hb-c").unwrap(), recs(1_000_000));
    let probs = store.problems("hb-c").unwrap();
    assert_eq!(probs.len(), 20);
    assert!(probs[0].3.contains("different contents"));
    let again = store.import(&as_log(&recs(1_000_000)), "a", None).unwrap();
    assert_eq!((again.new_records, again.conflicts), (0, 0));
}
