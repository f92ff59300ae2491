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
//! error is then below 1e-11 relative). Accuracy is about 1e-12 relative for ν <= 1000. Checked in
//! `tests/student_t.rs` against the NIST/SEMATECH e-Handbook table 1.3.6.7.2 and against the
//! `statrs` crate for ν = 1..200.
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
    if t.is_infinite() {
        return 0.0;
    }
    let t2 = t * t;
    let denom = nu + t2;
    0.5 * incomplete_beta::regularized(0.5 * nu, 0.5, nu / denom, t2 / denom)
}

/// Density of the t distribution at t.
fn density(nu: f64, t: f64) -> f64 {
    let ln_c = incomplete_beta::ln_gamma(0.5 * (nu + 1.0))
        - incomplete_beta::ln_gamma(0.5 * nu)
        - 0.5 * math::ln(nu * core::f64::consts::PI);
    math::exp(ln_c - 0.5 * (nu + 1.0) * libm::log1p(t * t / nu))
}

/// The standard normal upper quantile z with P(Z > z) = q, for 0 < q <= 0.5.
///
/// Starting value: Abramowitz & Stegun 26.2.23 (|error| < 4.5e-4); then Newton steps on the
/// exact tail ½·erfc(z/√2).
fn normal_upper_quantile(q: f64) -> f64 {
    let s = math::sqrt(-2.0 * math::ln(q));
    let mut z = s
        - (2.515517 + 0.802853 * s + 0.010328 * s * s)
            / (1.0 + 1.432788 * s + 0.189269 * s * s + 0.001308 * s * s * s);
    for _ in 0..4 {
        let tail = 0.5 * libm::erfc(z * core::f64::consts::FRAC_1_SQRT_2);
        let dens = math::exp(-0.5 * z * z) * 0.398_942_280_401_432_7;
        if dens.is_nan() || dens <= 0.0 {
            break;
        }
        z += (tail - q) / dens;
    }
    z
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
    let t = match df {
        // ν = 2: P(T > t) = ½ - t / (2 √(2 + t²)), so t = (1 - 2q) / √(2 q (1 - q)).
        2 => (1.0 - 2.0 * q) / math::sqrt(2.0 * q * (1.0 - q)),
        _ if df > 1000 => cornish_fisher(nu, normal_upper_quantile(q)),
        _ => newton(nu, q),
    };
    Ok(t)
}

/// Safeguarded Newton iteration on tail(t) - q = 0 over a bracket [lo, hi].
fn newton(nu: f64, q: f64) -> f64 {
    let mut t = cornish_fisher(nu, normal_upper_quantile(q));
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
        let g = tail_abs(nu, t) - q;
        if g > 0.0 {
            lo = t;
        } else {
            hi = t;
        }
        let dens = density(nu, t);
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
