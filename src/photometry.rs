//! Photometry: from blank and sample levels to transmittance and absorbance.
//!
//! (Measurement functions follow; this file first defines the quantities.)

use core::fmt;

use crate::math;

/// Error building a photometric quantity from a number.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum QuantityError {
    /// The value was NaN or infinite.
    NotFinite,
    /// A transmittance was zero or negative (its absorbance would be infinite or undefined).
    NotPositive,
}

impl fmt::Display for QuantityError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            QuantityError::NotFinite => "value is not a finite number",
            QuantityError::NotPositive => "transmittance must be greater than zero",
        })
    }
}

#[cfg(feature = "std")]
impl std::error::Error for QuantityError {}

/// Transmittance T = P / P0, the fraction of the blank's light that passes the sample.
///
/// Always finite and greater than zero. It may exceed 1 (a sample clearer than its blank),
/// which gives a negative absorbance: a valid result.
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Transmittance(f32);

impl Transmittance {
    /// A transmittance from a ratio; finite and > 0, else an error.
    pub fn new(ratio: f32) -> Result<Transmittance, QuantityError> {
        if !ratio.is_finite() {
            Err(QuantityError::NotFinite)
        } else if ratio <= 0.0 {
            Err(QuantityError::NotPositive)
        } else {
            Ok(Transmittance(ratio))
        }
    }

    /// The ratio P / P0 (1.0 = 100 % T).
    pub const fn ratio(self) -> f32 {
        self.0
    }

    /// The transmittance in percent.
    pub fn percent(self) -> f32 {
        self.0 * 100.0
    }

    /// Decadic absorbance A = -log10(T) (IUPAC Gold Book, "absorbance").
    pub fn absorbance(self) -> Absorbance {
        Absorbance(-math::log10f(self.0))
    }
}

/// Decadic absorbance A = -log10(T) (IUPAC Gold Book, "absorbance", doi:10.1351/goldbook.A00028).
///
/// Always finite; may be negative (sample clearer than blank).
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Absorbance(f32);

impl Absorbance {
    /// An absorbance from a number; finite, else an error.
    pub fn new(value: f32) -> Result<Absorbance, QuantityError> {
        if value.is_finite() {
            Ok(Absorbance(value))
        } else {
            Err(QuantityError::NotFinite)
        }
    }

    /// The absorbance value (dimensionless, decadic).
    pub const fn value(self) -> f32 {
        self.0
    }

    /// The transmittance 10^(-A).
    ///
    /// Errors only if the absorbance is so negative or large that T leaves the f32 range.
    pub fn transmittance(self) -> Result<Transmittance, QuantityError> {
        Transmittance::new(math::exp10f(-self.0))
    }
}

impl fmt::Display for Absorbance {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:.4}", self.0)
    }
}

impl fmt::Display for Transmittance {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:.2} %T", self.percent())
    }
}
