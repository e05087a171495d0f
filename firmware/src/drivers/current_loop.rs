//! 4–20 mA current-loop stage sensor, read as the voltage across a shunt resistor through an
//! [`AnalogInput`].
//!
//! `current_mA = 1000 · volts / shunt_ohm`; 4 mA is zero head and 20 mA is `range_m` of head
//! (the transmitter's rating), linear in between:
//!
//! ```text
//! stage_m = datum_m + range_m · (current_mA − 4) / 16
//! ```
//!
//! Signal levels follow NAMUR NE 43 (values from memory): the measurement signal is
//! 3.8–20.5 mA; 3.6–3.8 mA and 20.5–21.0 mA are under- and over-range saturation (the value
//! clamps to the range end and is flagged); a current below 3.6 mA is a failure (open loop,
//! dead transmitter) and above 21.0 mA a failure (short, transmitter fault). Failures are
//! errors, never stages.
//!
//! Invariants: `shunt_ohm > 0`, `range_m > 0`, finite `datum_m` (checked in
//! [`LoopRange::new`]). Units: mA, Ω, V, m.

use core::fmt;

use holdback_core::validate::{self, Invalid};

use super::AnalogInput;
use crate::StageInput;

/// Below this the loop is failed low (open loop), NE 43, mA (from memory).
pub const FAIL_LOW_MA: f32 = 3.6;
/// Above this the loop is failed high, NE 43, mA (from memory).
pub const FAIL_HIGH_MA: f32 = 21.0;
/// Lower end of the NE 43 measurement signal, mA (from memory).
pub const MEASURE_LOW_MA: f32 = 3.8;
/// Upper end of the NE 43 measurement signal, mA (from memory).
pub const MEASURE_HIGH_MA: f32 = 20.5;

/// How a reading sits against the NE 43 levels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Signal {
    /// 3.8–20.5 mA.
    Measuring,
    /// 3.6–3.8 mA: below range, stage clamped to the datum.
    UnderRange,
    /// 20.5–21.0 mA: above range, stage clamped to full scale.
    OverRange,
}

/// One loop reading.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopReading {
    /// Loop current, mA.
    pub current_ma: f32,
    /// Stage, m (clamped to the range).
    pub stage_m: f32,
    /// NE 43 classification.
    pub signal: Signal,
}

/// The transmitter's rating and the shunt, checked.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopRange {
    shunt_ohm: f32,
    range_m: f32,
    datum_m: f32,
}

impl LoopRange {
    /// Check a rating: `range_m` of head at 20 mA, sensor datum at `datum_m`, current read
    /// across `shunt_ohm`.
    pub fn new(shunt_ohm: f32, range_m: f32, datum_m: f32) -> Result<Self, Invalid> {
        validate::positive("shunt_ohm", shunt_ohm)?;
        validate::positive("range_m", range_m)?;
        validate::finite("datum_m", datum_m)?;
        Ok(Self {
            shunt_ohm,
            range_m,
            datum_m,
        })
    }

    /// Classify a loop current and turn it into a stage.
    pub fn reading(
        &self,
        current_ma: f32,
    ) -> Result<LoopReading, Error<core::convert::Infallible>> {
        if current_ma.is_nan() {
            return Err(Error::NotANumber);
        }
        if current_ma < FAIL_LOW_MA {
            return Err(Error::FailLow { current_ma });
        }
        if current_ma > FAIL_HIGH_MA {
            return Err(Error::FailHigh { current_ma });
        }
        let signal = if current_ma < MEASURE_LOW_MA {
            Signal::UnderRange
        } else if current_ma > MEASURE_HIGH_MA {
            Signal::OverRange
        } else {
            Signal::Measuring
        };
        let frac = ((current_ma - 4.0) / 16.0).clamp(0.0, 1.0);
        Ok(LoopReading {
            current_ma,
            stage_m: self.datum_m + self.range_m * frac,
            signal,
        })
    }
}

/// Current-loop error.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error<E> {
    /// The converter failed.
    Adc(E),
    /// Below 3.6 mA: open loop or dead transmitter (NE 43 failure low).
    FailLow {
        /// Current read, mA.
        current_ma: f32,
    },
    /// Above 21.0 mA: short or transmitter fault (NE 43 failure high).
    FailHigh {
        /// Current read, mA.
        current_ma: f32,
    },
    /// The converter gave a non-finite voltage.
    NotANumber,
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Adc(e) => write!(f, "current loop ADC error: {e:?}"),
            Self::FailLow { current_ma } => {
                write!(f, "loop current = {current_ma} mA: below 3.6 mA, open loop")
            }
            Self::FailHigh { current_ma } => {
                write!(f, "loop current = {current_ma} mA: above 21 mA, loop fault")
            }
            Self::NotANumber => write!(f, "loop current not a number"),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

fn widen<E>(e: Error<core::convert::Infallible>) -> Error<E> {
    match e {
        Error::FailLow { current_ma } => Error::FailLow { current_ma },
        Error::FailHigh { current_ma } => Error::FailHigh { current_ma },
        Error::NotANumber | Error::Adc(_) => Error::NotANumber,
    }
}

/// A 4–20 mA stage transmitter on a shunt and an analog input.
pub struct CurrentLoop<A> {
    adc: A,
    range: LoopRange,
}

impl<A: AnalogInput> CurrentLoop<A> {
    /// Take the converter.
    pub fn new(adc: A, range: LoopRange) -> Self {
        Self { adc, range }
    }

    /// Give back the converter.
    pub fn release(self) -> A {
        self.adc
    }

    /// One reading with its NE 43 classification.
    pub fn read(&mut self) -> Result<LoopReading, Error<A::Error>> {
        let volts = self.adc.read_volts().map_err(Error::Adc)?;
        let current_ma = 1000.0 * volts / self.range.shunt_ohm;
        self.range.reading(current_ma).map_err(widen)
    }
}

impl<A: AnalogInput> StageInput for CurrentLoop<A> {
    type Error = Error<A::Error>;

    fn read_stage_m(&mut self) -> Result<f32, Self::Error> {
        self.read().map(|r| r.stage_m)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::drivers::ads1115::{self, Ads1115, DataRate, Mux, Pga};
    use embedded_hal_mock::eh1::delay::NoopDelay;
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};

    /// 12 mA is mid-scale of 4–20 mA (linear transmitter): 3 m of a 6 m range. Across a
    /// 150 Ω shunt (Ohm's law) 12 mA is 1.8 V = 28800 counts at ±2.048 V (62.5 µV LSB,
    /// ADS1115 datasheet FSR/LSB table).
    #[test]
    fn twelve_milliamps_is_mid_range_through_ads1115() {
        let cfg = ads1115::Config::new(0x48, Mux::Diff01, Pga::Fs2V048, DataRate::Sps8, 1).unwrap();
        let [hi, lo] = cfg.start_word().to_be_bytes();
        let expect = [
            T::write(0x48, vec![0x01, hi, lo]),
            T::write_read(0x48, vec![0x01], vec![0x80, 0x00]),
            T::write_read(0x48, vec![0x00], 28_800i16.to_be_bytes().to_vec()),
        ];
        let mut i2c = Mock::new(&expect);
        let adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg);
        let mut lp = CurrentLoop::new(adc, LoopRange::new(150.0, 6.0, 0.0).unwrap());
        let r = lp.read().unwrap();
        assert!((r.current_ma - 12.0).abs() < 1e-4, "{r:?}");
        assert!((r.stage_m - 3.0).abs() < 1e-4);
        assert_eq!(r.signal, Signal::Measuring);
        let _ = lp.release();
        i2c.done();
    }

    /// NE 43 bands (from memory): < 3.6 and > 21 mA fail; 3.6–3.8 and 20.5–21 saturate.
    #[test]
    fn namur_ne43_bands() {
        let r = LoopRange::new(250.0, 10.0, 1.0).unwrap();
        assert!(matches!(r.reading(3.5), Err(Error::FailLow { .. })));
        assert!(matches!(r.reading(0.0), Err(Error::FailLow { .. })));
        assert!(matches!(r.reading(21.1), Err(Error::FailHigh { .. })));
        assert!(matches!(r.reading(f32::NAN), Err(Error::NotANumber)));
        assert!(matches!(
            r.reading(f32::INFINITY),
            Err(Error::FailHigh { .. })
        ));
        let low = r.reading(3.7).unwrap();
        assert_eq!((low.signal, low.stage_m), (Signal::UnderRange, 1.0));
        let high = r.reading(20.8).unwrap();
        assert_eq!((high.signal, high.stage_m), (Signal::OverRange, 11.0));
        assert_eq!(r.reading(4.0).unwrap().stage_m, 1.0);
        assert_eq!(r.reading(20.0).unwrap().stage_m, 11.0);
        assert_eq!(r.reading(3.9).unwrap().signal, Signal::Measuring);
    }
}
