//! The simulated pond: the plant (level-pool routing through the real outlet, inflow from the
//! catchment's time–area response, both from the core), sensor and actuator models with
//! scripted faults, and a runner that steps a control policy at the device's control period.
//!
//! Everything is deterministic: the only randomness is a seeded PRNG ([`Rng`]), the clock is
//! the step counter. The same pond, storm, policy, options and seed give the same bits.

use holdback_core::config::PondConfig;
use holdback_core::forecast::{self, Policy as CorePolicy};
use holdback_core::hydraulics::Outlet;
use holdback_core::routing::{self, Inflow};
use serde::{Deserialize, Serialize};

use crate::pondfile::Pond;

/// A small seeded PRNG (SplitMix64, Steele, Lea & Flood 2014), enough for sensor noise.
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Self {
        Rng(seed)
    }
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Standard normal (Box–Muller).
    pub fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// A storm: rain depth per fixed step, mm.
#[derive(Debug, Clone, PartialEq)]
pub struct Storm {
    /// Name for reports.
    pub name: String,
    /// Step, s.
    pub dt_s: u32,
    /// Depth per step, mm.
    pub rain_mm: Vec<f64>,
}

impl Storm {
    /// Duration of the rain record, s.
    pub fn duration_s(&self) -> u64 {
        self.dt_s as u64 * self.rain_mm.len() as u64
    }
    /// Total depth, mm.
    pub fn total_mm(&self) -> f64 {
        self.rain_mm.iter().sum()
    }
    /// Rain depth in `[a_s, b_s)`, spread uniformly within each step (mass-curve difference).
    pub fn depth_between(&self, a_s: f64, b_s: f64) -> f64 {
        self.mass(b_s) - self.mass(a_s)
    }
    fn mass(&self, t_s: f64) -> f64 {
        let dt = self.dt_s.max(1) as f64;
        if t_s <= 0.0 {
            return 0.0;
        }
        let k = (t_s / dt).floor() as usize;
        let full: f64 = self.rain_mm.iter().take(k).sum();
        let part = self
            .rain_mm
            .get(k)
            .map_or(0.0, |d| d * (t_s / dt - k as f64));
        full + part
    }
    /// Time after the start of the last wet step's end, s (0 for a dry storm).
    pub fn rain_end_s(&self) -> u64 {
        let last = self.rain_mm.iter().rposition(|d| *d > 0.0);
        last.map_or(0, |k| (k as u64 + 1) * self.dt_s as u64)
    }
}

/// What a sensor or the gate can be made to do wrong, from a time on.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum FaultKind {
    /// The reading freezes at its last value.
    Stuck,
    /// No reading at all.
    Dropout,
    /// The reading drifts away at this rate.
    Drift {
        /// Drift rate, units per hour (m/h for stage).
        per_h: f64,
    },
    /// A fixed offset.
    Offset {
        /// Offset (m for stage and gate position).
        by: f64,
    },
    /// The gate stops moving (stall).
    Stall,
}

/// Which device part a fault hits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FaultTarget {
    /// The stage sensor.
    Stage,
    /// The rain gauge.
    Rain,
    /// The gate actuator (stall) or its position sensor (others).
    Gate,
}

/// One scripted fault.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Fault {
    /// Start, s after the storm start.
    pub at_s: u32,
    /// End, s (None = to the end of the run).
    #[serde(default)]
    pub until_s: Option<u32>,
    /// What it hits.
    pub target: FaultTarget,
    /// What goes wrong.
    #[serde(flatten)]
    pub kind: FaultKind,
}

impl Fault {
    fn active(&self, t: u32) -> bool {
        t >= self.at_s && self.until_s.is_none_or(|u| t < u)
    }

    /// Parses `TARGET:KIND@START[-END]`, KIND one of `stuck`, `dropout`, `stall`,
    /// `drift=RATE_PER_H`, `offset=BY`; times in s.
    pub fn parse(s: &str) -> Result<Fault, String> {
        let bad = |why: &str| format!("--fault {s:?}: {why} (write TARGET:KIND@START[-END])");
        let (target, rest) = s.split_once(':').ok_or_else(|| bad("no ':'"))?;
        let (kind, when) = rest.split_once('@').ok_or_else(|| bad("no '@'"))?;
        let target = match target {
            "stage" => FaultTarget::Stage,
            "rain" => FaultTarget::Rain,
            "gate" => FaultTarget::Gate,
            _ => return Err(bad("target must be stage, rain or gate")),
        };
        let num = |v: &str| v.parse::<f64>().map_err(|_| bad("a number does not parse"));
        let kind = match kind.split_once('=') {
            None if kind == "stuck" => FaultKind::Stuck,
            None if kind == "dropout" => FaultKind::Dropout,
            None if kind == "stall" => FaultKind::Stall,
            Some(("drift", v)) => FaultKind::Drift { per_h: num(v)? },
            Some(("offset", v)) => FaultKind::Offset { by: num(v)? },
            _ => {
                return Err(bad(
                    "kind must be stuck, dropout, stall, drift=R or offset=B",
                ));
            }
        };
        let secs = |v: &str| v.parse::<u32>().map_err(|_| bad("times are whole seconds"));
        let (at_s, until_s) = match when.split_once('-') {
            Some((a, b)) => (secs(a)?, Some(secs(b)?)),
            None => (secs(when)?, None),
        };
        Ok(Fault {
            at_s,
            until_s,
            target,
            kind,
        })
    }
}

/// Sensor and actuator model settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Models {
    /// Stage noise, standard deviation, m.
    pub stage_noise_m: f64,
    /// Stage quantum (resolution), m.
    pub stage_quantum_m: f64,
    /// Stage sensor lag (first-order time constant), s.
    pub stage_lag_s: f64,
    /// Gate speed, m/s.
    pub gate_speed_m_s: f64,
    /// Gate backlash (dead travel on reversal), m.
    pub gate_backlash_m: f64,
    /// Gate position sensor quantum, m.
    pub position_quantum_m: f64,
}

impl Default for Models {
    /// A decent pressure transducer and a slow screw actuator (common practice, no source).
    fn default() -> Self {
        Models {
            stage_noise_m: 0.003,
            stage_quantum_m: 0.001,
            stage_lag_s: 5.0,
            gate_speed_m_s: 0.002,
            gate_backlash_m: 0.002,
            position_quantum_m: 0.001,
        }
    }
}

/// What the device sees at one control step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observation {
    /// Stage reading, m (None: no reading).
    pub stage_m: Option<f32>,
    /// Rain counted by the gauge over the last step, mm (tips × bucket).
    pub rain_mm: f32,
    /// Gate position reading, m (None: no reading).
    pub gate_m: Option<f32>,
}

/// What a policy commands.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Decision {
    /// Commanded opening, m.
    pub opening_m: f32,
    /// Mode name for the time series.
    pub mode: &'static str,
}

/// A gate control policy stepped at the control period.
pub trait Policy {
    /// Decides the gate opening from what the device sees.
    fn decide(&mut self, cfg: &PondConfig, obs: &Observation, now_s: u32) -> Decision;
}

/// Which policy a run uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum PolicyKind {
    /// The pre-retrofit fixed outlet (no gate).
    Fixed,
    /// Level threshold: the gate passes the target release at the measured stage, full open
    /// at crest − freeboard; the safe opening without a stage reading.
    Threshold,
    /// The perfect-foresight bound: release = min(permit, full-open capacity) from the first
    /// drop, on the true stage (no sensors).
    Bound,
}

impl PolicyKind {
    /// Name used in files.
    pub fn name(self) -> &'static str {
        match self {
            PolicyKind::Fixed => "fixed",
            PolicyKind::Threshold => "threshold",
            PolicyKind::Bound => "bound",
        }
    }
}

/// The level-threshold baseline. Keeps the control settings' deadband and least time
/// between moves.
#[derive(Debug, Clone, Default)]
pub struct Threshold {
    last: Option<(f32, u32)>,
}

impl Policy for Threshold {
    fn decide(&mut self, cfg: &PondConfig, obs: &Observation, now_s: u32) -> Decision {
        let d = self.raw(cfg, obs);
        let c = cfg.control();
        match self.last {
            Some((a, at))
                if d.mode == "capture"
                    && ((d.opening_m - a).abs() < c.deadband_m
                        || now_s.saturating_sub(at) < c.min_move_interval_s) =>
            {
                Decision {
                    opening_m: a,
                    mode: d.mode,
                }
            }
            _ => {
                self.last = Some((d.opening_m, now_s));
                d
            }
        }
    }
}

impl Threshold {
    fn raw(&self, cfg: &PondConfig, obs: &Observation) -> Decision {
        let outlet = cfg.outlet();
        match obs.stage_m {
            None => Decision {
                opening_m: cfg.safe().safe_opening_m,
                mode: "failsafe",
            },
            Some(h) if h >= cfg.stage_limit_m() => Decision {
                opening_m: outlet.max_opening_m(),
                mode: "surcharge",
            },
            Some(h) => Decision {
                opening_m: CorePolicy::CapRelease {
                    cap_m3s: cfg.target_release_m3s(),
                }
                .opening_m(outlet, h),
                mode: "capture",
            },
        }
    }
}

/// Options of one run.
#[derive(Debug, Clone)]
pub struct RunOptions {
    /// Seed of the sensor noise.
    pub seed: u64,
    /// Sensor and actuator models.
    pub models: Models,
    /// Scripted faults.
    pub faults: Vec<Fault>,
    /// Longest run after the rain ends, s (the run ends earlier once the pond has drained).
    pub tail_s: u32,
    /// One time-series row every this many s.
    pub record_s: u32,
}

/// One recorded time-series row.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Row {
    /// Time from the storm start, s.
    pub t_s: u32,
    /// Rain over the last record interval, mm.
    pub rain_mm: f32,
    /// Inflow, m³/s.
    pub inflow_m3s: f32,
    /// True stage, m.
    pub stage_m: f32,
    /// Stage reading, m (NaN: none).
    pub stage_read_m: f32,
    /// Storage, m³.
    pub storage_m3: f32,
    /// Release, m³/s.
    pub release_m3s: f32,
    /// Gate position, m.
    pub gate_m: f32,
    /// Commanded opening, m.
    pub command_m: f32,
    /// Policy mode.
    pub mode: &'static str,
}

/// A finished run.
#[derive(Debug, Clone)]
pub struct Run {
    /// Policy.
    pub policy: PolicyKind,
    /// Time series.
    pub rows: Vec<Row>,
    /// Peak storage, m³.
    pub peak_storage_m3: f64,
    /// Peak stage, m.
    pub peak_stage_m: f64,
    /// Peak release, m³/s.
    pub peak_release_m3s: f64,
    /// Peak inflow, m³/s.
    pub peak_inflow_m3s: f64,
    /// Inflow volume, m³.
    pub inflow_volume_m3: f64,
    /// Released volume, m³.
    pub released_m3: f64,
    /// Time with release above the permit, s.
    pub time_over_permit_s: u64,
    /// Volume released above the permit, m³.
    pub volume_over_permit_m3: f64,
    /// Time with the stage above the crest, s.
    pub time_over_crest_s: u64,
    /// Time from the end of rain to the normal level (+1 cm), s; None if not reached.
    pub drawdown_s: Option<u64>,
    /// Gate moves started.
    pub gate_moves: u32,
    /// Rain end, s.
    pub rain_end_s: u64,
    /// Run length, s.
    pub length_s: u64,
}

struct Gate {
    pos: f64,
    /// Motor-side position (backlash: the gate follows once the slack is taken up).
    motor: f64,
    moving: bool,
    moves: u32,
}

/// Runs one policy on one storm.
pub fn run(pond: &Pond, storm: &Storm, kind: PolicyKind, opt: &RunOptions) -> Run {
    let cfg = &pond.config;
    let gateless;
    let outlet: &Outlet = match (kind, &pond.existing) {
        (PolicyKind::Fixed, Some(ex)) => ex,
        (PolicyKind::Fixed, None) => {
            gateless = Outlet::new(cfg.outlet().fixed(), None, cfg.outlet().tailwater_m())
                .unwrap_or_else(|_| cfg.outlet().clone());
            &gateless
        }
        _ => cfg.outlet(),
    };
    let pondss = cfg.storage();
    let dt = cfg.control().step_s.max(1);
    let resp = cfg.catchment();
    let dtc = resp.dt_s().max(1);
    // Rain per catchment step, convolved once (the recession runs past the rain).
    let rain_end = storm.rain_end_s().max(storm.duration_s());
    let tail = opt.tail_s as u64;
    let total_s = rain_end + tail;
    let n_c = total_s.div_ceil(dtc as u64) as usize + 1;
    let rain_c: Vec<f32> = (0..n_c)
        .map(|k| {
            let a = k as f64 * dtc as f64;
            storm.depth_between(a, a + dtc as f64) as f32
        })
        .collect();
    let mut inflow_c = vec![0.0f32; n_c];
    resp.convolve(&rain_c, &mut inflow_c);

    let permit = cfg.permit().release_m3s as f64;
    let normal = cfg.levels().normal_m as f64;
    let crest = cfg.levels().crest_m as f64;
    let m = opt.models;
    let mut rng = Rng::new(opt.seed);
    let mut s = pondss.storage_m3(cfg.levels().normal_m);
    let mut stage = pondss.stage_m(s) as f64;
    let mut lagged = stage;
    let mut last_read: Option<f32> = None;
    let mut gate = Gate {
        pos: 0.0,
        motor: 0.0,
        moving: false,
        moves: 0,
    };
    let mut last_gate_read: Option<f32> = None;
    let mut threshold = Threshold::default();
    let mut bucket_acc = 0.0f64;
    let bucket = cfg.sensors().gauge.bucket_mm as f64;
    let mut command = 0.0f32;
    let mut mode: &'static str = kind.name();

    let mut r = Run {
        policy: kind,
        rows: Vec::new(),
        peak_storage_m3: s as f64,
        peak_stage_m: stage,
        peak_release_m3s: 0.0,
        peak_inflow_m3s: 0.0,
        inflow_volume_m3: 0.0,
        released_m3: 0.0,
        time_over_permit_s: 0,
        volume_over_permit_m3: 0.0,
        time_over_crest_s: 0,
        drawdown_s: None,
        gate_moves: 0,
        rain_end_s: storm.rain_end_s(),
        length_s: 0,
    };
    let record = opt.record_s.max(dt);
    let mut rain_since_record = 0.0f64;
    let mut t: u32 = 0;
    loop {
        let t64 = t as u64;
        // --- sensors
        let rain_step = storm.depth_between(t64 as f64 - dt as f64, t64 as f64);
        rain_since_record += rain_step;
        let alpha = if m.stage_lag_s > 0.0 {
            1.0 - (-(dt as f64) / m.stage_lag_s).exp()
        } else {
            1.0
        };
        lagged += alpha * (stage - lagged);
        let mut reading = Some(lagged + m.stage_noise_m * rng.normal());
        let mut rain_read = {
            bucket_acc += rain_step;
            let tips = (bucket_acc / bucket).floor();
            bucket_acc -= tips * bucket;
            tips * bucket
        };
        let mut gate_read = Some(gate.pos);
        for f in opt.faults.iter().filter(|f| f.active(t)) {
            let since_h = (t - f.at_s) as f64 / 3600.0;
            let v = match f.target {
                FaultTarget::Stage => &mut reading,
                FaultTarget::Gate => &mut gate_read,
                FaultTarget::Rain => {
                    if matches!(f.kind, FaultKind::Stuck | FaultKind::Dropout) {
                        rain_read = 0.0;
                    }
                    continue;
                }
            };
            match f.kind {
                FaultKind::Dropout => *v = None,
                FaultKind::Stuck => {
                    let prev = if f.target == FaultTarget::Stage {
                        last_read
                    } else {
                        last_gate_read
                    };
                    *v = prev.map(f64::from);
                }
                FaultKind::Drift { per_h } => *v = v.map(|x| x + per_h * since_h),
                FaultKind::Offset { by } => *v = v.map(|x| x + by),
                FaultKind::Stall => {}
            }
        }
        let quant = |x: f64, q: f64| if q > 0.0 { (x / q).round() * q } else { x };
        let stage_read = reading.map(|x| quant(x, m.stage_quantum_m) as f32);
        let gate_read_q = gate_read.map(|x| quant(x, m.position_quantum_m) as f32);
        last_read = stage_read.or(last_read);
        last_gate_read = gate_read_q.or(last_gate_read);
        let obs = Observation {
            stage_m: stage_read,
            rain_mm: rain_read as f32,
            gate_m: gate_read_q,
        };
        // --- policy
        match kind {
            PolicyKind::Fixed => {}
            PolicyKind::Threshold => {
                let d = threshold.decide(cfg, &obs, t);
                command = d.opening_m;
                mode = d.mode;
            }
            PolicyKind::Bound => {}
        }
        // --- actuator
        let stalled = opt
            .faults
            .iter()
            .any(|f| f.active(t) && f.target == FaultTarget::Gate && f.kind == FaultKind::Stall);
        let max_open = outlet.max_opening_m() as f64;
        let want = (command as f64).clamp(0.0, max_open);
        let was_moving = gate.moving;
        if !stalled && kind == PolicyKind::Threshold {
            let err = want - gate.motor;
            let step = m.gate_speed_m_s * dt as f64;
            gate.moving = err.abs() > 1e-6;
            gate.motor += err.clamp(-step, step);
            let slack = m.gate_backlash_m / 2.0;
            if gate.motor - gate.pos > slack {
                gate.pos = gate.motor - slack;
            } else if gate.pos - gate.motor > slack {
                gate.pos = gate.motor + slack;
            }
            gate.pos = gate.pos.clamp(0.0, max_open);
        } else {
            gate.moving = false;
        }
        if gate.moving && !was_moving {
            gate.moves += 1;
        }
        // --- plant
        let k = (t / dtc) as usize;
        let q_in = inflow_c.get(k).copied().unwrap_or(0.0);
        let step = match kind {
            PolicyKind::Bound => forecast::step_capped(
                pondss,
                outlet,
                s,
                Inflow::steady(q_in),
                cfg.permit().release_m3s,
                dt,
            ),
            _ => routing::step(
                pondss,
                &outlet.at(gate.pos as f32),
                s,
                Inflow::steady(q_in),
                dt,
            ),
        };
        let q_out = step.released_m3 as f64 / dt as f64;
        s = step.storage_m3;
        stage = step.stage_m as f64;
        t += dt;
        let t64 = t as u64;
        // --- bookkeeping
        r.inflow_volume_m3 += q_in as f64 * dt as f64;
        r.released_m3 += step.released_m3 as f64;
        r.peak_inflow_m3s = r.peak_inflow_m3s.max(q_in as f64);
        r.peak_release_m3s = r.peak_release_m3s.max(q_out);
        if q_out > permit * (1.0 + 1e-6) {
            r.time_over_permit_s += dt as u64;
            r.volume_over_permit_m3 += (q_out - permit) * dt as f64;
        }
        if stage > crest {
            r.time_over_crest_s += dt as u64;
        }
        if (s as f64) > r.peak_storage_m3 {
            r.peak_storage_m3 = s as f64;
            r.peak_stage_m = stage;
        }
        let drained = stage <= normal + 0.01;
        if r.drawdown_s.is_none()
            && t64 >= r.rain_end_s
            && drained
            && r.peak_stage_m > normal + 0.01
        {
            r.drawdown_s = Some(t64 - r.rain_end_s);
        }
        if t.is_multiple_of(record) {
            r.rows.push(Row {
                t_s: t,
                rain_mm: rain_since_record as f32,
                inflow_m3s: q_in,
                stage_m: stage as f32,
                stage_read_m: stage_read.unwrap_or(f32::NAN),
                storage_m3: s,
                release_m3s: q_out as f32,
                gate_m: gate.pos as f32,
                command_m: command,
                mode,
            });
            rain_since_record = 0.0;
        }
        let pending = inflow_c.iter().skip(k + 1).any(|q| *q > 0.0);
        let done_rain = t64 >= rain_end;
        if (done_rain && drained && !pending) || t64 >= total_s {
            break;
        }
    }
    r.gate_moves = gate.moves;
    r.length_s = t as u64;
    r
}
