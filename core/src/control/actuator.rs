//! Sparing the gate: deadband, least time between moves, moves per hour, rate limit.
//!
//! Units: opening m, time s, rate m/s.
//!
//! The controller's wanted opening becomes a *goal* only when it is a *move*: it differs from
//! the current goal by at least `deadband_m` (or reaches a travel end, 0 or full open, which a
//! deadband must not keep the gate from), at least `min_move_interval_s` after the previous
//! move, and with fewer than `max_moves_per_hour` moves in the last 3600 s. The command then
//! ramps toward the goal at no more than `max_rate_m_s`. An *urgent* move (overtopping
//! protection, a release over the permit, the safe opening after a fault, an operator's
//! command) skips all four limits: goal and command jump to the wanted opening at once.

use heapless::Deque;

use crate::config::{ControlSettings, MAX_MOVES_PER_HOUR};

/// Why the command is not the wanted opening.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Held {
    /// The change is inside the deadband.
    Deadband,
    /// Too soon after the previous move.
    MoveInterval,
    /// The hourly move budget is spent.
    HourlyLimit,
    /// Still ramping toward the goal.
    Ramping,
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Actuator {
    goal_m: f32,
    cmd_m: f32,
    last_move_s: Option<u32>,
    moves: Deque<u32, MAX_MOVES_PER_HOUR>,
}

/// The outcome of one step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Actuation {
    pub cmd_m: f32,
    pub held: Option<Held>,
    /// A new goal was set this step.
    pub moved: bool,
}

impl Actuator {
    pub(crate) fn new(opening_m: f32) -> Self {
        Self {
            goal_m: opening_m,
            cmd_m: opening_m,
            last_move_s: None,
            moves: Deque::new(),
        }
    }

    pub(crate) fn cmd_m(&self) -> f32 {
        self.cmd_m
    }

    pub(crate) fn goal_m(&self) -> f32 {
        self.goal_m
    }

    fn record_move(&mut self, now_s: u32) {
        if self.moves.is_full() {
            self.moves.pop_front();
        }
        // Room was made above.
        let _ = self.moves.push_back(now_s);
        self.last_move_s = Some(now_s);
    }

    /// One step to `wanted_m` (already clamped to the travel) at `now_s`, `dt_s` after the
    /// previous step.
    pub(crate) fn step(
        &mut self,
        wanted_m: f32,
        max_opening_m: f32,
        urgent: bool,
        now_s: u32,
        dt_s: u32,
        c: &ControlSettings,
    ) -> Actuation {
        let hour_ago = now_s.saturating_sub(3600);
        while let Some(&t) = self.moves.front() {
            if t <= hour_ago && now_s >= 3600 {
                self.moves.pop_front();
            } else {
                break;
            }
        }
        let mut moved = false;
        let mut held = None;
        if wanted_m.to_bits() != self.goal_m.to_bits() {
            if urgent {
                self.goal_m = wanted_m;
                self.cmd_m = wanted_m;
                self.record_move(now_s);
                return Actuation {
                    cmd_m: wanted_m,
                    held: None,
                    moved: true,
                };
            }
            let to_end = (wanted_m <= 0.0 || wanted_m >= max_opening_m)
                && crate::math::abs(wanted_m - self.goal_m) > 0.0;
            let big = crate::math::abs(wanted_m - self.goal_m) >= c.deadband_m;
            let soon = self
                .last_move_s
                .is_some_and(|t| now_s.saturating_sub(t) < c.min_move_interval_s);
            let budget_spent = self.moves.len() >= usize::from(c.max_moves_per_hour);
            if !(big || to_end) {
                held = Some(Held::Deadband);
            } else if soon {
                held = Some(Held::MoveInterval);
            } else if budget_spent {
                held = Some(Held::HourlyLimit);
            } else {
                self.goal_m = wanted_m;
                self.record_move(now_s);
                moved = true;
            }
        }
        let max_step = c.max_rate_m_s * dt_s as f32;
        let diff = self.goal_m - self.cmd_m;
        if crate::math::abs(diff) <= max_step {
            self.cmd_m = self.goal_m;
        } else {
            self.cmd_m += if diff > 0.0 { max_step } else { -max_step };
            if held.is_none() {
                held = Some(Held::Ramping);
            }
        }
        Actuation {
            cmd_m: self.cmd_m,
            held,
            moved,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_apply_and_urgent_skips_them() {
        let c = ControlSettings {
            deadband_m: 0.01,
            min_move_interval_s: 60,
            max_rate_m_s: 0.01,
            max_moves_per_hour: 2,
            ..ControlSettings::default()
        };
        let mut a = Actuator::new(0.0);
        let r = a.step(0.005, 1.0, false, 0, 10, &c);
        assert_eq!(r.held, Some(Held::Deadband));
        let r = a.step(0.5, 1.0, false, 10, 10, &c);
        assert!(r.moved && (r.cmd_m - 0.1).abs() < 1e-6 && r.held == Some(Held::Ramping));
        let r = a.step(0.3, 1.0, false, 20, 10, &c);
        assert_eq!(r.held, Some(Held::MoveInterval));
        a.step(0.3, 1.0, false, 80, 10, &c);
        let r = a.step(0.7, 1.0, false, 200, 10, &c);
        assert_eq!(r.held, Some(Held::HourlyLimit));
        let r = a.step(1.0, 1.0, true, 210, 10, &c);
        assert_eq!((r.cmd_m, r.moved), (1.0, true));
    }
}
