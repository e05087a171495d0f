//! The modified-rational hydrograph: the inflow over time from constant-intensity rain of
//! duration Tr on a sub-catchment with time of concentration Tc, and the sum of several lagged
//! sub-catchments at the pond.
//!
//! ## Convention
//!
//! Time t = 0 is the start of rain (at the pond: plus each sub-catchment's travel lag). With
//! the equilibrium peak Qe = C·i·A:
//!
//! - Tr = Tc: a triangle, rising over Tc to Qe and falling over Tc;
//! - Tr > Tc: a trapezoid, rising over Tc, Qe held for Tr − Tc, falling over Tc;
//! - Tr < Tc: a trapezoid with the reduced peak Qe·Tr/Tc, rising over Tr, held for Tc − Tr,
//!   falling over Tr (only the part of the catchment within Tr of the outlet contributes at
//!   once).
//!
//! So, with m = min(Tr, Tc) and base T = Tr + Tc: Q(t) = Qe·(m/Tc)·min(t, T − t, m)/m for
//! 0 ≤ t ≤ T, zero after. This is what a linear time–area curve gives for constant rain, and
//! the volume is Qe·Tr exactly in every case.
//!
//! ## Invariants and units
//!
//! - Discharge in m³/s, volume in m³, time in whole seconds (`u32`); Tr in
//!   1..=[`MAX_RAIN_DURATION_S`], lags in 0..=[`MAX_LAG_S`], so every time sum stays far from
//!   `u32` overflow (and below 2²⁴, so converting times to `f32` is exact).
//! - A [`Catchment`] has 1..=[`MAX_SUB_CATCHMENTS`] sub-catchments.
//! - Q(t) ≥ 0 and finite for every t.

use heapless::Vec;

use super::RunoffError;
use super::rational::{self, AreaHa, RunoffCoefficient};
use super::tc::{MAX_TC_S, TimeOfConcentration};
use crate::validate;

/// Longest rain duration accepted, s (10 days).
pub const MAX_RAIN_DURATION_S: u32 = 864_000;

/// Longest travel lag from a sub-catchment outlet to the pond, s (48 h).
pub const MAX_LAG_S: u32 = 172_800;

/// How many sub-catchments a [`Catchment`] can hold.
pub const MAX_SUB_CATCHMENTS: usize = 8;

/// The modified-rational hydrograph of one sub-catchment (see the module doc for the shape).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ModifiedRational {
    /// Qe = C·i·A, m³/s.
    equilibrium_m3s: f32,
    /// Peak = Qe·min(Tr, Tc)/Tc, m³/s.
    peak_m3s: f32,
    /// m = min(Tr, Tc), s: the rise (and fall) time.
    rise_s: u32,
    /// T = Tr + Tc, s.
    base_s: u32,
    duration_s: u32,
    tc_s: u32,
}

impl ModifiedRational {
    /// The hydrograph of rain at `intensity_mm_h` (finite, ≥ 0) lasting `duration_s`
    /// (1..=[`MAX_RAIN_DURATION_S`]) on a sub-catchment of coefficient `c`, area `area` and
    /// time of concentration `tc`.
    pub fn new(
        c: RunoffCoefficient,
        area: AreaHa,
        tc: TimeOfConcentration,
        intensity_mm_h: f32,
        duration_s: u32,
    ) -> Result<Self, RunoffError> {
        let i = validate::non_negative("intensity_mm_h", intensity_mm_h)?;
        let tr = rain_duration(duration_s)?;
        Ok(Self::from_valid(c, area, tc, i, tr))
    }

    fn from_valid(
        c: RunoffCoefficient,
        area: AreaHa,
        tc: TimeOfConcentration,
        intensity_mm_h: f32,
        duration_s: u32,
    ) -> Self {
        let tc_s = tc.s();
        let equilibrium_m3s = rational::peak_m3s(c, intensity_mm_h, area);
        let rise_s = duration_s.min(tc_s);
        let peak_m3s = if duration_s >= tc_s {
            equilibrium_m3s
        } else {
            equilibrium_m3s * (duration_s as f32 / tc_s as f32)
        };
        // Both are bounded (≤ 864 000 and ≤ 172 800), so the sum cannot overflow.
        let base_s = duration_s.saturating_add(tc_s);
        Self {
            equilibrium_m3s,
            peak_m3s,
            rise_s,
            base_s,
            duration_s,
            tc_s,
        }
    }

    /// Inflow at `t_s` seconds after the start of rain, m³/s.
    pub fn inflow_m3s(&self, t_s: u32) -> f32 {
        let k = t_s.min(self.base_s.saturating_sub(t_s)).min(self.rise_s);
        if k >= self.rise_s {
            self.peak_m3s
        } else {
            // rise_s ≥ 1 here because k < rise_s.
            self.peak_m3s * (k as f32 / self.rise_s as f32)
        }
    }

    /// The peak inflow, m³/s: C·i·A when Tr ≥ Tc, C·i·A·Tr/Tc when Tr < Tc.
    pub fn peak_m3s(&self) -> f32 {
        self.peak_m3s
    }

    /// The equilibrium discharge C·i·A, m³/s (the peak when Tr ≥ Tc).
    pub fn equilibrium_m3s(&self) -> f32 {
        self.equilibrium_m3s
    }

    /// Total runoff volume, m³: C·i·A·Tr.
    pub fn volume_m3(&self) -> f32 {
        self.equilibrium_m3s * self.duration_s as f32
    }

    /// When the peak is first reached, s after the start of rain: min(Tr, Tc).
    pub fn time_to_peak_s(&self) -> u32 {
        self.rise_s
    }

    /// When the peak ends, s after the start of rain: max(Tr, Tc).
    pub fn peak_end_s(&self) -> u32 {
        self.base_s.saturating_sub(self.rise_s)
    }

    /// When inflow returns to zero, s after the start of rain: Tr + Tc.
    pub fn end_s(&self) -> u32 {
        self.base_s
    }

    /// The rain duration Tr, s.
    pub fn duration_s(&self) -> u32 {
        self.duration_s
    }

    /// The time of concentration Tc, s.
    pub fn tc_s(&self) -> u32 {
        self.tc_s
    }
}

fn rain_duration(duration_s: u32) -> Result<u32, RunoffError> {
    if (1..=MAX_RAIN_DURATION_S).contains(&duration_s) {
        Ok(duration_s)
    } else {
        Err(validate::Invalid {
            field: "duration_s",
            value: duration_s as f32,
            rule: "must be in [1, 864000] s",
        }
        .into())
    }
}

/// One sub-catchment draining to the pond: coefficient, area, time of concentration, and the
/// travel lag from its outlet to the pond.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SubCatchment {
    c: RunoffCoefficient,
    area: AreaHa,
    tc: TimeOfConcentration,
    lag_s: u32,
}

impl SubCatchment {
    /// A sub-catchment; `lag_s` in 0..=[`MAX_LAG_S`].
    pub fn new(
        c: RunoffCoefficient,
        area: AreaHa,
        tc: TimeOfConcentration,
        lag_s: u32,
    ) -> Result<Self, RunoffError> {
        if lag_s > MAX_LAG_S {
            return Err(validate::Invalid {
                field: "lag_s",
                value: lag_s as f32,
                rule: "must be in [0, 172800] s",
            }
            .into());
        }
        Ok(Self { c, area, tc, lag_s })
    }

    /// Runoff coefficient.
    pub fn c(&self) -> RunoffCoefficient {
        self.c
    }

    /// Area.
    pub fn area(&self) -> AreaHa {
        self.area
    }

    /// Time of concentration to the sub-catchment's own outlet.
    pub fn tc(&self) -> TimeOfConcentration {
        self.tc
    }

    /// Travel lag from the sub-catchment's outlet to the pond, s.
    pub fn lag_s(&self) -> u32 {
        self.lag_s
    }

    /// Effective (fully contributing) area C·A, m².
    pub fn effective_area_m2(&self) -> f32 {
        self.c.value() * self.area.m2()
    }
}

/// The sub-catchments draining to one pond.
#[derive(Debug, Clone, PartialEq)]
pub struct Catchment {
    subs: Vec<SubCatchment, MAX_SUB_CATCHMENTS>,
}

impl Catchment {
    /// A catchment of 1..=[`MAX_SUB_CATCHMENTS`] sub-catchments.
    pub fn new(subs: &[SubCatchment]) -> Result<Self, RunoffError> {
        if subs.is_empty() {
            return Err(RunoffError::Empty {
                what: "sub-catchments",
            });
        }
        let subs = Vec::from_slice(subs).map_err(|_| RunoffError::Capacity {
            what: "sub-catchments",
            capacity: MAX_SUB_CATCHMENTS,
        })?;
        Ok(Self { subs })
    }

    /// The sub-catchments as given.
    pub fn sub_catchments(&self) -> &[SubCatchment] {
        &self.subs
    }

    /// Σ C·A over the sub-catchments, m².
    pub fn effective_area_m2(&self) -> f32 {
        self.subs.iter().map(SubCatchment::effective_area_m2).sum()
    }

    /// The latest time any part of the catchment reaches the pond, s: max(lag + Tc). Bounded
    /// by 2·[`MAX_TC_S`].
    pub fn max_arrival_s(&self) -> u32 {
        self.subs
            .iter()
            .map(|s| s.lag_s.saturating_add(s.tc.s()))
            .max()
            .unwrap_or(0)
    }

    /// The summed hydrograph at the pond for rain at `intensity_mm_h` (finite, ≥ 0) lasting
    /// `duration_s` (1..=[`MAX_RAIN_DURATION_S`]) on every sub-catchment at once.
    pub fn hydrograph(
        &self,
        intensity_mm_h: f32,
        duration_s: u32,
    ) -> Result<CatchmentHydrograph, RunoffError> {
        let i = validate::non_negative("intensity_mm_h", intensity_mm_h)?;
        let tr = rain_duration(duration_s)?;
        let mut parts = Vec::new();
        for s in &self.subs {
            let h = ModifiedRational::from_valid(s.c, s.area, s.tc, i, tr);
            parts
                .push((h, s.lag_s))
                .map_err(|_| RunoffError::Capacity {
                    what: "sub-catchments",
                    capacity: MAX_SUB_CATCHMENTS,
                })?;
        }
        Ok(CatchmentHydrograph { parts })
    }
}

/// Modified-rational hydrographs of several sub-catchments, each shifted by its lag, summed
/// at the pond.
#[derive(Debug, Clone, PartialEq)]
pub struct CatchmentHydrograph {
    parts: Vec<(ModifiedRational, u32), MAX_SUB_CATCHMENTS>,
}

impl CatchmentHydrograph {
    /// Inflow at the pond `t_s` seconds after the start of rain, m³/s.
    pub fn inflow_m3s(&self, t_s: u32) -> f32 {
        self.parts
            .iter()
            .map(|(h, lag_s)| match t_s.checked_sub(*lag_s) {
                Some(local_s) => h.inflow_m3s(local_s),
                None => 0.0,
            })
            .sum()
    }

    /// The peak of the summed hydrograph and when it first occurs, `(peak_m3s, t_s)`. Exact:
    /// the sum is piecewise linear with corners only where a part's rise, plateau or fall
    /// starts or ends, and every corner is evaluated.
    pub fn peak(&self) -> (f32, u32) {
        let mut best = (0.0_f32, 0_u32);
        for (h, lag_s) in &self.parts {
            for corner in [h.time_to_peak_s(), h.peak_end_s()] {
                let t = lag_s.saturating_add(corner);
                let q = self.inflow_m3s(t);
                if q > best.0 || (q == best.0 && t < best.1) {
                    best = (q, t);
                }
            }
        }
        best
    }

    /// The peak of the summed hydrograph, m³/s.
    pub fn peak_m3s(&self) -> f32 {
        self.peak().0
    }

    /// Σ of the parts' own peaks, m³/s: an upper bound on [`Self::peak_m3s`].
    pub fn sum_of_peaks_m3s(&self) -> f32 {
        self.parts.iter().map(|(h, _)| h.peak_m3s()).sum()
    }

    /// Total volume, m³: Σ C·i·A·Tr.
    pub fn volume_m3(&self) -> f32 {
        self.parts.iter().map(|(h, _)| h.volume_m3()).sum()
    }

    /// When the last part's inflow returns to zero, s after the start of rain.
    pub fn end_s(&self) -> u32 {
        self.parts
            .iter()
            .map(|(h, lag_s)| lag_s.saturating_add(h.end_s()))
            .max()
            .unwrap_or(0)
    }

    /// The lagged parts, one per sub-catchment: `(hydrograph, lag_s)`.
    pub fn parts(&self) -> &[(ModifiedRational, u32)] {
        &self.parts
    }
}

const _: () = assert!(MAX_TC_S <= MAX_LAG_S && MAX_RAIN_DURATION_S < (1 << 24) / 8);

#[cfg(test)]
mod tests {
    use super::*;

    fn sub(c: f32, ha: f32, tc_s: u32, lag_s: u32) -> SubCatchment {
        SubCatchment::new(
            RunoffCoefficient::new(c).unwrap(),
            AreaHa::new(ha).unwrap(),
            TimeOfConcentration::from_s(tc_s).unwrap(),
            lag_s,
        )
        .unwrap()
    }

    fn mr(tc_s: u32, tr_s: u32) -> ModifiedRational {
        ModifiedRational::new(
            RunoffCoefficient::new(0.5).unwrap(),
            AreaHa::new(3.6).unwrap(),
            TimeOfConcentration::from_s(tc_s).unwrap(),
            100.0,
            tr_s,
        )
        .unwrap()
    }

    /// 0.5 · 100 mm/h · 3.6 ha / 360 = 0.5 m³/s (hand calculation).
    #[test]
    fn triangle_when_rain_lasts_tc() {
        let h = mr(600, 600);
        assert!((h.peak_m3s() - 0.5).abs() < 1e-6);
        assert_eq!(h.inflow_m3s(0), 0.0);
        assert!((h.inflow_m3s(300) - 0.25).abs() < 1e-6);
        assert_eq!(h.inflow_m3s(600), h.peak_m3s());
        assert!((h.inflow_m3s(900) - 0.25).abs() < 1e-6);
        assert_eq!(h.inflow_m3s(1200), 0.0);
        assert_eq!(h.inflow_m3s(u32::MAX), 0.0);
    }

    #[test]
    fn trapezoid_when_rain_outlasts_tc() {
        let h = mr(600, 1800);
        assert_eq!(h.time_to_peak_s(), 600);
        assert_eq!(h.peak_end_s(), 1800);
        assert_eq!(h.end_s(), 2400);
        assert_eq!(h.inflow_m3s(1200), h.peak_m3s());
        assert!((h.volume_m3() - 0.5 * 1800.0).abs() < 1e-3);
    }

    #[test]
    fn reduced_peak_when_rain_is_shorter_than_tc() {
        let h = mr(1200, 300);
        assert!((h.peak_m3s() - 0.5 * 300.0 / 1200.0).abs() < 1e-6);
        assert_eq!(h.time_to_peak_s(), 300);
        assert_eq!(h.peak_end_s(), 1200);
        assert_eq!(h.end_s(), 1500);
    }

    #[test]
    fn lag_shifts_and_sum_adds() {
        let c = Catchment::new(&[sub(0.5, 3.6, 600, 0), sub(0.5, 3.6, 600, 600)]).unwrap();
        let h = c.hydrograph(100.0, 600).unwrap();
        // The two triangles meet at t = 900: 0.25 + 0.25.
        assert!((h.inflow_m3s(900) - 0.5).abs() < 1e-6);
        let (peak, _) = h.peak();
        assert!((peak - 0.5).abs() < 1e-6);
        assert!((h.sum_of_peaks_m3s() - 1.0).abs() < 1e-6);
        assert_eq!(h.end_s(), 1800);
    }

    #[test]
    fn bad_inputs_are_rejected() {
        let c = RunoffCoefficient::new(0.5).unwrap();
        let a = AreaHa::new(1.0).unwrap();
        let tc = TimeOfConcentration::from_s(600).unwrap();
        assert!(ModifiedRational::new(c, a, tc, -1.0, 600).is_err());
        assert!(ModifiedRational::new(c, a, tc, f32::NAN, 600).is_err());
        assert!(ModifiedRational::new(c, a, tc, 10.0, 0).is_err());
        assert!(ModifiedRational::new(c, a, tc, 10.0, MAX_RAIN_DURATION_S + 1).is_err());
        assert!(SubCatchment::new(c, a, tc, MAX_LAG_S + 1).is_err());
        assert!(Catchment::new(&[]).is_err());
        let s = sub(0.5, 1.0, 600, 0);
        assert!(matches!(
            Catchment::new(&[s; MAX_SUB_CATCHMENTS + 1]),
            Err(RunoffError::Capacity { .. })
        ));
    }
}
