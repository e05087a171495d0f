//! Drivers over embedded-hal 1.0, one per module.
//!
//! Each driver owns its bus or pins (`new` takes them, `release` gives them back) and has an
//! `Error<E>` generic over the bus or pin error. Time comes in as integer milliseconds
//! (`now_ms: u64`, monotonic) where a driver needs it; nothing here reads a clock itself.
//!
//! embedded-hal 1.0 has no ADC trait, so two small traits of our own join the drivers: the
//! crate's [`StageInput`](crate::StageInput) (a stage in metres) and [`AnalogInput`] (a voltage
//! in volts), which the ADC driver implements and the current-loop and gate drivers consume.

pub mod ads1115;
pub mod current_loop;
pub mod gate;
pub mod pressure_stage;
pub mod rain_gauge;

/// One analog voltage reading, in volts at the converter's input.
///
/// Implemented by ADC drivers ([`ads1115::Ads1115`]); consumed by drivers that turn a voltage
/// into something else (a loop current across a shunt, a gate position potentiometer).
pub trait AnalogInput {
    /// The converter's error type.
    type Error: core::fmt::Debug;
    /// One conversion, in volts.
    fn read_volts(&mut self) -> Result<f32, Self::Error>;
}
