//! # holdback-sim
//!
//! The desktop side of holdback, behind the `holdback` command: pond files (load, validate,
//! pack for the device), storms (recorded rain files, design storms), the simulated plant
//! with sensor and actuator models, replays against the control policies, and the outputs
//! (CSV time series, JSON summaries, plots, the sign-off report). The engineering is the
//! core's; this crate adapts it to files.

pub mod batch;
pub mod pondfile;
pub mod rainfile;
pub mod report;
pub mod sim;
pub mod storms;
pub mod summary;
pub mod units;
