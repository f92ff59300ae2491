//! The fitted calibration curve: standards + model + weighting -> a validated [`Calibration`].

use core::fmt;

use super::fit::{Fit, FitError, Point, PointSource};
use super::lack_of_fit::{self, LackOfFit};
use super::statistics::{self, fit_weight, Residuals, Statistics};
use super::{CalibrationSet, Model, Standard, StandardError, Weighting};
use crate::limits::{self, LimitError};
use crate::math;
use crate::student_t;

/// Where the σ of the ICH LOD/LOQ formulas comes from.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SigmaSource {
    /// The residual standard deviation s_y/x of the fit (for weighted fits, the absorbance
    /// standard deviation the fit implies at the lowest standard).
    #[default]
    ResidualSd,
    /// The standard deviation of replicate blank absorbances (ICH Q2(R1) §6.3.2 "based on the
    /// standard deviation of the blank"), from `replicates` >= 2 reads.
    Blank {
        /// Standard deviation of the blank absorbance reads, > 0.
        sd: f32,
        /// Number of blank reads, >= 2.
        replicates: u16,
    },
}

/// Why a calibration could not be fitted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CalibrationError {
    /// Fewer standards than the model needs (coefficients + 1).
    TooFewPoints {
        /// Standards the model needs.
        needed: usize,
        /// Standards given.
        got: usize,
    },
    /// Every standard has the same concentration.
    ConcentrationsEqual,
    /// Fewer distinct concentrations than the model has coefficients.
    TooFewConcentrations {
        /// Distinct concentrations the model needs.
        needed: usize,
        /// Distinct concentrations given.
        got: usize,
    },
    /// A value was NaN or infinite, or the fit overflowed.
    NotFinite,
    /// A standard has a negative concentration.
    NegativeConcentration,
    /// A standard is invalid in another way (negative sd, zero replicates).
    InvalidStandard(StandardError),
    /// The fitted slope is zero or negative: absorbance does not rise with concentration.
    NonPositiveSlope,
    /// The quadratic turns over inside the calibrated range (not monotonic): it cannot be
    /// inverted uniquely.
    NotMonotonic,
    /// Inverse-variance weighting needs every standard's absorbance sd > 0.
    MissingUncertainty,
    /// 1/c² weighting needs every concentration > 0 (no zero standard).
    ZeroConcentration,
    /// The blank σ for the limits is not finite, not > 0, or from fewer than 2 reads.
    InvalidBlankSigma,
}

impl fmt::Display for CalibrationError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CalibrationError::TooFewPoints { needed, got } => {
                write!(f, "model needs at least {needed} standards, got {got}")
            }
            CalibrationError::ConcentrationsEqual => {
                f.write_str("all standards have the same concentration")
            }
            CalibrationError::TooFewConcentrations { needed, got } => write!(
                f,
                "model needs at least {needed} different concentrations, got {got}"
            ),
            CalibrationError::NotFinite => f.write_str("a value is not a finite number"),
            CalibrationError::NegativeConcentration => {
                f.write_str("a standard has a negative concentration")
            }
            CalibrationError::InvalidStandard(e) => write!(f, "invalid standard: {e}"),
            CalibrationError::NonPositiveSlope => {
                f.write_str("absorbance does not rise with concentration (slope <= 0)")
            }
            CalibrationError::NotMonotonic => {
                f.write_str("quadratic curve turns over inside the calibrated range")
            }
            CalibrationError::MissingUncertainty => f.write_str(
                "inverse-variance weighting needs an absorbance sd > 0 on every standard",
            ),
            CalibrationError::ZeroConcentration => {
                f.write_str("1/c^2 weighting needs every concentration > 0")
            }
            CalibrationError::InvalidBlankSigma => {
                f.write_str("blank sd must be finite and > 0, from at least 2 reads")
            }
        }
    }
}

impl core::error::Error for CalibrationError {}

impl From<FitError> for CalibrationError {
    fn from(e: FitError) -> Self {
        match e {
            FitError::TooFewPoints { needed, got } => {
                CalibrationError::TooFewPoints { needed, got }
            }
            FitError::Degenerate => CalibrationError::ConcentrationsEqual,
            FitError::LengthMismatch | FitError::NotFinite | FitError::InvalidWeight => {
                CalibrationError::NotFinite
            }
        }
    }
}

/// The standards seen by the fit engine.
struct StandardsSource<'a> {
    standards: &'a [Standard],
    weighting: Weighting,
}

impl PointSource for StandardsSource<'_> {
    fn count(&self) -> usize {
        self.standards.len()
    }
    #[inline(never)] // the fit reads the points in three passes: one copy
    fn point(&self, index: usize) -> Option<Point> {
        let s = self.standards.get(index)?;
        Some(Point {
            x: f64::from(s.concentration),
            y: f64::from(s.absorbance.value()),
            weight: fit_weight(s, self.weighting),
        })
    }
}

/// The part of a calibration that does not depend on the capacity `N` (keeps code non-generic).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Fitted {
    pub(crate) fit: Fit,
    pub(crate) weighting: Weighting,
    pub(crate) sigma_source: SigmaSource,
    /// t(ν, 0.975) for the confidence intervals.
    pub(crate) t95: f64,
    pub(crate) lod: f32,
    pub(crate) loq: f32,
    pub(crate) range: (f32, f32),
    /// Mean number of reads per standard (scales the sample's read variance).
    pub(crate) mean_replicates: f32,
}

/// A fitted calibration curve with its statistics and limits.
///
/// The only way to get one is [`Calibration::fit`] (or [`Calibration::fit_with_sigma`]) from a
/// [`CalibrationSet`], a [`Model`] and a [`Weighting`]: every calibration in existence has passed
/// the same validation, and refitting the same inputs gives the same bits (the fit is
/// deterministic), so a stored calibration is persisted as its inputs and refitted on load.
#[derive(Clone, Debug, PartialEq)]
pub struct Calibration<const N: usize = 16> {
    set: CalibrationSet<N>,
    inner: Fitted,
}

impl<const N: usize> Calibration<N> {
    /// Fits `model` to the standards of `set` with `weighting`; limits from s_y/x.
    pub fn fit(
        set: &CalibrationSet<N>,
        model: Model,
        weighting: Weighting,
    ) -> Result<Calibration<N>, CalibrationError> {
        Calibration::fit_with_sigma(set, model, weighting, SigmaSource::ResidualSd)
    }

    /// As [`Calibration::fit`], with the σ of the LOD/LOQ taken from `sigma`.
    pub fn fit_with_sigma(
        set: &CalibrationSet<N>,
        model: Model,
        weighting: Weighting,
        sigma: SigmaSource,
    ) -> Result<Calibration<N>, CalibrationError> {
        let inner = fit_standards(set.standards(), model, weighting, sigma)?;
        Ok(Calibration {
            set: set.clone(),
            inner,
        })
    }

    /// The model fitted.
    pub fn model(&self) -> Model {
        self.inner.fit.model()
    }

    /// The weighting used.
    pub fn weighting(&self) -> Weighting {
        self.inner.weighting
    }

    /// Where the σ of the limits came from.
    pub fn sigma_source(&self) -> SigmaSource {
        self.inner.sigma_source
    }

    /// Coefficients [c0, c1, c2] of A = c0 + c1·c + c2·c² (unused ones are 0).
    pub fn coefficients(&self) -> [f64; 3] {
        self.inner.fit.coefficients()
    }

    /// Standard errors of the coefficients.
    pub fn standard_errors(&self) -> [f64; 3] {
        self.inner.fit.standard_errors()
    }

    /// Coefficient of determination R² (uncentred for the origin model).
    pub fn r_squared(&self) -> f64 {
        self.inner.fit.r_squared()
    }

    /// Residual standard deviation s_y/x.
    pub fn residual_sd(&self) -> f64 {
        self.inner.fit.residual_sd()
    }

    /// All summary statistics at once.
    pub fn statistics(&self) -> Statistics {
        let f = &self.inner.fit;
        Statistics {
            points: f.points(),
            degrees_of_freedom: f.degrees_of_freedom(),
            coefficients: f.coefficients(),
            standard_errors: f.standard_errors(),
            r_squared: f.r_squared(),
            residual_sd: f.residual_sd(),
        }
    }

    /// The least-squares fit inside.
    pub fn least_squares(&self) -> &Fit {
        &self.inner.fit
    }

    /// Limit of detection 3.3·σ/S (ICH Q2(R1) §6.3), in concentration units; S is the slope at
    /// the lowest standard.
    pub fn lod(&self) -> f32 {
        self.inner.lod
    }

    /// Limit of quantification 10·σ/S (ICH Q2(R1) §7.3), in concentration units.
    pub fn loq(&self) -> f32 {
        self.inner.loq
    }

    /// The calibrated range (lowest, highest standard concentration).
    pub fn range(&self) -> (f32, f32) {
        self.inner.range
    }

    /// t(ν, 0.975) used for the 95 % intervals (ν = n - p).
    pub fn t_factor(&self) -> f64 {
        self.inner.t95
    }

    /// The standards the calibration was fitted to.
    pub fn points(&self) -> &[Standard] {
        self.set.standards()
    }

    /// The calibration set (e.g. to persist it, or to edit a copy and refit).
    pub fn set(&self) -> &CalibrationSet<N> {
        &self.set
    }

    /// The lack-of-fit verdict (needs replicated standards).
    pub fn lack_of_fit(&self) -> LackOfFit {
        // Computed on demand from the standards and the fit (deterministic, so the same every
        // call): a device that never asks for it links no lack-of-fit code.
        lack_of_fit::lack_of_fit(self.set.standards(), self.inner.weighting, &self.inner.fit)
    }

    /// Residuals, studentized residuals and suspicious-standard flags, in set order.
    pub fn residuals(&self) -> Residuals<'_> {
        Residuals {
            standards: self.set.standards(),
            weighting: self.inner.weighting,
            fit: &self.inner.fit,
            // Critical |t| of the suspicious-standard test (None if ν < 2), on demand.
            threshold: statistics::outlier_threshold(
                self.inner.fit.points(),
                self.inner.fit.degrees_of_freedom(),
            ),
            next: 0,
        }
    }

    /// Index of the most suspicious standard, if any fails the outlier test.
    pub fn suspicious_standard(&self) -> Option<usize> {
        self.residuals()
            .filter(|r| r.suspicious)
            .max_by(|a, b| a.studentized.abs().total_cmp(&b.studentized.abs()))
            .map(|r| r.index)
    }

    /// The fitted absorbance at concentration `c`.
    pub fn absorbance_at(&self, concentration: f64) -> f64 {
        self.inner.fit.predict(concentration)
    }

    pub(crate) fn fitted(&self) -> &Fitted {
        &self.inner
    }
}

/// Validates the standards for `model` and `weighting`; returns (lowest, highest) concentration.
fn validate(
    standards: &[Standard],
    model: Model,
    weighting: Weighting,
) -> Result<(f32, f32), CalibrationError> {
    let p = model.parameters();
    for s in standards {
        s.validate().map_err(|e| match e {
            StandardError::NotFinite => CalibrationError::NotFinite,
            StandardError::NegativeConcentration => CalibrationError::NegativeConcentration,
            other => CalibrationError::InvalidStandard(other),
        })?;
        if weighting == Weighting::InverseVariance && s.absorbance_sd <= 0.0 {
            return Err(CalibrationError::MissingUncertainty);
        }
        if weighting == Weighting::InverseConcentrationSquared && s.concentration <= 0.0 {
            return Err(CalibrationError::ZeroConcentration);
        }
    }
    if standards.len() < p + 1 {
        return Err(CalibrationError::TooFewPoints {
            needed: p + 1,
            got: standards.len(),
        });
    }
    let distinct = standards
        .iter()
        .enumerate()
        .filter(|(i, s)| {
            standards
                .iter()
                .position(|o| o.concentration == s.concentration)
                == Some(*i)
        })
        .count();
    if distinct < 2 {
        return Err(CalibrationError::ConcentrationsEqual);
    }
    if distinct < p {
        return Err(CalibrationError::TooFewConcentrations {
            needed: p,
            got: distinct,
        });
    }
    let lo = standards
        .iter()
        .map(|s| s.concentration)
        .fold(f32::INFINITY, f32::min);
    let hi = standards
        .iter()
        .map(|s| s.concentration)
        .fold(f32::NEG_INFINITY, f32::max);
    Ok((lo, hi))
}

/// The non-generic fitting path behind [`Calibration::fit_with_sigma`].
pub(crate) fn fit_standards(
    standards: &[Standard],
    model: Model,
    weighting: Weighting,
    sigma_source: SigmaSource,
) -> Result<Fitted, CalibrationError> {
    let (lo, hi) = validate(standards, model, weighting)?;
    let fit = Fit::from_source(
        &StandardsSource {
            standards,
            weighting,
        },
        model,
    )?;
    let (lo64, hi64) = (f64::from(lo), f64::from(hi));
    let (s_lo, s_hi) = (fit.slope_at(lo64), fit.slope_at(hi64));
    if !(s_lo.is_finite() && s_hi.is_finite()) {
        return Err(CalibrationError::NotFinite);
    }
    if s_lo <= 0.0 && s_hi <= 0.0 {
        return Err(CalibrationError::NonPositiveSlope);
    }
    if s_lo <= 0.0 || s_hi <= 0.0 {
        return Err(CalibrationError::NotMonotonic);
    }

    let dof = fit.degrees_of_freedom();
    let t95 = student_t::two_sided_95(dof).map_err(|_| CalibrationError::TooFewPoints {
        needed: model.parameters() + 1,
        got: standards.len(),
    })?;
    let n = fit.points();

    // σ for the limits.
    let sigma = match sigma_source {
        SigmaSource::ResidualSd => {
            // Absorbance sd implied at the lowest standard: s / √(normalised weight there).
            let w_lo = standards
                .iter()
                .filter(|s| s.concentration == lo)
                .map(|s| fit_weight(s, weighting))
                .fold(0.0f64, f64::max)
                * fit.weight_norm();
            if w_lo > 0.0 {
                fit.residual_sd() / math::sqrt(w_lo)
            } else {
                fit.residual_sd()
            }
        }
        SigmaSource::Blank { sd, replicates } => {
            if !(sd.is_finite() && sd > 0.0) || replicates < 2 {
                return Err(CalibrationError::InvalidBlankSigma);
            }
            f64::from(sd)
        }
    };
    let limits = limits::ich_limits(sigma, s_lo).map_err(|e| match e {
        LimitError::NonPositiveSlope => CalibrationError::NonPositiveSlope,
        _ => CalibrationError::NotFinite,
    })?;
    let lod = limits.lod as f32;
    let loq = limits.loq as f32;
    if !(lod.is_finite() && loq.is_finite()) {
        return Err(CalibrationError::NotFinite);
    }
    let reads: u32 = standards.iter().map(|s| u32::from(s.replicates)).sum();
    let mean_replicates = reads as f32 / n.max(1) as f32;

    Ok(Fitted {
        fit,
        weighting,
        sigma_source,
        t95,
        lod,
        loq,
        range: (lo, hi),
        mean_replicates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::photometry::Absorbance;

    #[test]
    fn sixteen_point_calibration_fits_in_512_bytes() {
        // Budget from the calibration issue: standards + fitted model + statistics <= 512 bytes.
        let size = core::mem::size_of::<Calibration<16>>();
        std::println!("size_of::<Calibration<16>>() = {size} bytes");
        assert!(size <= 512, "{size} bytes");
    }

    #[test]
    fn refit_is_bit_identical() {
        let mut set = CalibrationSet::<16>::new();
        for (i, y) in [0.003f32, 0.101, 0.198, 0.305, 0.399, 0.502]
            .iter()
            .enumerate()
        {
            let s = Standard::new(i as f32, Absorbance::new(*y).unwrap()).unwrap();
            set.push(s).unwrap();
        }
        for model in Model::ALL {
            let a = Calibration::fit(&set, model, Weighting::None).unwrap();
            let b = Calibration::fit(&set.clone(), model, Weighting::None).unwrap();
            assert_eq!(a, b);
            let bits = |c: &Calibration| c.coefficients().map(f64::to_bits);
            assert_eq!(bits(&a), bits(&b));
        }
    }
}
