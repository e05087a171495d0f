//! f64 reference of every outlet structure, written straight from the formulas documented in
//! `holdback_core::hydraulics` (and the published laws they cite), independently of the f32
//! code: different algebra where there is a choice (segment area by `r²·acos − chord term`,
//! trapezoidal critical depth by 200-step bisection, Villemonte by `powf`).
//!
//! Conventions (same as the core): heads are `stage − level`, ≤ 0 means no flow; tailwater
//! `None` is a free outfall; no reverse flow.

/// Standard gravity, m/s² (ISO 80000-3).
pub const G: f64 = 9.80665;

fn head(stage: f64, level: f64) -> f64 {
    (stage - level).max(0.0)
}

fn tail(tw: Option<f64>, level: f64) -> f64 {
    tw.map_or(0.0, |t| head(t, level))
}

/// Villemonte (1947): `(1 − (h2/h1)^n)^0.385`.
pub fn villemonte(h1: f64, h2: f64, n: f64) -> f64 {
    if h2 <= 0.0 {
        1.0
    } else if h2 >= h1 {
        0.0
    } else {
        (1.0 - (h2 / h1).powf(n)).powf(0.385)
    }
}

/// Wetted area of a circle of diameter `d` filled to depth `y`.
pub fn circle_segment_area(d: f64, y: f64) -> f64 {
    let r = d / 2.0;
    let y = y.clamp(0.0, d);
    r * r * ((r - y) / r).acos() - (r - y) * (2.0 * r * y - y * y).sqrt()
}

/// Orifice free law: `Cd·A_w·√(g·h)` below the soffit, `Cd·A·√(2g(h − D/2))` above.
fn orifice_free(cd: f64, area: f64, height: f64, h: f64, wet: impl Fn(f64) -> f64) -> f64 {
    if h <= 0.0 {
        0.0
    } else if h < height {
        cd * wet(h) * (G * h).sqrt()
    } else {
        cd * area * (2.0 * G * (h - height / 2.0)).sqrt()
    }
}

fn orifice_sub(qh: f64, qt: f64, h: f64, t: f64) -> f64 {
    if t <= 0.0 {
        qh
    } else if t >= h {
        0.0
    } else {
        (qh * qh - qt * qt).max(0.0).sqrt()
    }
}

/// Circular orifice.
pub fn circular_orifice(invert: f64, d: f64, cd: f64, stage: f64, tw: Option<f64>) -> f64 {
    let (h, t) = (head(stage, invert), tail(tw, invert));
    let area = std::f64::consts::PI * d * d / 4.0;
    let f = |x: f64| orifice_free(cd, area, d, x, |y| circle_segment_area(d, y));
    orifice_sub(f(h), f(t), h, t)
}

/// Rectangular orifice.
pub fn rectangular_orifice(
    invert: f64,
    b: f64,
    d: f64,
    cd: f64,
    stage: f64,
    tw: Option<f64>,
) -> f64 {
    let (h, t) = (head(stage, invert), tail(tw, invert));
    let f = |x: f64| orifice_free(cd, b * d, d, x, |y| b * y);
    orifice_sub(f(h), f(t), h, t)
}

/// Sharp-crested rectangular weir, Francis contractions (contraction head capped at `3b/n`),
/// Villemonte submergence.
pub fn rectangular_weir(crest: f64, b: f64, cd: f64, n: u8, stage: f64, tw: Option<f64>) -> f64 {
    let (h, t) = (head(stage, crest), tail(tw, crest));
    if h <= 0.0 {
        return 0.0;
    }
    let nc = n as f64;
    let hc = if n == 0 { h } else { h.min(3.0 * b / nc) };
    let l = b - 0.1 * nc * hc;
    cd * (2.0 / 3.0) * (2.0 * G).sqrt() * l * h.powf(1.5) * villemonte(h, t, 1.5)
}

/// V-notch weir `Cd·(8/15)·√(2g)·tan(θ/2)·h^2.5`, Villemonte n = 2.5.
pub fn vnotch_weir(crest: f64, angle_deg: f64, cd: f64, stage: f64, tw: Option<f64>) -> f64 {
    let (h, t) = (head(stage, crest), tail(tw, crest));
    cd * (8.0 / 15.0)
        * (2.0 * G).sqrt()
        * (angle_deg.to_radians() / 2.0).tan()
        * h.powf(2.5)
        * villemonte(h, t, 2.5)
}

/// Trapezoidal critical-section discharge (Cd = 1) for energy head `e` and tailwater `t` above
/// the crest, bottom width `b`, side slope `z`; critical depth by bisection of
/// `y + A/(2T) = e` on `[0, e]`.
pub fn trapezoid_critical(b: f64, z: f64, e: f64, t: f64) -> f64 {
    if e <= 0.0 {
        return 0.0;
    }
    let area = |y: f64| (b + z * y) * y;
    let top = |y: f64| b + 2.0 * z * y;
    let (mut lo, mut hi) = (0.0, e);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid + area(mid) / (2.0 * top(mid)) < e {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let yc = 0.5 * (lo + hi);
    if t > yc {
        if t >= e {
            0.0
        } else {
            area(t) * (2.0 * G * (e - t)).sqrt()
        }
    } else {
        (G * area(yc).powi(3) / top(yc)).sqrt()
    }
}

/// Broad-crested weir: `Cd·b·√g·(2h/3)^1.5`, drowned `Cd·b·t·√(2g(h − t))` for `t > 2h/3`.
pub fn broad_crested_weir(crest: f64, b: f64, cd: f64, stage: f64, tw: Option<f64>) -> f64 {
    let (h, t) = (head(stage, crest), tail(tw, crest));
    if h <= 0.0 {
        0.0
    } else if t > 2.0 * h / 3.0 {
        if t >= h {
            0.0
        } else {
            cd * b * t * (2.0 * G * (h - t)).sqrt()
        }
    } else {
        cd * b * G.sqrt() * (2.0 * h / 3.0).powf(1.5)
    }
}

/// Trapezoidal spillway.
pub fn spillway(crest: f64, b: f64, z: f64, cd: f64, stage: f64, tw: Option<f64>) -> f64 {
    cd * trapezoid_critical(b, z, head(stage, crest), tail(tw, crest))
}

/// Riser: `min(weir on perimeter, orifice on area)`.
pub fn riser(
    crest: f64,
    perimeter: f64,
    area: f64,
    cw: f64,
    co: f64,
    stage: f64,
    tw: Option<f64>,
) -> f64 {
    let (h, t) = (head(stage, crest), tail(tw, crest));
    if h <= 0.0 {
        return 0.0;
    }
    let qw = cw * (2.0 / 3.0) * (2.0 * G).sqrt() * perimeter * h.powf(1.5) * villemonte(h, t, 1.5);
    let qo = co * area * (2.0 * G * (h - t).max(0.0)).sqrt();
    qw.min(qo)
}

/// Sluice gate: `Q = Cv·b·j·√(2g(h − max(j, t)))`, `j = min(Cc·a, max(2h/3, t))`, `a` clamped
/// to `[0, a_max]`.
#[allow(clippy::too_many_arguments)]
pub fn sluice_gate(
    sill: f64,
    b: f64,
    a_max: f64,
    cc: f64,
    cv: f64,
    stage: f64,
    opening: f64,
    tw: Option<f64>,
) -> f64 {
    let (h, t) = (head(stage, sill), tail(tw, sill));
    let a = opening.clamp(0.0, a_max);
    if h <= 0.0 || a <= 0.0 {
        return 0.0;
    }
    let j = (cc * a).min((2.0 * h / 3.0).max(t));
    let dh = h - j.max(t);
    if dh <= 0.0 {
        0.0
    } else {
        cv * b * j * (2.0 * G * dh).sqrt()
    }
}
