//! Gate actuator: a motor driven through two direction pins, a position potentiometer read
//! through an [`AnalogInput`], and open and closed limit switches.
//!
//! [`Gate::command`] sets a target opening (fraction of full travel, `0` closed, `1` open);
//! [`Gate::poll`] is a non-blocking state machine called every few tens of milliseconds with a
//! monotonic time in integer milliseconds. On each poll it reads both limits and the position
//! and then, while seeking:
//!
//! - stops when the position is within `deadband` of the target ([`GateEvent::Reached`]);
//! - never drives toward an active limit: closing with the closed limit made (or opening
//!   with the open limit made) stops the motor ([`GateEvent::AtLimit`]);
//! - stops with [`GateFault::Timeout`] when the move takes longer than `timeout_ms`;
//! - stops with [`GateFault::Stall`] when the position changes by less than
//!   `stall_min_change` over `stall_polls` consecutive polls while driven;
//! - stops with [`GateFault::LimitConflict`] when both limits are made, and with
//!   [`GateFault::PositionOutOfRange`] when the feedback is beyond its calibrated ends.
//!
//! Invariants: the two drive pins are never high together (the idle one is set low before
//! the other is set high); every fault and every pin or converter error leaves the motor
//! stopped (as far as the pins still obey); a fault holds until [`Gate::clear_fault`].
//! Units: opening as a fraction, V for the feedback, ms for time.

use core::fmt;

use embedded_hal::digital::{InputPin, OutputPin};
use holdback_core::validate::{self, Invalid};

use super::AnalogInput;

/// The gate's pins.
pub struct GatePins<OP, CL, LC, LO> {
    /// High drives the gate toward open.
    pub drive_open: OP,
    /// High drives the gate toward closed.
    pub drive_close: CL,
    /// Closed limit switch.
    pub closed_limit: LC,
    /// Open limit switch.
    pub open_limit: LO,
}

/// Gate calibration and supervision limits, checked.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateConfig {
    v_closed: f32,
    v_open: f32,
    position_tolerance: f32,
    deadband: f32,
    timeout_ms: u32,
    stall_polls: u16,
    stall_min_change: f32,
    limits_active_high: bool,
}

impl GateConfig {
    /// Check a calibration: feedback `v_closed` / `v_open` volts at the two ends; feedback up
    /// to `position_tolerance` (fraction) beyond the ends clamps, further is a fault; stop
    /// within `deadband` (fraction, `(0, 0.5)`) of the target; give up after `timeout_ms`
    /// (> 0); stall after `stall_polls` (≥ 1) polls each moving less than `stall_min_change`
    /// (fraction, ≥ 0); limit switches read high when made if `limits_active_high`.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        v_closed: f32,
        v_open: f32,
        position_tolerance: f32,
        deadband: f32,
        timeout_ms: u32,
        stall_polls: u16,
        stall_min_change: f32,
        limits_active_high: bool,
    ) -> Result<Self, Invalid> {
        validate::finite("v_closed", v_closed)?;
        validate::finite("v_open", v_open)?;
        if v_open == v_closed {
            return Err(Invalid {
                field: "v_open",
                value: v_open,
                rule: "must differ from v_closed",
            });
        }
        validate::within(
            "position_tolerance",
            position_tolerance,
            0.0,
            0.5,
            "must be in [0, 0.5]",
        )?;
        validate::positive("deadband", deadband)?;
        validate::within("deadband", deadband, 0.0, 0.5, "must be in (0, 0.5]")?;
        if timeout_ms == 0 {
            return Err(Invalid {
                field: "timeout_ms",
                value: 0.0,
                rule: "must be > 0",
            });
        }
        if stall_polls == 0 {
            return Err(Invalid {
                field: "stall_polls",
                value: 0.0,
                rule: "must be >= 1",
            });
        }
        validate::non_negative("stall_min_change", stall_min_change)?;
        Ok(Self {
            v_closed,
            v_open,
            position_tolerance,
            deadband,
            timeout_ms,
            stall_polls,
            stall_min_change,
            limits_active_high,
        })
    }
}

/// Direction of travel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Direction {
    /// Toward open.
    Opening,
    /// Toward closed.
    Closing,
}

/// Which limit switch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Limit {
    /// Fully closed.
    Closed,
    /// Fully open.
    Open,
}

/// A supervision fault; the motor is stopped and stays so until [`Gate::clear_fault`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum GateFault {
    /// The move took longer than `timeout_ms`.
    Timeout,
    /// Driven but the position did not change over `stall_polls` polls.
    Stall,
    /// Both limit switches made at once.
    LimitConflict,
    /// Position feedback beyond its calibrated range (or not a number).
    PositionOutOfRange,
    /// A pin or the position converter failed.
    Io,
}

/// What a poll saw happen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum GateEvent {
    /// Stopped within the deadband of the target.
    Reached,
    /// Stopped at a limit switch before reaching the target.
    AtLimit(Limit),
    /// Stopped by a fault.
    Fault(GateFault),
}

/// State of the actuator.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum GateState {
    /// Motor stopped, no move pending.
    Idle,
    /// Moving toward `target`.
    Seeking {
        /// Target opening, fraction.
        target: f32,
        /// When the command was given, ms.
        started_ms: u64,
        /// Direction currently driven (`None` until the first poll).
        driving: Option<Direction>,
        /// Position at the last poll that saw movement, fraction.
        last_opening: f32,
        /// Consecutive polls without movement while driven.
        still_polls: u16,
    },
    /// Stopped by a fault.
    Faulted(GateFault),
}

/// One poll's result.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateStatus {
    /// Measured opening, fraction (clamped to `[0, 1]`; NaN if unreadable).
    pub opening: f32,
    /// Closed limit made.
    pub closed_limit: bool,
    /// Open limit made.
    pub open_limit: bool,
    /// State after this poll.
    pub state: GateState,
    /// What happened during this poll, if anything.
    pub event: Option<GateEvent>,
}

/// Gate driver error: pin errors (all pins share one error type) or position converter errors.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error<E, A> {
    /// A pin failed.
    Pin(E),
    /// The position converter failed.
    Position(A),
    /// Target opening not a number in `[0, 1]`.
    InvalidTarget(f32),
    /// The gate is faulted; clear the fault first.
    Faulted(GateFault),
}

impl<E: fmt::Debug, A: fmt::Debug> fmt::Display for Error<E, A> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Pin(e) => write!(f, "gate pin error: {e:?}"),
            Self::Position(e) => write!(f, "gate position error: {e:?}"),
            Self::InvalidTarget(t) => write!(f, "target opening = {t}: must be in [0, 1]"),
            Self::Faulted(g) => write!(f, "gate faulted: {g:?}"),
        }
    }
}

impl<E: fmt::Debug, A: fmt::Debug> core::error::Error for Error<E, A> {}

/// What [`Gate::new`] gives back when it cannot stop the motor: the error, the pins and
/// the position input.
pub type NewError<E, A, OP, CL, LC, LO, POS> = (Error<E, A>, GatePins<OP, CL, LC, LO>, POS);

/// The gate actuator.
pub struct Gate<OP, CL, LC, LO, POS> {
    pins: GatePins<OP, CL, LC, LO>,
    position: POS,
    config: GateConfig,
    state: GateState,
    driving: Option<Direction>,
}

impl<OP, CL, LC, LO, POS, E> Gate<OP, CL, LC, LO, POS>
where
    OP: OutputPin<Error = E>,
    CL: OutputPin<Error = E>,
    LC: InputPin<Error = E>,
    LO: InputPin<Error = E>,
    POS: AnalogInput,
{
    /// Take the pins and the position input; sets both drive pins low.
    /// On a pin error the pins and input come back with the error.
    #[allow(clippy::type_complexity)] // the error hands back every part taken
    pub fn new(
        mut pins: GatePins<OP, CL, LC, LO>,
        position: POS,
        config: GateConfig,
    ) -> Result<Self, NewError<E, POS::Error, OP, CL, LC, LO, POS>> {
        let stopped = pins
            .drive_open
            .set_low()
            .and_then(|()| pins.drive_close.set_low());
        match stopped {
            Ok(()) => Ok(Self {
                pins,
                position,
                config,
                state: GateState::Idle,
                driving: None,
            }),
            Err(e) => Err((Error::Pin(e), pins, position)),
        }
    }

    /// Stop the motor and give back the pins and position input.
    pub fn release(mut self) -> (GatePins<OP, CL, LC, LO>, POS) {
        let _ = self.drive(None);
        (self.pins, self.position)
    }

    /// Current state.
    pub fn state(&self) -> GateState {
        self.state
    }

    /// Seek `target` opening (fraction in `[0, 1]`) from `now_ms`. The motor starts on the
    /// next [`poll`](Self::poll).
    pub fn command(&mut self, target: f32, now_ms: u64) -> Result<(), Error<E, POS::Error>> {
        if !(0.0..=1.0).contains(&target) {
            return Err(Error::InvalidTarget(target));
        }
        if let GateState::Faulted(f) = self.state {
            return Err(Error::Faulted(f));
        }
        self.state = GateState::Seeking {
            target,
            started_ms: now_ms,
            driving: self.driving,
            last_opening: f32::NAN,
            still_polls: 0,
        };
        Ok(())
    }

    /// Stop the motor and drop any pending move.
    pub fn stop(&mut self) -> Result<(), Error<E, POS::Error>> {
        if let GateState::Seeking { .. } = self.state {
            self.state = GateState::Idle;
        }
        self.drive(None)
    }

    /// Leave a fault state (motor stays stopped, state becomes idle).
    pub fn clear_fault(&mut self) {
        if let GateState::Faulted(_) = self.state {
            self.state = GateState::Idle;
        }
    }

    /// Set the drive pins; the idle one goes low first, so both are never high.
    fn drive(&mut self, dir: Option<Direction>) -> Result<(), Error<E, POS::Error>> {
        if self.driving == dir && dir.is_some() {
            return Ok(());
        }
        let p = &mut self.pins;
        let r = match dir {
            None => p
                .drive_open
                .set_low()
                .and_then(|()| p.drive_close.set_low()),
            Some(Direction::Opening) => p
                .drive_close
                .set_low()
                .and_then(|()| p.drive_open.set_high()),
            Some(Direction::Closing) => p
                .drive_open
                .set_low()
                .and_then(|()| p.drive_close.set_high()),
        };
        self.driving = if r.is_ok() { dir } else { None };
        r.map_err(Error::Pin)
    }

    fn fault(&mut self, f: GateFault) -> Option<GateEvent> {
        self.state = GateState::Faulted(f);
        Some(GateEvent::Fault(f))
    }

    fn fail<T>(&mut self, e: Error<E, POS::Error>) -> Result<T, Error<E, POS::Error>> {
        let _ = self.drive(None);
        self.state = GateState::Faulted(GateFault::Io);
        Err(e)
    }

    /// One supervision step at `now_ms` (see the module doc).
    pub fn poll(&mut self, now_ms: u64) -> Result<GateStatus, Error<E, POS::Error>> {
        let active_high = self.config.limits_active_high;
        let closed_limit = match self.pins.closed_limit.is_high() {
            Ok(h) => h == active_high,
            Err(e) => return self.fail(Error::Pin(e)),
        };
        let open_limit = match self.pins.open_limit.is_high() {
            Ok(h) => h == active_high,
            Err(e) => return self.fail(Error::Pin(e)),
        };
        let volts = match self.position.read_volts() {
            Ok(v) => v,
            Err(e) => return self.fail(Error::Position(e)),
        };
        let c = &self.config;
        let raw = (volts - c.v_closed) / (c.v_open - c.v_closed);
        let in_range = raw >= -c.position_tolerance && raw <= 1.0 + c.position_tolerance;
        let opening = if in_range {
            raw.clamp(0.0, 1.0)
        } else {
            f32::NAN
        };

        let mut event = None;
        if closed_limit && open_limit {
            if !matches!(self.state, GateState::Faulted(_)) {
                event = self.fault(GateFault::LimitConflict);
            }
        } else if !in_range {
            if !matches!(self.state, GateState::Faulted(_)) {
                event = self.fault(GateFault::PositionOutOfRange);
            }
        } else if let GateState::Seeking {
            target,
            started_ms,
            last_opening,
            still_polls,
            ..
        } = self.state
        {
            let err = target - opening;
            let want = if err > 0.0 {
                Direction::Opening
            } else {
                Direction::Closing
            };
            if err.abs() <= c.deadband {
                self.state = GateState::Idle;
                event = Some(GateEvent::Reached);
            } else if want == Direction::Closing && closed_limit {
                self.state = GateState::Idle;
                event = Some(GateEvent::AtLimit(Limit::Closed));
            } else if want == Direction::Opening && open_limit {
                self.state = GateState::Idle;
                event = Some(GateEvent::AtLimit(Limit::Open));
            } else if now_ms.saturating_sub(started_ms) > u64::from(c.timeout_ms) {
                event = self.fault(GateFault::Timeout);
            } else if self.driving == Some(want) {
                // Driven in the right direction since the last poll: check for movement.
                let moved = (opening - last_opening).abs() >= c.stall_min_change;
                let still = if moved {
                    0
                } else {
                    still_polls.saturating_add(1)
                };
                if still >= c.stall_polls {
                    event = self.fault(GateFault::Stall);
                } else {
                    self.state = GateState::Seeking {
                        target,
                        started_ms,
                        driving: Some(want),
                        last_opening: if moved { opening } else { last_opening },
                        still_polls: still,
                    };
                }
            } else {
                // Start, or reverse after an overshoot.
                if let Err(e) = self.drive(Some(want)) {
                    return self.fail(e);
                }
                self.state = GateState::Seeking {
                    target,
                    started_ms,
                    driving: Some(want),
                    last_opening: opening,
                    still_polls: 0,
                };
            }
        }
        if !matches!(self.state, GateState::Seeking { .. })
            && self.driving.is_some()
            && let Err(e) = self.drive(None)
        {
            return self.fail(e);
        }
        Ok(GateStatus {
            opening,
            closed_limit,
            open_limit,
            state: self.state,
            event,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::convert::Infallible;
    use embedded_hal_mock::eh1::digital::{Mock, State, Transaction as T};

    /// Scripted position feedback: one voltage per read.
    struct Feedback(std::vec::IntoIter<f32>);
    impl AnalogInput for Feedback {
        type Error = Infallible;
        fn read_volts(&mut self) -> Result<f32, Infallible> {
            Ok(self.0.next().expect("script ran out"))
        }
    }

    fn cfg() -> GateConfig {
        // 0.5 V closed, 4.5 V open; 2 % deadband; 10 s timeout; stall after 3 still polls.
        GateConfig::new(0.5, 4.5, 0.05, 0.02, 10_000, 3, 0.005, true).unwrap()
    }

    fn lv(h: bool) -> State {
        if h { State::High } else { State::Low }
    }

    struct Rig {
        open: Mock,
        close: Mock,
        lc: Mock,
        lo: Mock,
    }

    impl Rig {
        fn new(open: &[T], close: &[T], lc: &[bool], lo: &[bool]) -> Self {
            let mut o = vec![T::set(State::Low)];
            o.extend_from_slice(open);
            let mut c = vec![T::set(State::Low)];
            c.extend_from_slice(close);
            let lc: Vec<T> = lc.iter().map(|&h| T::get(lv(h))).collect();
            let lo: Vec<T> = lo.iter().map(|&h| T::get(lv(h))).collect();
            Self {
                open: Mock::new(&o),
                close: Mock::new(&c),
                lc: Mock::new(&lc),
                lo: Mock::new(&lo),
            }
        }
        fn pins(&self) -> GatePins<Mock, Mock, Mock, Mock> {
            GatePins {
                drive_open: self.open.clone(),
                drive_close: self.close.clone(),
                closed_limit: self.lc.clone(),
                open_limit: self.lo.clone(),
            }
        }
        fn done(mut self) {
            self.open.done();
            self.close.done();
            self.lc.done();
            self.lo.done();
        }
    }

    /// Open from closed to half: drive open (close pin low first), stop inside the deadband.
    #[test]
    fn opens_to_target_and_stops_in_deadband() {
        let rig = Rig::new(
            &[T::set(State::High), T::set(State::Low)],
            &[T::set(State::Low), T::set(State::Low)],
            &[true, false, false, false],
            &[false; 4],
        );
        let fb = Feedback(vec![0.5, 1.2, 2.0, 2.45].into_iter());
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        g.command(0.5, 0).unwrap();
        let s = g.poll(0).unwrap();
        assert_eq!(s.opening, 0.0);
        assert!(s.closed_limit);
        assert!(matches!(
            s.state,
            GateState::Seeking {
                driving: Some(Direction::Opening),
                ..
            }
        ));
        assert_eq!(g.poll(100).unwrap().event, None);
        assert_eq!(g.poll(200).unwrap().event, None);
        let s = g.poll(300).unwrap(); // 2.45 V → 0.4875, within 0.02 of 0.5
        assert_eq!(s.event, Some(GateEvent::Reached));
        assert_eq!(s.state, GateState::Idle);
        let _ = g;
        rig.done();
    }

    /// Closing with the closed limit made never drives the close pin.
    #[test]
    fn never_drives_into_made_closed_limit() {
        let rig = Rig::new(&[], &[], &[true], &[false]);
        let fb = Feedback(vec![0.6].into_iter()); // feedback says 2.5 %: target 0 is outside deadband
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        g.command(0.0, 0).unwrap();
        let s = g.poll(0).unwrap();
        assert_eq!(s.event, Some(GateEvent::AtLimit(Limit::Closed)));
        rig.done();
    }

    /// Closing, the closed limit makes before the feedback reaches zero: stop there.
    #[test]
    fn stops_when_limit_makes_during_move() {
        let rig = Rig::new(
            &[T::set(State::Low), T::set(State::Low)],
            &[T::set(State::High), T::set(State::Low)],
            &[false, true],
            &[false, false],
        );
        let fb = Feedback(vec![2.5, 0.7].into_iter());
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        g.command(0.0, 0).unwrap();
        g.poll(0).unwrap();
        assert_eq!(
            g.poll(50).unwrap().event,
            Some(GateEvent::AtLimit(Limit::Closed))
        );
        rig.done();
    }

    /// Driven but not moving for 3 polls: stall fault, motor stopped, commands refused.
    #[test]
    fn stall_is_detected_and_latched() {
        let rig = Rig::new(
            &[T::set(State::High), T::set(State::Low)],
            &[T::set(State::Low), T::set(State::Low)],
            &[false; 4],
            &[false; 4],
        );
        let fb = Feedback(vec![1.0, 1.001, 1.002, 1.001].into_iter());
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        g.command(1.0, 0).unwrap();
        for t in [0, 10, 20] {
            assert_eq!(g.poll(t).unwrap().event, None);
        }
        let s = g.poll(30).unwrap();
        assert_eq!(s.event, Some(GateEvent::Fault(GateFault::Stall)));
        assert_eq!(g.command(0.0, 40), Err(Error::Faulted(GateFault::Stall)));
        g.clear_fault();
        assert_eq!(g.state(), GateState::Idle);
        rig.done();
    }

    /// Moving, but too slowly: timeout fault.
    #[test]
    fn timeout_stops_the_motor() {
        let rig = Rig::new(
            &[T::set(State::High), T::set(State::Low)],
            &[T::set(State::Low), T::set(State::Low)],
            &[false; 3],
            &[false; 3],
        );
        let fb = Feedback(vec![0.5, 0.6, 0.7].into_iter());
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        g.command(1.0, 0).unwrap();
        g.poll(0).unwrap();
        g.poll(5_000).unwrap();
        assert_eq!(
            g.poll(10_001).unwrap().event,
            Some(GateEvent::Fault(GateFault::Timeout))
        );
        rig.done();
    }

    /// Both limits made, or feedback off its scale, are faults; bad targets are refused.
    #[test]
    fn limit_conflict_position_range_and_bad_target() {
        let rig = Rig::new(&[], &[], &[true, false], &[true, false]);
        let fb = Feedback(vec![2.0, 9.0].into_iter());
        let mut g = Gate::new(rig.pins(), fb, cfg()).map_err(|_| ()).unwrap();
        assert!(matches!(g.command(f32::NAN, 0), Err(Error::InvalidTarget(t)) if t.is_nan()));
        assert!(matches!(g.command(1.5, 0), Err(Error::InvalidTarget(_))));
        assert_eq!(
            g.poll(0).unwrap().event,
            Some(GateEvent::Fault(GateFault::LimitConflict))
        );
        g.clear_fault();
        let s = g.poll(1).unwrap();
        assert_eq!(
            s.event,
            Some(GateEvent::Fault(GateFault::PositionOutOfRange))
        );
        assert!(s.opening.is_nan());
        rig.done();
    }

    #[test]
    fn config_is_checked() {
        assert!(GateConfig::new(1.0, 1.0, 0.05, 0.02, 1, 1, 0.0, true).is_err());
        assert!(GateConfig::new(0.5, 4.5, 0.05, 0.0, 1, 1, 0.0, true).is_err());
        assert!(GateConfig::new(0.5, 4.5, 0.05, 0.02, 0, 1, 0.0, true).is_err());
        assert!(GateConfig::new(0.5, 4.5, 0.05, 0.02, 1, 0, 0.0, true).is_err());
    }
}
