//! The few transcendental functions lumisorb needs, behind one door.
//!
//! By default the f32 functions come from `libm` (correctly rounded to within about 1 ulp).
//! With the `fast-math` feature, `log10`, `ln` and `exp` on f32 come from `micromath` instead:
//! smaller code and faster on a core without an FPU, but far less precise (measured: up to
//! 5.1e-2 error in an absorbance over 0..3; see the precision contract in [`crate::photometry`]
//! and `tests/precision_contract.rs`). The square root stays libm in both modes.
//! The f64 functions, used by calibration where accuracy needs them, always come from `libm`.

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

/// Square root (f32, device path).
///
/// Always libm, also with `fast-math`: micromath's bit-trick square root is only good to about
/// 5 %, too coarse for uncertainties, and libm's `sqrtf` is small.
#[inline]
pub fn sqrtf(x: f32) -> f32 {
    libm::sqrtf(x)
}

/// Absolute value (f32); exact in both modes.
#[inline]
pub fn absf(x: f32) -> f32 {
    libm::fabsf(x)
}

/// Square root (f64, always libm).
#[inline]
pub fn sqrt(x: f64) -> f64 {
    libm::sqrt(x)
}

/// Base-10 logarithm (f64, always libm).
#[inline]
pub fn log10(x: f64) -> f64 {
    libm::log10(x)
}

/// Natural logarithm (f64, always libm).
#[inline]
pub fn ln(x: f64) -> f64 {
    libm::log(x)
}

/// Exponential (f64, always libm).
#[inline]
pub fn exp(x: f64) -> f64 {
    libm::exp(x)
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
}
