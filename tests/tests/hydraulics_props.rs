//! Property tests of the invariants promised in `holdback_core::hydraulics` (module doc) and
//! `holdback_core::flow` (routing relies on them): zero at/below invert, never negative or
//! NaN, monotone in stage and opening, non-increasing in tailwater, continuous at every
//! regime change, and the opening inverse undoing the rating.
//!
//! Rounding allowance (stated): monotonicity holds up to a relative 2e-6 (a few f32 ulps);
//! continuity is checked as "a step of ε = 1e-5 of the geometry either side of the regime
//! point changes Q by < 0.1 %" — a real jump of that size or more fails.

use holdback_core::flow::StageDischarge;
use holdback_core::hydraulics::*;
use proptest::prelude::*;

const ULP_REL: f32 = 2e-6;

fn cd() -> impl Strategy<Value = f32> {
    0.3_f32..=1.0
}
fn len() -> impl Strategy<Value = f32> {
    0.02_f32..3.0
}
fn lvl() -> impl Strategy<Value = f32> {
    -1.0_f32..2.0
}

fn structure() -> impl Strategy<Value = FixedStructure> {
    prop_oneof![
        (lvl(), len(), cd()).prop_map(|(z, d, c)| CircularOrifice::new(z, d, c).unwrap().into()),
        (lvl(), len(), len(), cd())
            .prop_map(|(z, b, d, c)| RectangularOrifice::new(z, b, d, c).unwrap().into()),
        (lvl(), len(), cd(), 0u8..=2)
            .prop_map(|(z, b, c, n)| RectangularWeir::new(z, b, c, n).unwrap().into()),
        (lvl(), 10.0_f32..=170.0, cd())
            .prop_map(|(z, a, c)| VNotchWeir::new(z, a, c).unwrap().into()),
        (lvl(), len(), cd()).prop_map(|(z, b, c)| BroadCrestedWeir::new(z, b, c).unwrap().into()),
        (lvl(), len(), cd(), cd())
            .prop_map(|(z, d, w, o)| Riser::circular(z, d, w, o).unwrap().into()),
        (lvl(), len(), len(), cd(), cd()).prop_map(|(z, l, b, w, o)| Riser::rectangular(
            z, l, b, w, o
        )
        .unwrap()
        .into()),
        (lvl(), 0.0_f32..20.0, 0.0_f32..10.0, cd())
            .prop_filter_map("needs a width", |(z, b, s, c)| {
                Spillway::new(z, b, s, c).ok().map(FixedStructure::from)
            }),
    ]
}

fn gate() -> impl Strategy<Value = SluiceGate> {
    (lvl(), len(), len(), 0.5_f32..=1.0, 0.8_f32..=1.0)
        .prop_map(|(z, b, a, cc, cv)| SluiceGate::new(z, b, a, cc, cv).unwrap())
}

fn tail() -> impl Strategy<Value = Option<f32>> {
    prop_oneof![Just(None), (-2.0_f32..5.0).prop_map(Some)]
}

/// Stages where a structure changes regime at free outfall, and the geometry scale there.
fn regime_stages(s: &FixedStructure) -> Vec<(f32, f32)> {
    match s {
        FixedStructure::CircularOrifice(o) => vec![(o.soffit_m(), o.diameter_m())],
        FixedStructure::RectangularOrifice(o) => {
            vec![(o.soffit_m(), o.soffit_m() - o.invert_m())]
        }
        FixedStructure::Riser(r) => {
            let h = r.transition_head_m();
            vec![(r.crest_m() + h, h)]
        }
        FixedStructure::RectangularWeir(w) if w.end_contractions() > 0 => {
            let h = 3.0 * w.width_m() / f32::from(w.end_contractions());
            vec![(w.crest_m() + h, h)]
        }
        _ => vec![],
    }
}

fn jump_ok(a: f32, b: f32) -> bool {
    let m = a.abs().max(b.abs());
    (a - b).abs() <= 1e-3 * m + 1e-9
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Zero at and below the invert, non-negative and finite anywhere, NaN stage → 0.
    #[test]
    fn zero_below_invert_never_negative_or_nan(s in structure(), tw in tail(), dz in 0.0_f32..5.0, st in -1e30_f32..1e30) {
        let z = s.invert_m();
        prop_assert_eq!(s.discharge_m3s(z - dz, tw), 0.0);
        let q = s.discharge_m3s(st, tw);
        prop_assert!(q >= 0.0 && q.is_finite());
        prop_assert_eq!(s.discharge_m3s(f32::NAN, tw), 0.0);
        prop_assert!(s.discharge_m3s(f32::INFINITY, tw).is_finite());
    }

    /// Monotone non-decreasing in stage (routing stability needs it).
    #[test]
    fn monotone_in_stage(s in structure(), tw in tail(), a in -1.0_f32..8.0, d in 0.0_f32..2.0) {
        let (q1, q2) = (s.discharge_m3s(a, tw), s.discharge_m3s(a + d, tw));
        prop_assert!(q2 >= q1 * (1.0 - ULP_REL), "{q1} -> {q2}");
    }

    /// Non-increasing in tailwater; free outfall equals a tailwater far below the invert.
    #[test]
    fn non_increasing_in_tailwater(s in structure(), st in -1.0_f32..8.0, t in -2.0_f32..8.0, d in 0.0_f32..2.0) {
        let (q1, q2) = (s.discharge_m3s(st, Some(t)), s.discharge_m3s(st, Some(t + d)));
        prop_assert!(q2 <= q1 * (1.0 + ULP_REL) + 1e-12, "{q1} -> {q2}");
        prop_assert_eq!(s.discharge_m3s(st, None), s.discharge_m3s(st, Some(s.invert_m() - 10.0)));
    }

    /// Continuity at the soffit (orifice), weir ↔ orifice control (riser), the Francis cap.
    #[test]
    fn continuous_at_structure_regime_changes(s in structure()) {
        for (stage, scale) in regime_stages(&s) {
            let e = 1e-5 * scale.max(0.01);
            let (lo, hi) = (s.discharge_m3s(stage - e, None), s.discharge_m3s(stage + e, None));
            prop_assert!(jump_ok(lo, hi), "jump {lo} -> {hi} at {stage}");
        }
    }

    /// Continuity at the submergence onset (tailwater crossing the invert, and for the broad
    /// crest the drowning point t = 2h/3).
    #[test]
    fn continuous_at_submergence_onset(s in structure(), h in 0.05_f32..4.0) {
        let z = s.invert_m();
        let e = 1e-5 * h;
        let stage = z + h;
        let (a, b) = (s.discharge_m3s(stage, Some(z - e)), s.discharge_m3s(stage, Some(z + e)));
        prop_assert!(jump_ok(a, b), "onset jump {a} -> {b}");
        let t = z + 2.0 * h / 3.0;
        let (a, b) = (s.discharge_m3s(stage, Some(t - e)), s.discharge_m3s(stage, Some(t + e)));
        prop_assert!(jump_ok(a, b), "drowning jump {a} -> {b}");
    }

    /// Gate: zero closed, monotone in opening and stage, non-increasing in tailwater.
    #[test]
    fn gate_monotone_in_opening_stage_and_tailwater(g in gate(), st in -1.0_f32..8.0, a in 0.0_f32..4.0, d in 0.0_f32..2.0, tw in tail()) {
        prop_assert_eq!(g.discharge_m3s(st, 0.0, tw), 0.0);
        let q = g.discharge_m3s(st, a, tw);
        prop_assert!(q >= 0.0 && q.is_finite());
        prop_assert!(g.discharge_m3s(st, a + d, tw) >= q * (1.0 - ULP_REL));
        prop_assert!(g.discharge_m3s(st + d, a, tw) >= q * (1.0 - ULP_REL));
        if let Some(t) = tw {
            prop_assert!(g.discharge_m3s(st, a, Some(t + d)) <= q * (1.0 + ULP_REL) + 1e-12);
        }
    }

    /// Gate continuity at the gate-clear point (Cc·a = 2h/3) in opening and in stage, at the
    /// free ↔ submerged-underflow point (t = Cc·a), and at the sill drowning point.
    #[test]
    fn gate_continuous_at_regime_changes(g in gate(), h in 0.05_f32..4.0, f in 0.05_f32..0.95) {
        let z = g.sill_m();
        let stage = z + h;
        let a_clear = (2.0 * h / 3.0) / g.cc();
        let e = 1e-5 * a_clear;
        let q = |s: f32, a: f32, t: Option<f32>| g.discharge_m3s(s, a, t);
        if a_clear < g.max_opening_m() {
            prop_assert!(jump_ok(q(stage, a_clear - e, None), q(stage, a_clear + e, None)));
        }
        let a = f * g.max_opening_m();
        let h_clear = 1.5 * g.cc() * a;
        let eh = 1e-5 * h_clear;
        prop_assert!(jump_ok(q(z + h_clear - eh, a, None), q(z + h_clear + eh, a, None)));
        let tj = z + g.cc() * a;
        let s2 = tj + h;
        prop_assert!(jump_ok(q(s2, a, Some(tj - eh)), q(s2, a, Some(tj + eh))));
        let td = z + 2.0 * h / 3.0;
        let big = g.max_opening_m();
        prop_assert!(jump_ok(q(stage, big, Some(td - e)), q(stage, big, Some(td + e))));
    }

    /// Composite outlet and its routing adaptor: monotone in stage and opening.
    #[test]
    fn outlet_monotone(fixed in proptest::collection::vec(structure(), 0..=MAX_FIXED), g in gate(), tw in tail(), st in -1.0_f32..8.0, a in 0.0_f32..3.0, d in 0.0_f32..1.0) {
        let o = Outlet::new(&fixed, Some(g), tw.map(|t| t.min(10.0))).unwrap();
        let q = o.discharge_m3s(st, a);
        prop_assert!(q >= 0.0 && q.is_finite());
        prop_assert_eq!(q, o.fixed_discharge_m3s(st) + o.gate_discharge_m3s(st, a));
        prop_assert_eq!(o.at(a).discharge_m3s(st), q);
        prop_assert!(o.discharge_m3s(st + d, a) >= q * (1.0 - ULP_REL));
        prop_assert!(o.discharge_m3s(st, a + d) >= q * (1.0 - ULP_REL));
    }

    /// The outlet skips the structures the stage is at or below (they pass nothing, the first
    /// property above): its fixed discharge is the plain sum over every structure, bit for
    /// bit, at any stage and tailwater, NaN included.
    #[test]
    fn outlet_fixed_sum_is_every_structure(fixed in proptest::collection::vec(structure(), 0..=MAX_FIXED), tw in tail(), st in -2.0_f32..8.0, nan in any::<bool>()) {
        let o = Outlet::new(&fixed, None, tw).unwrap();
        let st = if nan { f32::NAN } else { st };
        let plain = fixed.iter().fold(0.0_f32, |q, s| q + s.discharge_m3s(st, tw));
        prop_assert_eq!(o.fixed_discharge_m3s(st).to_bits(), plain.to_bits());
    }

    /// inverse(rating(x)) = x: `opening_for(stage, Q(stage, x))` returns an opening whose
    /// discharge is the target, and returns x itself wherever Q is strictly increasing in the
    /// opening near x; exact at the bounds.
    #[test]
    fn opening_inverse_undoes_the_rating(fixed in proptest::collection::vec(structure(), 0..=3), g in gate(), tw in tail(), st in -0.5_f32..6.0, f in 0.0_f32..=1.0) {
        let o = Outlet::new(&fixed, Some(g), tw).unwrap();
        let amax = o.max_opening_m();
        let x = f * amax;
        let target = o.discharge_m3s(st, x);
        let a = o.opening_for(st, target).unwrap();
        prop_assert!((0.0..=amax).contains(&a));
        let qa = o.discharge_m3s(st, a);
        // Bisection stops at a bracket of amax / 2^MAX_INVERSE_ITERATIONS: the discharge can
        // be off by what that much opening changes, besides f32 rounding of the rating.
        let da = amax / (1u64 << MAX_INVERSE_ITERATIONS) as f32;
        let floor = (o.discharge_m3s(st, (a + da).min(amax)) - o.discharge_m3s(st, (a - da).max(0.0))).abs();
        prop_assert!((qa - target).abs() <= 1e-5 * target + 1e-9 + floor, "Q(a)={qa} target={target} floor={floor}");
        let dq_up = o.discharge_m3s(st, (x * 1.001).min(amax)) - target;
        let dq_dn = target - o.discharge_m3s(st, x * 0.999);
        if x > 0.0 && x < amax * 0.999 && dq_up > 1e-4 * target && dq_dn > 1e-4 * target {
            prop_assert!((a - x).abs() <= 1e-3 * x, "a={a} x={x}");
        }
        prop_assert_eq!(o.opening_for(st, o.discharge_m3s(st, 0.0)).unwrap(), 0.0);
        let q_open = o.discharge_m3s(st, amax);
        if q_open > o.discharge_m3s(st, 0.0) {
            prop_assert_eq!(o.opening_for(st, q_open).unwrap(), amax);
        }
        if q_open > o.discharge_m3s(st, 0.0) {
            let e = o.opening_for(st, q_open * 1.01 + 1e-6).unwrap_err();
            let is_unreachable = matches!(e, HydraulicsError::Unreachable { .. });
            prop_assert!(is_unreachable);
        }
    }
}

/// Full open exactly at the bound returns the max opening.
#[test]
fn inverse_is_exact_at_full_open_when_the_gate_controls() {
    let g = SluiceGate::new(0.0, 1.0, 0.5, 0.61, 0.98).unwrap();
    let o = Outlet::new(&[], Some(g), None).unwrap();
    let q = o.discharge_m3s(3.0, 0.5);
    assert_eq!(o.opening_for(3.0, q).unwrap(), 0.5);
}

/// Below the closed-gate flow the error carries the reachable range.
#[test]
fn inverse_below_fixed_flow_reports_the_range() {
    let orifice = CircularOrifice::new(0.0, 0.3, 0.6).unwrap();
    let g = SluiceGate::new(0.5, 1.0, 0.5, 0.61, 0.98).unwrap();
    let o = Outlet::new(&[orifice.into()], Some(g), None).unwrap();
    let (lo, hi) = (o.discharge_m3s(2.0, 0.0), o.discharge_m3s(2.0, 0.5));
    assert_eq!(
        o.opening_for(2.0, 0.5 * lo),
        Err(HydraulicsError::Unreachable {
            target_m3s: 0.5 * lo,
            min_m3s: lo,
            max_m3s: hi
        })
    );
}
