//! Rational-method peaks, weighted C and the frequency factor, against hand calculation with
//! the NIST unit definitions (1 ha = 10 000 m², 1 h = 3600 s, 1 in = 25.4 mm, 1 acre =
//! 43 560 ft², 1 ft = 0.3048 m) and the f64 reference `holdback_tests::runoff64`.

use holdback_core::runoff::rational::{self, CFS_PER_ACRE_IN_H, M2_PER_ACRE, M3S_PER_MM_H_HA};
use holdback_core::runoff::{
    AreaAcres, AreaHa, DesignFrequency, LandCoverMix, LandCoverPart, RunoffCoefficient, RunoffError,
};
use holdback_tests::runoff64 as r64;
use proptest::prelude::*;

fn c(v: f32) -> RunoffCoefficient {
    RunoffCoefficient::new(v).unwrap()
}

/// Hand calculation (NIST definitions): C = 0.8, i = 90 mm/h, A = 2.5 ha.
/// i = 0.09 m / 3600 s = 2.5e-5 m/s; A = 25 000 m²; Q = 0.8 · 2.5e-5 · 25 000 = 0.5 m³/s.
#[test]
fn si_peak_matches_hand_calculation() {
    let q = rational::peak_m3s(c(0.8), 90.0, AreaHa::new(2.5).unwrap());
    assert!((q - 0.5).abs() < 1e-6, "{q}");
    assert!((r64::rational_si_m3s(0.8, 90.0, 2.5) - 0.5).abs() < 1e-12);
}

/// Hand calculation (NIST definitions): C = 0.6, i = 3 in/h, A = 12 acres.
/// i = 0.25 ft / 3600 s; A = 522 720 ft²; Q = 0.6 · 0.25 · 522 720 / 3600 = 21.78 cfs
/// (= 1.008 33 · 0.6 · 3 · 12).
#[test]
fn us_peak_matches_hand_calculation() {
    let q = rational::peak_cfs(c(0.6), 3.0, AreaAcres::new(12.0).unwrap());
    assert!((q - 21.78).abs() < 1e-4, "{q}");
    assert!((r64::rational_us_cfs(0.6, 3.0, 12.0) - 21.78).abs() < 1e-10);
}

/// The unit factors are the NIST definitions combined: 1/360 and 43 560/12/3600 = 1.008 33.
#[test]
fn unit_factors_follow_from_nist_definitions() {
    let si = 1e-3 * r64::M2_PER_HA / r64::S_PER_H;
    assert!((M3S_PER_MM_H_HA as f64 - si).abs() < 1e-9);
    let us = r64::FT2_PER_ACRE / 12.0 / r64::S_PER_H;
    assert!((CFS_PER_ACRE_IN_H as f64 - us).abs() < 1e-6);
    assert!((us - 1.008_333).abs() < 1e-6);
    let acre_m2 = r64::FT2_PER_ACRE * r64::M_PER_FT * r64::M_PER_FT;
    assert!((M2_PER_ACRE as f64 - acre_m2).abs() < 1e-3);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// f32 peaks agree with the f64 reference within 1e-6 relative (a few f32 roundings).
    #[test]
    fn peaks_match_f64_reference(cv in 0.0f32..=1.0, i in 0.0f32..300.0, a in 0.0f32..500.0) {
        let q = rational::peak_m3s(c(cv), i, AreaHa::new(a).unwrap()) as f64;
        let r = r64::rational_si_m3s(cv as f64, i as f64, a as f64);
        prop_assert!((q - r).abs() <= 1e-6 * r + 1e-12, "{q} vs {r}");
        let q = rational::peak_cfs(c(cv), i / 25.4, AreaAcres::new(a).unwrap()) as f64;
        let r = r64::rational_us_cfs(cv as f64, (i / 25.4) as f64, a as f64);
        prop_assert!((q - r).abs() <= 1e-6 * r + 1e-12, "{q} vs {r}");
    }

    /// The same storm on the same land in either unit system gives the same flow: US inputs
    /// converted to SI by the NIST definitions (in/h · 25.4 = mm/h, acre · 0.404 686 = ha) and
    /// the cfs result converted by 0.3048³ m³/ft³, within 1e-5 relative.
    #[test]
    fn us_and_si_forms_agree(cv in 0.0f32..=1.0, i_in_h in 0.0f32..12.0, acres in 0.0f32..1000.0) {
        let us = rational::peak_cfs(c(cv), i_in_h, AreaAcres::new(acres).unwrap()) as f64
            * r64::M_PER_FT.powi(3);
        let i_mm_h = i_in_h * 25.4;
        let si = rational::peak_m3s(c(cv), i_mm_h, AreaAcres::new(acres).unwrap().to_ha()) as f64;
        prop_assert!((us - si).abs() <= 1e-5 * si.max(1e-9), "{us} vs {si}");
    }

    /// Weighted C equals Σ C·A / Σ A (f64 reference) within 1e-5 and stays within [min C, max C].
    #[test]
    fn weighted_c_is_the_area_weighted_mean(parts in prop::collection::vec((0.0f32..=1.0, 0.01f32..100.0), 1..16)) {
        let ps: Vec<LandCoverPart> = parts.iter().map(|&(cv, a)| LandCoverPart::new(cv, a).unwrap()).collect();
        let mix = LandCoverMix::new(&ps).unwrap();
        let r = r64::weighted_c(&parts.iter().map(|&(cv, a)| (cv as f64, a as f64)).collect::<Vec<_>>());
        let got = mix.coefficient().value() as f64;
        prop_assert!((got - r).abs() < 1e-5, "{got} vs {r}");
        let lo = parts.iter().map(|p| p.0).fold(1.0, f32::min);
        let hi = parts.iter().map(|p| p.0).fold(0.0, f32::max);
        prop_assert!(got as f32 >= lo - 1e-6 && got as f32 <= hi + 1e-6);
    }
}

/// Hand calculation: 3 ha roofs at 0.9, 5 ha lawn at 0.2, 2 ha paving at 0.85:
/// (2.7 + 1.0 + 1.7) / 10 = 0.54.
#[test]
fn weighted_c_hand_calculation() {
    let mix = LandCoverMix::new(&[
        LandCoverPart::new(0.9, 3.0).unwrap(),
        LandCoverPart::new(0.2, 5.0).unwrap(),
        LandCoverPart::new(0.85, 2.0).unwrap(),
    ])
    .unwrap();
    assert!((mix.coefficient().value() - 0.54).abs() < 1e-6);
    assert!((mix.total_area().ha() - 10.0).abs() < 1e-6);
}

/// Frequency factors (from memory: the Cf table reprinted in many US urban drainage manuals):
/// 1.0 for ≤ 10 yr, 1.1 for 25, 1.2 for 50, 1.25 for 100, and C·Cf capped at 1.
#[test]
fn frequency_factor_table_and_cap() {
    for (t, cf) in [
        (2.0, 1.0),
        (10.0, 1.0),
        (25.0, 1.1),
        (50.0, 1.2),
        (100.0, 1.25),
    ] {
        let f = DesignFrequency::from_return_period_yr(t).unwrap();
        assert_eq!(f.factor(), cf, "T = {t}");
        let adjusted = c(0.6).with_frequency(f).value();
        assert!((adjusted - 0.6 * cf).abs() < 1e-6);
    }
    assert_eq!(c(0.85).with_frequency(DesignFrequency::Yr100).value(), 1.0);
}

/// Errors name the field and the value.
#[test]
fn validation_errors_name_field_and_value() {
    let e = RunoffCoefficient::new(1.2).unwrap_err();
    assert_eq!(e.to_string(), "runoff_coefficient = 1.2: must be in [0, 1]");
    let e = RunoffCoefficient::new(-0.1).unwrap_err();
    assert!(e.to_string().starts_with("runoff_coefficient = -0.1"));
    let e = AreaHa::new(-2.0).unwrap_err();
    assert_eq!(e.to_string(), "area_ha = -2: must be a finite number >= 0");
    assert!(AreaAcres::new(-2.0).is_err());
    assert!(matches!(
        LandCoverMix::new(&[]),
        Err(RunoffError::Empty { .. })
    ));
    assert!(DesignFrequency::from_return_period_yr(0.0).is_err());
}
