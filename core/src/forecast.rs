//! The storage forecast: where the pond is heading over the next hours for one gate policy,
//! and the smallest release that keeps it below its stage limit.
//!
//! Units: stage m, storage m³, flows m³/s, volumes m³, rain mm and mm/h, time integer seconds
//! counted from "now" (the end of the latest runoff step pushed).
//!
//! ## Pieces
//!
//! - [`Outlook`]: the predicted inflow, one step mean per forecast step of `step_s` seconds, at
//!   most [`MAX_OUTLOOK_STEPS`] steps. Built from the runoff already on its way (the
//!   [`TimeAreaInflow`] state of rain fallen so far) plus an assumption about rain still to
//!   come ([`FutureRain`]), or from samples ([`Outlook::from_samples`]).
//! - [`Policy`]: a fixed gate opening, or a release cap ([`Policy::CapRelease`]) the gate
//!   follows at every stage.
//! - [`predict`]: routes the outlook through the pond under a policy and reports the peak,
//!   the end state and when the permit and the stage limit are first exceeded.
//! - [`release_to_hold`]: the smallest cap ≥ the permit for which the predicted peak stays at
//!   or below the stage limit (bisection on the cap).
//! - [`step_capped`]: one accurate routing step ([`crate::routing::step`]) under a release
//!   cap, for the simulator's perfect-foresight bound.
//!
//! ## Invariants
//!
//! - No input panics; no heap. Bad numbers (NaN, negative) in live inputs read as 0, as in
//!   routing; constructors reject bad configuration.
//! - Predicted storage is never negative, and the predicted peak is never below the state
//!   at time 0.
//! - Under [`Policy::CapRelease`] the release at a stage `h` is
//!   `max(fixed(h), min(cap, full_open(h)))`: at most the cap wherever the gate can achieve
//!   it; the fixed structures alone where they already pass more; full open where even that
//!   passes less. This function is continuous, zero below the lowest invert and monotone
//!   non-decreasing in stage (a max and min of such functions), so it is a valid
//!   [`StageDischarge`].
//! - Inflow within a forecast step is its step mean (constant): the outlook's volume is
//!   `Σ inflow·step_s` exactly, and the forecast routes exactly that volume.

use core::fmt;

use crate::flow::StageDischarge;
use crate::hydraulics::Outlet;
use crate::rain::Idf;
use crate::routing::{self, Inflow, StepResult};
use crate::runoff::TimeAreaInflow;
use crate::runoff::time_area::MAX_TIME_AREA_STEPS;
use crate::storage::StageStorage;
use crate::validate::{self, Invalid};

/// Most steps an [`Outlook`] holds (a 3 h horizon at 180 s is 60 steps).
pub const MAX_OUTLOOK_STEPS: usize = 64;

/// Longest forecast step accepted, s (1 h).
pub const MAX_STEP_S: u32 = 3600;

/// Most bisection steps of [`release_to_hold`] on the cap.
pub const MAX_HOLD_ITERATIONS: u32 = 24;

/// [`release_to_hold`] stops once the cap bracket is narrower than this (absolute part),
/// m³/s (1 L/s).
pub const HOLD_TOLERANCE_M3S: f32 = 1.0e-3;

/// [`release_to_hold`] stops once the cap bracket is narrower than this share of the cap.
pub const HOLD_TOLERANCE_REL: f32 = 1.0e-3;

/// m³ per (mm · m²).
const M3_PER_MM_M2: f32 = 0.001;

/// What can go wrong building an outlook or limits.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ForecastError {
    /// One number broke its rule.
    Invalid(Invalid),
    /// The horizon needs more steps than an [`Outlook`] holds.
    TooManySteps {
        /// Steps asked for.
        steps: u32,
        /// The capacity, [`MAX_OUTLOOK_STEPS`].
        capacity: usize,
    },
    /// The forecast step is not a whole multiple of the runoff step.
    StepMismatch {
        /// Forecast step, s.
        step_s: u32,
        /// Runoff (time–area) step, s.
        runoff_dt_s: u32,
    },
    /// A design-storm continuation was asked for without an IDF description.
    NoIdf,
}

impl From<Invalid> for ForecastError {
    fn from(e: Invalid) -> Self {
        ForecastError::Invalid(e)
    }
}

impl fmt::Display for ForecastError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ForecastError::Invalid(e) => write!(f, "{e}"),
            ForecastError::TooManySteps { steps, capacity } => write!(
                f,
                "forecast horizon needs {steps} steps: at most {capacity} fit"
            ),
            ForecastError::StepMismatch {
                step_s,
                runoff_dt_s,
            } => write!(
                f,
                "step_s = {step_s}: must be a whole multiple of the runoff step {runoff_dt_s} s"
            ),
            ForecastError::NoIdf => {
                write!(f, "a design-storm continuation needs an IDF description")
            }
        }
    }
}

impl core::error::Error for ForecastError {}

/// What the forecast assumes about rain still to come.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FutureRain {
    /// No more rain: only the runoff already on its way.
    Dry,
    /// The current intensity persists for `for_s` seconds from now, then stops.
    Persist {
        /// Intensity assumed, mm/h (NaN or negative reads as 0).
        intensity_mm_h: f32,
        /// How long it lasts from now, s.
        for_s: u32,
    },
    /// The event continues as a design storm of `return_period_yr`: the cumulative depth of
    /// the event at every later time `t` (since the event began) is raised to the IDF depth
    /// `depth(t, T)` of that return period, never lowered. So the rain still to come between
    /// now and `t` is `max(depth(t, T), depth_so_far) − depth_so_far` (a catch-up in the
    /// first future step when the event so far is below the IDF depth of its elapsed time).
    /// This is the most rain an event of return period `T` can still bring at every longer
    /// duration, a conservative (upper) assumption.
    DesignStorm {
        /// Return period of the assumed storm, years.
        return_period_yr: f32,
        /// Time since the event began, s.
        elapsed_s: u32,
        /// Rain depth of the event so far, mm.
        depth_so_far_mm: f32,
    },
}

/// Predicted inflow to the pond: one step mean (m³/s) per forecast step, from now on.
#[derive(Debug, Clone, PartialEq)]
pub struct Outlook {
    step_s: u32,
    inflow_m3s: heapless::Vec<f32, MAX_OUTLOOK_STEPS>,
    future_rain_mm: f32,
}

/// A live number that counts as 0 when NaN, infinite or negative.
fn sane(x: f32) -> f32 {
    if x.is_finite() && x > 0.0 { x } else { 0.0 }
}

/// `a·b` for seconds as f32 (exact below 2²⁴ s).
#[allow(clippy::cast_precision_loss)]
fn secs(t: u32) -> f32 {
    t as f32
}

fn check_step(step_s: u32) -> Result<u32, ForecastError> {
    if (1..=MAX_STEP_S).contains(&step_s) {
        Ok(step_s)
    } else {
        Err(Invalid {
            field: "step_s",
            value: secs(step_s),
            rule: "must be in [1, 3600] s",
        }
        .into())
    }
}

impl Outlook {
    /// An outlook from step-mean inflows (m³/s), one per step of `step_s` seconds (1..=3600),
    /// at most [`MAX_OUTLOOK_STEPS`] of them. Each must be finite and ≥ 0.
    pub fn from_samples(step_s: u32, inflow_m3s: &[f32]) -> Result<Self, ForecastError> {
        let step_s = check_step(step_s)?;
        let mut v = heapless::Vec::new();
        for &q in inflow_m3s {
            validate::non_negative("inflow_m3s", q)?;
            v.push(q).map_err(|_| ForecastError::TooManySteps {
                steps: u32::try_from(inflow_m3s.len()).unwrap_or(u32::MAX),
                capacity: MAX_OUTLOOK_STEPS,
            })?;
        }
        Ok(Self {
            step_s,
            inflow_m3s: v,
            future_rain_mm: 0.0,
        })
    }

    /// The outlook over `horizon_s` (rounded up to whole steps of `step_s`) from the runoff
    /// already on its way in `runoff` plus the rain `future` assumes. `step_s` must be a whole
    /// multiple of the runoff step; each forecast step's inflow is the mean of the runoff
    /// steps it covers. `idf` is needed only for [`FutureRain::DesignStorm`].
    ///
    /// Cost: one dot product over the time–area ordinates per runoff step of the horizon for
    /// the runoff on its way, and one more for the assumed rain (none when [`FutureRain::Dry`]).
    pub fn from_time_area(
        runoff: &TimeAreaInflow,
        future: &FutureRain,
        idf: Option<&dyn Idf>,
        step_s: u32,
        horizon_s: u32,
    ) -> Result<Self, ForecastError> {
        let step_s = check_step(step_s)?;
        let dt_s = runoff.response().dt_s();
        let per = step_s.checked_div(dt_s).unwrap_or(0);
        if per == 0 || step_s.checked_rem(dt_s) != Some(0) {
            return Err(ForecastError::StepMismatch {
                step_s,
                runoff_dt_s: dt_s,
            });
        }
        let steps = horizon_s.div_ceil(step_s);
        if steps as usize > MAX_OUTLOOK_STEPS {
            return Err(ForecastError::TooManySteps {
                steps,
                capacity: MAX_OUTLOOK_STEPS,
            });
        }
        let mut future_rain = FutureSteps::new(future, idf, dt_s)?;
        let ords = runoff.response().ordinates_m2();
        let scale = M3_PER_MM_M2 / secs(dt_s);
        // Assumed future rain of the last MAX_TIME_AREA_STEPS runoff steps, a ring indexed by
        // the runoff step number `j` (1 = the first step after now).
        let mut ring = [0.0_f32; MAX_TIME_AREA_STEPS];
        let mut v = heapless::Vec::new();
        let mut j = 0_usize;
        let mut total_mm = 0.0_f32;
        for _ in 0..steps {
            let mut sum = 0.0_f32;
            for _ in 0..per {
                j = j.saturating_add(1);
                let past = runoff.projected_inflow_m3s(j, 0.0);
                let mut fut = 0.0_f32;
                if let Some(src) = future_rain.as_mut() {
                    let r = src.next_mm();
                    total_mm += r;
                    if let Some(slot) = ring.get_mut(j % MAX_TIME_AREA_STEPS) {
                        *slot = r;
                    }
                    for (k, a) in ords.iter().enumerate().take(j) {
                        let idx = j.wrapping_sub(k) % MAX_TIME_AREA_STEPS;
                        fut += a * ring.get(idx).copied().unwrap_or(0.0);
                    }
                }
                sum += past + fut * scale;
            }
            #[allow(clippy::cast_precision_loss)]
            let mean = sum / per as f32;
            // Capacity was checked above; a failed push cannot happen.
            let _ = v.push(sane(mean));
        }
        Ok(Self {
            step_s,
            inflow_m3s: v,
            future_rain_mm: total_mm,
        })
    }

    /// The forecast step, s.
    pub fn step_s(&self) -> u32 {
        self.step_s
    }

    /// Step-mean inflows, m³/s (index 0: the step starting now).
    pub fn inflow_m3s(&self) -> &[f32] {
        &self.inflow_m3s
    }

    /// Number of steps.
    pub fn steps(&self) -> usize {
        self.inflow_m3s.len()
    }

    /// The horizon covered, s.
    pub fn horizon_s(&self) -> u32 {
        u32::try_from(self.inflow_m3s.len())
            .unwrap_or(u32::MAX)
            .saturating_mul(self.step_s)
    }

    /// Inflow volume over the horizon, m³ (`Σ inflow·step_s`).
    pub fn volume_m3(&self) -> f32 {
        self.inflow_m3s.iter().sum::<f32>() * secs(self.step_s)
    }

    /// Total depth of the assumed future rain over the horizon, mm (0 for samples and
    /// [`FutureRain::Dry`]).
    pub fn future_rain_mm(&self) -> f32 {
        self.future_rain_mm
    }
}

/// Future rain per runoff step, generated in order.
enum FutureSteps<'a> {
    Persist {
        mm_per_s: f32,
        for_s: u32,
        t_s: u32,
        dt_s: u32,
    },
    Design {
        idf: &'a dyn Idf,
        return_period_yr: f32,
        t_s: u32,
        dt_s: u32,
        cum_mm: f32,
    },
}

impl<'a> FutureSteps<'a> {
    fn new(
        future: &FutureRain,
        idf: Option<&'a dyn Idf>,
        dt_s: u32,
    ) -> Result<Option<Self>, ForecastError> {
        Ok(match *future {
            FutureRain::Dry => None,
            FutureRain::Persist {
                intensity_mm_h,
                for_s,
            } => Some(FutureSteps::Persist {
                mm_per_s: sane(intensity_mm_h) / 3600.0,
                for_s,
                t_s: 0,
                dt_s,
            }),
            FutureRain::DesignStorm {
                return_period_yr,
                elapsed_s,
                depth_so_far_mm,
            } => {
                let idf = idf.ok_or(ForecastError::NoIdf)?;
                let return_period_yr = validate::positive("return_period_yr", return_period_yr)?;
                Some(FutureSteps::Design {
                    idf,
                    return_period_yr,
                    t_s: elapsed_s,
                    dt_s,
                    cum_mm: sane(depth_so_far_mm),
                })
            }
        })
    }

    /// Rain depth of the next runoff step, mm (≥ 0).
    fn next_mm(&mut self) -> f32 {
        match self {
            FutureSteps::Persist {
                mm_per_s,
                for_s,
                t_s,
                dt_s,
            } => {
                let start = *t_s;
                let end = start.saturating_add(*dt_s);
                *t_s = end;
                let wet = end.min(*for_s).saturating_sub(start);
                *mm_per_s * secs(wet)
            }
            FutureSteps::Design {
                idf,
                return_period_yr,
                t_s,
                dt_s,
                cum_mm,
            } => {
                *t_s = t_s.saturating_add(*dt_s);
                let d = sane(idf.depth_mm(secs(*t_s) / 60.0, *return_period_yr));
                if d > *cum_mm {
                    let r = d - *cum_mm;
                    *cum_mm = d;
                    r
                } else {
                    0.0
                }
            }
        }
    }
}

/// How the gate is run over the forecast.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Policy {
    /// The gate held at one opening, m (clamped by the gate).
    Fixed {
        /// Opening, m.
        opening_m: f32,
    },
    /// At every stage the gate opening that makes the total release `cap_m3s`; gate closed
    /// where the fixed structures alone pass more, full open where even that passes less.
    /// NaN or negative reads as 0 (gate closed), +∞ as full open.
    CapRelease {
        /// The release cap, m³/s.
        cap_m3s: f32,
    },
}

impl Policy {
    /// The gate opening (m) this policy commands at `stage_m`.
    pub fn opening_m(&self, outlet: &Outlet, stage_m: f32) -> f32 {
        match *self {
            Policy::Fixed { opening_m } => {
                crate::math::clamp(opening_m, 0.0, outlet.max_opening_m())
            }
            Policy::CapRelease { cap_m3s } => {
                let cap = cap_of(cap_m3s);
                match outlet.opening_for(stage_m, cap) {
                    Ok(a) => a,
                    Err(crate::hydraulics::HydraulicsError::Unreachable { min_m3s, .. }) => {
                        if cap < min_m3s {
                            0.0
                        } else {
                            outlet.max_opening_m()
                        }
                    }
                    Err(_) => 0.0,
                }
            }
        }
    }

    /// This policy on `outlet` as a stage–discharge relation.
    pub fn on<'a>(&self, outlet: &'a Outlet) -> PolicyOutlet<'a> {
        PolicyOutlet {
            outlet,
            policy: *self,
        }
    }
}

/// A cap that reads NaN and negatives as 0 and keeps +∞.
fn cap_of(cap_m3s: f32) -> f32 {
    if cap_m3s > 0.0 { cap_m3s } else { 0.0 }
}

/// An outlet run under a [`Policy`]: the release as a function of stage.
#[derive(Debug, Clone, Copy)]
pub struct PolicyOutlet<'a> {
    outlet: &'a Outlet,
    policy: Policy,
}

impl StageDischarge for PolicyOutlet<'_> {
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        match self.policy {
            Policy::Fixed { opening_m } => self.outlet.discharge_m3s(stage_m, opening_m),
            Policy::CapRelease { cap_m3s } => {
                let cap = cap_of(cap_m3s);
                let fixed = self.outlet.fixed_discharge_m3s(stage_m);
                if fixed >= cap {
                    return fixed;
                }
                let full = fixed
                    + self
                        .outlet
                        .gate_discharge_m3s(stage_m, self.outlet.max_opening_m());
                if full < cap { full } else { cap }
            }
        }
    }
}

/// One accurate routing step ([`routing::step`]) with the gate following a release cap
/// (see [`Policy::CapRelease`]): the perfect-foresight permit-following step when
/// `cap_m3s` is the permit.
pub fn step_capped(
    pond: &StageStorage,
    outlet: &Outlet,
    storage_m3: f32,
    inflow: Inflow,
    cap_m3s: f32,
    dt_s: u32,
) -> StepResult {
    routing::step(
        pond,
        &Policy::CapRelease { cap_m3s }.on(outlet),
        storage_m3,
        inflow,
        dt_s,
    )
}

/// The limits a forecast is judged against.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Limits {
    /// Permitted release, m³/s.
    pub permit_m3s: f32,
    /// Highest stage allowed, m (crest − freeboard).
    pub stage_limit_m: f32,
    /// Stage at which the pond overtops, m.
    pub crest_m: f32,
}

impl Limits {
    /// Limits with a finite permit ≥ 0, finite stages, and `stage_limit_m ≤ crest_m`.
    pub fn new(permit_m3s: f32, stage_limit_m: f32, crest_m: f32) -> Result<Self, ForecastError> {
        let permit_m3s = validate::non_negative("permit_m3s", permit_m3s)?;
        let crest_m = validate::finite("crest_m", crest_m)?;
        let stage_limit_m = validate::finite("stage_limit_m", stage_limit_m)?;
        if stage_limit_m > crest_m {
            return Err(Invalid {
                field: "stage_limit_m",
                value: stage_limit_m,
                rule: "must not be above crest_m",
            }
            .into());
        }
        Ok(Self {
            permit_m3s,
            stage_limit_m,
            crest_m,
        })
    }
}

/// What a forecast predicts for one policy.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Prediction {
    /// Highest stage over the horizon (the start included), m.
    pub peak_stage_m: f32,
    /// Storage at that stage, m³.
    pub peak_storage_m3: f32,
    /// When the peak is reached, s from now (0: now).
    pub peak_at_s: u32,
    /// Highest release over the horizon (the start included), m³/s.
    pub peak_release_m3s: f32,
    /// Storage at the end of the horizon, m³.
    pub end_storage_m3: f32,
    /// Stage at the end of the horizon, m.
    pub end_stage_m: f32,
    /// First time the release exceeds the permit, s from now (the end of the step).
    pub first_over_permit_s: Option<u32>,
    /// First time the stage exceeds the stage limit, s from now.
    pub first_over_limit_s: Option<u32>,
    /// The stage reaches the crest within the horizon.
    pub reaches_crest: bool,
    /// Volume released over the horizon, m³.
    pub released_m3: f32,
    /// Inflow volume over the horizon, m³.
    pub inflow_m3: f32,
}

impl Prediction {
    /// The peak stays at or below the stage limit.
    pub fn holds(&self, limits: &Limits) -> bool {
        self.peak_stage_m <= limits.stage_limit_m
    }
}

/// The forecast integrator's step: end storage, stage, policy release and released volume.
struct Stepped {
    storage_m3: f32,
    stage_m: f32,
    release_m3s: f32,
    released_m3: f32,
}

fn integrate(
    pond: &StageStorage,
    release: &impl StageDischarge,
    storage_m3: f32,
    inflow_m3s: f32,
    dt_s: u32,
) -> Stepped {
    let r = routing::step(pond, release, storage_m3, Inflow::steady(inflow_m3s), dt_s);
    Stepped {
        storage_m3: r.storage_m3,
        stage_m: r.stage_m,
        release_m3s: r.outflow_m3s,
        released_m3: r.released_m3,
    }
}

/// Routes `outlook` through `pond` from `storage_m3` (NaN or negative reads as empty) with the
/// gate run by `policy`, and judges the result against `limits`.
pub fn predict(
    pond: &StageStorage,
    outlet: &Outlet,
    storage_m3: f32,
    outlook: &Outlook,
    policy: Policy,
    limits: &Limits,
) -> Prediction {
    let release = policy.on(outlet);
    let s0 = sane(storage_m3);
    let h0 = pond.stage_m(s0);
    let q0 = release.discharge_m3s(h0);
    let dt_s = outlook.step_s;
    let mut p = Prediction {
        peak_stage_m: h0,
        peak_storage_m3: s0,
        peak_at_s: 0,
        peak_release_m3s: q0,
        end_storage_m3: s0,
        end_stage_m: h0,
        first_over_permit_s: (q0 > limits.permit_m3s).then_some(0),
        first_over_limit_s: (h0 > limits.stage_limit_m).then_some(0),
        reaches_crest: h0 >= limits.crest_m,
        released_m3: 0.0,
        inflow_m3: outlook.volume_m3(),
    };
    let mut s = s0;
    let mut t = 0_u32;
    for &q_in in outlook.inflow_m3s.iter() {
        let r = integrate(pond, &release, s, q_in, dt_s);
        t = t.saturating_add(dt_s);
        s = r.storage_m3;
        p.released_m3 += r.released_m3;
        if r.stage_m > p.peak_stage_m {
            p.peak_stage_m = r.stage_m;
            p.peak_storage_m3 = r.storage_m3;
            p.peak_at_s = t;
        }
        if r.release_m3s > p.peak_release_m3s {
            p.peak_release_m3s = r.release_m3s;
        }
        if p.first_over_permit_s.is_none() && r.release_m3s > limits.permit_m3s {
            p.first_over_permit_s = Some(t);
        }
        if p.first_over_limit_s.is_none() && r.stage_m > limits.stage_limit_m {
            p.first_over_limit_s = Some(t);
        }
        if r.stage_m >= limits.crest_m {
            p.reaches_crest = true;
        }
        p.end_storage_m3 = r.storage_m3;
        p.end_stage_m = r.stage_m;
    }
    p
}

/// The release cap [`release_to_hold`] found.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Hold {
    /// The smallest cap ≥ the permit that holds the stage limit (to the bisection
    /// tolerance), m³/s; when infeasible, the peak release of the full-open gate.
    pub cap_m3s: f32,
    /// The forecast under [`Policy::CapRelease`] at `cap_m3s` (full open when infeasible).
    pub prediction: Prediction,
    /// Some cap holds the stage limit; false when even the full-open gate overtops it.
    pub feasible: bool,
}

/// The smallest release cap ≥ `limits.permit_m3s` for which the predicted peak stays at or
/// below `limits.stage_limit_m`: the permit itself when that holds; otherwise bisection on the
/// cap between the permit (fails) and the full-open gate's peak release (the same run as full
/// open), at most [`MAX_HOLD_ITERATIONS`] times, stopping once the bracket is narrower than
/// `max(HOLD_TOLERANCE_M3S, HOLD_TOLERANCE_REL·cap)`; the upper (holding) end is returned.
/// When even the full-open gate overtops, `feasible` is false and the full-open forecast is
/// returned.
pub fn release_to_hold(
    pond: &StageStorage,
    outlet: &Outlet,
    storage_m3: f32,
    outlook: &Outlook,
    limits: &Limits,
) -> Hold {
    let permit = cap_of(limits.permit_m3s);
    let at_permit = predict(
        pond,
        outlet,
        storage_m3,
        outlook,
        Policy::CapRelease { cap_m3s: permit },
        limits,
    );
    if at_permit.holds(limits) {
        return Hold {
            cap_m3s: permit,
            prediction: at_permit,
            feasible: true,
        };
    }
    let open = predict(
        pond,
        outlet,
        storage_m3,
        outlook,
        Policy::Fixed {
            opening_m: outlet.max_opening_m(),
        },
        limits,
    );
    if !open.holds(limits) || open.peak_release_m3s <= permit {
        return Hold {
            cap_m3s: open.peak_release_m3s.max(permit),
            prediction: open,
            feasible: false,
        };
    }
    let (mut lo, mut hi) = (permit, open.peak_release_m3s);
    let mut best = open;
    for _ in 0..MAX_HOLD_ITERATIONS {
        let tol = HOLD_TOLERANCE_M3S.max(HOLD_TOLERANCE_REL * hi);
        if hi - lo <= tol {
            break;
        }
        let mid = 0.5 * (lo + hi);
        let p = predict(
            pond,
            outlet,
            storage_m3,
            outlook,
            Policy::CapRelease { cap_m3s: mid },
            limits,
        );
        if p.holds(limits) {
            hi = mid;
            best = p;
        } else {
            lo = mid;
        }
    }
    Hold {
        cap_m3s: hi,
        prediction: best,
        feasible: true,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hydraulics::{CircularOrifice, SluiceGate};
    use crate::storage::VolumeMethod;

    fn box_pond() -> StageStorage {
        StageStorage::from_areas(&[(0.0, 1000.0), (3.0, 1000.0)], VolumeMethod::Frustum).unwrap()
    }

    fn outlet() -> Outlet {
        let o = CircularOrifice::new(0.0, 0.15, 0.6).unwrap();
        let g = SluiceGate::new(0.0, 0.5, 0.5, 0.61, 0.98).unwrap();
        Outlet::new(&[o.into()], Some(g), None).unwrap()
    }

    /// A closed pond with a closed outlet stores the whole outlook volume (continuity).
    #[test]
    fn closed_gate_without_fixed_flow_stores_everything() {
        let g = SluiceGate::new(0.0, 0.5, 0.5, 0.61, 0.98).unwrap();
        let o = Outlet::new(&[], Some(g), None).unwrap();
        let look = Outlook::from_samples(180, &[0.1; 20]).unwrap();
        let lim = Limits::new(0.05, 2.5, 3.0).unwrap();
        let p = predict(
            &box_pond(),
            &o,
            0.0,
            &look,
            Policy::Fixed { opening_m: 0.0 },
            &lim,
        );
        assert!((p.end_storage_m3 - 360.0).abs() < 1e-2, "{p:?}");
        assert_eq!(p.released_m3, 0.0);
    }

    /// The capped release never exceeds max(cap, fixed flow) and the hold cap is ≥ permit.
    #[test]
    fn capped_release_and_hold() {
        let look = Outlook::from_samples(180, &[0.4; 60]).unwrap();
        let lim = Limits::new(0.1, 2.0, 3.0).unwrap();
        let o = outlet();
        let p = predict(
            &box_pond(),
            &o,
            0.0,
            &look,
            Policy::CapRelease { cap_m3s: 0.1 },
            &lim,
        );
        assert!(!p.holds(&lim));
        let h = release_to_hold(&box_pond(), &o, 0.0, &look, &lim);
        assert!(
            h.feasible && h.cap_m3s > 0.1 && h.prediction.holds(&lim),
            "{h:?}"
        );
    }
}
