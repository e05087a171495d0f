//! Design storms against their published definitions.
//!
//! - Alternating block (Chow, Maidment & Mays 1988, *Applied Hydrology* §14.4, from memory):
//!   blocks are the increments of the IDF depth–duration curve, so for a concave curve the
//!   deepest window of k steps holds exactly `D(k·dt)`.
//! - Chicago storm (Keifer & Chu 1957, J. Hydraulics Div. ASCE 83(HY4)): intensity before and
//!   after the peak is the slope of `D` at `tb/r` and `ta/(1−r)`; so the storm holds `D(Td)`,
//!   peaks at `r·Td`, and a window reaching `r·d` before and `(1−r)·d` after the peak holds
//!   `D(d)`.
//! - Uniform block: `i(Td)·Td`.
//!
//! `D(t) = i(t)·t/60` (mm, t in min) is evaluated in f64 from the published forms
//! (`rain64`). Tolerances are f32 rounding: relative 2e-5 on sums of up to 288 f32 steps.
//! IDF coefficients are drawn at random: the checks are against the definitions, not data.

use holdback_core::rain::{
    DesignStorm, DesignStormError, IdfCurves, IdfFormula, IdfTable, Pattern,
    keifer_chu_intensity_mm_h,
};
use holdback_tests::rain64;
use proptest::prelude::*;

fn curves(f: IdfFormula) -> IdfCurves {
    IdfCurves::new(&[(10.0, f)], 5.0, 1440.0).unwrap()
}

/// f64 depth–duration curve of one formula, mm (t in min).
fn depth64(f: IdfFormula, t_min: f64) -> f64 {
    if t_min <= 0.0 {
        return 0.0;
    }
    let i = match f {
        IdfFormula::Talbot { a, b } => rain64::talbot(a as f64, b as f64, t_min),
        IdfFormula::Sherman { a, b, c } => rain64::sherman(a as f64, b as f64, c as f64, t_min),
        IdfFormula::PowerLaw { a, b } => rain64::power_law(a as f64, b as f64, t_min),
    };
    i * t_min / 60.0
}

/// Concave depth curves: Talbot, and Sherman with c ≤ 1 (D'' < 0, see the design module).
fn concave_formula() -> impl Strategy<Value = IdfFormula> {
    prop_oneof![
        (500.0f32..5000.0, 2.0f32..30.0).prop_map(|(a, b)| IdfFormula::Talbot { a, b }),
        (200.0f32..3000.0, 2.0f32..30.0, 0.5f32..0.95).prop_map(|(a, b, c)| IdfFormula::Sherman {
            a,
            b,
            c
        }),
    ]
}

fn max_window(v: &[f32], k: usize) -> f64 {
    v.windows(k)
        .map(|w| w.iter().map(|&x| x as f64).sum::<f64>())
        .fold(0.0, f64::max)
}

fn close(x: f64, y: f64, rel: f64, abs: f64) -> bool {
    (x - y).abs() <= rel * y.abs() + abs
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Alternating block: the deepest window of k steps is D(k·dt) for every k (Chow et al.
    /// 1988 §14.4: the blocks are D's increments and the k largest sit together).
    #[test]
    fn alternating_block_reproduces_idf_depth_at_every_multiple_of_dt(
        f in concave_formula(),
        n in 2usize..72,
        dt_min in prop::sample::select(vec![1u32, 5, 10, 15]),
        r in 0.0f32..=1.0,
    ) {
        let idf = curves(f);
        let storm = DesignStorm::new(10.0, n as u32 * dt_min * 60, dt_min * 60)
            .unwrap()
            .with_peak_ratio(r)
            .unwrap();
        let mut out = vec![0.0f32; n];
        prop_assert_eq!(storm.fill(&idf, Pattern::AlternatingBlock, &mut out), Ok(n));
        for k in 1..=n {
            let want = depth64(f, (k as u32 * dt_min) as f64);
            let got = max_window(&out, k);
            prop_assert!(close(got, want, 2e-5, 1e-5), "k={} got {} want {}", k, got, want);
        }
        // The largest block sits in the peak step, and depths fall away from it on each side.
        let p = storm.peak_step();
        prop_assert!(out.iter().all(|&x| x <= out[p]));
        prop_assert!(out[..=p].windows(2).all(|w| w[0] <= w[1]));
        prop_assert!(out[p..].windows(2).all(|w| w[0] >= w[1]));
    }

    /// Chicago storm: total = D(Td); the largest step holds r·Td; every window from r·d
    /// before the peak to (1−r)·d after it holds D(d) (Keifer & Chu 1957). The window check
    /// uses the mass curve at arbitrary times (exact property, f32 tolerance) and, for a
    /// central peak on a step boundary, the written steps (windows of 2j steps).
    #[test]
    fn chicago_storm_holds_idf_depth_around_its_peak(
        f in concave_formula(),
        half in 1usize..72,
        dt_min in prop::sample::select(vec![1u32, 5, 10]),
        r in 0.05f32..0.95,
        fracs in prop::collection::vec(0.01f64..1.0, 8),
    ) {
        let idf = curves(f);
        let n = 2 * half;
        let td_s = n as u32 * dt_min * 60;
        let td_min = (n as u32 * dt_min) as f64;
        let storm = DesignStorm::new(10.0, td_s, dt_min * 60).unwrap().with_peak_ratio(r).unwrap();
        let mut out = vec![0.0f32; n];
        storm.chicago(&idf, &mut out).unwrap();
        let total: f64 = out.iter().map(|&x| x as f64).sum();
        prop_assert!(close(total, depth64(f, td_min), 2e-5, 1e-5));
        // Peak: the intensity is largest at r·Td (checked on the mass curve's slope); on the
        // step grid the deepest step is the one holding r·Td or a neighbour (discretisation).
        let p = storm.peak_step();
        let deepest = (0..n).max_by(|&a, &b| out[a].total_cmp(&out[b])).unwrap();
        prop_assert!(deepest.abs_diff(p) <= 1, "peak step {} deepest {} of {:?}", p, deepest, out);
        // The deepest 60-s window is the one split r : 1−r about r·Td: shifting it either way
        // holds less (the mass curve is steepest at the peak).
        let tp32 = storm.peak_time_s();
        let w = 60.0f32;
        let win = |lo: f32| storm.chicago_mass_mm(&idf, lo + w) - storm.chicago_mass_mm(&idf, lo);
        let at_peak = win(tp32 - r * w);
        for off in [-120.0f32, -60.0, -30.0, 30.0, 60.0, 120.0] {
            prop_assert!(win(tp32 - r * w + off) <= at_peak * (1.0 + 1e-5) + 1e-6, "off {}", off);
        }
        let tp = storm.peak_time_s() as f64;
        for &fr in &fracs {
            let d_s = fr * td_s as f64;
            let lo = tp - r as f64 * d_s;
            let hi = tp + (1.0 - r as f64) * d_s;
            let got = (storm.chicago_mass_mm(&idf, hi as f32) - storm.chicago_mass_mm(&idf, lo as f32)) as f64;
            // Window ends are f32 times: 1 ulp of ≤ 1e5 s is ≤ 8 ms of rain at ≤ 1 mm/s.
            prop_assert!(close(got, depth64(f, d_s / 60.0), 3e-5, 1e-4), "d={} got {}", d_s, got);
        }
        let centred = DesignStorm::new(10.0, td_s, dt_min * 60).unwrap();
        centred.chicago(&idf, &mut out).unwrap();
        for j in 1..=half {
            let w: f64 = out[half - j..half + j].iter().map(|&x| x as f64).sum();
            prop_assert!(close(w, depth64(f, (2 * j as u32 * dt_min) as f64), 2e-5, 1e-5));
        }
    }

    /// Uniform block: each step holds i(Td)·dt, total i(Td)·Td (definition).
    #[test]
    fn uniform_block_total_is_intensity_times_duration(
        f in concave_formula(), n in 1usize..288, dt_min in 1u32..15,
    ) {
        let idf = curves(f);
        let storm = DesignStorm::new(10.0, n as u32 * dt_min * 60, dt_min * 60).unwrap();
        let mut out = vec![0.0f32; n + 3];
        prop_assert_eq!(storm.uniform(&idf, &mut out), Ok(n));
        let total: f64 = out[..n].iter().map(|&x| x as f64).sum();
        prop_assert!(close(total, depth64(f, (n as u32 * dt_min) as f64), 2e-5, 1e-6));
        prop_assert!(out[..n].windows(2).all(|w| w[0] == w[1]));
        prop_assert!(out[n..].iter().all(|&x| x == 0.0));
    }

    /// The Keifer–Chu closed form for Sherman/Talbot agrees with the numerical slope of the
    /// mass curve (the table path), and each Chicago step equals the integral of the closed
    /// form over the step (Simpson's rule in f64, 200 panels).
    #[test]
    fn chicago_closed_form_intensity_integrates_to_the_steps(
        f in concave_formula(), r in 0.1f32..0.9, n in 4usize..48,
    ) {
        let idf = curves(f);
        let dt_s = 600u32;
        let storm = DesignStorm::new(10.0, n as u32 * dt_s, dt_s).unwrap().with_peak_ratio(r).unwrap();
        let mut out = vec![0.0f32; n];
        storm.chicago(&idf, &mut out).unwrap();
        let tp = storm.peak_time_s() as f64;
        let closed = |t_s: f64| keifer_chu_intensity_mm_h(&f, r, ((t_s - tp) / 60.0) as f32) as f64;
        for (k, &got) in out.iter().enumerate() {
            let (a, b) = (k as f64 * dt_s as f64, (k + 1) as f64 * dt_s as f64);
            // Split at the peak so Simpson never straddles the kink of the slope.
            let mut edges = vec![a, b];
            if tp > a && tp < b { edges.insert(1, tp); }
            let mut want = 0.0;
            for e in edges.windows(2) {
                let (lo, hi) = (e[0], e[1]);
                let m = 200;
                let h = (hi - lo) / m as f64;
                let mut s = closed(lo) + closed(hi);
                for j in 1..m { s += closed(lo + j as f64 * h) * if j % 2 == 1 { 4.0 } else { 2.0 }; }
                want += s * h / 3.0 / 3600.0;
            }
            prop_assert!(close(got as f64, want, 2e-4, 2e-4), "step {} got {} want {}", k, got, want);
        }
        // Central difference ±10 s: within 0.5 % at least 10 min from the peak (truncation
        // grows near the peak's kink, on the time scale r·b).
        for k in 0..n {
            let t = (k as f64 + 0.37) * dt_s as f64;
            if (t - tp).abs() < 600.0 { continue; }
            let num = storm.chicago_intensity_mm_h(&idf, t as f32) as f64;
            prop_assert!(close(num, closed(t), 5e-3, 1e-2), "t={} numeric {} closed {}", t, num, closed(t));
        }
    }
}

/// A table IDF (log–log between rows, see the idf module) gives a Chicago storm whose total is
/// the table depth for the duration and an alternating block whose deepest windows hold at
/// least D(k·dt) (exactly when the blocks fall); the general-case statement of the module doc.
#[test]
fn table_idf_storms_hold_the_table_depths() {
    let ds: [f32; 7] = [5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 360.0];
    // Sherman a = 1500, b = 10, c = 0.8 at two return periods (×1, ×1.3), f64 from rain64.
    let mut cells = Vec::new();
    for &d in &ds {
        for g in [1.0, 1.3] {
            cells.push((g * rain64::sherman(1500.0, 10.0, 0.8, d as f64)) as f32);
        }
    }
    let idf = IdfTable::new(&ds, &[2.0, 10.0], &cells).unwrap();
    use holdback_core::rain::Idf;
    let storm = DesignStorm::new(10.0, 6 * 3600, 300).unwrap();
    let n = storm.steps();
    let mut out = vec![0.0f32; n];
    storm.fill(&idf, Pattern::Chicago, &mut out).unwrap();
    let total: f64 = out.iter().map(|&x| x as f64).sum();
    let d_total = idf.depth_mm(360.0, 10.0) as f64;
    assert!(close(total, d_total, 2e-5, 1e-5), "{total} vs {d_total}");
    storm
        .fill(&idf, Pattern::AlternatingBlock, &mut out)
        .unwrap();
    for k in 1..=n {
        let want = idf.depth_mm(k as f32 * 5.0, 10.0) as f64;
        assert!(max_window(&out, k) >= want * (1.0 - 2e-5), "k={k}");
    }
    let total: f64 = out.iter().map(|&x| x as f64).sum();
    assert!(close(total, d_total, 2e-5, 1e-5));
}

/// A slice shorter than the storm is an error naming both lengths, and nothing is written.
#[test]
fn short_buffer_is_an_error() {
    let idf = curves(IdfFormula::Talbot { a: 2000.0, b: 10.0 });
    let storm = DesignStorm::new(10.0, 3600, 300).unwrap();
    let mut out = [7.0f32; 11];
    for p in [
        Pattern::Uniform,
        Pattern::AlternatingBlock,
        Pattern::Chicago,
    ] {
        assert_eq!(
            storm.fill(&idf, p, &mut out),
            Err(DesignStormError::BufferTooShort {
                needed: 12,
                got: 11
            })
        );
    }
    assert!(out.iter().all(|&x| x == 7.0));
}
