//! The few transcendental functions lumisorb needs, behind one door.
//!
//! By default the f32 functions come from `libm` (correctly rounded to within about 1 ulp).
//! With the `fast-math` feature, `log10`, `ln` and `exp` on f32 come from `micromath` instead:
//! smaller code and faster on a core without an FPU, but far less precise (measured: up to
//! 5.1e-2 error in an absorbance over 0..3; see the precision contract in [`crate::photometry`]
//! and `tests/precision_contract.rs`). The square root is exact in both modes: correctly
//! rounded, so bit for bit what libm's gives, from [`sqrt`]'s digit-by-digit root (smaller in
//! flash than libm's table-driven one, which matters more than its speed here).
//! The f64 `ln` and `exp` of the calibration statistics are own code within a few ulp (smaller
//! than libm's on a single-precision FPU; tested against libm); `log10` and `abs` come from `libm`.

/// Base-10 logarithm (f32, device path).
#[inline]
pub fn log10f(x: f32) -> f32 {
    #[cfg(feature = "fast-math")]
    {
        micromath::F32Ext::log10(x)
    }
    #[cfg(not(feature = "fast-math"))]
    {
        libm::log10f(x)
    }
}

/// Natural logarithm (f32, device path).
#[inline]
pub fn lnf(x: f32) -> f32 {
    #[cfg(feature = "fast-math")]
    {
        micromath::F32Ext::ln(x)
    }
    #[cfg(not(feature = "fast-math"))]
    {
        libm::logf(x)
    }
}

/// Exponential (f32, device path).
#[inline]
pub fn expf(x: f32) -> f32 {
    #[cfg(feature = "fast-math")]
    {
        micromath::F32Ext::exp(x)
    }
    #[cfg(not(feature = "fast-math"))]
    {
        libm::expf(x)
    }
}

/// 10 raised to `x` (f32, device path).
#[inline]
pub fn exp10f(x: f32) -> f32 {
    expf(x * core::f32::consts::LN_10)
}

/// Square root (f32, device path), correctly rounded.
///
/// Exact also with `fast-math`: micromath's bit-trick square root is only good to about 5 %,
/// too coarse for uncertainties. Computed through [`sqrt`]: a correctly rounded f64 root
/// rounded again to f32 is the correctly rounded f32 root (53 >= 2·24 + 2 bits; Figueroa,
/// "When is double rounding innocuous?", SIGNUM Newsletter 30(3), 1995, from memory), so one
/// routine serves both widths.
#[inline]
pub fn sqrtf(x: f32) -> f32 {
    sqrt(f64::from(x)) as f32
}

/// Absolute value (f32); exact in both modes.
#[inline]
pub fn absf(x: f32) -> f32 {
    libm::fabsf(x)
}

/// Square root (f64), correctly rounded (IEEE 754), by the digit-by-digit method: one bit of
/// the root per step from the 53-bit significand, all in 64-bit integers. NaN and negative
/// arguments give NaN, ±0 and +∞ give themselves.
#[inline(never)] // one copy in flash
pub fn sqrt(x: f64) -> f64 {
    const FRACTION_BITS: u32 = 52;
    const IMPLICIT: u64 = 1 << FRACTION_BITS;
    const INFINITY: u64 = 0x7FF0_0000_0000_0000;
    const MINUS_ZERO: u64 = 0x8000_0000_0000_0000;
    let bits = x.to_bits();
    // On the bits (no floating-point compares): +0, -0 and +∞ give themselves; NaN and every
    // other number with the sign bit set give NaN.
    if bits == 0 || bits == MINUS_ZERO || bits == INFINITY {
        return x;
    }
    if bits > INFINITY {
        return f64::NAN;
    }
    let biased = (bits >> FRACTION_BITS) as i32;
    let (mut m, mut e) = if biased == 0 {
        // Subnormal: normalise the significand so that its bit 52 is set.
        let fraction = bits & (IMPLICIT - 1);
        let shift = fraction.leading_zeros() - (63 - FRACTION_BITS);
        (fraction << shift, -1022 - shift as i32)
    } else {
        ((bits & (IMPLICIT - 1)) | IMPLICIT, biased - 1023)
    };
    // x = (m / 2^52)·2^e; make e even, so m / 2^52 lies in [1, 4).
    if e % 2 != 0 {
        m <<= 1;
        e -= 1;
    }
    // root = floor(√(m·2^54)), 54 bits, from the radicand's bit pairs, top first: those of m
    // (shifted to the top of `pairs`), then zeros. The remainder stays below 2·root + 1 < 2^55.
    let mut pairs = m << (62 - FRACTION_BITS);
    let (mut root, mut rem) = (0u64, 0u64);
    for _ in 0..FRACTION_BITS + 2 {
        rem = (rem << 2) | (pairs >> 62);
        pairs <<= 2;
        let trial = (root << 2) | 1;
        root <<= 1;
        if rem >= trial {
            rem -= trial;
            root |= 1;
        }
    }
    // Round to 53 bits: the extra bit decides, as a tie is impossible (a root that ended exactly
    // half-way would need more bits than the square of a 53-bit significand has).
    let significand = (root >> 1) + (root & 1);
    // 2^(e/2) times significand / 2^52 (the implicit bit carries into the exponent field).
    f64::from_bits((((e / 2 + 1022) as u64) << FRACTION_BITS) + significand)
}

/// Base-10 logarithm (f64, always libm).
#[inline]
pub fn log10(x: f64) -> f64 {
    libm::log10(x)
}

/// ln 2 split in two: the high part has its low bits zero, so k·LN2_HI is exact for |k| < 2^11
/// (the split of fdlibm's `e_exp.c` and `e_log.c`, from memory).
#[allow(clippy::excessive_precision)] // digits as in fdlibm
const LN2_HI: f64 = 6.931_471_803_691_238_164_90e-1;
/// ln 2 - LN2_HI.
#[allow(clippy::excessive_precision)] // digits as in fdlibm
const LN2_LO: f64 = 1.908_214_929_270_587_700_02e-10;

/// 2^k for -1022 <= k <= 1023 (a normal number), from the bits.
fn pow2(k: i32) -> f64 {
    f64::from_bits(((k + 1023) as u64) << 52)
}

/// Natural logarithm (f64), within a few ulp (own code: smaller in flash than libm's `log`,
/// which matters on a core whose FPU is single precision; tested against libm).
///
/// x = 2^k·m with √½ <= m < √2, ln m = 2·atanh(s) = 2·(s + s³/3 + s⁵/5 + ...), s = (m-1)/(m+1),
/// |s| <= 0.172: eleven terms leave a truncation error below 1e-17. Negative x and NaN give
/// NaN, ±0 gives -∞, +∞ gives +∞.
#[inline(never)] // one copy in flash
pub fn ln(x: f64) -> f64 {
    const INFINITY: u64 = 0x7FF0_0000_0000_0000;
    const MINUS_ZERO: u64 = 0x8000_0000_0000_0000;
    const FRACTION: u64 = (1 << 52) - 1;
    let mut bits = x.to_bits();
    // On the bits: ±0, then +∞, NaN and everything with the sign bit set.
    if bits == 0 || bits == MINUS_ZERO {
        return f64::NEG_INFINITY;
    }
    if bits >= INFINITY {
        return if bits == INFINITY { x } else { f64::NAN };
    }
    let mut k = -1023i32;
    if bits < 1 << 52 {
        // Subnormal: scale by 2^54 first.
        bits = (x * pow2(54)).to_bits();
        k -= 54;
    }
    k += (bits >> 52) as i32;
    // m in [1, 2), or in [½, 1) when its fraction is beyond √2's: m in [√½, √2).
    let fraction = bits & FRACTION;
    let m = if fraction > core::f64::consts::SQRT_2.to_bits() & FRACTION {
        k += 1;
        f64::from_bits(fraction | (1022 << 52))
    } else {
        f64::from_bits(fraction | (1023 << 52))
    };
    let s = (m - 1.0) / (m + 1.0);
    let s2 = s * s;
    let mut series = 0.0;
    for j in (0..11u32).rev() {
        series = series * s2 + 1.0 / f64::from(2 * j + 1);
    }
    let kf = f64::from(k);
    kf * LN2_HI + (2.0 * s * series + kf * LN2_LO)
}

/// Exponential (f64), within a few ulp (own code: smaller in flash than libm's `exp`; tested
/// against libm).
///
/// x = k·ln 2 + r with |r| <= ½·ln 2 + tiny, e^r by its Taylor series to r¹³ (truncation error
/// below 1e-17 relative), times 2^k. NaN gives NaN, beyond the range ∞ or 0.
#[inline(never)] // one copy in flash
pub fn exp(x: f64) -> f64 {
    // 1.5·2^52: adding it rounds |t| < 2^31 to the nearest integer, held in the low bits.
    const ROUNDER: f64 = 6_755_399_441_055_744.0;
    #[allow(clippy::neg_cmp_op_on_partial_ord)] // NaN takes this branch too: one compare
    if !(x <= 709.782_712_893_384) {
        return if x.is_nan() { x } else { f64::INFINITY };
    }
    if x < -745.2 {
        return 0.0;
    }
    let big = x * core::f64::consts::LOG2_E + ROUNDER;
    let k = big.to_bits() as u32 as i32;
    let kf = big - ROUNDER;
    let r = (x - kf * LN2_HI) - kf * LN2_LO;
    let mut e = 1.0;
    for i in (1..14u32).rev() {
        e = 1.0 + e * r / f64::from(i);
    }
    // 2^k in two normal factors (k from -1075 to 1024).
    let half = k / 2;
    e * pow2(half) * pow2(k - half)
}

/// Absolute value (f64).
#[inline]
pub fn abs(x: f64) -> f64 {
    libm::fabs(x)
}

/// Power (f64, always libm).
#[inline]
pub fn pow(x: f64, y: f64) -> f64 {
    libm::pow(x, y)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Distance in ulp between two finite f64 of the same sign.
    fn ulps(a: f64, b: f64) -> u64 {
        a.to_bits().abs_diff(b.to_bits())
    }

    #[test]
    fn ln_and_exp_agree_with_libm() {
        // Against the libm crate (a port of musl/fdlibm, correctly rounded to within 1 ulp):
        // own ln and exp within 4 ulp over a logarithmic sweep, subnormals and the range ends.
        let mut x = 1e-310f64;
        while x < 1e300 {
            for v in [x, x * 1.000_000_1, 1.0 + x.min(0.5)] {
                assert!(
                    ulps(ln(v), libm::log(v)) <= 4 || (ln(v) - libm::log(v)).abs() < 1e-16,
                    "ln {v}"
                );
            }
            x *= 1.37;
        }
        let mut y = -745.0f64;
        while y < 709.7 {
            for v in [y, y + 0.123_456_7] {
                let (a, b) = (exp(v), libm::exp(v));
                assert!(
                    ulps(a, b) <= 4 || (b < 1e-300 && (a - b).abs() <= 1e-322),
                    "exp {v}: {a} vs {b}"
                );
            }
            y += 0.731;
        }
        for v in [0.0, 1e-300, -1e-300, 0.5, -0.5, 1.0, 2.0, 10.0, -20.0] {
            assert!(ulps(exp(v), libm::exp(v)) <= 4, "exp {v}");
        }
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(ln(1.0), 0.0);
        assert!(ln(-1.0).is_nan() && ln(f64::NAN).is_nan() && exp(f64::NAN).is_nan());
        assert_eq!(ln(0.0), f64::NEG_INFINITY);
        assert_eq!(ln(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(710.0), f64::INFINITY);
        assert_eq!(exp(-746.0), 0.0);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
    }

    #[test]
    fn decade_logs() {
        // Common practice (definition of the decadic logarithm): log10(10) = 1, log10(100) = 2.
        let tol = if cfg!(feature = "fast-math") {
            1e-2
        } else {
            1e-6
        };
        assert!((log10f(10.0) - 1.0).abs() < tol);
        assert!((log10f(100.0) - 2.0).abs() < tol);
        assert!((exp10f(2.0) - 100.0).abs() < 100.0 * 3.0 * tol);
        assert!((sqrtf(2.0) - core::f32::consts::SQRT_2).abs() < tol);
    }

    #[test]
    fn square_roots_are_those_of_libm_bit_for_bit() {
        // Reference: libm's sqrt and sqrtf (correctly rounded, so any difference is ours).
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x
        };
        let specials = [
            0.0,
            -0.0,
            1.0,
            2.0,
            4.0,
            0.25,
            f64::MIN_POSITIVE,
            f64::from_bits(1),
            f64::from_bits(0x000F_FFFF_FFFF_FFFF),
            f64::MAX,
            f64::INFINITY,
            f64::EPSILON,
            1.0 - f64::EPSILON,
            1.0 + f64::EPSILON,
        ];
        // (NaN payloads are not compared: both give a NaN.)
        let random = (0..200_000).map(|_| f64::from_bits(next() >> 1));
        for v in specials.into_iter().chain(random).filter(|v| !v.is_nan()) {
            assert_eq!(sqrt(v).to_bits(), libm::sqrt(v).to_bits(), "{v:e}");
        }
        let random = (0..200_000).map(|_| f32::from_bits((next() >> 33) as u32));
        let specials = [
            0.0,
            f32::MIN_POSITIVE,
            f32::from_bits(1),
            f32::MAX,
            f32::INFINITY,
        ];
        for v in random.chain(specials).filter(|v| !v.is_nan()) {
            assert_eq!(sqrtf(v).to_bits(), libm::sqrtf(v).to_bits(), "{v:e}");
        }
        assert!(sqrt(-1.0).is_nan() && sqrt(f64::NAN).is_nan() && sqrtf(-0.5).is_nan());
        assert_eq!(sqrt(-0.0).to_bits(), (-0.0f64).to_bits());
    }
}
