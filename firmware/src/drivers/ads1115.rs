//! TI ADS1115: 16-bit delta-sigma ADC on I2C, used in single-shot mode.
//!
//! Register protocol from the TI datasheet (SBAS444, "ADS111x Ultra-Small, Low-Power,
//! I2C-Compatible, 860-SPS, 16-Bit ADCs"), written from memory of it; the section names
//! below are the datasheet's as recalled, and the bit values are checked in the tests against
//! the datasheet's documented reset value `0x8583`:
//!
//! - *Register Map / Address Pointer Register*: the first byte after the address selects the
//!   register: `0x00` Conversion, `0x01` Config, `0x02` Lo_thresh, `0x03` Hi_thresh.
//! - *Writing To and Reading From the Registers*: a write sends the pointer byte then the
//!   16-bit value most significant byte first; a read sets the pointer with a write, then reads
//!   two bytes, MSB first. Every register is big-endian 16 bits.
//! - *Config Register*: bit 15 `OS` (write 1: start a single conversion; read 0: a conversion
//!   is in progress, 1: idle), bits 14:12 `MUX`, 11:9 `PGA`, 8 `MODE` (1 = single-shot),
//!   7:5 `DR`, 4 `COMP_MODE`, 3 `COMP_POL`, 2 `COMP_LAT`, 1:0 `COMP_QUE` (`11` disables the
//!   comparator and puts ALERT/RDY in high impedance). Reset value `0x8583`.
//! - *Conversion Register*: the result, two's complement; *Full-Scale Range (FSR) and LSB
//!   Size*: LSB = FSR / 2^15, and the code saturates at `0x7FFF` / `0x8000` when the input is
//!   beyond full scale.
//! - *I2C Address Selection*: ADDR pin to GND, VDD, SDA, SCL gives 0x48, 0x49, 0x4A, 0x4B.
//!
//! Invariants: a read starts one single-shot conversion, waits one conversion time, then polls
//! `OS` at most `max_polls` times (one conversion time apart) before giving up with
//! [`Error::NotReady`]; a saturated code is an error, never a reading. Volts are at the ADC
//! input.

use core::fmt;

use embedded_hal::delay::DelayNs;
use embedded_hal::i2c::I2c;

use super::AnalogInput;

/// Conversion register pointer.
pub const REG_CONVERSION: u8 = 0x00;
/// Config register pointer.
pub const REG_CONFIG: u8 = 0x01;
/// Config `OS` bit: start a conversion (write) / idle (read).
pub const CONFIG_OS: u16 = 1 << 15;
/// Config `MODE` bit: single-shot.
pub const CONFIG_MODE_SINGLE: u16 = 1 << 8;
/// Config `COMP_QUE = 11`: comparator disabled.
pub const CONFIG_COMP_DISABLE: u16 = 0b11;

/// Input multiplexer (`MUX`, config bits 14:12).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Mux {
    /// AIN0 − AIN1.
    Diff01 = 0b000,
    /// AIN0 − AIN3.
    Diff03 = 0b001,
    /// AIN1 − AIN3.
    Diff13 = 0b010,
    /// AIN2 − AIN3.
    Diff23 = 0b011,
    /// AIN0 − GND.
    Single0 = 0b100,
    /// AIN1 − GND.
    Single1 = 0b101,
    /// AIN2 − GND.
    Single2 = 0b110,
    /// AIN3 − GND.
    Single3 = 0b111,
}

/// Programmable gain amplifier full-scale range (`PGA`, config bits 11:9).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Pga {
    /// ±6.144 V.
    Fs6V144 = 0b000,
    /// ±4.096 V.
    Fs4V096 = 0b001,
    /// ±2.048 V (reset value).
    Fs2V048 = 0b010,
    /// ±1.024 V.
    Fs1V024 = 0b011,
    /// ±0.512 V.
    Fs0V512 = 0b100,
    /// ±0.256 V.
    Fs0V256 = 0b101,
}

impl Pga {
    /// Full-scale range, volts (the datasheet's FSR table).
    pub const fn full_scale_v(self) -> f32 {
        match self {
            Self::Fs6V144 => 6.144,
            Self::Fs4V096 => 4.096,
            Self::Fs2V048 => 2.048,
            Self::Fs1V024 => 1.024,
            Self::Fs0V512 => 0.512,
            Self::Fs0V256 => 0.256,
        }
    }
}

/// Data rate (`DR`, config bits 7:5).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum DataRate {
    /// 8 samples/s.
    Sps8 = 0b000,
    /// 16 samples/s.
    Sps16 = 0b001,
    /// 32 samples/s.
    Sps32 = 0b010,
    /// 64 samples/s.
    Sps64 = 0b011,
    /// 128 samples/s (reset value).
    Sps128 = 0b100,
    /// 250 samples/s.
    Sps250 = 0b101,
    /// 475 samples/s.
    Sps475 = 0b110,
    /// 860 samples/s.
    Sps860 = 0b111,
}

impl DataRate {
    /// Samples per second.
    pub const fn sps(self) -> u32 {
        match self {
            Self::Sps8 => 8,
            Self::Sps16 => 16,
            Self::Sps32 => 32,
            Self::Sps64 => 64,
            Self::Sps128 => 128,
            Self::Sps250 => 250,
            Self::Sps475 => 475,
            Self::Sps860 => 860,
        }
    }

    /// One conversion period, microseconds, rounded up.
    pub const fn conversion_time_us(self) -> u32 {
        1_000_000u32.div_ceil(self.sps())
    }
}

/// A checked ADS1115 set-up.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Config {
    address: u8,
    mux: Mux,
    pga: Pga,
    rate: DataRate,
    max_polls: u8,
}

/// A rejected [`Config`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// The 7-bit address is not one the ADDR pin can select (0x48..=0x4B).
    Address(u8),
    /// `max_polls` must be at least 1.
    MaxPolls(u8),
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Address(a) => write!(f, "address = {a:#04x}: must be in 0x48..=0x4b"),
            Self::MaxPolls(n) => write!(f, "max_polls = {n}: must be >= 1"),
        }
    }
}

impl core::error::Error for ConfigError {}

impl Config {
    /// Check a set-up: `address` 0x48..=0x4B, `max_polls >= 1`.
    pub fn new(
        address: u8,
        mux: Mux,
        pga: Pga,
        rate: DataRate,
        max_polls: u8,
    ) -> Result<Self, ConfigError> {
        if !(0x48..=0x4B).contains(&address) {
            return Err(ConfigError::Address(address));
        }
        if max_polls == 0 {
            return Err(ConfigError::MaxPolls(max_polls));
        }
        Ok(Self {
            address,
            mux,
            pga,
            rate,
            max_polls,
        })
    }

    /// The config register word that starts one single-shot conversion: `OS = 1`, `MUX`,
    /// `PGA`, `MODE = 1`, `DR`, comparator in its reset state and disabled (`COMP_QUE = 11`).
    pub const fn start_word(&self) -> u16 {
        CONFIG_OS
            | ((self.mux as u16) << 12)
            | ((self.pga as u16) << 9)
            | CONFIG_MODE_SINGLE
            | ((self.rate as u16) << 5)
            | CONFIG_COMP_DISABLE
    }

    /// Volts per count (FSR / 2^15).
    pub fn volts_per_count(&self) -> f32 {
        self.pga.full_scale_v() / 32_768.0
    }
}

/// ADS1115 driver error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error<E> {
    /// The I2C bus failed.
    I2c(E),
    /// `OS` still showed a conversion in progress after `max_polls` polls.
    NotReady,
    /// The code was at a saturation limit (`0x7FFF` or `0x8000`): input beyond full scale.
    Saturated(i16),
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::I2c(e) => write!(f, "ADS1115 I2C error: {e:?}"),
            Self::NotReady => write!(f, "ADS1115 conversion not ready after max_polls"),
            Self::Saturated(c) => {
                write!(f, "ADS1115 code = {c}: saturated, input beyond full scale")
            }
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

/// The ADS1115 on its I2C bus, with a delay source for the conversion wait.
pub struct Ads1115<I2C, D> {
    i2c: I2C,
    delay: D,
    config: Config,
}

impl<I2C: I2c, D: DelayNs> Ads1115<I2C, D> {
    /// Take the bus and delay. Nothing is sent until the first read.
    pub fn new(i2c: I2C, delay: D, config: Config) -> Self {
        Self { i2c, delay, config }
    }

    /// Give back the bus and delay.
    pub fn release(self) -> (I2C, D) {
        (self.i2c, self.delay)
    }

    /// The set-up in use.
    pub fn config(&self) -> &Config {
        &self.config
    }

    fn read_register(&mut self, reg: u8) -> Result<u16, Error<I2C::Error>> {
        let mut buf = [0u8; 2];
        self.i2c
            .write_read(self.config.address, &[reg], &mut buf)
            .map_err(Error::I2c)?;
        Ok(u16::from_be_bytes(buf))
    }

    /// One single-shot conversion, as the raw two's complement code.
    pub fn read_raw(&mut self) -> Result<i16, Error<I2C::Error>> {
        let [hi, lo] = self.config.start_word().to_be_bytes();
        self.i2c
            .write(self.config.address, &[REG_CONFIG, hi, lo])
            .map_err(Error::I2c)?;
        let wait_us = self.config.rate.conversion_time_us();
        for _ in 0..self.config.max_polls {
            self.delay.delay_us(wait_us);
            if self.read_register(REG_CONFIG)? & CONFIG_OS != 0 {
                let raw = i16::from_be_bytes(self.read_register(REG_CONVERSION)?.to_be_bytes());
                return if raw == i16::MAX || raw == i16::MIN {
                    Err(Error::Saturated(raw))
                } else {
                    Ok(raw)
                };
            }
        }
        Err(Error::NotReady)
    }
}

impl<I2C: I2c, D: DelayNs> AnalogInput for Ads1115<I2C, D> {
    type Error = Error<I2C::Error>;

    fn read_volts(&mut self) -> Result<f32, Self::Error> {
        let raw = self.read_raw()?;
        Ok(f32::from(raw) * self.config.volts_per_count())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use embedded_hal_mock::eh1::delay::NoopDelay;
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};

    fn cfg() -> Config {
        Config::new(0x48, Mux::Single0, Pga::Fs4V096, DataRate::Sps128, 3).unwrap()
    }

    /// Config word from the datasheet's bit table: OS=1, MUX=100 (AIN0/GND), PGA=001
    /// (±4.096 V), MODE=1, DR=100 (128 SPS), COMP_QUE=11 → 1100 0011 1000 0011 = 0xC383.
    /// The reset value 0x8583 is MUX=000, PGA=010, MODE=1, DR=100, COMP_QUE=11 with OS=1.
    #[test]
    fn start_word_matches_datasheet_bits() {
        assert_eq!(cfg().start_word(), 0xC383);
        let reset_like = Config::new(0x48, Mux::Diff01, Pga::Fs2V048, DataRate::Sps128, 1).unwrap();
        assert_eq!(reset_like.start_word(), 0x8583);
    }

    /// Datasheet FSR/LSB table: ±4.096 V gives an LSB of 125 µV; code 0x4000 is 2.048 V.
    #[test]
    fn single_shot_after_one_busy_poll() {
        let expect = [
            T::write(0x48, vec![REG_CONFIG, 0xC3, 0x83]),
            T::write_read(0x48, vec![REG_CONFIG], vec![0x43, 0x83]), // OS = 0: busy
            T::write_read(0x48, vec![REG_CONFIG], vec![0xC3, 0x83]), // OS = 1: done
            T::write_read(0x48, vec![REG_CONVERSION], vec![0x40, 0x00]),
        ];
        let mut i2c = Mock::new(&expect);
        let mut adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg());
        let v = adc.read_volts().unwrap();
        assert_eq!(v, 2.048);
        assert_eq!(cfg().volts_per_count(), 125e-6);
        i2c.done();
    }

    #[test]
    fn negative_code_is_twos_complement() {
        let expect = [
            T::write(0x48, vec![REG_CONFIG, 0xC3, 0x83]),
            T::write_read(0x48, vec![REG_CONFIG], vec![0xC3, 0x83]),
            T::write_read(0x48, vec![REG_CONVERSION], vec![0xFF, 0xF8]), // -8 counts
        ];
        let mut i2c = Mock::new(&expect);
        let mut adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg());
        assert_eq!(adc.read_raw().unwrap(), -8);
        i2c.done();
    }

    #[test]
    fn gives_up_after_max_polls() {
        let mut expect = vec![T::write(0x48, vec![REG_CONFIG, 0xC3, 0x83])];
        for _ in 0..3 {
            expect.push(T::write_read(0x48, vec![REG_CONFIG], vec![0x43, 0x83]));
        }
        let mut i2c = Mock::new(&expect);
        let mut adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg());
        assert_eq!(adc.read_raw(), Err(Error::NotReady));
        i2c.done();
    }

    #[test]
    fn saturation_and_bus_errors_are_errors() {
        use embedded_hal::i2c::ErrorKind;
        let expect = [
            T::write(0x48, vec![REG_CONFIG, 0xC3, 0x83]),
            T::write_read(0x48, vec![REG_CONFIG], vec![0xC3, 0x83]),
            T::write_read(0x48, vec![REG_CONVERSION], vec![0x7F, 0xFF]),
            T::write(0x48, vec![REG_CONFIG, 0xC3, 0x83]).with_error(ErrorKind::Other),
        ];
        let mut i2c = Mock::new(&expect);
        let mut adc = Ads1115::new(i2c.clone(), NoopDelay::new(), cfg());
        assert_eq!(adc.read_raw(), Err(Error::Saturated(i16::MAX)));
        assert_eq!(adc.read_raw(), Err(Error::I2c(ErrorKind::Other)));
        let (_bus, _delay) = adc.release();
        i2c.done();
    }

    #[test]
    fn config_is_checked() {
        assert_eq!(
            Config::new(0x47, Mux::Single0, Pga::Fs4V096, DataRate::Sps8, 1),
            Err(ConfigError::Address(0x47))
        );
        assert_eq!(
            Config::new(0x4B, Mux::Single0, Pga::Fs4V096, DataRate::Sps8, 0),
            Err(ConfigError::MaxPolls(0))
        );
        assert_eq!(DataRate::Sps860.conversion_time_us(), 1163);
    }
}
