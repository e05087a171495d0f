//! # holdback-review
//!
//! The asset manager's side of holdback: read what the devices wrote, summarise every storm,
//! keep a fleet of ponds in one store, answer the fleet questions and write one self-contained
//! HTML report.
//!
//! - [`read`]: decode a raw flash dump (the firmware's own [`DumpReader`]), an exported log
//!   file ([`logfile`]) or the firmware's telemetry messages ([`telemetry`]) into one [`read::DecodedLog`]:
//!   every record that passed its CRC, and every region that did not, with its offset. One
//!   bad region never stops the decoding of what follows.
//! - [`pond`]: what the review needs to know about a pond (permit, levels, IDF, targets,
//!   budgets), read from a JSON pond file.
//! - [`rain`]: rain for a storm, from the log's `RainTotal` records or a rain CSV.
//! - [`storm`]: split a log into storms and summarise each one, with its flags.
//! - [`store`]: the fleet store, SQLite (one file) or PostgreSQL, with the fleet questions.
//! - [`report`]: the fleet report (one HTML file) and CSV export of every table.
//! - [`demo`]: an invented, seeded fleet whose logs are written by the firmware's `EventLog`.
//! - [`cli`]: `holdback fleet ...` subcommands for the desktop tool.
//!
//! Engineering (IDF inversion, rain windows) is the core's; this crate adapts it to files.
//!
//! [`DumpReader`]: holdback_firmware::eventlog::dump::DumpReader

pub mod cli;
pub mod demo;
pub mod error;
pub mod flash;
pub mod logfile;
pub mod pond;
pub mod rain;
pub mod read;
pub mod report;
pub mod store;
pub mod storm;
pub mod telemetry;
pub mod time;

pub use error::ReviewError;
