//! A [`Board`] whose peripherals are backed by the core's plant model
//! ([`holdback_core::plant`]): the emulated reference board under QEMU and the host replay run
//! this same code, so their decision traces can be compared bit for bit.
//!
//! - stage sensor: reads the plant's stage;
//! - gate: the command drives the plant's actuator; position feedback is the plant's actual
//!   opening, limits are made at 0 and at the full opening; the drive never faults;
//! - rain gauge: the storm's depth per control step goes into the plant and into a
//!   [`BucketGauge`] of the pond's bucket size; tips are reported at the next step;
//! - clock: the plant's time; [`Board::wait_until_s`] advances the plant to the requested
//!   time in one step, taking the next storm record (0 mm after the storm ends);
//! - event log: any NOR flash the caller gives (a `RamFlash` in RAM on the emulated board);
//! - watchdog: counts feeds.
//!
//! [`run_closed_loop`] is the whole closed-loop run, and [`TraceRecord`] its output record.
//! Storm file format (no float parsing on the device): `u32` step count, then that many
//! `f32` rain depths (mm per control step), all little-endian. Trace format: per step
//! [`TraceRecord::BYTES`] bytes: `time_s u32`, `stage_m f32` bits, `opening_cmd_m f32` bits,
//! `mode u8` ([`ModeCode`] code), little-endian, no padding.

use core::convert::Infallible;
use core::ops::Range;

use embedded_storage::nor_flash::NorFlash;
use holdback_core::config::PondConfig;
use holdback_core::event::ModeCode;
use holdback_core::plant::{BucketGauge, Plant, PlantError};

use crate::StageInput;
use crate::app::{App, Board, GateReading, StepReport};

/// Where the storm comes from: one rain depth per control step.
pub trait RainSource {
    /// Rain over the next control step, mm (0 once the storm is over).
    fn next_rain_mm(&mut self) -> f32;
}

/// A storm held in a slice.
pub struct SliceRain<'a>(pub core::slice::Iter<'a, f32>);

impl RainSource for SliceRain<'_> {
    fn next_rain_mm(&mut self) -> f32 {
        self.0.next().copied().unwrap_or(0.0)
    }
}

/// Gate speed of the virtual actuator, m/s (an invented, plausible motorised sluice).
pub const VIRTUAL_GATE_SPEED_M_S: f32 = 0.01;

/// The fallback opening of the virtual board when the config is unreadable, m (a board
/// constant chosen for its invented gate; a real board takes it from its commissioning).
pub const VIRTUAL_FALLBACK_SAFE_OPENING_M: f32 = 0.1;

/// The stage sensor: the plant's stage, latched after every plant step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlantStage(f32);

impl StageInput for PlantStage {
    type Error = Infallible;
    fn read_stage_m(&mut self) -> Result<f32, Infallible> {
        Ok(self.0)
    }
}

/// The virtual board (see the module doc).
pub struct VirtualBoard<'c, R, F> {
    cfg: &'c PondConfig,
    plant: Plant,
    gauge: BucketGauge,
    rain: R,
    tips: u16,
    stage: PlantStage,
    flash: Option<(F, Range<u32>)>,
    feeds: u32,
    peak_stage_m: f32,
    peak_release_m3s: f32,
}

impl<'c, R: RainSource, F: NorFlash> VirtualBoard<'c, R, F> {
    /// A board over the pond `cfg` (the *true* pond; the controller gets its own config from
    /// the packed blob), starting at the normal level with the gate at the pond's safe
    /// opening, at time 0, with the storm `rain` and the log on `range` of `flash`.
    pub fn new(
        cfg: &'c PondConfig,
        rain: R,
        flash: F,
        range: Range<u32>,
    ) -> Result<Self, PlantError> {
        let normal = cfg.levels().normal_m;
        let plant = Plant::new(
            cfg,
            normal,
            cfg.safe().safe_opening_m,
            VIRTUAL_GATE_SPEED_M_S,
            0,
        )?;
        let gauge = BucketGauge::new(cfg.sensors().gauge.bucket_mm)?;
        Ok(Self {
            cfg,
            stage: PlantStage(plant.stage_m()),
            peak_stage_m: plant.stage_m(),
            peak_release_m3s: plant.outflow_m3s(),
            plant,
            gauge,
            rain,
            tips: 0,
            flash: Some((flash, range)),
            feeds: 0,
        })
    }

    /// The plant.
    pub fn plant(&self) -> &Plant {
        &self.plant
    }

    /// Watchdog feeds so far.
    pub fn feeds(&self) -> u32 {
        self.feeds
    }

    /// Highest stage the plant reached, m.
    pub fn peak_stage_m(&self) -> f32 {
        self.peak_stage_m
    }

    /// Highest release the plant made, m³/s.
    pub fn peak_release_m3s(&self) -> f32 {
        self.peak_release_m3s
    }
}

impl<R: RainSource, F: NorFlash> Board for VirtualBoard<'_, R, F> {
    type Stage = PlantStage;
    type LogFlash = F;
    const FALLBACK_SAFE_OPENING_M: f32 = VIRTUAL_FALLBACK_SAFE_OPENING_M;

    fn now_s(&self) -> u32 {
        self.plant.time_s()
    }

    fn wait_until_s(&mut self, t_s: u32) {
        let dt = t_s.saturating_sub(self.plant.time_s());
        if dt == 0 {
            return;
        }
        let rain = self.rain.next_rain_mm();
        self.tips = self.tips.saturating_add(self.gauge.tips(rain));
        let r = self.plant.step(self.cfg, rain, dt);
        self.stage = PlantStage(r.stage_m);
        self.peak_stage_m = self.peak_stage_m.max(r.stage_m);
        self.peak_release_m3s = self.peak_release_m3s.max(r.outflow_m3s);
    }

    fn stage(&mut self) -> &mut PlantStage {
        &mut self.stage
    }

    fn rain_tips(&mut self) -> u16 {
        core::mem::take(&mut self.tips)
    }

    fn gate(&mut self) -> GateReading {
        let p = self.plant.opening_m();
        GateReading {
            position_m: Some(p),
            limit_closed: p <= 0.0,
            limit_open: p >= self.cfg.outlet().max_opening_m(),
            fault: false,
        }
    }

    fn command_gate(&mut self, opening_m: f32) {
        self.plant.command(self.cfg, opening_m);
    }

    fn take_log_flash(&mut self) -> Option<(F, Range<u32>)> {
        self.flash.take()
    }

    fn feed_watchdog(&mut self) {
        self.feeds = self.feeds.saturating_add(1);
    }
}

/// One step of the decision trace.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TraceRecord {
    /// Time, s.
    pub time_s: u32,
    /// Stage read, f32 bits.
    pub stage_bits: u32,
    /// Opening commanded, f32 bits.
    pub opening_cmd_bits: u32,
    /// Mode code.
    pub mode: u8,
}

impl TraceRecord {
    /// Bytes per record.
    pub const BYTES: usize = 13;

    /// The record of a step.
    pub fn of(r: &StepReport) -> Self {
        Self {
            time_s: r.time_s,
            stage_bits: r.stage_m.to_bits(),
            opening_cmd_bits: r.opening_cmd_m.to_bits(),
            mode: r.mode.code(),
        }
    }

    /// Little-endian bytes (see the module doc).
    pub fn to_bytes(&self) -> [u8; Self::BYTES] {
        let mut b = [0u8; Self::BYTES];
        let fields = self
            .time_s
            .to_le_bytes()
            .into_iter()
            .chain(self.stage_bits.to_le_bytes())
            .chain(self.opening_cmd_bits.to_le_bytes())
            .chain([self.mode]);
        for (d, s) in b.iter_mut().zip(fields) {
            *d = s;
        }
        b
    }

    /// Parses [`TraceRecord::BYTES`] bytes (None if fewer).
    pub fn from_bytes(b: &[u8]) -> Option<Self> {
        let w = |i: usize| -> Option<u32> {
            let s = b.get(i..i.checked_add(4)?)?;
            let mut a = [0u8; 4];
            a.copy_from_slice(s);
            Some(u32::from_le_bytes(a))
        };
        Some(Self {
            time_s: w(0)?,
            stage_bits: w(4)?,
            opening_cmd_bits: w(8)?,
            mode: *b.get(12)?,
        })
    }

    /// The mode, if the code is known.
    pub fn mode(&self) -> Option<ModeCode> {
        ModeCode::from_code(self.mode)
    }
}

/// Runs `steps` control steps of `app` (step k at its due time, then the board waits for step
/// k + 1, so the storm's record k falls between decisions k and k + 1), handing each trace
/// record to `sink`; stops early with the sink's error.
pub fn run_closed_loop<B: Board, E>(
    app: &mut App<'_, B>,
    steps: u32,
    mut sink: impl FnMut(&StepReport) -> Result<(), E>,
) -> Result<(), E> {
    for _ in 0..steps {
        let report = app.tick(None);
        sink(&report)?;
        let next = app.next_step_s();
        app.board_mut().wait_until_s(next);
    }
    Ok(())
}
