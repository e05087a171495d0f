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
//! - [`Forecaster`]: the pond and outlet with the fixed structures tabulated once
//!   ([`FixedFlowTable`]); its [`Forecaster::predict`] and [`Forecaster::release_to_hold`]
//!   give the results of [`predict`] and [`release_to_hold`] within stated tolerances at a
//!   fraction of the cost (see the `fast` submodule doc).
//! - [`predict_release_traced`]: [`predict_release`] reporting every step ([`ForecastStep`]).
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
//!
//! ## Cost (measured, scene of `tests/benches/forecast.rs`: 3 h at 180 s, composite outlet)
//!
//! Exact instruction counts of one whole forecast, outlook build included. Guest: Cortex-M4F
//! under QEMU, `scripts/qemu-icount.sh count ELF bench KERNEL N`, count(2N) − count(N) over N
//! (identical run to run). Host: x86-64 under callgrind, `scripts/icount-host.sh`.
//!
//! | forecast | guest | host |
//! |---|---|---|
//! | outlook alone | ≈ 37 k | 37 202 |
//! | exact [`predict`], 1 candidate (`exact1`) | 204 309 | 90 671 |
//! | exact [`predict`], 20 candidates (`exact20`) | 3 139 881 | 1 065 420 |
//! | [`Forecaster`] built per forecast, 1 candidate (`forecast1`) | 219 731 | 104 772 |
//! | [`Forecaster`] built per forecast, 20 candidates (`forecast20`) | **904 785** | 744 383 |
//! | [`Forecaster`] kept, 20 candidates (`forecast20kept`) | 746 338 | 694 869 |
//!
//! Before the table (exact path and the outlook's full convolutions), `forecast20` was
//! 3 129 644 guest and 1 100 337 host instructions, `forecast1` 251 547 and 125 588. On the
//! guest an exact candidate costs about 150 k instructions, nearly all of it the fixed
//! structures (the partly-full orifice's libm `acosf`/`sinf`, which compute in f64 and so in
//! software on the M4F); a tabulated one about 36 k (60 steps, about 1.3 release evaluations
//! each); the table about 160 k (63 exact evaluations). The table pays for itself from two
//! candidates; for a single [`predict`] the exact path is cheaper.
//!
//! Budget: at 64 MHz a minute holds 3.84 G cycles; one 20-candidate forecast a minute needs
//! 0.905 M instructions, about 1.4 M cycles at an assumed 1.5 cycles an instruction (from
//! memory; QEMU does not model the DWT cycle counter, so cycles are not measured): about
//! 21 ms, 0.04 % of the CPU. The target (20 candidates over 3 h under 1 M guest
//! instructions) is met with the table built per forecast, with 10 % to spare.

use core::fmt;

use crate::flow::StageDischarge;
use crate::hydraulics::Outlet;
use crate::rain::Idf;
use crate::routing::{self, Inflow, Scheme, StepResult};
use crate::runoff::TimeAreaInflow;
use crate::runoff::time_area::MAX_TIME_AREA_STEPS;
use crate::storage::StageStorage;
use crate::validate::{self, Invalid};

mod fast;

pub use fast::{
    CAPACITY_TOLERANCE_REL, FLOW_FLOOR_M3S, FixedFlowTable, Forecaster, HOLD_CAP_TOLERANCE_REL,
    PEAK_STAGE_TOLERANCE_M, PEAK_STAGE_TOLERANCE_REL, RELEASE_TOLERANCE_IN_PLAY_REL,
    RELEASE_TOLERANCE_REL, TABLE_POINTS, TabulatedRelease,
};

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
    /// The event keeps to the shape of the IDF's depth–duration curve through what has
    /// fallen so far: with `D(t)` the depth of the most frequent tabulated return period at
    /// duration `t` and `e` the time since the event began, the event's cumulative depth at
    /// `e + τ` is `depth_so_far · D(e + τ) / D(e)` (for `τ ≤ for_s`; no rain after). An event
    /// as rare as the curve at every duration (a Keifer–Chu storm of one return period
    /// follows its IDF curve at every duration up to its own length) is continued at the
    /// rate the curve's slope allows, which falls off with duration, rather than at its peak
    /// rate. `e` counts as at least [`FOLLOW_MIN_ELAPSED_S`].
    FollowIdf {
        /// Time since the event began, s.
        elapsed_s: u32,
        /// Rain depth of the event so far, mm.
        depth_so_far_mm: f32,
        /// How long it lasts from now, s.
        for_s: u32,
    },
}

impl FutureRain {
    /// The depth this assumption brings over `runoff_steps` steps of `dt_s` from now, mm:
    /// the same terms summed in the same order as the `future_rain_mm` of an
    /// [`Outlook::from_time_area`] over that many runoff steps, without the convolution
    /// (`idf` is needed for [`FutureRain::DesignStorm`] and [`FutureRain::FollowIdf`]).
    ///
    /// With the pending runoff ([`crate::runoff::TimeAreaInflow::pending_volume_m3`]) and the
    /// catchment's effective area it bounds the volume an outlook can bring, so a forecast
    /// can tell cheaply that no routing of it could reach a limit.
    pub fn depth_mm(
        &self,
        idf: Option<&dyn Idf>,
        dt_s: u32,
        runoff_steps: u32,
    ) -> Result<f32, ForecastError> {
        let Some(mut src) = FutureSteps::new(self, idf, dt_s)? else {
            return Ok(0.0);
        };
        let mut total_mm = 0.0_f32;
        for _ in 0..runoff_steps {
            if src.exhausted() {
                break;
            }
            total_mm += src.next_mm();
        }
        Ok(total_mm)
    }

    /// At least [`FutureRain::depth_mm`], mm, and cheaper where the IDF's depth is known
    /// never to fall with duration ([`Idf::first_depth_non_decreasing`]): then the rises of
    /// [`FutureRain::FollowIdf`] telescope, and its depth is at most
    /// `ratio · (D(end) − D(e))`, widened by the rounding of up to `runoff_steps` terms.
    /// Other assumptions are summed as [`FutureRain::depth_mm`] sums them.
    pub fn depth_at_most_mm(
        &self,
        idf: Option<&dyn Idf>,
        dt_s: u32,
        runoff_steps: u32,
    ) -> Result<f32, ForecastError> {
        if let Some(FutureSteps::Follow {
            idf,
            return_period_yr,
            ratio,
            end_s,
            prev_mm,
            ..
        }) = FutureSteps::new(self, idf, dt_s)?
            && idf.first_depth_non_decreasing()
        {
            let end_mm = sane(idf.depth_mm(secs(end_s) / 60.0, return_period_yr));
            #[allow(clippy::cast_precision_loss)]
            let rounding = 4.0 * f32::EPSILON * end_mm * (runoff_steps as f32 + 1.0);
            let rise = if end_mm > prev_mm {
                end_mm - prev_mm
            } else {
                0.0
            };
            return Ok(ratio * (rise + rounding) * (1.0 + 1.0e-3));
        }
        self.depth_mm(idf, dt_s, runoff_steps)
    }
}

/// Shortest elapsed time [`FutureRain::FollowIdf`] scales from, s (below it one tip is too
/// much of the depth so far).
pub const FOLLOW_MIN_ELAPSED_S: u32 = 300;

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
    /// Cost: one dot product over the time–area ordinates per runoff step for the runoff on
    /// its way (only while it is still arriving) and one more for the assumed rain (only
    /// while rain assumed within the last ordinate span is still arriving; none when
    /// [`FutureRain::Dry`]).
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
        // No runoff on its way and no rain assumed: every step is exactly +0 (the loop below
        // would add only +0 terms), so the outlook is written without the loop.
        if runoff.all_dry() && future_rain.as_ref().is_none_or(FutureSteps::is_dry) {
            let mut v = heapless::Vec::new();
            v.resize(steps as usize, 0.0)
                .map_err(|_| ForecastError::TooManySteps {
                    steps,
                    capacity: MAX_OUTLOOK_STEPS,
                })?;
            return Ok(Self {
                step_s,
                inflow_m3s: v,
                future_rain_mm: 0.0,
            });
        }
        let ords = runoff.response().ordinates_m2();
        let scale = M3_PER_MM_M2 / secs(dt_s);
        // Assumed future rain of the last MAX_TIME_AREA_STEPS runoff steps, a ring indexed by
        // the runoff step number `j` (1 = the first step after now).
        let mut ring = [0.0_f32; MAX_TIME_AREA_STEPS];
        let mut v = heapless::Vec::new();
        let mut j = 0_usize;
        let mut total_mm = 0.0_f32;
        // The last runoff step with assumed rain (0: none yet). Once `j` is an ordinate span
        // past it (and past the rain already fallen), every product of a convolution is an
        // exact 0, so it is skipped: the same bits, less work.
        let mut last_wet = 0_usize;
        for _ in 0..steps {
            let mut sum = 0.0_f32;
            for _ in 0..per {
                j = j.saturating_add(1);
                let past = if j < ords.len() {
                    runoff.projected_inflow_m3s(j, 0.0)
                } else {
                    0.0
                };
                let mut fut = 0.0_f32;
                if let Some(src) = future_rain.as_mut() {
                    let r = src.next_mm();
                    total_mm += r;
                    if let Some(slot) = ring.get_mut(j % MAX_TIME_AREA_STEPS) {
                        *slot = r;
                    }
                    if r != 0.0 {
                        last_wet = j;
                    }
                    if last_wet > 0 && j.saturating_sub(last_wet) < ords.len() {
                        for (k, a) in ords.iter().enumerate().take(j) {
                            let idx = j.wrapping_sub(k) % MAX_TIME_AREA_STEPS;
                            fut += a * ring.get(idx).copied().unwrap_or(0.0);
                        }
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
    Follow {
        idf: &'a dyn Idf,
        return_period_yr: f32,
        ratio: f32,
        t_s: u32,
        end_s: u32,
        dt_s: u32,
        prev_mm: f32,
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
            FutureRain::FollowIdf {
                elapsed_s,
                depth_so_far_mm,
                for_s,
            } => {
                let idf = idf.ok_or(ForecastError::NoIdf)?;
                let return_period_yr = idf.return_periods_years().first().copied().unwrap_or(0.0);
                let e = elapsed_s.max(FOLLOW_MIN_ELAPSED_S);
                let d_e = sane(idf.depth_mm(secs(e) / 60.0, return_period_yr));
                let ratio = if d_e > 0.0 {
                    sane(depth_so_far_mm) / d_e
                } else {
                    0.0
                };
                Some(FutureSteps::Follow {
                    idf,
                    return_period_yr,
                    ratio,
                    t_s: e,
                    end_s: e.saturating_add(for_s),
                    dt_s,
                    prev_mm: d_e,
                })
            }
        })
    }

    /// Whether every step brings exactly no rain (a persistence of zero intensity or
    /// duration).
    fn is_dry(&self) -> bool {
        match *self {
            FutureSteps::Persist {
                mm_per_s, for_s, ..
            } => mm_per_s == 0.0 || for_s == 0,
            FutureSteps::Design { .. } | FutureSteps::Follow { .. } => false,
        }
    }

    /// Whether every later step brings exactly +0 mm (adding them changes no sum).
    fn exhausted(&self) -> bool {
        match *self {
            FutureSteps::Persist {
                mm_per_s,
                for_s,
                t_s,
                ..
            } => mm_per_s == 0.0 || t_s >= for_s,
            FutureSteps::Follow { t_s, end_s, .. } => t_s >= end_s,
            FutureSteps::Design { .. } => false,
        }
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
            FutureSteps::Follow {
                idf,
                return_period_yr,
                ratio,
                t_s,
                end_s,
                dt_s,
                prev_mm,
            } => {
                if *t_s >= *end_s {
                    return 0.0;
                }
                *t_s = t_s.saturating_add(*dt_s).min(*end_s);
                let d = sane(idf.depth_mm(secs(*t_s) / 60.0, *return_period_yr));
                let r = if d > *prev_mm {
                    *ratio * (d - *prev_mm)
                } else {
                    0.0
                };
                *prev_mm = d;
                r
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

/// Most solver iterations in one forecast step (each one outlet and one storage
/// evaluation). Newton steps converge in two or three from the previous step's slopes; the
/// rest is the bracketing safeguard's room.
pub const MAX_SOLVER_ITERATIONS: u32 = 16;

/// The solver stops once the next Newton correction would move the stage less than this, m.
pub const STAGE_TOLERANCE_M: f32 = 1.0e-4;

/// Largest secant stiffness `dt·dO/dS` for which the trapezoidal step is kept (as in
/// [`routing::step`]).
const TRAPEZOID_MAX_STIFFNESS: f32 = 2.0;

/// A point on the pond's curves: stage, storage at it, release at it.
#[derive(Debug, Clone, Copy)]
struct Point {
    h: f32,
    v: f32,
    q: f32,
}

/// The fast forecast integrator (see [`predict`]): the pond, the release under a policy,
/// and the running secant slopes of storage (`dV/dh`, the area) and release (`dQ/dh`).
struct Integrator<'a, R> {
    pond: &'a StageStorage,
    release: &'a R,
    floor: Point,
    slope_v_m2: f32,
    slope_q_m2s: f32,
}

impl<R: StageDischarge> Integrator<'_, R> {
    fn at(&self, h: f32) -> Point {
        let q = self.release.discharge_m3s(h);
        Point {
            h,
            v: self.pond.storage_m3(h),
            q: if q > 0.0 { q } else { 0.0 },
        }
    }

    /// The root of `r(h) = V(h) + w·Q(h) − rhs` (strictly increasing in `h`), started at
    /// `p0` with Newton steps on the carried secant slopes, safeguarded by a bracket
    /// (regula falsi, then bisection, when a step leaves it). `None` when the root is at or
    /// below the floor (`r(floor) ≥ 0`).
    fn solve(&mut self, w: f32, rhs: f32, p0: Point) -> Option<Point> {
        let r_of = |p: &Point| p.v + w * p.q - rhs;
        let r0 = r_of(&p0);
        if r0 == 0.0 {
            return Some(p0);
        }
        let tol_v = 2.0e-6 * (crate::math::abs(rhs) + 1.0);
        // Bracket: lo has r < 0, hi (if known) r ≥ 0.
        let (mut lo, mut r_lo, mut hi): (Point, f32, Option<(Point, f32)>) = if r0 < 0.0 {
            (p0, r0, None)
        } else {
            let rf = r_of(&self.floor);
            if rf >= 0.0 {
                return None;
            }
            (self.floor, rf, Some((p0, r0)))
        };
        let (mut cur, mut r_cur) = (p0, r0);
        for _ in 0..MAX_SOLVER_ITERATIONS {
            let d = self.slope_v_m2 + w * self.slope_q_m2s;
            let newton = cur.h - r_cur / d;
            let cand = match hi {
                Some((ph, rh)) => {
                    if newton > lo.h && newton < ph.h {
                        newton
                    } else {
                        let span = rh - r_lo;
                        let rf = lo.h - r_lo * (ph.h - lo.h) / span;
                        if rf > lo.h && rf < ph.h {
                            rf
                        } else {
                            0.5 * (lo.h + ph.h)
                        }
                    }
                }
                None => {
                    if newton > lo.h && newton.is_finite() {
                        newton
                    } else {
                        // V(stage(rhs)) = rhs, so r ≥ 0 there: a sure upper end.
                        let top = self.at(self.pond.stage_m(rhs));
                        let r_top = r_of(&top);
                        if r_top < 0.0 {
                            // Rounding left the top short of the root: that close is the
                            // answer.
                            return Some(top);
                        }
                        hi = Some((top, r_top));
                        0.5 * (lo.h + top.h)
                    }
                }
            };
            let p = self.at(cand);
            let r = r_of(&p);
            let dh = p.h - cur.h;
            if dh != 0.0 {
                let sv = (p.v - cur.v) / dh;
                let sq = (p.q - cur.q) / dh;
                if sv.is_finite() && sv > 0.0 {
                    self.slope_v_m2 = sv;
                }
                if sq.is_finite() && sq >= 0.0 {
                    self.slope_q_m2s = sq;
                }
            }
            if r < 0.0 {
                lo = p;
                r_lo = r;
            } else {
                hi = Some((p, r));
            }
            cur = p;
            r_cur = r;
            let d_new = self.slope_v_m2 + w * self.slope_q_m2s;
            if crate::math::abs(r) <= tol_v || crate::math::abs(r) <= d_new * STAGE_TOLERANCE_M {
                return Some(p);
            }
            // An ulp-wide bracket cannot be split further.
            if let Some((ph, _)) = hi
                && !(0.5 * (lo.h + ph.h) > lo.h && 0.5 * (lo.h + ph.h) < ph.h)
            {
                break;
            }
        }
        // Out of iterations or an ulp-wide bracket: the bracket end nearer the root.
        Some(match hi {
            Some((ph, rh)) if rh < -r_lo => ph,
            Some(_) => lo,
            None => cur,
        })
    }

    /// One step of `dt` seconds at steady inflow `q_in` from `p0`: trapezoid if its secant
    /// stiffness is at most 2 and it does not carry a flowing outlet to zero flow, else
    /// backward Euler (as [`routing::step`]). Returns the end point and the released volume.
    fn step(&mut self, p0: Point, q_in: f32, dt: f32) -> (Point, f32, Scheme, f32) {
        let avail = p0.v + q_in * dt;
        let half = 0.5 * dt;
        let mut stiffness = f32::NAN;
        let trap = self.solve(half, avail - half * p0.q, p0).filter(|p1| {
            let ds = p1.v - p0.v;
            let stiff = if ds != 0.0 {
                dt * (p1.q - p0.q) / ds
            } else {
                0.0
            };
            stiffness = stiff;
            stiff.is_finite() && stiff <= TRAPEZOID_MAX_STIFFNESS && !(p0.q > 0.0 && p1.q <= 0.0)
        });
        // The released volume is the scheme's own (dt·Q1, or dt·(Q0 + Q1)/2), and the end
        // storage is what that leaves: continuity holds exactly, the solver tolerance shows
        // only as a tiny mismatch between the end storage and V(stage).
        let (p1, released, scheme) = match trap {
            Some(p) => (p, half * (p0.q + p.q), Scheme::Trapezoid),
            None => match self.solve(dt, avail, p0) {
                Some(p) => (p, dt * p.q, Scheme::BackwardEuler),
                None => (self.floor, avail, Scheme::Emptied),
            },
        };
        let released = crate::math::clamp(released, 0.0, avail);
        let v = avail - released;
        (
            Point {
                v: if v > 0.0 { v } else { 0.0 },
                ..p1
            },
            released,
            scheme,
            stiffness,
        )
    }
}

/// One forecast step as [`predict_release_traced`] reports it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ForecastStep {
    /// End of the step, s from now.
    pub end_s: u32,
    /// Stage at the end of the step, m.
    pub stage_m: f32,
    /// Storage at the end of the step, m³.
    pub storage_m3: f32,
    /// Release at the end of the step, m³/s.
    pub release_m3s: f32,
    /// Volume released over the step, m³.
    pub released_m3: f32,
    /// The scheme the step used (trapezoid, backward Euler, or emptied to the floor).
    pub scheme: Scheme,
    /// The trapezoid's secant stiffness `dt·ΔQ/ΔS` that decided the scheme (kept at ≤ 2),
    /// NaN when the trapezoid had no root above the floor.
    pub trapezoid_stiffness: f32,
}

/// Routes `outlook` through `pond` from `storage_m3` (NaN or negative reads as empty) with the
/// gate run by `policy`, and judges the result against `limits` (see [`predict_release`]).
pub fn predict(
    pond: &StageStorage,
    outlet: &Outlet,
    storage_m3: f32,
    outlook: &Outlook,
    policy: Policy,
    limits: &Limits,
) -> Prediction {
    predict_release(pond, &policy.on(outlet), storage_m3, outlook, limits)
}

/// Routes `outlook` through `pond` from `storage_m3` (NaN or negative reads as empty) with
/// any stage–discharge `release`, and judges the result against `limits`.
///
/// ## Integrator
///
/// The same schemes as [`routing::step`] (trapezoid, falling back to backward Euler where
/// the trapezoid would ring or cross the invert; inflow constant at the step mean), but each
/// implicit equation `V(h) + w·Q(h) = rhs` is solved **in stage** by Newton steps on the
/// secant slopes `dV/dh` and `dQ/dh` carried from the previous evaluations (so the first
/// step of each forecast step is usually already close), safeguarded by a bracket
/// (regula falsi, then bisection, when a Newton step leaves it), at most
/// [`MAX_SOLVER_ITERATIONS`] evaluations, stopping once the next Newton correction is below
/// [`STAGE_TOLERANCE_M`] (or `|r| ≤ 2·10⁻⁶·(rhs + 1 m³)`); usually one or two evaluations of
/// the outlet per forecast step. No stage
/// inverse is needed except when the bracket has no upper end yet and Newton fails.
/// The released volume is the scheme's own and the end storage is what it leaves, so the
/// volume balance is exact and storage is never negative.
pub fn predict_release(
    pond: &StageStorage,
    release: &impl StageDischarge,
    storage_m3: f32,
    outlook: &Outlook,
    limits: &Limits,
) -> Prediction {
    predict_release_traced(pond, release, storage_m3, outlook, limits, |_| {})
}

/// [`predict_release`], handing each step to `on_step` as it is taken (for plots of the
/// forecast path, and for checks that need to know which scheme each step used).
pub fn predict_release_traced(
    pond: &StageStorage,
    release: &impl StageDischarge,
    storage_m3: f32,
    outlook: &Outlook,
    limits: &Limits,
    mut on_step: impl FnMut(&ForecastStep),
) -> Prediction {
    let s0 = sane(storage_m3);
    let h0 = pond.stage_m(s0);
    let q0 = release.discharge_m3s(h0);
    let q0 = if q0 > 0.0 { q0 } else { 0.0 };
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
    let floor_m = pond.floor_m();
    let q_floor = release.discharge_m3s(floor_m);
    let area0 = pond.area_m2(h0);
    let probe_m = 1.0e-3;
    let slope_q = (release.discharge_m3s(h0 + probe_m) - q0) / probe_m;
    let mut integ = Integrator {
        pond,
        release,
        floor: Point {
            h: floor_m,
            v: 0.0,
            q: if q_floor > 0.0 { q_floor } else { 0.0 },
        },
        slope_v_m2: if area0 > 0.0 {
            area0
        } else {
            pond.top_area_m2()
        },
        slope_q_m2s: if slope_q.is_finite() && slope_q > 0.0 {
            slope_q
        } else {
            0.0
        },
    };
    let mut cur = Point {
        h: h0,
        v: s0,
        q: q0,
    };
    let dt = secs(dt_s);
    let mut t = 0_u32;
    for &q_in in outlook.inflow_m3s.iter() {
        let (r, released, scheme, trapezoid_stiffness) = integ.step(cur, q_in, dt);
        cur = r;
        t = t.saturating_add(dt_s);
        on_step(&ForecastStep {
            end_s: t,
            stage_m: r.h,
            storage_m3: r.v,
            release_m3s: r.q,
            released_m3: released,
            scheme,
            trapezoid_stiffness,
        });
        p.released_m3 += released;
        if r.h > p.peak_stage_m {
            p.peak_stage_m = r.h;
            p.peak_storage_m3 = r.v;
            p.peak_at_s = t;
        }
        if r.q > p.peak_release_m3s {
            p.peak_release_m3s = r.q;
        }
        if p.first_over_permit_s.is_none() && r.q > limits.permit_m3s {
            p.first_over_permit_s = Some(t);
        }
        if p.first_over_limit_s.is_none() && r.h > limits.stage_limit_m {
            p.first_over_limit_s = Some(t);
        }
        if r.h >= limits.crest_m {
            p.reaches_crest = true;
        }
    }
    p.end_storage_m3 = cur.v;
    p.end_stage_m = cur.h;
    p
}

/// Whether the decision to open above the permit can still wait: routes the first
/// `wait_steps` forecast steps of `outlook` with the release capped at `limits.permit_m3s`
/// ([`Policy::CapRelease`]) and the rest with the gate full open, from `storage_m3`.
///
/// If this prediction holds the stage limit, the controller may keep to the permit for
/// `wait_steps` more steps and still hold the limit afterwards, so nothing is lost by waiting
/// for a fresher forecast (the "last responsible moment" rule: an exceedance is never started
/// on a forecast that a later, better one may withdraw, as long as waiting costs no safety).
/// When `wait_steps` covers the whole outlook this is [`predict`] at the permit.
///
/// The result is one prediction over the whole horizon: peak, first crossings and volumes
/// of both parts, times from now.
pub fn predict_deferred(
    pond: &StageStorage,
    outlet: &Outlet,
    storage_m3: f32,
    outlook: &Outlook,
    wait_steps: usize,
    limits: &Limits,
) -> Prediction {
    let at_permit = Policy::CapRelease {
        cap_m3s: limits.permit_m3s,
    };
    let open = Policy::Fixed {
        opening_m: outlet.max_opening_m(),
    };
    let k = wait_steps.min(outlook.steps());
    let (first, rest) = match outlook.inflow_m3s.split_at_checked(k) {
        Some((_, [])) | None => {
            return predict(pond, outlet, storage_m3, outlook, at_permit, limits);
        }
        Some(([], _)) => return predict(pond, outlet, storage_m3, outlook, open, limits),
        Some(parts) => parts,
    };
    let part = |inflow: &[f32]| Outlook {
        step_s: outlook.step_s,
        inflow_m3s: inflow.iter().copied().collect(),
        future_rain_mm: 0.0,
    };
    let a = predict(pond, outlet, storage_m3, &part(first), at_permit, limits);
    let b = predict(pond, outlet, a.end_storage_m3, &part(rest), open, limits);
    let offset = outlook
        .step_s
        .saturating_mul(u32::try_from(k).unwrap_or(u32::MAX));
    let later = |t: Option<u32>| t.map(|t| t.saturating_add(offset));
    let (peak_stage_m, peak_storage_m3, peak_at_s) = if b.peak_stage_m > a.peak_stage_m {
        (
            b.peak_stage_m,
            b.peak_storage_m3,
            b.peak_at_s.saturating_add(offset),
        )
    } else {
        (a.peak_stage_m, a.peak_storage_m3, a.peak_at_s)
    };
    Prediction {
        peak_stage_m,
        peak_storage_m3,
        peak_at_s,
        peak_release_m3s: a.peak_release_m3s.max(b.peak_release_m3s),
        end_storage_m3: b.end_storage_m3,
        end_stage_m: b.end_stage_m,
        first_over_permit_s: a.first_over_permit_s.or(later(b.first_over_permit_s)),
        first_over_limit_s: a.first_over_limit_s.or(later(b.first_over_limit_s)),
        reaches_crest: a.reaches_crest || b.reaches_crest,
        released_m3: a.released_m3 + b.released_m3,
        inflow_m3: a.inflow_m3 + b.inflow_m3,
    }
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
    hold_search(outlet.max_opening_m(), limits, |policy| {
        predict(pond, outlet, storage_m3, outlook, policy, limits)
    })
}

/// The bisection of [`release_to_hold`] with any predictor of a policy (the exact one or a
/// [`Forecaster`]'s); `max_opening_m` is the full-open gate.
fn hold_search(
    max_opening_m: f32,
    limits: &Limits,
    predict_with: impl Fn(Policy) -> Prediction,
) -> Hold {
    let permit = cap_of(limits.permit_m3s);
    let at_permit = predict_with(Policy::CapRelease { cap_m3s: permit });
    if at_permit.holds(limits) {
        return Hold {
            cap_m3s: permit,
            prediction: at_permit,
            feasible: true,
        };
    }
    let open = predict_with(Policy::Fixed {
        opening_m: max_opening_m,
    });
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
        let p = predict_with(Policy::CapRelease { cap_m3s: mid });
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

    fn sherman(c: f32) -> crate::rain::IdfCurves {
        crate::rain::IdfCurves::new(
            &[
                (
                    2.0,
                    crate::rain::IdfFormula::Sherman {
                        a: 850.0,
                        b: 10.0,
                        c,
                    },
                ),
                (
                    10.0,
                    crate::rain::IdfFormula::Sherman {
                        a: 1350.0,
                        b: 10.0,
                        c,
                    },
                ),
            ],
            5.0,
            1440.0,
        )
        .unwrap()
    }

    /// `FutureRain::depth_mm` is the outlook's own future depth, bit for bit, for every
    /// assumption (the bound the controller skips routing on is built from it), and
    /// `depth_at_most_mm` never undercuts it (Sherman c = 0.8, whose depth rises with
    /// duration; the telescoped bound is checked against the step-by-step sum).
    #[test]
    fn future_depth_matches_the_outlook_and_its_bound_covers_it() {
        use crate::runoff::{TimeAreaInflow, TimeAreaResponse};
        let idf = sherman(0.8);
        let resp = TimeAreaResponse::from_fractions(
            60,
            crate::runoff::RunoffCoefficient::new(0.8).unwrap(),
            crate::runoff::AreaHa::new(2.5).unwrap(),
            &[0.2, 0.5, 0.3],
        )
        .unwrap();
        let mut ta = TimeAreaInflow::new(resp);
        ta.push_step(1.5);
        let assumptions = [
            FutureRain::Dry,
            FutureRain::Persist {
                intensity_mm_h: 0.0,
                for_s: 1800,
            },
            FutureRain::Persist {
                intensity_mm_h: 37.0,
                for_s: 1800,
            },
            FutureRain::DesignStorm {
                return_period_yr: 10.0,
                elapsed_s: 600,
                depth_so_far_mm: 4.0,
            },
            FutureRain::FollowIdf {
                elapsed_s: 900,
                depth_so_far_mm: 6.0,
                for_s: 1800,
            },
            FutureRain::FollowIdf {
                elapsed_s: 40_000,
                depth_so_far_mm: 60.0,
                for_s: 1800,
            },
        ];
        for f in assumptions {
            let look = Outlook::from_time_area(&ta, &f, Some(&idf), 180, 10_800).unwrap();
            let d = f.depth_mm(Some(&idf), 60, 180).unwrap();
            assert_eq!(d.to_bits(), look.future_rain_mm().to_bits(), "{f:?}");
            let up = f.depth_at_most_mm(Some(&idf), 60, 180).unwrap();
            assert!(up >= d, "{f:?}: bound {up} under {d}");
            assert!(up <= d * 1.01 + 1e-3, "{f:?}: bound {up} too loose for {d}");
        }
        // Sherman c > 1: the depth falls at long durations, so no telescoped bound is taken.
        assert!(!sherman(1.2).first_depth_non_decreasing());
        assert!(sherman(0.8).first_depth_non_decreasing());
    }

    /// No runoff on its way and no rain assumed: the outlook is all +0 over the horizon.
    #[test]
    fn dry_outlook_is_all_zero_over_the_horizon() {
        use crate::runoff::{TimeAreaInflow, TimeAreaResponse};
        let resp = TimeAreaResponse::from_fractions(
            60,
            crate::runoff::RunoffCoefficient::new(0.8).unwrap(),
            crate::runoff::AreaHa::new(1.0).unwrap(),
            &[0.5, 0.5],
        )
        .unwrap();
        let ta = TimeAreaInflow::new(resp);
        let f = FutureRain::Persist {
            intensity_mm_h: 0.0,
            for_s: 1800,
        };
        let look = Outlook::from_time_area(&ta, &f, None, 180, 10_800).unwrap();
        assert_eq!(look.steps(), 60);
        assert!(look.inflow_m3s().iter().all(|q| q.to_bits() == 0));
        assert_eq!(look.future_rain_mm().to_bits(), 0);
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

    /// The deferred prediction is the permit run when the wait covers the horizon, the
    /// full-open run when it is zero, conserves volume (start + inflow − released = end, the
    /// continuity of the level-pool equation) and peaks no lower the longer the wait (the
    /// permit release is at most the full-open release at every stage, so by comparison of
    /// the two storage equations the later switch leaves at least as much water).
    #[test]
    fn deferred_prediction_bounds_and_continuity() {
        let q: [f32; 40] = core::array::from_fn(|k| if k < 12 { 1.2 } else { 0.05 });
        let look = Outlook::from_samples(180, &q).unwrap();
        let lim = Limits::new(0.1, 2.0, 3.0).unwrap();
        let (pond, o) = (box_pond(), outlet());
        let at_permit = predict(
            &pond,
            &o,
            50.0,
            &look,
            Policy::CapRelease { cap_m3s: 0.1 },
            &lim,
        );
        let open = predict(
            &pond,
            &o,
            50.0,
            &look,
            Policy::Fixed { opening_m: 0.5 },
            &lim,
        );
        assert_eq!(
            predict_deferred(&pond, &o, 50.0, &look, 40, &lim),
            at_permit
        );
        assert_eq!(
            predict_deferred(&pond, &o, 50.0, &look, 99, &lim),
            at_permit
        );
        assert_eq!(predict_deferred(&pond, &o, 50.0, &look, 0, &lim), open);
        let mut last_peak = open.peak_stage_m;
        for k in 1..40 {
            let p = predict_deferred(&pond, &o, 50.0, &look, k, &lim);
            let balance = 50.0 + p.inflow_m3 - p.released_m3 - p.end_storage_m3;
            assert!(balance.abs() < 0.05, "k {k}: balance {balance} m3");
            assert!((p.inflow_m3 - look.volume_m3()).abs() < 0.05, "k {k}");
            assert!(p.peak_stage_m >= last_peak - 1e-4, "k {k}: {p:?}");
            assert!(p.peak_stage_m <= at_permit.peak_stage_m + 1e-4, "k {k}");
            last_peak = p.peak_stage_m;
        }
        // Waiting one step still holds this storm; waiting the whole storm does not.
        assert!(!at_permit.holds(&lim));
        assert!(predict_deferred(&pond, &o, 50.0, &look, 1, &lim).holds(&lim));
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
