//! Mode behaviour on the invented demo pond "quillmere": manual override with its time limit,
//! command bounds, Manual yielding to Surcharge, and the minimum-detention drawdown pace.
//! Sources: the controller's documented mode table (core/src/control/mod.rs) and continuity
//! (the pond cannot be back at normal before `rain end + min_detention_s` if the release is
//! paced to spread the stored volume over that time).

use holdback_core::config::PondConfig;
use holdback_core::control::{Command, Mode, Reason};
use holdback_core::event::EventBody;
use holdback_tests::closed_loop::{
    self, ControllerDriver, Injection, PlantOptions, block_storm, scaled,
};
use holdback_tests::ponds;

fn cfg() -> PondConfig {
    PondConfig::new(ponds::quillmere()).unwrap()
}

#[test]
fn manual_override_runs_out_and_bad_commands_are_rejected() {
    let cfg = cfg();
    let rain = block_storm(cfg.idf(), 2.0, 60, cfg.catchment().dt_s());
    let mut d = ControllerDriver::new(&cfg);
    d.commands = vec![
        (
            600,
            Command::Manual {
                opening_m: 9.0,
                for_s: 600,
            },
        ),
        (
            610,
            Command::Manual {
                opening_m: 0.1,
                for_s: 0,
            },
        ),
        (
            620,
            Command::Manual {
                opening_m: 0.1,
                for_s: 600,
            },
        ),
    ];
    closed_loop::run(
        &cfg,
        &rain,
        &mut d,
        PlantOptions {
            tail_s: 3 * 3600,
            ..PlantOptions::default()
        },
        (Injection::None, 0),
    );
    let rejected = d
        .outputs
        .iter()
        .flat_map(|o| o.events.iter())
        .filter(|e| matches!(e, EventBody::CommandRejected { .. }))
        .count();
    assert_eq!(rejected, 2);
    let k = 620 / 10;
    assert_eq!(d.outputs[k].mode, Mode::Manual);
    assert_eq!(d.outputs[k].opening_cmd_m, 0.1);
    assert_eq!(d.outputs[k].reason, Reason::Manual);
    assert_eq!(d.outputs[k + 59].mode, Mode::Manual);
    assert_ne!(
        d.outputs[k + 60].mode,
        Mode::Manual,
        "the override ends after for_s"
    );
}

#[test]
fn manual_yields_to_surcharge() {
    let cfg = cfg();
    let rain = scaled(
        &block_storm(cfg.idf(), 100.0, 60, cfg.catchment().dt_s()),
        2.0,
    );
    let mut d = ControllerDriver::new(&cfg);
    d.commands = vec![(
        300,
        Command::Manual {
            opening_m: 0.0,
            for_s: 4 * 3600,
        },
    )];
    let (s, _) = closed_loop::run(
        &cfg,
        &rain,
        &mut d,
        PlantOptions::default(),
        (Injection::None, 0),
    );
    let modes = d.modes();
    let m = modes
        .iter()
        .position(|&m| m == Mode::Manual)
        .expect("manual");
    assert_eq!(modes.get(m + 1), Some(&Mode::Surcharge), "{modes:?}");
    assert!(!s.overtopped);
}

#[test]
fn min_detention_paces_the_drawdown() {
    let mut p = ponds::quillmere();
    p.control.min_detention_s = 12 * 3600;
    let cfg = PondConfig::new(p).unwrap();
    let rain = block_storm(cfg.idf(), 10.0, 60, cfg.catchment().dt_s());
    let mut d = ControllerDriver::new(&cfg);
    let (s, _) = closed_loop::run(
        &cfg,
        &rain,
        &mut d,
        PlantOptions::default(),
        (Injection::None, 0),
    );
    let dd = s.drawdown_s.expect("drained");
    println!(
        "drawdown with 12 h minimum detention: {:.1} h",
        dd as f32 / 3600.0
    );
    assert!(dd + 600 >= 12 * 3600, "drained too fast: {dd} s");
    assert!(dd <= cfg.control().drawdown_target_s);
    assert!(d.outputs.iter().any(|o| o.reason == Reason::DrawdownPace));
    assert_eq!(s.exceed_s, 0);
}
