//! Closed-loop checks of the controller on the invented demo ponds (tests/src/ponds.rs) with
//! the core plant (`holdback_core::plant::Plant`) driven by tests/src/closed_loop.rs.
//! Sources of the bounds:
//! - the perfect-foresight permit schedule of DESIGN.md ("How good the control is"): release
//!   = min(permit, full-open capacity) from the first drop gives the lowest peak storage of any
//!   permit-respecting policy; computed with `forecast::step_capped` over the whole storm;
//! - continuity (the plant conserves volume: `routing::step` inside `Plant::step`).
//!
//! Storms are built from each pond's IDF as uniform blocks, symmetric triangles and Chicago
//! (Keifer–Chu) storms.

use holdback_core::config::PondConfig;
use holdback_core::control::Mode;
use holdback_core::rain::{DesignStorm, Pattern};
use holdback_tests::closed_loop::{
    self, ControllerDriver, Injection, PlantOptions, Summary, block_storm, min_cap_to_hold,
    perfect_foresight, triangle_storm,
};
use holdback_tests::ponds;

/// The storms: (label, hyetograph in mm per runoff step).
pub fn storms(cfg: &PondConfig) -> Vec<(String, Vec<f32>)> {
    let idf = cfg.idf();
    let dt = cfg.catchment().dt_s();
    let mut v = Vec::new();
    for (t, d) in [
        (2.0, 30),
        (2.0, 120),
        (10.0, 60),
        (10.0, 180),
        (100.0, 60),
        (100.0, 360),
    ] {
        v.push((format!("block T={t} d={d}min"), block_storm(idf, t, d, dt)));
        v.push((format!("tri T={t} d={d}min"), triangle_storm(idf, t, d, dt)));
    }
    // Chicago storms (Keifer–Chu): a sharp peak then a long recession, where a persisted
    // intensity overestimates what is still to come.
    for (t, d) in [(2.0, 120), (10.0, 60), (10.0, 180), (100.0, 60)] {
        v.push((format!("chicago T={t} d={d}min"), chicago_storm(cfg, t, d)));
    }
    // Beyond the design storms: twice the 100-year hour, to exercise surcharge.
    v.push((
        "2x block T=100 d=60min".into(),
        closed_loop::scaled(&block_storm(idf, 100.0, 60, dt), 2.0),
    ));
    v
}

/// A Chicago storm (peak ratio 0.4) from the pond's IDF on its runoff step, mm per step.
fn chicago_storm(cfg: &PondConfig, return_period_yr: f32, duration_min: u32) -> Vec<f32> {
    let dt = cfg.catchment().dt_s();
    let storm = DesignStorm::new(return_period_yr, duration_min * 60, dt)
        .and_then(|s| s.with_peak_ratio(0.4))
        .expect("design storm");
    let mut buf = vec![0.0f32; storm.steps()];
    let n = storm
        .fill(cfg.idf(), Pattern::Chicago, &mut buf)
        .expect("fill");
    buf.truncate(n);
    buf
}

fn run_controller<'a>(
    cfg: &'a PondConfig,
    rain: &[f32],
    opt: PlantOptions,
) -> (Summary, ControllerDriver<'a>) {
    let mut d = ControllerDriver::new(cfg);
    let (s, _) = closed_loop::run(cfg, rain, &mut d, opt, (Injection::None, 0));
    (s, d)
}

/// Release ≤ permit whenever the perfect-foresight schedule at the permit *target* keeps the
/// pond under crest − freeboard (the pond had room); no overtopping where some constant cap
/// holds the limit with perfect foresight; drawdown within the target; peak storage reported
/// as a ratio to the perfect-foresight bound at the permit.
#[test]
fn closed_loop_on_design_storms() {
    for (name, cfg) in ponds::all() {
        let limit = cfg.stage_limit_m();
        let target = cfg.target_release_m3s();
        let permit = cfg.permit().release_m3s;
        let normal_v = cfg.storage().storage_m3(cfg.levels().normal_m);
        println!("pond {name}: limit {limit} m, permit {permit} m3/s");
        println!(
            "{:<26} {:>8} {:>8} {:>9} {:>8} {:>9} {:>7} {:>8}",
            "storm", "peak_h", "pf_h", "ratio", "q_max", "exceed_s", "dd_h", "modes"
        );
        for (label, rain) in storms(&cfg) {
            let (pf_h_target, _) = perfect_foresight(&cfg, &rain, target);
            let (pf_h, pf_s) = perfect_foresight(&cfg, &rain, permit);
            let (s, d) = run_controller(&cfg, &rain, PlantOptions::default());
            let ratio = (s.peak_storage_m3 - normal_v) / (pf_s - normal_v).max(1e-3);
            println!(
                "{label:<26} {:>8.3} {:>8.3} {:>9.3} {:>8.3} {:>9} {:>7.1} {:?}",
                s.peak_stage_m,
                pf_h,
                ratio,
                s.peak_release_m3s,
                s.exceed_s,
                s.drawdown_s.map_or(f32::NAN, |t| t as f32 / 3600.0),
                d.modes()
            );
            if pf_h_target <= limit {
                // The pond had room: the permit holds (perfect-foresight bound, DESIGN.md).
                assert_eq!(
                    s.exceed_s, 0,
                    "{name} {label}: release over permit with room"
                );
                assert!(s.peak_stage_m <= limit + 0.02, "{name} {label}: {s:?}");
                // No permit-respecting policy beats the bound (ratio ≥ 1 up to f32 rounding).
                assert!(ratio >= 0.999, "{name} {label}: ratio {ratio}");
            }
            if min_cap_to_hold(&cfg, &rain).is_some() {
                assert!(!s.overtopped, "{name} {label}: overtopped though avoidable");
            }
            let dd = s.drawdown_s.expect("drained within the run");
            assert!(
                dd <= cfg.control().drawdown_target_s,
                "{name} {label}: drawdown {dd} s"
            );
            assert!(d.outputs.iter().all(|o| o.opening_cmd_m.is_finite()));
            assert!(d.outputs.iter().any(|o| o.mode == Mode::Capture));
        }
    }
}
