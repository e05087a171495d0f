//! # holdback-core
//!
//! The engineering of holdback, once: outlet hydraulics, stage–storage, level-pool routing,
//! rain and runoff, the storage forecast and the gate controller. Firmware and the desktop
//! tool only adapt this crate to pins or to files.
//!
//! ## Promises
//!
//! - `#![no_std]`, no heap: every buffer has a capacity fixed at compile time, and running out
//!   of capacity is an error value, never a crash.
//! - No panics on any input. Constructors validate once (`new` returns a `Result`); after
//!   that, evaluation cannot fail and returns a number. `unwrap`, `expect`, slice indexing,
//!   `panic!` and unchecked integer arithmetic are denied by clippy outside tests.
//! - `f32` throughout, SI units inside (m, m², m³, m³/s, s, mm/h; ha for catchment area at the
//!   boundary). A value's unit is in its name (`stage_m`, `release_m3s`).
//! - Time is an integer count of seconds (`u32`), never a float.
//! - All transcendental math goes through [`math`], so the host and the Cortex-M4F compute
//!   the same bits.
#![cfg_attr(not(any(test, feature = "std")), no_std)]
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

pub mod config;
pub mod control;
pub mod event;
pub mod flow;
pub mod forecast;
pub mod hydraulics;
pub mod math;
pub mod packed;
pub mod plant;
pub mod rain;
pub mod routing;
pub mod runoff;
pub mod sizing;
pub mod storage;
pub mod validate;

/// Standard gravitational acceleration, m/s² (the conventional value, ISO 80000-3).
pub const G_M_S2: f32 = 9.806_65;
