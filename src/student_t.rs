//! Student t quantiles without `std`, for confidence intervals and detection limits.
//!
//! [`two_sided_95`] gives t(ν, 0.975), the factor of a two-sided 95 % confidence interval;
//! [`one_sided_99`] gives t(ν, 0.99), the factor of the US EPA method detection limit
//! (40 CFR Part 136 Appendix B, Rev. 2). [`quantile`] gives any other probability.
//! Every integer ν >= 1 is allowed.
//!
//! Method: the upper tail P(T > t) = ½·I_{ν/(ν+t²)}(ν/2, ½) (regularized incomplete beta) is
//! inverted by a safeguarded Newton iteration from a Cornish–Fisher starting value (ν = 1
//! included: its closed form cot(πq) would link trigonometric range reduction, several kB of
//! flash); ν = 2 uses its closed form, and ν > 1000 the Cornish–Fisher expansion alone (its
//! error is then below 1e-11 relative). The normal quantile inside the expansion is Wichura's
//! AS 241 (no error function linked), and the density each Newton step needs is the incomplete
//! beta's front factor divided by t (no second special function). Accuracy is about 1e-12
//! relative for ν <= 1000. Checked in `tests/student_t.rs` against the NIST/SEMATECH e-Handbook
//! table 1.3.6.7.2 and against the `statrs` crate for ν = 1..200.
//!
//! Cost: a few thousand f64 operations per quantile (software floating point on a Cortex-M4F);
//! [`crate::calibration::Calibration`] computes the t values it needs once, when it is fitted.

use core::fmt;

use crate::incomplete_beta;
use crate::math;

/// Error from a t quantile.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StudentTError {
    /// Zero degrees of freedom: no t distribution exists.
    ZeroDegreesOfFreedom,
    /// The probability was not strictly between 0 and 1 (or was NaN).
    ProbabilityOutOfRange,
}

impl fmt::Display for StudentTError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            StudentTError::ZeroDegreesOfFreedom => {
                "the t distribution needs at least 1 degree of freedom"
            }
            StudentTError::ProbabilityOutOfRange => "probability must lie strictly between 0 and 1",
        })
    }
}

impl core::error::Error for StudentTError {}

/// t(ν, 0.975): the factor of a two-sided 95 % confidence interval with ν degrees of freedom.
///
/// ```
/// // NIST/SEMATECH e-Handbook, table 1.3.6.7.2: ν = 4 -> 2.776.
/// let t = lumisorb::student_t::two_sided_95(4).unwrap();
/// assert!((t - 2.776).abs() < 5e-4);
/// ```
pub fn two_sided_95(df: u32) -> Result<f64, StudentTError> {
    upper_quantile(df, 0.025)
}

/// t(ν, 0.99): the one-sided 99 % quantile (the US EPA MDL factor; 3.143 for 7 replicates, ν = 6).
pub fn one_sided_99(df: u32) -> Result<f64, StudentTError> {
    upper_quantile(df, 0.01)
}

/// The quantile t(ν, p): the value that a t variable with ν degrees of freedom stays below
/// with probability `p`, for 0 < p < 1.
pub fn quantile(df: u32, p: f64) -> Result<f64, StudentTError> {
    if !(p > 0.0 && p < 1.0) {
        return Err(StudentTError::ProbabilityOutOfRange);
    }
    if p >= 0.5 {
        upper_quantile(df, 1.0 - p)
    } else {
        upper_quantile(df, p).map(|t| -t)
    }
}

/// The upper tail probability P(T > t) of a t variable with ν degrees of freedom.
pub fn upper_tail(df: u32, t: f64) -> Result<f64, StudentTError> {
    if df == 0 {
        return Err(StudentTError::ZeroDegreesOfFreedom);
    }
    if t.is_nan() {
        return Err(StudentTError::ProbabilityOutOfRange);
    }
    let tail = tail_abs(f64::from(df), t.abs());
    Ok(if t >= 0.0 { tail } else { 1.0 - tail })
}

/// P(T > t) for t >= 0 (at most 0.5).
fn tail_abs(nu: f64, t: f64) -> f64 {
    tail_and_density(nu, t).0
}

/// P(T > t) and the density f(t), for t >= 0.
///
/// With x = ν/(ν+t²), y = t²/(ν+t²): P(T > t) = ½·I_x(ν/2, ½), and the incomplete beta's front
/// factor x^(ν/2)·y^(1/2) / B(ν/2, ½) equals t·f(t) (from f(t) = x^((ν+1)/2) / (√ν·B(ν/2, ½))).
fn tail_and_density(nu: f64, t: f64) -> (f64, f64) {
    if t.is_infinite() {
        return (0.0, 0.0);
    }
    let t2 = t * t;
    let denom = nu + t2;
    let (value, front) =
        incomplete_beta::regularized_with_front(0.5 * nu, 0.5, nu / denom, t2 / denom);
    (0.5 * value, front / t)
}

/// Coefficients of Wichura's algorithm AS 241 (PPND16), Applied Statistics 37 (1988) 477-484,
/// in ascending powers: numerator and denominator for |p - ½| <= 0.425, then for
/// r = √(-ln p) <= 5 (in r - 1.6) and beyond (in r - 5). Digits as published.
#[allow(clippy::excessive_precision)]
const AS241: [[f64; 8]; 6] = [
    [
        3.387_132_872_796_366_608,
        133.141_667_891_784_377_45,
        1_971.590_950_306_551_442_7,
        13_731.693_765_509_461_125,
        45_921.953_931_549_871_457,
        67_265.770_927_008_700_853,
        33_430.575_583_588_128_105,
        2_509.080_928_730_122_672_7,
    ],
    [
        1.0,
        42.313_330_701_600_911_252,
        687.187_007_492_057_908_3,
        5_394.196_021_424_751_107_7,
        21_213.794_301_586_595_867,
        39_307.895_800_092_710_61,
        28_729.085_735_721_942_674,
        5_226.495_278_852_545_925,
    ],
    [
        1.423_437_110_749_683_577_34,
        4.630_337_846_156_545_295_9,
        5.769_497_221_460_691_405_5,
        3.647_848_324_763_204_605_04,
        1.270_458_252_452_368_382_58,
        0.241_780_725_177_450_611_77,
        0.022_723_844_989_269_184_583_3,
        7.745_450_142_783_414_076_4e-4,
    ],
    [
        1.0,
        2.053_191_626_637_758_821_87,
        1.676_384_830_183_803_849_4,
        0.689_767_334_985_100_004_55,
        0.148_103_976_427_480_074_59,
        0.015_198_666_563_616_457_196_6,
        5.475_938_084_995_344_946e-4,
        1.050_750_071_644_416_843_24e-9,
    ],
    [
        6.657_904_643_501_103_777_2,
        5.463_784_911_164_114_369_9,
        1.784_826_539_917_291_335_8,
        0.296_560_571_828_504_891_23,
        0.026_532_189_526_576_123_093,
        0.001_242_660_947_388_078_438_6,
        2.711_555_568_743_487_578_15e-5,
        2.010_334_399_292_288_132_65e-7,
    ],
    [
        1.0,
        0.599_832_206_555_887_937_69,
        0.136_929_880_922_735_805_31,
        0.014_875_361_290_850_614_852_5,
        7.868_691_311_456_132_591e-4,
        1.846_318_317_510_054_681_8e-5,
        1.421_511_758_316_445_888_7e-7,
        2.044_263_103_389_939_785_64e-15,
    ],
];

/// The ratio of two AS 241 polynomials (index `k` of the numerator) at `r`.
fn as241_ratio(k: usize, r: f64) -> f64 {
    let horner = |c: Option<&[f64; 8]>| {
        c.map_or(f64::NAN, |c| {
            c.iter().rev().fold(0.0, |acc, &v| acc * r + v)
        })
    };
    horner(AS241.get(k)) / horner(AS241.get(k + 1))
}

/// The standard normal upper quantile z with P(Z > z) = q, for 0 < q <= 0.5: Wichura's AS 241
/// (relative error about 1e-16; no error function, so no erf/erfc code in flash).
fn normal_upper_quantile(q: f64) -> f64 {
    let d = 0.5 - q;
    if d <= 0.425 {
        d * as241_ratio(0, 0.180625 - d * d)
    } else {
        let r = math::sqrt(-math::ln(q));
        if r <= 5.0 {
            as241_ratio(2, r - 1.6)
        } else {
            as241_ratio(4, r - 5.0)
        }
    }
}

/// Cornish–Fisher expansion of the t quantile in powers of 1/ν (Abramowitz & Stegun 26.7.5).
fn cornish_fisher(nu: f64, z: f64) -> f64 {
    let z2 = z * z;
    let g1 = (z2 + 1.0) * z / 4.0;
    let g2 = ((5.0 * z2 + 16.0) * z2 + 3.0) * z / 96.0;
    let g3 = (((3.0 * z2 + 19.0) * z2 + 17.0) * z2 - 15.0) * z / 384.0;
    let g4 = ((((79.0 * z2 + 776.0) * z2 + 1482.0) * z2 - 1920.0) * z2 - 945.0) * z / 92160.0;
    z + (g1 + (g2 + (g3 + g4 / nu) / nu) / nu) / nu
}

/// The t value with upper tail probability q, 0 < q < 1.
fn upper_quantile(df: u32, q: f64) -> Result<f64, StudentTError> {
    if df == 0 {
        return Err(StudentTError::ZeroDegreesOfFreedom);
    }
    if !(q > 0.0 && q < 1.0) {
        return Err(StudentTError::ProbabilityOutOfRange);
    }
    if q > 0.5 {
        return upper_quantile(df, 1.0 - q).map(|t| -t);
    }
    if q == 0.5 {
        return Ok(0.0);
    }
    let nu = f64::from(df);
    let start = cornish_fisher(nu, normal_upper_quantile(q));
    let t = match df {
        // ν = 2: P(T > t) = ½ - t / (2 √(2 + t²)), so t = (1 - 2q) / √(2 q (1 - q)).
        2 => (1.0 - 2.0 * q) / math::sqrt(2.0 * q * (1.0 - q)),
        _ if df > 1000 => start,
        _ => newton(nu, q, start),
    };
    Ok(t)
}

/// Safeguarded Newton iteration on tail(t) - q = 0 over a bracket [lo, hi], from `start`.
fn newton(nu: f64, q: f64, start: f64) -> f64 {
    let mut t = start;
    if !(t.is_finite() && t > 0.0) {
        t = 1.0;
    }
    // Bracket: tail(lo) > q > tail(hi).
    let mut lo = 0.0;
    let mut hi = t;
    let mut grow = 0;
    while tail_abs(nu, hi) > q && grow < 200 {
        lo = hi;
        hi *= 2.0;
        grow += 1;
    }
    for _ in 0..100 {
        let (tail, dens) = tail_and_density(nu, t);
        let g = tail - q;
        if g > 0.0 {
            lo = t;
        } else {
            hi = t;
        }
        let newton = if dens > 0.0 { t + g / dens } else { f64::NAN };
        let inside = newton > lo && newton < hi;
        let next = if inside { newton } else { 0.5 * (lo + hi) };
        let step = (next - t).abs();
        t = next;
        // Quadratic convergence: once a Newton step is below 1e-9·t the error left is far below
        // the 1e-13 rounding floor of the tail itself.
        if (inside && step <= 1e-9 * t) || hi - lo <= 1e-15 * hi {
            break;
        }
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_bad_arguments() {
        assert_eq!(two_sided_95(0), Err(StudentTError::ZeroDegreesOfFreedom));
        assert_eq!(quantile(3, 0.0), Err(StudentTError::ProbabilityOutOfRange));
        assert_eq!(quantile(3, 1.0), Err(StudentTError::ProbabilityOutOfRange));
        assert_eq!(
            quantile(3, f64::NAN),
            Err(StudentTError::ProbabilityOutOfRange)
        );
        assert_eq!(quantile(3, 0.5), Ok(0.0));
    }

    #[test]
    fn normal_quantile_inverts_the_normal_tail() {
        // Reference: libm's erfc (a port of the FreeBSD msun implementation), P(Z > z) =
        // ½·erfc(z/√2), at probabilities across all three ranges of AS 241.
        let mut q = 0.5;
        while q > 1e-300 {
            let z = normal_upper_quantile(q);
            let tail = 0.5 * libm::erfc(z * core::f64::consts::FRAC_1_SQRT_2);
            let density = libm::exp(-0.5 * z * z) * 0.398_942_280_401_432_7;
            // The tail's error mapped back to z, relative to z (absolute near z = 0).
            let err = (tail - q).abs() / density / z.abs().max(1.0);
            assert!(err < 4e-15, "q {q}: z {z} err {err:e}");
            q *= 0.83;
        }
        // Common values (NIST/SEMATECH e-Handbook 1.3.6.7.1, 3 decimals): 1.960, 2.326, 3.090.
        assert!((normal_upper_quantile(0.025) - 1.960).abs() < 5e-4);
        assert!((normal_upper_quantile(0.01) - 2.326).abs() < 5e-4);
        assert!((normal_upper_quantile(0.001) - 3.090).abs() < 5e-4);
    }

    #[test]
    fn density_from_the_front_factor() {
        // Closed form of the t density (common practice): Γ((ν+1)/2) / (√(νπ) Γ(ν/2)) ·
        // (1 + t²/ν)^(-(ν+1)/2), with libm's lgamma.
        for nu in [1.0, 2.0, 3.0, 7.5, 30.0, 1000.0] {
            for t in [0.01, 0.5, 1.0, 2.2, 9.0, 60.0] {
                let ln_c = libm::lgamma(0.5 * (nu + 1.0))
                    - libm::lgamma(0.5 * nu)
                    - 0.5 * libm::log(nu * core::f64::consts::PI);
                let exact = libm::exp(ln_c - 0.5 * (nu + 1.0) * libm::log1p(t * t / nu));
                let (_, ours) = tail_and_density(nu, t);
                let ok = if exact > 1e-300 {
                    ((ours - exact) / exact).abs() < 1e-11
                } else {
                    ours < 1e-290
                };
                assert!(ok, "nu {nu} t {t}: {ours:e} vs {exact:e}");
            }
        }
    }

    #[test]
    fn symmetric_and_consistent_with_tail() {
        for df in [1, 2, 3, 7, 30, 999, 1001, 100_000] {
            for p in [0.6, 0.9, 0.975, 0.99, 0.9995] {
                let t = quantile(df, p).unwrap();
                let lower = quantile(df, 1.0 - p).unwrap();
                assert!((t + lower).abs() <= 1e-12 * t.abs());
                let tail = upper_tail(df, t).unwrap();
                assert!(
                    ((tail - (1.0 - p)) / (1.0 - p)).abs() < 1e-9,
                    "df {df} p {p}"
                );
            }
        }
    }
}
