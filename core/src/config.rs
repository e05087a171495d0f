//! The validated description of one pond: everything the controller needs, checked once.
//!
//! [`PondConfig::new`] takes the parts ([`PondParts`]: stage–storage, outlet with its gate,
//! levels, permit, catchment response, IDF, control, sensor and safe settings), checks each
//! number and the rules between them, and returns a config whose accessors cannot fail. The
//! desktop tool builds the parts from a pond file; the firmware from the packed device blob.
//!
//! Units: stages m (one datum with the survey table and the structure inverts), discharges
//! m³/s, times integer seconds, gate openings m.
//!
//! Invariants of a built [`PondConfig`]:
//! - the outlet has a controlled gate;
//! - `floor ≤ normal < crest − freeboard < crest`, all within the sensor's stage range;
//! - the safe opening lies in `[0, max opening]`;
//! - the permitted release is positive and finite, the margin in `[0, 0.5]`;
//! - control periods are positive and the forecast horizon fits the outlook capacity;
//! - the catchment's runoff step is a whole number of control steps and the forecast step a
//!   whole number of runoff steps (at most 3600 s);
//! - the gauge settings pass the rain gauge's own checks; moves per hour are 1..=64.

use core::fmt;

use crate::hydraulics::Outlet;
use crate::rain::{GaugeSettings, Idf, IdfCurves, IdfTable};
use crate::runoff::TimeAreaResponse;
use crate::storage::StageStorage;
use crate::validate::{self, Invalid};

/// Why a pond description was rejected.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ConfigError {
    /// One number broke its rule.
    Invalid(Invalid),
    /// Two or more values contradict each other; `rule` says how.
    Inconsistent {
        /// The field that was checked against the others.
        field: &'static str,
        /// Its value.
        value: f32,
        /// The rule between the fields (`"must be below crest_m - freeboard_m"`).
        rule: &'static str,
    },
    /// The outlet has no controlled gate: there is nothing to control.
    NoGate,
}

impl From<Invalid> for ConfigError {
    fn from(e: Invalid) -> Self {
        ConfigError::Invalid(e)
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConfigError::Invalid(e) => e.fmt(f),
            ConfigError::Inconsistent { field, value, rule } => {
                write!(f, "{field} = {value}: {rule}")
            }
            ConfigError::NoGate => f.write_str("outlet.gate: a controlled gate is required"),
        }
    }
}

impl core::error::Error for ConfigError {}

fn inconsistent(field: &'static str, value: f32, rule: &'static str) -> ConfigError {
    ConfigError::Inconsistent { field, value, rule }
}

/// A number's own rule as a config rule.
fn own(r: Result<f32, Invalid>) -> Result<(), ConfigError> {
    r.map(drop).map_err(ConfigError::from)
}

/// The pond's IDF relation, in either published form.
// No heap in the core, so no `Box`: the config holds one of these, ~1 KiB at most.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq)]
pub enum IdfModel {
    /// Formula curves (Talbot, Sherman, power law) per return period.
    Curves(IdfCurves),
    /// A table of intensities, durations × return periods.
    Table(IdfTable),
}

impl Idf for IdfModel {
    fn return_periods_years(&self) -> &[f32] {
        match self {
            IdfModel::Curves(c) => c.return_periods_years(),
            IdfModel::Table(t) => t.return_periods_years(),
        }
    }

    fn intensity_at(&self, duration_min: f32, k: usize) -> f32 {
        match self {
            IdfModel::Curves(c) => c.intensity_at(duration_min, k),
            IdfModel::Table(t) => t.intensity_at(duration_min, k),
        }
    }

    fn first_depth_non_decreasing(&self) -> bool {
        match self {
            IdfModel::Curves(c) => c.first_depth_non_decreasing(),
            IdfModel::Table(t) => t.first_depth_non_decreasing(),
        }
    }
}

/// The levels that matter to control, m on the survey datum.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Levels {
    /// Normal (dry-weather) water level the pond drains back to.
    pub normal_m: f32,
    /// Crest of the emergency spillway: above it the pond overtops its controlled outlet.
    pub crest_m: f32,
    /// Freeboard kept below the crest: the controller treats `crest − freeboard` as the
    /// highest stage it may plan for.
    pub freeboard_m: f32,
}

/// The permitted release.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Permit {
    /// Permitted total release, m³/s.
    pub release_m3s: f32,
    /// Fraction of the permit held back as a margin for rating error (0.05 aims at 95 %).
    pub margin: f32,
}

/// How the controller runs. Defaults are starting points for commissioning (common practice,
/// no source), not design values.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ControlSettings {
    /// Control period, s.
    pub step_s: u32,
    /// A fresh forecast at least this often, s.
    pub forecast_every_s: u32,
    /// Forecast horizon, s.
    pub horizon_s: u32,
    /// Forecast time step, s.
    pub forecast_step_s: u32,
    /// Rain assumed to go on at the current intensity for this long, s.
    pub persistence_s: u32,
    /// Return period of the design-storm continuation in the forecast, years (0 = off).
    pub design_return_period_yr: f32,
    /// The pond must be back at the normal level within this time after rain ends, s.
    pub drawdown_target_s: u32,
    /// Water is held at least this long after rain ends, for water quality, s (0 = off).
    pub min_detention_s: u32,
    /// Dry time that ends a storm, s.
    pub inter_event_s: u32,
    /// Opening changes smaller than this are not made, m.
    pub deadband_m: f32,
    /// Least time between two gate moves, s.
    pub min_move_interval_s: u32,
    /// Fastest commanded opening change, m/s.
    pub max_rate_m_s: f32,
    /// Most gate moves started in any hour.
    pub max_moves_per_hour: u16,
    /// Longest manual override before the controller takes over again, s.
    pub manual_max_s: u32,
}

impl Default for ControlSettings {
    fn default() -> Self {
        ControlSettings {
            step_s: 10,
            forecast_every_s: 60,
            horizon_s: 3 * 3600,
            forecast_step_s: 180,
            persistence_s: 1800,
            design_return_period_yr: 0.0,
            drawdown_target_s: 48 * 3600,
            min_detention_s: 0,
            inter_event_s: 6 * 3600,
            deadband_m: 0.01,
            min_move_interval_s: 60,
            max_rate_m_s: 0.005,
            max_moves_per_hour: 20,
            manual_max_s: 4 * 3600,
        }
    }
}

/// What the sensors can plausibly say; readings outside are faults.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SensorLimits {
    /// Lowest stage the stage sensor can report, m.
    pub stage_min_m: f32,
    /// Highest stage the stage sensor can report, m.
    pub stage_max_m: f32,
    /// Fastest stage change the pond can physically make, m/s.
    pub max_stage_rate_m_s: f32,
    /// A jump larger than this that returns within a step or two is a spike, m.
    pub spike_m: f32,
    /// A reading that does not change at all for this long while inflow is expected is stuck, s.
    pub stuck_s: u32,
    /// This many missing readings in a row is a stage fault.
    pub missing_steps: u16,
    /// Reading-to-reading noise allowed on top of `max_stage_rate_m_s` before a change counts
    /// as implausible, m (≥ 0; 0.01 m is a starting point for a pressure transducer — common
    /// practice, no source; [`SensorLimits::DEFAULT_NOISE_M`]).
    pub noise_m: f32,
    /// Gate position may differ from the command by this much once the gate has settled, m.
    pub position_tolerance_m: f32,
    /// A commanded move that has not arrived within this time is a gate fault, s.
    pub move_timeout_s: u32,
    /// The rain gauge.
    pub gauge: GaugeSettings,
}

impl SensorLimits {
    /// Default for [`SensorLimits::noise_m`], m (common practice, no source).
    pub const DEFAULT_NOISE_M: f32 = 0.01;
}

/// What to do when the controller cannot trust its inputs.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SafeSettings {
    /// The fixed opening chosen at commissioning for faults and an unreadable config, m.
    pub safe_opening_m: f32,
}

/// The parts of a pond description before validation.
#[derive(Debug, Clone, PartialEq)]
pub struct PondParts {
    /// Stage–storage relation.
    pub storage: StageStorage,
    /// Fixed structures plus the controlled gate.
    pub outlet: Outlet,
    /// Normal level, spillway crest, freeboard.
    pub levels: Levels,
    /// Permitted release.
    pub permit: Permit,
    /// The catchment's unit response (runoff to the pond per step of rain).
    pub catchment: TimeAreaResponse,
    /// The IDF relation for the site.
    pub idf: IdfModel,
    /// Control settings.
    pub control: ControlSettings,
    /// Sensor plausibility limits.
    pub sensors: SensorLimits,
    /// Safe behaviour.
    pub safe: SafeSettings,
}

/// A validated pond description (see the module doc for its invariants).
#[derive(Debug, Clone, PartialEq)]
pub struct PondConfig {
    parts: PondParts,
}

/// Largest forecast horizon in forecast steps.
pub const MAX_HORIZON_STEPS: u32 = 64;

/// Largest `control.max_moves_per_hour` (the controller keeps the times of this many moves).
pub const MAX_MOVES_PER_HOUR: usize = 64;

impl PondConfig {
    /// Validates `parts` (every number, then the rules between them) and returns the config,
    /// or the first rule broken in the order of [`PondConfig::each_problem`].
    pub fn new(parts: PondParts) -> Result<PondConfig, ConfigError> {
        let mut first = None;
        Self::each_problem(&parts, &mut |e| {
            first.get_or_insert(e);
        });
        match first {
            Some(e) => Err(e),
            None => Ok(PondConfig { parts }),
        }
    }

    /// Reports every rule of [`PondConfig::new`] that `parts` breaks, in order, so that a
    /// tool can list all the mistakes of a description at once. A rule between fields is
    /// checked only once the fields it compares have passed their own rules (a zero step is
    /// reported as zero, not also as not dividing the runoff step).
    pub fn each_problem(parts: &PondParts, report: &mut dyn FnMut(ConfigError)) {
        let mut note = |r: Result<(), ConfigError>| {
            if let Err(e) = r {
                report(e);
            }
        };
        let floor = parts.storage.floor_m();
        let gate = parts.outlet.gate();
        if gate.is_none() {
            note(Err(ConfigError::NoGate));
        }
        let l = &parts.levels;
        let normal_ok = validate::finite("levels.normal_m", l.normal_m);
        let crest_ok = validate::finite("levels.crest_m", l.crest_m);
        let freeboard_ok = validate::non_negative("levels.freeboard_m", l.freeboard_m);
        let levels_ok = normal_ok.is_ok() && crest_ok.is_ok() && freeboard_ok.is_ok();
        // Normal below the planned highest stage: the deadband rule compares against it.
        let below_limit = l.normal_m < l.crest_m - l.freeboard_m;
        note(own(normal_ok));
        note(own(crest_ok));
        note(own(freeboard_ok));
        if levels_ok && l.normal_m < floor {
            note(Err(inconsistent(
                "levels.normal_m",
                l.normal_m,
                "must not be below the floor of the stage-storage table",
            )));
        }
        if levels_ok && !below_limit {
            note(Err(inconsistent(
                "levels.normal_m",
                l.normal_m,
                "must be below crest_m - freeboard_m",
            )));
        }
        note(own(validate::positive(
            "permit.release_m3s",
            parts.permit.release_m3s,
        )));
        note(own(validate::within(
            "permit.margin",
            parts.permit.margin,
            0.0,
            0.5,
            "must be in [0, 0.5]",
        )));
        let safe = parts.safe.safe_opening_m;
        if let Some(g) = gate
            && !(safe.is_finite() && (0.0..=g.max_opening_m()).contains(&safe))
        {
            note(Err(inconsistent(
                "safe.safe_opening_m",
                safe,
                "must be in [0, the gate's max_opening_m]",
            )));
        }
        let c = &parts.control;
        Self::check_control(c, &mut note);
        // A deadband as deep as the pond between normal and crest would never let the gate
        // move at all.
        if levels_ok && below_limit && c.deadband_m >= l.crest_m - l.normal_m {
            note(Err(inconsistent(
                "control.deadband_m",
                c.deadband_m,
                "must be below levels.crest_m - levels.normal_m",
            )));
        }
        if c.step_s > 0 && (1..=3600).contains(&c.forecast_step_s) {
            Self::check_steps(c, parts.catchment.dt_s(), &mut note);
        }
        Self::check_sensors(&parts.sensors, floor, l.crest_m, &mut note);
    }

    /// The control settings' own rules.
    fn check_control(c: &ControlSettings, note: &mut impl FnMut(Result<(), ConfigError>)) {
        for (field, v) in [
            ("control.step_s", c.step_s),
            ("control.forecast_every_s", c.forecast_every_s),
            ("control.horizon_s", c.horizon_s),
            ("control.forecast_step_s", c.forecast_step_s),
            ("control.drawdown_target_s", c.drawdown_target_s),
            ("control.inter_event_s", c.inter_event_s),
            ("control.manual_max_s", c.manual_max_s),
        ] {
            if v == 0 {
                note(Err(ConfigError::Invalid(Invalid {
                    field,
                    value: 0.0,
                    rule: "must be > 0 s",
                })));
            }
        }
        if c.forecast_step_s > 0 && c.horizon_s.div_ceil(c.forecast_step_s) > MAX_HORIZON_STEPS {
            note(Err(inconsistent(
                "control.horizon_s",
                c.horizon_s as f32,
                "must be at most 64 forecast steps (raise control.forecast_step_s)",
            )));
        }
        if c.drawdown_target_s > 0 && c.min_detention_s >= c.drawdown_target_s {
            note(Err(inconsistent(
                "control.min_detention_s",
                c.min_detention_s as f32,
                "must be below control.drawdown_target_s",
            )));
        }
        for r in [
            validate::non_negative("control.design_return_period_yr", c.design_return_period_yr),
            validate::non_negative("control.deadband_m", c.deadband_m),
            validate::positive("control.max_rate_m_s", c.max_rate_m_s),
        ] {
            note(own(r));
        }
        if c.max_moves_per_hour == 0 || usize::from(c.max_moves_per_hour) > MAX_MOVES_PER_HOUR {
            note(Err(ConfigError::Invalid(Invalid {
                field: "control.max_moves_per_hour",
                value: f32::from(c.max_moves_per_hour),
                rule: "must be in 1..=64",
            })));
        }
        if c.forecast_step_s > 3600 {
            note(Err(inconsistent(
                "control.forecast_step_s",
                c.forecast_step_s as f32,
                "must be at most 3600 s",
            )));
        }
    }

    /// The rules between the control periods and the catchment's runoff step: the runoff step
    /// is a whole number of control steps, and the forecast step a whole number of runoff steps.
    fn check_steps(
        c: &ControlSettings,
        runoff_dt_s: u32,
        note: &mut impl FnMut(Result<(), ConfigError>),
    ) {
        if !runoff_dt_s.is_multiple_of(c.step_s) {
            note(Err(inconsistent(
                "control.step_s",
                c.step_s as f32,
                "must divide the catchment response's time step",
            )));
        }
        if !c.forecast_step_s.is_multiple_of(runoff_dt_s) {
            note(Err(inconsistent(
                "control.forecast_step_s",
                c.forecast_step_s as f32,
                "must be a whole multiple of the catchment response's time step",
            )));
        }
    }

    fn check_sensors(
        s: &SensorLimits,
        floor_m: f32,
        crest_m: f32,
        note: &mut impl FnMut(Result<(), ConfigError>),
    ) {
        let min_ok = validate::finite("sensors.stage_min_m", s.stage_min_m).is_ok();
        let max_ok = validate::finite("sensors.stage_max_m", s.stage_max_m).is_ok();
        for r in [
            validate::finite("sensors.stage_min_m", s.stage_min_m),
            validate::finite("sensors.stage_max_m", s.stage_max_m),
        ] {
            note(own(r));
        }
        if min_ok && s.stage_min_m > floor_m {
            note(Err(inconsistent(
                "sensors.stage_min_m",
                s.stage_min_m,
                "must not be above the pond floor (the sensor must read an empty pond)",
            )));
        }
        if max_ok && s.stage_max_m <= crest_m {
            note(Err(inconsistent(
                "sensors.stage_max_m",
                s.stage_max_m,
                "must be above levels.crest_m (the sensor must read an overtopping pond)",
            )));
        }
        for r in [
            validate::positive("sensors.max_stage_rate_m_s", s.max_stage_rate_m_s),
            validate::positive("sensors.spike_m", s.spike_m),
            validate::positive("sensors.position_tolerance_m", s.position_tolerance_m),
        ] {
            note(own(r));
        }
        if s.stuck_s == 0 || s.move_timeout_s == 0 || s.missing_steps == 0 {
            note(Err(inconsistent(
                "sensors",
                0.0,
                "stuck_s, move_timeout_s and missing_steps must all be > 0",
            )));
        }
        note(own(validate::non_negative("sensors.noise_m", s.noise_m)));
        // The controller builds its gauge from these settings: they must pass the gauge's own
        // checks (bucket, plausible intensity, spread cap, clog and dry times).
        note(
            crate::rain::RainGauge::<1>::new(&s.gauge, &[3600])
                .map(drop)
                .map_err(|e| match e {
                    crate::rain::RainError::Invalid(i) => ConfigError::Invalid(i),
                    _ => inconsistent("sensors.gauge", 0.0, "rejected by the rain gauge"),
                }),
        );
    }

    /// Stage–storage relation.
    pub fn storage(&self) -> &StageStorage {
        &self.parts.storage
    }
    /// Outlet (fixed structures and the gate).
    pub fn outlet(&self) -> &Outlet {
        &self.parts.outlet
    }
    /// Levels.
    pub fn levels(&self) -> &Levels {
        &self.parts.levels
    }
    /// Highest stage the controller may plan for: crest − freeboard, m.
    pub fn stage_limit_m(&self) -> f32 {
        self.parts.levels.crest_m - self.parts.levels.freeboard_m
    }
    /// Permit.
    pub fn permit(&self) -> &Permit {
        &self.parts.permit
    }
    /// The release the controller aims at below the permit: permit × (1 − margin), m³/s.
    pub fn target_release_m3s(&self) -> f32 {
        self.parts.permit.release_m3s * (1.0 - self.parts.permit.margin)
    }
    /// Catchment response.
    pub fn catchment(&self) -> &TimeAreaResponse {
        &self.parts.catchment
    }
    /// IDF relation.
    pub fn idf(&self) -> &IdfModel {
        &self.parts.idf
    }
    /// Control settings.
    pub fn control(&self) -> &ControlSettings {
        &self.parts.control
    }
    /// Sensor limits.
    pub fn sensors(&self) -> &SensorLimits {
        &self.parts.sensors
    }
    /// Safe behaviour.
    pub fn safe(&self) -> &SafeSettings {
        &self.parts.safe
    }
    /// The parts, e.g. to edit one and validate again.
    pub fn parts(&self) -> &PondParts {
        &self.parts
    }
}
