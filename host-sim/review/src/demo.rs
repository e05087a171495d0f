//! An invented demo fleet: ponds with invented names and a seeded generator whose event logs
//! are written by the firmware's real `EventLog` on a NOR flash (dumped monthly, as a site
//! visit would pull them), so every demo log went through the device's own code path.
//!
//! The plant and the control here are a small stand-in made for demo data only (a prismatic
//! pond, a linear-reservoir catchment, a gate that aims at the permit, a spillway above the
//! crest, injected faults); they are **not** the project's controller or hydraulics and no
//! check rests on them. Rain is invented too: storms arrive at random with random depth,
//! duration and peak, in 5-minute totals rounded to 0.2 mm tips.
//!
//! Device clocks are UTC seconds since 1970; the demo year starts on 1 January.

use std::path::Path;

use holdback_core::event::{
    AlarmKind, EventBody, EventRecord, ExceedReason, FaultKind, FaultSource, HealthFlags, ModeCode,
};
use holdback_firmware::eventlog::{EventLog, SamplePolicy};

use crate::error::ReviewError;
use crate::flash::DeviceFlash;
use crate::pond::{CurveSpec, IdfSpec, Pond, PondInfo, WearBudget};

/// splitmix64: a small seeded generator (Steele, Lea & Flood 2014), enough for demo data.
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// Seeded.
    pub fn new(seed: u64) -> Rng {
        Rng(seed ^ 0x9E37_79B9_7F4A_7C15)
    }
    /// Next 64 bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Uniform in [a, b).
    pub fn range(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * self.f64()
    }
    /// Exponential with mean `m`.
    pub fn exp(&mut self, m: f64) -> f64 {
        -m * (1.0 - self.f64()).ln()
    }
}

const FIRST: [&str; 24] = [
    "Alder", "Birch", "Cinder", "Dove", "Elm", "Fern", "Gorse", "Heron", "Ivy", "Juniper",
    "Kestrel", "Larch", "Marsh", "Nettle", "Osier", "Plover", "Quill", "Rook", "Sedge", "Teal",
    "Umber", "Vetch", "Wren", "Yarrow",
];
const SECOND: [&str; 8] = [
    "brook", "field", "mead", "lane", "hollow", "croft", "moor", "gate",
];

/// What is injected into a demo pond's life.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Troubles {
    /// Stage sensor drift, m per year (0 = none).
    pub drift_m_per_year: f64,
    /// Chance a storm finds the rain gauge clogged.
    pub clog_chance: f64,
    /// Chance a storm finds the gate stuck part open for a while.
    pub stall_chance: f64,
}

/// One invented pond: its review description and its plant.
#[derive(Debug, Clone)]
pub struct DemoPond {
    /// Review description.
    pub pond: Pond,
    /// Plan area, m² (prismatic).
    pub area_m2: f64,
    /// Catchment area × runoff coefficient, m².
    pub effective_catchment_m2: f64,
    /// Catchment lag (linear reservoir constant), s.
    pub lag_s: f64,
    /// Outlet capacity coefficient: Q = k·opening·sqrt(stage − floor).
    pub outlet_k: f64,
    /// Injected troubles.
    pub troubles: Troubles,
    /// Seed of this pond's weather and faults.
    pub seed: u64,
}

/// The demo IDF: Talbot curves with invented coefficients (demo data, not a site's IDF).
pub fn demo_idf() -> IdfSpec {
    let rows = [
        (1.0, 1400.0),
        (2.0, 1800.0),
        (5.0, 2350.0),
        (10.0, 2750.0),
        (25.0, 3300.0),
        (50.0, 3700.0),
        (100.0, 4100.0),
    ];
    IdfSpec::Curves {
        curves: rows
            .iter()
            .map(|&(t, a)| CurveSpec {
                return_period_yr: t,
                form: "talbot".into(),
                a,
                b: 20.0,
                c: 0.0,
            })
            .collect(),
        min_duration_min: 5.0,
        max_duration_min: 1440.0,
    }
}

/// `n` invented ponds from `seed`.
pub fn fleet(n: usize, seed: u64) -> Result<Vec<DemoPond>, ReviewError> {
    let mut rng = Rng::new(seed);
    (0..n)
        .map(|k| {
            let name = format!(
                "{}{} basin",
                FIRST[k % FIRST.len()],
                SECOND[(k / FIRST.len() + k * 3) % SECOND.len()]
            );
            let pond_id = format!("hb-{:03}", k + 1);
            let area_m2 = rng.range(1500.0, 6000.0);
            let catchment = rng.range(40_000.0, 250_000.0) * rng.range(0.4, 0.8);
            // Some ponds are undersized on purpose, so that exceedances show up.
            let undersized = rng.f64() < 0.25;
            let depth = if undersized {
                rng.range(1.0, 1.4)
            } else {
                rng.range(1.6, 2.4)
            };
            let normal = 0.3;
            let permit = (catchment / 10_000.0) * rng.range(0.004, 0.010);
            let crest = normal + depth;
            let troubles = Troubles {
                drift_m_per_year: if rng.f64() < 0.2 {
                    rng.range(0.06, 0.2)
                } else {
                    rng.range(0.0, 0.01)
                },
                clog_chance: if rng.f64() < 0.2 { 0.3 } else { 0.0 },
                stall_chance: if rng.f64() < 0.15 { 0.2 } else { 0.02 },
            };
            let info = PondInfo {
                pond_id,
                name,
                permit_m3s: permit as f32,
                normal_m: normal as f32,
                crest_m: crest as f32,
                freeboard_min_m: 0.3,
                drawdown_target_s: 48 * 3600,
                design_return_period_yr: 10.0,
                inter_event_s: 6.0 * 3600.0,
                idf: demo_idf(),
                wear: WearBudget {
                    moves_per_year: 6000,
                    travel_per_year: 250.0,
                },
                drift_limit_m_per_year: 0.05,
                normal_tolerance_m: 0.03,
            };
            let pond = Pond::new(info)?;
            Ok(DemoPond {
                pond,
                area_m2,
                effective_catchment_m2: catchment,
                lag_s: rng.range(900.0, 3600.0),
                outlet_k: permit * 3.0 / depth.sqrt(),
                troubles,
                seed: rng.next_u64(),
            })
        })
        .collect()
}

/// Rain of one year, 5-minute totals (end time, mm), rounded to 0.2 mm tips.
pub fn rain_year(rng: &mut Rng, start_s: u32, days: u32) -> Vec<(u32, f32)> {
    let end = start_s + days * 86_400;
    let mut out = Vec::new();
    let mut t = start_s as f64 + rng.exp(9.0 * 86_400.0);
    while t < end as f64 {
        let big = rng.f64() < 0.04;
        let depth = if big {
            rng.range(45.0, 110.0)
        } else {
            rng.exp(11.0) + 2.0
        };
        let dur_steps = (rng.range(1.0, 10.0) * 12.0).round().max(2.0) as u32;
        let peak_at = rng.range(0.15, 0.6);
        let t0 = (t as u32) / 300 * 300;
        let mut weights: Vec<f64> = (0..dur_steps)
            .map(|k| {
                let x = (k as f64 + 0.5) / dur_steps as f64;
                let tri = if x < peak_at {
                    x / peak_at
                } else {
                    (1.0 - x) / (1.0 - peak_at)
                };
                tri.max(0.0).powf(if big { 2.5 } else { 1.5 }) + 0.02
            })
            .collect();
        let sum: f64 = weights.iter().sum();
        weights.iter_mut().for_each(|w| *w *= depth / sum);
        let mut carry = 0.0;
        for (k, w) in weights.iter().enumerate() {
            carry += w;
            let tips = (carry / 0.2).floor();
            carry -= tips * 0.2;
            if tips > 0.0 {
                out.push((t0 + (k as u32 + 1) * 300, (tips * 0.2) as f32));
            }
        }
        t += dur_steps as f64 * 300.0 + 6.5 * 3600.0 + rng.exp(7.0 * 86_400.0);
    }
    out
}

/// Where the generator's records go.
pub trait Sink {
    /// A periodic sample (may be thinned by the sink).
    fn sample(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError>;
    /// Any other record (never thinned).
    fn event(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError>;
}

/// Records kept in memory, with the same thinning as the firmware's `SamplePolicy`
/// (`dry_every` = 1 keeps every sample).
pub struct MemorySink {
    /// Records so far.
    pub records: Vec<EventRecord>,
    dry_every: u32,
    skipped: u32,
    last_mode: Option<ModeCode>,
    next_seq: u32,
}

impl MemorySink {
    /// Keep every `dry_every`-th Standby sample.
    pub fn new(dry_every: u32) -> MemorySink {
        MemorySink {
            records: Vec::new(),
            dry_every: dry_every.max(1),
            skipped: 0,
            last_mode: None,
            next_seq: 0,
        }
    }
    /// Number the records from `seq` (a device's log goes on from one period to the next).
    pub fn first_seq(mut self, seq: u32) -> MemorySink {
        self.next_seq = seq;
        self
    }
    /// Sequence number of the next record.
    pub fn next_seq(&self) -> u32 {
        self.next_seq
    }
    fn push(&mut self, t: u32, body: EventBody) {
        let seq = self.next_seq;
        self.next_seq = seq.wrapping_add(1);
        self.records.push(EventRecord {
            seq,
            time_s: t,
            body,
        });
    }
}

impl Sink for MemorySink {
    fn sample(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError> {
        if let EventBody::Sample { mode, .. } = body {
            let changed = self.last_mode != Some(mode);
            self.last_mode = Some(mode);
            if mode == ModeCode::Standby && !changed {
                self.skipped += 1;
                if self.skipped < self.dry_every {
                    return Ok(());
                }
            }
            self.skipped = 0;
        }
        self.push(t, body);
        Ok(())
    }
    fn event(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError> {
        self.push(t, body);
        Ok(())
    }
}

/// The firmware's `EventLog` on a heap NOR flash; `dump` copies the raw image.
pub struct FirmwareSink {
    log: EventLog<DeviceFlash>,
}

fn log_err<E: std::fmt::Debug>(e: holdback_firmware::eventlog::LogError<E>) -> ReviewError {
    ReviewError::Usage(format!("demo event log: {e}"))
}

impl FirmwareSink {
    /// A fresh log over `pages` 4 KiB pages, dry samples thinned to one in `dry_every`.
    pub fn new(pages: usize, dry_every: u16) -> Result<FirmwareSink, ReviewError> {
        let flash = DeviceFlash::new(pages);
        let range = 0..(pages * 4096) as u32;
        let log = EventLog::new(flash, range, SamplePolicy::new(dry_every)).map_err(log_err)?;
        Ok(FirmwareSink { log })
    }
    /// The raw flash image now (what a site visit pulls off the device).
    pub fn dump(self) -> Result<(Vec<u8>, FirmwareSink), ReviewError> {
        let next = self.log.next_seq();
        let flash = self.log.release();
        let image = flash.image().to_vec();
        let pages = image.len() / 4096;
        let log = EventLog::new(
            flash,
            0..(pages * 4096) as u32,
            SamplePolicy::new(DRY_EVERY),
        )
        .map_err(log_err)?;
        if log.next_seq() != next {
            return Err(ReviewError::Usage(format!(
                "demo event log: reopened at seq {} instead of {next}",
                log.next_seq()
            )));
        }
        Ok((image, FirmwareSink { log }))
    }
}

/// Dry-weather thinning of the demo devices: one sample in 15 (every 15 min at 1-min steps).
pub const DRY_EVERY: u16 = 15;

impl Sink for FirmwareSink {
    fn sample(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError> {
        self.log.log_sample(t, body).map(|_| ()).map_err(log_err)
    }
    fn event(&mut self, t: u32, body: EventBody) -> Result<(), ReviewError> {
        self.log.append(t, body).map(|_| ()).map_err(log_err)
    }
}

fn sample_body(
    stage: f64,
    storage: f64,
    q: f64,
    opening: f64,
    mode: ModeCode,
    health: u8,
) -> EventBody {
    EventBody::Sample {
        stage_m: stage as f32,
        storage_m3: storage as f32,
        release_m3s: q as f32,
        opening: opening as f32,
        mode,
        health: HealthFlags(health),
    }
}

/// Simulate `days` days of `p` from `start_s` at 1-minute steps into `sink`; `on_day` is called
/// after each day with the day index (for monthly dumps).
pub fn simulate<S: Sink>(
    p: &DemoPond,
    start_s: u32,
    days: u32,
    sink: &mut S,
    mut on_day: impl FnMut(u32, &mut S) -> Result<(), ReviewError>,
) -> Result<(), ReviewError> {
    let info = &p.pond.info;
    let mut rng = Rng::new(p.seed ^ u64::from(start_s));
    let rain = rain_year(&mut rng, start_s, days);
    let (normal, crest) = (f64::from(info.normal_m), f64::from(info.crest_m));
    let permit = f64::from(info.permit_m3s);
    let limit = crest - f64::from(info.freeboard_min_m);
    let floor = normal - 0.3;
    let mut v = 0.0f64; // storage above normal, m³
    let mut runoff_store = 0.0f64; // catchment linear reservoir, m³
    let mut mode = ModeCode::Standby;
    let mut opening = 0.0f64;
    let mut last_rain_t: Option<u32> = None;
    let mut ri = 0usize;
    let mut rain_5min = 0.0f64; // rain falling in the current 5 min, mm
    let mut cur_interval: Option<(u32, f32)> = None;
    let mut clogged = false;
    let mut clog_reported = false;
    let mut stall_until = 0u32;
    let mut alarms_on = [false; 3];
    let mut last_exceed_log = 0u32;
    let drift_rate = p.troubles.drift_m_per_year / (365.25 * 86_400.0);
    let steps = days * 1440;
    for k in 0..steps {
        let t = start_s + k * 60;
        // Rain: 5-minute totals; the interval ending at `end` falls over the 5 min before it.
        if cur_interval.is_none_or(|(end, _)| t >= end) {
            if let Some((end, mm)) = cur_interval.take()
                && mm > 0.0
            {
                let logged = if clogged { 0.0 } else { mm };
                if logged > 0.0 {
                    sink.event(
                        end,
                        EventBody::RainTotal {
                            window_s: 300,
                            depth_mm: logged,
                        },
                    )?;
                }
            }
            while rain.get(ri).is_some_and(|r| r.0 <= t) {
                ri += 1;
            }
            match rain.get(ri) {
                Some(&(end, mm)) if end - 300 <= t => {
                    cur_interval = Some((end, mm));
                    rain_5min = f64::from(mm);
                    ri += 1;
                }
                _ => {
                    cur_interval = Some(((t / 300 + 1) * 300, 0.0));
                    rain_5min = 0.0;
                }
            }
        }
        let raining = rain_5min > 0.0;
        if raining {
            if last_rain_t.is_none_or(|l| t.saturating_sub(l) > 6 * 3600) {
                // A new storm: draw its troubles.
                clogged = rng.f64() < p.troubles.clog_chance;
                clog_reported = false;
                if rng.f64() < p.troubles.stall_chance {
                    stall_until = t + rng.range(1800.0, 4.0 * 3600.0) as u32;
                    sink.event(
                        t,
                        EventBody::FaultRaised {
                            source: FaultSource::GateActuator,
                            kind: FaultKind::Stall,
                        },
                    )?;
                }
            }
            last_rain_t = Some(t);
        }
        // Catchment: rain (mm/5 min) into a linear reservoir that drains to the pond.
        runoff_store += rain_5min / 1000.0 / 5.0 * p.effective_catchment_m2;
        let inflow = runoff_store / p.lag_s; // m³/s
        runoff_store -= inflow * 60.0;
        let stage = normal + v / p.area_m2;
        // Control (demo stand-in).
        let new_mode = match mode {
            _ if stage > limit - 0.05 => ModeCode::Surcharge,
            ModeCode::Standby if raining || stage > normal + 0.05 => ModeCode::Capture,
            ModeCode::Capture | ModeCode::Surcharge
                if last_rain_t.is_some_and(|l| t - l > 1800) && inflow < permit * 0.5 =>
            {
                ModeCode::Drawdown
            }
            ModeCode::Surcharge => ModeCode::Capture,
            ModeCode::Drawdown if stage <= normal + 0.01 => ModeCode::Standby,
            ModeCode::Drawdown if raining => ModeCode::Capture,
            m => m,
        };
        if new_mode != mode {
            sink.event(
                t,
                EventBody::ModeChange {
                    from: mode,
                    to: new_mode,
                    reason: 0,
                },
            )?;
            mode = new_mode;
        }
        let head = (stage - floor).max(0.0);
        let cap_full = p.outlet_k * head.sqrt();
        let want = match mode {
            ModeCode::Standby => 0.0,
            ModeCode::Surcharge => 1.0,
            _ => (permit * 0.95 / cap_full.max(1e-9)).min(1.0),
        };
        let want = (want / 0.02).round() * 0.02;
        if (want - opening).abs() >= 0.02 && t >= stall_until {
            let step = (want - opening).clamp(-0.1, 0.1);
            opening = (opening + step).clamp(0.0, 1.0);
            sink.event(
                t,
                EventBody::Decision {
                    target_release_m3s: (permit * 0.95) as f32,
                    opening_cmd: opening as f32,
                },
            )?;
        }
        if t == stall_until && stall_until > 0 {
            sink.event(
                t,
                EventBody::FaultCleared {
                    source: FaultSource::GateActuator,
                    kind: FaultKind::Stall,
                },
            )?;
        }
        let stalled_open = t < stall_until;
        let gate_q = cap_full
            * if stalled_open {
                opening.max(0.6)
            } else {
                opening
            };
        let spill = if stage > crest {
            1.7 * 3.0 * (stage - crest).powf(1.5)
        } else {
            0.0
        };
        let q = (gate_q + spill).min(v / 60.0 + inflow);
        v = (v + (inflow - q) * 60.0).max(0.0);
        if q > permit && t - last_exceed_log >= 600 {
            let reason = if stalled_open {
                ExceedReason::GateUnable
            } else if spill > 0.0 {
                ExceedReason::Uncontrolled
            } else {
                ExceedReason::Surcharge
            };
            sink.event(
                t,
                EventBody::PermitExceedance {
                    release_m3s: q as f32,
                    permit_m3s: permit as f32,
                    reason,
                },
            )?;
            last_exceed_log = t;
        }
        for (i, (on, kind, value)) in [
            (stage > limit - 0.1, AlarmKind::HighStage, stage),
            (
                crest - stage < f64::from(info.freeboard_min_m),
                AlarmKind::LowFreeboard,
                crest - stage,
            ),
            (stage > crest, AlarmKind::Overtopping, stage),
        ]
        .into_iter()
        .enumerate()
        {
            if on && !alarms_on[i] {
                sink.event(
                    t,
                    EventBody::Alarm {
                        kind,
                        value: value as f32,
                    },
                )?;
            }
            alarms_on[i] = on;
        }
        // Clogged gauge: the stage rises with no rain counted; the device notices after 30 min.
        if clogged
            && !clog_reported
            && mode != ModeCode::Standby
            && last_rain_t.is_some_and(|l| t - l < 60)
            && stage > normal + 0.1
        {
            sink.event(
                t,
                EventBody::FaultRaised {
                    source: FaultSource::RainGauge,
                    kind: FaultKind::Implausible,
                },
            )?;
            clog_reported = true;
        }
        let measured = stage + drift_rate * f64::from(t - start_s) + rng.range(-0.002, 0.002);
        let health = if clogged && clog_reported {
            HealthFlags::RAIN
        } else {
            0
        } | if stalled_open { HealthFlags::GATE } else { 0 };
        sink.sample(t, sample_body(measured, v, q, opening, mode, health))?;
        if (k + 1) % 1440 == 0 {
            on_day(k / 1440, sink)?;
        }
    }
    Ok(())
}

/// Write the demo fleet to `dir`: `ponds/<id>.json` and `dumps/<id>/<yyyy-mm-dd>.bin`, a raw
/// flash dump every `dump_every_days`, for `days` days from 1 January of `year`. Returns the
/// ponds and the dump paths.
pub fn write_fleet(
    dir: &Path,
    n: usize,
    seed: u64,
    year: i32,
    days: u32,
    dump_every_days: u32,
    flash_pages: usize,
) -> Result<(Vec<DemoPond>, Vec<std::path::PathBuf>), ReviewError> {
    let ponds = fleet(n, seed)?;
    let start = crate::time::start_of_year_s(year);
    let mut paths = Vec::new();
    for p in &ponds {
        let id = &p.pond.info.pond_id;
        let pd = dir.join("ponds");
        std::fs::create_dir_all(&pd).map_err(|e| ReviewError::io(&pd, e))?;
        let pf = pd.join(format!("{id}.json"));
        let text = serde_json::to_string_pretty(&p.pond.info)
            .map_err(|e| ReviewError::Usage(format!("pond {id}: {e}")))?;
        std::fs::write(&pf, text).map_err(|e| ReviewError::io(&pf, e))?;
        let dd = dir.join("dumps").join(id);
        std::fs::create_dir_all(&dd).map_err(|e| ReviewError::io(&dd, e))?;
        let mut holder = Some(FirmwareSink::new(flash_pages, DRY_EVERY)?);
        let mut sink = holder
            .take()
            .ok_or_else(|| ReviewError::Usage("demo sink".into()))?;
        let mut dump_at = |day: u32, s: &mut FirmwareSink| -> Result<(), ReviewError> {
            if (day + 1).is_multiple_of(dump_every_days) || day + 1 == days {
                let taken = std::mem::replace(s, FirmwareSink::new(2, DRY_EVERY)?);
                let (image, back) = taken.dump()?;
                *s = back;
                let stamp = crate::time::stamp(start + (day + 1) * 86_400);
                let f = dd.join(format!("{}.bin", &stamp[..10]));
                std::fs::write(&f, image).map_err(|e| ReviewError::io(&f, e))?;
                paths.push(f);
            }
            Ok(())
        };
        simulate(p, start, days, &mut sink, &mut dump_at)?;
    }
    Ok((ponds, paths))
}
