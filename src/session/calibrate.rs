//! Calibration of one channel from its standards and quantification of its unknowns, as the
//! replay needs them (a thin layer over [`crate::calibration::Fit`]).
//!
//! * The curve is fitted unweighted to (concentration, absorbance) of every usable standard.
//! * LOD = 3.3·s_y/x / S and LOQ = 10·s_y/x / S, S the slope at zero concentration (ICH Q2(R1),
//!   Part II §6.3 and §7.3).
//! * The concentration of an unknown is the inverse of the curve at its absorbance y0; its 95 %
//!   interval is ± t(n - p, 0.975)·s_x0 with, to first order,
//!   s_x0² = (s_y/x²/m + Var(ŷ(x0))) / S(x0)², m = 1 reading of the unknown. For the straight
//!   line this is the standard inverse-prediction formula
//!   s_x0 = (s_y/x / b)·sqrt(1/m + 1/n + (y0 - ȳ)² / (b²·Σ(xi - x̄)²)) (e.g. Harvey, *Modern
//!   Analytical Chemistry* (2000), eq. 5.25 [mem]).

use crate::calibration::{CalibrationSet, Fit, FitError, Model};
use crate::flags::{Flag, Flags};
use crate::student_t;

/// Why a channel has no calibration curve.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CalibrationError {
    /// No usable standard was measured on the channel.
    NoStandards,
    /// The least-squares fit failed (too few standards for the model, all concentrations equal, ...).
    Fit(FitError),
    /// The curve does not rise with concentration at zero (a calibration needs sensitivity > 0).
    NonPositiveSlope,
}

impl core::fmt::Display for CalibrationError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            CalibrationError::NoStandards => f.write_str("no usable standards"),
            CalibrationError::Fit(e) => write!(f, "fit failed: {e}"),
            CalibrationError::NonPositiveSlope => {
                f.write_str("curve does not rise with concentration")
            }
        }
    }
}

/// A fitted calibration curve of one channel with the statistics the replay reports.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChannelCalibration {
    /// The least-squares fit (curve, coefficient covariance, residual statistics).
    pub fit: Fit,
    /// LOD (concentration units).
    pub lod: f64,
    /// LOQ (concentration units).
    pub loq: f64,
    /// Lowest and highest standard concentration.
    pub range: [f64; 2],
    /// t(n - p, 0.975).
    pub t95: f64,
}

impl ChannelCalibration {
    /// The model fitted.
    pub fn model(&self) -> Model {
        self.fit.model()
    }

    /// Coefficients [c0, c1, c2] of A = c0 + c1·x + c2·x².
    pub fn coefficients(&self) -> [f64; 3] {
        self.fit.coefficients()
    }

    /// R².
    pub fn r_squared(&self) -> f64 {
        self.fit.r_squared()
    }

    /// Residual standard deviation s_y/x (absorbance).
    pub fn residual_sd(&self) -> f64 {
        self.fit.residual_sd()
    }

    /// Number of standards fitted.
    pub fn points(&self) -> u32 {
        self.fit.points()
    }

    /// Half-width of the 95 % confidence band of the fitted curve at `x` (absorbance).
    pub fn band_half_width(&self, x: f64) -> f64 {
        self.t95 * crate::math::sqrt(self.fit.fitted_variance(x))
    }

    /// Inverse of the curve: the concentration whose fitted absorbance is `y`, on the rising
    /// branch; `None` where the curve does not reach `y` (a quadratic beyond its vertex).
    pub fn inverse(&self, y: f64) -> Option<f64> {
        let [c0, c1, c2] = self.fit.coefficients();
        let d = y - c0;
        let x = if c2 == 0.0 {
            if c1 > 0.0 {
                d / c1
            } else {
                return None;
            }
        } else {
            let disc = c1 * c1 + 4.0 * c2 * d;
            if disc.is_nan() || disc < 0.0 {
                return None;
            }
            let root = crate::math::sqrt(disc);
            // Rising-branch root of c2 x² + c1 x - d = 0, in the cancellation-free form.
            if c1 > 0.0 {
                2.0 * d / (c1 + root)
            } else {
                (root - c1) / (2.0 * c2)
            }
        };
        let ok = x.is_finite() && self.fit.slope_at(x) > 0.0;
        ok.then_some(x)
    }

    /// Concentration of an unknown of absorbance `y0` read once, its 95 % interval and flags
    /// (`above_range`, `below_lod`, `below_loq`). Above the highest standard the extrapolated
    /// concentration is given without an interval.
    pub fn quantify(&self, y0: f64) -> (Option<f64>, Option<[f64; 2]>, Flags) {
        let mut flags = Flags::NONE;
        let Some(x0) = self.inverse(y0) else {
            // Beyond the vertex of a quadratic: above anything the curve can give.
            flags.insert(Flag::AboveRange);
            return (None, None, flags);
        };
        flags.set_if(Flag::AboveRange, x0 > self.range[1]);
        if x0 < self.lod {
            flags.insert(Flag::BelowLod);
        } else if x0 < self.loq {
            flags.insert(Flag::BelowLoq);
        }
        if flags.contains(Flag::AboveRange) {
            // Extrapolated: the curve is not known there, so no honest 95 % interval exists.
            return (Some(x0), None, flags);
        }
        let slope = self.fit.slope_at(x0);
        let var = (self.fit.residual_variance() + self.fit.fitted_variance(x0)) / (slope * slope);
        let half = self.t95 * crate::math::sqrt(var);
        let interval = half.is_finite().then_some([x0 - half, x0 + half]);
        (Some(x0), interval, flags)
    }
}

/// Fits `model` to the standards of one channel.
pub(crate) fn calibrate<const S: usize>(
    set: &CalibrationSet<S>,
    model: Model,
) -> Result<ChannelCalibration, CalibrationError> {
    let standards = set.standards();
    if standards.is_empty() {
        return Err(CalibrationError::NoStandards);
    }
    let mut x = [0.0f64; S];
    let mut y = [0.0f64; S];
    for ((xi, yi), s) in x.iter_mut().zip(y.iter_mut()).zip(standards) {
        *xi = f64::from(s.concentration);
        *yi = f64::from(s.absorbance.value());
    }
    let n = standards.len();
    let (x, y) = (x.get(..n).unwrap_or(&[]), y.get(..n).unwrap_or(&[]));
    let fit = Fit::from_slices(x, y, None, model).map_err(CalibrationError::Fit)?;
    let slope = fit.slope_at(0.0);
    if slope.is_nan() || slope <= 0.0 {
        return Err(CalibrationError::NonPositiveSlope);
    }
    let s = fit.residual_sd();
    let t95 = student_t::two_sided_95(fit.degrees_of_freedom()).map_err(|_| {
        CalibrationError::Fit(FitError::TooFewPoints {
            needed: model.parameters() + 1,
            got: n,
        })
    })?;
    let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Ok(ChannelCalibration {
        fit,
        lod: 3.3 * s / slope,
        loq: 10.0 * s / slope,
        range: [lo, hi],
        t95,
    })
}
