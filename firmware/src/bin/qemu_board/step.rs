//! The swappable step the board runs over its input file.
//!
//! The board's `main` owns the I/O: it streams the input file in chunks of whole records,
//! hands each chunk to a [`Step`] and lets the step write its records to the output. Today's
//! step is [`MathProbe`], which exercises `holdback_core::math` so that a host test can
//! compare the device's bits with the host's; the closed-loop controller replaces it later
//! without touching the I/O code.
//!
//! Wire format (all little-endian, no header, no padding):
//! - input: `u32` bit patterns of `f32` stages in metres, one per 4-byte record;
//! - output of [`MathProbe`]: per input record, the bit patterns of `math::sqrt(h)`,
//!   `math::pow1_5(h)`, `math::pow2_5(h)` and `math::powf(h, 1.5)`, 16 bytes.

use holdback_core::math;
use semihosting::io::Write;

/// A step of board work over a chunk of whole input records.
pub trait Step {
    /// Size of one input record in bytes; the driver hands over only whole records.
    const RECORD_IN: usize;
    /// Consumes `input` (a whole number of records) and writes the results to `out`.
    fn run(&mut self, input: &[u8], out: &mut impl Write) -> semihosting::io::Result<()>;
}

/// The four math kernels of the probe, in output order.
pub const KERNELS: [fn(f32) -> f32; 4] = [math::sqrt, math::pow1_5, math::pow2_5, |h| {
    math::powf(h, 1.5)
}];

/// Output bytes per input record of [`MathProbe`].
pub const PROBE_RECORD_OUT: usize = 4 * KERNELS.len();

/// Evaluates the math kernels on each stage and writes their bits (see the module docs).
pub struct MathProbe;

impl Step for MathProbe {
    const RECORD_IN: usize = 4;

    fn run(&mut self, input: &[u8], out: &mut impl Write) -> semihosting::io::Result<()> {
        // 32 records of output per write keeps the stack small and the host calls few.
        const BATCH: usize = 32;
        let mut buf = [0_u8; BATCH * PROBE_RECORD_OUT];
        for chunk in input.chunks(BATCH * Self::RECORD_IN) {
            let mut used = 0_usize;
            for (rec, dst) in chunk
                .chunks_exact(Self::RECORD_IN)
                .zip(buf.chunks_exact_mut(PROBE_RECORD_OUT))
            {
                let mut bits = [0_u8; 4];
                bits.copy_from_slice(rec);
                let h = f32::from_bits(u32::from_le_bytes(bits));
                for (f, d) in KERNELS.iter().zip(dst.chunks_exact_mut(4)) {
                    d.copy_from_slice(&f(h).to_bits().to_le_bytes());
                }
                used = used.saturating_add(PROBE_RECORD_OUT);
            }
            out.write_all(buf.get(..used).unwrap_or(&[]))?;
        }
        Ok(())
    }
}
