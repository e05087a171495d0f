//! Submersible pressure transducer with a voltage output, read through an [`AnalogInput`]
//! (the [`Ads1115`](super::ads1115::Ads1115) on the reference board).
//!
//! The transducer's output is linear in the water depth above its diaphragm: `v_zero` volts at
//! zero head and `v_full` volts at `range_m` metres of water (the rating printed on the
//! transducer, e.g. 0.5–4.5 V for 0–5 m). The stage is
//!
//! ```text
//! stage_m = datum_m + range_m · (v − v_zero) / (v_full − v_zero)
//! ```
//!
//! clamped to `[datum_m, datum_m + range_m]` when the voltage is at most `tolerance_v` beyond
//! either end; further out it is an error (a wire break reads near 0 V, below a 0.5 V zero).
//! Invariants: `v_full != v_zero`, all numbers finite, `range_m > 0`, `tolerance_v >= 0`
//! (checked once in [`Range::new`]). Units: V, m.

use core::fmt;

use holdback_core::validate::{self, Invalid};

use super::AnalogInput;
use crate::StageInput;

/// The transducer's rating, checked.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Range {
    v_zero: f32,
    v_full: f32,
    range_m: f32,
    datum_m: f32,
    tolerance_v: f32,
}

impl Range {
    /// Check a rating: output `v_zero` V at zero head, `v_full` V at `range_m` m of head; the
    /// sensor datum is at `datum_m`; readings up to `tolerance_v` beyond either end clamp.
    pub fn new(
        v_zero: f32,
        v_full: f32,
        range_m: f32,
        datum_m: f32,
        tolerance_v: f32,
    ) -> Result<Self, Invalid> {
        validate::finite("v_zero", v_zero)?;
        validate::finite("v_full", v_full)?;
        if v_full == v_zero {
            return Err(Invalid {
                field: "v_full",
                value: v_full,
                rule: "must differ from v_zero",
            });
        }
        validate::positive("range_m", range_m)?;
        validate::finite("datum_m", datum_m)?;
        validate::non_negative("tolerance_v", tolerance_v)?;
        Ok(Self {
            v_zero,
            v_full,
            range_m,
            datum_m,
            tolerance_v,
        })
    }

    /// Stage for a voltage, or the direction it is out of range.
    pub fn stage_m(&self, volts: f32) -> Result<f32, Error<core::convert::Infallible>> {
        let span = self.v_full - self.v_zero;
        let frac = (volts - self.v_zero) / span;
        let tol = self.tolerance_v / span.abs();
        if !frac.is_finite() {
            return Err(Error::NotANumber);
        }
        if frac < -tol {
            return Err(Error::UnderRange { volts });
        }
        if frac > 1.0 + tol {
            return Err(Error::OverRange { volts });
        }
        Ok(self.datum_m + self.range_m * frac.clamp(0.0, 1.0))
    }
}

/// Pressure stage sensor error.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error<E> {
    /// The converter failed.
    Adc(E),
    /// Voltage below the transducer's zero by more than the tolerance (wire break, no supply).
    UnderRange {
        /// Volts read.
        volts: f32,
    },
    /// Voltage above the transducer's full scale by more than the tolerance.
    OverRange {
        /// Volts read.
        volts: f32,
    },
    /// The converter gave a non-finite voltage.
    NotANumber,
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Adc(e) => write!(f, "pressure transducer ADC error: {e:?}"),
            Self::UnderRange { volts } => write!(f, "transducer volts = {volts}: below range"),
            Self::OverRange { volts } => write!(f, "transducer volts = {volts}: above range"),
            Self::NotANumber => write!(f, "transducer volts not a number"),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

fn widen<E>(e: Error<core::convert::Infallible>) -> Error<E> {
    match e {
        Error::UnderRange { volts } => Error::UnderRange { volts },
        Error::OverRange { volts } => Error::OverRange { volts },
        Error::NotANumber | Error::Adc(_) => Error::NotANumber,
    }
}

/// A pressure transducer on an analog input.
pub struct PressureStage<A> {
    adc: A,
    range: Range,
}

impl<A: AnalogInput> PressureStage<A> {
    /// Take the converter.
    pub fn new(adc: A, range: Range) -> Self {
        Self { adc, range }
    }

    /// Give back the converter.
    pub fn release(self) -> A {
        self.adc
    }
}

impl<A: AnalogInput> StageInput for PressureStage<A> {
    type Error = Error<A::Error>;

    fn read_stage_m(&mut self) -> Result<f32, Self::Error> {
        let volts = self.adc.read_volts().map_err(Error::Adc)?;
        self.range.stage_m(volts).map_err(widen)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::drivers::ads1115::{self, Ads1115, DataRate, Mux, Pga};
    use embedded_hal_mock::eh1::delay::NoopDelay;
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};

    /// End to end: ADS1115 code → volts → stage. A 0.5–4.5 V, 0–5 m transducer at 2.5 V is at
    /// mid-range, 2.5 m (linear output, by the transducer's rating). Code 20000 at ±4.096 V is
    /// 20000 · 125 µV = 2.5 V (datasheet LSB table).
    #[test]
    fn ads1115_code_to_stage() {
        let cfg =
            ads1115::Config::new(0x49, Mux::Single1, Pga::Fs4V096, DataRate::Sps64, 2).unwrap();
        let [hi, lo] = cfg.start_word().to_be_bytes();
        let expect = [
            T::write(0x49, vec![0x01, hi, lo]),
            T::write_read(0x49, vec![0x01], vec![0xD3, 0x63]),
            T::write_read(0x49, vec![0x00], 20_000i16.to_be_bytes().to_vec()),
        ];
        let mut i2c = Mock::new(&expect);
        let adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg);
        let mut s = PressureStage::new(adc, Range::new(0.5, 4.5, 5.0, 10.0, 0.1).unwrap());
        assert_eq!(s.read_stage_m().unwrap(), 12.5);
        let _ = s.release().release();
        i2c.done();
    }

    #[test]
    fn range_ends_clamp_and_beyond_is_error() {
        let r = Range::new(0.5, 4.5, 5.0, 0.0, 0.1).unwrap();
        assert_eq!(r.stage_m(0.5).unwrap(), 0.0);
        assert_eq!(r.stage_m(4.5).unwrap(), 5.0);
        assert_eq!(r.stage_m(0.45).unwrap(), 0.0);
        assert_eq!(r.stage_m(4.55).unwrap(), 5.0);
        assert!(matches!(r.stage_m(0.0), Err(Error::UnderRange { .. })));
        assert!(matches!(r.stage_m(5.0), Err(Error::OverRange { .. })));
        assert!(matches!(r.stage_m(f32::NAN), Err(Error::NotANumber)));
        // A falling-output transducer works the same way.
        let inv = Range::new(4.5, 0.5, 5.0, 0.0, 0.0).unwrap();
        assert_eq!(inv.stage_m(0.5).unwrap(), 5.0);
        assert!(Range::new(1.0, 1.0, 5.0, 0.0, 0.0).is_err());
        assert!(Range::new(0.5, 4.5, 0.0, 0.0, 0.0).is_err());
    }
}
