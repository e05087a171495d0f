//! The `closed-loop BLOB STORM TRACE [LOG]` command: the firmware's main loop
//! ([`holdback_firmware::App`]) on the [`VirtualBoard`], whose peripherals are backed by the
//! core's plant model.
//!
//! - `BLOB`: a packed pond configuration (`holdback_core::packed`); it configures both the
//!   controller (through [`App::boot`], which checks it) and the virtual pond. A blob that does
//!   not unpack leaves no pond to simulate: exit status 2.
//! - `STORM`: `u32` step count N, then N `f32` rain depths in mm per control step, all
//!   little-endian (no float parsing on the device); read in small chunks as the run goes.
//! - `TRACE`: written with N [`TraceRecord`]s (`time_s u32`, `stage_m` bits, `opening_cmd_m`
//!   bits, `mode u8`; 13 bytes each, little-endian).
//! - `LOG` (optional): written at the end of the run with the whole event-log flash, the
//!   [`LOG_FLASH_BYTES`] bytes of its range as they are (a raw dump: read, write and erase
//!   sizes 4, 4 and 512 bytes), so the desktop review can decode what the device logged.
//!
//! The event log lives on a [`RamFlash`] of [`LOG_FLASH_BYTES`] in RAM.

use core::ffi::CStr;

use holdback_core::config::PondConfig;
use holdback_core::packed::MAX_PACKED_LEN;
use holdback_firmware::app::load_config;
use holdback_firmware::eventlog::ram_flash::RamFlash;
use holdback_firmware::virtual_board::{RainSource, TraceRecord, VirtualBoard, run_closed_loop};
use holdback_firmware::{App, AppOptions};
use semihosting::fs::File;
use semihosting::io::Write;

use crate::{Exit, c_path, fill};

/// Bytes of the in-RAM event-log flash (4 pages of 512 bytes).
pub const LOG_FLASH_BYTES: usize = 2048;
/// Erase page of the in-RAM flash, bytes.
const LOG_PAGE: usize = 512;

type LogFlash = RamFlash<LOG_FLASH_BYTES, 4, 4, LOG_PAGE>;

/// The storm file after its count, read 32 records at a time.
struct FileRain {
    file: File,
    left: u32,
    buf: [u8; 128],
    at: usize,
    len: usize,
    failed: bool,
}

impl RainSource for FileRain {
    fn next_rain_mm(&mut self) -> f32 {
        if self.left == 0 || self.failed {
            return 0.0;
        }
        if self.at.saturating_add(4) > self.len {
            match fill(&mut self.file, &mut self.buf) {
                Ok(n) if n >= 4 => {
                    self.len = n;
                    self.at = 0;
                }
                _ => {
                    self.failed = true;
                    return 0.0;
                }
            }
        }
        let mut w = [0u8; 4];
        if let Some(s) = self.buf.get(self.at..self.at.saturating_add(4)) {
            w.copy_from_slice(s);
        }
        self.at = self.at.saturating_add(4);
        self.left = self.left.saturating_sub(1);
        f32::from_bits(u32::from_le_bytes(w))
    }
}

fn open(path: &str) -> Result<File, Exit> {
    let mut pbuf = [0_u8; 200];
    let p: &CStr = c_path(path, &mut pbuf).ok_or(Exit::Usage)?;
    File::open(p).map_err(|_| Exit::Input)
}

/// Reads and checks the blob (its buffer and the unpacking stack are gone afterwards).
#[inline(never)]
fn load(blob_path: &str) -> Result<PondConfig, Exit> {
    let mut blob = [0_u8; MAX_PACKED_LEN];
    let n = fill(&mut open(blob_path)?, &mut blob)?;
    load_config(blob.get(..n).ok_or(Exit::Input)?).map_err(|_| Exit::Input)
}

/// Runs the command (see the module doc).
pub fn run(
    blob_path: &str,
    storm_path: &str,
    trace_path: &str,
    log_path: Option<&str>,
) -> Result<(), Exit> {
    let pond = load(blob_path)?;

    let mut storm = open(storm_path)?;
    let mut head = [0_u8; 4];
    if fill(&mut storm, &mut head)? != 4 {
        return Err(Exit::Input);
    }
    let steps = u32::from_le_bytes(head);
    let rain = FileRain {
        file: storm,
        left: steps,
        buf: [0; 128],
        at: 0,
        len: 0,
        failed: false,
    };

    let mut pbuf = [0_u8; 200];
    let out_path = c_path(trace_path, &mut pbuf).ok_or(Exit::Usage)?;
    let mut out = File::create(out_path).map_err(|_| Exit::Output)?;

    let mut flash = LogFlash::new(false);
    let range = 0..u32::try_from(LOG_FLASH_BYTES).unwrap_or(0);
    // The board borrows the flash, so moving the board around never copies its 4 KiB.
    let board = VirtualBoard::new(&pond, rain, &mut flash, range).map_err(|_| Exit::Input)?;
    let mut app = App::boot(board, Ok(&pond), AppOptions::default());

    const BATCH: usize = 32;
    let mut buf = [0_u8; BATCH * TraceRecord::BYTES];
    let mut used = 0_usize;
    run_closed_loop(&mut app, steps, |r| {
        let rec = TraceRecord::of(r).to_bytes();
        if let Some(d) = buf.get_mut(used..used.saturating_add(TraceRecord::BYTES)) {
            d.copy_from_slice(&rec);
            used = used.saturating_add(TraceRecord::BYTES);
        }
        if used == buf.len() {
            out.write_all(&buf).map_err(|_| Exit::Output)?;
            used = 0;
        }
        Ok(())
    })?;
    out.write_all(buf.get(..used).unwrap_or(&[]))
        .map_err(|_| Exit::Output)?;
    out.flush().map_err(|_| Exit::Output)?;
    drop(app);
    if let Some(path) = log_path {
        let p = c_path(path, &mut pbuf).ok_or(Exit::Usage)?;
        let mut log = File::create(p).map_err(|_| Exit::Output)?;
        log.write_all(flash.image()).map_err(|_| Exit::Output)?;
        log.flush().map_err(|_| Exit::Output)?;
    }
    Ok(())
}
