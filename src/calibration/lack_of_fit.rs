//! Lack-of-fit F test: pure error from replicated standards against the scatter of the level
//! means about the curve.
//!
//! Standards are grouped by equal concentration. With per-read weights uᵢ (1, 1/sdᵢ² or 1/cᵢ²
//! for the three weightings) and rᵢ reads averaged into standard i:
//!
//! * pure error SS_pe = Σᵢ uᵢ(rᵢ-1)sdᵢ² + Σ_g Σ_{i∈g} rᵢuᵢ(ȳᵢ - ȳ_g)², with
//!   df_pe = Σᵢ(rᵢ-1) (standards with a known sd) + Σ_g (k_g - 1) (k_g standards in group g);
//! * lack of fit SS_lof = Σ_g W_g (ȳ_g - ŷ(c_g))², W_g = Σ_{i∈g} rᵢuᵢ, df_lof = G - p;
//! * F = (SS_lof/df_lof) / (SS_pe/df_pe), p = P(F(df_lof, df_pe) > F).
//!
//! This is the textbook ANOVA decomposition of regression (pure error vs lack of fit) when each
//! read is one observation; with unequal replicate counts under an unweighted fit it is an
//! approximation. The model is judged inadequate when p < 0.05 (common practice), and the next
//! more flexible model is suggested (the quadratic for a straight line).

use super::fit::Fit;
use super::{Model, Standard, Weighting};
use crate::incomplete_beta;

/// Significance level of the lack-of-fit test (common practice: 5 %).
pub const LACK_OF_FIT_ALPHA: f64 = 0.05;

/// The figures of a lack-of-fit F test.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LackOfFitTest {
    /// F = MS_lack-of-fit / MS_pure-error.
    pub f: f64,
    /// P(F(df_lof, df_pe) > f): small values mean the curve misses the level means by more than
    /// the replicate scatter explains.
    pub p_value: f64,
    /// Degrees of freedom of lack of fit (distinct concentrations minus coefficients).
    pub df_lack_of_fit: u16,
    /// Degrees of freedom of pure error (from replicates).
    pub df_pure_error: u16,
}

/// Verdict of the lack-of-fit test on a fitted calibration.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LackOfFit {
    /// No test possible: no replicates (no pure error), no spare concentration levels, or a
    /// replicate scatter of exactly zero.
    NotTestable,
    /// The model fits within the replicate scatter (p >= 0.05).
    Adequate(LackOfFitTest),
    /// The model misses the level means (p < 0.05).
    Inadequate {
        /// The test figures.
        test: LackOfFitTest,
        /// The model to try instead (`None` for the quadratic).
        suggestion: Option<Model>,
    },
}

impl LackOfFit {
    /// The test figures, if a test was possible.
    pub const fn test(&self) -> Option<LackOfFitTest> {
        match self {
            LackOfFit::NotTestable => None,
            LackOfFit::Adequate(t) | LackOfFit::Inadequate { test: t, .. } => Some(*t),
        }
    }

    /// Whether the test rejected the model.
    pub const fn is_inadequate(&self) -> bool {
        matches!(self, LackOfFit::Inadequate { .. })
    }
}

/// Per-read weight of a standard under `weighting` (the caller has validated sd > 0 and c > 0
/// where the weighting needs them).
pub(crate) fn read_weight(s: &Standard, weighting: Weighting) -> f64 {
    match weighting {
        Weighting::None => 1.0,
        Weighting::InverseVariance => {
            let sd = f64::from(s.absorbance_sd);
            1.0 / (sd * sd)
        }
        Weighting::InverseConcentrationSquared => {
            let c = f64::from(s.concentration);
            1.0 / (c * c)
        }
    }
}

/// Upper tail P(F > f) of the F distribution with (d1, d2) degrees of freedom.
pub(crate) fn f_upper_tail(f: f64, d1: f64, d2: f64) -> f64 {
    if f.is_nan() || f <= 0.0 {
        return 1.0;
    }
    if f.is_infinite() {
        return 0.0;
    }
    let denom = d2 + d1 * f;
    incomplete_beta::regularized(0.5 * d2, 0.5 * d1, d2 / denom, d1 * f / denom)
}

/// Runs the test for `fit` over `standards`.
pub(crate) fn lack_of_fit(standards: &[Standard], weighting: Weighting, fit: &Fit) -> LackOfFit {
    let model = fit.model();
    let mut ss_pe = 0.0f64;
    let mut ss_lof = 0.0f64;
    let mut df_pe: u32 = 0;
    let mut groups: u32 = 0;
    for (i, s) in standards.iter().enumerate() {
        let u = read_weight(s, weighting);
        let reps = u32::from(s.replicates);
        if s.absorbance_sd > 0.0 && reps > 1 {
            let sd = f64::from(s.absorbance_sd);
            ss_pe += u * f64::from(reps - 1) * sd * sd;
            df_pe += reps - 1;
        }
        // Group leader: the first standard of each concentration.
        let first = standards
            .iter()
            .position(|o| o.concentration == s.concentration);
        if first != Some(i) {
            continue;
        }
        groups += 1;
        let members = || {
            standards
                .iter()
                .filter(|o| o.concentration == s.concentration)
        };
        let (mut w_g, mut wy_g, mut k_g) = (0.0f64, 0.0f64, 0u32);
        for o in members() {
            let w = f64::from(o.replicates) * read_weight(o, weighting);
            w_g += w;
            wy_g += w * f64::from(o.absorbance.value());
            k_g += 1;
        }
        let mean_g = wy_g / w_g;
        for o in members() {
            let w = f64::from(o.replicates) * read_weight(o, weighting);
            let d = f64::from(o.absorbance.value()) - mean_g;
            ss_pe += w * d * d;
        }
        df_pe += k_g - 1;
        let e = mean_g - fit.predict(f64::from(s.concentration));
        ss_lof += w_g * e * e;
    }
    let p = model.parameters() as u32;
    let df_lof = groups.saturating_sub(p);
    if df_lof == 0 || df_pe == 0 || !(ss_pe.is_finite() && ss_lof.is_finite()) || ss_pe <= 0.0 {
        return LackOfFit::NotTestable;
    }
    let (d1, d2) = (f64::from(df_lof), f64::from(df_pe));
    let f = (ss_lof / d1) / (ss_pe / d2);
    let p_value = f_upper_tail(f, d1, d2);
    let test = LackOfFitTest {
        f,
        p_value,
        df_lack_of_fit: u16::try_from(df_lof).unwrap_or(u16::MAX),
        df_pure_error: u16::try_from(df_pe).unwrap_or(u16::MAX),
    };
    if p_value < LACK_OF_FIT_ALPHA {
        LackOfFit::Inadequate {
            test,
            suggestion: model.next(),
        }
    } else {
        LackOfFit::Adequate(test)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn f_tail_closed_form() {
        // Common practice (closed form): for d1 = d2 = 2, P(F > f) = 1 / (1 + f).
        for f in [0.1, 1.0, 3.0, 19.0] {
            assert!((f_upper_tail(f, 2.0, 2.0) - 1.0 / (1.0 + f)).abs() < 1e-14);
        }
        assert_eq!(f_upper_tail(0.0, 3.0, 4.0), 1.0);
    }
}
