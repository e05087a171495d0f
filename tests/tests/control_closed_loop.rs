//! Closed-loop checks of the controller on the invented demo ponds (tests/src/ponds.rs) with
//! the plant of tests/src/plant.rs. Sources of the bounds:
//! - the perfect-foresight permit schedule of DESIGN.md ("How good the control is"): release
//!   = min(permit, full-open capacity) from the first drop gives the lowest peak storage of any
//!   permit-respecting policy; computed with `forecast::step_capped` over the whole storm;
//! - continuity (the plant conserves volume: `routing::step`).
//!
//! Storms are built from each pond's IDF as uniform blocks and symmetric triangles.

use holdback_core::config::PondConfig;
use holdback_core::control::Mode;
use holdback_tests::plant::{
    self, ControllerDriver, Injection, PlantOptions, Summary, block_storm, bound, min_cap_to_hold,
    triangle_storm,
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
    // Beyond the design storms: twice the 100-year hour, to exercise surcharge.
    v.push((
        "2x block T=100 d=60min".into(),
        plant::scaled(&block_storm(idf, 100.0, 60, dt), 2.0),
    ));
    v
}

fn run_controller<'a>(
    cfg: &'a PondConfig,
    rain: &[f32],
    opt: PlantOptions,
) -> (Summary, ControllerDriver<'a>) {
    let mut d = ControllerDriver::new(cfg);
    let (s, _) = plant::run(cfg, rain, &mut d, opt, (Injection::None, 0));
    (s, d)
}

/// How far over crest − freeboard the controller may peak where the perfect-foresight bound
/// holds it, m: the stage filter runs
/// 2.5 steps (25 s) behind a rise and the gate moves at 0.01 m/s in the plant, and each
/// forecast persists measured rain; 2 cm is this test's allowance for them (chosen here, no
/// source; the largest overshoot measured on these storms is 0.2 cm).
pub const LIMIT_TOLERANCE_M: f32 = 0.02;

/// Share of the usable volume (normal to crest − freeboard) the bound at the permit must leave
/// unused for "the permit holds with room": the controller must then never exceed the permit
/// (the room absorbs its lag: filter, gate speed, forecast error; chosen here, no source).
pub const ROOM_SHARE: f32 = 0.10;

/// Storms where the controller is known to exceed the permit although the bound at the permit
/// holds (needless exceedances), with why: the persistence forecast cannot tell a block
/// storm's end from a longer storm, and holding the 100-year block (priority 1) needs
/// surcharge above the permit up to `SURCHARGE_LEAD_S` = 1800 s ahead of the crossing, which
/// over-releases on the 10-year hour. Any other needless exceedance fails the test.
pub const KNOWN_NEEDLESS: [(&str, &str); 2] = [
    ("ashby_fen", "block T=10 d=60min"),
    ("ashby_fen", "tri T=10 d=60min"),
];

/// On every storm and demo pond, against the perfect-foresight bounds (DESIGN.md, computed
/// with `forecast::step_capped` over the whole storm):
/// - where the bound at the permit holds crest − freeboard with [`ROOM_SHARE`] of the usable
///   volume to spare, the release never exceeds the permit; where it holds at all, any
///   exceedance is counted and printed as needless, and must be one of [`KNOWN_NEEDLESS`];
/// - where the smallest constant cap that holds crest − freeboard exists (`min_cap_to_hold`),
///   the controller peaks at most [`LIMIT_TOLERANCE_M`] over it and does not overtop;
/// - a run that never exceeds the permit cannot peak below the bound at the permit (ratio
///   ≥ 1 up to f32 rounding);
/// - drawdown ends within the target.
///
/// Printed: peak storage above normal as a ratio to the bound (at the permit where that holds,
/// at the smallest holding cap on surcharge storms) and the volume released above the permit
/// against the bound's at that cap.
#[test]
fn closed_loop_on_design_storms() {
    let mut needless = 0;
    let mut unknown_needless = 0;
    // Every failed check, so the whole table prints before the test fails.
    let mut fails: Vec<String> = Vec::new();
    let mut check = |ok: bool, msg: String| {
        if !ok {
            println!("  FAIL {msg}");
            fails.push(msg);
        }
    };
    for (name, cfg) in ponds::all() {
        let limit = cfg.stage_limit_m();
        let permit = cfg.permit().release_m3s;
        let pond = cfg.storage();
        let v_norm = pond.storage_m3(cfg.levels().normal_m);
        let v_lim = pond.storage_m3(limit);
        println!("pond {name}: limit {limit} m, permit {permit} m3/s");
        println!(
            "{:<24} {:>8} {:>8} {:>7} {:>6} {:>6} {:>8} {:>6} {:>8} {:>8} {:>5}  modes",
            "storm",
            "peak_h",
            "pf_h",
            "cap",
            "ratio",
            "r_cap",
            "q_max",
            "exc_s",
            "exc_m3",
            "pf_m3",
            "dd_h"
        );
        for (label, rain) in storms(&cfg) {
            let at_permit = bound(&cfg, &rain, permit);
            let cap = min_cap_to_hold(&cfg, &rain);
            let at_cap = cap.map(|c| bound(&cfg, &rain, c));
            let (s, d) = run_controller(&cfg, &rain, PlantOptions::default());
            let above = s.peak_storage_m3 - v_norm;
            let ratio = above / (at_permit.peak_storage_m3 - v_norm).max(1e-3);
            let r_cap = at_cap.map_or(f32::NAN, |b| above / (b.peak_storage_m3 - v_norm));
            println!(
                "{label:<24} {:>8.3} {:>8.3} {:>7.3} {:>6.3} {:>6.3} {:>8.3} {:>6} {:>8.0} {:>8.0} {:>5.1}  {:?}",
                s.peak_stage_m,
                at_permit.peak_stage_m,
                cap.unwrap_or(f32::NAN),
                ratio,
                r_cap,
                s.peak_release_m3s,
                s.exceed_s,
                s.exceed_m3,
                at_cap.map_or(f32::NAN, |b| b.exceed_m3),
                s.drawdown_s.map_or(f32::NAN, |t| t as f32 / 3600.0),
                d.modes()
            );
            let at_target = bound(&cfg, &rain, cfg.target_release_m3s());
            let room = |b: &plant::Bound| 1.0 - (b.peak_storage_m3 - v_norm) / (v_lim - v_norm);
            println!(
                "  room at permit {:.3}, at target {:.3}",
                room(&at_permit),
                room(&at_target)
            );
            let permit_holds = at_permit.peak_stage_m <= limit;
            if permit_holds && s.exceed_s > 0 {
                println!("  ^ needless exceedance: the bound at the permit holds");
                needless += 1;
            }
            let known = KNOWN_NEEDLESS.contains(&(name, label.as_str()));
            if permit_holds && s.exceed_s > 0 && !known {
                println!("  ^ not a known needless exceedance");
                unknown_needless += 1;
            }
            if !known && at_permit.peak_storage_m3 - v_norm <= (1.0 - ROOM_SHARE) * (v_lim - v_norm)
            {
                check(
                    s.exceed_s == 0,
                    format!("{name} {label}: release over permit with room"),
                );
            }
            if s.exceed_s == 0 {
                // No permit-respecting policy beats the bound (DESIGN.md), up to f32 rounding.
                check(ratio >= 0.999, format!("{name} {label}: ratio {ratio}"));
            }
            if cap.is_some() {
                check(
                    s.peak_stage_m <= limit + LIMIT_TOLERANCE_M,
                    format!(
                        "{name} {label}: peak {} over crest − freeboard {limit} though a constant cap holds it",
                        s.peak_stage_m
                    ),
                );
                check(
                    !s.overtopped,
                    format!("{name} {label}: overtopped though avoidable"),
                );
            }
            check(
                s.drawdown_s
                    .is_some_and(|dd| dd <= cfg.control().drawdown_target_s),
                format!("{name} {label}: drawdown {:?} s", s.drawdown_s),
            );
            assert!(d.outputs.iter().all(|o| o.opening_cmd_m.is_finite()));
            assert!(d.outputs.iter().any(|o| o.mode == Mode::Capture));
        }
    }
    println!("needless exceedances: {needless}");
    assert!(fails.is_empty(), "{fails:#?}");
    assert_eq!(
        unknown_needless, 0,
        "release over the permit where the bound at the permit holds"
    );
}
