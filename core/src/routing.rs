//! Level-pool routing: one pond, one outlet, the continuity equation `dS/dt = I(t) − O(h(S))`.
//!
//! Units: storage m³, stage m, flows m³/s, the step `dt_s` integer seconds.
//!
//! ## Scheme
//!
//! Each step is implicit in the end storage `S1` and is solved by bounded bisection on
//! storage, over the bracket `[0, S0 + V_in]` (no step can release more than it holds):
//!
//! (The solver is bracketing false position with the Illinois modification and a bisection
//! safeguard, typically under ten outlet evaluations; see `bisect`.)
//!
//! 1. **Trapezoidal (storage-indication) first**: `S1 + dt/2·O(S1) = S0 + V_in − dt/2·O(S0)`,
//!    with `V_in = dt·(I0 + I1)/2`. Second-order accurate and A-stable, but not L-stable: for
//!    a linear reservoir `O = S/k` its amplification is `(1 − x/2)/(1 + x/2)` with `x = dt/k`,
//!    which turns negative (the pond "rings" about equilibrium) once `x > 2`.
//! 2. **Safeguard**: the trapezoidal step is accepted only if it has a root in the bracket,
//!    its secant stiffness `x = dt·(O1 − O0)/(S1 − S0)` is at most 2 (amplification ≥ 0, so
//!    no sign alternation of dS), and it does not carry a flowing outlet to zero flow within
//!    the step (which would mean the pond passed below the outlet invert). Otherwise the step
//!    is redone with **backward Euler**: `S1 + dt·O(S1) = S0 + V_in`. Backward Euler is first
//!    order but L-stable and monotone: with a non-decreasing outlet the residual is strictly
//!    increasing in `S1`, so the root is unique, lies between `S0` and the equilibrium
//!    storage, is never negative, and cannot go below the invert (at the invert the residual
//!    is already negative while water remains above it). For a stiff outlet this is what
//!    the exact solution does too: it reaches equilibrium within the step.
//!
//! With `dt` up to 300 s and any outlet size this gives no oscillation; where the pond is not
//! stiff the trapezoid gives second-order accuracy. The bisection runs at most
//! [`MAX_ITERATIONS`] times and stops once the bracket cannot be split in f32.
//!
//! ## Volume balance
//!
//! The released volume is `released = S0 + V_in − S1`, so
//! `S1 = S0 + V_in − released` holds by construction; `balance_error_m3` reports what f32
//! rounding leaves of it. The scheme's own residual (the difference between `released` and
//! `dt·O1` or `dt·(O0 + O1)/2`) is the bisection tolerance, at most one f32 step of storage
//! times `1 + dt·dO/dS`.
//!
//! ## Inputs that break the rules
//!
//! No input panics. Inflow that is NaN, infinite or negative counts as 0 m³/s; storage that is
//! NaN, infinite or negative counts as empty (0 m³); a NaN, negative or infinite discharge
//! from the outlet counts as 0 (NaN, negative) or as "releases everything" (infinite, capped
//! by the water available). `dt_s = 0` returns the starting state. An outlet that is not
//! monotone (against the [`StageDischarge`] contract) still gets a bounded, volume-conserving
//! answer, but no stability promise.

use crate::flow::StageDischarge;
use crate::math;
use crate::storage::StageStorage;

/// Most residual evaluations in one solve. The safeguard halves the bracket at least once
/// every three steps, so this allows 32 halvings: more than the 24 bits of an f32 mantissa
/// needs to pin a root to f32 resolution relative to the bracket.
pub const MAX_ITERATIONS: u32 = 96;

/// Largest secant stiffness `dt·dO/dS` for which the trapezoidal step is kept.
const TRAPEZOID_MAX_STIFFNESS: f32 = 2.0;

/// Inflow over one step: the rates at its start and end, linear in between.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Inflow {
    /// Inflow at the start of the step, m³/s.
    pub start_m3s: f32,
    /// Inflow at the end of the step, m³/s.
    pub end_m3s: f32,
}

impl Inflow {
    /// A constant inflow over the step (also the form for a step-mean inflow).
    pub fn steady(mean_m3s: f32) -> Self {
        Self {
            start_m3s: mean_m3s,
            end_m3s: mean_m3s,
        }
    }

    /// Inflow varying linearly from `start_m3s` to `end_m3s` over the step.
    pub fn ramp(start_m3s: f32, end_m3s: f32) -> Self {
        Self { start_m3s, end_m3s }
    }
}

/// Which formula a step ended up using.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Scheme {
    /// Trapezoidal (storage-indication) step, second order.
    Trapezoid,
    /// Backward Euler, used where the trapezoid would ring or overshoot.
    BackwardEuler,
    /// The outlet released all the water within the step (even at an empty pond it passed
    /// more than the pond held), so the pond ends empty.
    Emptied,
    /// `dt_s` was 0: nothing moved.
    NoStep,
}

/// The state at the end of one routing step.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StepResult {
    /// Storage at the end of the step, m³ (≥ 0).
    pub storage_m3: f32,
    /// Stage at the end of the step, m.
    pub stage_m: f32,
    /// Outflow at the end of the step, m³/s.
    pub outflow_m3s: f32,
    /// Volume released over the step, m³ (≥ 0).
    pub released_m3: f32,
    /// `storage_m3 − (start storage + inflow volume − released_m3)`, m³: f32 rounding only.
    pub balance_error_m3: f32,
    /// The formula used.
    pub scheme: Scheme,
}

impl StepResult {
    /// The level the step ended on, to start the next step through the same outlet from
    /// ([`step_known`]).
    pub fn level(&self) -> Level {
        Level {
            point: Point {
                s: self.storage_m3,
                h: self.stage_m,
                q: self.outflow_m3s,
            },
        }
    }
}

/// A rate that counts as 0 when it breaks the rules (NaN, infinite, negative).
fn sane_inflow(q: f32) -> f32 {
    if q.is_finite() && q > 0.0 { q } else { 0.0 }
}

/// A storage with its stage and the outlet's discharge there, each computed once: the solver
/// keeps the points it has evaluated so that no storage is looked up twice in one step.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Point {
    /// Storage, m³.
    s: f32,
    /// Stage at `s`, m.
    h: f32,
    /// Outlet discharge at `h`, NaN/negative read as 0 and +∞ kept, m³/s.
    q: f32,
}

/// A storage with its stage and the outlet's discharge there, as one routing step ends on
/// it ([`StepResult::level`]): handed to [`step_known`] as the next step's start, so that a
/// run through an unchanged outlet never looks the same storage up twice.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Level {
    point: Point,
}

impl Level {
    /// The level of `storage_m3` in `pond` through `outlet` (NaN, infinite or negative
    /// storage counts as empty, as in [`step`]).
    pub fn at(pond: &StageStorage, outlet: &impl StageDischarge, storage_m3: f32) -> Self {
        Self {
            point: point(pond, outlet, sane_storage(storage_m3)),
        }
    }

    /// Storage, m³.
    pub fn storage_m3(&self) -> f32 {
        self.point.s
    }

    /// Stage, m.
    pub fn stage_m(&self) -> f32 {
        self.point.h
    }

    /// Outlet discharge, m³/s.
    pub fn outflow_m3s(&self) -> f32 {
        self.point.q
    }
}

/// Storage that counts as empty when it breaks the rules (NaN, infinite, negative).
fn sane_storage(s: f32) -> f32 {
    if s.is_finite() && s > 0.0 { s } else { 0.0 }
}

/// The point of storage `s`: its stage and the outlet discharge there.
fn point(pond: &StageStorage, outlet: &impl StageDischarge, s: f32) -> Point {
    let h = pond.stage_m(s);
    let q = outlet.discharge_m3s(h);
    Point {
        s,
        h,
        q: if q > 0.0 { q } else { 0.0 },
    }
}

/// A lower end for the solve of `r(S) = S + w·O(S) − rhs = 0` much closer to the root than
/// the empty pond: `S_lo = rhs − w·O(hi)`. With a non-decreasing outlet and `S_lo ≤ hi`,
/// `r(S_lo) = w·(O(S_lo) − O(hi)) ≤ 0`, so `[S_lo, hi]` still brackets the root; its width
/// is `w·(O(hi) − O(root))`, the change in release over the step, usually a small part of
/// the storage. One storage lookup for a bracket that false position closes in a few
/// steps. Falls back to `empty` when `S_lo` is not inside `(empty, hi)` or f32 rounding
/// leaves its residual positive (an outlet against the contract, or a bracket already at
/// rounding level).
fn lower_bound(
    pond: &StageStorage,
    outlet: &impl StageDischarge,
    w: f32,
    rhs: f32,
    empty: Point,
    hi: Point,
) -> Point {
    let s = rhs - w * hi.q;
    if !(s > empty.s && s < hi.s) {
        return empty;
    }
    let p = point(pond, outlet, s);
    if p.s + w * p.q - rhs <= 0.0 { p } else { empty }
}

/// Solve `r(S) = S + w·O(S) − rhs = 0` on `[lo, hi]` (`lo` the empty pond), where
/// `r(lo) < 0 ≤ r(hi)` is assumed by the caller. Bracketing false position with the Illinois
/// modification, safeguarded by bisection: a trial point outside the bracket, or a bracket
/// that has not halved in three steps, takes the midpoint instead, so the bracket shrinks at
/// least as fast as bisection every three steps. Stops when |r| is at f32 rounding level,
/// when the bracket cannot be split in f32, or after [`MAX_ITERATIONS`]. Returns the point
/// with the smallest |r| seen, with its stage and discharge (the ends come in already
/// evaluated, so no storage is looked up twice).
fn bisect(
    pond: &StageStorage,
    outlet: &impl StageDischarge,
    w: f32,
    rhs: f32,
    lo_point: Point,
    hi_point: Point,
) -> Point {
    let resid = |p: &Point| p.s + w * p.q - rhs;
    let (mut lo, mut hi) = (lo_point.s, hi_point.s);
    let (mut r_lo, mut r_hi) = (resid(&lo_point), resid(&hi_point));
    let tol = 0.5 * f32::EPSILON * math::abs(rhs);
    let (mut best, mut best_r) = if -r_lo < r_hi {
        (lo_point, -r_lo)
    } else {
        (hi_point, r_hi)
    };
    // Bracket widths of the last three steps, and whether the last step kept `lo` (true) or
    // `hi` (false): the Illinois bookkeeping.
    let mut widths = [f32::INFINITY; 3];
    let mut kept_lo_last: Option<bool> = None;
    for k in 0..MAX_ITERATIONS {
        let mid = 0.5 * (lo + hi);
        if !(mid > lo && mid < hi) || best_r <= tol {
            break;
        }
        let width = hi - lo;
        let slot = (k % 3) as usize;
        let old = widths.get(slot).copied().unwrap_or(f32::INFINITY);
        if let Some(wslot) = widths.get_mut(slot) {
            *wslot = width;
        }
        let fp = lo + width * (-r_lo / (r_hi - r_lo));
        let x = if fp > lo && fp < hi && width <= 0.5 * old {
            fp
        } else {
            mid
        };
        let px = point(pond, outlet, x);
        let r = resid(&px);
        if math::abs(r) < best_r {
            best = px;
            best_r = math::abs(r);
        }
        if r < 0.0 {
            lo = x;
            r_lo = r;
            // Kept `hi` twice in a row: halve its residual so the next trial moves towards it.
            if kept_lo_last == Some(false) {
                r_hi *= 0.5;
            }
            kept_lo_last = Some(false);
        } else {
            hi = x;
            r_hi = r;
            if kept_lo_last == Some(true) {
                r_lo *= 0.5;
            }
            kept_lo_last = Some(true);
        }
    }
    best
}

/// One level-pool routing step of `dt_s` seconds from `storage_m3`, with `inflow` over the
/// step, through `outlet` (see the module doc for the scheme, its safeguard and the
/// treatment of bad inputs).
///
/// Cost: each storage the solve visits is looked up once (stage, then discharge): the start,
/// the empty pond, the end of the bracket (the start again when there is no inflow) and the
/// solver's trial points; the end state reuses the chosen point.
pub fn step(
    pond: &StageStorage,
    outlet: &impl StageDischarge,
    storage_m3: f32,
    inflow: Inflow,
    dt_s: u32,
) -> StepResult {
    step_known(
        pond,
        outlet,
        Level::at(pond, outlet, storage_m3),
        Level::at(pond, outlet, 0.0),
        inflow,
        dt_s,
    )
}

/// [`step`] from a start whose level is already known, with the empty pond's level through
/// the same outlet: `start` must be [`Level::at`] (or a [`StepResult::level`]) of this pond
/// and outlet, and `empty` [`Level::at`] of storage 0. Then the result is [`step`]'s, bit for
/// bit, with two storage lookups fewer (what a plant stepping through an unchanged gate
/// opening saves every step). Levels of another pond or outlet give a bounded,
/// volume-conserving but wrong answer, never a panic.
pub fn step_known(
    pond: &StageStorage,
    outlet: &impl StageDischarge,
    start: Level,
    empty: Level,
    inflow: Inflow,
    dt_s: u32,
) -> StepResult {
    let p0 = start.point;
    let s0 = p0.s;
    // dt as f32: exact for every dt up to 2^24 s, rounded beyond (still finite).
    #[allow(clippy::cast_precision_loss)]
    let dt = dt_s as f32;
    let o0 = p0.q;
    if dt_s == 0 {
        return StepResult {
            storage_m3: s0,
            stage_m: p0.h,
            outflow_m3s: o0,
            released_m3: 0.0,
            balance_error_m3: 0.0,
            scheme: Scheme::NoStep,
        };
    }
    let v_in = 0.5 * dt * (sane_inflow(inflow.start_m3s) + sane_inflow(inflow.end_m3s));
    let mut avail = s0 + v_in;
    if !avail.is_finite() {
        avail = f32::MAX;
    }
    let p_empty = empty.point;
    let o_empty = p_empty.q;
    // With no inflow the bracket's top is the start itself: same storage, same point.
    let p_avail = if avail.to_bits() == s0.to_bits() {
        p0
    } else {
        point(pond, outlet, avail)
    };

    let mut chosen: Option<(Point, Scheme)> = None;

    // 1. Trapezoid: S1 + dt/2·O1 = avail − dt/2·O0, on [0, avail].
    let half = 0.5 * dt;
    let rhs_tr = avail - half * o0;
    if rhs_tr.is_finite() && half * o_empty < rhs_tr {
        let p_lo = lower_bound(pond, outlet, half, rhs_tr, p_empty, p_avail);
        let p1 = bisect(pond, outlet, half, rhs_tr, p_lo, p_avail);
        let (s1, o1) = (p1.s, p1.q);
        let ds = s1 - s0;
        let stiff = if ds != 0.0 { dt * (o1 - o0) / ds } else { 0.0 };
        let crossed_invert = o0 > 0.0 && o1 <= 0.0;
        if stiff.is_finite() && stiff <= TRAPEZOID_MAX_STIFFNESS && !crossed_invert {
            chosen = Some((p1, Scheme::Trapezoid));
        }
    }

    // 2. Backward Euler: S1 + dt·O1 = avail, on [0, avail].
    let (p1, scheme) = match chosen {
        Some(c) => c,
        None => {
            if dt * o_empty < avail {
                let p_lo = lower_bound(pond, outlet, dt, avail, p_empty, p_avail);
                (
                    bisect(pond, outlet, dt, avail, p_lo, p_avail),
                    Scheme::BackwardEuler,
                )
            } else {
                (p_empty, Scheme::Emptied)
            }
        }
    };
    let s1 = p1.s;

    let released = avail - s1;
    let released = if released > 0.0 { released } else { 0.0 };
    StepResult {
        storage_m3: s1,
        stage_m: p1.h,
        outflow_m3s: p1.q,
        released_m3: released,
        balance_error_m3: s1 - (avail - released),
        scheme,
    }
}

/// Route a hydrograph sampled every `dt_s` seconds: `inflow_m3s[k]` is the inflow at
/// `k·dt_s`, and step `k` goes from sample `k` to `k + 1` with the inflow linear between them.
/// Writes step results into `out` (no allocation) and returns how many were written:
/// `min(inflow_m3s.len() − 1, out.len())` (0 for fewer than two samples).
pub fn route_hydrograph(
    pond: &StageStorage,
    outlet: &impl StageDischarge,
    storage_m3: f32,
    inflow_m3s: &[f32],
    dt_s: u32,
    out: &mut [StepResult],
) -> usize {
    let mut s = storage_m3;
    let mut written = 0_usize;
    for (pair, slot) in inflow_m3s.windows(2).zip(out.iter_mut()) {
        if let [a, b] = *pair {
            let r = step(pond, outlet, s, Inflow::ramp(a, b), dt_s);
            s = r.storage_m3;
            *slot = r;
            written = written.saturating_add(1);
        }
    }
    written
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::storage::VolumeMethod;

    /// Stepping from the last step's level and a kept empty-pond level gives [`step`]'s
    /// result bit for bit (the plant's shortcut must not change the water), on a frustum
    /// pond with a part-full-then-full orifice, through fill, drain and a dry tail.
    #[test]
    fn step_known_from_the_last_level_equals_step_bit_for_bit() {
        let pond = StageStorage::from_areas(
            &[(41.0, 1500.0), (42.0, 2750.0), (44.0, 5850.0)],
            VolumeMethod::Frustum,
        )
        .unwrap();
        let o = crate::hydraulics::CircularOrifice::new(41.0, 0.1, 0.6).unwrap();
        let outlet = crate::hydraulics::Outlet::new(&[o.into()], None, None).unwrap();
        let q = |h: f32| outlet.discharge_m3s(h, 0.0);
        let empty = Level::at(&pond, &q, 0.0);
        let (mut s, mut known) = (0.0_f32, Level::at(&pond, &q, 0.0));
        for k in 0..3000_u32 {
            let inflow = Inflow::steady(if k < 200 { 0.5 * (k % 7) as f32 } else { 0.0 });
            let a = step(&pond, &q, s, inflow, 60);
            let b = step_known(&pond, &q, known, empty, inflow, 60);
            assert_eq!(a.storage_m3.to_bits(), b.storage_m3.to_bits(), "step {k}");
            assert_eq!(a.stage_m.to_bits(), b.stage_m.to_bits(), "step {k}");
            assert_eq!(a.outflow_m3s.to_bits(), b.outflow_m3s.to_bits(), "step {k}");
            assert_eq!(a.released_m3.to_bits(), b.released_m3.to_bits(), "step {k}");
            assert_eq!(a.scheme, b.scheme);
            s = a.storage_m3;
            known = b.level();
        }
        assert!(
            s > 0.0,
            "the orifice drains the pond asymptotically, never below its invert"
        );
    }

    fn box_pond() -> StageStorage {
        StageStorage::from_areas(&[(0.0, 1000.0), (3.0, 1000.0)], VolumeMethod::Frustum).unwrap()
    }

    /// A closed outlet keeps every drop: S1 = S0 + dt·(I0 + I1)/2 (continuity, exact).
    #[test]
    fn closed_outlet_stores_the_inflow_volume() {
        let r = step(
            &box_pond(),
            &|_h: f32| 0.0,
            100.0,
            Inflow::ramp(1.0, 3.0),
            60,
        );
        assert!((r.storage_m3 - 220.0).abs() < 1e-3);
        assert_eq!(r.released_m3, 0.0);
        assert!((r.stage_m - 0.22).abs() < 1e-5);
    }

    /// Bad inputs: NaN inflow counts as 0, NaN storage as empty, NaN outlet as closed.
    #[test]
    fn bad_inputs_give_finite_conserving_results() {
        let pond = box_pond();
        let r = step(
            &pond,
            &|_h: f32| f32::NAN,
            f32::NAN,
            Inflow::steady(f32::NAN),
            300,
        );
        assert_eq!(r.storage_m3, 0.0);
        let r = step(
            &pond,
            &|_h: f32| f32::INFINITY,
            50.0,
            Inflow::steady(1.0),
            300,
        );
        assert_eq!(r.storage_m3, 0.0);
        assert!((r.released_m3 - 350.0).abs() < 1e-3);
        let r = step(&pond, &|h: f32| h, 50.0, Inflow::steady(1.0), 0);
        assert_eq!((r.storage_m3, r.scheme), (50.0, Scheme::NoStep));
    }

    /// A stiff linear reservoir (k = 1 s, dt = 300 s) settles at S = I·k without ringing
    /// (equilibrium of dS/dt = I − S/k).
    #[test]
    fn stiff_linear_reservoir_settles_without_ringing() {
        let pond = box_pond();
        let k = 1.0_f32;
        let out = |h: f32| h * 1000.0 / k;
        let mut s = 2000.0;
        for _ in 0..5 {
            let r = step(&pond, &out, s, Inflow::steady(0.5), 300);
            assert!(r.storage_m3 <= s && r.storage_m3 >= 0.5 * k - 1e-3, "{r:?}");
            s = r.storage_m3;
        }
        assert!((s - 0.5).abs() < 0.01);
    }
}
