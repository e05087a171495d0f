//! Sharp-crested weirs against published relations, through the tables that
//! `tests/reference/hydraulics/weirs_fluids.py` wrote with the `fluids` package (version in each
//! table's header) and with the cited formulas evaluated by hand in the same script.
//!
//! The fluids values are themselves checked against their cited sources here. Where they
//! disagree (contracted Kindsvater–Carter head correction, Kindsvater–Shen V-notch constant,
//! SIA full-width), the disagreement is pinned and our weirs are tested against the cited
//! formula instead. The Kindsvater–Carter and Kindsvater–Shen laws use an effective head
//! `h + kh` and width `b + kb`; our weirs take them as a crest lowered by `kh` and a width
//! `b + kb`, with `Cd` = the relation's coefficient at that head.
//!
//! Tolerance for our f32 weirs against the cited f64 values: 0.2 % (the f32 rounding is ~1e-6).

use holdback_core::hydraulics::{RectangularWeir, VNotchWeir};
use holdback_tests::refdata::Table;

struct Rows {
    t: Table,
}

impl Rows {
    fn load(name: &str) -> Rows {
        Rows {
            t: Table::load(&format!("hydraulics/{name}")).unwrap(),
        }
    }
    fn iter(&self) -> impl Iterator<Item = impl Fn(&str) -> f64 + '_> + '_ {
        self.t
            .rows
            .iter()
            .map(move |r| move |c: &str| r[self.t.col(c).unwrap()])
    }
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

/// Kindsvater & Carter full-width weir (source: USBR Water Measurement Manual ch. 7,
/// eq. 7-1/7-2 with the L/B = 1 coefficients, hand-evaluated in the script). fluids'
/// `Q_weir_rectangular_full_Kindsvater_Carter` agrees with it to 0.5 % (it rounds kh to 1 mm),
/// and our suppressed weir with the same Ce, kh, kb reproduces the cited value.
#[test]
fn suppressed_weir_matches_kindsvater_carter_full_width() {
    let rows = Rows::load("rect_full.csv");
    let mut n = 0;
    for r in rows.iter() {
        assert!(
            rel(r("q_fluids_kc_m3s"), r("q_cited_kc_m3s")) < 5e-3,
            "fluids vs cited"
        );
        let w = RectangularWeir::new(
            -r("kh_kc_m") as f32,
            (r("b_m") + r("kb_kc_m")) as f32,
            r("ce_kc") as f32,
            0,
        )
        .unwrap();
        let q = w.discharge_m3s(r("h_m") as f32, None) as f64;
        assert!(
            rel(q, r("q_cited_kc_m3s")) < 2e-3,
            "h={} q={q} cited={}",
            r("h_m"),
            r("q_cited_kc_m3s")
        );
        n += 1;
    }
    assert!(n > 40);
}

/// SIA (1924) full-width weir (source: the SIA formula as reproduced by Bos 1989 — from
/// memory —, hand-evaluated in the script): our weir with Cd = μ_SIA reproduces it.
/// Discrepancy noted: fluids' `Q_weir_rectangular_full_SIA` (which its own docstring says not
/// to use) multiplies by h instead of h^1.5 and adds the approach term; it is 1.3× to 5.8× the
/// cited value over this table — pinned here so a fixed fluids release is noticed.
#[test]
fn suppressed_weir_matches_sia_and_fluids_sia_is_off() {
    let rows = Rows::load("rect_full.csv");
    for r in rows.iter() {
        let w = RectangularWeir::new(0.0, r("b_m") as f32, r("mu_sia") as f32, 0).unwrap();
        let q = w.discharge_m3s(r("h_m") as f32, None) as f64;
        assert!(rel(q, r("q_cited_sia_m3s")) < 2e-3);
        assert!(
            r("q_fluids_sia_m3s") / r("q_cited_sia_m3s") > 1.3,
            "fluids SIA discrepancy"
        );
    }
}

/// Contracted weir. (1) Kindsvater & Carter at L/B = 0.2 (source: USBR WMM ch. 7, eq. 7-1/7-2,
/// kh = 0.003 ft): our suppressed weir with Ce, kh, kb reproduces it. Discrepancy noted:
/// fluids' `Q_weir_rectangular_Kindsvater_Carter` uses kh = 0.0001 m instead of 0.003 ft
/// (0.000914 m), so it reads up to 4.3 % low at 3 cm head; the remaining coefficient
/// difference is < 0.6 %. (2) Francis, `Q = 3.33 (L − 0.2H) H^1.5` ft-units (source: Francis
/// 1883 via USBR WMM ch. 7): our weir with 2 end contractions and Cd = 3.33/((2/3)√(2g_ft))
/// reproduces it — the contraction rule and exponent are the published ones. (3) The two
/// published methods agree with each other within 3.5 % over h ≤ b/3.
#[test]
fn contracted_weir_matches_francis_and_kindsvater_carter() {
    let rows = Rows::load("rect_contracted.csv");
    let ft = 0.3048_f64;
    let cd_francis = 3.33 / ((2.0 / 3.0) * (2.0 * 9.80665 / ft).sqrt());
    let mut worst_fluids_low = 0.0_f64;
    for r in rows.iter() {
        let (h, b) = (r("h_m"), r("b_m"));
        let ratio = r("q_fluids_kc_m3s") / r("q_cited_kc_m3s");
        assert!(
            ratio < 1.006 && ratio > 0.955,
            "fluids contracted KC vs cited: {ratio}"
        );
        // fluids with the cited kh restored comes within 0.6 % of the cited formula.
        let kh_fix = ((h + r("kh_kc_m")) / (h + 0.0001)).powf(1.5);
        assert!(
            rel(ratio * kh_fix, 1.0) < 6e-3,
            "remaining difference is the coefficient"
        );
        worst_fluids_low = worst_fluids_low.max(1.0 - ratio);

        let kc = RectangularWeir::new(
            -r("kh_kc_m") as f32,
            (b + r("kb_kc_m")) as f32,
            r("ce_kc") as f32,
            0,
        )
        .unwrap();
        assert!(rel(kc.discharge_m3s(h as f32, None) as f64, r("q_cited_kc_m3s")) < 2e-3);

        let fr = RectangularWeir::new(0.0, b as f32, cd_francis as f32, 2).unwrap();
        let q = fr.discharge_m3s(h as f32, None) as f64;
        assert!(
            rel(q, r("q_francis_m3s")) < 2e-3,
            "Francis h={h} b={b}: {q} vs {}",
            r("q_francis_m3s")
        );

        assert!(
            rel(r("q_francis_m3s"), r("q_cited_kc_m3s")) < 0.035,
            "Francis vs KC"
        );
    }
    assert!(
        worst_fluids_low > 0.04,
        "the documented fluids kh discrepancy is still there"
    );
}

/// Kindsvater–Shen V-notch (source: USBR WMM ch. 7 eq. 7-3, Q = 4.28·Ce·tan(θ/2)·(h + kh)^2.5
/// in ft-units, 4.28 = (8/15)√(2g), hand-evaluated in the script with fluids' Ce and kh):
/// our V-notch with Cd = Ce and the vertex lowered by kh reproduces it for 20°–100°.
/// Discrepancy noted: fluids' `Q_weir_V_Shen` drops the (8/15)·√2 factor, reading exactly
/// 1/((8/15)·√2) = 1.3258 times the cited formula.
#[test]
fn vnotch_matches_kindsvater_shen_and_fluids_shen_is_off_by_a_constant() {
    let rows = Rows::load("vnotch.csv");
    let factor = 1.0 / ((8.0 / 15.0) * 2.0_f64.sqrt());
    for r in rows.iter() {
        assert!(rel(r("q_fluids_m3s") / r("q_cited_m3s"), factor) < 1e-9);
        let w = VNotchWeir::new(-r("kh_m") as f32, r("angle_deg") as f32, r("ce") as f32).unwrap();
        let q = w.discharge_m3s(r("h_m") as f32, None) as f64;
        assert!(
            rel(q, r("q_cited_m3s")) < 2e-3,
            "angle {} h {}",
            r("angle_deg"),
            r("h_m")
        );
    }
}

/// Formula shape: V-notch discharge scales with h^2.5 and tan(θ/2), rectangular with h^1.5
/// (source: the Kindsvater–Shen and weir laws as cited above).
#[test]
fn weir_exponents_and_angle_effect() {
    let v90 = VNotchWeir::new(0.0, 90.0, 0.58).unwrap();
    let v60 = VNotchWeir::new(0.0, 60.0, 0.58).unwrap();
    let r = v90.discharge_m3s(0.4, None) / v90.discharge_m3s(0.2, None);
    assert!((r as f64 / 2.0_f64.powf(2.5) - 1.0).abs() < 1e-5);
    let a = v60.discharge_m3s(0.3, None) / v90.discharge_m3s(0.3, None);
    assert!((a as f64 / (30.0_f64.to_radians().tan()) - 1.0).abs() < 1e-5);
    let w = RectangularWeir::new(0.0, 2.0, 0.62, 0).unwrap();
    let r = w.discharge_m3s(0.4, None) / w.discharge_m3s(0.1, None);
    assert!((r as f64 / 8.0 - 1.0).abs() < 1e-5);
}
