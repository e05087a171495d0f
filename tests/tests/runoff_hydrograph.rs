//! Modified-rational hydrographs of one and several sub-catchments. The f64 reference
//! (`holdback_tests::runoff64::modified_rational_q`) is written case by case from the shape's
//! definition; the rules of thumb are marked as such.

use holdback_core::runoff::hydrograph::{MAX_RAIN_DURATION_S, MAX_SUB_CATCHMENTS};
use holdback_core::runoff::{
    AreaHa, Catchment, ModifiedRational, RunoffCoefficient, RunoffError, SubCatchment,
    TimeOfConcentration,
};
use holdback_tests::runoff64 as r64;
use proptest::prelude::*;

fn mr(c: f32, ha: f32, tc_s: u32, i_mm_h: f32, tr_s: u32) -> ModifiedRational {
    ModifiedRational::new(
        RunoffCoefficient::new(c).unwrap(),
        AreaHa::new(ha).unwrap(),
        TimeOfConcentration::from_s(tc_s).unwrap(),
        i_mm_h,
        tr_s,
    )
    .unwrap()
}

fn sub(c: f32, ha: f32, tc_s: u32, lag_s: u32) -> SubCatchment {
    SubCatchment::new(
        RunoffCoefficient::new(c).unwrap(),
        AreaHa::new(ha).unwrap(),
        TimeOfConcentration::from_s(tc_s).unwrap(),
        lag_s,
    )
    .unwrap()
}

fn sub_strategy() -> impl Strategy<Value = SubCatchment> {
    (0.05f32..=1.0, 0.1f32..50.0, 60u32..3600, 0u32..3600)
        .prop_map(|(c, a, tc, lag)| sub(c, a, tc, lag))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Q(t) matches the f64 reference at sampled seconds within 1e-5 of the peak, in all
    /// three cases (Tr < Tc, = Tc, > Tc).
    #[test]
    fn inflow_matches_reference(
        c in 0.0f32..=1.0, a in 0.0f32..100.0, i in 0.0f32..200.0,
        tc in 1u32..7200, tr in 1u32..14_400, ts in prop::collection::vec(0u32..25_000, 16)
    ) {
        let h = mr(c, a, tc, i, tr);
        let qe = r64::rational_si_m3s(c as f64, i as f64, a as f64);
        for t in ts.into_iter().chain([tc, tr, tc + tr, tc.min(tr), 0]) {
            let got = h.inflow_m3s(t) as f64;
            let r = r64::modified_rational_q(t as f64, qe, tc as f64, tr as f64);
            prop_assert!((got - r).abs() <= 1e-5 * qe + 1e-12, "t={t}: {got} vs {r}");
        }
    }

    /// Volume: integrating Q(t) numerically at 1 s (the hydrograph's corners are at whole
    /// seconds, so the trapezoid rule at 1 s is exact) gives C·i·A·Tr (closed form, f64)
    /// within 1e-5 relative; `volume_m3` gives the same.
    #[test]
    fn volume_is_c_i_a_tr(
        c in 0.05f32..=1.0, a in 0.1f32..100.0, i in 1.0f32..200.0, tc in 1u32..5400, tr in 1u32..10_800
    ) {
        let h = mr(c, a, tc, i, tr);
        let numeric: f64 = (0..=h.end_s()).map(|t| h.inflow_m3s(t) as f64).sum();
        let closed = r64::rational_si_m3s(c as f64, i as f64, a as f64) * tr as f64;
        prop_assert!((numeric - closed).abs() <= 1e-5 * closed, "{numeric} vs {closed}");
        prop_assert!((h.volume_m3() as f64 - closed).abs() <= 1e-5 * closed);
    }

    /// Common practice, no source: the peak of summed lagged hydrographs is at most the sum of
    /// their peaks. Also: the corner search finds the true maximum (brute force at 1 s), and
    /// the volumes add.
    #[test]
    fn summed_peak_is_at_most_sum_of_peaks(
        subs in prop::collection::vec(sub_strategy(), 1..=MAX_SUB_CATCHMENTS),
        i in 1.0f32..150.0, tr in 60u32..5400
    ) {
        let h = Catchment::new(&subs).unwrap().hydrograph(i, tr).unwrap();
        let (peak, t_peak) = h.peak();
        prop_assert!(peak <= h.sum_of_peaks_m3s() * (1.0 + 1e-6));
        let brute = (0..=h.end_s()).map(|t| h.inflow_m3s(t)).fold(0.0f32, f32::max);
        prop_assert!((peak - brute).abs() <= 1e-6 * brute.max(1e-9), "{peak} vs {brute}");
        prop_assert_eq!(h.inflow_m3s(t_peak), peak);
        let parts: f64 = h.parts().iter().map(|(p, _)| p.volume_m3() as f64).sum();
        prop_assert!((h.volume_m3() as f64 - parts).abs() <= 1e-5 * parts);
        let numeric: f64 = (0..=h.end_s()).map(|t| h.inflow_m3s(t) as f64).sum();
        prop_assert!((numeric - parts).abs() <= 1e-4 * parts, "{numeric} vs {parts}");
    }

    /// Common practice, no source: with a constant-intensity IDF the rational peak is largest
    /// when rain lasts at least Tc (shorter rain gives C·i·A·Tr/Tc < C·i·A).
    #[test]
    fn constant_idf_peak_is_largest_from_tc_on(tc in 60u32..7200, i in 1.0f32..200.0) {
        let at_tc = mr(0.7, 10.0, tc, i, tc).peak_m3s();
        for tr in (30..4 * tc).step_by(((tc / 20) as usize).max(1)) {
            let p = mr(0.7, 10.0, tc, i, tr).peak_m3s();
            if tr < tc {
                prop_assert!(p < at_tc);
            } else {
                prop_assert_eq!(p, at_tc);
            }
        }
    }

    /// Common practice, no source: with a Talbot IDF i = a/(b + t) (Talbot's form; a, b drawn
    /// at random, t in minutes) the modified-rational peak is largest when rain lasts Tc, and
    /// for rain longer than Tc it falls as the IDF intensity falls.
    #[test]
    fn talbot_idf_peak_is_largest_at_tc(a in 500.0f32..8000.0, b in 2.0f32..40.0, tc in 120u32..7200) {
        let talbot = |tr_s: u32| a / (b + tr_s as f32 / 60.0);
        let peak = |tr_s: u32| mr(0.6, 5.0, tc, talbot(tr_s), tr_s).peak_m3s();
        let at_tc = peak(tc);
        let mut previous = f32::INFINITY;
        for tr in (60..6 * tc).step_by(((tc / 16) as usize).max(1)) {
            let p = peak(tr);
            prop_assert!(p <= at_tc * (1.0 + 1e-6), "tr={tr}: {p} > {at_tc}");
            if tr > tc {
                prop_assert!(p < previous, "tr={tr}: {p} did not fall from {previous}");
                previous = p;
            }
        }
    }
}

/// Hand calculation of the three shapes (C = 0.5, i = 72 mm/h, A = 5 ha → C·i·A = 0.5 m³/s):
/// Tr = Tc = 20 min triangle; Tr = 60 min trapezoid with 40 min plateau; Tr = 5 min reduced
/// peak 0.5 · 5/20 = 0.125 m³/s held from 5 to 20 min.
#[test]
fn shapes_by_hand() {
    let tri = mr(0.5, 5.0, 1200, 72.0, 1200);
    assert!((tri.peak_m3s() - 0.5).abs() < 1e-6);
    assert_eq!(
        (tri.time_to_peak_s(), tri.peak_end_s(), tri.end_s()),
        (1200, 1200, 2400)
    );
    let trap = mr(0.5, 5.0, 1200, 72.0, 3600);
    assert_eq!(
        (trap.time_to_peak_s(), trap.peak_end_s(), trap.end_s()),
        (1200, 3600, 4800)
    );
    assert!((trap.volume_m3() - 1800.0).abs() < 1e-2);
    let short = mr(0.5, 5.0, 1200, 72.0, 300);
    assert!((short.peak_m3s() - 0.125).abs() < 1e-6);
    assert_eq!(
        (short.time_to_peak_s(), short.peak_end_s(), short.end_s()),
        (300, 1200, 1500)
    );
    assert!((short.inflow_m3s(150) - 0.0625).abs() < 1e-6);
}

/// Validation: negative or NaN intensity, zero or too long rain, too long lag, empty or
/// over-full catchment.
#[test]
fn validation_errors() {
    let c = RunoffCoefficient::new(0.5).unwrap();
    let a = AreaHa::new(1.0).unwrap();
    let tc = TimeOfConcentration::from_s(600).unwrap();
    let e = ModifiedRational::new(c, a, tc, -3.0, 600).unwrap_err();
    assert_eq!(
        e.to_string(),
        "intensity_mm_h = -3: must be a finite number >= 0"
    );
    assert!(ModifiedRational::new(c, a, tc, 10.0, 0).is_err());
    assert!(ModifiedRational::new(c, a, tc, 10.0, MAX_RAIN_DURATION_S + 1).is_err());
    assert!(SubCatchment::new(c, a, tc, u32::MAX).is_err());
    assert!(matches!(
        Catchment::new(&[]),
        Err(RunoffError::Empty { .. })
    ));
    let s = sub(0.5, 1.0, 600, 0);
    assert!(matches!(
        Catchment::new(&[s; MAX_SUB_CATCHMENTS + 1]),
        Err(RunoffError::Capacity {
            capacity: MAX_SUB_CATCHMENTS,
            ..
        })
    ));
    let catchment = Catchment::new(&[s]).unwrap();
    assert!(catchment.hydrograph(f32::NAN, 600).is_err());
    assert!(catchment.hydrograph(10.0, 0).is_err());
}
