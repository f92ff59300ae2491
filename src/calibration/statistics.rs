//! Statistics of a fitted calibration: summary figures, residuals, studentized residuals and
//! the suspicious-standard flag.
//!
//! For standard i with normalised weight wᵢ, residual eᵢ = yᵢ - ŷᵢ and leverage
//! hᵢ = wᵢ·φᵢᵀ(XᵀWX)⁻¹φᵢ, the (internally) studentized residual is
//! rᵢ = √wᵢ·eᵢ / (s·√(1 - hᵢ)), and the externally studentized (deleted) residual is
//! tᵢ = rᵢ·√((ν-1)/(ν-rᵢ²)) with ν = n - p. A standard is flagged suspicious when |tᵢ| exceeds
//! the Bonferroni-corrected two-sided 5 % critical value t(ν-1, 1 - 0.025/n) (the usual outlier
//! test on deleted residuals; common practice, e.g. in regression-diagnostics texts). The flag
//! asks for a look at the standard (re-read, re-prepare), not for its silent removal.

use super::fit::Fit;
use super::lack_of_fit::read_weight;
use super::{Standard, Weighting};
use crate::math;
use crate::student_t;

/// Overall significance level of the suspicious-standard test (Bonferroni over all standards).
pub const OUTLIER_ALPHA: f64 = 0.05;

/// Summary statistics of a fitted calibration.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Statistics {
    /// Number of standards fitted.
    pub points: u32,
    /// Residual degrees of freedom n - p.
    pub degrees_of_freedom: u32,
    /// Coefficients [c0, c1, c2] of A = c0 + c1·c + c2·c².
    pub coefficients: [f64; 3],
    /// Standard errors of the coefficients (0 for unused ones).
    pub standard_errors: [f64; 3],
    /// Coefficient of determination (uncentred for the through-origin model).
    pub r_squared: f64,
    /// Residual standard deviation s_y/x (weighted fits: of unit-weight residuals).
    pub residual_sd: f64,
}

/// One standard's residual.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Residual {
    /// Index of the standard in the calibration set.
    pub index: usize,
    /// Its concentration.
    pub concentration: f32,
    /// Its measured absorbance.
    pub absorbance: f32,
    /// The fitted absorbance at its concentration.
    pub fitted: f64,
    /// Measured minus fitted absorbance.
    pub residual: f64,
    /// Leverage hᵢ (0..1).
    pub leverage: f64,
    /// Internally studentized residual (0 when undefined: s = 0 or hᵢ = 1).
    pub studentized: f64,
    /// Whether the standard fails the Bonferroni outlier test on its deleted residual.
    pub suspicious: bool,
}

/// The critical |t| of the suspicious-standard test for n points and ν residual degrees of
/// freedom; `None` if ν < 2 (no deleted residual exists).
pub(crate) fn outlier_threshold(n: u32, dof: u32) -> Option<f64> {
    if dof < 2 || n == 0 {
        return None;
    }
    let p = 1.0 - OUTLIER_ALPHA / (2.0 * f64::from(n));
    student_t::quantile(dof - 1, p).ok()
}

/// Iterator over the residuals of a calibration (see [`super::Calibration::residuals`]).
#[derive(Clone, Debug)]
pub struct Residuals<'a> {
    pub(crate) standards: &'a [Standard],
    pub(crate) weighting: Weighting,
    pub(crate) fit: &'a Fit,
    pub(crate) threshold: Option<f64>,
    pub(crate) next: usize,
}

impl Iterator for Residuals<'_> {
    type Item = Residual;

    fn next(&mut self) -> Option<Residual> {
        let index = self.next;
        let s = self.standards.get(index)?;
        self.next += 1;
        Some(residual_of(
            index,
            s,
            self.weighting,
            self.fit,
            self.threshold,
        ))
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        let left = self.standards.len().saturating_sub(self.next);
        (left, Some(left))
    }
}

impl ExactSizeIterator for Residuals<'_> {}

/// Entry weight of a standard in the fit (per-read weight times reads for inverse variance).
pub(crate) fn fit_weight(s: &Standard, weighting: Weighting) -> f64 {
    match weighting {
        Weighting::InverseVariance => f64::from(s.replicates) * read_weight(s, weighting),
        _ => read_weight(s, weighting),
    }
}

fn residual_of(
    index: usize,
    s: &Standard,
    weighting: Weighting,
    fit: &Fit,
    threshold: Option<f64>,
) -> Residual {
    let x = f64::from(s.concentration);
    let y = f64::from(s.absorbance.value());
    let fitted = fit.predict(x);
    let residual = y - fitted;
    let w = fit_weight(s, weighting) * fit.weight_norm();
    let leverage = (w * fit.unscaled_leverage(x)).clamp(0.0, 1.0);
    let sd = fit.residual_sd();
    let spread = sd * math::sqrt(1.0 - leverage);
    let studentized = if spread > 0.0 && spread.is_finite() {
        math::sqrt(w) * residual / spread
    } else {
        0.0
    };
    let nu = f64::from(fit.degrees_of_freedom());
    let suspicious = match threshold {
        Some(limit) if spread > 0.0 => {
            let r2 = studentized * studentized;
            if r2 >= nu {
                true
            } else {
                let t = studentized.abs() * math::sqrt((nu - 1.0) / (nu - r2));
                t > limit
            }
        }
        _ => false,
    };
    Residual {
        index,
        concentration: s.concentration,
        absorbance: s.absorbance.value(),
        fitted,
        residual,
        leverage,
        studentized: if studentized.is_finite() {
            studentized
        } else {
            0.0
        },
        suspicious,
    }
}
