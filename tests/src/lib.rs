//! # holdback-tests
//!
//! Checks that cross crates or look outside the project. The library part holds `f64`
//! reference implementations written straight from the published formulas, independent of the
//! `f32` core, and readers for the committed reference tables under `reference/`.
//! The checks themselves are in `tests/`; benchmarks in `benches/`.

pub mod closed_loop;
pub mod hydraulics64;
pub mod ponds;
pub mod rain64;
pub mod refdata;
pub mod runoff64;
pub mod storage64;
