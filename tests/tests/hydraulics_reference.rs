//! The f32 core against the f64 reference of `holdback_tests::hydraulics64` (written straight
//! from the formulas), against the orifice equation / Torricelli, and against critical-depth
//! theory. Tolerance held: relative 0.2 % of discharge, or 1e-6 m³/s absolute for flows that
//! small (heads of a few mm, or tailwater within mm of the stage, where f32 rounding of the
//! level difference dominates).

use holdback_core::hydraulics::*;
use holdback_tests::hydraulics64 as r64;

const REL: f64 = 2e-3;
const ABS: f64 = 1e-6;

fn close(got: f32, want: f64, what: &str) -> f64 {
    let got = got as f64;
    let err = (got - want).abs();
    assert!(
        err <= REL * want.abs() || err <= ABS,
        "{what}: core {got} vs f64 {want}"
    );
    if want.abs() > ABS {
        err / want.abs()
    } else {
        0.0
    }
}

fn stages(lo: f32, hi: f32, n: usize) -> impl Iterator<Item = f32> {
    (0..=n).map(move |i| lo + (hi - lo) * i as f32 / n as f32)
}

const TAILS: [Option<f32>; 6] = [
    None,
    Some(-5.0),
    Some(0.1),
    Some(0.35),
    Some(0.9),
    Some(2.5),
];

/// Orifice equation `Q = Cd·A·√(2gH)` with H on the centroid (source: Torricelli's theorem,
/// v = √(2gH), times the discharge coefficient), for a range of heads; and the ideal (Cd = 1)
/// jet velocity Q/A = √(2gH) exactly (Torricelli).
#[test]
fn full_orifices_follow_the_orifice_equation_and_torricelli() {
    for &(d, cd) in &[(0.1_f32, 0.6_f32), (0.3, 0.62), (1.2, 1.0)] {
        let o = CircularOrifice::new(0.0, d, cd).unwrap();
        // stages from the soffit up: orifice flow
        for above_soffit in [0.0_f64, 0.5, 1.0, 2.0, 5.0] {
            let stage = (above_soffit + d as f64) as f32;
            let h = stage as f64 - d as f64 / 2.0;
            let a = std::f64::consts::PI * (d as f64).powi(2) / 4.0;
            let want = cd as f64 * a * (2.0 * r64::G * h).sqrt();
            close(
                o.discharge_m3s(stage, None),
                want,
                "circular orifice equation",
            );
            if cd == 1.0 {
                let v = o.discharge_m3s(stage, None) as f64 / a;
                assert!(
                    (v / (2.0 * r64::G * h).sqrt() - 1.0).abs() < 1e-6,
                    "Torricelli"
                );
            }
        }
    }
    // Submerged: Q = Cd·A·√(2g·ΔH) with both levels above the soffit (source: the submerged
    // orifice equation, same derivation with the downstream pressure head).
    let o = RectangularOrifice::new(1.0, 0.5, 0.25, 0.6).unwrap();
    let want = 0.6_f32 as f64 * 0.125 * (2.0 * r64::G * (3.0 - 1.75_f64)).sqrt();
    close(o.discharge_m3s(3.0, Some(1.75)), want, "submerged orifice");
}

/// Source: the f64 reference (orifice equation above the soffit, wetted-area law below,
/// difference of squares when submerged — formulas of `hydraulics::orifice`).
#[test]
fn orifices_match_f64_reference_free_partly_full_and_submerged() {
    let mut worst = 0.0_f64;
    for &(inv, d, cd) in &[
        (0.0_f32, 0.3_f32, 0.6_f32),
        (0.2, 0.9, 0.62),
        (-0.3, 0.05, 0.8),
    ] {
        let c = CircularOrifice::new(inv, d, cd).unwrap();
        let r = RectangularOrifice::new(inv, 1.3 * d, d, cd).unwrap();
        for tw in TAILS {
            for s in stages(inv - 0.1, inv + 4.0 * d + 0.5, 400) {
                let t64 = tw.map(f64::from);
                let want = r64::circular_orifice(inv as f64, d as f64, cd as f64, s as f64, t64);
                worst = worst.max(close(c.discharge_m3s(s, tw), want, "circular"));
                let want = r64::rectangular_orifice(
                    inv as f64,
                    (1.3 * d) as f64,
                    d as f64,
                    cd as f64,
                    s as f64,
                    t64,
                );
                worst = worst.max(close(r.discharge_m3s(s, tw), want, "rectangular"));
            }
        }
    }
    println!("orifices: worst relative error {worst:e}");
}

/// Source: the f64 reference (Francis contractions, Kindsvater–Shen form, Villemonte,
/// critical-depth broad crest).
#[test]
fn weirs_match_f64_reference() {
    let mut worst = 0.0_f64;
    for n in 0..=2u8 {
        let w = RectangularWeir::new(0.2, 1.5, 0.62, n).unwrap();
        for tw in TAILS {
            for s in stages(0.0, 6.0, 400) {
                let want = r64::rectangular_weir(
                    0.2_f32 as f64,
                    1.5,
                    0.62_f32 as f64,
                    n,
                    s as f64,
                    tw.map(f64::from),
                );
                worst = worst.max(close(w.discharge_m3s(s, tw), want, "rect weir"));
            }
        }
    }
    for ang in [20.0_f32, 45.0, 90.0, 120.0] {
        let w = VNotchWeir::new(0.1, ang, 0.58).unwrap();
        for tw in TAILS {
            for s in stages(0.0, 2.0, 300) {
                let want = r64::vnotch_weir(
                    0.1_f32 as f64,
                    ang as f64,
                    0.58_f32 as f64,
                    s as f64,
                    tw.map(f64::from),
                );
                worst = worst.max(close(w.discharge_m3s(s, tw), want, "v-notch"));
            }
        }
    }
    let w = BroadCrestedWeir::new(0.3, 4.0, 0.9).unwrap();
    for tw in TAILS {
        for s in stages(0.0, 3.0, 300) {
            let want = r64::broad_crested_weir(
                0.3_f32 as f64,
                4.0,
                0.9_f32 as f64,
                s as f64,
                tw.map(f64::from),
            );
            worst = worst.max(close(w.discharge_m3s(s, tw), want, "broad"));
        }
    }
    println!("weirs: worst relative error {worst:e}");
}

/// Source: the f64 reference (riser = min(perimeter weir, throat orifice); trapezoidal
/// critical depth by bisection).
#[test]
fn riser_and_spillway_match_f64_reference() {
    let mut worst = 0.0_f64;
    let rc = Riser::circular(1.0, 0.9, 0.6, 0.6).unwrap();
    let rr = Riser::rectangular(1.0, 1.2, 0.8, 0.62, 0.6).unwrap();
    let pi = std::f64::consts::PI;
    let d = 0.9_f32 as f64;
    let (c6, c62) = (0.6_f32 as f64, 0.62_f32 as f64);
    for tw in TAILS {
        for s in stages(0.5, 4.0, 400) {
            let t64 = tw.map(f64::from);
            let want = r64::riser(1.0, pi * d, pi * d * d / 4.0, c6, c6, s as f64, t64);
            worst = worst.max(close(rc.discharge_m3s(s, tw), want, "riser circ"));
            let (l, b) = (1.2_f32 as f64, 0.8_f32 as f64);
            let want = r64::riser(1.0, 2.0 * (l + b), l * b, c62, c6, s as f64, t64);
            worst = worst.max(close(rr.discharge_m3s(s, tw), want, "riser rect"));
        }
    }
    for &(b, z) in &[(10.0_f32, 3.0_f32), (0.0, 2.0), (5.0, 0.0), (0.5, 40.0)] {
        let sp = Spillway::new(1.5, b, z, 0.95).unwrap();
        for tw in TAILS {
            for s in stages(1.0, 4.0, 300) {
                let want = r64::spillway(
                    1.5,
                    b as f64,
                    z as f64,
                    0.95_f32 as f64,
                    s as f64,
                    tw.map(f64::from),
                );
                worst = worst.max(close(sp.discharge_m3s(s, tw), want, "spillway"));
            }
        }
    }
    println!("riser/spillway: worst relative error {worst:e}");
}

/// Source: the f64 reference (energy law to the vena contracta, clamped at critical flow).
#[test]
fn sluice_gate_matches_f64_reference_over_openings_and_tailwaters() {
    let mut worst = 0.0_f64;
    let g = SluiceGate::new(0.0, 1.2, 1.5, 0.61, 0.98).unwrap();
    for tw in TAILS {
        for s in stages(-0.1, 3.0, 150) {
            for a in stages(-0.1, 1.7, 60) {
                let want = r64::sluice_gate(
                    0.0,
                    1.2_f32 as f64,
                    1.5,
                    0.61_f32 as f64,
                    0.98_f32 as f64,
                    s as f64,
                    a as f64,
                    tw.map(f64::from),
                );
                worst = worst.max(close(g.discharge_m3s(s, a, tw), want, "gate"));
            }
        }
    }
    println!("gate: worst relative error {worst:e}");
}

/// Ideal broad-crested weir (Cd = 1): q = √g·(2E/3)^1.5 per unit width, and the critical
/// depth is 2E/3 with Froude number 1 (source: critical-depth theory, specific energy minimum).
/// The trapezoidal spillway reduces to it with vertical walls.
#[test]
fn broad_crested_and_spillway_follow_critical_depth_theory() {
    let w = BroadCrestedWeir::new(0.0, 1.0, 1.0).unwrap();
    let s = Spillway::new(0.0, 1.0, 0.0, 1.0).unwrap();
    for e in [0.05_f32, 0.3, 1.0, 2.5] {
        let e64 = e as f64;
        let q = r64::G.sqrt() * (2.0 * e64 / 3.0).powf(1.5);
        close(w.discharge_m3s(e, None), q, "broad-crested critical flow");
        close(s.discharge_m3s(e, None), q, "spillway z = 0");
        let yc = 2.0 * e64 / 3.0;
        let yc32 = s.critical_depth_m(e) as f64;
        assert!((yc32 / yc - 1.0).abs() < 1e-6);
    }
    // Trapezoid: at the computed depth the specific energy is E and Q²T/(gA³) = 1 (source:
    // critical-depth theory for a non-rectangular section).
    let sp = Spillway::new(0.0, 3.0, 2.0, 1.0).unwrap();
    let e = 0.8_f32;
    let yc = sp.critical_depth_m(e) as f64;
    let (a, t) = ((3.0 + 2.0 * yc) * yc, 3.0 + 4.0 * yc);
    assert!(
        ((yc + a / (2.0 * t)) / e as f64 - 1.0).abs() < 1e-6,
        "energy at critical depth"
    );
    let q = sp.discharge_m3s(e, None) as f64;
    assert!(
        (q * q * t / (r64::G * a * a * a) - 1.0).abs() < 1e-5,
        "Froude 1"
    );
}

/// Free gate underflow conserves energy from the pond to the vena contracta (source:
/// Bernoulli's equation, h = j + V²/2g with j = Cc·a and V = Q/(b·j), Cv = 1); its maximum
/// over the opening is critical flow, Froude number 1 at the jet (source: critical-depth
/// theory), reached exactly where the gate clears (Cc·a = 2h/3).
#[test]
fn gate_underflow_conserves_energy_and_peaks_at_critical_flow() {
    let (b, cc) = (1.5_f32, 0.61_f32);
    let g = SluiceGate::new(0.0, b, 3.0, cc, 1.0).unwrap();
    for h in [0.4_f32, 1.0, 2.5] {
        for frac in [0.05_f32, 0.2, 0.5, 0.9] {
            let a = frac * g.clear_opening_m(h);
            let q = g.discharge_m3s(h, a, None) as f64;
            let j = (cc * a) as f64;
            let v = q / (b as f64 * j);
            let e = j + v * v / (2.0 * r64::G);
            assert!(
                (e / h as f64 - 1.0).abs() < 1e-5,
                "energy at vena contracta"
            );
        }
        let a = g.clear_opening_m(h);
        let q = g.discharge_m3s(h, a, None) as f64;
        let j = (cc * a) as f64;
        let froude = q / (b as f64 * j) / (r64::G * j).sqrt();
        assert!((froude - 1.0).abs() < 1e-5, "critical at the clear point");
        // the underflow coefficient form: Q = Cd·b·a·√(2gh)
        let a = 0.3 * g.clear_opening_m(h);
        let cd = g.underflow_cd(h, a) as f64;
        let q_cd = cd * b as f64 * a as f64 * (2.0 * r64::G * h as f64).sqrt();
        assert!((q_cd / g.discharge_m3s(h, a, None) as f64 - 1.0).abs() < 1e-5);
    }
}

/// Shallow flow in a circular orifice: at depths from 1e-5 to 0.5 of the diameter the f32
/// wetted-area law keeps f32 precision (the direct `θ − sin θ` cancels at small θ, which is
/// why core takes it from its Taylor series there). Source: the f64 reference segment area
/// `r²·acos((r − y)/r) − (r − y)·√(2ry − y²)`, whose cancellation at these depths is far
/// below f32 resolution.
#[test]
fn circular_orifice_keeps_precision_at_shallow_depths() {
    let (inv, d, cd) = (41.0_f32, 0.1_f32, 0.6_f32);
    let c = CircularOrifice::new(inv, d, cd).unwrap();
    let mut worst = 0.0_f64;
    for k in 0..=300 {
        // y/D from 1e-5 to 0.5, evenly in its logarithm.
        let u = 10f64.powf(-5.0 + 4.699 * k as f64 / 300.0);
        // The stage as f32, and the depth the core actually sees from it.
        let s = inv + (u * d as f64) as f32;
        let y = s as f64 - inv as f64;
        if y <= 0.0 {
            continue;
        }
        let want = r64::circular_orifice(inv as f64, d as f64, cd as f64, s as f64, None);
        let got = c.discharge_m3s(s, None) as f64;
        let rel = (got - want).abs() / want;
        assert!(
            rel < 2e-5,
            "y/D = {:e}: core {got:e} vs f64 {want:e}",
            y / d as f64
        );
        worst = worst.max(rel);
    }
    println!("shallow circular orifice: worst relative error {worst:e}");
}
