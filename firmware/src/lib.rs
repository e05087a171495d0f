//! # holdback-firmware
//!
//! The device side of holdback. Drivers over embedded-hal 1.0, the event log, telemetry and
//! the main loop ([`app`]) generic over a [`Board`], and a [`virtual_board`] backed by the
//! core's plant model for emulated and host closed-loop runs. All engineering is in `holdback-core`; this crate
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

pub mod app;
pub mod drivers;
pub mod eventlog;
pub mod virtual_board;

pub use app::{App, AppOptions, Board, GateReading, StepReport};

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
