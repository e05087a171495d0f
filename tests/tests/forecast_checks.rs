//! The storage forecast against references it did not write: the accurate routing step
//! (`routing::step`, itself checked against closed forms in `routing_analytic.rs`),
//! Torricelli's closed-form drain, the continuity of the time–area convolution, and the IDF
//! formula evaluated in f64.

use holdback_core::G_M_S2;
use holdback_core::flow::StageDischarge;
use holdback_core::forecast::{
    FutureRain, Limits, Outlook, Policy, predict, predict_release, step_capped,
};
use holdback_core::hydraulics::{CircularOrifice, Outlet, SluiceGate};
use holdback_core::rain::{IdfCurves, IdfFormula};
use holdback_core::routing::{Inflow, step};
use holdback_core::runoff::{
    AreaHa, Catchment, RunoffCoefficient, SubCatchment, TimeAreaInflow, TimeAreaResponse,
    TimeOfConcentration,
};
use holdback_core::storage::{BasinGeometry, StageStorage, VolumeMethod};

/// Invented basin: 40 m × 25 m floor at 100 m, 3:1 sides, 3 m deep (geometry for checks only).
fn basin() -> StageStorage {
    StageStorage::from_basin(BasinGeometry {
        floor_m: 100.0,
        length_m: 40.0,
        width_m: 25.0,
        side_slope_h_per_v: 3.0,
        depth_m: 3.0,
    })
    .unwrap()
}

/// Invented outlet: a 150 mm orifice at the floor and a 0.6 m wide gate travelling 0.5 m.
fn outlet() -> Outlet {
    let o = CircularOrifice::new(100.0, 0.15, 0.6).unwrap();
    let g = SluiceGate::new(100.0, 0.6, 0.5, 0.61, 0.98).unwrap();
    Outlet::new(&[o.into()], Some(g), None).unwrap()
}

fn limits() -> Limits {
    Limits::new(0.08, 102.5, 103.0).unwrap()
}

/// A triangular inflow peaking at 0.9 m³/s after 45 min, 60 steps of 180 s (step means).
fn storm() -> [f32; 60] {
    let mut q = [0.0; 60];
    for (k, x) in q.iter_mut().enumerate() {
        let t = k as f32 + 0.5;
        *x = if t < 15.0 {
            0.9 * t / 15.0
        } else {
            (0.9 * (1.0 - (t - 15.0) / 30.0)).max(0.0)
        };
    }
    q
}

/// Route step means with the accurate step and return (peak stage, end storage, released).
fn reference(release: &impl StageDischarge, s0: f32, q: &[f32], dt: u32) -> (f32, f32, f32) {
    let pond = basin();
    let (mut s, mut peak, mut rel) = (s0, pond.stage_m(s0), 0.0);
    for &x in q {
        let r = step(&pond, release, s, Inflow::steady(x), dt);
        s = r.storage_m3;
        rel += r.released_m3;
        peak = peak.max(r.stage_m);
    }
    (peak, s, rel)
}

/// With a known inflow, the forecast equals routing the same inflow with `routing::step`
/// (the accurate reference, bisection to f32 resolution) for fixed openings and for the
/// release cap: peak stage within 1 mm, end storage and released volume within 0.05 % + 0.5 m³
/// (the fast integrator stops at |residual| ≤ 2e-6·rhs, so this is solver tolerance only).
#[test]
fn forecast_with_known_inflow_equals_accurate_routing() {
    let pond = basin();
    let o = outlet();
    let q = storm();
    let look = Outlook::from_samples(180, &q).unwrap();
    let policies = [
        Policy::Fixed { opening_m: 0.0 },
        Policy::Fixed { opening_m: 0.05 },
        Policy::Fixed { opening_m: 0.2 },
        Policy::Fixed { opening_m: 0.5 },
        Policy::CapRelease { cap_m3s: 0.08 },
        Policy::CapRelease { cap_m3s: 0.4 },
    ];
    for s0 in [0.0, 150.0, 1500.0] {
        for pol in policies {
            let p = predict(&pond, &o, s0, &look, pol, &limits());
            let (peak, end, rel) = reference(&pol.on(&o), s0, &q, 180);
            let tol = |x: f32| 5e-4 * x.abs() + 0.5;
            assert!(
                (p.peak_stage_m - peak).abs() < 1e-3,
                "{pol:?} {s0}: {p:?} vs {peak}"
            );
            assert!(
                (p.end_storage_m3 - end).abs() < tol(end),
                "{pol:?} {s0}: {p:?} vs {end}"
            );
            assert!(
                (p.released_m3 - rel).abs() < tol(rel),
                "{pol:?} {s0}: {p:?} vs {rel}"
            );
            // Continuity of the forecast itself (exact by construction up to f32 sums).
            let bal = s0 + p.inflow_m3 - p.released_m3 - p.end_storage_m3;
            assert!(
                bal.abs() < 1e-4 * (s0 + p.inflow_m3) + 1e-2,
                "balance {bal}"
            );
        }
    }
}

const CD: f64 = 0.6;
const A_ORIFICE: f64 = 0.05;

/// Torricelli drain of a prismatic 1000 m² pond through a floor orifice:
/// h(t) = (√h0 − t/(2K))², K = A/(Cd·a·√(2g)) (Torricelli's law; textbook tank drain).
fn torricelli_stage(t: f64, h0: f64) -> f64 {
    let k = 1000.0 / (CD * A_ORIFICE * (2.0 * G_M_S2 as f64).sqrt());
    let r = h0.sqrt() - t / (2.0 * k);
    if r > 0.0 { r * r } else { 0.0 }
}

/// With `FutureRain::Dry` and no pending runoff the outlook is all zeros and the pond only
/// drains, following Torricelli's closed form: end stage within 0.5 mm at every horizon of
/// 180 s steps up to 3.2 h (the same tolerance `routing_analytic.rs` uses at 300 s).
#[test]
fn dry_outlook_only_drains_like_torricelli() {
    let pond =
        StageStorage::from_areas(&[(0.0, 1000.0), (3.0, 1000.0)], VolumeMethod::Frustum).unwrap();
    let sub = SubCatchment::new(
        RunoffCoefficient::new(0.5).unwrap(),
        AreaHa::new(4.0).unwrap(),
        TimeOfConcentration::from_s(1200).unwrap(),
        0,
    )
    .unwrap();
    let resp = TimeAreaResponse::from_catchment(&Catchment::new(&[sub]).unwrap(), 60).unwrap();
    let runoff = TimeAreaInflow::new(resp);
    let lim = Limits::new(0.1, 2.5, 3.0).unwrap();
    let orifice = |h: f32| {
        if h > 0.0 {
            (CD * A_ORIFICE) as f32 * holdback_core::math::sqrt(2.0 * G_M_S2 * h)
        } else {
            0.0
        }
    };
    let h0 = 2.0_f32;
    for horizon in [180, 1800, 5400, 11_520] {
        let look = Outlook::from_time_area(&runoff, &FutureRain::Dry, None, 180, horizon).unwrap();
        assert!(look.inflow_m3s().iter().all(|&q| q == 0.0));
        let p = predict_release(&pond, &orifice, pond.storage_m3(h0), &look, &lim);
        let want = torricelli_stage(horizon as f64, h0 as f64);
        assert!(
            (p.end_stage_m as f64 - want).abs() < 5e-4,
            "{horizon}: {p:?} vs {want}"
        );
        assert_eq!(p.peak_stage_m, pond.stage_m(pond.storage_m3(h0)));
        assert_eq!(p.peak_at_s, 0);
    }
}

/// Invented catchment (C = 0.6, 5 ha, Tc 20 min, lag 2 min) at a 60 s runoff step.
fn catchment_response() -> TimeAreaResponse {
    let sub = SubCatchment::new(
        RunoffCoefficient::new(0.6).unwrap(),
        AreaHa::new(5.0).unwrap(),
        TimeOfConcentration::from_s(1200).unwrap(),
        120,
    )
    .unwrap();
    TimeAreaResponse::from_catchment(&Catchment::new(&[sub]).unwrap(), 60).unwrap()
}

/// Persisting rain: the outlook volume over a horizon long enough to drain is the runoff
/// already on its way plus the assumed rain × effective area (continuity of the time–area
/// convolution: Σ Q·dt = 0.001·Σ P·Σ A), within 0.01 %.
#[test]
fn persist_outlook_volume_is_assumed_rain_times_effective_area() {
    let resp = catchment_response();
    let ca = resp.effective_area_m2();
    let mut runoff = TimeAreaInflow::new(resp);
    for r in [0.5, 1.2, 0.8, 0.3] {
        runoff.push_step(r);
    }
    let pending = runoff.pending_volume_m3();
    for (i, for_s) in [(30.0, 1800), (12.0, 3599), (0.0, 600), (50.0, 0)] {
        let fut = FutureRain::Persist {
            intensity_mm_h: i,
            for_s,
        };
        let look = Outlook::from_time_area(&runoff, &fut, None, 180, 3 * 3600).unwrap();
        let rain_mm = i * for_s as f32 / 3600.0;
        assert!((look.future_rain_mm() - rain_mm).abs() < 1e-4 * rain_mm + 1e-6);
        let want = pending + 0.001 * rain_mm * ca;
        let got = look.volume_m3();
        assert!(
            (got - want).abs() < 1e-4 * want,
            "{i} {for_s}: {got} vs {want}"
        );
    }
}

/// Design-storm continuation: with a catchment that delivers within the step (one ordinate),
/// the outlook volume is C·A × (depth(elapsed + horizon) − depth so far), with depth from
/// Talbot's formula `i = a/(t + b)` evaluated in f64 here (Talbot; depth = i·t/60), within
/// 0.05 %; a storm already deeper than the IDF depth brings nothing until the IDF catches up.
#[test]
fn design_storm_outlook_volume_follows_the_idf_depth() {
    let (a, b) = (2400.0_f64, 18.0_f64);
    let idf = IdfCurves::new(
        &[
            (2.0, IdfFormula::Talbot { a: 1600.0, b: 18.0 }),
            (
                10.0,
                IdfFormula::Talbot {
                    a: a as f32,
                    b: b as f32,
                },
            ),
        ],
        5.0,
        1440.0,
    )
    .unwrap();
    let c = RunoffCoefficient::new(0.5).unwrap();
    let area = AreaHa::new(3.0).unwrap();
    let resp = TimeAreaResponse::from_fractions(60, c, area, &[1.0]).unwrap();
    let ca = resp.effective_area_m2() as f64;
    let runoff = TimeAreaInflow::new(resp);
    let depth = |t_min: f64| a / (t_min + b) * t_min / 60.0;
    for (elapsed_s, so_far) in [(0_u32, 0.0_f32), (1200, 10.0), (1200, 60.0), (3600, 20.0)] {
        let fut = FutureRain::DesignStorm {
            return_period_yr: 10.0,
            elapsed_s,
            depth_so_far_mm: so_far,
        };
        let horizon = 3 * 3600;
        let look = Outlook::from_time_area(&runoff, &fut, Some(&idf), 180, horizon).unwrap();
        let end_min = (elapsed_s + horizon) as f64 / 60.0;
        let rain = (depth(end_min) - so_far as f64).max(0.0);
        let want = 0.001 * rain * ca;
        let got = look.volume_m3() as f64;
        assert!(
            (got - want).abs() < 5e-4 * want + 1e-3,
            "{elapsed_s}: {got} vs {want}"
        );
        assert!((look.future_rain_mm() as f64 - rain).abs() < 5e-4 * rain + 1e-4);
    }
}

/// The capped policy's release at a stage equals the outlet's discharge at the opening the
/// hydraulic inverse (`Outlet::opening_for`, bisection) gives for the cap, within 0.1 %:
/// the policy is "the gate opening chosen so the total release is the cap".
#[test]
fn cap_policy_release_is_the_outlet_at_the_inverse_opening() {
    let o = outlet();
    for h in [100.2_f32, 100.6, 101.0, 102.0, 102.9] {
        let fixed = o.fixed_discharge_m3s(h);
        let full = o.discharge_m3s(h, o.max_opening_m());
        for cap in [0.0, 0.02, 0.05, 0.1, 0.3, 0.6, 1.0, 3.0] {
            let pol = Policy::CapRelease { cap_m3s: cap };
            let q = pol.on(&o).discharge_m3s(h);
            let a = pol.opening_m(&o, h);
            let q_at = o.discharge_m3s(h, a);
            assert!(
                (q - q_at).abs() <= 1e-3 * q.max(1e-3),
                "h {h} cap {cap}: {q} vs {q_at}"
            );
            assert!(q >= fixed && q <= full.max(fixed) + 1e-6);
        }
    }
}

/// Routing a whole storm with `step_capped` at the permit (the perfect-foresight schedule)
/// never releases more than max(permit, fixed-structure flow) at the end of any step, and
/// conserves volume (continuity).
#[test]
fn step_capped_storm_keeps_the_permit_where_the_gate_can() {
    let pond = basin();
    let o = outlet();
    let permit = 0.08;
    let mut s = 0.0;
    let mut balance = 0.0_f64;
    for &q in storm().iter() {
        let r = step_capped(&pond, &o, s, Inflow::steady(q), permit, 180);
        let fixed = o.fixed_discharge_m3s(r.stage_m);
        assert!(r.outflow_m3s <= permit.max(fixed) + 1e-6, "{r:?}");
        assert!(r.released_m3 / 180.0 <= permit.max(fixed) + 1e-3, "{r:?}");
        balance += (s + q * 180.0 - r.released_m3 - r.storage_m3) as f64;
        s = r.storage_m3;
    }
    assert!(balance.abs() < 0.1);
}
