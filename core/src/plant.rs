//! The pond as water: a deterministic plant model for closed-loop runs.
//!
//! [`Plant`] is what the emulated board's virtual peripherals read and write and what a host
//! replay steps, so a storm run on the desktop and the same storm run on the device's code
//! under emulation see the same water, bit for bit. It is built only from the core's own
//! engineering:
//!
//! - **Inflow**: rain (depth per control step, mm) accumulates over one step of the pond's
//!   time–area response (`dt_r` = [`TimeAreaResponse::dt_s`]); when a response step completes,
//!   its depth is pushed through [`TimeAreaInflow::push_step`], and the step-mean inflow it
//!   returns is applied, held constant, over the *next* response step. The plant is causal (it
//!   never needs rain that has not fallen yet), conserves volume (all rain is delivered once
//!   the response has drained) and lags the exact step-mean hydrograph by one response step.
//!   The controller's own runoff estimate pushes rain at the same instants.
//! - **Gate**: the actual opening moves toward the commanded one at no more than
//!   `gate_speed_m_s` (m/s; `f32::INFINITY` is an ideal actuator) and stays in
//!   `[0, max opening]`. A NaN command is ignored (the gate keeps its last command).
//! - **Water**: one level-pool step ([`routing::step`]) per call through
//!   `outlet.at(actual opening)` — the opening *after* this step's move — from the current
//!   storage.
//! - **Rain gauge**: [`BucketGauge`] turns rain depth into whole tips of the configured bucket,
//!   carrying the remainder.
//!
//! Invariants: storage ≥ 0 and finite; opening in `[0, max opening]`; time only increases
//! (saturating). Negative, NaN or infinite rain reads as 0. No heap, no panic on any input.
//! Units: stage m, storage m³, flow m³/s, rain mm, opening m, time integer s.

use core::fmt;

use crate::config::PondConfig;
use crate::routing::{self, Inflow, Level, Scheme};
use crate::runoff::{TimeAreaInflow, TimeAreaResponse};
use crate::validate::{self, Invalid};

/// Why a [`Plant`] or [`BucketGauge`] could not be built.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum PlantError {
    /// A setting is out of its range.
    Invalid(Invalid),
}

impl fmt::Display for PlantError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlantError::Invalid(e) => write!(f, "plant: {e}"),
        }
    }
}

impl core::error::Error for PlantError {}

impl From<Invalid> for PlantError {
    fn from(e: Invalid) -> Self {
        PlantError::Invalid(e)
    }
}

/// Rain that counts: finite and positive, else 0.
fn live_rain(mm: f32) -> f32 {
    if mm.is_finite() && mm > 0.0 { mm } else { 0.0 }
}

/// A tipping-bucket gauge model: rain depth in, whole tips out.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BucketGauge {
    bucket_mm: f32,
    carry_mm: f32,
}

impl BucketGauge {
    /// A gauge whose bucket holds `bucket_mm` (> 0, finite), starting empty.
    pub fn new(bucket_mm: f32) -> Result<Self, PlantError> {
        validate::positive("bucket_mm", bucket_mm)?;
        Ok(Self {
            bucket_mm,
            carry_mm: 0.0,
        })
    }

    /// Adds `rain_mm` (bad values read as 0) and returns the tips it completes (saturating
    /// at `u16::MAX`; the depth of tips beyond that is dropped, the remainder carried).
    pub fn tips(&mut self, rain_mm: f32) -> u16 {
        let acc = self.carry_mm + live_rain(rain_mm);
        // `as` saturates: a huge depth gives u16::MAX tips, never a panic.
        let n = (acc / self.bucket_mm) as u16;
        let rest = acc - f32::from(n) * self.bucket_mm;
        self.carry_mm = if rest > 0.0 && rest < self.bucket_mm {
            rest
        } else {
            0.0
        };
        n
    }

    /// Depth in the bucket not yet tipped, mm.
    pub fn carry_mm(&self) -> f32 {
        self.carry_mm
    }
}

/// What one [`Plant::step`] did.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PlantStep {
    /// Time at the end of the step, s.
    pub time_s: u32,
    /// Stage at the end of the step, m.
    pub stage_m: f32,
    /// Storage at the end of the step, m³.
    pub storage_m3: f32,
    /// Outflow at the end of the step, m³/s.
    pub outflow_m3s: f32,
    /// Volume released over the step, m³.
    pub released_m3: f32,
    /// Inflow held over the step, m³/s.
    pub inflow_m3s: f32,
    /// Gate opening over the step (after its move), m.
    pub opening_m: f32,
    /// The routing formula used.
    pub scheme: Scheme,
}

/// The pond as water (see the module doc).
#[derive(Debug, Clone, PartialEq)]
pub struct Plant {
    runoff: TimeAreaInflow,
    storage_m3: f32,
    stage_m: f32,
    outflow_m3s: f32,
    inflow_m3s: f32,
    rain_acc_mm: f32,
    in_runoff_step_s: u32,
    opening_m: f32,
    command_m: f32,
    gate_speed_m_s: f32,
    time_s: u32,
    /// The level of the current storage and of the empty pond through the outlet at the
    /// opening beside each (the last step's end and the last opening routed): routing from
    /// them gives the same bits as looking them up again, two lookups fewer a step.
    known_start: Option<(f32, Level)>,
    known_empty: Option<(f32, Level)>,
}

impl Plant {
    /// A pond at `start_stage_m` (finite, clamped to the storage table) with the gate at
    /// `start_opening_m` (clamped to the gate's travel) and commanded there, no rain fallen,
    /// at time `start_s`. `gate_speed_m_s` > 0 (`f32::INFINITY` allowed: ideal actuator).
    pub fn new(
        cfg: &PondConfig,
        start_stage_m: f32,
        start_opening_m: f32,
        gate_speed_m_s: f32,
        start_s: u32,
    ) -> Result<Self, PlantError> {
        validate::finite("start_stage_m", start_stage_m)?;
        validate::finite("start_opening_m", start_opening_m)?;
        if gate_speed_m_s.is_nan() || gate_speed_m_s <= 0.0 {
            return Err(PlantError::Invalid(Invalid {
                field: "gate_speed_m_s",
                value: gate_speed_m_s,
                rule: "must be > 0 (infinity: ideal actuator)",
            }));
        }
        let pond = cfg.storage();
        let storage_m3 = pond.storage_m3(start_stage_m);
        let opening_m = Self::clamp_opening(cfg, start_opening_m);
        Ok(Self {
            runoff: TimeAreaInflow::new(cfg.catchment().clone()),
            storage_m3,
            stage_m: pond.stage_m(storage_m3),
            outflow_m3s: cfg
                .outlet()
                .discharge_m3s(pond.stage_m(storage_m3), opening_m),
            inflow_m3s: 0.0,
            rain_acc_mm: 0.0,
            in_runoff_step_s: 0,
            opening_m,
            command_m: opening_m,
            gate_speed_m_s,
            time_s: start_s,
            known_start: None,
            known_empty: None,
        })
    }

    fn clamp_opening(cfg: &PondConfig, opening_m: f32) -> f32 {
        crate::math::clamp(opening_m, 0.0, cfg.outlet().max_opening_m())
    }

    /// Commands the gate to `opening_m` (clamped to the travel; NaN ignored).
    pub fn command(&mut self, cfg: &PondConfig, opening_m: f32) {
        if !opening_m.is_nan() {
            self.command_m = Self::clamp_opening(cfg, opening_m);
        }
    }

    /// Time, s.
    pub fn time_s(&self) -> u32 {
        self.time_s
    }

    /// Stage, m.
    pub fn stage_m(&self) -> f32 {
        self.stage_m
    }

    /// Storage, m³.
    pub fn storage_m3(&self) -> f32 {
        self.storage_m3
    }

    /// Outflow at the current stage and opening, m³/s.
    pub fn outflow_m3s(&self) -> f32 {
        self.outflow_m3s
    }

    /// Inflow being held this response step, m³/s.
    pub fn inflow_m3s(&self) -> f32 {
        self.inflow_m3s
    }

    /// Actual gate opening, m.
    pub fn opening_m(&self) -> f32 {
        self.opening_m
    }

    /// Commanded gate opening, m.
    pub fn command_m(&self) -> f32 {
        self.command_m
    }

    /// The catchment response in use.
    pub fn response(&self) -> &TimeAreaResponse {
        self.runoff.response()
    }

    /// Advances `dt_s` seconds with `rain_mm` falling over them: gate move, then routing at
    /// the held inflow, then the rain goes into the current response step (see the module
    /// doc). `cfg` is the configuration the plant was built with. `dt_s` should not exceed the response step; a longer step completes at most one
    /// response step per call per `dt_r` elapsed, all its rain in the first.
    pub fn step(&mut self, cfg: &PondConfig, rain_mm: f32, dt_s: u32) -> PlantStep {
        // Gate.
        let max_move = self.gate_speed_m_s * dt_s as f32;
        let d = self.command_m - self.opening_m;
        let moved = if crate::math::abs(d) <= max_move {
            self.command_m
        } else if d > 0.0 {
            self.opening_m + max_move
        } else {
            self.opening_m - max_move
        };
        self.opening_m = Self::clamp_opening(cfg, moved);

        // Water.
        let pond = cfg.storage();
        let outlet = cfg.outlet().at(self.opening_m);
        let same = |known: Option<(f32, Level)>| {
            known.filter(|(a, _)| a.to_bits() == self.opening_m.to_bits())
        };
        let start = same(self.known_start)
            .map(|(_, l)| l)
            .filter(|l| l.storage_m3().to_bits() == self.storage_m3.to_bits())
            .unwrap_or_else(|| Level::at(pond, &outlet, self.storage_m3));
        let empty =
            same(self.known_empty).map_or_else(|| Level::at(pond, &outlet, 0.0), |(_, l)| l);
        let r = routing::step_known(
            pond,
            &outlet,
            start,
            empty,
            Inflow::steady(self.inflow_m3s),
            dt_s,
        );
        self.known_start = Some((self.opening_m, r.level()));
        self.known_empty = Some((self.opening_m, empty));
        let held_inflow = self.inflow_m3s;
        self.storage_m3 = r.storage_m3;
        self.stage_m = r.stage_m;
        self.outflow_m3s = r.outflow_m3s;
        self.time_s = self.time_s.saturating_add(dt_s);

        // Rain into the response: complete response steps release their depth.
        self.rain_acc_mm += live_rain(rain_mm);
        let dt_r = self.runoff.response().dt_s().max(1);
        self.in_runoff_step_s = self.in_runoff_step_s.saturating_add(dt_s);
        let mut guard = 0u32;
        while self.in_runoff_step_s >= dt_r && guard < 256 {
            self.inflow_m3s = self.runoff.push_step(self.rain_acc_mm);
            self.rain_acc_mm = 0.0;
            self.in_runoff_step_s = self.in_runoff_step_s.saturating_sub(dt_r);
            guard = guard.saturating_add(1);
        }
        if self.in_runoff_step_s >= dt_r {
            self.in_runoff_step_s = 0;
        }

        PlantStep {
            time_s: self.time_s,
            stage_m: r.stage_m,
            storage_m3: r.storage_m3,
            outflow_m3s: r.outflow_m3s,
            released_m3: r.released_m3,
            inflow_m3s: held_inflow,
            opening_m: self.opening_m,
            scheme: r.scheme,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ControlSettings;
    use crate::packed::{
        CatchmentSpec, FormulaSpec, GateSpec, IdfSpec, OutletSpec, PondSpec, SensorSpec,
        StorageSpec, StructureSpec, SubCatchmentSpec,
    };
    use heapless::Vec;

    /// An invented pond (demo data, not a check): 1500..5850 m² over 3 m, a 0.1 m bleed
    /// orifice, a 0.6 m gate, 24 ha-ish of catchment.
    fn demo_like_config() -> PondConfig {
        let mut rows = Vec::new();
        for r in [
            (41.0, 1500.0),
            (42.0, 2750.0),
            (43.0, 4200.0),
            (44.0, 5850.0),
        ] {
            rows.push(r).unwrap();
        }
        let mut fixed = Vec::new();
        fixed
            .push(StructureSpec::CircularOrifice {
                invert_m: 41.0,
                diameter_m: 0.1,
                cd: 0.6,
            })
            .unwrap();
        let mut subs = Vec::new();
        subs.push(SubCatchmentSpec {
            c: 0.8,
            area_ha: 15.0,
            tc_s: 900,
            lag_s: 60,
        })
        .unwrap();
        let mut curves = Vec::new();
        curves
            .push((2.0, FormulaSpec::Talbot { a: 2000.0, b: 10.0 }))
            .unwrap();
        curves
            .push((10.0, FormulaSpec::Talbot { a: 3000.0, b: 10.0 }))
            .unwrap();
        PondSpec {
            storage: StorageSpec::AreasFrustum(rows),
            outlet: OutletSpec {
                fixed,
                gate: GateSpec {
                    sill_m: 41.0,
                    width_m: 0.6,
                    max_opening_m: 0.6,
                    cc: 0.61,
                    cv: 0.98,
                },
                tailwater_m: None,
            },
            normal_m: 41.0,
            crest_m: 43.5,
            freeboard_m: 0.3,
            permit_m3s: 0.25,
            permit_margin: 0.05,
            catchment: CatchmentSpec { dt_s: 60, subs },
            idf: IdfSpec::Curves {
                min_duration_min: 5.0,
                max_duration_min: 1440.0,
                curves,
            },
            control: ControlSettings::default().into(),
            sensors: SensorSpec {
                stage_min_m: 40.9,
                stage_max_m: 44.5,
                max_stage_rate_m_s: 0.01,
                spike_m: 0.15,
                stuck_s: 3600,
                missing_steps: 6,
                position_tolerance_m: 0.02,
                move_timeout_s: 300,
                bucket_mm: 0.2,
                spread_cap_s: 3600,
                max_intensity_mm_h: 500.0,
                clog_after_s: 1800,
                inter_event_dry_s: 21600,
            },
            safe_opening_m: 0.09,
        }
        .build()
        .unwrap()
    }

    /// A whole number of tips, the remainder carried; bad rain is no rain.
    #[test]
    fn gauge_tips_whole_buckets_and_carries_the_rest() {
        let mut g = BucketGauge::new(0.2).unwrap();
        assert_eq!(g.tips(0.1), 0);
        assert_eq!(g.tips(0.35), 2);
        assert!((g.carry_mm() - 0.05).abs() < 1e-6);
        assert_eq!(g.tips(f32::NAN), 0);
        assert_eq!(g.tips(-3.0), 0);
        assert_eq!(g.tips(f32::INFINITY), 0);
        assert_eq!(g.tips(1.0e30), u16::MAX);
        assert!(BucketGauge::new(0.0).is_err());
    }

    /// Volume balance (level-pool routing conserves volume): every m³ of rain that reached
    /// the pond is either stored or released, to f32 rounding.
    #[test]
    fn closed_gate_run_conserves_volume() {
        let cfg = demo_like_config();
        let normal = cfg.levels().normal_m;
        let mut p = Plant::new(&cfg, normal, 0.0, 0.01, 0).unwrap();
        let s0 = p.storage_m3();
        let step = cfg.control().step_s;
        let (mut v_in, mut v_out) = (0.0_f64, 0.0_f64);
        for k in 0..2000 {
            let rain = if k < 360 { 0.2 } else { 0.0 };
            let r = p.step(&cfg, rain, step);
            v_in += f64::from(r.inflow_m3s) * f64::from(step);
            v_out += f64::from(r.released_m3);
        }
        let ds = f64::from(p.storage_m3() - s0);
        assert!(
            ((v_in - v_out) - ds).abs() < 1e-3 * v_in,
            "{v_in} {v_out} {ds}"
        );
        // Rain volume: depth × effective area (time–area definition, all delivered by now).
        let rain_m3 = 360.0 * 0.2e-3 * f64::from(cfg.catchment().effective_area_m2());
        assert!(
            (v_in - rain_m3).abs() < 1e-3 * rain_m3,
            "{v_in} vs {rain_m3}"
        );
    }

    /// The gate moves at its speed toward the command and no further; NaN commands are ignored.
    #[test]
    fn gate_moves_at_its_speed() {
        let cfg = demo_like_config();
        let mut p = Plant::new(&cfg, cfg.levels().normal_m, 0.0, 0.01, 0).unwrap();
        p.command(&cfg, 0.3);
        assert!((p.step(&cfg, 0.0, 10).opening_m - 0.1).abs() < 1e-6);
        p.command(&cfg, f32::NAN);
        assert!((p.step(&cfg, 0.0, 10).opening_m - 0.2).abs() < 1e-6);
        assert!((p.step(&cfg, 0.0, 10).opening_m - 0.3).abs() < 1e-6);
        assert!((p.step(&cfg, 0.0, 10).opening_m - 0.3).abs() < 1e-6);
        p.command(&cfg, 99.0);
        assert_eq!(p.command_m(), cfg.outlet().max_opening_m());
        assert!(Plant::new(&cfg, 0.0, 0.0, 0.0, 0).is_err());
        assert!(Plant::new(&cfg, f32::NAN, 0.0, 1.0, 0).is_err());
    }
}
