//! The fleet store: SQLite (one file, no server) by default, or PostgreSQL with a connection
//! string; the same schema (`SCHEMA.md`), the same SQL, the same answers.
//!
//! - Import is idempotent by `(device, seq)`: a record already stored is left as it is, so
//!   importing the same dump twice changes nothing. Decode problems are kept by
//!   `(device, source, offset)`, also idempotent.
//! - Storm summaries, pond health and gate wear are derived tables: after an import that
//!   added records, the pond's storms are summarised again from all its stored records (a
//!   storm spanning two dumps is one storm).
//! - `schema_version` holds the version; [`Store::open`] migrates an older store forward in
//!   one transaction (v1 → v2 adds the derived tables and fills them from the records).
//!
//! A URL starting `postgres://` or `postgresql://`, or holding `host=`, opens PostgreSQL;
//! anything else is a SQLite file path (`sqlite:` prefix optional).

use std::collections::BTreeMap;

use holdback_core::event::{self, EventRecord, MAX_FRAME_LEN};

use crate::error::ReviewError;
use crate::pond::{Pond, PondInfo};
use crate::rain::RainInterval;
use crate::read::DecodedLog;
use crate::storm::{self, Flag, PondHealth, StormSummary, SummaryOptions};
use crate::telemetry::kind_name;

/// The schema version this code writes.
pub const SCHEMA_VERSION: i64 = 2;

/// A value crossing the store boundary.
#[derive(Debug, Clone, PartialEq)]
pub enum Val {
    /// Integer.
    I(i64),
    /// Float.
    F(f64),
    /// Text.
    T(String),
    /// Bytes.
    B(Vec<u8>),
    /// SQL NULL (as read back).
    Null,
    /// An integer or NULL, to write.
    OI(Option<i64>),
    /// A float or NULL, to write.
    OF(Option<f64>),
    /// A text or NULL, to write.
    OT(Option<String>),
}

impl Val {
    fn i(&self) -> i64 {
        match self {
            Val::I(x) => *x,
            Val::F(x) => *x as i64,
            _ => 0,
        }
    }
    fn f(&self) -> f64 {
        match self {
            Val::I(x) => *x as f64,
            Val::F(x) => *x,
            _ => f64::NAN,
        }
    }
    fn opt_f(&self) -> Option<f64> {
        match self {
            Val::Null => None,
            v => Some(v.f()),
        }
    }
    fn t(&self) -> String {
        match self {
            Val::T(s) => s.clone(),
            Val::I(x) => x.to_string(),
            Val::F(x) => x.to_string(),
            _ => String::new(),
        }
    }
}

enum Backend {
    Sqlite(rusqlite::Connection),
    Pg(Box<postgres::Client>),
}

/// An open fleet store.
pub struct Store {
    db: Backend,
    /// Schema version of the open store (derived tables exist from 2 on).
    at: i64,
    /// Summaries wait for [`Store::set_deferred`]`(false)`.
    deferred: bool,
    /// Ponds whose summaries are out of date while deferred.
    dirty: std::collections::BTreeSet<String>,
    /// How storms are summarised.
    pub options: SummaryOptions,
}

/// What one import did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ImportReport {
    /// The device.
    pub device: String,
    /// Records in the source.
    pub records: usize,
    /// Records not stored before.
    pub new_records: usize,
    /// Problems in the source (all reported; new ones stored).
    pub problems: usize,
    /// Sequence gaps in the source.
    pub gaps: usize,
    /// Records whose (device, seq) was already stored with different contents (a device
    /// whose sequence restarted or wrapped): not stored, reported as problems, never dropped
    /// silently.
    pub conflicts: usize,
    /// Storms of the pond after the import (None: pond not registered, no summary made).
    pub storms: Option<usize>,
}

fn v1_ddl(blob: &str, clustered: &str) -> String {
    format!(
        "CREATE TABLE schema_version (version BIGINT NOT NULL);
CREATE TABLE ponds (pond_id TEXT PRIMARY KEY, name TEXT NOT NULL, info_json TEXT NOT NULL);
CREATE TABLE records (device TEXT NOT NULL, seq BIGINT NOT NULL, time_s BIGINT NOT NULL,
  kind TEXT NOT NULL, frame {blob} NOT NULL, PRIMARY KEY (device, seq)){clustered};
CREATE TABLE problems (device TEXT NOT NULL, source TEXT NOT NULL, offset_b BIGINT NOT NULL,
  len_b BIGINT NOT NULL, why TEXT NOT NULL, PRIMARY KEY (device, source, offset_b));
INSERT INTO schema_version (version) VALUES (1);"
    )
}

const V2_DDL: &str = "CREATE TABLE rain (device TEXT NOT NULL, end_s BIGINT NOT NULL,
  window_s BIGINT NOT NULL, depth_mm DOUBLE PRECISION NOT NULL, PRIMARY KEY (device, end_s));
CREATE TABLE storms (pond_id TEXT NOT NULL, start_s BIGINT NOT NULL, end_s BIGINT NOT NULL,
  year BIGINT NOT NULL, incomplete BIGINT NOT NULL, rain_depth_mm DOUBLE PRECISION,
  rp_key DOUBLE PRECISION, rp_text TEXT, rp_duration_min BIGINT,
  peak_stage_m DOUBLE PRECISION NOT NULL, freeboard_left_m DOUBLE PRECISION NOT NULL,
  freeboard_used_frac DOUBLE PRECISION NOT NULL, peak_release_ratio DOUBLE PRECISION NOT NULL,
  over_permit_s BIGINT NOT NULL, over_permit_m3 DOUBLE PRECISION NOT NULL,
  drawdown_s BIGINT, gate_moves BIGINT NOT NULL, gate_travel DOUBLE PRECISION NOT NULL,
  permit_exceeded BIGINT NOT NULL, flags TEXT NOT NULL, summary_json TEXT NOT NULL,
  PRIMARY KEY (pond_id, start_s));
CREATE INDEX storms_year_exceeded ON storms (year, permit_exceeded, pond_id);
CREATE INDEX storms_rp ON storms (rp_key);
CREATE TABLE pond_health (pond_id TEXT PRIMARY KEY, sensor_score DOUBLE PRECISION NOT NULL,
  drift_m_per_year DOUBLE PRECISION, drift_flag BIGINT NOT NULL, health_json TEXT NOT NULL);
CREATE INDEX pond_health_score ON pond_health (sensor_score);
CREATE TABLE gate_wear (pond_id TEXT NOT NULL, year BIGINT NOT NULL, moves BIGINT NOT NULL,
  travel DOUBLE PRECISION NOT NULL, days_covered DOUBLE PRECISION NOT NULL,
  budget_ratio DOUBLE PRECISION NOT NULL, over_budget BIGINT NOT NULL,
  PRIMARY KEY (pond_id, year));
CREATE INDEX gate_wear_ratio ON gate_wear (year, budget_ratio);
UPDATE schema_version SET version = 2;";

fn is_pg(url: &str) -> bool {
    url.starts_with("postgres://") || url.starts_with("postgresql://") || url.contains("host=")
}

impl Store {
    /// Open (creating or migrating as needed) the store at `url`.
    pub fn open(url: &str) -> Result<Store, ReviewError> {
        Self::open_at(url, SCHEMA_VERSION)
    }

    /// Open at a given schema version: a new store is created at `version`, an older one is
    /// migrated up to it. Only tests and migration drills need a version other than the
    /// current one.
    pub fn open_at(url: &str, version: i64) -> Result<Store, ReviewError> {
        let db = if is_pg(url) {
            let c = postgres::Client::connect(url, postgres::NoTls)
                .map_err(|e| ReviewError::store("connect to PostgreSQL", e))?;
            Backend::Pg(Box::new(c))
        } else {
            let path = url.strip_prefix("sqlite:").unwrap_or(url);
            let c = rusqlite::Connection::open(path)
                .map_err(|e| ReviewError::store(&format!("open SQLite file {path}"), e))?;
            // 16 KiB pages (taken by a new file only; an existing store keeps its own): a
            // pond-year is half a million ~60-byte rows, and 4 KiB pages spent a fifth of the
            // import's CPU on b-tree page splits and WAL frames (measured with the
            // `pond_year` bench). The rollback journal (SQLite's default, `DELETE`) with
            // synchronous=NORMAL: each import is one atomic transaction, so a crash loses at
            // most that import, never the store's consistency; unlike WAL it does not write
            // every new page twice (log, then checkpoint), which cost about a fifth of a
            // bulk import into a fresh store (measured with the same bench).
            c.execute_batch(
                "PRAGMA page_size=16384; PRAGMA journal_mode=DELETE; PRAGMA synchronous=NORMAL;
                 PRAGMA cache_size=-65536;",
            )?;
            Backend::Sqlite(c)
        };
        let mut s = Store {
            db,
            at: 0,
            deferred: false,
            dirty: Default::default(),
            options: SummaryOptions::default(),
        };
        s.migrate(version)?;
        Ok(s)
    }

    /// The schema version of the open store.
    pub fn version(&mut self) -> Result<i64, ReviewError> {
        let rows = self.query("SELECT version FROM schema_version", &[])?;
        Ok(rows.first().and_then(|r| r.first()).map_or(0, Val::i))
    }

    fn has_table(&mut self, name: &str) -> Result<bool, ReviewError> {
        let sql = match self.db {
            Backend::Sqlite(_) => {
                "SELECT COUNT(*) FROM sqlite_master WHERE type='table' AND name=$1"
            }
            Backend::Pg(_) => {
                "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = current_schema() AND table_name=$1"
            }
        };
        let r = self.query(sql, &[Val::T(name.into())])?;
        Ok(r.first().and_then(|r| r.first()).map_or(0, Val::i) > 0)
    }

    fn migrate(&mut self, target: i64) -> Result<(), ReviewError> {
        // SQLite keeps records clustered by their key (WITHOUT ROWID): a pond's records
        // are one range scan.
        let (blob, clustered) = match self.db {
            Backend::Sqlite(_) => ("BLOB", " WITHOUT ROWID"),
            Backend::Pg(_) => ("BYTEA", ""),
        };
        let mut v = if self.has_table("schema_version")? {
            self.version()?
        } else {
            0
        };
        if v > SCHEMA_VERSION {
            return Err(ReviewError::store(
                "open",
                format!("schema version {v} is newer than this tool ({SCHEMA_VERSION})"),
            ));
        }
        if v == 0 && target >= 1 {
            self.in_tx(|s| s.batch(&v1_ddl(blob, clustered)))?;
            v = 1;
        }
        self.at = v;
        if v == 1 && target >= 2 {
            self.in_tx(|s| {
                s.batch(V2_DDL)?;
                s.at = 2;
                // Fill the derived tables from the stored records.
                for pond in s.ponds()? {
                    s.resummarise(&pond)?;
                }
                Ok(())
            })?;
        }
        Ok(())
    }

    fn in_tx<T>(
        &mut self,
        f: impl FnOnce(&mut Store) -> Result<T, ReviewError>,
    ) -> Result<T, ReviewError> {
        self.batch("BEGIN")?;
        match f(self) {
            Ok(x) => {
                self.batch("COMMIT")?;
                Ok(x)
            }
            Err(e) => {
                let _ = self.batch("ROLLBACK");
                Err(e)
            }
        }
    }

    fn batch(&mut self, sql: &str) -> Result<(), ReviewError> {
        match &mut self.db {
            Backend::Sqlite(c) => c.execute_batch(sql)?,
            Backend::Pg(c) => c.batch_execute(sql)?,
        }
        Ok(())
    }

    fn exec(&mut self, sql: &str, params: &[Val]) -> Result<u64, ReviewError> {
        match &mut self.db {
            Backend::Sqlite(c) => {
                let mut st = c.prepare_cached(sql)?;
                Ok(st.execute(rusqlite::params_from_iter(params.iter().map(sq)))? as u64)
            }
            Backend::Pg(c) => {
                let boxed = pg_params(params);
                let refs: Vec<&(dyn postgres::types::ToSql + Sync)> =
                    boxed.iter().map(|b| b.as_ref()).collect();
                Ok(c.execute(sql, &refs)?)
            }
        }
    }

    fn query(&mut self, sql: &str, params: &[Val]) -> Result<Vec<Vec<Val>>, ReviewError> {
        match &mut self.db {
            Backend::Sqlite(c) => {
                let mut st = c.prepare_cached(sql)?;
                let n = st.column_count();
                let rows =
                    st.query_map(rusqlite::params_from_iter(params.iter().map(sq)), |r| {
                        (0..n)
                            .map(|i| {
                                Ok(match r.get_ref(i)? {
                                    rusqlite::types::ValueRef::Null => Val::Null,
                                    rusqlite::types::ValueRef::Integer(x) => Val::I(x),
                                    rusqlite::types::ValueRef::Real(x) => Val::F(x),
                                    rusqlite::types::ValueRef::Text(t) => {
                                        Val::T(String::from_utf8_lossy(t).into_owned())
                                    }
                                    rusqlite::types::ValueRef::Blob(b) => Val::B(b.to_vec()),
                                })
                            })
                            .collect::<Result<Vec<Val>, rusqlite::Error>>()
                    })?;
                Ok(rows.collect::<Result<Vec<_>, _>>()?)
            }
            Backend::Pg(c) => {
                let boxed = pg_params(params);
                let refs: Vec<&(dyn postgres::types::ToSql + Sync)> =
                    boxed.iter().map(|b| b.as_ref()).collect();
                let rows = c.query(sql, &refs)?;
                let mut out = Vec::with_capacity(rows.len());
                for r in rows {
                    let mut v = Vec::with_capacity(r.len());
                    for (i, col) in r.columns().iter().enumerate() {
                        use postgres::types::Type;
                        let t = col.type_();
                        let x = if *t == Type::INT8 {
                            r.try_get::<_, Option<i64>>(i)?.map_or(Val::Null, Val::I)
                        } else if *t == Type::INT4 {
                            r.try_get::<_, Option<i32>>(i)?
                                .map_or(Val::Null, |x| Val::I(x.into()))
                        } else if *t == Type::FLOAT8 {
                            r.try_get::<_, Option<f64>>(i)?.map_or(Val::Null, Val::F)
                        } else if *t == Type::NUMERIC {
                            // SUM over BIGINT is NUMERIC in PostgreSQL; queries cast it back.
                            Val::Null
                        } else if *t == Type::BYTEA {
                            r.try_get::<_, Option<Vec<u8>>>(i)?
                                .map_or(Val::Null, Val::B)
                        } else {
                            r.try_get::<_, Option<String>>(i)?.map_or(Val::Null, Val::T)
                        };
                        v.push(x);
                    }
                    out.push(v);
                }
                Ok(out)
            }
        }
    }

    /// Register or update a pond (its description is kept as JSON). Summaries are made again
    /// from the stored records, since limits may have changed.
    pub fn put_pond(&mut self, pond: &Pond) -> Result<(), ReviewError> {
        let json =
            serde_json::to_string(&pond.info).map_err(|e| ReviewError::store("pond json", e))?;
        self.in_tx(|s| {
            s.exec(
                "INSERT INTO ponds (pond_id, name, info_json) VALUES ($1, $2, $3)
                 ON CONFLICT (pond_id) DO UPDATE SET name = excluded.name, info_json = excluded.info_json",
                &[Val::T(pond.info.pond_id.clone()), Val::T(pond.info.name.clone()), Val::T(json)],
            )?;
            s.resummarise(pond)
        })
    }

    /// Defer summaries while importing many files (`true`); turning it off summarises every
    /// pond that changed meanwhile, once.
    pub fn set_deferred(&mut self, on: bool) -> Result<(), ReviewError> {
        self.deferred = on;
        if !on {
            let dirty = std::mem::take(&mut self.dirty);
            let ponds = self.ponds()?;
            self.in_tx(|s| {
                for p in ponds.iter().filter(|p| dirty.contains(&p.info.pond_id)) {
                    s.resummarise(p)?;
                }
                Ok(())
            })?;
        }
        Ok(())
    }

    /// Every registered pond, by id.
    pub fn ponds(&mut self) -> Result<Vec<Pond>, ReviewError> {
        let rows = self.query("SELECT pond_id, info_json FROM ponds ORDER BY pond_id", &[])?;
        rows.iter()
            .map(|r| {
                let info: PondInfo =
                    serde_json::from_str(&r[1].t()).map_err(|e| ReviewError::Pond {
                        origin: r[0].t(),
                        what: format!("stored description: {e}"),
                    })?;
                Pond::new(info)
            })
            .collect()
    }

    fn pond(&mut self, id: &str) -> Result<Option<Pond>, ReviewError> {
        Ok(self.ponds()?.into_iter().find(|p| p.info.pond_id == id))
    }

    /// Store rain intervals for a device (idempotent by interval end).
    pub fn put_rain(&mut self, device: &str, rain: &[RainInterval]) -> Result<usize, ReviewError> {
        let n = self.in_tx(|s| {
            let mut n = 0;
            for r in rain {
                n += s.exec(
                    "INSERT INTO rain (device, end_s, window_s, depth_mm) VALUES ($1, $2, $3, $4)
                     ON CONFLICT (device, end_s) DO NOTHING",
                    &[
                        Val::T(device.into()),
                        Val::I(r.end_s.into()),
                        Val::I(r.window_s.into()),
                        Val::F(r.depth_mm.into()),
                    ],
                )? as usize;
            }
            if n > 0
                && let Some(p) = s.pond(device)?
            {
                s.resummarise(&p)?;
            }
            Ok(n)
        })?;
        Ok(n)
    }

    /// Import a decoded log. `device` names the device when the source does not (a raw dump);
    /// a source that names a different device is refused.
    pub fn import(
        &mut self,
        log: &DecodedLog,
        source: &str,
        device: Option<&str>,
    ) -> Result<ImportReport, ReviewError> {
        let dev = match (device, log.device.as_deref()) {
            (Some(a), Some(b)) if a != b => {
                return Err(ReviewError::Usage(format!(
                    "{source}: the file is from device {b:?}, not {a:?}"
                )));
            }
            (Some(a), _) => a.to_string(),
            (None, Some(b)) => b.to_string(),
            (None, None) => {
                return Err(ReviewError::Usage(format!(
                    "{source}: a raw dump does not say which device wrote it: give --device"
                )));
            }
        };
        self.in_tx(|s| {
            let had_records = !s
                .query("SELECT seq FROM records WHERE device = $1 LIMIT 1", &[Val::T(dev.clone())])?
                .is_empty();
            let new = s.insert_records(&dev, log)?;
            let conflicts = if new < log.records.len() { s.conflicts(&dev, source, log)? } else { 0 };
            for p in &log.problems {
                s.exec(
                    "INSERT INTO problems (device, source, offset_b, len_b, why) VALUES ($1, $2, $3, $4, $5)
                     ON CONFLICT (device, source, offset_b) DO NOTHING",
                    &[Val::T(dev.clone()), Val::T(source.into()), Val::I(p.offset as i64), Val::I(p.len as i64), Val::T(p.why.clone())],
                )?;
            }
            let storms = match s.pond(&dev)? {
                Some(_) if s.at < 2 => None,
                Some(p) => {
                    if new > 0 && !had_records && new == log.records.len() && !s.deferred {
                        // First records of this device: what is stored is exactly the log.
                        s.summarise_records(&p, log.records())?;
                    } else if new > 0 {
                        s.resummarise(&p)?;
                    }
                    let r = s.query("SELECT COUNT(*) FROM storms WHERE pond_id = $1", &[Val::T(dev.clone())])?;
                    Some(r.first().and_then(|r| r.first()).map_or(0, Val::i) as usize)
                }
                None => None,
            };
            Ok(ImportReport {
                device: dev.clone(),
                records: log.records.len(),
                new_records: new,
                problems: log.problems.len(),
                gaps: log.gaps().len(),
                conflicts,
                storms,
            })
        })
    }

    fn insert_records(&mut self, dev: &str, log: &DecodedLog) -> Result<usize, ReviewError> {
        // Frames as the source holds them (an exported log file), else encoded once here,
        // back to back in one buffer.
        let mut encoded: Vec<u8> = Vec::new();
        let mut spans: Vec<(usize, usize)> = Vec::new();
        if log.source.is_none() {
            let mut buf = [0u8; MAX_FRAME_LEN];
            encoded.reserve(log.records.len() * 32);
            spans.reserve(log.records.len());
            for l in &log.records {
                let n = event::encode(&l.record, &mut buf)
                    .map_err(|e| ReviewError::store("encode record", e))?;
                spans.push((encoded.len(), n));
                encoded.extend_from_slice(&buf[..n]);
            }
        }
        let mut frames: Vec<(EventRecord, &[u8])> = Vec::with_capacity(log.records.len());
        for (i, l) in log.records.iter().enumerate() {
            let f = match spans.get(i) {
                Some(&(at, n)) => &encoded[at..at + n],
                None => log.frame(i).ok_or_else(|| {
                    ReviewError::store("import", format!("record {i}: frame outside its source"))
                })?,
            };
            frames.push((l.record, f));
        }
        // Many rows per statement (200: 1000 parameters, under both databases' limits).
        const ROWS: usize = 200;
        let sql_for = |n: usize| {
            let mut sql =
                String::from("INSERT INTO records (device, seq, time_s, kind, frame) VALUES ");
            for i in 0..n {
                let b = i * 5;
                if i > 0 {
                    sql.push(',');
                }
                sql.push_str(&format!(
                    "(${},${},${},${},${})",
                    b + 1,
                    b + 2,
                    b + 3,
                    b + 4,
                    b + 5
                ));
            }
            sql.push_str(" ON CONFLICT (device, seq) DO NOTHING");
            sql
        };
        let full = sql_for(ROWS);
        let mut new = 0usize;
        for chunk in frames.chunks(ROWS) {
            let sql = if chunk.len() == ROWS {
                full.clone()
            } else {
                sql_for(chunk.len())
            };
            match &mut self.db {
                Backend::Sqlite(c) => {
                    let mut st = c.prepare_cached(&sql)?;
                    let mut k = 1;
                    for (r, f) in chunk {
                        st.raw_bind_parameter(k, dev)?;
                        st.raw_bind_parameter(k + 1, r.seq)?;
                        st.raw_bind_parameter(k + 2, r.time_s)?;
                        st.raw_bind_parameter(k + 3, kind_name(&r.body))?;
                        st.raw_bind_parameter(k + 4, *f)?;
                        k += 5;
                    }
                    new += st.raw_execute()?;
                }
                Backend::Pg(c) => {
                    let mut params: Vec<Box<dyn postgres::types::ToSql + Sync>> =
                        Vec::with_capacity(chunk.len() * 5);
                    for (r, f) in chunk {
                        params.push(Box::new(dev.to_string()));
                        params.push(Box::new(i64::from(r.seq)));
                        params.push(Box::new(i64::from(r.time_s)));
                        params.push(Box::new(kind_name(&r.body).to_string()));
                        params.push(Box::new(f.to_vec()));
                    }
                    let refs: Vec<&(dyn postgres::types::ToSql + Sync)> =
                        params.iter().map(|b| b.as_ref()).collect();
                    new += c.execute(sql.as_str(), &refs)? as usize;
                }
            }
        }
        Ok(new)
    }

    /// Records of `log` not inserted because their seq was stored already: those whose
    /// stored frame differs are conflicts, kept as problems of the source.
    fn conflicts(
        &mut self,
        dev: &str,
        source: &str,
        log: &DecodedLog,
    ) -> Result<usize, ReviewError> {
        let stored: BTreeMap<u32, EventRecord> =
            self.records(dev)?.into_iter().map(|r| (r.seq, r)).collect();
        let mut n = 0;
        for l in &log.records {
            if stored.get(&l.record.seq).is_some_and(|r| r != &l.record) {
                n += 1;
                self.exec(
                    "INSERT INTO problems (device, source, offset_b, len_b, why) VALUES ($1, $2, $3, $4, $5)
                     ON CONFLICT (device, source, offset_b) DO NOTHING",
                    &[
                        Val::T(dev.into()),
                        Val::T(source.into()),
                        Val::I(l.offset as i64),
                        Val::I(0),
                        Val::T(format!(
                            "seq {} already stored with different contents (sequence restarted or wrapped?); not stored",
                            l.record.seq
                        )),
                    ],
                )?;
            }
        }
        Ok(n)
    }

    /// Every stored record of a device, in time order (a stored frame that no longer decodes
    /// is an error naming the device and seq).
    pub fn records(&mut self, device: &str) -> Result<Vec<EventRecord>, ReviewError> {
        let bad = |seq: i64, e: event::DecodeError| {
            ReviewError::store("read records", format!("device {device} seq {seq}: {e}"))
        };
        let mut out = Vec::new();
        match &mut self.db {
            Backend::Sqlite(c) => {
                let mut st = c.prepare_cached(
                    "SELECT seq, frame FROM records WHERE device = ?1 ORDER BY seq",
                )?;
                let mut rows = st.query([device])?;
                while let Some(r) = rows.next()? {
                    let seq: i64 = r.get(0)?;
                    let frame = r
                        .get_ref(1)?
                        .as_blob()
                        .map_err(|e| ReviewError::store("read records", e))?;
                    out.push(event::decode_exact(frame).map_err(|e| bad(seq, e))?);
                }
            }
            Backend::Pg(c) => {
                for r in c.query(
                    "SELECT seq, frame FROM records WHERE device = $1 ORDER BY seq",
                    &[&device],
                )? {
                    let seq: i64 = r.try_get(0)?;
                    let frame: &[u8] = r.try_get(1)?;
                    out.push(event::decode_exact(frame).map_err(|e| bad(seq, e))?);
                }
            }
        }
        out.sort_by_key(|r| (r.time_s, r.seq));
        Ok(out)
    }

    /// Stored rain intervals of a device.
    pub fn rain(&mut self, device: &str) -> Result<Vec<RainInterval>, ReviewError> {
        let rows = self.query(
            "SELECT end_s, window_s, depth_mm FROM rain WHERE device = $1 ORDER BY end_s",
            &[Val::T(device.into())],
        )?;
        Ok(rows
            .iter()
            .map(|r| RainInterval {
                end_s: r[0].i() as u32,
                window_s: r[1].i() as u32,
                depth_mm: r[2].f() as f32,
            })
            .collect())
    }

    /// Summarise a pond again from all its stored records (and stored rain, when the log has
    /// none); replaces its storms, health and wear rows.
    pub fn resummarise(&mut self, pond: &Pond) -> Result<(), ReviewError> {
        if self.at < 2 {
            return Ok(());
        }
        if self.deferred {
            self.dirty.insert(pond.info.pond_id.clone());
            return Ok(());
        }
        let records = self.records(&pond.info.pond_id)?;
        self.summarise_records(pond, records)
    }

    fn summarise_records(
        &mut self,
        pond: &Pond,
        records: Vec<EventRecord>,
    ) -> Result<(), ReviewError> {
        if self.at < 2 {
            return Ok(());
        }
        let id = pond.info.pond_id.clone();
        let rain = self.rain(&id)?;
        let csv = (!rain.is_empty()).then_some(rain.as_slice());
        let storms = storm::summarise(pond, &records, csv, &self.options);
        let health = storm::pond_health(pond, &records, &storms);
        self.write_derived(pond, &storms, &health)
    }

    fn write_derived(
        &mut self,
        pond: &Pond,
        storms: &[StormSummary],
        health: &PondHealth,
    ) -> Result<(), ReviewError> {
        let id = Val::T(pond.info.pond_id.clone());
        self.exec(
            "DELETE FROM storms WHERE pond_id = $1",
            std::slice::from_ref(&id),
        )?;
        for s in storms {
            let json = serde_json::to_string(s).map_err(|e| ReviewError::store("storm json", e))?;
            let flags: Vec<String> = s.flags.iter().map(|f| f.code()).collect();
            let opt_f = Val::OF;
            self.exec(
                "INSERT INTO storms (pond_id, start_s, end_s, year, incomplete, rain_depth_mm, rp_key, rp_text,
                   rp_duration_min, peak_stage_m, freeboard_left_m, freeboard_used_frac, peak_release_ratio,
                   over_permit_s, over_permit_m3, drawdown_s, gate_moves, gate_travel, permit_exceeded, flags,
                   summary_json)
                 VALUES ($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,$12,$13,$14,$15,$16,$17,$18,$19,$20,$21)",
                &[
                    id.clone(),
                    Val::I(s.start_s.into()),
                    Val::I(s.end_s.into()),
                    Val::I(s.year.into()),
                    Val::I(i64::from(s.incomplete)),
                    opt_f(s.rain_depth_mm.map(f64::from)),
                    opt_f(s.rarest.map(|r| r.0.sort_key())),
                    Val::OT(s.rarest.map(|r| r.0.text())),
                    Val::OI(s.rarest.map(|r| r.1.into())),
                    Val::F(s.peak_stage_m.into()),
                    Val::F(s.freeboard_left_m.into()),
                    Val::F(s.freeboard_used_frac.into()),
                    Val::F(s.peak_release_ratio.into()),
                    Val::I(s.over_permit_s.into()),
                    Val::F(s.over_permit_m3),
                    Val::OI(s.drawdown_s.map(i64::from)),
                    Val::I(s.gate_moves.into()),
                    Val::F(s.gate_travel.into()),
                    Val::I(i64::from(s.flags.contains(&Flag::PermitExceeded))),
                    Val::T(flags.join(",")),
                    Val::T(json),
                ],
            )?;
        }
        let hjson =
            serde_json::to_string(health).map_err(|e| ReviewError::store("health json", e))?;
        self.exec(
            "INSERT INTO pond_health (pond_id, sensor_score, drift_m_per_year, drift_flag, health_json)
             VALUES ($1, $2, $3, $4, $5)
             ON CONFLICT (pond_id) DO UPDATE SET sensor_score = excluded.sensor_score,
               drift_m_per_year = excluded.drift_m_per_year, drift_flag = excluded.drift_flag,
               health_json = excluded.health_json",
            &[
                id.clone(),
                Val::F(health.sensor_score.into()),
                Val::OF(health.drift_m_per_year.map(f64::from)),
                Val::I(i64::from(health.drift_flag)),
                Val::T(hjson),
            ],
        )?;
        self.exec(
            "DELETE FROM gate_wear WHERE pond_id = $1",
            std::slice::from_ref(&id),
        )?;
        for w in &health.wear {
            let share = (w.days_covered / 365.0).clamp(1.0 / 365.0, 1.0);
            let ratio = (w.moves as f32 / (pond.info.wear.moves_per_year as f32 * share))
                .max(w.travel / (pond.info.wear.travel_per_year * share));
            self.exec(
                "INSERT INTO gate_wear (pond_id, year, moves, travel, days_covered, budget_ratio, over_budget)
                 VALUES ($1, $2, $3, $4, $5, $6, $7)",
                &[
                    id.clone(),
                    Val::I(w.year.into()),
                    Val::I(w.moves.into()),
                    Val::F(w.travel.into()),
                    Val::F(w.days_covered.into()),
                    Val::F(ratio.into()),
                    Val::I(i64::from(w.over_budget)),
                ],
            )?;
        }
        Ok(())
    }

    /// Row counts of the main tables: `(records, problems, storms, ponds)`.
    pub fn counts(&mut self) -> Result<(i64, i64, i64, i64), ReviewError> {
        let mut c = |t: &str| -> Result<i64, ReviewError> {
            let r = self.query(&format!("SELECT COUNT(*) FROM {t}"), &[])?;
            Ok(r.first().and_then(|r| r.first()).map_or(0, Val::i))
        };
        Ok((c("records")?, c("problems")?, c("storms")?, c("ponds")?))
    }

    /// Storm summaries of a pond (all ponds when `None`), in time order.
    pub fn storms(&mut self, pond_id: Option<&str>) -> Result<Vec<StormSummary>, ReviewError> {
        let rows = match pond_id {
            Some(p) => self.query(
                "SELECT summary_json FROM storms WHERE pond_id = $1 ORDER BY start_s",
                &[Val::T(p.into())],
            )?,
            None => self.query(
                "SELECT summary_json FROM storms ORDER BY pond_id, start_s",
                &[],
            )?,
        };
        rows.iter()
            .map(|r| {
                serde_json::from_str(&r[0].t()).map_err(|e| ReviewError::store("storm json", e))
            })
            .collect()
    }

    /// Pond health rows, worst sensor score first.
    pub fn health(&mut self) -> Result<Vec<PondHealth>, ReviewError> {
        let rows = self.query(
            "SELECT health_json FROM pond_health ORDER BY sensor_score DESC, pond_id",
            &[],
        )?;
        rows.iter()
            .map(|r| {
                serde_json::from_str(&r[0].t()).map_err(|e| ReviewError::store("health json", e))
            })
            .collect()
    }

    /// Decode problems stored for a device: `(source, offset, len, why)`.
    pub fn problems(
        &mut self,
        device: &str,
    ) -> Result<Vec<(String, i64, i64, String)>, ReviewError> {
        let rows = self.query(
            "SELECT source, offset_b, len_b, why FROM problems WHERE device = $1 ORDER BY source, offset_b",
            &[Val::T(device.into())],
        )?;
        Ok(rows
            .iter()
            .map(|r| (r[0].t(), r[1].i(), r[2].i(), r[3].t()))
            .collect())
    }

    /// Ponds that exceeded their permit in `year`, most storms with an exceedance first.
    pub fn exceedances(&mut self, year: i32) -> Result<Vec<ExceedRow>, ReviewError> {
        let rows = self.query(
            "SELECT s.pond_id, p.name, COUNT(*), CAST(SUM(s.permit_exceeded) AS BIGINT),
                    CAST(SUM(s.over_permit_s) AS BIGINT), SUM(s.over_permit_m3)
             FROM storms s JOIN ponds p ON p.pond_id = s.pond_id
             WHERE s.year = $1
             GROUP BY s.pond_id, p.name
             HAVING SUM(s.permit_exceeded) > 0
             ORDER BY 4 DESC, 5 DESC, s.pond_id",
            &[Val::I(year.into())],
        )?;
        Ok(rows
            .iter()
            .map(|r| ExceedRow {
                pond_id: r[0].t(),
                name: r[1].t(),
                storms: r[2].i(),
                exceeded_storms: r[3].i(),
                over_permit_s: r[4].i(),
                over_permit_m3: r[5].f(),
            })
            .collect())
    }

    /// Freeboard used against storm return period, rarest storms first.
    pub fn freeboard_vs_return_period(&mut self) -> Result<Vec<FreeboardRow>, ReviewError> {
        let rows = self.query(
            "SELECT pond_id, start_s, rp_key, rp_text, rp_duration_min, freeboard_used_frac, freeboard_left_m
             FROM storms ORDER BY (rp_key IS NULL), rp_key DESC, pond_id, start_s",
            &[],
        )?;
        Ok(rows
            .iter()
            .map(|r| FreeboardRow {
                pond_id: r[0].t(),
                start_s: r[1].i() as u32,
                rp_years: r[2].opt_f(),
                rp_text: if r[3] == Val::Null {
                    "no rain data".into()
                } else {
                    r[3].t()
                },
                rp_duration_min: r[4].opt_f().map(|x| x as u32),
                freeboard_used_frac: r[5].f(),
                freeboard_left_m: r[6].f(),
            })
            .collect())
    }

    /// Drawdown time per pond: storms, mean, last, and the least-squares trend in hours per
    /// year (over storm start times), worst trend first.
    pub fn drawdown_trend(&mut self) -> Result<Vec<DrawdownRow>, ReviewError> {
        let rows = self.query(
            "SELECT s.pond_id, s.start_s, s.drawdown_s, p.info_json FROM storms s JOIN ponds p ON p.pond_id = s.pond_id
             WHERE s.drawdown_s IS NOT NULL ORDER BY s.pond_id, s.start_s",
            &[],
        )?;
        let mut by: BTreeMap<String, (Vec<(f64, f64)>, f64)> = BTreeMap::new();
        for r in &rows {
            let target = serde_json::from_str::<PondInfo>(&r[3].t())
                .map_or(f64::NAN, |i| f64::from(i.drawdown_target_s) / 3600.0);
            let e = by.entry(r[0].t()).or_insert((Vec::new(), target));
            e.0.push((r[1].f() / (365.25 * 86_400.0), r[2].f() / 3600.0));
        }
        let mut out: Vec<DrawdownRow> = by
            .into_iter()
            .map(|(pond_id, (pts, target_h))| {
                let n = pts.len() as f64;
                let (sx, sy) = pts.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
                let (mx, my) = (sx / n, sy / n);
                let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
                let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
                DrawdownRow {
                    pond_id,
                    storms: pts.len(),
                    mean_h: my,
                    last_h: pts.last().map_or(f64::NAN, |p| p.1),
                    max_h: pts.iter().map(|p| p.1).fold(f64::NAN, f64::max),
                    trend_h_per_year: if pts.len() >= 3 && sxx > 0.0 {
                        Some(sxy / sxx)
                    } else {
                        None
                    },
                    target_h,
                }
            })
            .collect();
        out.sort_by(|a, b| {
            b.trend_h_per_year
                .unwrap_or(f64::MIN)
                .total_cmp(&a.trend_h_per_year.unwrap_or(f64::MIN))
        });
        Ok(out)
    }

    /// Gate wear, worst share of budget first (all years, or one).
    pub fn gate_wear_ranking(&mut self, year: Option<i32>) -> Result<Vec<WearRow>, ReviewError> {
        let rows = match year {
            Some(y) => self.query(
                "SELECT pond_id, year, moves, travel, days_covered, budget_ratio, over_budget FROM gate_wear
                 WHERE year = $1 ORDER BY budget_ratio DESC, pond_id",
                &[Val::I(y.into())],
            )?,
            None => self.query(
                "SELECT pond_id, year, moves, travel, days_covered, budget_ratio, over_budget FROM gate_wear
                 ORDER BY budget_ratio DESC, pond_id, year",
                &[],
            )?,
        };
        Ok(rows
            .iter()
            .map(|r| WearRow {
                pond_id: r[0].t(),
                year: r[1].i() as i32,
                moves: r[2].i(),
                travel: r[3].f(),
                days_covered: r[4].f(),
                budget_ratio: r[5].f(),
                over_budget: r[6].i() != 0,
            })
            .collect())
    }

    /// Sensor health, worst first.
    pub fn sensor_health_ranking(&mut self) -> Result<Vec<PondHealth>, ReviewError> {
        self.health()
    }
}

fn sq(v: &Val) -> rusqlite::types::Value {
    match v {
        Val::I(x) => rusqlite::types::Value::Integer(*x),
        Val::F(x) => rusqlite::types::Value::Real(*x),
        Val::T(s) => rusqlite::types::Value::Text(s.clone()),
        Val::B(b) => rusqlite::types::Value::Blob(b.clone()),
        Val::Null | Val::OI(None) | Val::OF(None) | Val::OT(None) => rusqlite::types::Value::Null,
        Val::OI(Some(x)) => rusqlite::types::Value::Integer(*x),
        Val::OF(Some(x)) => rusqlite::types::Value::Real(*x),
        Val::OT(Some(s)) => rusqlite::types::Value::Text(s.clone()),
    }
}

fn pg_params(params: &[Val]) -> Vec<Box<dyn postgres::types::ToSql + Sync>> {
    params
        .iter()
        .map(|v| -> Box<dyn postgres::types::ToSql + Sync> {
            match v {
                Val::I(x) => Box::new(*x),
                Val::F(x) => Box::new(*x),
                Val::T(s) => Box::new(s.clone()),
                Val::B(b) => Box::new(b.clone()),
                Val::Null => Box::new(Option::<String>::None),
                Val::OI(x) => Box::new(*x),
                Val::OF(x) => Box::new(*x),
                Val::OT(x) => Box::new(x.clone()),
            }
        })
        .collect()
}

/// A pond's permit exceedances in a year.
#[derive(Debug, Clone, PartialEq)]
pub struct ExceedRow {
    /// Pond.
    pub pond_id: String,
    /// Name.
    pub name: String,
    /// Storms that year.
    pub storms: i64,
    /// Storms with an exceedance.
    pub exceeded_storms: i64,
    /// Time above the permit, s.
    pub over_permit_s: i64,
    /// Volume above the permit, m³.
    pub over_permit_m3: f64,
}

/// One storm's freeboard used and return period.
#[derive(Debug, Clone, PartialEq)]
pub struct FreeboardRow {
    /// Pond.
    pub pond_id: String,
    /// Storm start, s.
    pub start_s: u32,
    /// Return period sort key, years (None without rain data).
    pub rp_years: Option<f64>,
    /// Return period as text.
    pub rp_text: String,
    /// Duration of the rarest peak, min.
    pub rp_duration_min: Option<u32>,
    /// Share of the depth above normal used.
    pub freeboard_used_frac: f64,
    /// Freeboard left, m.
    pub freeboard_left_m: f64,
}

/// A pond's drawdown times.
#[derive(Debug, Clone, PartialEq)]
pub struct DrawdownRow {
    /// Pond.
    pub pond_id: String,
    /// Storms with a measured drawdown.
    pub storms: usize,
    /// Mean, h.
    pub mean_h: f64,
    /// Last, h.
    pub last_h: f64,
    /// Longest, h.
    pub max_h: f64,
    /// Least-squares slope over storm start, h per year.
    pub trend_h_per_year: Option<f64>,
    /// Target, h.
    pub target_h: f64,
}

/// A pond-year of gate wear.
#[derive(Debug, Clone, PartialEq)]
pub struct WearRow {
    /// Pond.
    pub pond_id: String,
    /// Year.
    pub year: i32,
    /// Moves.
    pub moves: i64,
    /// Travel, full strokes.
    pub travel: f64,
    /// Days covered by the log.
    pub days_covered: f64,
    /// Larger of moves and travel as a share of the budget prorated to the days covered.
    pub budget_ratio: f64,
    /// Over budget.
    pub over_budget: bool,
}

/// Quick look at a `records` body kind count, for reports: `(kind, count)`.
pub fn kind_counts(records: &[EventRecord]) -> Vec<(&'static str, usize)> {
    let mut m: BTreeMap<&'static str, usize> = BTreeMap::new();
    for r in records {
        *m.entry(kind_name(&r.body)).or_default() += 1;
    }
    m.into_iter().collect()
}
