//! Gauge supervision with hand-made pulse sequences (test fixtures): a lone tip after a dry
//! spell, chatter, clog, event splitting, buffer saturation, and no-panic properties.

use holdback_core::rain::{GaugeSettings, IntervalOutcome, RainGauge, TipOutcome};
use proptest::prelude::*;

const W: [u32; 6] = [300, 600, 900, 1800, 3600, 2700];

fn gauge() -> RainGauge<256> {
    RainGauge::new(&GaugeSettings::default(), &W).unwrap()
}

/// A single tip after a 10 h dry spell is spread over the spread cap (1 h), so no window reads
/// more than bucket / 1 h = 0.2 mm/h (the documented bound: bucket / min(gap, cap)); read as
/// a point it would give 2.4 mm/h in the 5-min window (0.2 mm × 12 per hour, by definition).
#[test]
fn single_tip_after_dry_spell_is_not_a_burst() {
    let mut g = gauge();
    g.step(0, false);
    assert_eq!(g.record_tip(36_000), TipOutcome::Counted);
    for r in g.readings(36_000).as_slice() {
        assert!(r.intensity_mm_h <= 0.2 + 1e-5, "{r:?}");
    }
    assert!(
        (g.reading(36_000, 3600).depth_mm - 0.2).abs() < 1e-6,
        "depth is conserved"
    );
    // Inside a storm, tips 30 s apart read their true rate: 0.2 mm / 30 s = 24 mm/h.
    for k in 1..=20 {
        g.record_tip(36_000 + 30 * k);
    }
    let r = g.reading(36_600, 300);
    assert!((r.intensity_mm_h - 24.0).abs() < 1e-3, "{r:?}");
}

/// Tips every second (0.2 mm/s = 720 mm/h) against a 500 mm/h plausible maximum: flagged as
/// chatter and counted at no more than the plausible rate plus the two-bucket allowance.
#[test]
fn chatter_is_flagged_and_capped_at_the_plausible_rate() {
    let mut g = gauge();
    g.step(1000, false);
    let mut counted = 0;
    for t in 1000..1600u32 {
        if g.record_tip(t) == TipOutcome::Counted {
            counted += 1;
        }
    }
    let st = g.status(1600);
    assert!(st.chatter && st.chatter_tips > 0);
    let max_mm = 500.0 / 3600.0 * 600.0 + 2.0 * 0.2;
    assert!(
        g.total_depth_mm() <= max_mm + 1e-3,
        "{} > {max_mm}",
        g.total_depth_mm()
    );
    assert!(counted + st.chatter_tips == 600);
    // Honest tips at 72 mm/h (every 10 s) are never chatter.
    let mut h = gauge();
    for k in 0..100u32 {
        assert_eq!(h.record_tip(10 * k), TipOutcome::Counted);
    }
    assert!(!h.status(1000).chatter);
    // Many pulses in one second: all but the allowance are chatter.
    let mut c = gauge();
    assert_eq!(c.record_tips(50, 40), 2);
    assert_eq!(c.status(50).chatter_tips, 38);
}

/// Rising stage with no tips flags a clog exactly after `clog_after_s` (1800 s); a tip clears
/// it; a break in the rise restarts the clock.
#[test]
fn clog_is_flagged_after_the_configured_time_and_cleared_by_rain() {
    let mut g = gauge();
    for t in (0..1800).step_by(60) {
        assert!(!g.step(t, true).clogged, "t={t}");
    }
    assert!(g.step(1800, true).clogged);
    g.record_tip(1850);
    assert!(!g.step(1860, true).clogged);
    // Tip at 1850: the next flag may come only at 1850 + 1800.
    assert!(!g.step(3640, true).clogged);
    assert!(g.step(3650, true).clogged);
    let mut h = gauge();
    h.step(0, true);
    h.step(1000, false);
    h.step(1100, true);
    assert!(!h.step(2800, true).clogged);
    assert!(h.step(2900, true).clogged);
}

/// Tip clusters 5 h apart stay one event, 7 h apart make two (inter-event dry time 6 h);
/// each event's depth is its tips × bucket and its timing is its first and last tip.
#[test]
fn events_split_by_inter_event_dry_time() {
    let mut g = gauge();
    let burst = |g: &mut RainGauge<256>, t0: u32, n: u32| {
        for k in 0..n {
            g.record_tip(t0 + 20 * k);
        }
    };
    g.step(0, false);
    burst(&mut g, 1000, 10);
    burst(&mut g, 1180 + 5 * 3600, 10);
    assert_eq!(g.completed_events(), 0);
    let t2 = 1180 + 5 * 3600 + 180 + 7 * 3600;
    burst(&mut g, t2, 5);
    assert_eq!(g.completed_events(), 1);
    let e = *g.last_completed_event().unwrap();
    assert_eq!((e.start_s, e.last_rain_s), (1000, 1180 + 5 * 3600 + 180));
    assert!((e.depth_mm - 4.0).abs() < 1e-5);
    assert!(g.status(t2).raining);
    // step alone closes the open event once 6 h pass without rain.
    assert!(g.step(t2 + 80 + 6 * 3600 - 1, false).raining);
    assert!(!g.step(t2 + 80 + 6 * 3600, false).raining);
    let e2 = g.last_completed_event().unwrap();
    assert!((e2.depth_mm - 1.0).abs() < 1e-5);
    assert_eq!(g.completed_events(), 2);
    // Peak of the 5-min window in the first event, at its last tip (1180 s), window
    // (880, 1180]: nine whole tips plus 120/1000 of the first, which the spreading rule lays
    // over [0, 1000] s: 1.824 mm in 5 min = 21.888 mm/h (arithmetic from the documented rule).
    let p5 = e.peaks().iter().find(|p| p.window_s == 300).unwrap();
    assert!((p5.intensity_mm_h - 21.888).abs() < 1e-3, "{p5:?}");
    assert_eq!(p5.at_s, 1180);
}

/// A buffer of 8 records and 40 tips 20 s apart: the oldest go first, the longest window
/// reports saturated (and underestimates), short windows stay exact; nothing panics.
#[test]
fn full_buffer_drops_oldest_and_reports_saturation() {
    let mut g = RainGauge::<8>::new(&GaugeSettings::default(), &W).unwrap();
    for k in 0..40u32 {
        g.record_tip(10_000 + 20 * k);
    }
    let now = 10_000 + 20 * 39;
    let long = g.reading(now, 3600);
    assert!(long.saturated && long.depth_mm < 40.0 * 0.2);
    assert!(g.status(now).saturated && g.status(now).lost_records == 32);
    let short = g.reading(now, 100);
    assert!(!short.saturated);
    assert!((short.depth_mm - 5.0 * 0.2).abs() < 1e-5, "{short:?}");
    assert!(
        (g.total_depth_mm() - 8.0).abs() < 1e-4,
        "the running total still counts all"
    );
}

/// Out-of-order and invalid input is ignored and reported, never counted.
#[test]
fn out_of_order_and_invalid_input_is_rejected() {
    let mut g = gauge();
    g.record_tip(100);
    assert_eq!(g.record_tip(99), TipOutcome::OutOfOrder);
    assert_eq!(g.record_interval(200, 0, 1.0), IntervalOutcome::Rejected);
    assert_eq!(
        g.record_interval(200, 300, f32::NAN),
        IntervalOutcome::Rejected
    );
    assert_eq!(g.record_interval(200, 300, -1.0), IntervalOutcome::Rejected);
    assert_eq!(g.record_interval(50, 300, 1.0), IntervalOutcome::Rejected);
    // 100 mm in 5 min is 1200 mm/h > 500 mm/h: clipped to 500/12 mm and flagged.
    assert_eq!(g.record_interval(600, 300, 100.0), IntervalOutcome::Clipped);
    assert!((g.total_depth_mm() - (0.2 + 500.0 / 12.0)).abs() < 1e-3);
    assert!(g.status(600).chatter);
}

/// Settings and windows are validated once.
#[test]
fn bad_settings_are_rejected() {
    let d = GaugeSettings::default();
    assert!(
        RainGauge::<8>::new(
            &GaugeSettings {
                bucket_mm: 0.0,
                ..d
            },
            &W
        )
        .is_err()
    );
    assert!(
        RainGauge::<8>::new(
            &GaugeSettings {
                max_intensity_mm_h: f32::NAN,
                ..d
            },
            &W
        )
        .is_err()
    );
    assert!(
        RainGauge::<8>::new(
            &GaugeSettings {
                clog_after_s: 0,
                ..d
            },
            &W
        )
        .is_err()
    );
    assert!(RainGauge::<8>::new(&d, &[]).is_err());
    assert!(RainGauge::<8>::new(&d, &[300, 0]).is_err());
    assert!(RainGauge::<8>::new(&d, &[300; 9]).is_err());
}

#[derive(Debug, Clone)]
enum Op {
    Tip(u32),
    Tips(u32, u32),
    Interval(u32, u32, f32),
    Step(u32, bool),
}

fn op() -> impl Strategy<Value = Op> {
    prop_oneof![
        (0u32..200).prop_map(Op::Tip),
        (0u32..5, 0u32..10).prop_map(|(d, n)| Op::Tips(d, n)),
        (0u32..900, 0u32..900, prop::num::f32::ANY).prop_map(|(d, i, x)| Op::Interval(d, i, x)),
        (0u32..4000, any::<bool>()).prop_map(|(d, r)| Op::Step(d, r)),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]
    /// Any input sequence (including time jumps near u32::MAX and NaN totals): no panic,
    /// readings finite and ≥ 0, tips × bucket part of the total exact.
    #[test]
    fn any_sequence_is_safe_and_readings_are_finite(start in prop_oneof![Just(0u32), Just(u32::MAX - 5000)],
                                                     ops in prop::collection::vec(op(), 0..120)) {
        let mut g = RainGauge::<16>::new(&GaugeSettings::default(), &W).unwrap();
        let mut t = start;
        for o in ops {
            match o {
                Op::Tip(d) => { t = t.saturating_add(d); g.record_tip(t); }
                Op::Tips(d, n) => { t = t.saturating_add(d); g.record_tips(t, n); }
                Op::Interval(d, i, x) => { t = t.saturating_add(d); g.record_interval(t, i, x); }
                Op::Step(d, r) => { t = t.saturating_add(d); g.step(t, r); }
            }
            for r in g.readings(t).as_slice() {
                prop_assert!(r.depth_mm.is_finite() && r.depth_mm >= 0.0);
                prop_assert!(r.intensity_mm_h.is_finite() && r.intensity_mm_h >= 0.0);
            }
            prop_assert!(g.total_depth_mm().is_finite());
        }
    }
}
