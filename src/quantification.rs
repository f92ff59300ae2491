//! Quantification: from a sample absorbance to a concentration with a 95 % confidence interval,
//! quality flags, dilution, and recovery of check samples.
//!
//! The concentration is found by inverting the fitted curve (for the quadratic, the root on the
//! rising branch, which is the one inside the calibrated range). The interval is the classical
//! inverse-prediction interval x₀ ± t(ν, 0.975)·s_x0. For a straight line with unit weights,
//!
//! s_x0 = (s_y/x / b)·√(1/m + 1/n + (ȳ₀ - ȳ)² / (b²·Σ(xᵢ - x̄)²)),
//!
//! (m reads of the sample, n standards), which is exactly
//! s_x0² = (s²/(w₀·m) + Var ŷ(x₀)) / (dA/dc)², the form used for every model: for weighted fits
//! w₀ is the weight a read at x₀ would have (inverse variance interpolated between the standards,
//! or 1/x₀²), and for the quadratic the same first-order propagation through the local slope
//! dA/dc = c1 + 2·c2·x₀ gives the "propagated" interval. A dilution factor D multiplies the
//! concentration and both ends of the interval (the relative uncertainty is unchanged; any
//! uncertainty of D itself is not included).

use core::fmt;

use crate::calibration::{Calibration, Weighting};
use crate::flags::{Flag, Flags};
use crate::math;
use crate::photometry::Absorbance;

/// A dilution (or concentration) factor: the sample was diluted `factor`-fold before reading.
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Dilution(f32);

impl Dilution {
    /// No dilution (factor 1).
    pub const NONE: Dilution = Dilution(1.0);

    /// A dilution factor; finite and > 0 (values below 1 mean the sample was concentrated).
    pub fn new(factor: f32) -> Result<Dilution, QuantifyError> {
        if factor.is_finite() && factor > 0.0 {
            Ok(Dilution(factor))
        } else {
            Err(QuantifyError::InvalidDilution)
        }
    }

    /// The factor.
    pub const fn factor(self) -> f32 {
        self.0
    }
}

impl Default for Dilution {
    fn default() -> Self {
        Dilution::NONE
    }
}

/// Why a sample could not be quantified.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum QuantifyError {
    /// Zero replicate reads of the sample.
    ZeroReplicates,
    /// The dilution factor was not finite and > 0.
    InvalidDilution,
    /// The absorbance lies beyond the maximum of the quadratic curve: no concentration gives it
    /// (dilute and repeat).
    BeyondCurve,
    /// The result overflowed (absurd absorbance or dilution).
    NotFinite,
    /// A known concentration for a recovery was not finite and > 0.
    InvalidReference,
}

impl fmt::Display for QuantifyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            QuantifyError::ZeroReplicates => "sample needs at least one read",
            QuantifyError::InvalidDilution => {
                "dilution factor must be finite and greater than zero"
            }
            QuantifyError::BeyondCurve => {
                "absorbance beyond the top of the calibration curve: dilute and repeat"
            }
            QuantifyError::NotFinite => "result is not a finite number",
            QuantifyError::InvalidReference => {
                "known concentration must be finite and greater than zero"
            }
        })
    }
}

impl core::error::Error for QuantifyError {}

/// A concentration with its 95 % confidence interval and flags.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Quantified {
    /// Concentration in the original (undiluted) sample, in the standards' unit. May be
    /// negative (an absorbance below the fitted blank): reported as is, flagged below LOD.
    pub concentration: f32,
    /// Lower end of the 95 % confidence interval.
    pub low: f32,
    /// Upper end of the 95 % confidence interval.
    pub high: f32,
    /// Standard uncertainty s_x0 (times the dilution factor).
    pub standard_uncertainty: f32,
    /// Photometric flags passed in, plus `below_lod` / `below_loq` / `above_range`.
    pub flags: Flags,
}

/// A reading on a channel that may or may not have a calibration.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Reading {
    /// The sample absorbance.
    pub absorbance: Absorbance,
    /// The concentration, when a calibration exists.
    pub concentration: Option<Quantified>,
    /// All flags (with `no_calibration` when there is none).
    pub flags: Flags,
}

impl<const N: usize> Calibration<N> {
    /// Concentration of a sample whose mean absorbance over `replicates` reads is `absorbance`,
    /// read after diluting it by `dilution`; `photometric_flags` (from the photometric result)
    /// are carried into the result.
    ///
    /// Flags added: `below_lod` (concentration below the LOD), else `below_loq` (below the
    /// LOQ), and `above_range` (above the highest standard: extrapolated). The limits are
    /// compared in the measured (diluted) solution.
    pub fn quantify(
        &self,
        absorbance: Absorbance,
        replicates: u16,
        dilution: Dilution,
        photometric_flags: Flags,
    ) -> Result<Quantified, QuantifyError> {
        quantify_fitted(self, absorbance, replicates, dilution, photometric_flags)
    }

    /// Recovery in percent of a check sample of known concentration: the sample is quantified
    /// and compared with `known` (in the original sample's units).
    pub fn recovery(
        &self,
        absorbance: Absorbance,
        replicates: u16,
        dilution: Dilution,
        known: f32,
    ) -> Result<f32, QuantifyError> {
        let q = self.quantify(absorbance, replicates, dilution, Flags::NONE)?;
        recovery_percent(q.concentration, known)
    }
}

/// Quantifies on a channel whose calibration may be missing: without one, the reading carries
/// `no_calibration` and no concentration.
pub fn quantify_reading<const N: usize>(
    calibration: Option<&Calibration<N>>,
    absorbance: Absorbance,
    replicates: u16,
    dilution: Dilution,
    photometric_flags: Flags,
) -> Result<Reading, QuantifyError> {
    match calibration {
        Some(cal) => {
            let q = cal.quantify(absorbance, replicates, dilution, photometric_flags)?;
            Ok(Reading {
                absorbance,
                concentration: Some(q),
                flags: q.flags,
            })
        }
        None => Ok(Reading {
            absorbance,
            concentration: None,
            flags: photometric_flags.with(Flag::NoCalibration),
        }),
    }
}

/// Recovery in percent, 100·measured/known (check sample of known concentration).
///
/// ```
/// let r = lumisorb::quantification::recovery_percent(0.97, 1.0).unwrap();
/// assert!((r - 97.0).abs() < 1e-4);
/// ```
pub fn recovery_percent(measured: f32, known: f32) -> Result<f32, QuantifyError> {
    if !(known.is_finite() && known > 0.0) {
        return Err(QuantifyError::InvalidReference);
    }
    if !measured.is_finite() {
        return Err(QuantifyError::NotFinite);
    }
    let r = 100.0 * measured / known;
    if r.is_finite() {
        Ok(r)
    } else {
        Err(QuantifyError::NotFinite)
    }
}

/// Spike recovery in percent, 100·(spiked - unspiked)/added.
pub fn spike_recovery_percent(
    spiked: f32,
    unspiked: f32,
    added: f32,
) -> Result<f32, QuantifyError> {
    if !spiked.is_finite() || !unspiked.is_finite() {
        return Err(QuantifyError::NotFinite);
    }
    recovery_percent(spiked - unspiked, added)
}

/// The non-generic quantification path.
fn quantify_fitted<const N: usize>(
    cal: &Calibration<N>,
    absorbance: Absorbance,
    replicates: u16,
    dilution: Dilution,
    photometric_flags: Flags,
) -> Result<Quantified, QuantifyError> {
    if replicates == 0 {
        return Err(QuantifyError::ZeroReplicates);
    }
    if !(dilution.0.is_finite() && dilution.0 > 0.0) {
        return Err(QuantifyError::InvalidDilution);
    }
    let inner = cal.fitted();
    let fit = &inner.fit;
    let y0 = f64::from(absorbance.value());
    let x0 = fit.inverse(y0).ok_or(QuantifyError::BeyondCurve)?;
    let slope = fit.slope_at(x0);
    if slope.is_nan() || slope <= 0.0 {
        return Err(QuantifyError::BeyondCurve);
    }

    // Weight a single read at x0 would have in the fit, relative to the normalised weights.
    let (lo, hi) = inner.range;
    let reps = f64::from(inner.mean_replicates.max(1.0));
    let read_weight = match inner.weighting {
        Weighting::None => 1.0 / reps,
        Weighting::InverseConcentrationSquared => {
            let c = x0.max(f64::from(lo));
            1.0 / (reps * c * c)
        }
        Weighting::InverseVariance => {
            let sd = interpolated_sd(cal.points(), x0);
            1.0 / (sd * sd)
        }
    };
    let w0 = read_weight * fit.weight_norm() * f64::from(replicates);
    let var_read = fit.residual_variance() / w0;
    let var = (var_read + fit.fitted_variance(x0)) / (slope * slope);
    let s_x0 = math::sqrt(var.max(0.0));
    let half = inner.t95 * s_x0;
    let d = f64::from(dilution.0);

    let mut flags = photometric_flags;
    let x0f = x0 as f32;
    if x0f < inner.lod {
        flags.insert(Flag::BelowLod);
    } else if x0f < inner.loq {
        flags.insert(Flag::BelowLoq);
    }
    flags.set_if(Flag::AboveRange, x0f > hi);

    let q = Quantified {
        concentration: (d * x0) as f32,
        low: (d * (x0 - half)) as f32,
        high: (d * (x0 + half)) as f32,
        standard_uncertainty: (d * s_x0) as f32,
        flags,
    };
    let finite = q.concentration.is_finite()
        && q.low.is_finite()
        && q.high.is_finite()
        && q.standard_uncertainty.is_finite();
    if finite {
        Ok(q)
    } else {
        Err(QuantifyError::NotFinite)
    }
}

/// Single-read absorbance sd at concentration x, interpolated linearly between the standards
/// bracketing x (pooled over standards of equal concentration), clamped at the ends.
fn interpolated_sd(standards: &[crate::calibration::Standard], x: f64) -> f64 {
    // Pooled variance of the standards at concentration c.
    let pooled = |c: f32| {
        let (sum, count) =
            standards
                .iter()
                .filter(|s| s.concentration == c)
                .fold((0.0f64, 0u32), |(a, k), s| {
                    let sd = f64::from(s.absorbance_sd);
                    (a + sd * sd, k + 1)
                });
        if count > 0 {
            sum / f64::from(count)
        } else {
            0.0
        }
    };
    let below = standards
        .iter()
        .map(|s| s.concentration)
        .filter(|&c| f64::from(c) <= x)
        .fold(None, |m: Option<f32>, c| Some(m.map_or(c, |m| m.max(c))));
    let above = standards
        .iter()
        .map(|s| s.concentration)
        .filter(|&c| f64::from(c) >= x)
        .fold(None, |m: Option<f32>, c| Some(m.map_or(c, |m| m.min(c))));
    let var = match (below, above) {
        (Some(a), Some(b)) if b > a => {
            let f = (x - f64::from(a)) / (f64::from(b) - f64::from(a));
            pooled(a) + f * (pooled(b) - pooled(a))
        }
        (Some(a), _) => pooled(a),
        (None, Some(b)) => pooled(b),
        (None, None) => 0.0,
    };
    math::sqrt(var.max(0.0))
}
