//! The one place transcendental math happens.
//!
//! Every square root, power, exponential, logarithm and trigonometric function in the core is
//! called through this module, never through a method such as `x.sqrt()`: in a `no_std` crate
//! under host `cargo test`, such a method silently resolves to `std`'s inherent one, and host
//! tests would then check different code from the device.
//!
//! - [`sqrt`] uses the FPU's `vsqrt.f32` on hard-float Arm targets (IEEE 754 requires a
//!   correctly rounded square root, so it gives the same bits as `libm::sqrtf`, which is also
//!   correctly rounded) and `libm::sqrtf` everywhere else.
//! - Everything else is `libm`, the same code on every target. Measured against f64 for
//!   h in 0.001..5, libm `sqrtf` and `powf` are within 7e-8 relative; micromath's
//!   approximations are off by up to 26 % and are not used for hydraulics.
//!
//! Invariants: every function here is total (never panics). NaN in gives NaN out, as IEEE 754
//! says; callers that must not see NaN filter their inputs at the boundary.

/// Square root, correctly rounded. Negative input gives NaN.
#[inline]
pub fn sqrt(x: f32) -> f32 {
    #[cfg(all(target_arch = "arm", target_abi = "eabihf"))]
    {
        let bits: u32;
        // SAFETY: moves the operand into s14, takes `vsqrt.f32` (one FPU register in, one
        // out, no memory, no flags but the FPSCR sticky exception bits) and moves the result
        // back. General registers carry the bits because stable Rust does not let inline asm
        // name the `sreg` class without the `vfp2` target feature, which it never sets.
        unsafe {
            core::arch::asm!(
                "vmov s14, {x}",
                "vsqrt.f32 s14, s14",
                "vmov {y}, s14",
                x = in(reg) x.to_bits(),
                y = lateout(reg) bits,
                out("s14") _,
                options(pure, nomem, nostack, preserves_flags)
            );
        }
        f32::from_bits(bits)
    }
    #[cfg(not(all(target_arch = "arm", target_abi = "eabihf")))]
    {
        libm::sqrtf(x)
    }
}

/// `x` to the power `y` (libm `powf`).
#[inline]
pub fn powf(x: f32, y: f32) -> f32 {
    libm::powf(x, y)
}

/// The real cube root (libm `cbrtf`, under one ulp; faster and closer than
/// `powf(x, 1.0 / 3.0)`, whose exponent is not exactly a third).
#[inline]
pub fn cbrt(x: f32) -> f32 {
    libm::cbrtf(x)
}

/// `h^1.5` computed as `h·√h`: one correctly rounded root and one multiply, the common power
/// of weir laws. Zero or negative `h` gives 0 (no head, no flow), NaN gives NaN.
#[inline]
pub fn pow1_5(h: f32) -> f32 {
    if h > 0.0 {
        h * sqrt(h)
    } else if h.is_nan() {
        h
    } else {
        0.0
    }
}

/// `h^2.5` computed as `h²·√h`, the power of the V-notch weir law. Zero or negative `h`
/// gives 0, NaN gives NaN.
#[inline]
pub fn pow2_5(h: f32) -> f32 {
    if h > 0.0 {
        h * h * sqrt(h)
    } else if h.is_nan() {
        h
    } else {
        0.0
    }
}

/// e^x (libm `expf`).
#[inline]
pub fn exp(x: f32) -> f32 {
    libm::expf(x)
}

/// Natural logarithm (libm `logf`).
#[inline]
pub fn ln(x: f32) -> f32 {
    libm::logf(x)
}

/// Base-10 logarithm (libm `log10f`).
#[inline]
pub fn log10(x: f32) -> f32 {
    libm::log10f(x)
}

/// Tangent of an angle in radians (libm `tanf`).
#[inline]
pub fn tan(x: f32) -> f32 {
    libm::tanf(x)
}

/// Sine of an angle in radians (libm `sinf`).
#[inline]
pub fn sin(x: f32) -> f32 {
    libm::sinf(x)
}

/// Cosine of an angle in radians (libm `cosf`).
#[inline]
pub fn cos(x: f32) -> f32 {
    libm::cosf(x)
}

/// Arc cosine in radians (libm `acosf`); input outside [-1, 1] gives NaN.
#[inline]
pub fn acos(x: f32) -> f32 {
    libm::acosf(x)
}

/// Absolute value (exact on every target).
#[inline]
pub fn abs(x: f32) -> f32 {
    libm::fabsf(x)
}

/// Fused multiply-add `x·y + z` with one rounding (libm `fmaf`; exact on every target).
#[inline]
pub fn fma(x: f32, y: f32, z: f32) -> f32 {
    libm::fmaf(x, y, z)
}

/// Smallest integer value ≥ `x` (libm `ceilf`; exact on every target).
#[inline]
pub fn ceil(x: f32) -> f32 {
    libm::ceilf(x)
}

/// `x` clamped to `[lo, hi]`; NaN becomes `lo` so that a NaN can never leak through a clamp
/// into a command. Requires `lo <= hi` (if not, returns `lo`).
#[inline]
pub fn clamp(x: f32, lo: f32, hi: f32) -> f32 {
    if x.is_nan() || x < lo || lo > hi {
        lo
    } else if x > hi {
        hi
    } else {
        x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `cbrt` against the f64 cube root (std's `cbrt`) over the storages a frustum segment
    /// sees: within one f32 ulp.
    #[test]
    fn cbrt_matches_f64_within_one_ulp() {
        let mut x = 1.0e-6_f32;
        while x < 1.0e9 {
            let want = f64::from(x).cbrt();
            let err = ((f64::from(cbrt(x)) - want) / want).abs();
            assert!(err < 1.2e-7, "x={x} rel err {err}");
            x *= 1.007;
        }
        assert_eq!(cbrt(-8.0), -2.0);
        assert_eq!(cbrt(0.0), 0.0);
    }

    /// The fast powers must agree with libm's powf to within a few ulps over the range of heads
    /// a pond sees (source: the f64 value of the same power, computed by std).
    #[test]
    fn fast_powers_match_f64_within_two_ulps_over_pond_heads() {
        let mut h = 0.0005_f32;
        while h < 12.0 {
            let r15 = (h as f64).powf(1.5);
            let r25 = (h as f64).powf(2.5);
            let e15 = ((pow1_5(h) as f64 - r15) / r15).abs();
            let e25 = ((pow2_5(h) as f64 - r25) / r25).abs();
            assert!(e15 < 2.5e-7, "h={h} rel err {e15}");
            assert!(e25 < 3.6e-7, "h={h} rel err {e25}");
            h *= 1.013;
        }
    }

    #[test]
    fn powers_of_no_head_are_zero_and_nan_propagates() {
        assert_eq!(pow1_5(0.0), 0.0);
        assert_eq!(pow1_5(-1.0), 0.0);
        assert_eq!(pow2_5(-0.1), 0.0);
        assert!(pow1_5(f32::NAN).is_nan());
    }

    #[test]
    fn clamp_never_passes_nan() {
        assert_eq!(clamp(f32::NAN, 0.0, 1.0), 0.0);
        assert_eq!(clamp(2.0, 0.0, 1.0), 1.0);
        assert_eq!(clamp(-2.0, 0.0, 1.0), 0.0);
        assert_eq!(clamp(0.5, 0.0, 1.0), 0.5);
    }
}
