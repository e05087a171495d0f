//! f64 reference for rational-method runoff, written straight from the published formulas and
//! the NIST unit definitions, independent of the `f32` core (no shared constants or code).
//!
//! Sources:
//! - unit definitions: NIST SP 811 / Handbook 44 — 1 in = 25.4 mm and 1 ft = 0.3048 m exactly,
//!   1 acre = 43 560 ft², 1 ha = 10 000 m², 1 h = 3600 s;
//! - rational method Q = C·i·A (Kuichling 1889; any hydrology text);
//! - Kirpich (1940), "Time of concentration of small agricultural watersheds", Civil
//!   Engineering 10(6):362: tc \[min\] = 0.0078·L^0.77·S^−0.385, L in ft (constants from
//!   memory); the metric form uses 0.0195 with L in m;
//! - Manning (1891), SI: V = (1/n)·R^(2/3)·S^(1/2);
//! - the modified-rational hydrograph shape as defined in the core's module doc (triangle,
//!   trapezoid, reduced peak for Tr < Tc), written here case by case.

/// Metres per inch (exact, NIST).
pub const M_PER_IN: f64 = 0.0254;
/// Metres per foot (exact, NIST).
pub const M_PER_FT: f64 = 0.3048;
/// Square feet per acre (NIST).
pub const FT2_PER_ACRE: f64 = 43_560.0;
/// Square metres per hectare.
pub const M2_PER_HA: f64 = 10_000.0;
/// Seconds per hour.
pub const S_PER_H: f64 = 3600.0;

/// Rational peak in m³/s from C, i in mm/h and A in ha, through base SI units:
/// i \[m/s\] = i/1000/3600, A \[m²\] = A·10 000.
pub fn rational_si_m3s(c: f64, intensity_mm_h: f64, area_ha: f64) -> f64 {
    c * (intensity_mm_h / 1000.0 / S_PER_H) * (area_ha * M2_PER_HA)
}

/// Rational peak in ft³/s from C, i in in/h and A in acres, through base US units:
/// i \[ft/s\] = i/12/3600, A \[ft²\] = A·43 560.
pub fn rational_us_cfs(c: f64, intensity_in_h: f64, area_acres: f64) -> f64 {
    c * (intensity_in_h / 12.0 / S_PER_H) * (area_acres * FT2_PER_ACRE)
}

/// Area-weighted runoff coefficient Σ Cₖ·Aₖ / Σ Aₖ.
pub fn weighted_c(parts: &[(f64, f64)]) -> f64 {
    let a: f64 = parts.iter().map(|p| p.1).sum();
    parts.iter().map(|p| p.0 * p.1).sum::<f64>() / a
}

/// Kirpich time of concentration in minutes for constant `k` (0.0078 with L in ft, 0.0195
/// with L in m), slope in length per length.
pub fn kirpich_min(k: f64, length: f64, slope: f64) -> f64 {
    k * length.powf(0.77) / slope.powf(0.385)
}

/// Manning velocity (SI), m/s.
pub fn manning_v(n: f64, hydraulic_radius_m: f64, slope: f64) -> f64 {
    hydraulic_radius_m.powf(2.0 / 3.0) * slope.sqrt() / n
}

/// Hydraulic radius of a full circular pipe: (π·D²/4) / (π·D) = D/4.
pub fn full_pipe_radius_m(diameter_m: f64) -> f64 {
    let area = std::f64::consts::PI * diameter_m * diameter_m / 4.0;
    let perimeter = std::f64::consts::PI * diameter_m;
    area / perimeter
}

/// Hydraulic radius of a trapezoidal channel (bottom b, depth y, side slope z H:V); z = 0 is
/// the rectangle.
pub fn trapezoid_radius_m(bottom_m: f64, depth_m: f64, z: f64) -> f64 {
    let area = bottom_m * depth_m + z * depth_m * depth_m;
    let side = (depth_m * depth_m + (z * depth_m) * (z * depth_m)).sqrt();
    area / (bottom_m + 2.0 * side)
}

/// Modified-rational inflow at time `t_s` after the start of rain, m³/s, for equilibrium
/// discharge `qe` = C·i·A, time of concentration `tc_s` and rain duration `tr_s`.
pub fn modified_rational_q(t_s: f64, qe: f64, tc_s: f64, tr_s: f64) -> f64 {
    if t_s <= 0.0 || t_s >= tc_s + tr_s {
        return 0.0;
    }
    if tr_s >= tc_s {
        // Rise over Tc to qe, hold until Tr, fall over Tc.
        if t_s < tc_s {
            qe * t_s / tc_s
        } else if t_s <= tr_s {
            qe
        } else {
            qe * (tc_s + tr_s - t_s) / tc_s
        }
    } else {
        // Reduced peak qe·Tr/Tc: rise over Tr, hold until Tc, fall over Tr.
        let peak = qe * tr_s / tc_s;
        if t_s < tr_s {
            peak * t_s / tr_s
        } else if t_s <= tc_s {
            peak
        } else {
            peak * (tc_s + tr_s - t_s) / tr_s
        }
    }
}

/// Mean of [`modified_rational_q`] over `\[t0_s, t1_s\]` (`t1_s > t0_s`), exact: the
/// trapezoid rule on each corner-free (linear) piece. Used to compare with step means.
pub fn modified_rational_mean(t0_s: f64, t1_s: f64, qe: f64, tc_s: f64, tr_s: f64) -> f64 {
    // The function is piecewise linear with corners at 0, min, max, Tc + Tr: integrate each
    // linear piece exactly with the trapezoid rule.
    let lo = tc_s.min(tr_s);
    let hi = tc_s.max(tr_s);
    let mut cuts = vec![t0_s, t1_s];
    for c in [0.0, lo, hi, tc_s + tr_s] {
        if c > t0_s && c < t1_s {
            cuts.push(c);
        }
    }
    cuts.sort_by(f64::total_cmp);
    let mut integral = 0.0;
    for w in cuts.windows(2) {
        let (a, b) = (w[0], w[1]);
        integral += 0.5
            * (b - a)
            * (modified_rational_q(a, qe, tc_s, tr_s) + modified_rational_q(b, qe, tc_s, tr_s));
    }
    integral / (t1_s - t0_s)
}
