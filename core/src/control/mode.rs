//! Controller modes and the transitions between them, as one pure function of the step's
//! conditions ([`transition`]). The entry and exit rules are tabled in the module doc of
//! [`crate::control`].

use core::fmt;

use crate::event::ModeCode;

/// What the controller is doing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Mode {
    /// Dry weather at the normal level: the gate holds the normal pool (closed at or below
    /// normal, draining any small excess at the permit target).
    Standby,
    /// A storm: the release follows the permit target from the first drop.
    Capture,
    /// After the storm: draining to the normal level, paced by the minimum detention time.
    Drawdown,
    /// The forecast (or the measured stage) reaches crest − freeboard: releasing as much as
    /// needed, above the permit if it must.
    Surcharge,
    /// A stage-sensor or gate fault: the safe opening, or more when the remaining information
    /// says the pond is heading for its limit.
    Failsafe,
    /// An operator drives the gate, for a limited time; yields to Surcharge.
    Manual,
}

impl Mode {
    /// The mode's code in the event log.
    pub const fn code(self) -> ModeCode {
        match self {
            Mode::Standby => ModeCode::Standby,
            Mode::Capture => ModeCode::Capture,
            Mode::Drawdown => ModeCode::Drawdown,
            Mode::Surcharge => ModeCode::Surcharge,
            Mode::Failsafe => ModeCode::Failsafe,
            Mode::Manual => ModeCode::Manual,
        }
    }
}

impl fmt::Display for Mode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Mode::Standby => "standby",
            Mode::Capture => "capture",
            Mode::Drawdown => "drawdown",
            Mode::Surcharge => "surcharge",
            Mode::Failsafe => "failsafe",
            Mode::Manual => "manual",
        })
    }
}

/// Why the mode changed: the `reason` byte of [`crate::event::EventBody::ModeChange`].
/// Codes are only ever appended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
#[non_exhaustive]
pub enum ModeReason {
    /// Rain was counted.
    RainStarted = 1,
    /// The stage is above the normal band without rain.
    StageAboveNormal = 2,
    /// No rain for the inter-event time.
    RainEnded = 4,
    /// No rain recently and the forecast brings (almost) no more inflow.
    NoMoreInflow = 5,
    /// Back within the normal band.
    BackToNormal = 6,
    /// The forecast at the permit target goes over crest − freeboard.
    ForecastOverLimit = 7,
    /// The measured stage is over crest − freeboard.
    StageOverLimit = 8,
    /// The forecast at the permit target holds again.
    ForecastHolds = 9,
    /// A stage-sensor fault.
    StageFault = 10,
    /// A gate fault.
    GateFault = 11,
    /// The faults that caused Failsafe have cleared.
    FaultsCleared = 12,
    /// An operator's manual command.
    ManualCommand = 13,
    /// The manual override ran out.
    ManualExpired = 14,
    /// An operator's resume command.
    ManualResumed = 15,
    /// Rain again during drawdown.
    RainResumed = 16,
}

impl ModeReason {
    /// The code in the log.
    pub const fn code(self) -> u8 {
        self as u8
    }
}

/// What the mode decision looks at in one step (computed by the controller).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Conditions {
    /// The stage sensor is in a fault that makes it untrusted.
    pub stage_fault: bool,
    /// The gate (drive, position feedback or limits) is in fault.
    pub gate_fault: bool,
    /// The latest forecast at the permit target goes over the stage limit.
    pub forecast_over_limit: bool,
    /// The measured (or, without a sensor, estimated) stage is over the stage limit.
    pub stage_over_limit: bool,
    /// A manual override is running (accepted and not expired or resumed).
    pub manual_active: bool,
    /// The override just ran out this step.
    pub manual_expired: bool,
    /// Rain was counted in this step.
    pub rain_now: bool,
    /// No rain counted for at least the inter-event time (or never).
    pub dry_inter_event: bool,
    /// No rain recently and the forecast brings almost no more inflow.
    pub no_more_inflow: bool,
    /// The stage is above the normal band.
    pub above_normal: bool,
    /// The stage is above the normal band by more than the hysteresis
    /// ([`super::standby_hysteresis_m`]): what it takes to leave Standby for Drawdown, so that
    /// a pond drained to the band's edge does not flap between the two on sensor noise.
    pub well_above_normal: bool,
}

/// The automatic mode for the conditions, used when leaving Failsafe, Surcharge or Manual.
pub fn auto_mode(c: &Conditions) -> Mode {
    if !c.dry_inter_event && !c.no_more_inflow {
        Mode::Capture
    } else if c.above_normal {
        Mode::Drawdown
    } else {
        Mode::Standby
    }
}

/// The next mode from `mode` under `c`, with its reason; `None` to stay. Priority, highest
/// first: manual override (unless Surcharge is needed), faults, surcharge, the storm cycle.
pub fn transition(mode: Mode, c: &Conditions) -> Option<(Mode, ModeReason)> {
    let surcharge = c.forecast_over_limit || c.stage_over_limit;
    let surcharge_reason = if c.stage_over_limit {
        ModeReason::StageOverLimit
    } else {
        ModeReason::ForecastOverLimit
    };
    let faulted = c.stage_fault || c.gate_fault;
    let fault_reason = if c.stage_fault {
        ModeReason::StageFault
    } else {
        ModeReason::GateFault
    };
    let back = |reason: ModeReason| {
        let to = if faulted {
            Mode::Failsafe
        } else {
            auto_mode(c)
        };
        let reason = if faulted { fault_reason } else { reason };
        (to != mode).then_some((to, reason))
    };
    match mode {
        Mode::Manual => {
            if surcharge && !faulted {
                Some((Mode::Surcharge, surcharge_reason))
            } else if surcharge && faulted {
                Some((Mode::Failsafe, fault_reason))
            } else if c.manual_expired {
                back(ModeReason::ManualExpired)
            } else if !c.manual_active {
                back(ModeReason::ManualResumed)
            } else {
                None
            }
        }
        _ if c.manual_active && !surcharge => Some((Mode::Manual, ModeReason::ManualCommand)),
        Mode::Failsafe => {
            if faulted {
                None
            } else if surcharge {
                Some((Mode::Surcharge, ModeReason::FaultsCleared))
            } else {
                Some((auto_mode(c), ModeReason::FaultsCleared))
            }
        }
        _ if faulted => Some((Mode::Failsafe, fault_reason)),
        Mode::Surcharge => {
            if surcharge {
                None
            } else {
                back(ModeReason::ForecastHolds)
            }
        }
        _ if surcharge => Some((Mode::Surcharge, surcharge_reason)),
        Mode::Standby => {
            if c.rain_now {
                Some((Mode::Capture, ModeReason::RainStarted))
            } else if c.well_above_normal {
                Some((Mode::Drawdown, ModeReason::StageAboveNormal))
            } else {
                None
            }
        }
        Mode::Capture => {
            if c.rain_now {
                None
            } else if c.dry_inter_event {
                Some((Mode::Drawdown, ModeReason::RainEnded))
            } else if c.no_more_inflow {
                Some((Mode::Drawdown, ModeReason::NoMoreInflow))
            } else {
                None
            }
        }
        Mode::Drawdown => {
            if c.rain_now {
                Some((Mode::Capture, ModeReason::RainResumed))
            } else if !c.above_normal {
                Some((Mode::Standby, ModeReason::BackToNormal))
            } else {
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn storm_cycle() {
        let mut c = Conditions {
            dry_inter_event: true,
            no_more_inflow: true,
            ..Conditions::default()
        };
        assert_eq!(transition(Mode::Standby, &c), None);
        c.rain_now = true;
        c.dry_inter_event = false;
        c.no_more_inflow = false;
        assert_eq!(
            transition(Mode::Standby, &c),
            Some((Mode::Capture, ModeReason::RainStarted))
        );
        c.rain_now = false;
        c.above_normal = true;
        assert_eq!(transition(Mode::Capture, &c), None);
        c.no_more_inflow = true;
        assert_eq!(
            transition(Mode::Capture, &c),
            Some((Mode::Drawdown, ModeReason::NoMoreInflow))
        );
        c.above_normal = false;
        assert_eq!(
            transition(Mode::Drawdown, &c),
            Some((Mode::Standby, ModeReason::BackToNormal))
        );
    }

    /// Back in Standby at the edge of the normal band, a reading just above the band (noise)
    /// does not restart Drawdown; only a rise past the hysteresis does.
    #[test]
    fn standby_does_not_flap_at_the_band_edge() {
        let mut c = Conditions {
            dry_inter_event: true,
            no_more_inflow: true,
            above_normal: true,
            ..Conditions::default()
        };
        assert_eq!(transition(Mode::Standby, &c), None);
        c.well_above_normal = true;
        assert_eq!(
            transition(Mode::Standby, &c),
            Some((Mode::Drawdown, ModeReason::StageAboveNormal))
        );
    }

    #[test]
    fn priorities() {
        let c = Conditions {
            manual_active: true,
            stage_fault: true,
            ..Conditions::default()
        };
        assert_eq!(
            transition(Mode::Capture, &c),
            Some((Mode::Manual, ModeReason::ManualCommand))
        );
        let c = Conditions {
            manual_active: true,
            forecast_over_limit: true,
            ..Conditions::default()
        };
        assert_eq!(
            transition(Mode::Manual, &c),
            Some((Mode::Surcharge, ModeReason::ForecastOverLimit))
        );
        let c = Conditions {
            gate_fault: true,
            stage_over_limit: true,
            ..Conditions::default()
        };
        assert_eq!(
            transition(Mode::Surcharge, &c),
            Some((Mode::Failsafe, ModeReason::GateFault))
        );
        assert_eq!(transition(Mode::Failsafe, &c), None);
        assert_eq!(format!("{}", Mode::Surcharge), "surcharge");
        assert_eq!(Mode::Manual.code(), ModeCode::Manual);
    }
}
