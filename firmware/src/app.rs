//! The main loop, generic over a [`Board`].
//!
//! At boot the board's `main` reads the packed pond configuration with [`load_config`]
//! ([`holdback_core::packed::unpack`]: length, magic, version, CRC, then every constructor)
//! and keeps the result alive for the whole run (a `PondConfig` is ~2.4 KiB: it is borrowed,
//! never copied). [`App::boot`] opens the event log on the board's log flash and starts the
//! core [`Controller`] on that configuration. [`App::step`] is one control step:
//!
//! 1. sample: stage reading, rain tips since the last step, gate position and limits;
//! 2. step the controller (pure: [`Controller::step`]);
//! 3. command the gate;
//! 4. log the controller's events, and a periodic sample every [`AppOptions::sample_every_s`]
//!    through the log's [`SamplePolicy`];
//! 5. feed the watchdog.
//!
//! [`App::tick`] waits for the step's time on the board's clock first; a board's `main` is
//! `loop { app.tick(command) }` with the command (if any) from the remote link. The
//! [`StepReport`] each step returns is the telemetry hook: the telemetry task (branch
//! `telemetry`) forwards it; nothing else depends on it.
//!
//! ## An unreadable configuration
//!
//! When the blob fails any check, there is no pond to control: the gate is commanded to the
//! board's [`Board::FALLBACK_SAFE_OPENING_M`] at boot and every step, the mode reported is
//! Failsafe, [`CONFIG_INVALID`] is raised in the alarms, and one `FaultRaised { Config, … }`
//! is logged (kind `Corrupt` for a frame that fails its length/magic/version/CRC/decoding,
//! `Implausible` for numbers a constructor refused). Steps then run every
//! [`UNCONFIGURED_STEP_S`] so the watchdog is fed and the alarm is reported.
//!
//! Invariants: a log failure never stops control (it is counted, and samples carry
//! `HealthFlags::FLASH`); no heap, no panic.

use core::ops::Range;

use embedded_storage::nor_flash::NorFlash;
use holdback_core::config::PondConfig;
use holdback_core::control::{Alarms, Command, Controller, Inputs, Outputs};
use holdback_core::event::{EventBody, FaultKind, FaultSource, HealthFlags, ModeCode};
use holdback_core::packed::{self, PackError};

use crate::StageInput;
use crate::eventlog::{EventLog, SamplePolicy};

/// Alarm bit raised when the packed configuration cannot be used (above the controller's
/// own [`Alarms`] bits).
pub const CONFIG_INVALID: u16 = 1 << 15;

/// Step period while unconfigured, s.
pub const UNCONFIGURED_STEP_S: u32 = 10;

/// The gate feedback a board reads each step.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateReading {
    /// Measured opening, m (None: feedback missing or unreadable).
    pub position_m: Option<f32>,
    /// Closed limit switch made.
    pub limit_closed: bool,
    /// Open limit switch made.
    pub limit_open: bool,
    /// The drive reports a fault (timeout, stall, overcurrent).
    pub fault: bool,
}

/// Everything the main loop needs from a board: drivers, clock, log flash and watchdog.
///
/// Porting holdback to a new MCU means implementing this trait (see `firmware/PORTING.md`).
pub trait Board {
    /// The stage sensor driver.
    type Stage: StageInput;
    /// The NOR flash holding the event log.
    type LogFlash: NorFlash;
    /// The gate opening held when the packed configuration is unreadable, m: chosen at
    /// commissioning for this board's gate (there is no pond config to take it from).
    const FALLBACK_SAFE_OPENING_M: f32;
    /// Seconds since boot, from a monotonic clock.
    fn now_s(&self) -> u32;
    /// Blocks (sleeps) until [`Board::now_s`] ≥ `t_s`; returns at once if it already is.
    fn wait_until_s(&mut self, t_s: u32);
    /// The stage sensor (a reading in m on the pond's datum).
    fn stage(&mut self) -> &mut Self::Stage;
    /// Rain gauge tips counted since the previous call (saturating).
    fn rain_tips(&mut self) -> u16;
    /// Gate position, limit switches and drive fault, now.
    fn gate(&mut self) -> GateReading;
    /// Drive the gate toward `opening_m` (m, in `[0, max opening]`); returns at once.
    fn command_gate(&mut self, opening_m: f32);
    /// The event-log flash and the byte range of it the log may use; handed over once at
    /// boot (None afterwards, or when the board has none).
    fn take_log_flash(&mut self) -> Option<(Self::LogFlash, Range<u32>)>;
    /// Feed the watchdog; called once per control step.
    fn feed_watchdog(&mut self);
}

/// Main-loop settings that are the firmware's, not the pond's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AppOptions {
    /// Thinning of periodic samples in dry weather.
    pub policy: SamplePolicy,
    /// A periodic sample is offered to the log this often, s (0 = every step).
    pub sample_every_s: u32,
}

impl Default for AppOptions {
    /// Samples every 60 s, one in 15 of them in dry weather (common practice, no source).
    fn default() -> Self {
        Self {
            policy: SamplePolicy::new(15),
            sample_every_s: 60,
        }
    }
}

/// One step as it happened: the decision trace and the telemetry hook.
#[derive(Debug, Clone, PartialEq)]
pub struct StepReport {
    /// Time of the step, s.
    pub time_s: u32,
    /// Stage as read from the sensor, m (NaN: missing).
    pub stage_m: f32,
    /// Gate opening commanded, m.
    pub opening_cmd_m: f32,
    /// Mode after the step.
    pub mode: ModeCode,
    /// Alarms (the controller's bits plus [`CONFIG_INVALID`]).
    pub alarms: Alarms,
    /// The controller's whole output (None while unconfigured).
    pub outputs: Option<Outputs>,
}

struct Configured<'c> {
    cfg: &'c PondConfig,
    ctl: Controller,
}

/// Reads a packed pond configuration (see the module doc); the caller keeps the result for
/// [`App::boot`].
pub fn load_config(blob: &[u8]) -> Result<PondConfig, PackError> {
    packed::unpack(blob)
}

/// The firmware's main loop state (see the module doc).
pub struct App<'c, B: Board> {
    board: B,
    log: Option<EventLog<B::LogFlash>>,
    run: Option<Configured<'c>>,
    config_error: Option<PackError>,
    next_step_s: u32,
    next_sample_s: u32,
    opts: AppOptions,
    log_failures: u32,
}

fn config_fault_kind(e: &PackError) -> FaultKind {
    match e {
        PackError::Build { .. } => FaultKind::Implausible,
        _ => FaultKind::Corrupt,
    }
}

impl<'c, B: Board> App<'c, B> {
    /// Boots on `board` with the configuration [`load_config`] gave (see the module doc).
    pub fn boot(mut board: B, config: Result<&'c PondConfig, PackError>, opts: AppOptions) -> Self {
        let now = board.now_s();
        let log = board
            .take_log_flash()
            .and_then(|(flash, range)| EventLog::new(flash, range, opts.policy).ok());
        let mut app = Self {
            board,
            log,
            run: None,
            config_error: None,
            next_step_s: now,
            next_sample_s: now,
            opts,
            log_failures: 0,
        };
        if app.log.is_none() {
            app.log_failures = app.log_failures.saturating_add(1);
        }
        match config {
            Ok(cfg) => {
                let ctl = Controller::new(cfg, now);
                app.board.command_gate(cfg.safe().safe_opening_m);
                app.run = Some(Configured { cfg, ctl });
            }
            Err(e) => {
                app.board.command_gate(B::FALLBACK_SAFE_OPENING_M);
                app.append(
                    now,
                    EventBody::FaultRaised {
                        source: FaultSource::Config,
                        kind: config_fault_kind(&e),
                    },
                );
                app.config_error = Some(e);
            }
        }
        app
    }

    /// Why the configuration was refused (None when running on it).
    pub fn config_error(&self) -> Option<PackError> {
        self.config_error
    }

    /// The configuration in use.
    pub fn config(&self) -> Option<&'c PondConfig> {
        self.run.as_ref().map(|r| r.cfg)
    }

    /// The board.
    pub fn board(&self) -> &B {
        &self.board
    }

    /// The board, mutably (for the board's own housekeeping between steps).
    pub fn board_mut(&mut self) -> &mut B {
        &mut self.board
    }

    /// The event log (None if the flash was unusable).
    pub fn log_mut(&mut self) -> Option<&mut EventLog<B::LogFlash>> {
        self.log.as_mut()
    }

    /// Records that could not be written (or a log that could not be opened) since boot.
    pub fn log_failures(&self) -> u32 {
        self.log_failures
    }

    /// When the next step is due, s.
    pub fn next_step_s(&self) -> u32 {
        self.next_step_s
    }

    fn append(&mut self, now_s: u32, body: EventBody) {
        let ok = self
            .log
            .as_mut()
            .is_some_and(|l| l.append(now_s, body).is_ok());
        if !ok {
            self.log_failures = self.log_failures.saturating_add(1);
        }
    }

    /// Waits for the next step's time on the board's clock, then runs [`App::step`].
    pub fn tick(&mut self, command: Option<Command>) -> StepReport {
        self.board.wait_until_s(self.next_step_s);
        self.step(command)
    }

    /// One control step now (see the module doc); `command` is an authenticated operator
    /// command, if one arrived.
    pub fn step(&mut self, command: Option<Command>) -> StepReport {
        let now = self.board.now_s();
        let stage_m = self.board.stage().read_stage_m().ok();
        let tips = self.board.rain_tips();
        let gate = self.board.gate();
        let report = match self.run.as_mut() {
            Some(run) => {
                let inputs = Inputs {
                    stage_m,
                    rain_tips: tips,
                    gate_position_m: gate.position_m,
                    limit_closed: gate.limit_closed,
                    limit_open: gate.limit_open,
                    gate_fault: gate.fault,
                    command,
                };
                let out = run.ctl.step(run.cfg, &inputs, now);
                self.board.command_gate(out.opening_cmd_m);
                let step_s = run.cfg.control().step_s;
                self.next_step_s = now.saturating_add(step_s);
                StepReport {
                    time_s: now,
                    stage_m: stage_m.unwrap_or(f32::NAN),
                    opening_cmd_m: out.opening_cmd_m,
                    mode: out.mode.code(),
                    alarms: out.alarms,
                    outputs: Some(out),
                }
            }
            None => {
                self.board.command_gate(B::FALLBACK_SAFE_OPENING_M);
                self.next_step_s = now.saturating_add(UNCONFIGURED_STEP_S);
                StepReport {
                    time_s: now,
                    stage_m: stage_m.unwrap_or(f32::NAN),
                    opening_cmd_m: B::FALLBACK_SAFE_OPENING_M,
                    mode: ModeCode::Failsafe,
                    alarms: Alarms(CONFIG_INVALID),
                    outputs: None,
                }
            }
        };
        self.log_step(now, &report, gate.position_m);
        self.board.feed_watchdog();
        // Telemetry hook: the telemetry task takes `report` from here (branch `telemetry`).
        report
    }

    fn log_step(&mut self, now: u32, report: &StepReport, position_m: Option<f32>) {
        if let Some(out) = report.outputs.as_ref() {
            for e in out.events.iter() {
                self.append(now, *e);
            }
        }
        if now < self.next_sample_s {
            return;
        }
        self.next_sample_s = now.saturating_add(self.opts.sample_every_s);
        let mut health = 0u8;
        let (storage_m3, release_m3s, max_open) = match (self.run.as_ref(), &report.outputs) {
            (Some(run), Some(out)) => {
                let f = out.faults;
                if f.stage_untrusted() {
                    health |= HealthFlags::STAGE;
                }
                if f.rain() {
                    health |= HealthFlags::RAIN;
                }
                if f.gate() {
                    health |= HealthFlags::GATE;
                }
                let s = out
                    .stage_m
                    .map_or(f32::NAN, |h| run.cfg.storage().storage_m3(h));
                (s, out.release_m3s, run.cfg.outlet().max_opening_m())
            }
            _ => (f32::NAN, f32::NAN, f32::NAN),
        };
        if position_m.is_none() {
            health |= HealthFlags::POSITION;
        }
        if self.log_failures > 0 {
            health |= HealthFlags::FLASH;
        }
        let body = EventBody::Sample {
            stage_m: report.stage_m,
            storage_m3,
            release_m3s,
            opening: position_m.map_or(f32::NAN, |p| p / max_open),
            mode: report.mode,
            health: HealthFlags(health),
        };
        let ok = self
            .log
            .as_mut()
            .is_some_and(|l| l.log_sample(now, body).is_ok());
        if !ok {
            self.log_failures = self.log_failures.saturating_add(1);
        }
    }
}
