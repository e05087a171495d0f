//! # holdback-firmware
//!
//! The device side of holdback. Drivers over embedded-hal 1.0, the event log, telemetry and
//! the main loop generic over a [`Board`]. All engineering is in `holdback-core`; this crate
//! only adapts it to pins, buses, flash and clocks.
//!
//! Same promises as the core: `#![no_std]`, no heap, no panics on any input.
#![cfg_attr(not(test), no_std)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::indexing_slicing,
        clippy::panic,
        clippy::arithmetic_side_effects,
        clippy::todo,
        clippy::unimplemented,
        clippy::unreachable
    )
)]
#![warn(missing_docs)]

pub mod command;
pub mod drivers;
pub mod eventlog;
pub mod telemetry;

/// A stage reading from an analog front end, before any filtering.
///
/// embedded-hal 1.0 has no ADC trait, so the firmware defines this small one: a driver for a
/// pressure transducer behind an I2C ADC, or for a 4–20 mA loop, implements it.
pub trait StageInput {
    /// The driver's own error type (bus fault, open loop, over range…).
    type Error: core::fmt::Debug;
    /// One reading of the water-surface stage, in metres above the sensor datum.
    fn read_stage_m(&mut self) -> Result<f32, Self::Error>;
}

/// Everything the main loop needs from a board: its drivers, clock, flash and watchdog.
///
/// Porting holdback to a new MCU means implementing this trait for that board.
pub trait Board {
    /// The stage sensor driver.
    type Stage: StageInput;
    /// Seconds since boot, from a monotonic clock.
    fn now_s(&self) -> u32;
    /// The stage sensor.
    fn stage(&mut self) -> &mut Self::Stage;
    /// Feed the watchdog; called once per control step.
    fn feed_watchdog(&mut self);
}
