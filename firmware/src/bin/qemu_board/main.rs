//! # qemu_board: the reference board under QEMU
//!
//! A `no_std`/`no_main` image for QEMU's `mps2-an386` (Cortex-M4F, `thumbv7em-none-eabihf`).
//! It talks to the host only through Arm semihosting: command-line arguments, host files and
//! the exit status. Run it with `scripts/qemu-run.sh ELF ARGS...`.
//!
//! Commands (the first argument is the program name, as `scripts/qemu-run.sh` passes it):
//! - `run IN OUT`: streams the host file `IN` through the [`step::Step`] in use and writes
//!   its records to the host file `OUT` (see [`step`] for the format).
//! - `closed-loop BLOB STORM TRACE [LOG]`: the firmware's main loop on the virtual board
//!   backed by the core's plant model, configured by the packed pond `BLOB`, driven by the
//!   rain of `STORM`, writing the decision trace to `TRACE` and, when `LOG` is given, the
//!   event-log flash image at the end of the run to `LOG` (see [`closed_loop`]).
//! - `bench KERNEL N`: evaluates `KERNEL` (`none`, `sqrt`, `pow1_5`, `pow2_5`, `powf1_5`) on
//!   [`BENCH_STAGES`] stages, `N` times over, and writes nothing. Run under the
//!   `qemu-icount` plugin, the instruction count of `N` passes minus that of 0 passes, over
//!   `N·BENCH_STAGES`, is the exact cost of one loop iteration; `none` gives the loop's own
//!   cost (see `scripts/qemu-icount.sh`). `forecast1`, `forecast20`, `forecast20kept`,
//!   `exact1` and `exact20` instead run `N` whole storage forecasts with 1 or 20 candidate
//!   openings, on the fast or the exact path (see [`forecast_bench`]); count(2N) − count(N)
//!   over N is the exact cost of one.
//!
//! At exit the board prints `stack: N bytes used` (the painted high-water mark, see
//! [`stack`]) to stderr.
//!
//! Exit status: 0 done, 1 usage, 2 input, 3 output, 4 input not a whole number of records,
//! 101 panic (the `semihosting` crate's panic handler; no panic is reachable by design).
//!
//! Same promises as the library: no heap, no panics on any input.
#![no_std]
#![no_main]
#![deny(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::indexing_slicing,
    clippy::panic,
    clippy::arithmetic_side_effects,
    clippy::todo,
    clippy::unimplemented,
    clippy::unreachable
)]

mod closed_loop;
mod forecast_bench;
mod stack;
mod step;

use core::ffi::CStr;
use core::hint::black_box;

use holdback_core::math;

use forecast_bench::Path;
use semihosting::fs::File;
use semihosting::io::{Read, Write};
use step::Step;

/// Stages per bench pass.
const BENCH_STAGES: usize = 64;

/// Why the board stops with a non-zero status.
#[derive(Clone, Copy)]
enum Exit {
    Usage = 1,
    Input = 2,
    Output = 3,
    PartialRecord = 4,
}

#[cortex_m_rt::entry]
fn main() -> ! {
    stack::paint();
    let code = match dispatch() {
        Ok(()) => 0,
        Err(e) => e as i32,
    };
    semihosting::eprintln!("stack: {} bytes used", stack::used_bytes());
    semihosting::process::exit(code)
}

fn dispatch() -> Result<(), Exit> {
    let args = semihosting::experimental::env::args::<256>().map_err(|_| Exit::Usage)?;
    let mut it = (&args).skip(1).map(|a| a.unwrap_or(""));
    match (
        it.next(),
        it.next(),
        it.next(),
        it.next(),
        it.next(),
        it.next(),
    ) {
        (Some("run"), Some(input), Some(output), None, ..) => {
            run_files(&mut step::MathProbe, input, output)
        }
        (Some("closed-loop"), Some(blob), Some(storm), Some(trace), log, None) => {
            closed_loop::run(blob, storm, trace, log)
        }
        (Some("bench"), Some(kernel), Some(n), None, ..) => {
            let n: u32 = n.parse().map_err(|_| Exit::Usage)?;
            bench(kernel, n)
        }
        _ => {
            semihosting::eprintln!(
                "usage: qemu_board run IN OUT | closed-loop BLOB STORM TRACE [LOG] | bench KERNEL N"
            );
            Err(Exit::Usage)
        }
    }
}

/// Copies `s` into `buf` with a terminating NUL; `None` if it does not fit.
fn c_path<'a>(s: &str, buf: &'a mut [u8; 200]) -> Option<&'a CStr> {
    let bytes = s.as_bytes();
    buf.get_mut(..bytes.len())?.copy_from_slice(bytes);
    *buf.get_mut(bytes.len())? = 0;
    CStr::from_bytes_until_nul(buf).ok()
}

/// Streams the host file `input` through `step` into the host file `output`.
fn run_files<S: Step>(step: &mut S, input: &str, output: &str) -> Result<(), Exit> {
    let mut pbuf = [0_u8; 200];
    let in_path = c_path(input, &mut pbuf).ok_or(Exit::Usage)?;
    let mut inp = File::open(in_path).map_err(|_| Exit::Input)?;
    let out_path = c_path(output, &mut pbuf).ok_or(Exit::Usage)?;
    let mut out = File::create(out_path).map_err(|_| Exit::Output)?;

    let mut buf = [0_u8; 256];
    loop {
        let filled = fill(&mut inp, &mut buf)?;
        let whole = filled.saturating_sub(filled.checked_rem(S::RECORD_IN).unwrap_or(0));
        let chunk = buf.get(..whole).unwrap_or(&[]);
        step.run(chunk, &mut out).map_err(|_| Exit::Output)?;
        if whole != filled {
            return Err(Exit::PartialRecord);
        }
        if filled < buf.len() {
            break;
        }
    }
    out.flush().map_err(|_| Exit::Output)
}

/// Reads until `buf` is full or the file ends; returns the bytes read.
fn fill(inp: &mut File, buf: &mut [u8]) -> Result<usize, Exit> {
    let mut filled = 0_usize;
    while let Some(rest) = buf.get_mut(filled..) {
        if rest.is_empty() {
            break;
        }
        match inp.read(rest).map_err(|_| Exit::Input)? {
            0 => break,
            n => filled = filled.saturating_add(n),
        }
    }
    Ok(filled)
}

/// `n` passes of one kernel over [`BENCH_STAGES`] stages from 0.001 m to about 5 m. Each
/// kernel gets its own monomorphised loop, so the kernel is inlined as it would be in the
/// controller; `black_box` on the argument and the result keeps the work from being hoisted
/// or removed (it costs a store and a load per iteration, which the `none` kernel measures).
fn bench(kernel: &str, n: u32) -> Result<(), Exit> {
    match kernel {
        "none" => bench_with(|h| h, n),
        "sqrt" => bench_with(math::sqrt, n),
        "pow1_5" => bench_with(math::pow1_5, n),
        "pow2_5" => bench_with(math::pow2_5, n),
        "powf1_5" => bench_with(|h| math::powf(h, 1.5), n),
        "forecast1" => forecast_bench::run(1, n, Path::Fast).ok_or(Exit::Usage)?,
        "forecast20" => forecast_bench::run(20, n, Path::Fast).ok_or(Exit::Usage)?,
        "forecast20kept" => forecast_bench::run(20, n, Path::Kept).ok_or(Exit::Usage)?,
        "exact1" => forecast_bench::run(1, n, Path::Exact).ok_or(Exit::Usage)?,
        "exact20" => forecast_bench::run(20, n, Path::Exact).ok_or(Exit::Usage)?,
        _ => return Err(Exit::Usage),
    }
    Ok(())
}

#[inline(never)]
fn bench_with(f: impl Fn(f32) -> f32, n: u32) {
    let mut stages = [0.0_f32; BENCH_STAGES];
    let mut h = 0.001_f32;
    for s in stages.iter_mut() {
        *s = h;
        h *= 1.14;
    }
    for _ in 0..n {
        for &s in stages.iter() {
            black_box(f(black_box(s)));
        }
    }
}
