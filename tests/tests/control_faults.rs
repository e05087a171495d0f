//! Fault injection: every fault the controller documents (core/src/control/mod.rs, "Faults
//! and detection times") is injected into the closed-loop plant during a storm on the demo
//! pond "quillmere" (invented data). Each check: the `FaultRaised` event with the documented
//! source and kind arrives within the documented number of steps (the bound is the
//! controller's own documented promise, derived from the settings; the test measures it),
//! the safe behaviour follows (Failsafe with at least the safe opening, except for a spike
//! and the rain-gauge faults, which keep control), and the fault is in `Outputs::faults`.

use holdback_core::config::PondConfig;
use holdback_core::control::{Fault, Mode};
use holdback_core::event::{EventBody, FaultKind, FaultSource};
use holdback_tests::closed_loop::{
    self, ControllerDriver, Injection, PlantOptions, Sample, block_storm,
};
use holdback_tests::ponds;

const T0: u32 = 1200;

fn storm(cfg: &PondConfig) -> Vec<f32> {
    block_storm(cfg.idf(), 10.0, 60, cfg.catchment().dt_s())
}

fn inject(cfg: &PondConfig, inj: Injection) -> (ControllerDriver<'_>, Vec<Sample>) {
    let mut d = ControllerDriver::new(cfg);
    let opt = PlantOptions {
        tail_s: 4 * 3600,
        ..PlantOptions::default()
    };
    let (_, trace) = closed_loop::run(cfg, &storm(cfg), &mut d, opt, (inj, T0));
    (d, trace)
}

/// Index of the first step at or after `from` whose events raise (source, kind).
fn raised_at(
    d: &ControllerDriver<'_>,
    from: usize,
    src: FaultSource,
    kind: FaultKind,
) -> Option<usize> {
    d.outputs.iter().enumerate().skip(from).find_map(|(i, o)| {
        o.events
            .contains(&EventBody::FaultRaised { source: src, kind })
            .then_some(i)
    })
}

fn check(
    inj: Injection,
    fault: Fault,
    max_steps: usize,
    failsafe: bool,
    first_step: Option<usize>,
) {
    let cfg = PondConfig::new(ponds::quillmere()).unwrap();
    let step = cfg.control().step_s as usize;
    let (d, _) = inject(&cfg, inj);
    let k0 = first_step.unwrap_or(T0 as usize / step);
    let k = raised_at(&d, k0, fault.source(), fault.kind())
        .unwrap_or_else(|| panic!("{inj:?}: {fault:?} never raised"));
    let steps = k - k0 + 1;
    println!("{inj:?}: {fault:?} after {steps} steps (bound {max_steps})");
    assert!(steps <= max_steps, "{inj:?}: {steps} > {max_steps}");
    let o = &d.outputs[k];
    assert!(o.faults.has(fault));
    if failsafe {
        let o = &d.outputs[k];
        assert_eq!(o.mode, Mode::Failsafe, "{inj:?}");
        assert!(
            o.opening_cmd_m >= cfg.safe().safe_opening_m,
            "{inj:?}: {o:?}"
        );
        assert!(
            d.outputs[k..]
                .iter()
                .take(holdback_core::control::CLEAR_STEPS as usize)
                .all(|o| o.mode == Mode::Failsafe || o.mode == Mode::Surcharge)
        );
    } else {
        assert_ne!(o.mode, Mode::Failsafe, "{inj:?}");
    }
    // The fault never appears before the injection.
    assert!(
        d.outputs[..k0].iter().all(|o| !o.faults.has(fault)),
        "{inj:?}: early"
    );
}

#[test]
fn stage_over_and_under_range_in_one_step() {
    check(
        Injection::StageFixed(110.0),
        Fault::StageOverRange,
        1,
        true,
        None,
    );
    check(
        Injection::StageFixed(90.0),
        Fault::StageUnderRange,
        1,
        true,
        None,
    );
}

#[test]
fn stage_missing_within_missing_steps() {
    let s = ponds::quillmere().sensors;
    check(
        Injection::StageMissing,
        Fault::StageMissing,
        s.missing_steps as usize,
        true,
        None,
    );
}

#[test]
fn stage_stuck_within_stuck_time() {
    let p = ponds::quillmere();
    let bound = p.sensors.stuck_s.div_ceil(p.control.step_s) as usize + 1;
    check(Injection::StageFrozen, Fault::StageStuck, bound, true, None);
}

#[test]
fn stage_spike_in_two_steps_and_control_goes_on() {
    check(
        Injection::StageSpike(0.5),
        Fault::StageSpike,
        2,
        false,
        None,
    );
}

#[test]
fn stage_rate_of_change_in_three_steps() {
    check(Injection::StageStep(0.5), Fault::StageRate, 3, true, None);
}

#[test]
fn gauge_clogged_and_chatter() {
    let p = ponds::quillmere();
    let bound = ((p.sensors.gauge.clog_after_s + holdback_core::control::TREND_S)
        / p.control.step_s) as usize
        + 1;
    check(
        Injection::GaugeClogged,
        Fault::RainClogged,
        bound,
        false,
        None,
    );
    check(
        Injection::GaugeChatter(20),
        Fault::RainChatter,
        1,
        false,
        None,
    );
}

#[test]
fn gate_limit_conflict_and_driver_fault_in_one_step() {
    check(
        Injection::BothLimits,
        Fault::GateLimitConflict,
        1,
        true,
        None,
    );
    check(Injection::DriverFault, Fault::GateDriver, 1, true, None);
}

#[test]
fn gate_position_missing_within_missing_steps() {
    let s = ponds::quillmere().sensors;
    check(
        Injection::PositionMissing,
        Fault::GatePositionMissing,
        s.missing_steps as usize,
        true,
        None,
    );
}

/// Stall: counted from the first step after the injection where the command differs from the
/// (stuck) position by more than the tolerance.
#[test]
fn gate_stall_within_move_timeout() {
    let cfg = PondConfig::new(ponds::quillmere()).unwrap();
    let step = cfg.control().step_s as usize;
    let tol = cfg.sensors().position_tolerance_m;
    let (d, trace) = inject(&cfg, Injection::GateStuck);
    let k0 = T0 as usize / step;
    let start = (k0..d.outputs.len())
        .find(|&k| (d.outputs[k].opening_cmd_m - trace[k].opening_m).abs() > tol)
        .expect("the controller moved the gate");
    let bound = cfg.sensors().move_timeout_s.div_ceil(cfg.control().step_s) as usize + 1;
    check(
        Injection::GateStuck,
        Fault::GateStall,
        bound,
        true,
        Some(start + 1),
    );
}

/// Disagree: counted from the first step after the injection from which the command stays
/// steady.
#[test]
fn gate_position_disagree_within_move_timeout_of_settling() {
    let cfg = PondConfig::new(ponds::quillmere()).unwrap();
    let step = cfg.control().step_s as usize;
    let (d, _) = inject(&cfg, Injection::PositionOffset(0.05));
    let k0 = T0 as usize / step;
    let bound = cfg.sensors().move_timeout_s.div_ceil(cfg.control().step_s) as usize + 1;
    // Last command change at or before detection.
    let k = raised_at(&d, k0, FaultSource::GatePosition, FaultKind::Disagree).expect("raised");
    let settled = (k0..=k)
        .rev()
        .find(|&i| i == k0 || d.outputs[i].opening_cmd_m != d.outputs[i - 1].opening_cmd_m)
        .unwrap();
    let steps = k - settled + 1;
    assert!(steps <= bound, "{steps} > {bound}");
    assert_eq!(d.outputs[k].mode, Mode::Failsafe);
}
