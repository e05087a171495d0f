//! The rational method: peak discharge Q = C·i·A.
//!
//! ## Units and factors
//!
//! - SI: Q \[m³/s\] = C · i \[mm/h\] · A \[ha\] / 360, because
//!   1 mm/h · 1 ha = 0.001 m · 10 000 m² / 3600 s = 1/360 m³/s (1 ha = 10 000 m², 1 h = 3600 s).
//! - US customary: Q \[cfs\] = 1.008 · C · i \[in/h\] · A \[acres\], because
//!   1 acre · 1 in/h = 43 560 ft² · (1/12) ft / 3600 s = 1.008 33 ft³/s
//!   (1 acre = 43 560 ft², 1 ft = 12 in). The factor is kept exact here ([`CFS_PER_ACRE_IN_H`]);
//!   many texts drop it to 1.
//!
//! ## Invariants
//!
//! - A [`RunoffCoefficient`] is in \[0, 1\]; a frequency-adjusted one is capped at 1.
//! - An [`AreaHa`] / [`AreaAcres`] is finite and ≥ 0.
//! - A [`LandCoverMix`] has 1..=[`MAX_LAND_COVER_PARTS`] parts and a total area > 0; its
//!   coefficient is the area-weighted mean Σ Cₖ·Aₖ / Σ Aₖ, so it is in \[0, 1\] too.
//! - Peak functions read a negative or NaN intensity as 0 (live input, never an error).

use heapless::Vec;

use super::{RunoffError, live_non_negative};
use crate::validate;

/// m³/s per (mm/h · ha): 0.001 m · 10 000 m² / 3600 s = 1/360.
pub const M3S_PER_MM_H_HA: f32 = 1.0 / 360.0;

/// ft³/s per (in/h · acre): 43 560 ft² · (1/12) ft / 3600 s = 1.008 333…
pub const CFS_PER_ACRE_IN_H: f32 = 43_560.0 / 12.0 / 3600.0;

/// m² per hectare (exact).
pub const M2_PER_HA: f32 = 10_000.0;

/// m² per acre: 43 560 ft² · (0.3048 m/ft)² = 4046.856 422 4 m² (exact by definition).
pub const M2_PER_ACRE: f32 = 4_046.856_4;

/// How many land-cover parts a [`LandCoverMix`] can hold.
pub const MAX_LAND_COVER_PARTS: usize = 16;

/// A runoff coefficient C, dimensionless, in \[0, 1\].
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(transparent)]
pub struct RunoffCoefficient(f32);

impl RunoffCoefficient {
    /// A coefficient; `c` must be finite and in \[0, 1\].
    pub fn new(c: f32) -> Result<Self, RunoffError> {
        Ok(Self(validate::within(
            "runoff_coefficient",
            c,
            0.0,
            1.0,
            "must be in [0, 1]",
        )?))
    }

    /// The value, in \[0, 1\].
    pub fn value(self) -> f32 {
        self.0
    }

    /// C·Cf for a rarer design storm, capped at 1 (see [`DesignFrequency`]).
    pub fn with_frequency(self, frequency: DesignFrequency) -> Self {
        let c = self.0 * frequency.factor();
        Self(if c > 1.0 { 1.0 } else { c })
    }
}

/// A catchment area in hectares, finite and ≥ 0.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(transparent)]
pub struct AreaHa(f32);

impl AreaHa {
    /// An area of `area_ha` hectares (finite, ≥ 0).
    pub fn new(area_ha: f32) -> Result<Self, RunoffError> {
        Ok(Self(validate::non_negative("area_ha", area_ha)?))
    }

    /// An area given in m² (finite, ≥ 0).
    pub fn from_m2(area_m2: f32) -> Result<Self, RunoffError> {
        Ok(Self(
            validate::non_negative("area_m2", area_m2)? / M2_PER_HA,
        ))
    }

    /// The area in hectares.
    pub fn ha(self) -> f32 {
        self.0
    }

    /// The area in m².
    pub fn m2(self) -> f32 {
        self.0 * M2_PER_HA
    }
}

/// A catchment area in acres (US customary), finite and ≥ 0.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(transparent)]
pub struct AreaAcres(f32);

impl AreaAcres {
    /// An area of `area_acres` acres (finite, ≥ 0).
    pub fn new(area_acres: f32) -> Result<Self, RunoffError> {
        Ok(Self(validate::non_negative("area_acres", area_acres)?))
    }

    /// The area in acres.
    pub fn acres(self) -> f32 {
        self.0
    }

    /// The same area in hectares (1 acre = 4046.856 4224 m²).
    pub fn to_ha(self) -> AreaHa {
        AreaHa(self.0 * (M2_PER_ACRE / M2_PER_HA))
    }
}

/// Rational peak in m³/s: C · i \[mm/h\] · A \[ha\] / 360. A negative or NaN intensity reads as 0.
pub fn peak_m3s(c: RunoffCoefficient, intensity_mm_h: f32, area: AreaHa) -> f32 {
    c.0 * live_non_negative(intensity_mm_h) * area.0 * M3S_PER_MM_H_HA
}

/// Rational peak in cfs: 1.008 · C · i \[in/h\] · A \[acres\]. A negative or NaN intensity reads
/// as 0.
pub fn peak_cfs(c: RunoffCoefficient, intensity_in_h: f32, area: AreaAcres) -> f32 {
    CFS_PER_ACRE_IN_H * c.0 * live_non_negative(intensity_in_h) * area.0
}

/// The design-storm frequency row used to adjust C for rarer storms.
///
/// Factors Cf (C·Cf capped at 1): ≤ 10 yr 1.0, 25 yr 1.1, 50 yr 1.2, 100 yr 1.25.
/// Source: from memory — the table reprinted in many US urban drainage criteria manuals; check
/// it against the manual that governs the site before relying on it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum DesignFrequency {
    /// Return period of 10 years or less: Cf = 1.0 (no adjustment).
    UpTo10Yr,
    /// 25-year storm: Cf = 1.1.
    Yr25,
    /// 50-year storm: Cf = 1.2.
    Yr50,
    /// 100-year storm (and rarer): Cf = 1.25.
    Yr100,
}

impl DesignFrequency {
    /// The row for a return period in years, rounded up to the next tabulated row (so a
    /// 30-year storm takes the 50-year factor: the conservative side). Periods above 100 years
    /// take the 100-year row, the table's last. `return_period_yr` must be finite and ≥ 1.
    pub fn from_return_period_yr(return_period_yr: f32) -> Result<Self, RunoffError> {
        let t = validate::within(
            "return_period_yr",
            return_period_yr,
            1.0,
            f32::MAX,
            "must be a finite number >= 1",
        )?;
        Ok(if t <= 10.0 {
            Self::UpTo10Yr
        } else if t <= 25.0 {
            Self::Yr25
        } else if t <= 50.0 {
            Self::Yr50
        } else {
            Self::Yr100
        })
    }

    /// The frequency factor Cf.
    pub fn factor(self) -> f32 {
        match self {
            Self::UpTo10Yr => 1.0,
            Self::Yr25 => 1.1,
            Self::Yr50 => 1.2,
            Self::Yr100 => 1.25,
        }
    }
}

/// One land-cover part of a catchment: its runoff coefficient and area.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LandCoverPart {
    /// Runoff coefficient of this cover.
    pub c: RunoffCoefficient,
    /// Area of this cover.
    pub area: AreaHa,
}

impl LandCoverPart {
    /// A part from raw numbers (`c` in \[0, 1\], `area_ha` ≥ 0).
    pub fn new(c: f32, area_ha: f32) -> Result<Self, RunoffError> {
        Ok(Self {
            c: RunoffCoefficient::new(c)?,
            area: AreaHa::new(area_ha)?,
        })
    }
}

/// Land-cover parts of one catchment and their area-weighted runoff coefficient.
#[derive(Debug, Clone, PartialEq)]
pub struct LandCoverMix {
    parts: Vec<LandCoverPart, MAX_LAND_COVER_PARTS>,
    total_area: AreaHa,
    c: RunoffCoefficient,
}

impl LandCoverMix {
    /// The mix of `parts` (1..=[`MAX_LAND_COVER_PARTS`] of them, total area > 0).
    pub fn new(parts: &[LandCoverPart]) -> Result<Self, RunoffError> {
        if parts.is_empty() {
            return Err(RunoffError::Empty {
                what: "land-cover parts",
            });
        }
        let stored = Vec::from_slice(parts).map_err(|_| RunoffError::Capacity {
            what: "land-cover parts",
            capacity: MAX_LAND_COVER_PARTS,
        })?;
        let total = parts.iter().map(|p| p.area.0).sum::<f32>();
        let total = validate::positive("total_area_ha", total)?;
        let weighted = parts.iter().map(|p| p.c.0 * p.area.0).sum::<f32>() / total;
        // Rounding could put the mean a hair outside [0, 1]; it is a mean of values in [0, 1].
        let c = RunoffCoefficient(crate::math::clamp(weighted, 0.0, 1.0));
        Ok(Self {
            parts: stored,
            total_area: AreaHa(total),
            c,
        })
    }

    /// The area-weighted coefficient Σ Cₖ·Aₖ / Σ Aₖ.
    pub fn coefficient(&self) -> RunoffCoefficient {
        self.c
    }

    /// The total area Σ Aₖ.
    pub fn total_area(&self) -> AreaHa {
        self.total_area
    }

    /// The parts as given.
    pub fn parts(&self) -> &[LandCoverPart] {
        &self.parts
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 1 mm/h on 1 ha with C = 1 is 1/360 m³/s (1 ha = 1e4 m², 1 h = 3600 s: NIST definitions).
    #[test]
    fn si_unit_factor_is_one_over_360() {
        let q = peak_m3s(
            RunoffCoefficient::new(1.0).unwrap(),
            1.0,
            AreaHa::new(1.0).unwrap(),
        );
        assert!((q - 0.001 * 10_000.0 / 3600.0).abs() < 1e-9);
    }

    /// 43 560 / 12 / 3600 = 1.008 33 (1 acre = 43 560 ft²: NIST definition).
    #[test]
    fn us_unit_factor_is_1_008() {
        assert!((CFS_PER_ACRE_IN_H - 1.008_333).abs() < 1e-6);
    }

    #[test]
    fn frequency_factor_caps_c_at_one() {
        let c = RunoffCoefficient::new(0.9)
            .unwrap()
            .with_frequency(DesignFrequency::Yr100);
        assert_eq!(c.value(), 1.0);
        let c = RunoffCoefficient::new(0.5)
            .unwrap()
            .with_frequency(DesignFrequency::Yr50);
        assert!((c.value() - 0.6).abs() < 1e-6);
    }

    #[test]
    fn return_period_rounds_up_to_the_next_row() {
        use DesignFrequency::*;
        let f = |t| DesignFrequency::from_return_period_yr(t).unwrap();
        assert_eq!(f(2.0), UpTo10Yr);
        assert_eq!(f(10.0), UpTo10Yr);
        assert_eq!(f(10.5), Yr25);
        assert_eq!(f(30.0), Yr50);
        assert_eq!(f(100.0), Yr100);
        assert_eq!(f(500.0), Yr100);
        assert!(DesignFrequency::from_return_period_yr(0.5).is_err());
        assert!(DesignFrequency::from_return_period_yr(f32::NAN).is_err());
    }

    #[test]
    fn bad_numbers_are_rejected() {
        assert!(RunoffCoefficient::new(-0.01).is_err());
        assert!(RunoffCoefficient::new(1.01).is_err());
        assert!(RunoffCoefficient::new(f32::NAN).is_err());
        assert!(AreaHa::new(-1.0).is_err());
        assert!(AreaAcres::new(f32::INFINITY).is_err());
        assert!(LandCoverMix::new(&[]).is_err());
        let zero = LandCoverPart::new(0.5, 0.0).unwrap();
        assert!(LandCoverMix::new(&[zero, zero]).is_err());
        let p = LandCoverPart::new(0.5, 1.0).unwrap();
        assert!(matches!(
            LandCoverMix::new(&[p; MAX_LAND_COVER_PARTS + 1]),
            Err(RunoffError::Capacity { .. })
        ));
    }

    #[test]
    fn negative_or_nan_intensity_gives_no_flow() {
        let c = RunoffCoefficient::new(0.7).unwrap();
        let a = AreaHa::new(3.0).unwrap();
        assert_eq!(peak_m3s(c, -5.0, a), 0.0);
        assert_eq!(peak_m3s(c, f32::NAN, a), 0.0);
    }
}
