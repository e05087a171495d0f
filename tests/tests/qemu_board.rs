//! Host-vs-device equivalence: the board image under QEMU (Cortex-M4F, `vsqrt.f32` and the
//! FPU) must compute the same `holdback_core::math` bits as this x86-64 host (libm's
//! `sqrtf`, SSE).
//!
//! These tests boot the real device-profile ELF with `scripts/qemu-run.sh`, so they need
//! `qemu-system-arm` and the built image: they are `#[ignore]`d in a plain `cargo test` and
//! `scripts/verify.sh` runs them with `HOLDBACK_BOARD_ELF` set to the ELF's path. Wire format
//! and exit codes: `firmware/src/bin/qemu_board/`.
//!
//! Source of the expected values: the host's own evaluation of the same functions. IEEE 754
//! (2019, clauses 5.4.1 and 6.2) requires a correctly rounded square root and exact
//! multiplication rounding, so equal bits are what the standard promises for every non-NaN
//! result; for NaN results it fixes only "is a NaN" (the sign and payload of a NaN produced by
//! an invalid operation are left to the implementation: x86 gives 0xffc00000, Arm's default
//! NaN is 0x7fc00000), so NaN results are checked as NaN on both sides.

use std::path::{Path, PathBuf};
use std::process::Command;

use holdback_core::math;

/// A named `f32 -> f32` kernel of `holdback_core::math`.
type Kernel = (&'static str, fn(f32) -> f32);

/// Output order of the board's math probe, one `u32` each per input record.
const KERNELS: [Kernel; 4] = [
    ("sqrt", math::sqrt),
    ("pow1_5", math::pow1_5),
    ("pow2_5", math::pow2_5),
    ("powf(h, 1.5)", |h| math::powf(h, 1.5)),
];

fn elf() -> PathBuf {
    PathBuf::from(std::env::var_os("HOLDBACK_BOARD_ELF").expect(
        "HOLDBACK_BOARD_ELF must name the qemu_board device-profile ELF (scripts/verify.sh sets it)",
    ))
}

fn run_script() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../scripts/qemu-run.sh")
}

/// A scratch directory of its own for each test (the board's paths may hold no space or comma).
fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("qemu_board-{name}"));
    std::fs::create_dir_all(&dir).unwrap();
    assert!(
        !dir.to_string_lossy().contains([' ', ',']),
        "{}",
        dir.display()
    );
    dir
}

/// Boots the board with `args`; returns its exit status and console output.
fn board(args: &[&Path]) -> (i32, String) {
    let out = Command::new("bash")
        .arg(run_script())
        .arg(elf())
        .args(args)
        .output()
        .unwrap();
    let text =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    (out.status.code().unwrap_or(-1), text)
}

/// Stages to probe: the special values, every power of two, a dense sweep over pond heads
/// (0.001 m .. 5 m) and a coarse sweep over every positive and negative `f32` bit pattern.
fn probe_stages() -> Vec<f32> {
    let mut v = vec![
        0.0,
        -0.0,
        f32::MIN_POSITIVE,
        f32::from_bits(1),
        f32::from_bits(0x007f_ffff),
        f32::EPSILON,
        1.0,
        2.0,
        4.0,
        f32::MAX,
        f32::INFINITY,
        f32::NEG_INFINITY,
        f32::NAN,
        -f32::NAN,
        f32::from_bits(0x7f80_0001), // signalling NaN
        f32::from_bits(0x7fc1_2345), // quiet NaN with a payload
        -1.0,
        -f32::MIN_POSITIVE,
    ];
    v.extend((-149..=127).map(|e| 2f32.powi(e)));
    let (lo, hi) = (0.001_f32.to_bits(), 5.0_f32.to_bits());
    v.extend((lo..=hi).step_by(4099).map(f32::from_bits));
    v.extend((0..=u32::MAX).step_by(65_537).map(f32::from_bits));
    v
}

fn le_words(bytes: &[u8]) -> Vec<u32> {
    bytes
        .chunks_exact(4)
        .map(|c| u32::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// Every kernel's result on the device has the host's bits (non-NaN) or is NaN on both.
#[test]
#[ignore = "boots the board under QEMU; scripts/verify.sh runs it with HOLDBACK_BOARD_ELF set"]
fn device_math_bits_equal_host_bits() {
    let dir = scratch("bits");
    let (input, output) = (dir.join("stages.bin"), dir.join("math.bin"));
    let stages = probe_stages();
    let bytes: Vec<u8> = stages
        .iter()
        .flat_map(|h| h.to_bits().to_le_bytes())
        .collect();
    std::fs::write(&input, bytes).unwrap();
    let _ = std::fs::remove_file(&output);

    let (code, console) = board(&[Path::new("run"), &input, &output]);
    assert_eq!(code, 0, "board failed:\n{console}");
    let words = le_words(&std::fs::read(&output).unwrap());
    assert_eq!(
        words.len(),
        stages.len() * KERNELS.len(),
        "one record per stage"
    );

    let mut compared = 0_usize;
    let mut nan_sign_differs = 0_usize;
    for (h, rec) in stages.iter().zip(words.chunks_exact(KERNELS.len())) {
        for ((name, f), &dev) in KERNELS.iter().zip(rec) {
            let host = f(*h);
            let dev_f = f32::from_bits(dev);
            if host.is_nan() {
                assert!(
                    dev_f.is_nan(),
                    "{name}({h:e} = {:#010x}): host NaN, device {dev:#010x}",
                    h.to_bits()
                );
                nan_sign_differs += usize::from(host.to_bits() != dev);
            } else {
                assert_eq!(
                    dev,
                    host.to_bits(),
                    "{name}({h:e} = {:#010x}): device {dev_f:e}, host {host:e}",
                    h.to_bits()
                );
            }
            compared += 1;
        }
    }
    eprintln!(
        "{compared} results compared over {} stages; {nan_sign_differs} NaN results differ \
         only in NaN sign/payload",
        stages.len()
    );
}

/// An input that ends in a partial record stops with status 4, after writing every whole
/// record before it.
#[test]
#[ignore = "boots the board under QEMU; scripts/verify.sh runs it with HOLDBACK_BOARD_ELF set"]
fn partial_record_exits_4_after_whole_records() {
    let dir = scratch("partial");
    let (input, output) = (dir.join("stages.bin"), dir.join("math.bin"));
    let mut bytes: Vec<u8> = [0.5_f32, 2.0]
        .iter()
        .flat_map(|h| h.to_bits().to_le_bytes())
        .collect();
    bytes.extend([1, 2, 3]);
    std::fs::write(&input, bytes).unwrap();

    let (code, console) = board(&[Path::new("run"), &input, &output]);
    assert_eq!(code, 4, "{console}");
    let words = le_words(&std::fs::read(&output).unwrap());
    assert_eq!(words.len(), 2 * KERNELS.len());
    assert_eq!(f32::from_bits(words[KERNELS.len()]), 2f32.sqrt()); // sqrt(2.0), 2nd record
}

/// A missing input file is status 2 and a bad command line status 1, not a hang or a panic.
#[test]
#[ignore = "boots the board under QEMU; scripts/verify.sh runs it with HOLDBACK_BOARD_ELF set"]
fn missing_input_and_bad_usage_have_their_exit_codes() {
    let dir = scratch("errors");
    let (code, console) = board(&[
        Path::new("run"),
        &dir.join("absent.bin"),
        &dir.join("o.bin"),
    ]);
    assert_eq!(code, 2, "{console}");
    let (code, console) = board(&[Path::new("fly")]);
    assert_eq!(code, 1, "{console}");
}
