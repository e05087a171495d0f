//! Closed-loop runs for controller tests: the core's own plant
//! ([`holdback_core::plant::Plant`], the one the desktop tool and the emulated board step)
//! with a gate policy under test, sensor faults injected on the way in.
//!
//! - Rain (mm per runoff step) falls uniformly within each runoff step; each control step's
//!   share goes into the plant (time–area inflow, delivered one response step late, level-pool
//!   routing through `outlet.at(actual opening)`, gate speed limit) and into the core's
//!   [`BucketGauge`], whose tips for the step just ended the driver sees at the next step.
//! - The stage sensor reads the plant's stage plus seeded uniform noise.
//!
//! Also here: the perfect-foresight permit schedule of DESIGN.md ("total release =
//! min(permit, full-open capacity) from the first drop") with
//! [`holdback_core::forecast::step_capped`] on the same (lagged) inflow the plant delivers,
//! and the smallest cap that holds a stage limit over a whole storm (perfect foresight above
//! the permit).

use holdback_core::config::PondConfig;
use holdback_core::control::{Command, Controller, Inputs, Mode, NORMAL_BAND_M, Outputs};
use holdback_core::forecast::step_capped;
use holdback_core::plant::{BucketGauge, Plant};
use holdback_core::rain::Idf;
use holdback_core::routing::Inflow;

/// A small deterministic generator (xorshift64*), so tests need no RNG crate.
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// Seeded (0 is replaced by a fixed odd constant).
    pub fn new(seed: u64) -> Self {
        Rng(if seed == 0 {
            0x9E37_79B9_7F4A_7C15
        } else {
            seed
        })
    }
    /// Uniform in [0, 1).
    pub fn next_f32(&mut self) -> f32 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let x = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (x >> 40) as f32 / (1u64 << 24) as f32
    }
}

/// Rain depth per runoff step (mm) of a uniform block: the IDF intensity of `duration_min`
/// and `return_period_yr` held for the whole duration.
pub fn block_storm(idf: &dyn Idf, return_period_yr: f32, duration_min: u32, dt_s: u32) -> Vec<f32> {
    let i = idf.intensity_mm_h(duration_min as f32, return_period_yr);
    let n = (duration_min * 60).div_ceil(dt_s) as usize;
    vec![i * dt_s as f32 / 3600.0; n]
}

/// A symmetric triangular hyetograph with the same total depth as the block (peak twice the
/// block mean, in the middle).
pub fn triangle_storm(
    idf: &dyn Idf,
    return_period_yr: f32,
    duration_min: u32,
    dt_s: u32,
) -> Vec<f32> {
    let block = block_storm(idf, return_period_yr, duration_min, dt_s);
    let n = block.len();
    let total: f32 = block.iter().sum();
    let w: Vec<f32> = (0..n)
        .map(|k| {
            let x = (k as f32 + 0.5) / n as f32;
            1.0 - (2.0 * x - 1.0).abs()
        })
        .collect();
    let ws: f32 = w.iter().sum();
    w.iter().map(|v| v * total / ws).collect()
}

/// Scales a hyetograph.
pub fn scaled(rain_mm: &[f32], factor: f32) -> Vec<f32> {
    rain_mm.iter().map(|r| r * factor).collect()
}

/// Plant options.
#[derive(Debug, Clone, Copy)]
pub struct PlantOptions {
    /// Gate speed, m/s (`f32::INFINITY` = ideal).
    pub gate_speed_m_s: f32,
    /// Uniform stage noise amplitude (± this), m.
    pub noise_m: f32,
    /// Noise seed.
    pub seed: u64,
    /// Seconds simulated after the rain ends at most.
    pub tail_s: u32,
}

impl Default for PlantOptions {
    fn default() -> Self {
        PlantOptions {
            gate_speed_m_s: 0.01,
            noise_m: 0.0,
            seed: 1,
            tail_s: 36 * 3600,
        }
    }
}

/// One step as the plant saw it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// Time, s.
    pub t_s: u32,
    /// True stage, m.
    pub stage_m: f32,
    /// True release, m³/s.
    pub release_m3s: f32,
    /// Gate opening, m.
    pub opening_m: f32,
}

/// What a run did.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Summary {
    /// Highest stage, m.
    pub peak_stage_m: f32,
    /// Highest storage, m³.
    pub peak_storage_m3: f32,
    /// Highest release, m³/s.
    pub peak_release_m3s: f32,
    /// Time with the release over the permit, s.
    pub exceed_s: u32,
    /// Time with the release over the permit while the stage was below crest − freeboard, s.
    pub exceed_below_limit_s: u32,
    /// From the end of rain to back within the normal band, s (None: not within the run).
    pub drawdown_s: Option<u32>,
    /// Stage reached the crest.
    pub overtopped: bool,
    /// Earliest time the pond was back at normal after rain, s from rain end.
    pub rain_end_s: u32,
}

/// A gate policy under test: sees the time, the sensor inputs, returns the command.
pub trait Driver {
    /// Command for this step.
    fn command(&mut self, t_s: u32, inputs: &Inputs) -> f32;
}

/// The controller as a driver (keeps every output for inspection).
pub struct ControllerDriver<'a> {
    /// The pond.
    pub cfg: &'a PondConfig,
    /// The controller.
    pub ctl: Controller,
    /// Every output, in order.
    pub outputs: Vec<Outputs>,
    /// Commands to inject at given times.
    pub commands: Vec<(u32, Command)>,
}

impl<'a> ControllerDriver<'a> {
    /// A fresh controller at t = 0.
    pub fn new(cfg: &'a PondConfig) -> Self {
        ControllerDriver {
            cfg,
            ctl: Controller::new(cfg, 0),
            outputs: Vec::new(),
            commands: Vec::new(),
        }
    }
    /// Modes seen, in order, without repeats.
    pub fn modes(&self) -> Vec<Mode> {
        let mut v: Vec<Mode> = Vec::new();
        for o in &self.outputs {
            if v.last() != Some(&o.mode) {
                v.push(o.mode);
            }
        }
        v
    }
}

impl Driver for ControllerDriver<'_> {
    fn command(&mut self, t_s: u32, inputs: &Inputs) -> f32 {
        let mut inputs = *inputs;
        if let Some(&(_, c)) = self.commands.iter().find(|(t, _)| *t == t_s) {
            inputs.command = Some(c);
        }
        let o = self.ctl.step(self.cfg, &inputs, t_s);
        let a = o.opening_cmd_m;
        self.outputs.push(o);
        a
    }
}

/// The old outlet: the gate held at one opening.
pub struct FixedDriver(pub f32);

impl Driver for FixedDriver {
    fn command(&mut self, _t_s: u32, _inputs: &Inputs) -> f32 {
        self.0
    }
}

/// The level-threshold rule: full open above `threshold_m`, closed below.
pub struct ThresholdDriver {
    /// Stage threshold, m.
    pub threshold_m: f32,
    /// Full opening, m.
    pub open_m: f32,
}

impl Driver for ThresholdDriver {
    fn command(&mut self, _t_s: u32, inputs: &Inputs) -> f32 {
        match inputs.stage_m {
            Some(h) if h > self.threshold_m => self.open_m,
            _ => 0.0,
        }
    }
}

/// Mean inflow per runoff step of `rain_mm`, with `extra` recession steps, as the plant
/// delivers it: the step-mean hydrograph one response step late (a leading dry step).
pub fn inflow_of(cfg: &PondConfig, rain_mm: &[f32], extra: usize) -> Vec<f32> {
    let mut q = vec![0.0; rain_mm.len() + extra + 1];
    cfg.catchment().convolve(rain_mm, &mut q[1..]);
    q
}

/// Sensor/actuator faults the plant can inject (from `from_s` on).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Injection {
    /// No fault.
    None,
    /// The stage reading is replaced by `f(t)`.
    StageFixed(f32),
    /// The stage reading is missing.
    StageMissing,
    /// The stage reading freezes at its value at `from_s`.
    StageFrozen,
    /// The gate position is missing.
    PositionMissing,
    /// One reading offset by this much at `from_s` only.
    StageSpike(f32),
    /// The reading offset by this much from `from_s` on.
    StageStep(f32),
    /// The gauge sends no tips.
    GaugeClogged,
    /// The gauge sends this many tips every step.
    GaugeChatter(u16),
    /// The gate does not move.
    GateStuck,
    /// The position reads this much off.
    PositionOffset(f32),
    /// Both limit switches read made.
    BothLimits,
    /// The drive reports a fault.
    DriverFault,
}

/// Runs `driver` on the pond for the storm `rain_mm` (mm per runoff step) from an empty pond
/// at the normal level. Returns the summary and the trace.
pub fn run(
    cfg: &PondConfig,
    rain_mm: &[f32],
    driver: &mut dyn Driver,
    opt: PlantOptions,
    inject: (Injection, u32),
) -> (Summary, Vec<Sample>) {
    let dt_r = cfg.catchment().dt_s();
    let step_s = cfg.control().step_s;
    let rain_end_s = rain_mm.len() as u32 * dt_r;
    let end_s = rain_end_s + opt.tail_s;
    let normal = cfg.levels().normal_m;
    let permit = cfg.permit().release_m3s;
    let limit = cfg.stage_limit_m();
    let max_open = cfg.outlet().max_opening_m();
    let mut plant = Plant::new(cfg, normal, 0.0, opt.gate_speed_m_s, 0).expect("plant settings");
    let mut gauge = BucketGauge::new(cfg.sensors().gauge.bucket_mm).expect("gauge bucket");
    let mut rng = Rng::new(opt.seed);
    let mut sum = Summary {
        peak_stage_m: plant.stage_m(),
        peak_storage_m3: plant.storage_m3(),
        rain_end_s,
        ..Summary::default()
    };
    let mut trace = Vec::new();
    let mut t = 0u32;
    let mut last_step_rain_mm = 0.0_f32;
    let mut frozen: Option<f32> = None;
    while t < end_s {
        // Inputs at time t: the plant's state and the gauge's tips for the step just ended.
        let stage = plant.stage_m();
        let opening = plant.opening_m();
        let (fault, from) = inject;
        let on = t >= from;
        let tips = gauge.tips(last_step_rain_mm);
        let noise = if opt.noise_m > 0.0 {
            (2.0 * rng.next_f32() - 1.0) * opt.noise_m
        } else {
            0.0
        };
        let mut inputs = Inputs {
            stage_m: Some(stage + noise),
            rain_tips: tips,
            gate_position_m: Some(opening),
            limit_closed: opening <= 0.0,
            limit_open: opening >= max_open,
            gate_fault: false,
            command: None,
        };
        if on {
            match fault {
                Injection::None => {}
                Injection::StageFixed(v) => inputs.stage_m = Some(v),
                Injection::StageMissing => inputs.stage_m = None,
                Injection::StageFrozen => {
                    inputs.stage_m = Some(*frozen.get_or_insert(stage + noise));
                }
                Injection::PositionMissing => inputs.gate_position_m = None,
                Injection::StageSpike(d) if t == from => inputs.stage_m = Some(stage + d),
                Injection::StageSpike(_) => {}
                Injection::StageStep(d) => inputs.stage_m = Some(stage + noise + d),
                Injection::GaugeClogged => inputs.rain_tips = 0,
                Injection::GaugeChatter(n) => inputs.rain_tips = n,
                Injection::GateStuck => {}
                Injection::PositionOffset(d) => inputs.gate_position_m = Some(opening + d),
                Injection::BothLimits => {
                    inputs.limit_closed = true;
                    inputs.limit_open = true;
                }
                Injection::DriverFault => inputs.gate_fault = true,
            }
        }
        let cmd = driver.command(t, &inputs);
        // Actuator: a stuck gate is held where it is.
        if on && fault == Injection::GateStuck {
            plant.command(cfg, opening);
        } else {
            plant.command(cfg, cmd);
        }
        // Water: this control step's share of the runoff step's rain.
        let k = (t / dt_r) as usize;
        let rain = rain_mm
            .get(k)
            .map_or(0.0, |r| r * step_s as f32 / dt_r as f32);
        last_step_rain_mm = rain;
        let r = plant.step(cfg, rain, step_s);
        t += step_s;
        let q = r.outflow_m3s;
        if r.stage_m > sum.peak_stage_m {
            sum.peak_stage_m = r.stage_m;
            sum.peak_storage_m3 = r.storage_m3;
        }
        sum.peak_release_m3s = sum.peak_release_m3s.max(q);
        if q > permit {
            sum.exceed_s += step_s;
            if r.stage_m < limit {
                sum.exceed_below_limit_s += step_s;
            }
        }
        if r.stage_m >= cfg.levels().crest_m {
            sum.overtopped = true;
        }
        trace.push(Sample {
            t_s: t,
            stage_m: r.stage_m,
            release_m3s: q,
            opening_m: r.opening_m,
        });
        if t > rain_end_s && sum.drawdown_s.is_none() && r.stage_m <= normal + NORMAL_BAND_M {
            sum.drawdown_s = Some(t - rain_end_s);
        }
        if sum.drawdown_s.is_some() && t > rain_end_s + 7200 {
            break;
        }
    }
    (sum, trace)
}

/// Perfect-foresight schedule at release cap `cap_m3s` over the whole storm (DESIGN.md: total
/// release = min(cap, full-open capacity) from the first drop), routed at the control step on
/// the inflow the plant delivers ([`inflow_of`]). Returns (peak stage, peak storage).
pub fn perfect_foresight(cfg: &PondConfig, rain_mm: &[f32], cap_m3s: f32) -> (f32, f32) {
    let dt_r = cfg.catchment().dt_s();
    let step_s = cfg.control().step_s;
    let inflow = inflow_of(cfg, rain_mm, 6 * 3600 / dt_r as usize);
    let pond = cfg.storage();
    let mut s = pond.storage_m3(cfg.levels().normal_m);
    let (mut peak_h, mut peak_s) = (cfg.levels().normal_m, s);
    let per = dt_r / step_s;
    for q in &inflow {
        for _ in 0..per {
            let r = step_capped(pond, cfg.outlet(), s, Inflow::steady(*q), cap_m3s, step_s);
            s = r.storage_m3;
            if r.stage_m > peak_h {
                peak_h = r.stage_m;
                peak_s = r.storage_m3;
            }
        }
    }
    (peak_h, peak_s)
}

/// The smallest constant cap ≥ the permit whose perfect-foresight peak stays at or below the
/// stage limit (bisection, 30 halvings); None when even the full-open gate does not hold it.
pub fn min_cap_to_hold(cfg: &PondConfig, rain_mm: &[f32]) -> Option<f32> {
    let limit = cfg.stage_limit_m();
    let permit = cfg.permit().release_m3s;
    if perfect_foresight(cfg, rain_mm, permit).0 <= limit {
        return Some(permit);
    }
    let big = 1.0e6;
    if perfect_foresight(cfg, rain_mm, big).0 > limit {
        return None;
    }
    let (mut lo, mut hi) = (permit, 100.0_f32.max(permit * 100.0));
    for _ in 0..30 {
        let mid = 0.5 * (lo + hi);
        if perfect_foresight(cfg, rain_mm, mid).0 <= limit {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}
