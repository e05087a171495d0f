//! The gate controller: one pure, deterministic step per control period.
//!
//! [`Controller::step`] takes the pond's validated [`PondConfig`], this step's [`Inputs`] and
//! the time, and returns the gate opening to command with the mode, alarms, the release it
//! aims at, the reason for the opening and the events to log. The controller holds state only
//! (no references, no clock, no platform float paths: all math through [`crate::math`]), so
//! the same config, inputs and start state give the same outputs bit for bit on the host and
//! on the Cortex-M4F.
//!
//! Units: stage m, storage m³, release m³/s, opening m, time integer s.
//!
//! ## Priorities
//!
//! 1. **Never overtop when avoidable.** A forecast ([`crate::forecast`]) at the permit target
//!    runs every `forecast_every_s` while anything is happening (rain in the inter-event time,
//!    runoff arriving, stage above the normal band). Its *likely* view of the rain to come is
//!    the drier of two assumptions: the smaller of the [`LIKELY_WINDOW_S`] and
//!    [`PERSIST_WINDOW_S`] mean intensities persisting for `persistence_s`, and the event
//!    following the IDF's depth–duration shape ([`FutureRain::FollowIdf`]); its *upper* view,
//!    judged against the crest only, is the wetter of the two, or the design-storm
//!    continuation when `design_return_period_yr` is set. Surcharge
//!    starts when holding the permit crosses crest − freeboard within [`SURCHARGE_LEAD_S`]
//!    (likely view) or the crest at any time (upper view) **and** waiting does not pay:
//!    [`forecast::predict_deferred`] — the permit for [`Controller::wait_steps`] more steps
//!    (the next forecast, [`LEAD_S`] and the gate's full travel at its observed speed), then
//!    full open — would not hold it; or when the measured stage is over the limit. The
//!    release cap is then [`release_to_hold`]'s (full open when even that does not hold), and
//!    Surcharge lasts while holding the permit would cross anywhere in the horizon. An
//!    exceedance is thus never started on a forecast a fresher one may withdraw while waiting
//!    is still safe (the persisted intensity overestimates a storm near its peak). A release
//!    above the permit logs `PermitExceedance` with its reason and raises
//!    [`Alarms::PERMIT_EXCEEDED`].
//! 2. **Release ≤ permit × (1 − margin)** otherwise: the opening is the outlet rating's
//!    inverse ([`Outlet::opening_for`]) at the filtered stage for the target, re-evaluated
//!    every step, at the higher of the filtered and the latest reading carried forward on the
//!    current rise by [`LEAD_S`]; the fixed structures are part of the rating (if they alone
//!    pass more than the target the gate closes). If the release at the current goal would use
//!    more than half the margin, the closing move is made at once.
//! 3. **Use the storage well.** Capture releases the permit target from the first drop above
//!    the normal level: the perfect-foresight schedule of the design notes, less the margin.
//!    While even the full-open gate passes less, the gate is parked just above its
//!    gate-clear opening (`clear_goal_m`, in [`PARK_STEPS`] steps), not full open, so a slow
//!    gate is not still travelling through openings with no effect when the target binds.
//! 4. **Drain in time.** Drawdown releases the permit target, or, with `min_detention_s` set,
//!    the storage above normal spread over the time left until `rain end + min_detention_s`
//!    (never emptying sooner). The time to drain at that release is estimated
//!    ([`DRAIN_SLICES`] slices of `∫dV/Q`) with every forecast; when it would end after
//!    `rain end + drawdown_target_s`, [`Alarms::SLOW_DRAWDOWN`] is raised.
//! 5. **Spare the actuator** ([`actuator`]): deadband, least time between moves, moves per
//!    hour, rate limit, on a filtered stage ([`filter`]: median of 3 then mean of 4, 2.5
//!    steps of delay on a ramp). Urgent moves (1, the closing move of 2, the safe opening, an
//!    operator command) bypass these limits.
//!
//! ## Modes
//!
//! | mode | entered when | left when | opening |
//! |---|---|---|---|
//! | Standby | at the normal level with no rain | rain counted → Capture; stage above the normal band by more than [`standby_hysteresis_m`] without rain → Drawdown | closed at or below normal; above it the gate stays where it is (never opened further, so noise about normal does not work it) |
//! | Capture | rain counted | no rain for `inter_event_s`, or no rain for [`QUIET_S`] and the forecast brings < 1 % of the stored volume → Drawdown | permit target (closed at or below normal) |
//! | Drawdown | the storm is over | back within [`NORMAL_BAND_M`] of normal → Standby; rain → Capture | paced release (see 4) |
//! | Surcharge | forecast at the permit target over crest − freeboard (within [`SURCHARGE_LEAD_S`]) or the crest, with waiting unable to hold it; or the stage over crest − freeboard | holding the permit holds over the whole horizon again and the stage is under the limit → automatic mode | cap from `release_to_hold`, full open if infeasible; moves are urgent |
//! | Failsafe | a stage fault (not a spike) or any gate fault | every such fault cleared → automatic mode | `max(safe opening, surcharge opening)`; without a trusted stage, full open when the model-estimated pond (last good storage routed with the runoff inflow) is forecast over the limit |
//! | Manual | a valid `Command::Manual` | `for_s` runs out or `Command::Resume` → automatic mode; Surcharge needed → Surcharge (the override is cancelled) | the operator's opening |
//!
//! The automatic mode is Capture while rain fell within the inter-event time and more inflow is
//! forecast, else Drawdown above the normal band, else Standby. Every change is a
//! `ModeChange` event whose `reason` is a [`ModeReason`] code.
//!
//! ## Faults and detection times (S = `step_s`)
//!
//! | fault | source / kind | detected within | safe behaviour |
//! |---|---|---|---|
//! | stage below / above range | StageSensor / UnderRange, OverRange | 1 step | Failsafe |
//! | stage missing | StageSensor / Missing | `missing_steps` steps | Failsafe |
//! | stage stuck | StageSensor / Stuck | ⌈`stuck_s`/S⌉ + 1 steps of expected change | Failsafe |
//! | stage spike | StageSensor / Spike | 2 steps (the reading after the spike) | reading discarded, control goes on |
//! | stage rate impossible | StageSensor / RateOfChange | 3 steps (third reading at the new level) | Failsafe |
//! | stage implausible (held back) | StageSensor / Implausible | `missing_steps` steps | Failsafe |
//! | gauge clogged | RainGauge / Clogged | (`clog_after_s` + [`TREND_S`])/S + 1 steps of rising stage | forecast from the stage-based inflow estimate |
//! | gauge chatter | RainGauge / Chatter | 1 step | forecast from the stage-based inflow estimate |
//! | gate stall | GateActuator / Stall | ⌈`move_timeout_s`/S⌉ + 1 steps after the move starts | Failsafe |
//! | position disagrees | GatePosition / Disagree | ⌈`move_timeout_s`/S⌉ + 1 steps after the command settles | Failsafe |
//! | limit switch conflict | GateLimit / LimitConflict | 1 step | Failsafe |
//! | drive fault | GateActuator / DriverFault | 1 step | Failsafe |
//! | position missing | GatePosition / Missing | `missing_steps` steps | Failsafe |
//!
//! A fault is cleared after [`CLEAR_STEPS`] steps without it. Events beyond
//! [`MAX_EVENTS_PER_STEP`] in one step wait in a queue of [`EVENT_QUEUE`] for later steps;
//! only an overflowing queue drops events (counted in [`Outputs::events_dropped`]).

pub mod actuator;
pub mod faults;
pub mod filter;
pub mod mode;
pub mod policy;

pub use actuator::Held;
pub use faults::{CLEAR_STEPS, Fault, Faults};
pub use mode::{Conditions, Mode, ModeReason, auto_mode, transition};
pub use policy::DRAIN_SLICES;

use heapless::{Deque, Vec};

use crate::config::PondConfig;
use crate::event::{AlarmKind, EventBody, ExceedReason};
use crate::forecast::{
    self, FutureRain, Limits, Outlook, Policy, predict_deferred, release_to_hold,
};
use crate::hydraulics::Outlet;
use crate::rain::{Idf, RainGauge};
use crate::routing::{self, Inflow};
use crate::runoff::TimeAreaInflow;
use crate::storage::StageStorage;
use actuator::Actuator;
use faults::{FaultTracker, GateMonitor};
use filter::StageMonitor;
use policy::{Fit, drain_time_s, opening_for_target};

/// Most events handed out per step.
pub const MAX_EVENTS_PER_STEP: usize = 8;
/// Events waiting to be handed out.
pub const EVENT_QUEUE: usize = 32;
/// Rain records the controller's gauge keeps.
pub const GAUGE_RECORDS: usize = 64;
/// Window whose mean intensity the forecast may assume persists, s (the smaller of this and
/// the [`LIKELY_WINDOW_S`] mean is the one persisted).
pub const PERSIST_WINDOW_S: u32 = 900;
/// The short window of the likely view: after a burst's peak the 5-min mean falls first, s.
pub const LIKELY_WINDOW_S: u32 = 300;

// The forecast's two views of the rain still to come (`Controller::outlooks`):
// - likely: the drier of the recent intensity (the smaller of the 5- and 15-min means)
//   persisting for `persistence_s`, and the event following the IDF's depth–duration shape
//   (`FutureRain::FollowIdf`); judged against crest − freeboard (the freeboard absorbs the
//   error when the storm grows);
// - upper: the wetter of the two, or the design-storm continuation when
//   `design_return_period_yr` is set; judged against the crest itself.
/// The views of the rain to come that one forecast weighs (`Controller::views`).
struct Views {
    persist: FutureRain,
    follow: Option<FutureRain>,
    design: Option<FutureRain>,
}

/// Room on the inflow bound for f32 rounding of the outlook's sums, relative.
const BOUND_ROOM_REL: f32 = 1.0e-3;
/// Room on the inflow bound for f32 rounding of the outlook's sums, m³.
const BOUND_ROOM_M3: f32 = 1.0;
/// How far under the stage limit the bound must stay before a forecast skips routing, m:
/// fifty times the forecast solver's stage tolerance ([`forecast::STAGE_TOLERANCE_M`]).
pub const BOUND_MARGIN_M: f32 = 50.0 * forecast::STAGE_TOLERANCE_M;

/// Dry time after which the forecast may end a storm early ("no more inflow"), s.
pub const QUIET_S: u32 = 900;
/// Interval of the stage trend (rising stage for the gauge clog check, stage-based inflow), s.
pub const TREND_S: u32 = 60;
/// A rise larger than this over [`TREND_S`] counts as a rising stage, m.
pub const RISE_M: f32 = 0.002;
/// Within this of the normal level counts as "at normal", m (common practice, no source).
pub const NORMAL_BAND_M: f32 = 0.02;

/// Least hysteresis between leaving Drawdown for Standby (stage back within
/// [`NORMAL_BAND_M`]) and leaving Standby for Drawdown again, m.
pub const MIN_STANDBY_HYSTERESIS_M: f32 = 0.01;

/// Hysteresis above the normal band before Standby gives way to Drawdown: the larger of
/// [`MIN_STANDBY_HYSTERESIS_M`] and four times the stage sensor's noise (a 4σ margin, so noise
/// alone crosses it about once in 30 000 readings; common practice, no source), m.
pub fn standby_hysteresis_m(cfg: &PondConfig) -> f32 {
    let n = 4.0 * cfg.sensors().noise_m;
    if n > MIN_STANDBY_HYSTERESIS_M {
        n
    } else {
        MIN_STANDBY_HYSTERESIS_M
    }
}
/// Surcharge starts when the forecast at the permit target crosses crest − freeboard within
/// this time; a crossing further out waits for fresher forecasts (the persistence assumption
/// overestimates a storm near its peak), s.
pub const SURCHARGE_LEAD_S: u32 = 900;
/// The permit-following opening is worked out at the stage expected this far ahead on the
/// current rise (filter delay, gate travel), s.
pub const LEAD_S: u32 = 60;
/// While the gate cannot pass the target even full open, it is parked on whole
/// `max_opening / PARK_STEPS` steps just above its gate-clear opening (see `clear_goal_m`).
pub const PARK_STEPS: u32 = 12;
/// Longest gate travel time the controller plans ahead for, s.
pub const MAX_TRAVEL_LEAD_S: u32 = 900;
/// Slowest gate speed the travel estimate assumes, m/s (below it the gate counts as stalled).
pub const MIN_GATE_SPEED_M_S: f32 = 1.0e-4;
/// Inflow or release above this share of the permit target means the stage should move (stuck
/// check).
pub const EXPECTED_CHANGE_SHARE: f32 = 0.05;

/// An operator command (authenticated by the firmware; bounds-checked here).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Command {
    /// Drive the gate to `opening_m` (0..=max opening) for `for_s` (1..=`manual_max_s`).
    Manual {
        /// Opening, m.
        opening_m: f32,
        /// How long, s.
        for_s: u32,
    },
    /// End a manual override now.
    Resume,
    /// Clear latched alarms (active conditions stay raised).
    AcknowledgeAlarms,
}

/// Command codes in [`EventBody::CommandRejected`].
pub mod command_code {
    /// Manual opening out of range.
    pub const MANUAL_OPENING: u8 = 0;
    /// Manual duration out of range.
    pub const MANUAL_DURATION: u8 = 1;
}

/// What the controller sees in one step.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Inputs {
    /// Stage reading, m (None = missing).
    pub stage_m: Option<f32>,
    /// Rain gauge tips since the previous step.
    pub rain_tips: u16,
    /// Gate position reading, m (None = missing).
    pub gate_position_m: Option<f32>,
    /// Closed limit switch made.
    pub limit_closed: bool,
    /// Open limit switch made.
    pub limit_open: bool,
    /// The drive reports a fault (timeout, stall).
    pub gate_fault: bool,
    /// An operator command, if one arrived.
    pub command: Option<Command>,
}

/// Operator alarms, one bit each.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Alarms(pub u16);

impl Alarms {
    /// Stage over crest − freeboard.
    pub const HIGH_STAGE: u16 = 1 << 0;
    /// The forecast at the permit target reaches crest − freeboard within
    /// [`SURCHARGE_LEAD_S`], or the controller is releasing above the permit to hold it.
    pub const LOW_FREEBOARD: u16 = 1 << 1;
    /// Drawdown will end after its target time.
    pub const SLOW_DRAWDOWN: u16 = 1 << 2;
    /// Stage at or over the crest.
    pub const OVERTOPPING: u16 = 1 << 3;
    /// Release over the permit.
    pub const PERMIT_EXCEEDED: u16 = 1 << 4;
    /// A stage sensor fault.
    pub const STAGE_FAULT: u16 = 1 << 5;
    /// A gate fault.
    pub const GATE_FAULT: u16 = 1 << 6;
    /// A rain gauge fault.
    pub const RAIN_FAULT: u16 = 1 << 7;
    /// A command was rejected.
    pub const COMMAND_REJECTED: u16 = 1 << 8;

    /// Whether every bit of `mask` is set.
    pub const fn has(self, mask: u16) -> bool {
        self.0 & mask == mask
    }
}

/// Why the opening is what it is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Reason {
    /// At or below the normal level: the gate holds the normal pool (in Standby the gate
    /// is also kept where it is inside the normal band, never opened further).
    Rest,
    /// The rating's opening for the permit target.
    PermitFollowing,
    /// The fixed structures alone pass the target: gate closed.
    FixedExceedsTarget,
    /// Full open passes less than the target.
    CapacityLimited,
    /// Releasing what the forecast needs to stay under crest − freeboard.
    Surcharge,
    /// Drawdown paced to finish no sooner than the minimum detention time.
    DrawdownPace,
    /// Gate closed while the detention pace is below what the fixed structures pass.
    DetentionHold,
    /// The safe opening after a fault.
    SafeOpening,
    /// An operator's opening.
    Manual,
    /// Change inside the deadband: held.
    DeadbandHold,
    /// Too soon after the previous move: held.
    MoveIntervalHold,
    /// Hourly move budget spent: held.
    HourlyLimitHold,
    /// Ramping toward the goal at the rate limit.
    RateLimited,
}

/// What the controller decided.
#[derive(Debug, Clone, PartialEq)]
pub struct Outputs {
    /// Gate opening to command, m.
    pub opening_cmd_m: f32,
    /// Mode after this step.
    pub mode: Mode,
    /// Active and latched (unacknowledged) alarms.
    pub alarms: Alarms,
    /// Active faults.
    pub faults: Faults,
    /// Release aimed at, m³/s.
    pub target_release_m3s: f32,
    /// Why this opening.
    pub reason: Reason,
    /// The stage the controller used (filtered, or model-estimated without a sensor), m.
    pub stage_m: Option<f32>,
    /// Release estimated from the rating at the stage and gate position, m³/s.
    pub release_m3s: f32,
    /// Events to log (the firmware adds sequence numbers and times).
    pub events: Vec<EventBody, MAX_EVENTS_PER_STEP>,
    /// Events lost to a full queue since start.
    pub events_dropped: u16,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct ForecastState {
    low_freeboard: bool,
    over_limit: bool,
    cap_m3s: f32,
    feasible: bool,
    no_more_inflow: bool,
    drawdown_late: bool,
    drawdown_s: f32,
}

impl ForecastState {
    fn quiet(target_m3s: f32) -> Self {
        Self {
            low_freeboard: false,
            over_limit: false,
            cap_m3s: target_m3s,
            feasible: true,
            no_more_inflow: true,
            drawdown_late: false,
            drawdown_s: 0.0,
        }
    }
}

/// The controller's state (see the module doc).
#[derive(Debug, Clone)]
pub struct Controller {
    mode: Mode,
    last_step_s: u32,
    stage: StageMonitor,
    gate: GateMonitor,
    faults: FaultTracker,
    act: Actuator,
    gauge: Option<RainGauge<GAUGE_RECORDS>>,
    runoff: TimeAreaInflow,
    runoff_acc_mm: f32,
    next_runoff_s: u32,
    runoff_inflow_m3s: f32,
    last_rain_s: Option<u32>,
    drawdown_from_s: u32,
    fc: ForecastState,
    next_forecast_s: u32,
    est_storage_m3: Option<f32>,
    trend_s: u32,
    trend_storage_m3: Option<f32>,
    rising: bool,
    rise_m_s: f32,
    inflow_est_m3s: f32,
    gate_speed_m_s: f32,
    last_position_m: Option<f32>,
    manual: Option<(f32, u32)>,
    alarms_active: Alarms,
    alarms_latched: Alarms,
    exceeding: Option<ExceedReason>,
    pending: Deque<EventBody, EVENT_QUEUE>,
    dropped: u16,
    forecasts: u32,
    memo: Memo,
}

/// Answers of a pure function kept by the bits of its arguments: a direct-mapped cache of
/// `N` slots (1 to 64, checked when built). The controller always steps with the
/// configuration it was built with, and the pond's and outlet's functions are pure, so an
/// answer found here is the one a new evaluation would give, bit for bit. The stage the
/// controller uses is a filter of quantised readings: in dry weather it takes a few values
/// over and over, and most evaluations are found here.
#[derive(Debug, Clone, Copy)]
struct Recall<V, const N: usize> {
    keys: [u64; N],
    answers: [V; N],
    /// One bit a slot: set when the slot holds an answer.
    valid: u64,
}

impl<V: Copy + Default, const N: usize> Default for Recall<V, N> {
    fn default() -> Self {
        Self {
            keys: [0; N],
            answers: [V::default(); N],
            valid: 0,
        }
    }
}

impl<V: Copy, const N: usize> Recall<V, N> {
    /// One valid bit a slot in a `u64`: at most 64 slots.
    const FITS: () = assert!(N > 0 && N <= 64, "Recall holds 1 to 64 slots");

    /// The answer kept for `key`, else `f()` (kept in the key's slot).
    #[inline]
    fn get(&mut self, key: u64, f: impl FnOnce() -> V) -> V {
        let () = Self::FITS;
        // Fibonacci hashing: the top bits of the product pick the slot.
        let slot = ((key.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 32) as usize)
            .checked_rem(N)
            .unwrap_or(0);
        let bit = 1u64 << (slot % 64);
        if self.valid & bit != 0
            && self.keys.get(slot) == Some(&key)
            && let Some(q) = self.answers.get(slot)
        {
            return *q;
        }
        let q = f();
        if let (Some(k), Some(v)) = (self.keys.get_mut(slot), self.answers.get_mut(slot)) {
            *k = key;
            *v = q;
            self.valid |= bit;
        }
        q
    }
}

/// The outlet's and the pond's answers the controller asks for at its stage (see
/// [`Recall`]): the release at a stage and opening is asked for more than once a step
/// (trend, the mode's opening, the release estimate), and all of them at the same few
/// filtered stages step after step in dry weather.
#[derive(Debug, Clone, Copy, Default)]
struct Memo {
    release: Recall<f32, 64>,
    /// Storage and plan area at a stage (the trend asks for both at the filtered stage).
    stage: Recall<(f32, f32), 32>,
}

impl Memo {
    /// `outlet.discharge_m3s(h, a)`.
    fn q(&mut self, outlet: &Outlet, h: f32, a: f32) -> f32 {
        let key = (u64::from(h.to_bits()) << 32) | u64::from(a.to_bits());
        self.release.get(key, || outlet.discharge_m3s(h, a))
    }

    /// `pond.storage_m3(h)` and `pond.area_m2(h)`.
    fn at_stage(&mut self, pond: &StageStorage, h: f32) -> (f32, f32) {
        self.stage.get(u64::from(h.to_bits()), || {
            (pond.storage_m3(h), pond.area_m2(h))
        })
    }

    /// `pond.storage_m3(h)`.
    fn storage(&mut self, pond: &StageStorage, h: f32) -> f32 {
        self.at_stage(pond, h).0
    }

    /// `pond.area_m2(h)`.
    fn area(&mut self, pond: &StageStorage, h: f32) -> f32 {
        self.at_stage(pond, h).1
    }
}

fn sane(x: f32) -> f32 {
    if x.is_finite() && x > 0.0 { x } else { 0.0 }
}

impl Controller {
    /// A controller starting at `now_s` in Standby with the gate command at the safe opening.
    pub fn new(cfg: &PondConfig, now_s: u32) -> Controller {
        let dt_r = cfg.catchment().dt_s();
        Controller {
            mode: Mode::Standby,
            last_step_s: now_s,
            stage: StageMonitor::new(now_s),
            gate: GateMonitor::new(now_s),
            faults: FaultTracker::new(),
            act: Actuator::new(cfg.safe().safe_opening_m),
            gauge: RainGauge::new(
                &cfg.sensors().gauge,
                &[
                    300,
                    PERSIST_WINDOW_S,
                    3600,
                    cfg.sensors().gauge.clog_after_s,
                ],
            )
            .ok(),
            runoff: TimeAreaInflow::new(cfg.catchment().clone()),
            runoff_acc_mm: 0.0,
            next_runoff_s: now_s.saturating_add(dt_r),
            runoff_inflow_m3s: 0.0,
            last_rain_s: None,
            drawdown_from_s: now_s,
            fc: ForecastState::quiet(cfg.target_release_m3s()),
            next_forecast_s: now_s,
            est_storage_m3: None,
            trend_s: now_s,
            trend_storage_m3: None,
            rising: false,
            rise_m_s: 0.0,
            inflow_est_m3s: 0.0,
            gate_speed_m_s: cfg.control().max_rate_m_s,
            last_position_m: None,
            manual: None,
            alarms_active: Alarms(0),
            alarms_latched: Alarms(0),
            exceeding: None,
            pending: Deque::new(),
            dropped: 0,
            forecasts: 0,
            memo: Memo::default(),
        }
    }

    /// The current mode.
    pub fn mode(&self) -> Mode {
        self.mode
    }

    /// Forecasts computed since start (for tests and benchmarks).
    pub fn forecasts(&self) -> u32 {
        self.forecasts
    }

    /// The inflow outlook the controller's forecast would use at `now_s` from its present
    /// state (time–area state of the counted rain, and the future-rain assumption it applies:
    /// persistence, the design storm, or the stage-based estimate under a rain-gauge fault).
    /// For replays that compare the forecast with what happened; changes nothing.
    pub fn outlook_now(&self, cfg: &PondConfig, now_s: u32) -> Option<Outlook> {
        let (likely, upper) = self.outlooks(cfg, now_s, self.faults.active().rain());
        upper.or(likely)
    }

    fn log(&mut self, e: EventBody) {
        if self.pending.push_back(e).is_err() {
            self.dropped = self.dropped.saturating_add(1);
        }
    }

    fn fault(&mut self, f: Fault, present: bool) {
        if let Some(e) = self.faults.update(f, present) {
            self.log(e);
        }
    }

    /// [`Self::fault`] for each of `seen` in order. A group with none present and none
    /// active changes nothing (a quiet count runs only for an active fault), so it is
    /// passed over as a whole: the usual step of a healthy device. Inlined on the host,
    /// where the arrays then fold to constants (86 instructions a quiet step of a long
    /// replay); left out of line on the device, where flash is the tighter budget.
    #[cfg_attr(not(target_os = "none"), inline(always))]
    fn faults_seen(&mut self, seen: &[(Fault, bool)]) {
        let (any, mask) = seen
            .iter()
            .fold((false, 0u16), |(a, m), (f, p)| (a | *p, m | f.bit()));
        if !any && self.faults.active().0 & mask == 0 {
            return;
        }
        for &(f, p) in seen {
            self.fault(f, p);
        }
    }

    fn command(&mut self, cfg: &PondConfig, cmd: Option<Command>, now_s: u32) {
        match cmd {
            None => {}
            Some(Command::Manual { opening_m, for_s }) => {
                let max = cfg.outlet().max_opening_m();
                if !(opening_m.is_finite() && (0.0..=max).contains(&opening_m)) {
                    self.log(EventBody::CommandRejected {
                        command: command_code::MANUAL_OPENING,
                        value: opening_m,
                    });
                    self.alarms_latched.0 |= Alarms::COMMAND_REJECTED;
                } else if for_s == 0 || for_s > cfg.control().manual_max_s {
                    self.log(EventBody::CommandRejected {
                        command: command_code::MANUAL_DURATION,
                        value: for_s as f32,
                    });
                    self.alarms_latched.0 |= Alarms::COMMAND_REJECTED;
                } else {
                    self.manual = Some((opening_m, now_s.saturating_add(for_s)));
                }
            }
            Some(Command::Resume) => self.manual = None,
            Some(Command::AcknowledgeAlarms) => self.alarms_latched = Alarms(0),
        }
    }

    fn rain(&mut self, cfg: &PondConfig, tips: u16, now_s: u32, dt_s: u32) -> bool {
        let counted = match self.gauge.as_mut() {
            Some(g) => g.record_tips_over(now_s, dt_s, u32::from(tips)),
            None => 0,
        };
        if counted > 0 {
            self.last_rain_s = Some(now_s);
        }
        self.runoff_acc_mm += counted as f32 * cfg.sensors().gauge.bucket_mm;
        let dt_r = cfg.catchment().dt_s();
        let mut pushes = 0u32;
        while now_s >= self.next_runoff_s && pushes < 256 {
            self.runoff_inflow_m3s = self.runoff.push_step(self.runoff_acc_mm);
            self.runoff_acc_mm = 0.0;
            self.next_runoff_s = self.next_runoff_s.saturating_add(dt_r);
            pushes = pushes.saturating_add(1);
        }
        if now_s >= self.next_runoff_s {
            self.next_runoff_s = now_s.saturating_add(dt_r);
        }
        counted > 0
    }

    /// The likely and the upper outlook (see the views above); the upper one is `None` where it is the
    /// likely one (a gauge fault, no event, or both assumptions giving one outlook).
    fn outlooks(
        &self,
        cfg: &PondConfig,
        now_s: u32,
        rain_fault: bool,
    ) -> (Option<Outlook>, Option<Outlook>) {
        let c = cfg.control();
        let idf: &dyn Idf = cfg.idf();
        if rain_fault {
            let base = Outlook::from_time_area(
                &self.runoff,
                &FutureRain::Dry,
                None,
                c.forecast_step_s,
                c.horizon_s,
            )
            .ok();
            let Some(base) = base else {
                return (None, None);
            };
            let mut q = [0.0_f32; forecast::MAX_OUTLOOK_STEPS];
            let mut t = 0u32;
            for (slot, &b) in q.iter_mut().zip(base.inflow_m3s()) {
                let est = if t < c.persistence_s {
                    self.inflow_est_m3s
                } else {
                    0.0
                };
                *slot = b.max(est);
                t = t.saturating_add(c.forecast_step_s);
            }
            let look = q
                .get(..base.steps())
                .and_then(|q| Outlook::from_samples(c.forecast_step_s, q).ok());
            return (look, None);
        }
        let views = self.views(cfg, now_s);
        let look = |future: &FutureRain| {
            Outlook::from_time_area(
                &self.runoff,
                future,
                Some(idf),
                c.forecast_step_s,
                c.horizon_s,
            )
            .ok()
        };
        let design = views.design.as_ref().and_then(look);
        let persist = look(&views.persist);
        let follow = views.follow.as_ref().and_then(look);
        let (likely, wetter) = match (persist, follow) {
            (Some(p), Some(f)) if f.volume_m3() < p.volume_m3() => (Some(f), Some(p)),
            (Some(p), Some(f)) => (Some(p), Some(f)),
            (p, f) => (p.or(f), None),
        };
        (likely, design.or(wetter))
    }

    /// The assumptions about the rain still to come that the forecast weighs (see the views
    /// above): persistence of the recent intensity, the IDF-shaped continuation while it
    /// rains, and the design-storm continuation when a design return period is set.
    fn views(&self, cfg: &PondConfig, now_s: u32) -> Views {
        let c = cfg.control();
        let event = self.gauge.as_ref().and_then(|g| g.current_event().copied());
        let intensity = |w: u32| {
            self.gauge
                .as_ref()
                .map_or(0.0, |g| g.reading(now_s, w).intensity_mm_h)
        };
        let short_mm_h = intensity(LIKELY_WINDOW_S);
        let design =
            event
                .filter(|_| c.design_return_period_yr > 0.0)
                .map(|ev| FutureRain::DesignStorm {
                    return_period_yr: c.design_return_period_yr,
                    elapsed_s: now_s.saturating_sub(ev.start_s),
                    depth_so_far_mm: ev.depth_mm,
                });
        let persist = FutureRain::Persist {
            intensity_mm_h: short_mm_h.min(intensity(PERSIST_WINDOW_S)),
            for_s: c.persistence_s,
        };
        // Following the curve only while it rains (the 5-min mean is the latest word).
        let follow = event
            .filter(|_| short_mm_h > 0.0)
            .map(|ev| FutureRain::FollowIdf {
                elapsed_s: now_s.saturating_sub(ev.start_s),
                depth_so_far_mm: ev.depth_mm,
                for_s: c.persistence_s,
            });
        Views {
            persist,
            follow,
            design,
        }
    }

    /// Most inflow volume any view of the rain to come can bring over the horizon, m³: the
    /// runoff still on its way plus the deepest view's rain over the whole effective area,
    /// with room for f32 rounding. `None` if a view cannot be evaluated.
    ///
    /// No outlook the forecast builds brings more (the tests check it against
    /// [`Self::outlook_now`] over whole storms): this is what lets a forecast skip routing
    /// when the pond could take it all, and skip building the outlooks when it also settles
    /// "no more inflow".
    pub fn inflow_bound_m3(&self, cfg: &PondConfig, now_s: u32) -> Option<f32> {
        let c = cfg.control();
        let idf: &dyn Idf = cfg.idf();
        let dt_r = self.runoff.response().dt_s().max(1);
        let runoff_steps = c
            .horizon_s
            .div_ceil(c.forecast_step_s.max(1))
            .saturating_mul(c.forecast_step_s.checked_div(dt_r).unwrap_or(0));
        let views = self.views(cfg, now_s);
        let depth = |f: &FutureRain| f.depth_at_most_mm(Some(idf), dt_r, runoff_steps).ok();
        let mut deepest_mm = depth(&views.persist)?;
        for f in views.follow.iter().chain(views.design.iter()) {
            deepest_mm = deepest_mm.max(depth(f)?);
        }
        let area_m2 = self.runoff.response().effective_area_m2();
        let v = self.runoff.pending_volume_m3() + deepest_mm * 1.0e-3 * area_m2;
        let v = v * (1.0 + BOUND_ROOM_REL) + BOUND_ROOM_M3;
        v.is_finite().then_some(v)
    }

    fn run_forecast(&mut self, cfg: &PondConfig, now_s: u32, storage_m3: f32, stage_m: f32) {
        self.forecasts = self.forecasts.saturating_add(1);
        let target = cfg.target_release_m3s();
        let limits = Limits {
            permit_m3s: target,
            stage_limit_m: cfg.stage_limit_m(),
            crest_m: cfg.levels().crest_m,
        };
        let pond = cfg.storage();
        let outlet = cfg.outlet();
        let mut fc = ForecastState::quiet(target);
        let normal_m = cfg.levels().normal_m;
        let above_m3 = storage_m3 - pond.storage_m3(normal_m);
        let rain_fault = self.faults.active().rain();
        let crest = Limits {
            stage_limit_m: limits.crest_m,
            ..limits
        };
        let wait = self.wait_steps(cfg);
        let surcharging = self.mode == Mode::Surcharge;
        // Open above the permit when holding to it would cross `lim` and waiting for the next
        // forecast would leave even the full-open gate unable to hold it; once in Surcharge,
        // stay while holding to the permit would cross it anywhere in the horizon.
        let h0 = pond.stage_m(storage_m3);
        // Holding the permit over `look`: with no inflow the stage can only fall, so nothing
        // can cross what it is under now (no routing needed).
        let at_permit = |look: &Outlook| -> Option<forecast::Prediction> {
            (look.volume_m3() > 0.0 || h0 > limits.stage_limit_m).then(|| {
                forecast::predict(
                    pond,
                    outlet,
                    storage_m3,
                    look,
                    Policy::CapRelease { cap_m3s: target },
                    &limits,
                )
            })
        };
        // Open above the permit when holding to it would cross `lim` (within `lead_s`) and
        // waiting for the next forecast would leave even the full-open gate unable to hold
        // it; once in Surcharge, stay while holding to it would cross it anywhere.
        let act = |look: &Outlook, crossing_s: Option<u32>, lim: &Limits, lead_s: u32| {
            crossing_s.is_some_and(|t| surcharging || t <= lead_s)
                && (surcharging
                    || !predict_deferred(pond, outlet, storage_m3, look, wait, lim).holds(lim))
        };
        let crest_crossing = |p: &forecast::Prediction| {
            (p.peak_stage_m > crest.stage_limit_m).then_some(p.peak_at_s)
        };
        // Nothing to route when even releasing nothing while every m³ any view can bring
        // arrives keeps the pond under the stage limit: no routing of an outlook could then
        // cross it (storage never exceeds the start plus the inflow), so no crossing, no
        // low-freeboard alarm and no Surcharge. Most forecasts of a long record end here.
        let bound_m3 = if rain_fault {
            None
        } else {
            self.inflow_bound_m3(cfg, now_s)
        };
        let cannot_reach = bound_m3
            .is_some_and(|v| pond.stage_m(storage_m3 + v) < limits.stage_limit_m - BOUND_MARGIN_M);
        let quiet = self
            .last_rain_s
            .is_none_or(|t| now_s.saturating_sub(t) >= QUIET_S);
        // "No more inflow": the outlook brings at most a hundredth of the water above normal
        // (at least 1 m³).
        let no_more_m3 = 0.01 * above_m3.max(100.0);
        // The outlooks are still needed after rain has stopped, for "no more inflow", unless
        // the bound (at least every outlook's volume) already settles it: then, with nothing
        // to route, building them would change nothing (most forecasts of a dry drawdown).
        let (likely, upper) = if cannot_reach && !quiet {
            fc.no_more_inflow = false;
            (None, None)
        } else if cannot_reach && bound_m3.is_some_and(|v| v <= no_more_m3) {
            fc.no_more_inflow = true;
            (None, None)
        } else {
            self.outlooks(cfg, now_s, rain_fault)
        };
        let (likely_routed, upper_routed) = if cannot_reach {
            (None, None)
        } else {
            (likely.as_ref(), upper.as_ref())
        };
        let mut hold_crest: Option<&Outlook> = None;
        if let Some(look) = likely_routed
            && let Some(p) = at_permit(look)
        {
            fc.low_freeboard = p.first_over_limit_s.is_some_and(|t| t <= SURCHARGE_LEAD_S);
            if act(look, p.first_over_limit_s, &limits, SURCHARGE_LEAD_S) {
                let h = release_to_hold(pond, outlet, storage_m3, look, &limits);
                fc.over_limit = true;
                fc.cap_m3s = h.cap_m3s;
                fc.feasible = h.feasible;
            }
            if upper_routed.is_none() && act(look, crest_crossing(&p), &crest, u32::MAX) {
                hold_crest = Some(look);
            }
        }
        // The crest against the upper view of the rain to come, with no lead: the crest is
        // never left to a later forecast.
        if let Some(look) = upper_routed
            && let Some(p) = at_permit(look)
            && act(look, crest_crossing(&p), &crest, u32::MAX)
        {
            hold_crest = Some(look);
        }
        if let Some(look) = hold_crest {
            let h = release_to_hold(pond, outlet, storage_m3, look, &crest);
            fc.cap_m3s = if fc.over_limit {
                fc.cap_m3s.max(h.cap_m3s)
            } else {
                h.cap_m3s
            };
            fc.feasible = fc.feasible && h.feasible;
            fc.over_limit = true;
        }
        if let Some(look) = upper.as_ref().or(likely.as_ref()) {
            fc.no_more_inflow = quiet && look.volume_m3() <= no_more_m3;
        }
        if self.mode == Mode::Drawdown {
            let cap = self.drawdown_target_m3s(cfg, now_s, storage_m3).0;
            let end = self.storm_end_s();
            let since_end = now_s.saturating_sub(end) as f32;
            match drain_time_s(pond, outlet, stage_m, normal_m + NORMAL_BAND_M, cap) {
                Some(t) => {
                    fc.drawdown_s = since_end + t;
                    fc.drawdown_late = fc.drawdown_s > cfg.control().drawdown_target_s as f32;
                }
                None => {
                    fc.drawdown_s = f32::INFINITY;
                    fc.drawdown_late = true;
                }
            }
        }
        self.fc = fc;
    }

    /// Forecast steps the decision to open above the permit may wait and still act in time
    /// (see [`forecast::predict_deferred`]):
    /// the next forecast, the lead of the permit-following opening and the gate's full
    /// travel at its observed speed ([`Controller::gate_speed_m_s`]), rounded up.
    pub fn wait_steps(&self, cfg: &PondConfig) -> usize {
        let c = cfg.control();
        let speed = self.gate_speed_m_s.max(MIN_GATE_SPEED_M_S);
        let travel_s = crate::math::clamp(
            cfg.outlet().max_opening_m() / speed,
            0.0,
            MAX_TRAVEL_LEAD_S as f32,
        );
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        let wait_s = c
            .forecast_every_s
            .saturating_add(LEAD_S)
            .saturating_add(travel_s as u32);
        let step = c.forecast_step_s.max(1);
        usize::try_from(wait_s.div_ceil(step)).unwrap_or(usize::MAX)
    }

    /// The gate's travel speed as last observed while it moved at its own pace toward a
    /// command it had not reached, m/s (starts at `max_rate_m_s`, never above it).
    pub fn gate_speed_m_s(&self) -> f32 {
        self.gate_speed_m_s
    }

    /// Updates the observed gate speed: a gate that moved toward last step's command without
    /// reaching it moved at its own top speed.
    fn observe_gate(
        &mut self,
        cmd_m: f32,
        position_m: f32,
        gate_fault: bool,
        dt_s: u32,
        cfg: &PondConfig,
    ) {
        let limit = cfg.control().max_rate_m_s;
        if let (Some(prev), false) = (self.last_position_m, gate_fault) {
            let moved = position_m - prev;
            let wanted = cmd_m - prev;
            let tol = cfg.sensors().position_tolerance_m;
            // Moving the commanded way, by more than the sensor's tolerance, and still short.
            if moved * wanted > 0.0 && (cmd_m - position_m).abs() > tol && moved.abs() > tol * 0.5 {
                let v = moved.abs() / dt_s.max(1) as f32;
                self.gate_speed_m_s = crate::math::clamp(v, MIN_GATE_SPEED_M_S, limit);
            }
        }
        self.last_position_m = Some(position_m);
    }

    /// The opening to hold while even the full-open gate passes less than the target: the
    /// gate-clear opening at `stage_m` ([`crate::hydraulics::SluiceGate::clear_opening_m`])
    /// rounded up to a whole [`PARK_STEPS`]th of the travel, kept while it is within two
    /// such steps above that on a rise ([`RISE_M`] over [`TREND_S`]) and otherwise never
    /// lowered. Higher openings pass the
    /// same water; parking the gate just above the clear opening leaves it little travel
    /// with no effect once the target starts to bind (with a slow gate that dead travel was
    /// a permit exceedance on a fast rise), and the rounding bounds the moves.
    fn clear_goal_m(&self, outlet: &Outlet, stage_m: f32, max_open: f32) -> f32 {
        let Some(g) = outlet.gate() else {
            return max_open;
        };
        let step = max_open / PARK_STEPS as f32;
        if step.is_nan() || step <= 0.0 {
            return max_open;
        }
        let clear = g.clear_opening_m(stage_m);
        let q = crate::math::clamp(crate::math::ceil(clear / step) * step, 0.0, max_open);
        let goal = self.act.goal_m();
        if self.rising {
            if goal >= q && goal <= q + 2.0 * step {
                goal
            } else {
                q
            }
        } else if goal > q {
            goal
        } else {
            q
        }
    }

    fn storm_end_s(&self) -> u32 {
        self.last_rain_s.unwrap_or(self.drawdown_from_s)
    }

    /// Drawdown target and whether it is paced by the minimum detention time.
    fn drawdown_target_m3s(&self, cfg: &PondConfig, now_s: u32, storage_m3: f32) -> (f32, bool) {
        let target = cfg.target_release_m3s();
        let min_det = cfg.control().min_detention_s;
        if min_det == 0 {
            return (target, false);
        }
        let until = self.storm_end_s().saturating_add(min_det);
        let left = until.saturating_sub(now_s);
        if left == 0 {
            return (target, false);
        }
        let band_m3 = cfg
            .storage()
            .storage_m3(cfg.levels().normal_m + NORMAL_BAND_M);
        let above = sane(storage_m3 - band_m3);
        let pace = above / left as f32;
        if pace < target {
            (pace, true)
        } else {
            (target, false)
        }
    }

    fn set_mode(&mut self, to: Mode, reason: ModeReason, now_s: u32) {
        if to == self.mode {
            return;
        }
        let from = self.mode;
        self.log(EventBody::ModeChange {
            from: from.code(),
            to: to.code(),
            reason: reason.code(),
        });
        if to == Mode::Drawdown {
            self.drawdown_from_s = now_s;
        }
        if from == Mode::Manual {
            self.manual = None;
        }
        self.mode = to;
    }

    /// One control step at `now_s` (see the module doc). Pure: depends only on `cfg`,
    /// `inputs`, `now_s` and the state. `cfg` must be the configuration the controller was
    /// built with ([`Controller::new`]): the state holds its catchment response and answers
    /// of its outlet and pond.
    pub fn step(&mut self, cfg: &PondConfig, inputs: &Inputs, now_s: u32) -> Outputs {
        let dt_s = now_s.saturating_sub(self.last_step_s).max(1);
        self.last_step_s = now_s;
        let target = cfg.target_release_m3s();
        let permit = cfg.permit().release_m3s;
        let pond = cfg.storage();
        let outlet: &Outlet = cfg.outlet();
        let max_open = outlet.max_opening_m();
        let normal_m = cfg.levels().normal_m;
        let limit_m = cfg.stage_limit_m();
        let crest_m = cfg.levels().crest_m;
        let sensors = cfg.sensors();

        self.command(cfg, inputs.command, now_s);
        let rain_now = self.rain(cfg, inputs.rain_tips, now_s, dt_s);

        // Stage plausibility and filter.
        let prev_cmd = self.act.cmd_m();
        let last_stage = self.stage.filtered_m();
        // The release at last step's stage matters only above the normal band, so it is
        // evaluated only there (most steps of a dry spell skip it).
        let change_expected = self.runoff_inflow_m3s > EXPECTED_CHANGE_SHARE * target
            || last_stage.is_some_and(|h| {
                h > normal_m + NORMAL_BAND_M
                    && self.memo.q(outlet, h, prev_cmd) > EXPECTED_CHANGE_SHARE * target
            });
        let so = self
            .stage
            .update(inputs.stage_m, now_s, sensors, change_expected);
        self.faults_seen(&[
            (Fault::StageUnderRange, so.under_range),
            (Fault::StageOverRange, so.over_range),
            (Fault::StageMissing, so.missing),
            (Fault::StageStuck, so.stuck),
            (Fault::StageSpike, so.spike),
            (Fault::StageRate, so.rate),
            (Fault::StageErratic, so.erratic),
        ]);

        // Gate supervision (against last step's command).
        let go = self.gate.update(
            prev_cmd,
            inputs.gate_position_m,
            inputs.limit_closed,
            inputs.limit_open,
            inputs.gate_fault,
            max_open,
            now_s,
            sensors,
        );
        self.faults_seen(&[
            (Fault::GateStall, go.stall),
            (Fault::GateDisagree, go.disagree),
            (Fault::GateLimitConflict, go.limit_conflict),
            (Fault::GateDriver, go.driver),
            (Fault::GatePositionMissing, go.position_missing),
        ]);

        // Rain gauge health.
        let status = self.gauge.as_mut().map(|g| g.step(now_s, self.rising));
        self.faults_seen(&[
            (Fault::RainClogged, status.is_some_and(|s| s.clogged)),
            (Fault::RainChatter, status.is_some_and(|s| s.chatter)),
        ]);

        let faults = self.faults.active();
        let position_m = match inputs.gate_position_m {
            Some(p) if p.is_finite() && !faults.gate() => crate::math::clamp(p, 0.0, max_open),
            _ => prev_cmd,
        };
        self.observe_gate(prev_cmd, position_m, faults.gate(), dt_s, cfg);

        // The stage used: filtered when trusted, else the model estimate.
        let trusted = !faults.stage_untrusted();
        let (stage_m, guard_m) = match (trusted, self.stage.filtered_m()) {
            (true, Some(h)) => {
                let latest = self.stage.latest_m().unwrap_or(h);
                self.est_storage_m3 = Some(self.memo.storage(pond, h));
                (Some(h), Some(h.max(latest)))
            }
            _ => {
                let est = self.est_storage_m3.map(|s| {
                    routing::step(
                        pond,
                        &outlet.at(position_m),
                        s,
                        Inflow::steady(self.runoff_inflow_m3s),
                        dt_s,
                    )
                    .storage_m3
                });
                self.est_storage_m3 = est;
                let h = est.map(|s| pond.stage_m(s));
                (h, h)
            }
        };
        let storage_m3 = self.est_storage_m3;

        // The outlet's release is asked for at the same stage and opening more than once a
        // step (trend, the mode's opening, the release estimate) and, in dry weather, at the
        // same few filtered stages step after step: `self.memo` keeps the answers.

        // Trend: rising stage and the stage-based inflow estimate.
        if now_s.saturating_sub(self.trend_s) >= TREND_S {
            let span = now_s.saturating_sub(self.trend_s) as f32;
            if let (Some(s), Some(h)) = (storage_m3, stage_m) {
                let q_out = self.memo.q(outlet, h, position_m);
                match self.trend_storage_m3 {
                    Some(s0) => {
                        let area = self.memo.area(pond, h).max(1.0);
                        self.rising = (s - s0) / area > RISE_M;
                        self.rise_m_s = sane((s - s0) / area / span);
                        self.inflow_est_m3s = sane((s - s0) / span + q_out);
                    }
                    None => self.rising = false,
                }
            }
            self.trend_storage_m3 = storage_m3;
            self.trend_s = now_s;
        }

        // Forecast when due and when anything is happening.
        let raining_recently = self
            .last_rain_s
            .is_some_and(|t| now_s.saturating_sub(t) < cfg.control().inter_event_s);
        let above_normal = stage_m.is_some_and(|h| h > normal_m + NORMAL_BAND_M);
        let well_above_normal =
            stage_m.is_some_and(|h| h > normal_m + NORMAL_BAND_M + standby_hysteresis_m(cfg));
        let active = raining_recently
            || self.runoff_inflow_m3s > 0.0
            || above_normal
            || self.mode == Mode::Surcharge;
        if rain_now && self.mode == Mode::Standby {
            // Rain just started: forecast now rather than at the next period.
            self.next_forecast_s = now_s;
        }
        if !active {
            self.fc = ForecastState::quiet(target);
        } else if now_s >= self.next_forecast_s {
            if let (Some(s), Some(h)) = (storage_m3, stage_m) {
                self.run_forecast(cfg, now_s, s, h);
            }
            self.next_forecast_s = now_s.saturating_add(cfg.control().forecast_every_s);
        }

        // Mode.
        let manual_expired = self.manual.is_some_and(|(_, until)| now_s >= until);
        if manual_expired {
            self.manual = None;
        }
        let cond = Conditions {
            stage_fault: !trusted,
            gate_fault: faults.gate(),
            forecast_over_limit: self.fc.over_limit,
            stage_over_limit: guard_m.is_some_and(|h| h > limit_m),
            manual_active: self.manual.is_some(),
            manual_expired,
            rain_now,
            dry_inter_event: !raining_recently,
            no_more_inflow: self.fc.no_more_inflow,
            above_normal,
            well_above_normal,
        };
        if let Some((to, reason)) = transition(self.mode, &cond) {
            self.set_mode(to, reason, now_s);
        }

        // What opening the mode wants: at the guard stage (the higher of filtered and latest)
        // carried forward on the current rise by LEAD_S.
        let h = stage_m.unwrap_or(normal_m);
        let h_lead = guard_m.unwrap_or(h) + self.rise_m_s * LEAD_S as f32;
        let surcharge_opening = || -> (f32, f32) {
            if !self.fc.feasible || cond.stage_over_limit {
                (max_open, f32::INFINITY)
            } else {
                let cap = self.fc.cap_m3s.max(target);
                (opening_for_target(outlet, h, cap).0, cap)
            }
        };
        let (wanted_m, mut target_m3s, reason, mut urgent) = match self.mode {
            Mode::Manual => {
                let a = self.manual.map_or(prev_cmd, |(a, _)| a);
                (a, self.memo.q(outlet, h, a), Reason::Manual, true)
            }
            Mode::Surcharge => {
                let (a, cap) = surcharge_opening();
                (a, cap, Reason::Surcharge, a > self.act.goal_m())
            }
            Mode::Failsafe => {
                let safe = cfg.safe().safe_opening_m;
                let needs = cond.forecast_over_limit || cond.stage_over_limit;
                if needs && stage_m.is_some() {
                    let (a, cap) = if trusted {
                        surcharge_opening()
                    } else {
                        (max_open, f32::INFINITY)
                    };
                    (a.max(safe), cap, Reason::Surcharge, true)
                } else {
                    (
                        safe,
                        self.memo.q(outlet, h, safe),
                        Reason::SafeOpening,
                        true,
                    )
                }
            }
            Mode::Standby | Mode::Capture | Mode::Drawdown => {
                if h <= normal_m {
                    (0.0, 0.0, Reason::Rest, false)
                } else if self.mode == Mode::Standby {
                    // Dry weather inside the normal band (and its hysteresis): the gate is
                    // never opened further here, only closed once the stage is back at
                    // normal, so sensor noise about the normal level does not work it open
                    // and shut; water above the band is Drawdown's.
                    let a = self.act.goal_m();
                    (a, self.memo.q(outlet, h, a), Reason::Rest, false)
                } else {
                    let (t, paced) = if self.mode == Mode::Drawdown {
                        self.drawdown_target_m3s(cfg, now_s, storage_m3.unwrap_or(0.0))
                    } else {
                        (target, false)
                    };
                    let (mut a, fit) = opening_for_target(outlet, h_lead, t);
                    if fit == Fit::CapacityLimited {
                        a = self.clear_goal_m(outlet, h_lead, max_open);
                    }
                    let r = match (fit, paced) {
                        (Fit::FixedExceeds, true) => Reason::DetentionHold,
                        (Fit::FixedExceeds, false) => Reason::FixedExceedsTarget,
                        (Fit::CapacityLimited, _) => Reason::CapacityLimited,
                        (Fit::Exact, true) => Reason::DrawdownPace,
                        (Fit::Exact, false) => Reason::PermitFollowing,
                    };
                    (a, t, r, false)
                }
            }
        };
        let wanted_m = crate::math::clamp(wanted_m, 0.0, max_open);
        // Permit protection: closing at once when the release at the goal would use more
        // than half of the margin.
        let guard_h = guard_m.unwrap_or(h);
        if !urgent
            && wanted_m < self.act.goal_m()
            && self.memo.q(outlet, h_lead, self.act.goal_m()) > 0.5 * (target + permit)
        {
            urgent = true;
        }
        if !target_m3s.is_finite() {
            target_m3s = self.memo.q(outlet, h, max_open);
        }
        let a = self
            .act
            .step(wanted_m, max_open, urgent, now_s, dt_s, cfg.control());
        if a.moved {
            self.log(EventBody::Decision {
                target_release_m3s: target_m3s,
                opening_cmd: if max_open > 0.0 {
                    self.act.goal_m() / max_open
                } else {
                    0.0
                },
            });
        }
        let reason = match a.held {
            Some(Held::Deadband) => Reason::DeadbandHold,
            Some(Held::MoveInterval) => Reason::MoveIntervalHold,
            Some(Held::HourlyLimit) => Reason::HourlyLimitHold,
            Some(Held::Ramping) => Reason::RateLimited,
            None => reason,
        };

        // Release and permit exceedance.
        let release_m3s = if stage_m.is_some() {
            self.memo.q(outlet, guard_h, position_m)
        } else {
            0.0
        };
        if release_m3s > permit {
            let why = match self.mode {
                Mode::Surcharge => ExceedReason::Surcharge,
                Mode::Manual => ExceedReason::Manual,
                Mode::Failsafe => ExceedReason::Failsafe,
                _ if self.act.goal_m() <= 0.0 && outlet.fixed_discharge_m3s(guard_h) > permit => {
                    ExceedReason::Uncontrolled
                }
                _ => ExceedReason::GateUnable,
            };
            if self.exceeding != Some(why) {
                self.exceeding = Some(why);
                self.log(EventBody::PermitExceedance {
                    release_m3s,
                    permit_m3s: permit,
                    reason: why,
                });
            }
        } else {
            self.exceeding = None;
        }

        // Alarms.
        let mut active_alarms = 0u16;
        let gh = guard_m.unwrap_or(f32::NEG_INFINITY);
        let set = |cond: bool, bit: u16, acc: &mut u16| {
            if cond {
                *acc |= bit;
            }
        };
        set(gh > limit_m, Alarms::HIGH_STAGE, &mut active_alarms);
        set(gh >= crest_m, Alarms::OVERTOPPING, &mut active_alarms);
        set(
            self.fc.over_limit || self.fc.low_freeboard,
            Alarms::LOW_FREEBOARD,
            &mut active_alarms,
        );
        set(
            self.fc.drawdown_late && self.mode == Mode::Drawdown,
            Alarms::SLOW_DRAWDOWN,
            &mut active_alarms,
        );
        set(
            release_m3s > permit,
            Alarms::PERMIT_EXCEEDED,
            &mut active_alarms,
        );
        set(!trusted, Alarms::STAGE_FAULT, &mut active_alarms);
        set(faults.gate(), Alarms::GATE_FAULT, &mut active_alarms);
        set(faults.rain(), Alarms::RAIN_FAULT, &mut active_alarms);
        let rising_edge = active_alarms & !self.alarms_active.0;
        let freeboard_m = crest_m - h;
        for (bit, kind, value) in [
            (Alarms::HIGH_STAGE, AlarmKind::HighStage, gh),
            (Alarms::LOW_FREEBOARD, AlarmKind::LowFreeboard, freeboard_m),
            (
                Alarms::SLOW_DRAWDOWN,
                AlarmKind::SlowDrawdown,
                self.fc.drawdown_s,
            ),
            (Alarms::OVERTOPPING, AlarmKind::Overtopping, gh),
        ] {
            if rising_edge & bit != 0 {
                self.log(EventBody::Alarm { kind, value });
            }
        }
        self.alarms_active = Alarms(active_alarms);
        self.alarms_latched.0 |= active_alarms;

        let mut events = Vec::new();
        while events.len() < MAX_EVENTS_PER_STEP {
            match self.pending.pop_front() {
                Some(e) => {
                    // Cannot fail: the length was checked.
                    let _ = events.push(e);
                }
                None => break,
            }
        }
        Outputs {
            opening_cmd_m: a.cmd_m,
            mode: self.mode,
            alarms: Alarms(self.alarms_latched.0 | active_alarms),
            faults: self.faults.active(),
            target_release_m3s: target_m3s,
            reason,
            stage_m,
            release_m3s,
            events,
            events_dropped: self.dropped,
        }
    }
}

/// Sensor limits shared by the unit tests of the stage filter and the fault tracker.
#[cfg(test)]
fn test_sensor_limits() -> crate::config::SensorLimits {
    crate::config::SensorLimits {
        stage_min_m: -0.5,
        stage_max_m: 5.0,
        max_stage_rate_m_s: 0.002,
        spike_m: 0.1,
        noise_m: 0.01,
        stuck_s: 600,
        missing_steps: 6,
        position_tolerance_m: 0.01,
        move_timeout_s: 60,
        gauge: crate::rain::GaugeSettings::default(),
    }
}

#[cfg(test)]
mod memo_tests {
    use super::*;
    use crate::hydraulics::{CircularOrifice, Riser, SluiceGate, Spillway};

    /// The caches answer every query with the outlet's and the pond's own answers, bit for
    /// bit, through hits, misses and slot collisions (the controller's decisions must not
    /// depend on whether an answer was kept): 20,000 queries drawn from 300 stages (some
    /// repeated, as a filtered quantised stage repeats) and 7 openings, on an outlet of
    /// orifice, riser, spillway and gate and a frustum pond. The reference is the direct
    /// evaluation.
    #[test]
    fn memo_gives_the_outlets_and_ponds_answers_bit_for_bit() {
        let o = CircularOrifice::new(100.0, 0.15, 0.6).unwrap();
        let r = Riser::circular(101.8, 1.2, 0.6, 0.6).unwrap();
        let s = Spillway::new(102.6, 8.0, 3.0, 0.9).unwrap();
        let g = SluiceGate::new(100.0, 0.6, 0.6, 0.61, 0.98).unwrap();
        let outlet = Outlet::new(&[o.into(), r.into(), s.into()], Some(g), Some(100.1)).unwrap();
        let pond = StageStorage::from_areas(
            &[(100.0, 1500.0), (101.0, 2750.0), (103.0, 5850.0)],
            crate::storage::VolumeMethod::Frustum,
        )
        .unwrap();
        let mut memo = Memo::default();
        let mut x = 0x2545_f491_u32;
        let mut hits = 0;
        let mut seen = std::collections::HashSet::new();
        for _ in 0..20_000 {
            // xorshift32: a fixed sequence of queries.
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            let h = 99.9 + (x % 300) as f32 * 0.01;
            let a = [0.0, 0.05, 0.1, 0.3, 0.6, -0.1, f32::NAN][(x >> 16) as usize % 7];
            if !seen.insert((h.to_bits(), a.to_bits())) {
                hits += 1;
            }
            let want = outlet.discharge_m3s(h, a);
            assert_eq!(
                memo.q(&outlet, h, a).to_bits(),
                want.to_bits(),
                "h {h} a {a}"
            );
            let want = pond.storage_m3(h);
            assert_eq!(memo.storage(&pond, h).to_bits(), want.to_bits(), "h {h}");
            let want = pond.area_m2(h);
            assert_eq!(memo.area(&pond, h).to_bits(), want.to_bits(), "h {h}");
        }
        assert!(hits > 10_000, "the queries repeat ({hits} repeats)");
    }
}
