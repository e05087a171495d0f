//! Time–area convolution: volume conservation, agreement with the modified-rational
//! hydrograph for constant rain (f64 reference `holdback_tests::runoff64`), and the streaming
//! form against the batch form.

use holdback_core::runoff::time_area::MAX_TIME_AREA_STEPS;
use holdback_core::runoff::{
    AreaHa, Catchment, RunoffCoefficient, RunoffError, SubCatchment, TimeAreaInflow,
    TimeAreaResponse, TimeOfConcentration,
};
use holdback_tests::runoff64 as r64;
use proptest::prelude::*;

fn sub(c: f32, ha: f32, tc_s: u32, lag_s: u32) -> SubCatchment {
    SubCatchment::new(
        RunoffCoefficient::new(c).unwrap(),
        AreaHa::new(ha).unwrap(),
        TimeOfConcentration::from_s(tc_s).unwrap(),
        lag_s,
    )
    .unwrap()
}

/// (c, ha, tc_s, lag_s) tuples that fit 128 one-minute steps.
fn subs_strategy() -> impl Strategy<Value = Vec<(f32, f32, u32, u32)>> {
    prop::collection::vec(
        (0.05f32..=1.0, 0.1f32..50.0, 60u32..3600, 0u32..3600),
        1..=8,
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Volume conservation (the convolution's definition): Σ inflow·dt = Σ rain · Σ C·A, with
    /// C·A summed in f64 from the sub-catchments, within 1e-4 relative.
    #[test]
    fn convolution_conserves_volume(
        subs in subs_strategy(),
        rain in prop::collection::vec(0.0f32..20.0, 1..60),
        dt_s in prop::sample::select(vec![60u32, 120, 300]),
    ) {
        let list: Vec<_> = subs.iter().map(|&(c, a, tc, lag)| sub(c, a, tc, lag)).collect();
        let r = TimeAreaResponse::from_catchment(&Catchment::new(&list).unwrap(), dt_s).unwrap();
        let mut q = vec![0.0f32; rain.len() + r.ordinates_m2().len()];
        r.convolve(&rain, &mut q);
        let out: f64 = q.iter().map(|&x| x as f64 * dt_s as f64).sum();
        let ca_m2: f64 = subs.iter().map(|&(c, a, _, _)| c as f64 * a as f64 * r64::M2_PER_HA).sum();
        let fallen: f64 = rain.iter().map(|&p| p as f64 / 1000.0).sum::<f64>() * ca_m2;
        prop_assert!((out - fallen).abs() <= 1e-4 * fallen.max(1e-9), "{out} vs {fallen}");
        prop_assert!(q.iter().all(|&x| x >= 0.0 && x.is_finite()));
    }

    /// The same for a response given as user fractions: Σ inflow·dt = Σ rain · C·A.
    #[test]
    fn fractions_conserve_volume(
        weights in prop::collection::vec(0.0f32..1.0, 1..MAX_TIME_AREA_STEPS),
        rain in prop::collection::vec(0.0f32..20.0, 1..40),
        c in 0.05f32..=1.0, a in 0.1f32..50.0,
    ) {
        let total: f32 = weights.iter().sum();
        prop_assume!(total > 1e-3);
        let fractions: Vec<f32> = weights.iter().map(|w| w / total).collect();
        let r = TimeAreaResponse::from_fractions(60, RunoffCoefficient::new(c).unwrap(), AreaHa::new(a).unwrap(), &fractions).unwrap();
        let mut q = vec![0.0f32; rain.len() + fractions.len()];
        r.convolve(&rain, &mut q);
        let out: f64 = q.iter().map(|&x| x as f64 * 60.0).sum();
        let fallen = rain.iter().map(|&p| p as f64 / 1000.0).sum::<f64>() * c as f64 * a as f64 * r64::M2_PER_HA;
        prop_assert!((out - fallen).abs() <= 1e-4 * fallen.max(1e-9), "{out} vs {fallen}");
    }

    /// One sub-catchment's linear time–area, constant rain of whole steps: the step inflows
    /// equal the step means of the modified-rational hydrograph (f64 reference, shifted by the
    /// lag) within 1e-4 of its equilibrium peak. Linear time–area under constant rain is that
    /// hydrograph, so this holds for Tr below, at and above Tc.
    #[test]
    fn linear_time_area_reproduces_modified_rational(
        c in 0.05f32..=1.0, a in 0.1f32..50.0, tc in 60u32..3600, lag in 0u32..1800,
        i in 1.0f32..150.0, steps in 1usize..90,
    ) {
        let dt = 60u32;
        let r = TimeAreaResponse::from_catchment(&Catchment::new(&[sub(c, a, tc, lag)]).unwrap(), dt).unwrap();
        let rain = vec![i * dt as f32 / 3600.0; steps];
        let mut q = vec![0.0f32; steps + r.ordinates_m2().len()];
        r.convolve(&rain, &mut q);
        let qe = r64::rational_si_m3s(c as f64, i as f64, a as f64);
        let tr = (steps as u32 * dt) as f64;
        for (n, &got) in q.iter().enumerate() {
            let t0 = (n as u32 * dt) as f64 - lag as f64;
            let reference = r64::modified_rational_mean(t0, t0 + dt as f64, qe, tc as f64, tr);
            prop_assert!((got as f64 - reference).abs() <= 1e-4 * qe, "step {n}: {got} vs {reference}");
        }
    }

    /// Streaming (push one step, get this step's inflow) equals the batch convolution, and a
    /// projection with no further rain equals pushing zeros.
    #[test]
    fn streaming_equals_batch(subs in subs_strategy(), rain in prop::collection::vec(0.0f32..20.0, 1..200)) {
        let list: Vec<_> = subs.iter().map(|&(c, a, tc, lag)| sub(c, a, tc, lag)).collect();
        let r = TimeAreaResponse::from_catchment(&Catchment::new(&list).unwrap(), 60).unwrap();
        let mut batch = vec![0.0f32; rain.len()];
        r.convolve(&rain, &mut batch);
        let mut live = TimeAreaInflow::new(r);
        for (&p, &b) in rain.iter().zip(&batch) {
            let q = live.push_step(p);
            prop_assert!((q - b).abs() <= 1e-5 * b.max(1e-6), "{q} vs {b}");
        }
        let ahead = live.projected_inflow_m3s(3, 0.0);
        let mut copy = live.clone();
        for _ in 0..2 { copy.push_step(0.0); }
        let third = copy.push_step(0.0);
        prop_assert!((ahead - third).abs() <= 1e-5 * third.max(1e-6));
    }
}

/// Validation: step out of range, fractions not summing to 1, negative fractions, a catchment
/// too slow for the fixed capacity.
#[test]
fn validation_errors() {
    let c = RunoffCoefficient::new(0.5).unwrap();
    let a = AreaHa::new(1.0).unwrap();
    let e = TimeAreaResponse::from_fractions(60, c, a, &[0.2, 0.2]).unwrap_err();
    assert_eq!(
        e.to_string(),
        "time_area_fraction_sum = 0.4: must be 1 within 0.01"
    );
    assert!(TimeAreaResponse::from_fractions(0, c, a, &[1.0]).is_err());
    assert!(TimeAreaResponse::from_fractions(60, c, a, &[1.2, -0.2]).is_err());
    let slow = Catchment::new(&[sub(0.5, 1.0, 3600, 7200)]).unwrap();
    assert!(matches!(
        TimeAreaResponse::from_catchment(&slow, 60),
        Err(RunoffError::Capacity {
            capacity: MAX_TIME_AREA_STEPS,
            ..
        })
    ));
    assert!(TimeAreaResponse::from_catchment(&slow, 300).is_ok());
}
