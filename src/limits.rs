//! Detection and quantification limits.
//!
//! * ICH Q2(R1) "Validation of Analytical Procedures: Text and Methodology" (2005), Part II
//!   §6.3 and §7.3, "based on the standard deviation of the response and the slope":
//!   LOD = 3.3·σ/S and LOQ = 10·σ/S, where S is the calibration slope and σ the standard
//!   deviation of the response (the residual standard deviation of the regression, or the
//!   standard deviation of blank responses).
//! * US EPA 40 CFR Part 136 Appendix B, "Definition and Procedure for the Determination of the
//!   Method Detection Limit – Revision 2" (2016): from n replicate spiked samples with standard
//!   deviation S_s, MDL_s = t(n-1, 0.99)·S_s; from method blanks, MDL_b = X̄_b + t(n-1, 0.99)·S_b
//!   (X̄_b taken as 0 if negative); the MDL is the larger of the two. Revision 2 asks for at least
//!   7 spiked samples and 7 blanks over at least three batches: [`method_detection_limit`]
//!   computes the formula for any n >= 2 and reports whether that minimum was met.
//!
//! These are functions of numbers; [`crate::calibration::Calibration`] applies the ICH formulas
//! to its own fit.

use core::fmt;

use crate::math;
use crate::student_t;

/// ICH Q2(R1) §6.3 factor of the detection limit, LOD = 3.3·σ/S.
pub const LOD_FACTOR: f64 = 3.3;
/// ICH Q2(R1) §7.3 factor of the quantification limit, LOQ = 10·σ/S.
pub const LOQ_FACTOR: f64 = 10.0;
/// Replicates US EPA 40 CFR 136 App. B Rev. 2 asks for (spiked samples, and blanks).
pub const EPA_MIN_REPLICATES: u32 = 7;

/// Why a limit cannot be computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LimitError {
    /// A value was NaN or infinite.
    NotFinite,
    /// The standard deviation was negative.
    NegativeSd,
    /// The slope (sensitivity) was zero or negative.
    NonPositiveSlope,
    /// Fewer than 2 replicates: no standard deviation exists.
    TooFewReplicates,
}

impl fmt::Display for LimitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LimitError::NotFinite => "a value is not a finite number",
            LimitError::NegativeSd => "standard deviation is negative",
            LimitError::NonPositiveSlope => "calibration slope must be greater than zero",
            LimitError::TooFewReplicates => "at least 2 replicates are needed",
        })
    }
}

impl core::error::Error for LimitError {}

/// LOD and LOQ of a calibration, in concentration units.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Limits {
    /// Limit of detection, 3.3·σ/S.
    pub lod: f64,
    /// Limit of quantification, 10·σ/S.
    pub loq: f64,
}

/// ICH Q2(R1) LOD = 3.3·σ/S and LOQ = 10·σ/S from the response standard deviation `sigma`
/// and the calibration slope `slope`.
///
/// ```
/// // Harvey (2000) example 5.10 line: s_y/x = 0.4033, b = 120.706 -> LOD ≈ 0.0110.
/// let l = lumisorb::limits::ich_limits(0.403297, 120.705714).unwrap();
/// assert!((l.lod - 0.011026).abs() < 1e-6 && (l.loq - 0.033412).abs() < 1e-6);
/// ```
pub fn ich_limits(sigma: f64, slope: f64) -> Result<Limits, LimitError> {
    if !sigma.is_finite() || !slope.is_finite() {
        return Err(LimitError::NotFinite);
    }
    if sigma < 0.0 {
        return Err(LimitError::NegativeSd);
    }
    if slope <= 0.0 {
        return Err(LimitError::NonPositiveSlope);
    }
    let lod = LOD_FACTOR * sigma / slope;
    let loq = LOQ_FACTOR * sigma / slope;
    if lod.is_finite() && loq.is_finite() {
        Ok(Limits { lod, loq })
    } else {
        Err(LimitError::NotFinite)
    }
}

/// Mean, standard deviation and count of a set of replicate results.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReplicateSummary {
    /// Mean.
    pub mean: f64,
    /// Sample standard deviation (n - 1 denominator).
    pub sd: f64,
    /// Number of replicates.
    pub n: u32,
}

impl ReplicateSummary {
    /// Summarises replicate results (two-pass mean and standard deviation); at least 2 values.
    pub fn from_values(values: &[f64]) -> Result<ReplicateSummary, LimitError> {
        let n = u32::try_from(values.len()).map_err(|_| LimitError::NotFinite)?;
        if n < 2 {
            return Err(LimitError::TooFewReplicates);
        }
        if values.iter().any(|v| !v.is_finite()) {
            return Err(LimitError::NotFinite);
        }
        let nf = f64::from(n);
        let mean = values.iter().sum::<f64>() / nf;
        let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
        let sd = math::sqrt(ss / (nf - 1.0));
        if mean.is_finite() && sd.is_finite() {
            Ok(ReplicateSummary { mean, sd, n })
        } else {
            Err(LimitError::NotFinite)
        }
    }

    fn check(&self) -> Result<(), LimitError> {
        if !self.mean.is_finite() || !self.sd.is_finite() {
            Err(LimitError::NotFinite)
        } else if self.sd < 0.0 {
            Err(LimitError::NegativeSd)
        } else if self.n < 2 {
            Err(LimitError::TooFewReplicates)
        } else {
            Ok(())
        }
    }
}

/// A method detection limit per US EPA 40 CFR 136 Appendix B Rev. 2.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MethodDetectionLimit {
    /// The reported MDL: the larger of `from_spikes` and `from_blanks`.
    pub mdl: f64,
    /// MDL_s = t(n-1, 0.99)·S_s from the spiked samples.
    pub from_spikes: f64,
    /// MDL_b = max(X̄_b, 0) + t(n-1, 0.99)·S_b from the blanks, if blanks were given.
    pub from_blanks: Option<f64>,
    /// Whether the replicate counts meet the procedure's minimum of 7 spiked samples (and
    /// 7 blanks, if given). The procedure's spread over batches cannot be checked here.
    pub meets_minimum_replicates: bool,
}

/// MDL_s = t(n-1, 0.99)·S_s for n replicate spiked samples with standard deviation `sd`.
///
/// ```
/// // 40 CFR 136 App. B Rev. 2: 7 replicates -> t = 3.143.
/// let mdl = lumisorb::limits::mdl_from_spikes(0.010, 7).unwrap();
/// assert!((mdl - 0.03143).abs() < 5e-6);
/// ```
pub fn mdl_from_spikes(sd: f64, n: u32) -> Result<f64, LimitError> {
    ReplicateSummary { mean: 0.0, sd, n }.check()?;
    let t = student_t::one_sided_99(n - 1).map_err(|_| LimitError::TooFewReplicates)?;
    Ok(t * sd)
}

/// MDL_b = max(X̄_b, 0) + t(n-1, 0.99)·S_b for n method blanks (all with numeric results).
pub fn mdl_from_blanks(blanks: ReplicateSummary) -> Result<f64, LimitError> {
    blanks.check()?;
    let t = student_t::one_sided_99(blanks.n - 1).map_err(|_| LimitError::TooFewReplicates)?;
    Ok(blanks.mean.max(0.0) + t * blanks.sd)
}

/// The MDL from spiked samples and, if available, method blanks: the larger of MDL_s and MDL_b.
pub fn method_detection_limit(
    spiked: ReplicateSummary,
    blanks: Option<ReplicateSummary>,
) -> Result<MethodDetectionLimit, LimitError> {
    let from_spikes = mdl_from_spikes(spiked.sd, spiked.n)?;
    let from_blanks = blanks.map(mdl_from_blanks).transpose()?;
    let mdl = from_blanks.map_or(from_spikes, |b| b.max(from_spikes));
    let meets_minimum_replicates =
        spiked.n >= EPA_MIN_REPLICATES && blanks.is_none_or(|b| b.n >= EPA_MIN_REPLICATES);
    Ok(MethodDetectionLimit {
        mdl,
        from_spikes,
        from_blanks,
        meets_minimum_replicates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ich_factors_and_errors() {
        let l = ich_limits(1.0, 2.0).unwrap();
        assert!((l.lod - 1.65).abs() < 1e-12 && (l.loq - 5.0).abs() < 1e-12);
        assert_eq!(ich_limits(1.0, 0.0), Err(LimitError::NonPositiveSlope));
        assert_eq!(ich_limits(-1.0, 1.0), Err(LimitError::NegativeSd));
        assert_eq!(ich_limits(f64::NAN, 1.0), Err(LimitError::NotFinite));
        assert_eq!(ich_limits(1e300, 1e-300), Err(LimitError::NotFinite));
    }

    #[test]
    fn mdl_epa() {
        // US EPA 40 CFR 136 App. B Rev. 2 table (as reproduced in Wis. Admin. Code NR 252.0365):
        // replicates 7 -> 3.143, 8 -> 2.998, 10 -> 2.821, 16 -> 2.602.
        for (n, t) in [(7u32, 3.143), (8, 2.998), (10, 2.821), (16, 2.602)] {
            assert!((mdl_from_spikes(1.0, n).unwrap() - t).abs() < 5e-4);
        }
        assert_eq!(mdl_from_spikes(1.0, 1), Err(LimitError::TooFewReplicates));
        let spiked =
            ReplicateSummary::from_values(&[1.1, 0.9, 1.0, 1.05, 0.95, 1.02, 0.98]).unwrap();
        let blanks = ReplicateSummary {
            mean: -0.01,
            sd: 0.2,
            n: 7,
        };
        let m = method_detection_limit(spiked, Some(blanks)).unwrap();
        assert!((m.from_blanks.unwrap() - 3.142668 * 0.2).abs() < 1e-5);
        assert_eq!(m.mdl, m.from_blanks.unwrap());
        assert!(m.meets_minimum_replicates);
        let m = method_detection_limit(ReplicateSummary { n: 3, ..spiked }, None).unwrap();
        assert!(!m.meets_minimum_replicates);
        assert_eq!(m.mdl, m.from_spikes);
    }
}
