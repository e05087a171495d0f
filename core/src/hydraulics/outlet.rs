//! Composite outlet: up to [`MAX_FIXED`] fixed structures at their own inverts, an optional
//! controlled gate, an optional fixed tailwater; and the inverse, the opening for a target
//! discharge.
//!
//! Units: m, m³/s. The total discharge is the sum of the structures' discharges, each
//! evaluated at the outlet's tailwater; sums of non-negative, continuous, monotone laws keep
//! all three properties.
//!
//! The inverse [`Outlet::opening_for`] bisects the gate opening on `[0, max_opening_m]` for
//! exactly [`MAX_INVERSE_ITERATIONS`] halvings at most (it stops early once the bracket is an
//! ulp wide), after evaluating the fixed structures once. Inside the range it returns the
//! smallest opening whose discharge reaches the target (the gate law is flat once the gate
//! clears the water, so larger openings may give the same flow); at the bounds it is exact
//! (closed-gate flow → 0, full-open flow → `max_opening_m`).

use crate::flow::StageDischarge;
use crate::hydraulics::{
    BroadCrestedWeir, CircularOrifice, HydraulicsError, RectangularOrifice, RectangularWeir, Riser,
    SluiceGate, Spillway, VNotchWeir, level,
};
use crate::validate::Invalid;

/// Capacity of an outlet's list of fixed structures.
pub const MAX_FIXED: usize = 8;

/// Bisection halvings of [`Outlet::opening_for`] (at most): 2⁻³² of the stroke is far below
/// f32 resolution, so the loop normally ends early on an ulp-wide bracket.
pub const MAX_INVERSE_ITERATIONS: usize = 32;

/// Any structure without a moving part.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FixedStructure {
    /// A circular orifice.
    CircularOrifice(CircularOrifice),
    /// A rectangular orifice.
    RectangularOrifice(RectangularOrifice),
    /// A sharp-crested rectangular weir.
    RectangularWeir(RectangularWeir),
    /// A sharp-crested V-notch weir.
    VNotchWeir(VNotchWeir),
    /// A broad-crested weir.
    BroadCrestedWeir(BroadCrestedWeir),
    /// An overflow riser.
    Riser(Riser),
    /// An emergency spillway.
    Spillway(Spillway),
}

impl FixedStructure {
    /// Discharge (m³/s) at `stage_m` with optional `tailwater_m` (None = free outfall).
    pub fn discharge_m3s(&self, stage_m: f32, tailwater_m: Option<f32>) -> f32 {
        match self {
            FixedStructure::CircularOrifice(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::RectangularOrifice(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::RectangularWeir(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::VNotchWeir(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::BroadCrestedWeir(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::Riser(s) => s.discharge_m3s(stage_m, tailwater_m),
            FixedStructure::Spillway(s) => s.discharge_m3s(stage_m, tailwater_m),
        }
    }

    /// The level (m) at and below which this structure passes nothing.
    pub fn invert_m(&self) -> f32 {
        match self {
            FixedStructure::CircularOrifice(s) => s.invert_m(),
            FixedStructure::RectangularOrifice(s) => s.invert_m(),
            FixedStructure::RectangularWeir(s) => s.crest_m(),
            FixedStructure::VNotchWeir(s) => s.crest_m(),
            FixedStructure::BroadCrestedWeir(s) => s.crest_m(),
            FixedStructure::Riser(s) => s.crest_m(),
            FixedStructure::Spillway(s) => s.crest_m(),
        }
    }
}

macro_rules! from_structure {
    ($($t:ident),*) => {$(
        impl From<$t> for FixedStructure {
            fn from(s: $t) -> Self {
                FixedStructure::$t(s)
            }
        }
    )*};
}
from_structure!(
    CircularOrifice,
    RectangularOrifice,
    RectangularWeir,
    VNotchWeir,
    BroadCrestedWeir,
    Riser,
    Spillway
);

/// A pond outlet: fixed structures, an optional controlled gate, an optional fixed tailwater.
#[derive(Debug, Clone, PartialEq)]
pub struct Outlet {
    fixed: heapless::Vec<FixedStructure, MAX_FIXED>,
    gate: Option<SluiceGate>,
    tailwater_m: Option<f32>,
}

impl Outlet {
    /// An outlet of `fixed` structures (at most [`MAX_FIXED`]), an optional `gate` and an
    /// optional fixed `tailwater_m` (None = free outfall).
    pub fn new(
        fixed: &[FixedStructure],
        gate: Option<SluiceGate>,
        tailwater_m: Option<f32>,
    ) -> Result<Self, HydraulicsError> {
        let tailwater_m = match tailwater_m {
            Some(t) => Some(level("tailwater_m", t)?),
            None => None,
        };
        let fixed =
            heapless::Vec::from_slice(fixed).map_err(|_| HydraulicsError::TooManyStructures {
                capacity: MAX_FIXED,
            })?;
        Ok(Self {
            fixed,
            gate,
            tailwater_m,
        })
    }

    /// Adds a fixed structure; an error when the outlet already holds [`MAX_FIXED`].
    pub fn push(&mut self, structure: FixedStructure) -> Result<(), HydraulicsError> {
        self.fixed
            .push(structure)
            .map_err(|_| HydraulicsError::TooManyStructures {
                capacity: MAX_FIXED,
            })
    }

    /// The fixed structures.
    pub fn fixed(&self) -> &[FixedStructure] {
        &self.fixed
    }

    /// The controlled gate, if any.
    pub fn gate(&self) -> Option<&SluiceGate> {
        self.gate.as_ref()
    }

    /// The fixed tailwater, m (None = free outfall).
    pub fn tailwater_m(&self) -> Option<f32> {
        self.tailwater_m
    }

    /// Largest gate opening, m (0 without a gate).
    pub fn max_opening_m(&self) -> f32 {
        self.gate.as_ref().map_or(0.0, SluiceGate::max_opening_m)
    }

    /// Total discharge of the fixed structures (m³/s) at `stage_m`.
    pub fn fixed_discharge_m3s(&self, stage_m: f32) -> f32 {
        // A structure passes nothing at and below its invert (`FixedStructure::invert_m`), so
        // those are not evaluated: most of a dry spell is below every crest but the lowest.
        let mut q = 0.0_f32;
        for s in &self.fixed {
            if stage_m > s.invert_m() {
                q += s.discharge_m3s(stage_m, self.tailwater_m);
            }
        }
        q
    }

    /// Discharge of the gate (m³/s) at `stage_m` and `opening_m` (clamped); 0 without a gate.
    pub fn gate_discharge_m3s(&self, stage_m: f32, opening_m: f32) -> f32 {
        self.gate.as_ref().map_or(0.0, |g| {
            g.discharge_m3s(stage_m, opening_m, self.tailwater_m)
        })
    }

    /// Total discharge (m³/s) at `stage_m` with the gate at `opening_m`.
    pub fn discharge_m3s(&self, stage_m: f32, opening_m: f32) -> f32 {
        self.fixed_discharge_m3s(stage_m) + self.gate_discharge_m3s(stage_m, opening_m)
    }

    /// This outlet with the gate held at `opening_m`, as a [`StageDischarge`] for routing.
    pub fn at(&self, opening_m: f32) -> OutletAt<'_> {
        OutletAt {
            outlet: self,
            opening_m,
        }
    }

    /// The gate opening (m) giving total discharge `target_m3s` at `stage_m`.
    ///
    /// Exact at the bounds: a target equal to the closed-gate flow gives 0 (checked first),
    /// one equal to the full-open flow gives `max_opening_m`. Otherwise bisection, at most
    /// [`MAX_INVERSE_ITERATIONS`] steps, returning the upper end of the final bracket: the
    /// smallest opening (to f32 resolution) whose discharge reaches the target. Errors: [`HydraulicsError::NoGate`];
    /// [`HydraulicsError::Unreachable`] with the closed/open range when the target is outside
    /// it; [`HydraulicsError::Invalid`] for a NaN or infinite target.
    pub fn opening_for(&self, stage_m: f32, target_m3s: f32) -> Result<f32, HydraulicsError> {
        let gate = self.gate.as_ref().ok_or(HydraulicsError::NoGate)?;
        if !target_m3s.is_finite() {
            return Err(Invalid {
                field: "target_m3s",
                value: target_m3s,
                rule: "must be a finite number",
            }
            .into());
        }
        let fixed = self.fixed_discharge_m3s(stage_m);
        let max_a = gate.max_opening_m();
        let q_open = fixed + gate.discharge_m3s(stage_m, max_a, self.tailwater_m);
        if target_m3s == fixed {
            return Ok(0.0);
        }
        if target_m3s == q_open {
            return Ok(max_a);
        }
        if target_m3s < fixed || target_m3s > q_open {
            return Err(HydraulicsError::Unreachable {
                target_m3s,
                min_m3s: fixed,
                max_m3s: q_open,
            });
        }
        let (mut lo, mut hi) = (0.0_f32, max_a);
        let at = gate.at_stage(stage_m, self.tailwater_m);
        for _ in 0..MAX_INVERSE_ITERATIONS {
            let mid = 0.5 * (lo + hi);
            if !(mid > lo && mid < hi) {
                break;
            }
            // 0 <= lo < mid < hi <= max_a: within the stroke, so no clamp is needed.
            let q = fixed + at.discharge_within_m3s(mid);
            if q < target_m3s {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        Ok(hi)
    }
}

/// An [`Outlet`] with its gate held at one opening: the routing view.
#[derive(Debug, Clone, Copy)]
pub struct OutletAt<'a> {
    outlet: &'a Outlet,
    opening_m: f32,
}

impl OutletAt<'_> {
    /// The gate opening held, m (as given; the gate clamps it).
    pub fn opening_m(&self) -> f32 {
        self.opening_m
    }
}

impl StageDischarge for OutletAt<'_> {
    fn discharge_m3s(&self, stage_m: f32) -> f32 {
        self.outlet.discharge_m3s(stage_m, self.opening_m)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn orifice() -> FixedStructure {
        CircularOrifice::new(0.0, 0.2, 0.6).unwrap().into()
    }

    #[test]
    fn capacity_overflow_is_an_error() {
        let list = [orifice(); MAX_FIXED + 1];
        let e = Outlet::new(&list, None, None).unwrap_err();
        assert_eq!(
            e,
            HydraulicsError::TooManyStructures {
                capacity: MAX_FIXED
            }
        );
        let mut o = Outlet::new(&list[..MAX_FIXED], None, None).unwrap();
        assert!(o.push(orifice()).is_err());
        assert!(format!("{e}").contains("8"));
    }

    #[test]
    fn tailwater_is_validated() {
        let e = Outlet::new(&[], None, Some(f32::NAN)).unwrap_err();
        assert!(format!("{e}").starts_with("tailwater_m = NaN"));
    }

    #[test]
    fn inverse_errors() {
        let o = Outlet::new(&[orifice()], None, None).unwrap();
        assert_eq!(o.opening_for(1.0, 0.1), Err(HydraulicsError::NoGate));
        let g = SluiceGate::new(0.0, 1.0, 1.0, 0.61, 0.98).unwrap();
        let o = Outlet::new(&[orifice()], Some(g), None).unwrap();
        let lo = o.discharge_m3s(1.0, 0.0);
        let hi = o.discharge_m3s(1.0, 1.0);
        assert_eq!(o.opening_for(1.0, lo), Ok(0.0));
        assert!(matches!(
            o.opening_for(1.0, lo * 0.5),
            Err(HydraulicsError::Unreachable { min_m3s, max_m3s, .. }) if min_m3s == lo && max_m3s == hi
        ));
        assert!(matches!(
            o.opening_for(1.0, hi * 1.01),
            Err(HydraulicsError::Unreachable { .. })
        ));
        let e = o.opening_for(1.0, f32::NAN).unwrap_err();
        assert!(format!("{e}").starts_with("target_m3s = NaN"));
    }
}
