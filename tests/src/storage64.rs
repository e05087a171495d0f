//! f64 reference for stage–storage and level-pool routing, written straight from the
//! published formulas and independent of the f32 core's algebra:
//!
//! - average-end-area volume `ΔV = Δh·(A1 + A2)/2` and the frustum (conic) volume
//!   `ΔV = Δh/3·(A1 + A2 + √(A1·A2))` over a survey table (any civil-engineering earthwork
//!   text; the frustum is the volume of a truncated cone/pyramid, Euclid XII / Heron);
//! - the prismoidal formula `V = Δh/6·(A1 + 4·Am + A2)` for a basin with side slopes (exact
//!   for any solid whose cross-section area is a quadratic in height);
//! - inverses by plain bisection on the forward volume (no closed forms);
//! - continuity `dS/dt = I(t) − O(h(S))` integrated by classical fourth-order Runge–Kutta with
//!   small sub-steps.

/// Which volume formula a table uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method64 {
    /// Average-end-area.
    AverageEndArea,
    /// Frustum (conic).
    Frustum,
}

/// A survey table of (stage_m, area_m2), f64, with interpolation matching the method:
/// area linear in stage (average-end-area) or √area linear in stage (frustum).
#[derive(Debug, Clone)]
pub struct Table64 {
    /// Rows (stage_m, area_m2), stages increasing.
    pub rows: Vec<(f64, f64)>,
    /// Volume formula.
    pub method: Method64,
}

fn segment_volume(method: Method64, dh: f64, a1: f64, a2: f64) -> f64 {
    match method {
        Method64::AverageEndArea => dh * (a1 + a2) / 2.0,
        Method64::Frustum => dh / 3.0 * (a1 + a2 + (a1 * a2).sqrt()),
    }
}

impl Table64 {
    /// Area at `h` (0 below the floor, the top area above the top).
    pub fn area_m2(&self, h: f64) -> f64 {
        let (h0, _) = self.rows[0];
        if h < h0 {
            return 0.0;
        }
        for w in self.rows.windows(2) {
            let ((s1, a1), (s2, a2)) = (w[0], w[1]);
            if h <= s2 {
                let t = (h - s1) / (s2 - s1);
                return match self.method {
                    Method64::AverageEndArea => a1 + t * (a2 - a1),
                    Method64::Frustum => (a1.sqrt() + t * (a2.sqrt() - a1.sqrt())).powi(2),
                };
            }
        }
        self.rows.last().unwrap().1
    }

    /// Storage at `h`: the segment formulas summed, the last part segment to `h` by the same
    /// formula with the interpolated area; vertical walls above the top.
    pub fn storage_m3(&self, h: f64) -> f64 {
        let mut v = 0.0;
        if h <= self.rows[0].0 {
            return 0.0;
        }
        for w in self.rows.windows(2) {
            let ((s1, a1), (s2, a2)) = (w[0], w[1]);
            if h <= s2 {
                return v + segment_volume(self.method, h - s1, a1, self.area_m2(h));
            }
            v += segment_volume(self.method, s2 - s1, a1, a2);
        }
        let (top, a_top) = *self.rows.last().unwrap();
        v + a_top * (h - top)
    }

    /// Stage holding `v`, by bisection on [`Self::storage_m3`].
    pub fn stage_m(&self, v: f64) -> f64 {
        let lo = self.rows[0].0;
        let hi = self.rows.last().unwrap().0 + 1e3;
        bisect(|h| self.storage_m3(h) - v, lo, hi)
    }
}

/// A rectangular-bottomed basin with uniform side slopes (f64).
#[derive(Debug, Clone, Copy)]
pub struct Basin64 {
    /// Floor stage, m.
    pub floor_m: f64,
    /// Bottom length, m.
    pub length_m: f64,
    /// Bottom width, m.
    pub width_m: f64,
    /// Side slope H:V.
    pub z: f64,
}

impl Basin64 {
    /// Plan area at stage `h`: `(L + 2zy)(W + 2zy)`, 0 below the floor.
    pub fn area_m2(&self, h: f64) -> f64 {
        let y = h - self.floor_m;
        if y < 0.0 {
            return 0.0;
        }
        (self.length_m + 2.0 * self.z * y) * (self.width_m + 2.0 * self.z * y)
    }

    /// Storage at stage `h` by the prismoidal formula `y/6·(A0 + 4·A(y/2) + A(y))`.
    pub fn storage_m3(&self, h: f64) -> f64 {
        let y = h - self.floor_m;
        if y <= 0.0 {
            return 0.0;
        }
        let f = self.floor_m;
        y / 6.0 * (self.area_m2(f) + 4.0 * self.area_m2(f + y / 2.0) + self.area_m2(h))
    }

    /// Stage holding `v`, by bisection.
    pub fn stage_m(&self, v: f64) -> f64 {
        bisect(|h| self.storage_m3(h) - v, self.floor_m, self.floor_m + 1e3)
    }
}

/// Root of an increasing `f` on `[lo, hi]` by 200 bisections.
pub fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(mid) < 0.0 { lo = mid } else { hi = mid }
    }
    0.5 * (lo + hi)
}

/// Integrate `dS/dt = inflow(t) − outflow(stage(S))` from `s0` at t = 0 by classical RK4 with
/// sub-step `h_s`, reporting S at every multiple of `every_s` up to `t_end_s`.
/// Storage is floored at 0 (an empty pond releases nothing it does not hold).
pub fn rk4_route(
    stage: impl Fn(f64) -> f64,
    outflow: impl Fn(f64) -> f64,
    inflow: impl Fn(f64) -> f64,
    s0: f64,
    h_s: f64,
    every_s: f64,
    t_end_s: f64,
) -> Vec<(f64, f64)> {
    let rate = |t: f64, s: f64| inflow(t) - outflow(stage(s.max(0.0)));
    let mut out = vec![(0.0, s0)];
    let mut s = s0;
    let n_out = (t_end_s / every_s).round() as usize;
    let n_sub = (every_s / h_s).round().max(1.0) as usize;
    let h = every_s / n_sub as f64;
    let mut t = 0.0;
    for _ in 0..n_out {
        for _ in 0..n_sub {
            let k1 = rate(t, s);
            let k2 = rate(t + h / 2.0, s + h / 2.0 * k1);
            let k3 = rate(t + h / 2.0, s + h / 2.0 * k2);
            let k4 = rate(t + h, s + h * k3);
            s = (s + h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)).max(0.0);
            t += h;
        }
        out.push((t, s));
    }
    out
}
