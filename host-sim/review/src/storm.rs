//! Storms: a log split into storm events, each summarised, with flags; and the pond-level
//! health of a whole log (sensor drift, gate wear by year).
//!
//! **A storm** opens at the start of the first rain interval with rain (or the first record
//! in a mode other than `Standby`, when the log has no rain) and closes once the controller
//! is back in `Standby` and no rain has fallen for the pond's inter-event time: rain start to
//! end of drawdown. Its end is the later of the last rain and the return to `Standby`. A storm
//! still open when the log ends is marked incomplete. Storms with less than
//! [`SummaryOptions::min_depth_mm`] of rain that never left `Standby` are not storms.
//!
//! **Per storm** (units in the names): rain depth and peak intensity over the standard
//! durations (the core's sliding-window gauge fed with the interval totals), the return
//! period of each on the pond's IDF (the core's inversion) and the rarest; peak stage and
//! freeboard left; peak release against the permit; time and volume over the permit with the
//! reasons the device logged (an exceedance seen in the samples with no logged reason is
//! reported as `unlogged`: exceedances are never hidden); overtopping; volume captured (peak
//! storage minus storage at the start) and released; drawdown time (last rain to the stage
//! back within the normal tolerance) against the target; gate moves and travel; faults and
//! alarms with their times; the mode timeline.
//!
//! Integration rule (documented choice): between two samples the release is taken as the
//! straight line between them (trapezoid) for volumes, and the earlier sample holds for the
//! time over permit; gaps longer than [`SummaryOptions::max_gap_s`] are not integrated and
//! are counted in `unsampled_s`.

use std::collections::BTreeMap;

use holdback_core::config::IdfModel;
use holdback_core::event::AlarmKind;
use holdback_core::event::{EventBody, EventRecord, FaultSource, HealthFlags, ModeCode};
use holdback_core::rain::{GaugeSettings, Idf, RainGauge, ReturnPeriod};
use serde::{Deserialize, Serialize};

use crate::pond::Pond;
use crate::rain::RainInterval;
use crate::telemetry::code_name;

/// Standard durations for peak intensities, minutes.
pub const STANDARD_DURATIONS_MIN: [u32; 8] = [5, 10, 15, 30, 60, 120, 360, 1440];

/// Rain buffer of the sliding-window gauge: one day of 1-minute totals fits.
const GAUGE_RECORDS: usize = 2048;

/// How summaries are made.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SummaryOptions {
    /// Least rain for a storm that never left `Standby`, mm (common practice, no source).
    pub min_depth_mm: f32,
    /// Longest gap between samples that is still integrated, s.
    pub max_gap_s: u32,
    /// Points kept for a storm's plot.
    pub plot_points: usize,
}

impl Default for SummaryOptions {
    fn default() -> Self {
        SummaryOptions {
            min_depth_mm: 2.0,
            max_gap_s: 3600,
            plot_points: 240,
        }
    }
}

/// A return period with its qualifier, for storing and showing.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Rp {
    /// `"<"`: rarer than nothing tabulated (below the smallest); `"="`: interpolated;
    /// `">"`: beyond the largest tabulated.
    pub qualifier: Qualifier,
    /// Years.
    pub years: f32,
}

/// The qualifier of a return period (`<`, `=`, `>`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum Qualifier {
    /// Below the smallest tabulated return period.
    #[serde(rename = "<")]
    Less,
    /// Interpolated.
    #[serde(rename = "=")]
    Equal,
    /// Beyond the largest.
    #[serde(rename = ">")]
    Greater,
}

impl Rp {
    /// From the core's answer.
    pub fn from_core(r: ReturnPeriod) -> Rp {
        match r {
            ReturnPeriod::LessThan(y) => Rp {
                qualifier: Qualifier::Less,
                years: y,
            },
            ReturnPeriod::Years(y) => Rp {
                qualifier: Qualifier::Equal,
                years: y,
            },
            ReturnPeriod::GreaterThan(y) => Rp {
                qualifier: Qualifier::Greater,
                years: y,
            },
        }
    }
    /// A number that orders return periods from common to rare (`<2` → 0.999·2, `>100` →
    /// 1.001·100).
    pub fn sort_key(&self) -> f64 {
        let y = f64::from(self.years);
        match self.qualifier {
            Qualifier::Less => y * 0.999,
            Qualifier::Equal => y,
            Qualifier::Greater => y * 1.001,
        }
    }
    /// Text such as `12.3 yr`, `<2 yr`, `>100 yr`.
    pub fn text(&self) -> String {
        match self.qualifier {
            Qualifier::Less => format!("<{} yr", self.years),
            Qualifier::Equal => format!("{:.1} yr", self.years),
            Qualifier::Greater => format!(">{} yr", self.years),
        }
    }
    /// Whether this is rarer than `years`.
    pub fn rarer_than_years(&self, years: f32) -> bool {
        match self.qualifier {
            Qualifier::Less => false,
            Qualifier::Equal => self.years > years,
            Qualifier::Greater => self.years >= years,
        }
    }
}

/// Peak intensity over one duration.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DurationPeak {
    /// Duration, min.
    pub duration_min: u32,
    /// Peak mean intensity, mm/h.
    pub intensity_mm_h: f32,
    /// Its return period on the pond's IDF.
    pub return_period: Rp,
    /// The gauge buffer overflowed inside this window (an underestimate).
    pub saturated: bool,
}

/// Where a storm's rain came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RainSource {
    /// The log's `RainTotal` records.
    Log,
    /// An accompanying rain CSV.
    Csv,
    /// None: no depth, no return period.
    None,
}

/// A flag raised by a storm or a pond.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Flag {
    /// Release above the permit at some time.
    PermitExceeded,
    /// Freeboard left below the pond's minimum.
    FreeboardBelowMinimum,
    /// Stage above the crest.
    Overtopped,
    /// Drawdown took longer than its target (or had not ended by then).
    DrawdownLate,
    /// Gate moves or travel above the yearly wear budget.
    GateWearOverBudget,
    /// Dry-weather stage creeping away from the normal level.
    SensorDrift,
    /// The rain gauge looks clogged (fault, health bit, or the pond filled with no rain).
    GaugeClogged,
    /// The storm is rarer than the pond's design return period.
    LargerThanDesign,
}

impl Flag {
    /// Every flag.
    pub const ALL: [Flag; 8] = [
        Flag::PermitExceeded,
        Flag::FreeboardBelowMinimum,
        Flag::Overtopped,
        Flag::DrawdownLate,
        Flag::GateWearOverBudget,
        Flag::SensorDrift,
        Flag::GaugeClogged,
        Flag::LargerThanDesign,
    ];
    /// Its snake_case code (`Flag::PermitExceeded` → `permit_exceeded`).
    pub fn code(self) -> String {
        let name = format!("{self:?}");
        let mut out = String::with_capacity(name.len() + 4);
        for (i, c) in name.chars().enumerate() {
            if c.is_ascii_uppercase() {
                if i > 0 {
                    out.push('_');
                }
                out.push(c.to_ascii_lowercase());
            } else {
                out.push(c);
            }
        }
        out
    }
    /// A sentence for the report.
    pub fn meaning(self) -> &'static str {
        match self {
            Flag::PermitExceeded => "release above the permitted rate",
            Flag::FreeboardBelowMinimum => "freeboard left below the minimum",
            Flag::Overtopped => "stage above the crest (overtopping)",
            Flag::DrawdownLate => "drawdown slower than its target",
            Flag::GateWearOverBudget => "gate moves or travel above the yearly wear budget",
            Flag::SensorDrift => "dry-weather stage drifting from the normal level",
            Flag::GaugeClogged => "rain gauge looks clogged",
            Flag::LargerThanDesign => "storm rarer than the design return period",
        }
    }
}

/// One thing that happened, with its time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Happening {
    /// Device time, s.
    pub time_s: u32,
    /// `fault_raised`, `fault_cleared`, `alarm`, `permit_exceedance`.
    pub kind: String,
    /// What (`stage_sensor/under_range`, `high_stage 2.1`, `surcharge`).
    pub what: String,
}

/// A point of a storm's plot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PlotPoint {
    /// Device time, s.
    pub t: u32,
    /// Stage, m.
    pub stage_m: f32,
    /// Release, m³/s.
    pub release_m3s: f32,
}

/// Everything said about one storm.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StormSummary {
    /// The pond.
    pub pond_id: String,
    /// Start (first rain, or leaving `Standby`), device s.
    pub start_s: u32,
    /// End (back in `Standby` and dry), device s.
    pub end_s: u32,
    /// Calendar year of the start (UTC).
    pub year: i32,
    /// The log ended before the storm did.
    pub incomplete: bool,
    /// Where the rain came from.
    pub rain_source: RainSource,
    /// Rain depth, mm (None without rain data).
    pub rain_depth_mm: Option<f32>,
    /// End of the last rain, device s.
    pub last_rain_s: Option<u32>,
    /// Peak intensity per standard duration that the rain data resolve.
    pub peaks: Vec<DurationPeak>,
    /// The rarest return period and its duration, min.
    pub rarest: Option<(Rp, u32)>,
    /// Peak stage, m, and when.
    pub peak_stage_m: f32,
    /// Time of the peak stage, s.
    pub peak_stage_s: u32,
    /// Crest minus peak stage, m (negative: overtopped).
    pub freeboard_left_m: f32,
    /// (peak − normal) / (crest − normal): share of the depth above normal used.
    pub freeboard_used_frac: f32,
    /// Peak release, m³/s.
    pub peak_release_m3s: f32,
    /// Peak release / permit.
    pub peak_release_ratio: f32,
    /// Time with release above the permit, s.
    pub over_permit_s: u32,
    /// Volume released above the permit, m³.
    pub over_permit_m3: f64,
    /// Logged exceedance reasons with their record counts (`unlogged` when the samples show
    /// release above the permit and the device logged no reason).
    pub exceed_reasons: BTreeMap<String, u32>,
    /// Overtopped (stage above crest, or an overtopping alarm).
    pub overtopped: bool,
    /// Peak storage minus storage at the start, m³.
    pub captured_m3: f64,
    /// Volume released during the storm, m³.
    pub released_m3: f64,
    /// Last rain (or peak stage without rain data) to back within the normal tolerance, s.
    pub drawdown_s: Option<u32>,
    /// The pond's target, s.
    pub drawdown_target_s: u32,
    /// Gate moves.
    pub gate_moves: u32,
    /// Gate travel, full strokes.
    pub gate_travel: f32,
    /// Faults, alarms and exceedance records, in time order.
    pub happenings: Vec<Happening>,
    /// Mode at the start and at every change: `(time_s, mode)`.
    pub modes: Vec<(u32, String)>,
    /// Samples with any health bit set, and all samples.
    pub unhealthy_samples: u32,
    /// Samples in the storm.
    pub samples: u32,
    /// Time between samples too long to integrate, s.
    pub unsampled_s: u32,
    /// Flags.
    pub flags: Vec<Flag>,
    /// Thinned series for the plot.
    pub plot: Vec<PlotPoint>,
    /// Rain for the plot: `(interval end s, window s, depth mm)`.
    pub plot_rain: Vec<(u32, u32, f32)>,
}

/// Gate wear in one calendar year.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WearYear {
    /// Year (UTC).
    pub year: i32,
    /// Days of the year the log covers.
    pub days_covered: f32,
    /// Gate moves.
    pub moves: u32,
    /// Travel, full strokes.
    pub travel: f32,
    /// Moves or travel above the budget prorated to the days covered.
    pub over_budget: bool,
}

/// The health of one pond over a whole log.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PondHealth {
    /// The pond.
    pub pond_id: String,
    /// First and last record time, s.
    pub span_s: (u32, u32),
    /// Records read.
    pub records: u64,
    /// Dry-weather samples used for the drift regression.
    pub dry_samples: u32,
    /// Fitted dry-weather stage drift, m per year (None: too few samples or too short).
    pub drift_m_per_year: Option<f32>,
    /// Mean dry-weather stage minus the normal level, m.
    pub dry_offset_m: Option<f32>,
    /// Drift beyond the pond's limit.
    pub drift_flag: bool,
    /// Faults raised, per source code.
    pub faults: BTreeMap<String, u32>,
    /// Share of samples with a health bit set.
    pub unhealthy_frac: f32,
    /// Rain-gauge faults raised or samples with the rain bit set.
    pub gauge_suspect: u32,
    /// Alarms raised.
    pub alarms: u32,
    /// Gate wear per calendar year.
    pub wear: Vec<WearYear>,
    /// A score for ranking, higher is worse: |drift| / limit + 10·unhealthy share + faults/10.
    pub sensor_score: f32,
}

#[derive(Debug, Clone, Copy)]
struct Sample {
    t: u32,
    stage_m: f32,
    storage_m3: f32,
    release_m3s: f32,
    opening: f32,
    health: HealthFlags,
}

fn sample_of(r: &EventRecord) -> Option<(Sample, ModeCode)> {
    match r.body {
        EventBody::Sample {
            stage_m,
            storage_m3,
            release_m3s,
            opening,
            mode,
            health,
        } => Some((
            Sample {
                t: r.time_s,
                stage_m,
                storage_m3,
                release_m3s,
                opening,
                health,
            },
            mode,
        )),
        _ => None,
    }
}

fn finite_or(x: f32, d: f32) -> f32 {
    if x.is_finite() { x } else { d }
}

/// The records sorted by time (then sequence), with rain from `csv` merged in as
/// `RainTotal` records when the log itself has none. Returns the records and the rain
/// source.
fn prepare(
    records: &[EventRecord],
    csv: Option<&[RainInterval]>,
) -> (Vec<EventRecord>, RainSource) {
    let mut v: Vec<EventRecord> = records.to_vec();
    let has_rain = v
        .iter()
        .any(|r| matches!(r.body, EventBody::RainTotal { .. }));
    let source = if has_rain {
        RainSource::Log
    } else if let Some(rain) = csv {
        v.extend(rain.iter().map(|r| EventRecord {
            seq: u32::MAX,
            time_s: r.end_s,
            body: EventBody::RainTotal {
                window_s: r.window_s,
                depth_mm: r.depth_mm,
            },
        }));
        RainSource::Csv
    } else {
        RainSource::None
    };
    v.sort_by_key(|r| (r.time_s, r.seq));
    (v, source)
}

/// Index ranges `[a, b)` of the storms in time-sorted records, and whether each is complete.
fn split(records: &[EventRecord], pond: &Pond, opts: &SummaryOptions) -> Vec<(usize, usize, bool)> {
    let inter = pond.info.inter_event_s as u32;
    let mut out = Vec::new();
    let mut mode = ModeCode::Standby;
    let mut open: Option<usize> = None;
    let mut last_rain: Option<u32> = None;
    let mut back_standby: Option<u32> = None;
    let mut left_standby = false;
    let mut depth = 0.0f32;
    for (i, r) in records.iter().enumerate() {
        // First: does the time of this record close the open storm (state so far)?
        if let Some(a) = open {
            let dry_since = last_rain.unwrap_or(records[a].time_s);
            if let Some(bs) = back_standby
                && r.time_s.saturating_sub(dry_since) >= inter
                && r.time_s > bs
            {
                // The storm ends at the later of the return to Standby and the last rain:
                // the end of drawdown.
                let end_t = bs.max(dry_since);
                let b = a + records[a..i].partition_point(|x| x.time_s <= end_t);
                if left_standby || depth >= opts.min_depth_mm {
                    out.push((a, b.max(a + 1), true));
                }
                open = None;
            }
        }
        match r.body {
            EventBody::ModeChange { to, .. } => mode = to,
            EventBody::Sample { mode: m, .. } => mode = m,
            _ => {}
        }
        let wet = matches!(r.body, EventBody::RainTotal { depth_mm, .. } if depth_mm > 0.0);
        if open.is_none() && (wet || mode != ModeCode::Standby) {
            open = Some(i);
            left_standby = false;
            depth = 0.0;
            back_standby = None;
            last_rain = None;
        }
        if open.is_none() {
            continue;
        }
        if let EventBody::RainTotal { depth_mm, .. } = r.body
            && depth_mm > 0.0
        {
            last_rain = Some(r.time_s);
            depth += depth_mm;
        }
        if mode == ModeCode::Standby {
            back_standby.get_or_insert(r.time_s);
        } else {
            left_standby = true;
            back_standby = None;
        }
    }
    if let Some(a) = open
        && (left_standby || depth >= opts.min_depth_mm)
    {
        out.push((a, records.len(), false));
    }
    out
}

fn duration_range(idf: &IdfModel) -> (f32, f32) {
    match idf {
        IdfModel::Curves(c) => c.duration_range_min(),
        IdfModel::Table(t) => (
            t.durations_min().first().copied().unwrap_or(0.0),
            t.durations_min().last().copied().unwrap_or(f32::MAX),
        ),
    }
}

/// Rain depth and peaks of a storm's rain intervals through the core's sliding-window gauge.
fn rain_stats(pond: &Pond, rain: &[RainInterval]) -> (f32, Vec<DurationPeak>) {
    let coarsest = rain.iter().map(|r| r.window_s).max().unwrap_or(60);
    let (dmin, dmax) = duration_range(&pond.idf);
    let durations: Vec<u32> = STANDARD_DURATIONS_MIN
        .iter()
        .copied()
        .filter(|&d| d * 60 >= coarsest && d as f32 >= dmin * 0.999 && d as f32 <= dmax * 1.001)
        .collect();
    // `+ 0.0`: an empty float sum is -0.0.
    let depth: f32 = rain.iter().map(|r| r.depth_mm).sum::<f32>() + 0.0;
    if durations.is_empty() || rain.is_empty() {
        return (depth, Vec::new());
    }
    let windows: Vec<u32> = durations.iter().map(|d| d * 60).collect();
    let settings = GaugeSettings {
        inter_event_dry_s: u32::MAX / 4,
        max_intensity_mm_h: 10_000.0,
        ..GaugeSettings::default()
    };
    let Ok(mut gauge) = <RainGauge<GAUGE_RECORDS>>::try_new_gauge(&settings, &windows) else {
        return (depth, Vec::new());
    };
    for r in rain {
        gauge.record_interval(r.end_s, r.window_s, r.depth_mm);
    }
    let Some(ev) = gauge.current_event().copied() else {
        return (depth, Vec::new());
    };
    let peaks = ev
        .peaks()
        .iter()
        .map(|p| {
            let d = p.window_s / 60;
            DurationPeak {
                duration_min: d,
                intensity_mm_h: p.intensity_mm_h,
                return_period: Rp::from_core(pond.idf.return_period(p.intensity_mm_h, d as f32)),
                saturated: p.saturated,
            }
        })
        .collect();
    (depth, peaks)
}

/// A gauge on the heap (its record buffer is large).
trait TryNewGauge {
    fn try_new_gauge(s: &GaugeSettings, w: &[u32]) -> Result<Box<Self>, ()>;
}

impl<const N: usize> TryNewGauge for RainGauge<N> {
    fn try_new_gauge(s: &GaugeSettings, w: &[u32]) -> Result<Box<Self>, ()> {
        RainGauge::<N>::new(s, w).map(Box::new).map_err(|_| ())
    }
}

fn happening(r: &EventRecord) -> Option<Happening> {
    let (kind, what) = match r.body {
        EventBody::FaultRaised { source, kind } => (
            "fault_raised",
            format!("{}/{}", code_name(source), code_name(kind)),
        ),
        EventBody::FaultCleared { source, kind } => (
            "fault_cleared",
            format!("{}/{}", code_name(source), code_name(kind)),
        ),
        EventBody::Alarm { kind, value } => ("alarm", format!("{} {value}", code_name(kind))),
        EventBody::PermitExceedance {
            release_m3s,
            permit_m3s,
            reason,
        } => (
            "permit_exceedance",
            format!("{} {release_m3s} > {permit_m3s} m3/s", code_name(reason)),
        ),
        _ => return None,
    };
    Some(Happening {
        time_s: r.time_s,
        kind: kind.into(),
        what,
    })
}

/// Keep about `n` points, each bucket's highest stage and highest release, so peaks survive.
fn thin(samples: &[Sample], n: usize) -> Vec<PlotPoint> {
    if samples.len() <= n || n < 4 {
        return samples
            .iter()
            .map(|s| PlotPoint {
                t: s.t,
                stage_m: s.stage_m,
                release_m3s: s.release_m3s,
            })
            .collect();
    }
    let per = samples.len().div_ceil(n / 2);
    samples
        .chunks(per)
        .flat_map(|c| {
            let hs = c.iter().max_by(|a, b| a.stage_m.total_cmp(&b.stage_m));
            let hr = c
                .iter()
                .max_by(|a, b| a.release_m3s.total_cmp(&b.release_m3s));
            let mut v: Vec<&Sample> = hs.into_iter().chain(hr).collect();
            v.sort_by_key(|s| s.t);
            v.dedup_by_key(|s| s.t);
            v.into_iter()
                .map(|s| PlotPoint {
                    t: s.t,
                    stage_m: s.stage_m,
                    release_m3s: s.release_m3s,
                })
                .collect::<Vec<_>>()
        })
        .collect()
}

fn summarise_one(
    pond: &Pond,
    recs: &[EventRecord],
    before: Option<&EventRecord>,
    complete: bool,
    source: RainSource,
    opts: &SummaryOptions,
) -> StormSummary {
    let info = &pond.info;
    let permit = info.permit_m3s;
    // A storm opened by rain starts when that rain interval started.
    let start_s = recs.first().map_or(0, |r| match r.body {
        EventBody::RainTotal { window_s, .. } => r.time_s.saturating_sub(window_s),
        _ => r.time_s,
    });
    let end_s = recs.last().map_or(start_s, |r| r.time_s);
    let mut samples: Vec<Sample> = Vec::new();
    let mut modes: Vec<(u32, String)> = Vec::new();
    let mut happenings = Vec::new();
    let mut exceed_reasons: BTreeMap<String, u32> = BTreeMap::new();
    let mut rain: Vec<RainInterval> = Vec::new();
    let mut gauge_fault = false;
    let mut overtop_alarm = false;
    let mut last_cmd: Option<f32> = None;
    let (mut cmd_moves, mut cmd_travel, mut decisions) = (0u32, 0.0f32, 0u32);
    let mut mode_now: Option<ModeCode> = before.and_then(|b| sample_of(b).map(|s| s.1));
    if let Some(m) = mode_now {
        modes.push((start_s, code_name(m)));
    }
    for r in recs {
        if let Some(h) = happening(r) {
            happenings.push(h);
        }
        match r.body {
            EventBody::Sample { .. } => {
                if let Some((s, m)) = sample_of(r) {
                    samples.push(s);
                    if mode_now.is_none() {
                        modes.push((r.time_s, code_name(m)));
                        mode_now = Some(m);
                    }
                }
            }
            EventBody::ModeChange { to, .. } => {
                modes.push((r.time_s, code_name(to)));
                mode_now = Some(to);
            }
            EventBody::Decision { opening_cmd, .. } if opening_cmd.is_finite() => {
                decisions += 1;
                if let Some(p) = last_cmd {
                    let d = (opening_cmd - p).abs();
                    if d > 1e-3 {
                        cmd_moves += 1;
                        cmd_travel += d;
                    }
                }
                last_cmd = Some(opening_cmd);
            }
            EventBody::PermitExceedance { reason, .. } => {
                *exceed_reasons.entry(code_name(reason)).or_default() += 1;
            }
            EventBody::FaultRaised {
                source: FaultSource::RainGauge,
                ..
            } => gauge_fault = true,
            EventBody::Alarm {
                kind: AlarmKind::Overtopping,
                ..
            } => overtop_alarm = true,
            EventBody::RainTotal { window_s, depth_mm }
                if window_s > 0 && depth_mm.is_finite() && depth_mm >= 0.0 =>
            {
                rain.push(RainInterval {
                    end_s: r.time_s,
                    window_s,
                    depth_mm,
                })
            }
            _ => {}
        }
    }
    let start_storage = before
        .and_then(|b| sample_of(b).map(|s| s.0.storage_m3))
        .or_else(|| samples.first().map(|s| s.storage_m3))
        .unwrap_or(0.0);
    let (mut peak_stage, mut peak_stage_s, mut peak_q, mut peak_v) =
        (f32::NEG_INFINITY, start_s, 0.0f32, start_storage);
    let mut unhealthy = 0u32;
    for s in &samples {
        if s.stage_m.is_finite() && s.stage_m > peak_stage {
            peak_stage = s.stage_m;
            peak_stage_s = s.t;
        }
        if s.release_m3s.is_finite() {
            peak_q = peak_q.max(s.release_m3s);
        }
        if s.storage_m3.is_finite() {
            peak_v = peak_v.max(s.storage_m3);
        }
        if s.health.0 != 0 {
            unhealthy += 1;
        }
        if s.health.has(HealthFlags::RAIN) {
            gauge_fault = true;
        }
    }
    if !peak_stage.is_finite() {
        peak_stage = info.normal_m;
    }
    let (mut over_s, mut over_m3, mut released, mut unsampled) = (0u32, 0.0f64, 0.0f64, 0u32);
    for w in samples.windows(2) {
        let dt = w[1].t.saturating_sub(w[0].t);
        if dt > opts.max_gap_s {
            unsampled += dt;
            continue;
        }
        let (q0, q1) = (
            f64::from(finite_or(w[0].release_m3s, 0.0)),
            f64::from(finite_or(w[1].release_m3s, 0.0)),
        );
        let p = f64::from(permit);
        released += 0.5 * (q0 + q1) * f64::from(dt);
        over_m3 += 0.5 * ((q0 - p).max(0.0) + (q1 - p).max(0.0)) * f64::from(dt);
        if q0 > p {
            over_s += dt;
        }
    }
    let sampled_over = samples.iter().any(|s| s.release_m3s > permit);
    if sampled_over && exceed_reasons.is_empty() {
        exceed_reasons.insert("unlogged".into(), 0);
    }
    let (rain_depth, peaks) = match source {
        RainSource::None => (None, Vec::new()),
        _ => {
            let (d, p) = rain_stats(pond, &rain);
            (Some(d), p)
        }
    };
    let rarest = peaks
        .iter()
        .max_by(|a, b| {
            a.return_period
                .sort_key()
                .total_cmp(&b.return_period.sort_key())
        })
        .map(|p| (p.return_period, p.duration_min));
    let last_rain_s = rain
        .iter()
        .filter(|r| r.depth_mm > 0.0)
        .map(|r| r.end_s)
        .max();
    let drawdown_from = last_rain_s.unwrap_or(peak_stage_s);
    let back = samples
        .iter()
        .find(|s| {
            s.t >= drawdown_from
                && s.t >= peak_stage_s
                && s.stage_m <= info.normal_m + info.normal_tolerance_m
        })
        .map(|s| s.t.saturating_sub(drawdown_from));
    let (moves, travel) = if decisions >= 2 {
        (cmd_moves, cmd_travel)
    } else {
        let mut m = 0;
        let mut tr = 0.0;
        for w in samples.windows(2) {
            let d = (w[1].opening - w[0].opening).abs();
            if d.is_finite() && d > 0.01 {
                m += 1;
                tr += d;
            }
        }
        (m, tr)
    };
    let freeboard_left = info.crest_m - peak_stage;
    let span = (info.crest_m - info.normal_m).max(1e-6);
    let overtopped = overtop_alarm || peak_stage > info.crest_m;
    let mut flags = Vec::new();
    if sampled_over || !exceed_reasons.is_empty() {
        flags.push(Flag::PermitExceeded);
    }
    if freeboard_left < info.freeboard_min_m {
        flags.push(Flag::FreeboardBelowMinimum);
    }
    if overtopped {
        flags.push(Flag::Overtopped);
    }
    let late = match back {
        Some(d) => d > info.drawdown_target_s,
        None => end_s.saturating_sub(drawdown_from) > info.drawdown_target_s || complete,
    };
    if late && samples.len() > 1 {
        flags.push(Flag::DrawdownLate);
    }
    let rose = peak_stage - info.normal_m > 0.1;
    if gauge_fault || (source != RainSource::None && rose && rain_depth.unwrap_or(0.0) <= 0.0) {
        flags.push(Flag::GaugeClogged);
    }
    if rarest.is_some_and(|(rp, _)| rp.rarer_than_years(info.design_return_period_yr)) {
        flags.push(Flag::LargerThanDesign);
    }
    let plot_rain = {
        let mut v: Vec<(u32, u32, f32)> = rain
            .iter()
            .filter(|r| r.depth_mm > 0.0)
            .map(|r| (r.end_s, r.window_s, r.depth_mm))
            .collect();
        if v.len() > 200 {
            // Merge neighbours so the plot keeps at most ~200 bars (depth conserved).
            let per = v.len().div_ceil(200);
            v = v
                .chunks(per)
                .map(|c| {
                    let end = c.last().map_or(0, |x| x.0);
                    let start = c.first().map_or(0, |x| x.0.saturating_sub(x.1));
                    (end, end - start, c.iter().map(|x| x.2).sum())
                })
                .collect();
        }
        v
    };
    StormSummary {
        pond_id: info.pond_id.clone(),
        start_s,
        end_s,
        year: crate::time::year_of(start_s),
        incomplete: !complete,
        rain_source: source,
        rain_depth_mm: rain_depth,
        last_rain_s,
        peaks,
        rarest,
        peak_stage_m: peak_stage,
        peak_stage_s,
        freeboard_left_m: freeboard_left,
        freeboard_used_frac: (peak_stage - info.normal_m) / span,
        peak_release_m3s: peak_q,
        peak_release_ratio: peak_q / permit,
        over_permit_s: over_s,
        over_permit_m3: over_m3,
        exceed_reasons,
        overtopped,
        captured_m3: f64::from(peak_v - start_storage).max(0.0),
        released_m3: released,
        drawdown_s: back,
        drawdown_target_s: info.drawdown_target_s,
        gate_moves: moves,
        gate_travel: travel,
        happenings,
        modes,
        unhealthy_samples: unhealthy,
        samples: samples.len() as u32,
        unsampled_s: unsampled,
        flags,
        plot: thin(&samples, opts.plot_points),
        plot_rain,
    }
}

/// Split `records` (any order) into storms and summarise each. Rain comes from the log's
/// `RainTotal` records, else from `rain_csv`, else there is none.
pub fn summarise(
    pond: &Pond,
    records: &[EventRecord],
    rain_csv: Option<&[RainInterval]>,
    opts: &SummaryOptions,
) -> Vec<StormSummary> {
    let (recs, source) = prepare(records, rain_csv);
    split(&recs, pond, opts)
        .into_iter()
        .map(|(a, b, complete)| {
            let before = recs[..a].iter().rev().find(|r| sample_of(r).is_some());
            summarise_one(pond, &recs[a..b], before, complete, source, opts)
        })
        .collect()
}

/// Pond-level health over a whole log: dry-weather drift regression, faults, wear by year.
/// `storms` are the log's storms (dry weather is outside them and at least the inter-event
/// time after each one's end).
pub fn pond_health(pond: &Pond, records: &[EventRecord], storms: &[StormSummary]) -> PondHealth {
    let info = &pond.info;
    let mut recs: Vec<&EventRecord> = records.iter().collect();
    recs.sort_by_key(|r| (r.time_s, r.seq));
    let settle = info.inter_event_s as u32;
    let windows: Vec<(u32, u32)> = storms
        .iter()
        .map(|s| {
            (
                s.start_s.saturating_sub(settle),
                s.end_s.saturating_add(settle),
            )
        })
        .collect();
    let in_storm = |t: u32| {
        let k = windows.partition_point(|w| w.1 < t);
        windows.get(k).is_some_and(|w| w.0 <= t && t <= w.1)
    };
    let (mut n, mut sx, mut sy, mut sxx, mut sxy) = (0u32, 0.0f64, 0.0f64, 0.0f64, 0.0f64);
    let t0 = recs.first().map_or(0, |r| r.time_s);
    let mut faults: BTreeMap<String, u32> = BTreeMap::new();
    let (mut samples, mut unhealthy, mut gauge, mut alarms) = (0u32, 0u32, 0u32, 0u32);
    let mut wear: BTreeMap<i32, (u32, f32, u32, u32)> = BTreeMap::new();
    let mut last_cmd: Option<f32> = None;
    let mut last_open: Option<f32> = None;
    let any_decisions = recs
        .iter()
        .any(|r| matches!(r.body, EventBody::Decision { .. }));
    for r in &recs {
        let year = crate::time::year_of(r.time_s);
        let e = wear.entry(year).or_insert((0, 0.0, r.time_s, r.time_s));
        e.2 = e.2.min(r.time_s);
        e.3 = e.3.max(r.time_s);
        match r.body {
            EventBody::Sample {
                stage_m,
                mode,
                health,
                opening,
                ..
            } => {
                samples += 1;
                if health.0 != 0 {
                    unhealthy += 1;
                }
                if health.has(HealthFlags::RAIN) {
                    gauge += 1;
                }
                if mode == ModeCode::Standby
                    && !health.has(HealthFlags::STAGE)
                    && stage_m.is_finite()
                    && !in_storm(r.time_s)
                {
                    let x = f64::from(r.time_s - t0) / (365.25 * 86_400.0);
                    let y = f64::from(stage_m);
                    n += 1;
                    sx += x;
                    sy += y;
                    sxx += x * x;
                    sxy += x * y;
                }
                if !any_decisions && opening.is_finite() {
                    if let Some(p) = last_open {
                        let d = (opening - p).abs();
                        if d > 0.01 {
                            e.0 += 1;
                            e.1 += d;
                        }
                    }
                    last_open = Some(opening);
                }
            }
            EventBody::Decision { opening_cmd, .. } if opening_cmd.is_finite() => {
                if let Some(p) = last_cmd {
                    let d = (opening_cmd - p).abs();
                    if d > 1e-3 {
                        e.0 += 1;
                        e.1 += d;
                    }
                }
                last_cmd = Some(opening_cmd);
            }
            EventBody::FaultRaised { source, .. } => {
                *faults.entry(code_name(source)).or_default() += 1;
                if source == FaultSource::RainGauge {
                    gauge += 1;
                }
            }
            EventBody::Alarm { .. } => alarms += 1,
            _ => {}
        }
    }
    let span = (t0, recs.last().map_or(t0, |r| r.time_s));
    let span_days = f64::from(span.1 - span.0) / 86_400.0;
    let (drift, offset) = if n >= 10 && span_days >= 30.0 {
        let nf = f64::from(n);
        let den = nf * sxx - sx * sx;
        let slope = if den.abs() > 1e-12 {
            (nf * sxy - sx * sy) / den
        } else {
            0.0
        };
        (Some(slope as f32), Some((sy / nf) as f32 - info.normal_m))
    } else {
        (
            None,
            if n > 0 {
                Some((sy / f64::from(n)) as f32 - info.normal_m)
            } else {
                None
            },
        )
    };
    let drift_flag = drift.is_some_and(|d| d.abs() > info.drift_limit_m_per_year);
    let wear = wear
        .into_iter()
        .map(|(year, (moves, travel, a, b))| {
            let days = (f64::from(b - a) / 86_400.0).max(1.0) as f32;
            let share = (days / 365.0).min(1.0);
            WearYear {
                year,
                days_covered: days,
                moves,
                travel,
                over_budget: days >= 30.0
                    && (moves as f32 > info.wear.moves_per_year as f32 * share
                        || travel > info.wear.travel_per_year * share),
            }
        })
        .collect();
    let unhealthy_frac = if samples > 0 {
        unhealthy as f32 / samples as f32
    } else {
        0.0
    };
    let fault_total: u32 = faults.values().sum();
    PondHealth {
        pond_id: info.pond_id.clone(),
        span_s: span,
        records: records.len() as u64,
        dry_samples: n,
        drift_m_per_year: drift,
        dry_offset_m: offset,
        drift_flag,
        faults,
        unhealthy_frac,
        gauge_suspect: gauge,
        alarms,
        wear,
        sensor_score: drift.map_or(0.0, |d| d.abs() / info.drift_limit_m_per_year)
            + 10.0 * unhealthy_frac
            + fault_total as f32 / 10.0,
    }
}
