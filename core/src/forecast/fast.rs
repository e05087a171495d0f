//! The fast forecast path: the outlet's fixed structures tabulated once on a stage grid, so
//! that each evaluation of a candidate policy costs a table look-up plus the exact gate law.
//!
//! Units: stage m, discharge m³/s, storage m³.
//!
//! ## The table ([`FixedFlowTable`])
//!
//! At most [`TABLE_POINTS`] nodes from the lowest fixed-structure invert up to a top stage,
//! each holding the exact [`Outlet::fixed_discharge_m3s`] there (raised to the running
//! maximum, so node flows never decrease); one exact evaluation per node, none wasted.
//!
//! 1. Every stage where a structure's law changes form is a node: inverts and crests, orifice
//!    soffits, the riser's weir→orifice transition head, the tailwater level (the onset of
//!    submerged flow).
//! 2. Between them the grid is refined where it is needed: each coarse segment knows its exact
//!    midpoint flow, and the segment whose midpoint lies farthest from its chord, relative
//!    to the midpoint flow plus [`FLOW_FLOOR_M3S`], is split at that midpoint (the two new
//!    halves get their midpoints evaluated), until `TABLE_POINTS / 2` coarse nodes. Segments
//!    shorter than 1/128 of the range are not split (a `√(h − t)` submergence onset has the
//!    same relative chord error at every scale and would otherwise take every node).
//! 3. The table is the coarse nodes plus their segments' midpoints (63 nodes).
//!
//! Interpolation is linear. Where it is weakest: just above a submergence onset (tailwater
//! level), where `√(h − t)` is concave and the first segment (≥ range/256 long) under-reports
//! by up to about a quarter of its end flow; near weir-type onsets (`h^1.5`, convex) it
//! over-reports slightly.
//!
//! ## Invariants
//!
//! - Node stages strictly increase; node flows are ≥ 0 and non-decreasing.
//! - Below the first node (the lowest invert) the flow is 0, which is exact; between nodes it
//!   is linear, capped at the upper node's flow, so it is continuous, exact at the nodes and
//!   monotone non-decreasing in f32 too (every rounded step is monotone); at and above the
//!   last node it is `max(exact law, last node flow)`. So the tabulated release is a valid
//!   [`StageDischarge`] (zero below the lowest invert, ≥ 0, continuous, non-decreasing).
//! - An outlet without fixed structures, or a top at or below the lowest invert, gives an
//!   empty table: every evaluation is then the exact law.
//! - The gate is never tabulated: each candidate's gate flow is the exact law at its opening.
//! - Look-ups are deterministic: the segment used for a stage is the unique `i` with
//!   `stage[i] ≤ h < stage[i + 1]`, whether found from the hint or by bisection.
//!
//! ## Accuracy (measured, `tests/tests/forecast_fast.rs`)
//!
//! Against the exact [`super::predict`] (itself checked against [`crate::routing::step`] and
//! closed forms), on the checked scenes and on random ponds and outlets:
//! - peak stage within `max(PEAK_STAGE_TOLERANCE_M, PEAK_STAGE_TOLERANCE_REL × exact peak
//!   depth above the pond floor)` (2 mm or 0.5 %);
//! - released volume within `RELEASE_TOLERANCE_REL × exact + RELEASE_TOLERANCE_IN_PLAY_REL ×
//!   (start storage + inflow)` (0.5 % plus 0.1 % of the water in play);
//! - the [`Forecaster::release_to_hold`] cap within [`HOLD_CAP_TOLERANCE_REL`] (1 %) plus the
//!   bisection's own tolerance;
//! - the table's flow over the top fifth of its range never below the exact law by more than
//!   [`CAPACITY_TOLERANCE_REL`] (0.5 %).
//!
//! One limit is not the table's: the routing scheme switches from the trapezoid to backward
//! Euler where the trapezoid's secant stiffness passes 2 ([`crate::routing`]), a
//! discontinuity of the scheme. A step at the threshold may switch under any perturbation of
//! the outlet (the table's, or a different rounding), and the two forecasts then part by up
//! to a third of the step's distance from equilibrium. The checks compare such runs only up
//! to the step where the schemes first differ ([`super::predict_release_traced`] reports
//! each step's scheme); on random ponds at 60–600 s steps about 3 % of runs have one.

use core::cell::Cell;

use crate::flow::StageDischarge;
use crate::hydraulics::{FixedStructure, MAX_FIXED, Outlet};
use crate::storage::StageStorage;

use super::{Hold, Limits, Outlook, Policy, Prediction, cap_of, hold_search, predict_release};

/// Most nodes of a [`FixedFlowTable`].
pub const TABLE_POINTS: usize = 64;

/// Stated tolerance on the predicted peak stage of the fast path against the exact one, m
/// (the larger of this and [`PEAK_STAGE_TOLERANCE_REL`] × the exact peak depth applies).
pub const PEAK_STAGE_TOLERANCE_M: f32 = 2.0e-3;

/// Stated tolerance on the peak stage as a share of the exact peak depth above the floor.
pub const PEAK_STAGE_TOLERANCE_REL: f32 = 5.0e-3;

/// Stated tolerance on the released volume over the horizon, share of the exact one (plus
/// [`RELEASE_TOLERANCE_IN_PLAY_REL`]).
pub const RELEASE_TOLERANCE_REL: f32 = 5.0e-3;

/// Absolute part of the released-volume tolerance, share of the water in play (start
/// storage + outlook inflow).
pub const RELEASE_TOLERANCE_IN_PLAY_REL: f32 = 1.0e-3;

/// Stated tolerance on the [`Forecaster::release_to_hold`] cap, share of the exact one.
pub const HOLD_CAP_TOLERANCE_REL: f32 = 1.0e-2;

/// Stated tolerance on the table's flow against the exact law (no under-reporting beyond it)
/// within the top 20 % of the tabulated range, share of the exact flow.
pub const CAPACITY_TOLERANCE_REL: f32 = 5.0e-3;

/// Breakpoints collected from the structures: up to three per structure, the tailwater and
/// both ends.
const MAX_BREAKS: usize = 3 * MAX_FIXED + 3;

/// Breakpoints closer than this are merged, m.
const MIN_BREAK_GAP_M: f32 = 1.0e-4;

/// Coarse segments of the refinement: the table holds each coarse node and its segment's
/// midpoint, so `2·COARSE_POINTS − 1 ≤ TABLE_POINTS` nodes.
const COARSE_POINTS: usize = TABLE_POINTS / 2;

/// Flow added to a segment's midpoint flow when its chord error is weighed (so near-zero
/// flows are not refined for ever), m³/s.
pub const FLOW_FLOOR_M3S: f32 = 1.0e-3;

/// The shortest coarse segment split, as a fraction of the table's range (so the finest
/// node spacing is at least range / (2·MIN_SPLIT_FRACTION)).
const MIN_SPLIT_FRACTION: f32 = 128.0;

/// A coarse node of the refinement: stage, exact flow, the midpoint of the segment above it
/// with its exact flow, and that segment's split priority (0: not to be split).
#[derive(Debug, Clone, Copy)]
struct Coarse {
    stage_m: f32,
    flow_m3s: f32,
    mid: (f32, f32),
    key: f32,
}

impl Coarse {
    /// A coarse node at `stage_m` with flow `flow_m3s`, whose segment ends at `upper`
    /// (stage, flow): evaluates the midpoint and weighs the chord error there, relative to
    /// the midpoint flow plus [`FLOW_FLOOR_M3S`]; segments shorter than `min_split_m` get 0.
    fn new(
        table: &FixedFlowTable<'_>,
        stage_m: f32,
        flow_m3s: f32,
        upper: (f32, f32),
        min_split_m: f32,
    ) -> Self {
        let m = 0.5 * (stage_m + upper.0);
        let qm = table.exact_m3s(m);
        let chord = 0.5 * (flow_m3s + upper.1);
        let key = crate::math::abs(qm - chord) / (qm + FLOW_FLOOR_M3S);
        let key = if key.is_finite() && upper.0 - stage_m >= min_split_m {
            key
        } else {
            0.0
        };
        Self {
            stage_m,
            flow_m3s,
            mid: (m, qm),
            key,
        }
    }
}

/// One node: stage, flow there, and the slope of the segment above it (0 at the last node).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Node {
    stage_m: f32,
    flow_m3s: f32,
    slope_m2s: f32,
}

/// The fixed structures of an [`Outlet`] tabulated on a stage grid (see the module doc).
#[derive(Debug, Clone, PartialEq)]
pub struct FixedFlowTable<'a> {
    outlet: &'a Outlet,
    nodes: heapless::Vec<Node, TABLE_POINTS>,
}

/// Pushes `x` onto `v` if it is finite and within `(lo, hi)`; a full list drops it (the
/// capacity covers every structure, so it does not happen).
fn push_break(v: &mut heapless::Vec<f32, MAX_BREAKS>, x: f32, lo: f32, hi: f32) {
    if x.is_finite() && x > lo && x < hi {
        let _ = v.push(x);
    }
}

/// Stages where one structure's law changes form.
fn structure_breaks(s: &FixedStructure, v: &mut heapless::Vec<f32, MAX_BREAKS>, lo: f32, hi: f32) {
    push_break(v, s.invert_m(), lo, hi);
    match s {
        FixedStructure::CircularOrifice(o) => push_break(v, o.soffit_m(), lo, hi),
        FixedStructure::RectangularOrifice(o) => push_break(v, o.soffit_m(), lo, hi),
        FixedStructure::Riser(r) => push_break(v, r.crest_m() + r.transition_head_m(), lo, hi),
        _ => {}
    }
}

impl<'a> FixedFlowTable<'a> {
    /// Tabulates the fixed structures of `outlet` from their lowest invert up to `top_m`
    /// (see the module doc). A NaN or infinite `top_m`, one at or below the lowest invert, or
    /// an outlet without fixed structures gives an empty table (every evaluation exact).
    /// Cost: one exact evaluation of the fixed structures per node.
    pub fn new(outlet: &'a Outlet, top_m: f32) -> Self {
        let mut table = Self {
            outlet,
            nodes: heapless::Vec::new(),
        };
        let lo = outlet
            .fixed()
            .iter()
            .map(FixedStructure::invert_m)
            .fold(f32::INFINITY, f32::min);
        let hi = top_m;
        if !(lo.is_finite() && hi.is_finite() && hi - lo > MIN_BREAK_GAP_M) {
            return table;
        }
        let mut breaks: heapless::Vec<f32, MAX_BREAKS> = heapless::Vec::new();
        let _ = breaks.push(lo);
        let _ = breaks.push(hi);
        for s in outlet.fixed() {
            structure_breaks(s, &mut breaks, lo, hi);
        }
        if let Some(t) = outlet.tailwater_m() {
            push_break(&mut breaks, t, lo, hi);
        }
        breaks.sort_unstable_by(f32::total_cmp);
        // Merge near-equal breakpoints (keep the first; both ends survive).
        let mut ends: heapless::Vec<f32, MAX_BREAKS> = heapless::Vec::new();
        for &b in breaks.iter() {
            match ends.last() {
                Some(&p) if b - p < MIN_BREAK_GAP_M => {
                    if b >= hi
                        && let Some(last) = ends.last_mut()
                    {
                        *last = hi;
                    }
                }
                _ => {
                    let _ = ends.push(b);
                }
            }
        }
        // Coarse segments, each with its exact end flows and its exact midpoint flow. Start
        // from the breakpoints; then split, one at a time, the segment whose midpoint is
        // farthest from the chord (relative to its flow plus FLOW_FLOOR_M3S) at that
        // midpoint, evaluating the midpoints of the two halves. Every evaluation becomes a
        // node: the table is the coarse nodes and their midpoints.
        // Segments shorter than this are not split: an onset like `√(h − t)` has the same
        // relative chord error at every scale and would otherwise take every node.
        let min_split_m = (hi - lo) / MIN_SPLIT_FRACTION;
        let mut coarse: heapless::Vec<Coarse, COARSE_POINTS> = heapless::Vec::new();
        let mut upper: Option<(f32, f32)> = None;
        for &b in ends.iter().rev() {
            let q = table.exact_m3s(b);
            let c = match upper {
                Some(u) => Coarse::new(&table, b, q, u, min_split_m),
                None => Coarse {
                    stage_m: b,
                    flow_m3s: q,
                    mid: (b, q),
                    key: 0.0,
                },
            };
            let _ = coarse.push(c);
            upper = Some((b, q));
        }
        coarse.reverse();
        while !coarse.is_full() {
            let mut best: Option<(usize, f32)> = None;
            for (i, c) in coarse.iter().enumerate() {
                if c.key > 0.0 && best.is_none_or(|(_, k)| c.key > k) {
                    best = Some((i, c.key));
                }
            }
            let Some((i, _)) = best else { break };
            let j = i.wrapping_add(1);
            let (Some(c), Some(d)) = (coarse.get(i).copied(), coarse.get(j).copied()) else {
                break;
            };
            let (xm, qm) = c.mid;
            let right = Coarse::new(&table, xm, qm, (d.stage_m, d.flow_m3s), min_split_m);
            let left = Coarse::new(&table, c.stage_m, c.flow_m3s, (xm, qm), min_split_m);
            if let Some(slot) = coarse.get_mut(i) {
                *slot = left;
            }
            if coarse.insert(j, right).is_err() {
                break;
            }
        }
        let last = coarse.len().saturating_sub(1);
        for (i, c) in coarse.iter().enumerate() {
            table.push_node(c.stage_m, c.flow_m3s);
            if i < last {
                table.push_node(c.mid.0, c.mid.1);
            }
        }
        table.finish_slopes();
        table
    }

    /// The exact fixed-structure flow, never negative.
    fn exact_m3s(&self, stage_m: f32) -> f32 {
        let q = self.outlet.fixed_discharge_m3s(stage_m);
        if q > 0.0 { q } else { 0.0 }
    }

    /// Appends a node at `stage_m` with flow `flow_m3s` (raised to the previous node's) if it
    /// lies above the previous node.
    fn push_node(&mut self, stage_m: f32, flow_m3s: f32) {
        let prev = self.nodes.last().copied();
        if stage_m.is_nan() || prev.is_some_and(|p| stage_m <= p.stage_m) {
            return;
        }
        let flow_m3s = match prev {
            Some(p) if p.flow_m3s > flow_m3s => p.flow_m3s,
            _ => flow_m3s,
        };
        let _ = self.nodes.push(Node {
            stage_m,
            flow_m3s,
            slope_m2s: 0.0,
        });
    }

    fn finish_slopes(&mut self) {
        let mut next: Option<Node> = None;
        for n in self.nodes.iter_mut().rev() {
            n.slope_m2s = match next {
                Some(u) => {
                    let s = (u.flow_m3s - n.flow_m3s) / (u.stage_m - n.stage_m);
                    if s.is_finite() && s > 0.0 { s } else { 0.0 }
                }
                None => 0.0,
            };
            next = Some(*n);
        }
    }

    /// The outlet tabulated.
    pub fn outlet(&self) -> &'a Outlet {
        self.outlet
    }

    /// Number of nodes (0: every evaluation is exact).
    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    /// No nodes: every evaluation is exact.
    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// The node stages, m (strictly increasing).
    pub fn stages_m(&self) -> impl Iterator<Item = f32> + '_ {
        self.nodes.iter().map(|n| n.stage_m)
    }

    /// The node flows, m³/s (non-decreasing).
    pub fn flows_m3s(&self) -> impl Iterator<Item = f32> + '_ {
        self.nodes.iter().map(|n| n.flow_m3s)
    }

    /// The stage range tabulated, m (None when empty).
    pub fn range_m(&self) -> Option<(f32, f32)> {
        Some((self.nodes.first()?.stage_m, self.nodes.last()?.stage_m))
    }

    /// Fixed-structure discharge at `stage_m`, m³/s: the table (see the module doc).
    pub fn discharge_m3s(&self, stage_m: f32) -> f32 {
        self.lookup(stage_m, &Cell::new(0))
    }

    /// The look-up, starting from segment `hint` and leaving the segment used there.
    #[inline]
    fn lookup(&self, h: f32, hint: &Cell<usize>) -> f32 {
        let (Some(first), Some(last)) = (self.nodes.first(), self.nodes.last()) else {
            return self.outlet.fixed_discharge_m3s(h);
        };
        if h.is_nan() || h <= first.stage_m {
            // Below the lowest invert (or NaN): no flow, exactly.
            return 0.0;
        }
        if h >= last.stage_m {
            let q = self.outlet.fixed_discharge_m3s(h);
            return if q > last.flow_m3s { q } else { last.flow_m3s };
        }
        let i = self.segment(h, hint.get());
        hint.set(i);
        match (self.nodes.get(i), self.nodes.get(i.wrapping_add(1))) {
            (Some(a), Some(b)) => {
                let q = a.flow_m3s + a.slope_m2s * (h - a.stage_m);
                if q < b.flow_m3s { q } else { b.flow_m3s }
            }
            // Unreachable for first < h < last; the exact law is the safe answer.
            _ => self.outlet.fixed_discharge_m3s(h),
        }
    }

    /// The segment `i` with `stage[i] ≤ h < stage[i + 1]` (for `stage[0] < h < stage[last]`):
    /// the hint or its upper neighbour when they hold `h`, else bisection.
    #[inline]
    fn segment(&self, h: f32, hint: usize) -> usize {
        let holds = |i: usize| match (self.nodes.get(i), self.nodes.get(i.wrapping_add(1))) {
            (Some(a), Some(b)) => a.stage_m <= h && h < b.stage_m,
            _ => false,
        };
        if holds(hint) {
            return hint;
        }
        let up = hint.saturating_add(1);
        if holds(up) {
            return up;
        }
        let down = hint.wrapping_sub(1);
        if holds(down) {
            return down;
        }
        self.nodes
            .partition_point(|n| n.stage_m <= h)
            .saturating_sub(1)
    }
}

impl StageDischarge for FixedFlowTable<'_> {
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        FixedFlowTable::discharge_m3s(self, stage_m)
    }
}

/// A policy run on a [`Forecaster`]: the release as a function of stage, with the fixed
/// structures from the table and the gate exact. The same law as
/// [`super::PolicyOutlet`] with the table in place of the exact fixed-structure flow.
#[derive(Debug, Clone)]
pub struct TabulatedRelease<'f> {
    table: &'f FixedFlowTable<'f>,
    policy: Policy,
    hint: Cell<usize>,
}

impl StageDischarge for TabulatedRelease<'_> {
    #[inline]
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        let outlet = self.table.outlet;
        let fixed = self.table.lookup(stage_m, &self.hint);
        match self.policy {
            Policy::Fixed { opening_m } => fixed + outlet.gate_discharge_m3s(stage_m, opening_m),
            Policy::CapRelease { cap_m3s } => {
                let cap = cap_of(cap_m3s);
                if fixed >= cap {
                    return fixed;
                }
                let full = fixed + outlet.gate_discharge_m3s(stage_m, outlet.max_opening_m());
                if full < cap { full } else { cap }
            }
        }
    }
}

/// The pond and its outlet with the fixed structures tabulated: built once (per forecast, or
/// once per configuration and kept), then any number of candidate policies are predicted at
/// a fraction of the exact cost (see the module doc for accuracy).
#[derive(Debug, Clone)]
pub struct Forecaster<'a> {
    pond: &'a StageStorage,
    table: FixedFlowTable<'a>,
}

impl<'a> Forecaster<'a> {
    /// A forecaster whose table covers the lowest invert up to `top_m` (above it the exact
    /// law is used, so any top is correct; a top near the highest stage the forecasts reach
    /// gives the finest grid). A NaN or infinite `top_m` reads as the pond's top.
    pub fn new(pond: &'a StageStorage, outlet: &'a Outlet, top_m: f32) -> Self {
        let top_m = if top_m.is_finite() {
            top_m
        } else {
            pond.top_m()
        };
        Self {
            pond,
            table: FixedFlowTable::new(outlet, top_m),
        }
    }

    /// A forecaster for one forecast from `storage_m3` over `outlook`: the table reaches the
    /// stage that holds the start storage plus the whole outlook volume (the highest any
    /// policy can reach, with nothing released), plus 1 % of the range for the solver's
    /// tolerance, but no higher than the pond's top plus a quarter of its depth above the
    /// lowest invert (an overtopping forecast is exact up there, at the exact cost).
    pub fn reaching(
        pond: &'a StageStorage,
        outlet: &'a Outlet,
        storage_m3: f32,
        outlook: &Outlook,
    ) -> Self {
        let top = pond.stage_m(super::sane(storage_m3) + outlook.volume_m3());
        let lo = outlet
            .fixed()
            .iter()
            .map(FixedStructure::invert_m)
            .fold(f32::INFINITY, f32::min);
        let margin = if top > lo { 0.01 * (top - lo) } else { 0.0 };
        let ceiling = pond.top_m() + 0.25 * (pond.top_m() - lo);
        let top = top + margin;
        Self::new(pond, outlet, if top < ceiling { top } else { ceiling })
    }

    /// The pond.
    pub fn pond(&self) -> &'a StageStorage {
        self.pond
    }

    /// The outlet.
    pub fn outlet(&self) -> &'a Outlet {
        self.table.outlet
    }

    /// The fixed-structure table.
    pub fn table(&self) -> &FixedFlowTable<'a> {
        &self.table
    }

    /// `policy` as a stage–discharge relation on the table (fixed structures tabulated, the
    /// gate exact).
    pub fn release(&self, policy: Policy) -> TabulatedRelease<'_> {
        TabulatedRelease {
            table: &self.table,
            policy,
            hint: Cell::new(0),
        }
    }

    /// [`super::predict`] on the table: the same integrator and the same report.
    pub fn predict(
        &self,
        storage_m3: f32,
        outlook: &Outlook,
        policy: Policy,
        limits: &Limits,
    ) -> Prediction {
        predict_release(
            self.pond,
            &self.release(policy),
            storage_m3,
            outlook,
            limits,
        )
    }

    /// [`super::release_to_hold`] on the table: the same bisection on the cap, each trial
    /// predicted with [`Forecaster::predict`].
    pub fn release_to_hold(&self, storage_m3: f32, outlook: &Outlook, limits: &Limits) -> Hold {
        hold_search(self.outlet().max_opening_m(), limits, |policy| {
            self.predict(storage_m3, outlook, policy, limits)
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hydraulics::{CircularOrifice, Riser, SluiceGate, Spillway};

    fn outlet() -> Outlet {
        let o = CircularOrifice::new(100.0, 0.15, 0.6).unwrap();
        let r = Riser::circular(101.8, 1.2, 0.6, 0.6).unwrap();
        let s = Spillway::new(102.6, 8.0, 3.0, 0.9).unwrap();
        let g = SluiceGate::new(100.0, 0.6, 0.6, 0.61, 0.98).unwrap();
        Outlet::new(&[o.into(), r.into(), s.into()], Some(g), Some(100.1)).unwrap()
    }

    #[test]
    fn nodes_include_every_breakpoint_and_fill_the_capacity() {
        let o = outlet();
        let t = FixedFlowTable::new(&o, 103.0);
        assert_eq!(t.len(), 2 * COARSE_POINTS - 1);
        let stages: Vec<f32> = t.stages_m().collect();
        for b in [100.0, 100.1, 100.15, 101.8, 101.8 + 0.45, 102.6, 103.0] {
            assert!(
                stages.iter().any(|&x| (x - b).abs() < 1e-4),
                "{b} not a node: {stages:?}"
            );
        }
        assert!(stages.windows(2).all(|w| w[0] < w[1]));
        let flows: Vec<f32> = t.flows_m3s().collect();
        assert!(flows.windows(2).all(|w| w[0] <= w[1]));
    }

    #[test]
    fn empty_table_is_exact_and_nan_is_zero() {
        let g = SluiceGate::new(0.0, 0.5, 0.5, 0.61, 0.98).unwrap();
        let o = Outlet::new(&[], Some(g), None).unwrap();
        let t = FixedFlowTable::new(&o, 3.0);
        assert!(t.is_empty());
        assert_eq!(t.discharge_m3s(1.0), 0.0);
        let o = outlet();
        assert!(FixedFlowTable::new(&o, f32::NAN).is_empty());
        assert!(FixedFlowTable::new(&o, 99.0).is_empty());
        let t = FixedFlowTable::new(&o, 103.0);
        assert_eq!(t.discharge_m3s(f32::NAN), 0.0);
        assert_eq!(t.discharge_m3s(99.0), 0.0);
        assert_eq!(t.discharge_m3s(104.0), o.fixed_discharge_m3s(104.0));
    }

    #[test]
    fn hinted_lookup_equals_bisection() {
        let o = outlet();
        let t = FixedFlowTable::new(&o, 103.0);
        let hint = Cell::new(0);
        let mut h = 99.9_f32;
        while h < 103.2 {
            assert_eq!(t.lookup(h, &hint).to_bits(), t.discharge_m3s(h).to_bits());
            h += 0.0037;
        }
        let mut h = 103.2_f32;
        while h > 99.9 {
            assert_eq!(t.lookup(h, &hint).to_bits(), t.discharge_m3s(h).to_bits());
            h -= 0.011;
        }
    }
}
