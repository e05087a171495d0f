//! The forecast kernels of `bench KERNEL N`: `N` full storage forecasts (outlook from the
//! time–area state and persisting rain, 3 h horizon at 180 s, then 1 or 20 candidate gate
//! openings). The scene is the invented one of `tests/benches/forecast.rs`, so the guest
//! count here and the host callgrind count there measure the same work.
//!
//! - `forecast1`, `forecast20`: the fast path, a [`Forecaster`] built for each forecast
//!   ([`Forecaster::reaching`], its fixed-structure table included in the count);
//! - `forecast20kept`: the fast path with one [`Forecaster`] built before the loop and kept
//!   (the table built once per configuration, as a controller may keep it);
//! - `exact1`, `exact20`: the exact [`predict`] for every candidate (the path before the table).

use core::hint::black_box;

use holdback_core::forecast::{Forecaster, FutureRain, Limits, Outlook, Policy, predict};
use holdback_core::hydraulics::{CircularOrifice, Outlet, Riser, SluiceGate, Spillway};
use holdback_core::runoff::{
    AreaHa, Catchment, RunoffCoefficient, SubCatchment, TimeAreaInflow, TimeAreaResponse,
    TimeOfConcentration,
};
use holdback_core::storage::{BasinGeometry, StageStorage};

/// The invented scene; `None` only if a constructor rejected it (it does not).
fn scene() -> Option<(StageStorage, Outlet, TimeAreaInflow, Limits)> {
    let pond = StageStorage::from_basin(BasinGeometry {
        floor_m: 100.0,
        length_m: 60.0,
        width_m: 30.0,
        side_slope_h_per_v: 3.0,
        depth_m: 3.0,
    })
    .ok()?;
    let orifice = CircularOrifice::new(100.0, 0.15, 0.6).ok()?;
    let riser = Riser::circular(101.8, 1.2, 0.6, 0.6).ok()?;
    let spillway = Spillway::new(102.6, 8.0, 3.0, 0.9).ok()?;
    let gate = SluiceGate::new(100.0, 0.6, 0.6, 0.61, 0.98).ok()?;
    let outlet = Outlet::new(
        &[orifice.into(), riser.into(), spillway.into()],
        Some(gate),
        Some(100.1),
    )
    .ok()?;
    let sub = SubCatchment::new(
        RunoffCoefficient::new(0.55).ok()?,
        AreaHa::new(12.0).ok()?,
        TimeOfConcentration::from_s(1800).ok()?,
        120,
    )
    .ok()?;
    let resp = TimeAreaResponse::from_catchment(&Catchment::new(&[sub]).ok()?, 60).ok()?;
    let mut runoff = TimeAreaInflow::new(resp);
    let mut r = 0.2_f32;
    for _ in 0..40 {
        runoff.push_step(r);
        r += 0.01;
    }
    Some((pond, outlet, runoff, Limits::new(0.12, 102.4, 102.9).ok()?))
}

/// How the candidates of one forecast are predicted.
#[derive(Clone, Copy, PartialEq, Eq)]
pub enum Path {
    /// The exact [`predict`].
    Exact,
    /// A [`Forecaster`] built for each forecast.
    Fast,
    /// One [`Forecaster`] built before the loop, kept for every forecast.
    Kept,
}

/// `n` forecasts with `candidates` openings each (evenly spaced over the gate's travel).
#[inline(never)]
pub fn run(candidates: u16, n: u32, path: Path) -> Option<()> {
    let (pond, outlet, runoff, limits) = scene()?;
    let future = FutureRain::Persist {
        intensity_mm_h: 25.0,
        for_s: 3600,
    };
    let steps = f32::from(candidates.saturating_sub(1).max(1));
    let kept = Forecaster::new(&pond, &outlet, pond.top_m());
    for _ in 0..n {
        let look =
            Outlook::from_time_area(black_box(&runoff), &future, None, 180, 3 * 3600).ok()?;
        let s0 = black_box(900.0);
        let built;
        let fc = match path {
            Path::Exact => None,
            Path::Fast => {
                built = Forecaster::reaching(&pond, &outlet, s0, &look);
                Some(&built)
            }
            Path::Kept => Some(&kept),
        };
        for k in 0..candidates {
            let a = outlet.max_opening_m() * f32::from(k) / steps;
            let policy = Policy::Fixed { opening_m: a };
            let p = match fc {
                Some(f) => f.predict(s0, &look, policy, &limits),
                None => predict(&pond, &outlet, s0, &look, policy, &limits),
            };
            black_box(p.peak_stage_m);
        }
    }
    Some(())
}
