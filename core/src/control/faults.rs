//! Faults the controller detects, their latching, and the gate supervision.
//!
//! Every fault is *present* or not in each step; it is raised (a `FaultRaised` event) on the
//! first step it is present and cleared (`FaultCleared`) after [`CLEAR_STEPS`] steps in a row
//! without it. Detection times are in the [`crate::control`] module doc.
//!
//! ## Gate supervision (units m, s)
//!
//! - **Stall** (`GateActuator`/`Stall`): the position differs from the command by more than
//!   `position_tolerance_m` and has not moved by half the tolerance for `move_timeout_s`.
//! - **Disagree** (`GatePosition`/`Disagree`): the command has been steady for
//!   `move_timeout_s` and the position, though it moved, is still off by more than the
//!   tolerance.
//! - **Limit conflict** (`GateLimit`/`LimitConflict`): both limit switches made; the closed
//!   limit made while the position reads open by more than the tolerance; the open limit made
//!   while the position reads more than the tolerance short of full open.
//! - **Driver fault** (`GateActuator`/`DriverFault`): the drive reports a fault.
//! - **Position missing** (`GatePosition`/`Missing`): no position for `missing_steps` steps.

use crate::config::SensorLimits;
use crate::event::{EventBody, FaultKind, FaultSource};

/// Steps in a row without a fault before it is cleared.
pub const CLEAR_STEPS: u8 = 6;

macro_rules! faults {
    ($( $(#[$m:meta])* $v:ident = ($src:ident, $kind:ident) ),+ $(,)?) => {
        /// A fault the controller detects; each maps to one (source, kind) pair of the log.
        #[derive(Debug, Clone, Copy, PartialEq, Eq)]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[repr(u8)]
        pub enum Fault { $( $(#[$m])* $v ),+ }

        impl Fault {
            /// Every fault, in bit order.
            pub const ALL: &'static [Fault] = &[$(Fault::$v),+];
            /// Where, as logged.
            pub const fn source(self) -> FaultSource {
                match self { $(Fault::$v => FaultSource::$src),+ }
            }
            /// What, as logged.
            pub const fn kind(self) -> FaultKind {
                match self { $(Fault::$v => FaultKind::$kind),+ }
            }
        }
    };
}

faults! {
    /// Stage reading below the sensor's range.
    StageUnderRange = (StageSensor, UnderRange),
    /// Stage reading above the sensor's range.
    StageOverRange = (StageSensor, OverRange),
    /// Stage readings missing `missing_steps` in a row.
    StageMissing = (StageSensor, Missing),
    /// Stage reading unchanged while a change is expected.
    StageStuck = (StageSensor, Stuck),
    /// A stage spike (discarded); the sensor stays trusted.
    StageSpike = (StageSensor, Spike),
    /// A stage jump faster than the pond can move.
    StageRate = (StageSensor, RateOfChange),
    /// Stage readings held back as implausible `missing_steps` in a row.
    StageErratic = (StageSensor, Implausible),
    /// Rain gauge counting nothing while the pond rises.
    RainClogged = (RainGauge, Clogged),
    /// Rain gauge tipping faster than plausible.
    RainChatter = (RainGauge, Chatter),
    /// Gate not moving when commanded.
    GateStall = (GateActuator, Stall),
    /// Gate position off the settled command.
    GateDisagree = (GatePosition, Disagree),
    /// Limit switches contradict each other or the position.
    GateLimitConflict = (GateLimit, LimitConflict),
    /// The drive reported a fault.
    GateDriver = (GateActuator, DriverFault),
    /// Gate position missing.
    GatePositionMissing = (GatePosition, Missing),
}

const N_FAULTS: usize = Fault::ALL.len();

impl Fault {
    pub(crate) const fn bit(self) -> u16 {
        1u16 << (self as u8)
    }
}

/// The set of active faults, one bit per [`Fault`] (bit = the variant's index).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Faults(pub u16);

impl Faults {
    /// Whether `f` is active.
    pub const fn has(self, f: Fault) -> bool {
        self.0 & f.bit() != 0
    }
    /// Any stage fault that makes the stage untrusted (all but a spike).
    pub const fn stage_untrusted(self) -> bool {
        const MASK: u16 = Fault::StageUnderRange.bit()
            | Fault::StageOverRange.bit()
            | Fault::StageMissing.bit()
            | Fault::StageStuck.bit()
            | Fault::StageRate.bit()
            | Fault::StageErratic.bit();
        self.0 & MASK != 0
    }
    /// Any rain gauge fault.
    pub const fn rain(self) -> bool {
        self.0 & (Fault::RainClogged.bit() | Fault::RainChatter.bit()) != 0
    }
    /// Any gate fault.
    pub const fn gate(self) -> bool {
        const MASK: u16 = Fault::GateStall.bit()
            | Fault::GateDisagree.bit()
            | Fault::GateLimitConflict.bit()
            | Fault::GateDriver.bit()
            | Fault::GatePositionMissing.bit();
        self.0 & MASK != 0
    }
}

/// Latching with clear counters.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct FaultTracker {
    active: Faults,
    quiet: [u8; N_FAULTS],
}

impl FaultTracker {
    pub(crate) fn new() -> Self {
        Self {
            active: Faults(0),
            quiet: [0; N_FAULTS],
        }
    }

    pub(crate) fn active(&self) -> Faults {
        self.active
    }

    /// Updates `f`; returns the event to log, if any.
    pub(crate) fn update(&mut self, f: Fault, present: bool) -> Option<EventBody> {
        let quiet = self.quiet.get_mut(f as usize)?;
        let was = self.active.has(f);
        if present {
            *quiet = 0;
            if !was {
                self.active.0 |= f.bit();
                return Some(EventBody::FaultRaised {
                    source: f.source(),
                    kind: f.kind(),
                });
            }
        } else if was {
            *quiet = quiet.saturating_add(1);
            if *quiet >= CLEAR_STEPS {
                *quiet = 0;
                self.active.0 &= !f.bit();
                return Some(EventBody::FaultCleared {
                    source: f.source(),
                    kind: f.kind(),
                });
            }
        }
        None
    }
}

/// What the gate showed in one step.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct GateObs {
    pub stall: bool,
    pub disagree: bool,
    pub limit_conflict: bool,
    pub driver: bool,
    pub position_missing: bool,
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct GateMonitor {
    mismatch_since_s: Option<u32>,
    progress_ref_m: f32,
    last_cmd_m: f32,
    cmd_steady_since_s: u32,
    missing_in_row: u16,
}

impl GateMonitor {
    pub(crate) fn new(now_s: u32) -> Self {
        Self {
            mismatch_since_s: None,
            progress_ref_m: 0.0,
            last_cmd_m: f32::NAN,
            cmd_steady_since_s: now_s,
            missing_in_row: 0,
        }
    }

    /// `cmd_m`: the opening commanded in the previous step (what the gate should be
    /// following now).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn update(
        &mut self,
        cmd_m: f32,
        position_m: Option<f32>,
        limit_closed: bool,
        limit_open: bool,
        driver_fault: bool,
        max_opening_m: f32,
        now_s: u32,
        s: &SensorLimits,
    ) -> GateObs {
        let tol = s.position_tolerance_m;
        let mut obs = GateObs {
            driver: driver_fault,
            limit_conflict: limit_closed && limit_open,
            ..GateObs::default()
        };
        if cmd_m.to_bits() != self.last_cmd_m.to_bits() {
            self.last_cmd_m = cmd_m;
            self.cmd_steady_since_s = now_s;
        }
        let Some(pos) = position_m.filter(|p| p.is_finite()) else {
            self.missing_in_row = self.missing_in_row.saturating_add(1);
            obs.position_missing = self.missing_in_row >= s.missing_steps;
            self.mismatch_since_s = None;
            return obs;
        };
        self.missing_in_row = 0;
        if (limit_closed && pos > tol) || (limit_open && pos < max_opening_m - tol) {
            obs.limit_conflict = true;
        }
        if crate::math::abs(cmd_m - pos) > tol {
            match self.mismatch_since_s {
                None => {
                    self.mismatch_since_s = Some(now_s);
                    self.progress_ref_m = pos;
                }
                Some(since) => {
                    if crate::math::abs(pos - self.progress_ref_m) > 0.5 * tol {
                        self.mismatch_since_s = Some(now_s);
                        self.progress_ref_m = pos;
                    } else if now_s.saturating_sub(since) >= s.move_timeout_s {
                        obs.stall = true;
                    }
                }
            }
            if !obs.stall && now_s.saturating_sub(self.cmd_steady_since_s) >= s.move_timeout_s {
                obs.disagree = true;
            }
        } else {
            self.mismatch_since_s = None;
        }
        obs
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn limits() -> SensorLimits {
        super::super::test_sensor_limits()
    }

    #[test]
    fn latch_and_clear() {
        let mut t = FaultTracker::new();
        assert!(matches!(
            t.update(Fault::GateStall, true),
            Some(EventBody::FaultRaised { .. })
        ));
        assert_eq!(t.update(Fault::GateStall, true), None);
        for _ in 1..CLEAR_STEPS {
            assert_eq!(t.update(Fault::GateStall, false), None);
        }
        assert!(matches!(
            t.update(Fault::GateStall, false),
            Some(EventBody::FaultCleared { .. })
        ));
        assert_eq!(Fault::ALL.len(), 14);
        assert!(Faults(Fault::StageSpike.bit()).has(Fault::StageSpike));
        assert!(!Faults(Fault::StageSpike.bit()).stage_untrusted());
    }

    #[test]
    fn stall_after_timeout() {
        let s = limits();
        let mut g = GateMonitor::new(0);
        let mut t = 0;
        let mut stalled_at = None;
        while t <= 200 {
            let o = g.update(0.3, Some(0.0), false, false, false, 1.0, t, &s);
            if o.stall && stalled_at.is_none() {
                stalled_at = Some(t);
            }
            t += 10;
        }
        assert_eq!(stalled_at, Some(60));
    }
}
