//! Tipping-bucket rain gauge: a reed or microswitch contact closed briefly at each tip.
//!
//! The pin is sampled by [`RainGauge::poll`] with a monotonic time in integer milliseconds.
//! Debounce is time based: a change of the contact level is accepted only after the raw level
//! has stayed the same for `debounce_ms` (any flip restarts the wait), so contact bounce on
//! closing or opening never counts twice. A tip is counted on the accepted change from
//! inactive to active, and stamped with the time the level first went active (whole seconds,
//! `u32`), ready for the core's rain estimator.
//!
//! Invariants: one tip per accepted inactive→active change, none otherwise; the tip count
//! saturates at `u32::MAX`. The poll interval must be well under `debounce_ms` and under the
//! shortest contact closure (a few tens of ms on common gauges; common practice, no source),
//! or closures are missed.

use core::fmt;

use embedded_hal::digital::InputPin;

/// One counted bucket tip.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Tip {
    /// When the contact closed, whole seconds on the caller's clock.
    pub time_s: u32,
    /// Tips counted so far, this one included.
    pub count: u32,
}

/// Rain gauge error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error<E> {
    /// Reading the pin failed.
    Pin(E),
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Pin(e) => write!(f, "rain gauge pin error: {e:?}"),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

/// The gauge's contact on an input pin.
pub struct RainGauge<P> {
    pin: P,
    active_low: bool,
    debounce_ms: u32,
    /// Accepted (debounced) level: true = contact closed.
    stable_active: bool,
    /// A raw level different from the accepted one, and since when it has been seen.
    pending: Option<(bool, u64)>,
    count: u32,
}

impl<P: InputPin> RainGauge<P> {
    /// Take the pin. `active_low`: the contact pulls the pin low when closed (pull-up wiring).
    /// The contact is taken as open at start.
    pub fn new(pin: P, active_low: bool, debounce_ms: u32) -> Self {
        Self {
            pin,
            active_low,
            debounce_ms,
            stable_active: false,
            pending: None,
            count: 0,
        }
    }

    /// Give back the pin.
    pub fn release(self) -> P {
        self.pin
    }

    /// Tips counted since start.
    pub fn count(&self) -> u32 {
        self.count
    }

    /// Sample the pin at `now_ms`; returns a tip when a debounced closure completes here.
    pub fn poll(&mut self, now_ms: u64) -> Result<Option<Tip>, Error<P::Error>> {
        let high = self.pin.is_high().map_err(Error::Pin)?;
        let active = high != self.active_low;
        if active == self.stable_active {
            self.pending = None;
            return Ok(None);
        }
        let since = match self.pending {
            Some((level, since)) if level == active => since,
            _ => {
                self.pending = Some((active, now_ms));
                now_ms
            }
        };
        if now_ms.saturating_sub(since) < u64::from(self.debounce_ms) {
            return Ok(None);
        }
        self.stable_active = active;
        self.pending = None;
        if !active {
            return Ok(None);
        }
        self.count = self.count.saturating_add(1);
        let time_s = u32::try_from(since / 1000).unwrap_or(u32::MAX);
        Ok(Some(Tip {
            time_s,
            count: self.count,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use embedded_hal_mock::eh1::digital::{Mock, State, Transaction as T};

    /// Run `levels` (true = pin high), one sample per millisecond from `t0_ms`.
    fn run(levels: &[bool], t0_ms: u64, debounce_ms: u32) -> (Vec<(u64, Tip)>, u32) {
        let expect: Vec<T> = levels
            .iter()
            .map(|&h| T::get(if h { State::High } else { State::Low }))
            .collect();
        let mut pin = Mock::new(&expect);
        let mut g = RainGauge::new(pin.clone(), true, debounce_ms);
        let mut tips = vec![];
        for (i, _) in levels.iter().enumerate() {
            let t = t0_ms + i as u64;
            if let Some(tip) = g.poll(t).unwrap() {
                tips.push((t, tip));
            }
        }
        let n = g.count();
        let _ = g.release();
        pin.done();
        (tips, n)
    }

    /// A closure with bounce on make and break (pin active low): exactly one tip, stamped
    /// at the first instant of the stable closed level.
    #[test]
    fn bouncing_closure_counts_once() {
        let mut lv = vec![true; 20]; // open (pulled up)
        lv.extend([false, true, false, false, true, false]); // bounce on make
        lv.extend(vec![false; 40]); // closed
        lv.extend([true, false, true, true, false, true]); // bounce on break
        lv.extend(vec![true; 30]);
        let (tips, n) = run(&lv, 5_000, 10);
        assert_eq!(n, 1);
        assert_eq!(tips.len(), 1);
        // Stable closed level starts at index 25 (last bounce to low), accepted 10 ms later.
        assert_eq!(tips[0].0, 5_000 + 25 + 10);
        assert_eq!(
            tips[0].1,
            Tip {
                time_s: 5,
                count: 1
            }
        );
    }

    /// Glitches shorter than the debounce time never count.
    #[test]
    fn short_glitches_do_not_count() {
        let mut lv = vec![true; 10];
        for _ in 0..5 {
            lv.extend(vec![false; 4]);
            lv.extend(vec![true; 4]);
        }
        let (tips, n) = run(&lv, 0, 5);
        assert!(tips.is_empty());
        assert_eq!(n, 0);
    }

    /// Three clean closures give three tips with increasing counts.
    #[test]
    fn separate_closures_each_count() {
        let mut lv = vec![];
        for _ in 0..3 {
            lv.extend(vec![true; 30]);
            lv.extend(vec![false; 30]);
        }
        let (tips, n) = run(&lv, 0, 10);
        assert_eq!(n, 3);
        let counts: Vec<u32> = tips.iter().map(|t| t.1.count).collect();
        assert_eq!(counts, [1, 2, 3]);
    }

    #[test]
    fn pin_error_is_returned() {
        use embedded_hal::digital::ErrorKind;
        use embedded_hal_mock::eh1::MockError;
        let expect = [T::get(State::High).with_error(MockError::Io(std::io::ErrorKind::Other))];
        let mut pin = Mock::new(&expect);
        let mut g = RainGauge::new(pin.clone(), true, 5);
        assert!(matches!(g.poll(0), Err(Error::Pin(_))));
        let _ = ErrorKind::Other;
        pin.done();
    }
}
