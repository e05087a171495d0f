//! Time of concentration: Kirpich (1940) in SI and US forms, Manning velocities, flow paths.
//! Sources beside each check; the f64 reference is `holdback_tests::runoff64`.

use holdback_core::runoff::tc::{
    self, KIRPICH_SI, KIRPICH_US, MAX_TC_S, kirpich_si_min, kirpich_us_min, manning_velocity_m_s,
};
use holdback_core::runoff::{FlowPath, RunoffError, Segment, TimeOfConcentration};
use holdback_tests::runoff64 as r64;
use proptest::prelude::*;

/// Kirpich (1940), Civil Engineering 10(6):362 (constants from memory), worked by hand with
/// powers of ten: L = 1000, S = 0.01 → L^0.77 = 10^2.31 = 204.174, S^−0.385 = 10^0.77 =
/// 5.888 44, product 1202.27; SI (L in m): 0.0195 · 1202.27 = 23.444 min; US (L in ft):
/// 0.0078 · 1202.27 = 9.3777 min.
#[test]
fn kirpich_worked_by_hand() {
    let si = kirpich_si_min(1000.0, 0.01).unwrap();
    assert!((si - 23.444).abs() < 2e-3, "{si}");
    let us = kirpich_us_min(1000.0, 0.01).unwrap();
    assert!((us - 9.3777).abs() < 1e-3, "{us}");
    assert!((r64::kirpich_min(0.0195, 1000.0, 0.01) - 23.444).abs() < 1e-3);
    assert_eq!(
        TimeOfConcentration::kirpich_si(1000.0, 0.01).unwrap().s(),
        1407
    ); // 23.444 · 60
}

/// The SI and US constants are one formula in two length units: 0.0078 · (1/0.3048)^0.77 =
/// 0.019 47, which rounds to the published 0.0195 (within 0.2 %; 1 ft = 0.3048 m, NIST).
#[test]
fn kirpich_si_constant_is_the_us_constant_converted() {
    let converted = 0.0078_f64 * (1.0 / r64::M_PER_FT).powf(0.77);
    assert!((converted - 0.0195).abs() / 0.0195 < 2e-3, "{converted}");
    assert!(((KIRPICH_SI as f64) - converted).abs() / converted < 2e-3);
    assert_eq!(KIRPICH_US, 0.0078);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// f32 Kirpich agrees with the f64 reference within 1e-5 relative (libm powf ≤ 1 ulp),
    /// and the two forms agree on the same ground (L_ft = L_m / 0.3048) within 0.2 %, the
    /// rounding of the published constants.
    #[test]
    fn kirpich_matches_reference_in_both_units(l_m in 10.0f32..20_000.0, s in 0.0005f32..0.5) {
        let si = kirpich_si_min(l_m, s).unwrap() as f64;
        let r = r64::kirpich_min(0.0195, l_m as f64, s as f64);
        prop_assert!((si - r).abs() <= 1e-5 * r, "{si} vs {r}");
        let l_ft = l_m as f64 / r64::M_PER_FT;
        let us = kirpich_us_min(l_ft as f32, s).unwrap() as f64;
        let r_us = r64::kirpich_min(0.0078, l_ft, s as f64);
        prop_assert!((us - r_us).abs() <= 1e-5 * r_us, "{us} vs {r_us}");
        prop_assert!((us - si).abs() <= 2e-3 * si, "{us} vs {si}");
    }

    /// Manning in a rectangle and a trapezoid agrees with the f64 reference (R = A/P from the
    /// geometry) within 1e-5 relative; z = 0 is the rectangle (analytic identity).
    #[test]
    fn channel_velocities_match_reference(
        b in 0.2f32..10.0, y in 0.05f32..3.0, z in 0.0f32..4.0, s in 0.0001f32..0.1, n in 0.01f32..0.08
    ) {
        let rect = Segment::rectangular(100.0, b, y, s, n).unwrap().velocity_m_s() as f64;
        let r = r64::manning_v(n as f64, r64::trapezoid_radius_m(b as f64, y as f64, 0.0), s as f64);
        prop_assert!((rect - r).abs() <= 1e-5 * r, "{rect} vs {r}");
        let trap = Segment::trapezoidal(100.0, b, y, z, s, n).unwrap().velocity_m_s() as f64;
        let r = r64::manning_v(n as f64, r64::trapezoid_radius_m(b as f64, y as f64, z as f64), s as f64);
        prop_assert!((trap - r).abs() <= 1e-5 * r, "{trap} vs {r}");
        let trap0 = Segment::trapezoidal(100.0, b, y, 0.0, s, n).unwrap().velocity_m_s() as f64;
        prop_assert!((trap0 - rect).abs() <= 1e-6 * rect);
    }

    /// Full pipe: V = (1/n)(D/4)^(2/3) S^(1/2) (Manning 1891; R = area/perimeter = D/4 for a
    /// full circle), against the f64 reference within 1e-5 relative.
    #[test]
    fn full_pipe_velocity_matches_reference(d in 0.1f32..3.0, s in 0.0005f32..0.05, n in 0.009f32..0.025) {
        let v = Segment::full_pipe(50.0, d, s, n).unwrap().velocity_m_s() as f64;
        let r = r64::manning_v(n as f64, r64::full_pipe_radius_m(d as f64), s as f64);
        prop_assert!((v - r).abs() <= 1e-5 * r, "{v} vs {r}");
    }
}

/// Manning full pipe by hand (Manning 1891, SI): D = 0.6 m, R = 0.15 m, n = 0.013, S = 0.01:
/// 0.15^(2/3) = e^(−1.264 75) = 0.282 31; V = 0.282 31 · 0.1 / 0.013 = 2.1716 m/s.
#[test]
fn full_pipe_velocity_by_hand() {
    let v = Segment::full_pipe(120.0, 0.6, 0.01, 0.013)
        .unwrap()
        .velocity_m_s();
    assert!((v - 2.1716).abs() < 5e-4, "{v}");
    let v2 = manning_velocity_m_s(0.013, 0.15, 0.01).unwrap();
    assert!((v - v2).abs() < 1e-6);
}

/// Common practice, no source: Tc of a sewered catchment is the inlet time plus the pipe
/// length over the flow velocity in each pipe. 5 min inlet, 120 m at 1.5 m/s (80 s) and
/// 240 m of full 0.6 m pipe (at the Manning velocity computed above, 2.1716 m/s → 110.5 s).
#[test]
fn sewered_tc_is_inlet_time_plus_pipe_travel() {
    let pipe = Segment::full_pipe(240.0, 0.6, 0.01, 0.013).unwrap();
    let path = FlowPath::new(300, &[Segment::at_velocity(120.0, 1.5).unwrap(), pipe]).unwrap();
    let expect = 300.0 + 120.0 / 1.5 + 240.0 / r64::manning_v(0.013, 0.15, 0.01);
    assert!(
        (path.tc().s() as f64 - expect).abs() <= 0.5,
        "{} vs {expect}",
        path.tc().s()
    );
    assert!((path.travel_s() as f64 - (expect - 300.0)).abs() < 1e-2);
    assert_eq!(path.inlet_s(), 300);
    assert_eq!(path.segments().len(), 2);
}

/// Validation: Tc ≤ 0, non-finite or beyond 48 h; zero or negative lengths, slopes, n, depth.
#[test]
fn validation_errors() {
    assert!(TimeOfConcentration::from_s(0).is_err());
    assert!(TimeOfConcentration::from_min(-1.0).is_err());
    assert!(TimeOfConcentration::from_min(0.0).is_err());
    assert!(TimeOfConcentration::from_s(MAX_TC_S + 1).is_err());
    assert!(kirpich_si_min(0.0, 0.01).is_err());
    assert!(kirpich_si_min(100.0, 0.0).is_err());
    assert!(kirpich_us_min(100.0, -0.01).is_err());
    // A nearly flat, very long path exceeds 48 h: rejected, not wrapped.
    assert!(TimeOfConcentration::kirpich_si(1.0e7, 1.0e-7).is_err());
    assert!(Segment::full_pipe(10.0, -0.3, 0.01, 0.013).is_err());
    assert!(tc::manning_velocity_m_s(0.013, 0.0, 0.01).is_err());
    let e = Segment::at_velocity(10.0, 0.0).unwrap_err();
    assert_eq!(
        e.to_string(),
        "velocity_m_s = 0: must be a finite number > 0"
    );
    assert!(matches!(
        FlowPath::new(0, &[]),
        Err(RunoffError::Invalid(_))
    ));
}
