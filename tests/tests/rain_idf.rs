//! IDF curves and tables against direct f64 evaluation of the published forms (Talbot
//! `i = a/(t+b)`, Sherman `i = a/(t+b)^c`, power law `i = a·t^(−b)`; t in min, i in mm/h) and
//! of log–log interpolation (`rain64`); inversion round-trips and monotonicity as properties.
//! Coefficients are drawn at random: the checks are against the formulas, not against data.

use holdback_core::rain::{
    GaugeSettings, Idf, IdfCurves, IdfFormula, IdfTable, RainError, RainGauge, ReturnPeriod,
};
use holdback_tests::rain64;
use proptest::prelude::*;

const TS: [f32; 6] = [2.0, 5.0, 10.0, 25.0, 50.0, 100.0];
const DS: [f32; 8] = [5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 360.0, 1440.0];

/// A Sherman family rising with T: a_k = a0 · (1 + g·k).
fn sherman_family(a0: f32, g: f32, b: f32, c: f32) -> IdfCurves {
    let curves: Vec<(f32, IdfFormula)> = TS
        .iter()
        .enumerate()
        .map(|(k, &t)| {
            (
                t,
                IdfFormula::Sherman {
                    a: a0 * (1.0 + g * k as f32),
                    b,
                    c,
                },
            )
        })
        .collect();
    IdfCurves::new(&curves, 5.0, 1440.0).unwrap()
}

/// A table from the f64 Sherman formula at DS × TS, rows per duration.
fn sherman_table(a0: f64, g: f64, b: f64, c: f64) -> (IdfTable, Vec<Vec<f64>>) {
    let cells: Vec<Vec<f64>> = DS
        .iter()
        .map(|&d| {
            (0..TS.len())
                .map(|k| rain64::sherman(a0 * (1.0 + g * k as f64), b, c, d as f64))
                .collect()
        })
        .collect();
    let flat: Vec<f32> = cells.iter().flatten().map(|&x| x as f32).collect();
    (IdfTable::new(&DS, &TS, &flat).unwrap(), cells)
}

fn years(r: ReturnPeriod) -> f32 {
    match r {
        ReturnPeriod::Years(y) => y,
        other => panic!("expected Years, got {other:?}"),
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Each form equals its published formula evaluated in f64 (relative 2e-6: f32 rounding
    /// of one powf and a division).
    #[test]
    fn forms_match_published_formulas(a in 100.0f32..5000.0, b in 0.0f32..30.0, c in 0.4f32..1.1,
                                      t in 1.0f32..1440.0) {
        let (a64, b64, c64, t64) = (a as f64, b as f64, c as f64, t as f64);
        let cases = [
            (IdfFormula::Talbot { a, b }, rain64::talbot(a64, b64, t64)),
            (IdfFormula::Sherman { a, b, c }, rain64::sherman(a64, b64, c64, t64)),
            (IdfFormula::PowerLaw { a, b: c }, rain64::power_law(a64, c64, t64)),
        ];
        for (f, want) in cases {
            let got = f.intensity_mm_h(t) as f64;
            prop_assert!(((got - want) / want).abs() < 2e-6, "{f:?} t={t}: {got} vs {want}");
        }
    }

    /// T → i → T round-trips within 1e-3 relative for curves and tables (same log–log rule
    /// both ways; f32 logarithms).
    #[test]
    fn return_period_round_trips(a0 in 300.0f32..3000.0, g in 0.1f32..0.6, b in 0.0f32..20.0,
                                 c in 0.5f32..1.0, d in 5.0f32..1440.0, t in 2.0f32..100.0) {
        let cv = sherman_family(a0, g, b, c);
        let i = cv.intensity_mm_h(d, t);
        let back = years(cv.return_period(i, d));
        prop_assert!((back - t).abs() / t < 1e-3, "curves: {t} -> {i} -> {back}");
        let (tb, _) = sherman_table(a0 as f64, g as f64, b as f64, c as f64);
        let i = tb.intensity_mm_h(d, t);
        let back = years(tb.return_period(i, d));
        prop_assert!((back - t).abs() / t < 1e-3, "table: {t} -> {i} -> {back}");
    }

    /// Intensity never rises with duration and rises with return period (the defining shape
    /// of an IDF relation), for curves and tables; depth = i·t/60.
    #[test]
    fn intensity_falls_with_duration_and_rises_with_return_period(
        a0 in 300.0f32..3000.0, g in 0.1f32..0.6, b in 0.0f32..20.0, c in 0.5f32..1.0,
        d1 in 5.0f32..1440.0, d2 in 5.0f32..1440.0, t1 in 2.0f32..100.0, t2 in 2.0f32..100.0) {
        let (dl, dh) = if d1 < d2 { (d1, d2) } else { (d2, d1) };
        let (tl, th) = if t1 < t2 { (t1, t2) } else { (t2, t1) };
        let cv = sherman_family(a0, g, b, c);
        let (tb, _) = sherman_table(a0 as f64, g as f64, b as f64, c as f64);
        let tol = 1.0 + 1e-5;
        for idf in [&cv as &dyn IdfDyn, &tb] {
            prop_assert!(idf.i(dh, tl) <= idf.i(dl, tl) * tol);
            prop_assert!(idf.i(dl, tl) <= idf.i(dl, th) * tol);
        }
        let dep = cv.depth_mm(dl, tl);
        prop_assert!((dep - cv.intensity_mm_h(dl, tl) * dl / 60.0).abs() <= 1e-5 * dep);
    }

    /// Table interpolation equals the f64 log–log interpolation of the same cells (relative
    /// 1e-4: f32 cells and logarithms), and reproduces the cells at the nodes.
    #[test]
    fn table_interpolation_matches_f64_loglog(a0 in 300.0f64..3000.0, g in 0.1f64..0.6,
                                               b in 0.0f64..20.0, c in 0.5f64..1.0,
                                               d in 5.0f32..1440.0, t in 2.0f32..100.0) {
        let (tb, cells) = sherman_table(a0, g, b, c);
        let ds: Vec<f64> = DS.iter().map(|&x| x as f64).collect();
        let ts: Vec<f64> = TS.iter().map(|&x| x as f64).collect();
        let want = rain64::table_loglog(&ds, &ts, &cells, d as f64, t as f64);
        let got = tb.intensity_mm_h(d, t) as f64;
        prop_assert!(((got - want) / want).abs() < 1e-4, "{got} vs {want}");
        for (j, &dd) in DS.iter().enumerate() {
            for (k, &tt) in TS.iter().enumerate() {
                let node = tb.intensity_mm_h(dd, tt) as f64;
                prop_assert!(((node - cells[j][k]) / cells[j][k]).abs() < 1e-5);
            }
        }
    }
}

/// Object-safe view for looping over both kinds in one property.
trait IdfDyn {
    fn i(&self, d: f32, t: f32) -> f32;
}
impl<X: Idf> IdfDyn for X {
    fn i(&self, d: f32, t: f32) -> f32 {
        self.intensity_mm_h(d, t)
    }
}

/// Outside the tabulated return periods the inversion answers with a typed bound, never an
/// extrapolated number; zero or NaN intensity is "less than T_min".
#[test]
fn inversion_outside_the_table_is_a_typed_bound() {
    let cv = sherman_family(1000.0, 0.3, 10.0, 0.8);
    let d = 30.0;
    let i2 = rain64::sherman(1000.0, 10.0, 0.8, 30.0) as f32;
    let i100 = rain64::sherman(1000.0 * 2.5, 10.0, 0.8, 30.0) as f32;
    assert_eq!(cv.return_period(0.9 * i2, d), ReturnPeriod::LessThan(2.0));
    assert_eq!(
        cv.return_period(1.1 * i100, d),
        ReturnPeriod::GreaterThan(100.0)
    );
    assert_eq!(cv.return_period(0.0, d), ReturnPeriod::LessThan(2.0));
    assert_eq!(cv.return_period(f32::NAN, d), ReturnPeriod::LessThan(2.0));
    assert!((years(cv.return_period(i2, d)) - 2.0).abs() < 1e-3);
    assert!(ReturnPeriod::GreaterThan(100.0).rarer_than(&ReturnPeriod::Years(99.0)));
    assert!(ReturnPeriod::Years(3.0).rarer_than(&ReturnPeriod::LessThan(2.0)));
}

/// The rarest duration of a storm: a 10-min burst of 6 mm (36 mm/h) inside ~13 mm over an
/// hour. The event's return period is the largest of the per-window return periods (source:
/// definition — the event is as rare as its rarest duration), and the window that gives it is
/// reported. With power-law curves `i_2 = 150·t^−0.6` the 2-year intensity is 37.7 mm/h at
/// 10 min (the burst is below it) but 13.0 mm/h at 60 min (the hour is above it), so the hour
/// is the rarer duration (arithmetic from the formula).
#[test]
fn event_return_period_is_the_maximum_over_durations() {
    let mut g = RainGauge::<256>::new(&GaugeSettings::default(), &[300, 600, 1800, 3600]).unwrap();
    g.step(0, false);
    let mut t = 0;
    for _ in 0..15 {
        t += 120;
        g.record_tip(t); // 1.5 mm over 30 min before the burst
    }
    for _ in 0..30 {
        t += 20;
        g.record_tip(t); // 6 mm in 10 min
    }
    for _ in 0..22 {
        t += 60;
        g.record_tip(t);
    }
    let ev = *g.current_event().unwrap();
    let curves: Vec<(f32, IdfFormula)> = TS
        .iter()
        .enumerate()
        .map(|(k, &tr)| {
            (
                tr,
                IdfFormula::PowerLaw {
                    a: 150.0 * (1.0 + 0.35 * k as f32),
                    b: 0.6,
                },
            )
        })
        .collect();
    let cv = IdfCurves::new(&curves, 5.0, 1440.0).unwrap();
    let r = cv.event_rarity(&ev).unwrap();
    let mut best: Option<(f32, ReturnPeriod)> = None;
    for p in ev.peaks() {
        let rp = cv.return_period(p.intensity_mm_h, p.window_s as f32 / 60.0);
        if best.is_none_or(|b| rp.rarer_than(&b.1)) {
            best = Some((p.window_s as f32 / 60.0, rp));
        }
    }
    let (d, rp) = best.unwrap();
    assert_eq!((r.duration_min, r.return_period), (d, rp));
    assert!(matches!(r.return_period, ReturnPeriod::Years(_)), "{r:?}");
    assert_eq!(r.duration_min, 60.0, "{r:?}");
    let p10 = ev.peaks().iter().find(|p| p.window_s == 600).unwrap();
    assert!((p10.intensity_mm_h - 36.0).abs() < 0.5, "{p10:?}");
    assert_eq!(
        cv.return_period(p10.intensity_mm_h, 10.0),
        ReturnPeriod::LessThan(2.0)
    );
}

/// Validation: every malformed IDF description is refused with a named error.
#[test]
fn malformed_idf_descriptions_are_rejected() {
    let f = |a| IdfFormula::Talbot { a, b: 10.0 };
    assert!(matches!(
        IdfCurves::new(&[(5.0, f(100.0)), (2.0, f(200.0))], 5.0, 60.0),
        Err(RainError::NotIncreasing { .. })
    ));
    assert!(matches!(
        IdfCurves::new(&[(2.0, f(-1.0))], 5.0, 60.0),
        Err(RainError::Invalid(_))
    ));
    assert!(matches!(
        IdfCurves::new(
            &[(
                2.0,
                IdfFormula::Sherman {
                    a: 1.0,
                    b: 1.0,
                    c: 0.0
                }
            )],
            5.0,
            60.0
        ),
        Err(RainError::Invalid(_))
    ));
    assert!(matches!(
        IdfCurves::new(
            &[(2.0, IdfFormula::PowerLaw { a: 1.0, b: -0.5 })],
            5.0,
            60.0
        ),
        Err(RainError::Invalid(_))
    ));
    assert!(matches!(
        IdfCurves::new(&[(2.0, f(200.0)), (5.0, f(100.0))], 5.0, 60.0),
        Err(RainError::IntensityNotIncreasingWithReturnPeriod { .. })
    ));
    assert!(IdfCurves::new(&[(2.0, f(100.0))], 60.0, 5.0).is_err());
    assert!(matches!(
        IdfCurves::new(&[(0.0, f(100.0))], 5.0, 60.0),
        Err(RainError::Invalid(_))
    ));
    assert!(matches!(
        IdfCurves::new(&[], 5.0, 60.0),
        Err(RainError::TooFew { .. })
    ));
    let many: Vec<(f32, IdfFormula)> = (1..=13).map(|k| (k as f32, f(100.0 * k as f32))).collect();
    assert!(matches!(
        IdfCurves::new(&many, 5.0, 60.0),
        Err(RainError::TooMany { .. })
    ));
    let ts = [2.0, 10.0];
    assert!(matches!(
        IdfTable::new(&[10.0, 5.0], &ts, &[100.0, 150.0, 80.0, 120.0]),
        Err(RainError::NotIncreasing { .. })
    ));
    assert!(matches!(
        IdfTable::new(&[5.0, 10.0], &ts, &[100.0, 150.0, 110.0, 160.0]),
        Err(RainError::IntensityIncreasesWithDuration { .. })
    ));
    assert!(matches!(
        IdfTable::new(&[5.0, 10.0], &ts, &[100.0, 90.0, 80.0, 70.0]),
        Err(RainError::IntensityNotIncreasingWithReturnPeriod { .. })
    ));
    assert!(matches!(
        IdfTable::new(&[5.0, 10.0], &ts, &[100.0, 150.0, 80.0]),
        Err(RainError::LengthMismatch {
            expected: 4,
            got: 3
        })
    ));
    assert!(matches!(
        IdfTable::new(&[5.0, 10.0], &ts, &[100.0, 150.0, 0.0, 120.0]),
        Err(RainError::Invalid(_))
    ));
    assert!(matches!(
        IdfTable::new(&[5.0], &ts, &[1.0, 2.0]),
        Err(RainError::TooFew { .. })
    ));
    let e = IdfTable::new(&[5.0, 10.0], &ts, &[100.0, 150.0, 110.0, 160.0]).unwrap_err();
    assert!(format!("{e}").contains("rises with duration"));
}
