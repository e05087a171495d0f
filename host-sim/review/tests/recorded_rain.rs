//! Return periods of storms in real recorded rain (Singapore gauge S117, data.gov.sg under
//! the Singapore Open Data Licence v1.0; Görlitz 17–18 July 2010, Source: Deutscher
//! Wetterdienst; see `tests/data/rain/README.md`) summarised by the review, against an
//! independent f64 computation: rolling window maxima straight from the raw rows
//! (`holdback_tests::rain64`, the definition of a sliding-window total), the Sherman formula
//! `i = a/(t+b)^c` (published form; `rain64::sherman`) at each tabulated return period, and
//! log–log interpolation in T between them (`rain64::loglog`), written here in f64.
//!
//! The IDF coefficients are parameters of this formula check, not a site's design values.

use holdback_core::event::{EventBody, EventRecord};
use holdback_review::pond::{CurveSpec, IdfSpec, Pond, PondInfo, WearBudget};
use holdback_review::storm::{self, Qualifier, SummaryOptions};
use holdback_tests::rain64;

const TS: [f64; 6] = [2.0, 5.0, 10.0, 25.0, 50.0, 100.0];
const A0: f64 = 800.0;
const G: f64 = 0.35;
const B: f64 = 10.0;
const C: f64 = 0.8;

fn a_k(k: usize) -> f64 {
    A0 * (1.0 + G * k as f64)
}

fn pond() -> Pond {
    Pond::new(PondInfo {
        pond_id: "check".into(),
        name: "formula check".into(),
        permit_m3s: 1.0,
        normal_m: 0.0,
        crest_m: 2.0,
        freeboard_min_m: 0.3,
        drawdown_target_s: 86_400,
        design_return_period_yr: 10.0,
        inter_event_s: 6.0 * 3600.0,
        idf: IdfSpec::Curves {
            curves: TS
                .iter()
                .enumerate()
                .map(|(k, &t)| CurveSpec {
                    return_period_yr: t as f32,
                    form: "sherman".into(),
                    a: a_k(k) as f32,
                    b: B as f32,
                    c: C as f32,
                })
                .collect(),
            min_duration_min: 5.0,
            max_duration_min: 1440.0,
        },
        wear: WearBudget {
            moves_per_year: 1000,
            travel_per_year: 100.0,
        },
        drift_limit_m_per_year: 0.05,
        normal_tolerance_m: 0.02,
    })
    .unwrap()
}

/// f64 return period of intensity `i` over `d` minutes: `None` outside the tabulated range.
fn t_ref(i: f64, d: f64) -> Option<f64> {
    let is: Vec<f64> = (0..TS.len())
        .map(|k| rain64::sherman(a_k(k), B, C, d))
        .collect();
    (0..TS.len() - 1)
        .find(|&k| i >= is[k] && i <= is[k + 1])
        .map(|k| rain64::loglog(i, is[k], is[k + 1], TS[k], TS[k + 1]))
}

/// Rows `(interval end s, mm)` of 5-minute totals as a log of `RainTotal` records.
fn log_of(rows: &[(i64, f64)], base: u32) -> Vec<EventRecord> {
    rows.iter()
        .enumerate()
        .map(|(k, &(t, mm))| EventRecord {
            seq: k as u32,
            time_s: base + t as u32,
            body: EventBody::RainTotal {
                window_s: 300,
                depth_mm: mm as f32,
            },
        })
        .collect()
}

fn check(rows: &[(i64, f64)], base: u32, expect_storms: usize) -> usize {
    let pond = pond();
    let summaries = storm::summarise(&pond, &log_of(rows, base), None, &SummaryOptions::default());
    let refs: Vec<Vec<(i64, f64)>> = rain64::storms(rows, 6 * 3600)
        .into_iter()
        .filter(|s| s.iter().map(|r| r.1).sum::<f64>() >= 2.0)
        .collect();
    assert_eq!(summaries.len(), refs.len());
    assert_eq!(refs.len(), expect_storms);
    let mut checked = 0;
    for (s, r) in summaries.iter().zip(&refs) {
        let first_wet = r.iter().find(|x| x.1 > 0.0).unwrap().0;
        assert_eq!(
            i64::from(s.start_s) - i64::from(base),
            first_wet - 300,
            "storm start"
        );
        let depth: f64 = r.iter().map(|x| x.1).sum();
        assert!((f64::from(s.rain_depth_mm.unwrap()) - depth).abs() < 1e-3 * depth.max(1.0));
        let mut best: Option<(f64, u32)> = None;
        for p in &s.peaks {
            let d = f64::from(p.duration_min);
            let i = rain64::max_window_depth(r, i64::from(p.duration_min) * 60) * 60.0 / d;
            let got_i = f64::from(p.intensity_mm_h);
            // f32 summation in the core: 1e-4 relative + 1e-3 mm/h.
            assert!(
                (got_i - i).abs() <= 1e-4 * i + 1e-3,
                "{d} min: {got_i} vs {i}"
            );
            match (t_ref(i, d), p.return_period.qualifier) {
                (Some(t), Qualifier::Equal) => {
                    // log–log slope amplifies the f32 intensity error by ln(T ratio)/ln(i
                    // ratio) (≤ ~15 for this family): 3e-3 relative.
                    let got = f64::from(p.return_period.years);
                    assert!((got - t).abs() <= 3e-3 * t, "{d} min: T {got} vs {t}");
                    checked += 1;
                    if best.is_none_or(|b| t > b.0) {
                        best = Some((t, p.duration_min));
                    }
                }
                (None, Qualifier::Less) => assert!(i < rain64::sherman(a_k(0), B, C, d) * 1.0001),
                (None, Qualifier::Greater) => {
                    assert!(i > rain64::sherman(a_k(5), B, C, d) * 0.9999)
                }
                (t, q) => panic!("{d} min, i = {i}: reference {t:?}, review {q:?}"),
            }
        }
        if let (Some((t, d)), Some((rp, dur))) = (best, s.rarest)
            && rp.qualifier == Qualifier::Equal
        {
            assert_eq!(dur, d, "rarest duration");
            assert!((f64::from(rp.years) - t).abs() <= 3e-3 * t);
        }
    }
    checked
}

/// Three S117 storms (each > 50 mm): every duration's return period against the f64
/// reference, and the rarest one named at the right duration.
#[test]
fn singapore_storms_return_periods_match_f64_reference() {
    let rows = rain64::load_sg_excerpt().unwrap();
    // 2017-01-01 00:00 SGT = 2016-12-31 16:00 UTC = 1_483_200_000 s since 1970.
    let n = check(&rows, 1_483_200_000, 3);
    assert!(n >= 10, "only {n} durations inside the tabulated range");
}

/// The Görlitz storm of 17–18 July 2010 (and the smaller rains around it).
#[test]
fn goerlitz_storm_return_periods_match_f64_reference() {
    let rows = rain64::load_dwd_excerpt().unwrap();
    // Dense 5-min rows: the sparse file lists wet steps only; dry steps are 0 (no row needed
    // for the window sums, and the review counts an absent interval as 0 mm).
    // 2010-01-01 00:00 UTC = 1_262_304_000 s since 1970.
    let storms = rain64::storms(&rows, 6 * 3600)
        .into_iter()
        .filter(|s| s.iter().map(|r| r.1).sum::<f64>() >= 2.0)
        .count();
    let n = check(&rows, 1_262_304_000, storms);
    assert!(n >= 1);
}
