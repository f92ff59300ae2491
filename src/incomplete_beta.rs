//! The regularized incomplete beta function I_x(a, b), the one special function behind the
//! Student t and Fisher F tail probabilities used by calibration statistics.
//!
//! Evaluated by the classical continued fraction (modified Lentz method), using the symmetry
//! I_x(a, b) = 1 - I_{1-x}(b, a) so that the fraction always converges quickly. The caller
//! passes both x and y = 1 - x, each computed without cancellation, so that tail probabilities
//! near 0 keep their relative accuracy. f64 throughout (`libm` for `lgamma`, `log`, `exp`).

use crate::math;

/// Largest number of continued-fraction terms evaluated (a + b up to about 10^6 converges well
/// before this; the result is returned as it stands if it has not).
const MAX_TERMS: u32 = 400;
/// Relative change of the fraction below which it has converged.
const EPS: f64 = 1e-16;
/// Guard against division by zero in the Lentz recurrence.
const TINY: f64 = 1e-300;

/// ln B(a, b) = ln Γ(a) + ln Γ(b) - ln Γ(a + b), for a, b > 0.
fn ln_beta(a: f64, b: f64) -> f64 {
    // libm is the crate's f64 provider (see `crate::math`); lgamma is not behind the door.
    libm::lgamma(a) + libm::lgamma(b) - libm::lgamma(a + b)
}

/// I_x(a, b) for a, b > 0, where `x` in [0, 1] and `y` = 1 - x are passed separately.
///
/// Out-of-domain arguments are clamped (x <= 0 gives 0, y <= 0 gives 1); never NaN for finite
/// positive a, b.
pub(crate) fn regularized(a: f64, b: f64, x: f64, y: f64) -> f64 {
    if x.is_nan() || y.is_nan() || x <= 0.0 {
        return 0.0;
    }
    if y <= 0.0 {
        return 1.0;
    }
    let ln_front = a * math::ln(x) + b * math::ln(y) - ln_beta(a, b);
    let front = math::exp(ln_front);
    let value = if x < (a + 1.0) / (a + b + 2.0) {
        front * continued_fraction(a, b, x) / a
    } else {
        1.0 - front * continued_fraction(b, a, y) / b
    };
    if value.is_finite() {
        value.clamp(0.0, 1.0)
    } else {
        0.0
    }
}

/// The continued fraction for I_x(a, b) (modified Lentz evaluation).
fn continued_fraction(a: f64, b: f64, x: f64) -> f64 {
    let guard = |v: f64| if v.abs() < TINY { TINY } else { v };
    let qab = a + b;
    let qap = a + 1.0;
    let qam = a - 1.0;
    let mut c = 1.0;
    let mut d = 1.0 / guard(1.0 - qab * x / qap);
    let mut h = d;
    for m in 1..=MAX_TERMS {
        let m = f64::from(m);
        let m2 = 2.0 * m;
        // Even step.
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 / guard(1.0 + aa * d);
        c = guard(1.0 + aa / c);
        h *= d * c;
        // Odd step.
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 / guard(1.0 + aa * d);
        c = guard(1.0 + aa / c);
        let delta = d * c;
        h *= delta;
        if (delta - 1.0).abs() < EPS {
            break;
        }
    }
    h
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn closed_forms() {
        // Common practice (closed forms of the incomplete beta): I_x(1, 1) = x, I_x(a, 1) = x^a,
        // I_x(1, b) = 1 - (1 - x)^b.
        for &x in &[0.01, 0.3, 0.5, 0.77, 0.999] {
            let y = 1.0 - x;
            assert!((regularized(1.0, 1.0, x, y) - x).abs() < 1e-14);
            assert!((regularized(3.0, 1.0, x, y) - x * x * x).abs() < 1e-14);
            assert!((regularized(1.0, 4.0, x, y) - (1.0 - y.powi(4))).abs() < 1e-14);
        }
        assert_eq!(regularized(2.0, 3.0, 0.0, 1.0), 0.0);
        assert_eq!(regularized(2.0, 3.0, 1.0, 0.0), 1.0);
    }
}
