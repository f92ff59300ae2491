//! Weighted least squares for the three calibration models, in f64.
//!
//! Numerical method (chosen so that the NIST StRD linear-regression datasets reproduce, see
//! `tests/calibration_nist.rs`):
//!
//! 1. the concentration axis is centred on the weighted mean and scaled to [-1, 1]
//!    (t = (x - x̄)/s; through-origin fits are only scaled), and for models with an intercept
//!    the responses are centred on their weighted mean;
//! 2. the rows √w·(1, t, t²) are folded one at a time into an upper-triangular factor R by Givens
//!    rotations (an orthogonal decomposition X = QR of the small design matrix, built in O(p²)
//!    memory, without forming the normal equations);
//! 3. R β = Qᵀy is solved by back substitution, (XᵀWX)⁻¹ = R⁻¹R⁻ᵀ gives the coefficient
//!    covariance, and the residuals are recomputed directly from the data.
//!
//! Coefficients are kept in the centred basis (where predictions and their variances are
//! evaluated without cancellation) and converted to A = c0 + c1·x + c2·x² on request.
//!
//! Weights are normalised to sum to the number of points, so that unweighted and weighted fits
//! share one set of formulas (the convention of weighted calibration in analytical chemistry).

use core::fmt;

use super::Model;
use crate::math;

/// One data point of a least-squares fit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Point {
    /// Abscissa (concentration).
    pub x: f64,
    /// Ordinate (response, e.g. absorbance).
    pub y: f64,
    /// Relative weight, > 0 (1 for an unweighted fit).
    pub weight: f64,
}

/// Why a least-squares fit has no result.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FitError {
    /// Fewer points than the model's coefficients plus one (no residual degree of freedom).
    TooFewPoints {
        /// Points the model needs.
        needed: usize,
        /// Points given.
        got: usize,
    },
    /// The x, y (and weight) slices have different lengths.
    LengthMismatch,
    /// A value was NaN or infinite, or the computation overflowed.
    NotFinite,
    /// A weight was zero, negative or not finite.
    InvalidWeight,
    /// The x values cannot determine the model (all equal, or too few distinct values).
    Degenerate,
}

impl fmt::Display for FitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FitError::TooFewPoints { needed, got } => {
                write!(f, "fit needs at least {needed} points, got {got}")
            }
            FitError::LengthMismatch => f.write_str("x, y and weight counts differ"),
            FitError::NotFinite => f.write_str("a value is not a finite number"),
            FitError::InvalidWeight => f.write_str("a weight is not a finite number > 0"),
            FitError::Degenerate => f.write_str("the x values cannot determine the model"),
        }
    }
}

impl core::error::Error for FitError {}

/// Anything that can hand out fit points by index (keeps the fitting code non-generic).
pub(crate) trait PointSource {
    /// Number of points.
    fn count(&self) -> usize;
    /// The point at `index` (< count).
    fn point(&self, index: usize) -> Option<Point>;
}

struct Slices<'a> {
    x: &'a [f64],
    y: &'a [f64],
    w: Option<&'a [f64]>,
}

impl PointSource for Slices<'_> {
    fn count(&self) -> usize {
        self.x.len()
    }
    fn point(&self, index: usize) -> Option<Point> {
        Some(Point {
            x: *self.x.get(index)?,
            y: *self.y.get(index)?,
            weight: match self.w {
                Some(w) => *w.get(index)?,
                None => 1.0,
            },
        })
    }
}

/// A fitted least-squares model with its statistics (the engine inside a calibration).
///
/// Get one from [`Fit::from_slices`] for general data; a calibration curve is made with
/// [`crate::calibration::Calibration::fit`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fit {
    model: Model,
    n: u32,
    shift: f64,
    scale: f64,
    /// Centred-basis coefficients, by power of t (Origin uses only power 1).
    beta: [f64; 3],
    /// (XᵀWX)⁻¹ in the centred basis, by powers (entries of unused powers are 0), packed
    /// symmetric: (0,0) (0,1) (0,2) (1,1) (1,2) (2,2).
    xtwx_inv: [f64; 6],
    ss_res: f64,
    ss_tot: f64,
    weight_sum: f64,
}

/// The powers of t used by each model.
const fn powers(model: Model) -> &'static [usize] {
    match model {
        Model::Origin => &[1],
        Model::Linear => &[0, 1],
        Model::Quadratic => &[0, 1, 2],
    }
}

/// Index of entry (k, l) of a packed symmetric 3×3 matrix.
const fn packed(k: usize, l: usize) -> usize {
    let (a, b) = if k <= l { (k, l) } else { (l, k) };
    match (a, b) {
        (0, 0) => 0,
        (0, 1) => 1,
        (0, 2) => 2,
        (1, 1) => 3,
        (1, 2) => 4,
        _ => 5,
    }
}

/// t^k for k in 0..3.
fn basis(t: f64) -> [f64; 3] {
    [1.0, t, t * t]
}

impl Fit {
    /// Fits `model` to points (`x[i]`, `y[i]`) with optional relative `weights` (all 1 if
    /// `None`).
    ///
    /// ```
    /// use lumisorb::calibration::{Fit, Model};
    /// let x = [1.0, 2.0, 3.0, 4.0];
    /// let y = [2.1, 3.9, 6.2, 7.8];
    /// let fit = Fit::from_slices(&x, &y, None, Model::Linear).unwrap();
    /// let [a, b, _] = fit.coefficients();
    /// assert!((b - 1.94).abs() < 1e-9 && (a - 0.15).abs() < 1e-9);
    /// ```
    pub fn from_slices(
        x: &[f64],
        y: &[f64],
        weights: Option<&[f64]>,
        model: Model,
    ) -> Result<Fit, FitError> {
        if x.len() != y.len() || weights.is_some_and(|w| w.len() != x.len()) {
            return Err(FitError::LengthMismatch);
        }
        Fit::from_source(&Slices { x, y, w: weights }, model)
    }

    /// The fit engine over any point source.
    pub(crate) fn from_source(src: &dyn PointSource, model: Model) -> Result<Fit, FitError> {
        let n = src.count();
        let p = model.parameters();
        if n < p + 1 {
            return Err(FitError::TooFewPoints {
                needed: p + 1,
                got: n,
            });
        }
        let n_u32 = u32::try_from(n).map_err(|_| FitError::NotFinite)?;
        let nf = f64::from(n_u32);
        let pts = || (0..n).filter_map(|i| src.point(i));

        // Pass 1: validate, weighted means (with one correction pass each), x extent.
        let mut sw = 0.0;
        let mut swx = 0.0;
        let mut swy = 0.0;
        let mut x_min = f64::INFINITY;
        let mut x_max = f64::NEG_INFINITY;
        let mut seen = 0usize;
        for pt in pts() {
            if !pt.x.is_finite() || !pt.y.is_finite() {
                return Err(FitError::NotFinite);
            }
            if !(pt.weight.is_finite() && pt.weight > 0.0) {
                return Err(FitError::InvalidWeight);
            }
            sw += pt.weight;
            swx += pt.weight * pt.x;
            swy += pt.weight * pt.y;
            x_min = x_min.min(pt.x);
            x_max = x_max.max(pt.x);
            seen += 1;
        }
        if seen != n {
            return Err(FitError::LengthMismatch);
        }
        if !(sw.is_finite() && swx.is_finite() && swy.is_finite()) || sw <= 0.0 {
            return Err(FitError::NotFinite);
        }
        let mut x_mean = swx / sw;
        let mut y_mean = swy / sw;
        let (mut dx, mut dy) = (0.0, 0.0);
        for pt in pts() {
            dx += pt.weight * (pt.x - x_mean);
            dy += pt.weight * (pt.y - y_mean);
        }
        x_mean += dx / sw;
        y_mean += dy / sw;
        let norm = nf / sw; // weights normalised to sum to n

        let (shift, y_centre) = if model.has_intercept() {
            (x_mean, y_mean)
        } else {
            (0.0, 0.0)
        };
        let scale = (x_max - shift).abs().max((x_min - shift).abs());
        if !(scale.is_finite() && scale > 0.0) || x_max <= x_min && model.has_intercept() {
            return Err(FitError::Degenerate);
        }

        // Pass 2: Givens QR of the weighted, centred design matrix.
        let pw = powers(model);
        let mut r = [[0.0f64; 3]; 3];
        let mut qty = [0.0f64; 3];
        for pt in pts() {
            let t = (pt.x - shift) / scale;
            let sq = math::sqrt(pt.weight * norm);
            let b = basis(t);
            let mut v = [0.0f64; 3];
            for (vj, &k) in v.iter_mut().zip(pw) {
                *vj = sq * b.get(k).copied().unwrap_or(0.0);
            }
            let mut z = sq * (pt.y - y_centre);
            givens_update(&mut r, &mut qty, &mut v, &mut z, p);
        }

        // Rank check: each pivot against the largest possible column norm (√n, |t| <= 1).
        let tol = 1e-10 * math::sqrt(nf);
        let rank_deficient = r
            .iter()
            .take(p)
            .enumerate()
            .any(|(j, row)| row.get(j).is_none_or(|d| d.is_nan() || d.abs() <= tol));
        if rank_deficient {
            return Err(FitError::Degenerate);
        }
        let rinv = upper_inverse(&r, p);
        // β = R⁻¹ Qᵀy (in parameter order), (XᵀWX)⁻¹ = R⁻¹ R⁻ᵀ.
        let mut beta_p = [0.0f64; 3];
        let mut cov_p = [[0.0f64; 3]; 3];
        for i in 0..p {
            put1(
                &mut beta_p,
                i,
                (i..p).map(|k| at(&rinv, i, k) * get1(&qty, k)).sum(),
            );
            for j in 0..p {
                let c = (i.max(j)..p)
                    .map(|k| at(&rinv, i, k) * at(&rinv, j, k))
                    .sum();
                put(&mut cov_p, i, j, c);
            }
        }
        // Map parameter order to powers of t.
        let mut beta = [0.0f64; 3];
        let mut xtwx_inv = [0.0f64; 6];
        for ((&ki, &b), cov_row) in pw.iter().zip(beta_p.iter()).zip(cov_p.iter()) {
            if let Some(slot) = beta.get_mut(ki) {
                *slot = b;
            }
            for (&kj, &c) in pw.iter().zip(cov_row.iter()) {
                if let Some(cell) = xtwx_inv.get_mut(packed(ki, kj)) {
                    *cell = c;
                }
            }
        }
        let [b0, ..] = &mut beta;
        *b0 += y_centre;

        let mut fit = Fit {
            model,
            n: n_u32,
            shift,
            scale,
            beta,
            xtwx_inv,
            ss_res: 0.0,
            ss_tot: 0.0,
            weight_sum: sw,
        };

        // Pass 3: residual and total sums of squares, directly from the data.
        let (mut ss_res, mut ss_tot) = (0.0, 0.0);
        for pt in pts() {
            let w = pt.weight * norm;
            let e = pt.y - fit.predict(pt.x);
            ss_res += w * e * e;
            let d = if model.has_intercept() {
                pt.y - y_mean
            } else {
                pt.y
            };
            ss_tot += w * d * d;
        }
        fit.ss_res = ss_res;
        fit.ss_tot = ss_tot;
        let all_finite = fit.beta.iter().all(|b| b.is_finite())
            && fit.xtwx_inv.iter().all(|c| c.is_finite())
            && ss_res.is_finite()
            && ss_tot.is_finite();
        if all_finite {
            Ok(fit)
        } else {
            Err(FitError::NotFinite)
        }
    }

    /// The fitted model.
    pub const fn model(&self) -> Model {
        self.model
    }

    /// Number of points fitted.
    pub const fn points(&self) -> u32 {
        self.n
    }

    /// Residual degrees of freedom, n - p (at least 1).
    pub const fn degrees_of_freedom(&self) -> u32 {
        self.n.saturating_sub(self.model.parameters() as u32)
    }

    /// The coefficients [c0, c1, c2] of y = c0 + c1·x + c2·x² (unused ones are 0).
    pub fn coefficients(&self) -> [f64; 3] {
        let j = self.jacobian();
        let mut c = [0.0; 3];
        for (ci, row) in c.iter_mut().zip(j.iter()) {
            *ci = row.iter().zip(self.beta.iter()).map(|(a, b)| a * b).sum();
        }
        c
    }

    /// Covariance matrix of [c0, c1, c2] (rows/columns of unused coefficients are 0).
    pub fn covariance(&self) -> [[f64; 3]; 3] {
        let j = self.jacobian();
        let s2 = self.residual_variance();
        let mut out = [[0.0; 3]; 3];
        for (ja, row) in j.iter().zip(out.iter_mut()) {
            for (jb, cell) in j.iter().zip(row.iter_mut()) {
                *cell = s2 * self.quadratic_form(ja, jb);
            }
        }
        out
    }

    /// Standard errors of [c0, c1, c2] (0 for unused coefficients).
    pub fn standard_errors(&self) -> [f64; 3] {
        let c = self.covariance();
        let mut se = [0.0; 3];
        for (k, (s, row)) in se.iter_mut().zip(c.iter()).enumerate() {
            *s = math::sqrt(row.get(k).copied().unwrap_or(0.0).max(0.0));
        }
        se
    }

    /// Weighted residual sum of squares Σ wᵢ (yᵢ - ŷᵢ)² (weights normalised to sum to n).
    pub const fn residual_sum_of_squares(&self) -> f64 {
        self.ss_res
    }

    /// Total sum of squares: Σ wᵢ (yᵢ - ȳ)², or the uncentred Σ wᵢ yᵢ² for the through-origin
    /// model (the NIST StRD convention for no-intercept fits).
    pub const fn total_sum_of_squares(&self) -> f64 {
        self.ss_tot
    }

    /// Residual variance s² = SS_res / (n - p).
    pub fn residual_variance(&self) -> f64 {
        self.ss_res / f64::from(self.degrees_of_freedom().max(1))
    }

    /// Residual standard deviation s_y/x = √(SS_res / (n - p)).
    pub fn residual_sd(&self) -> f64 {
        math::sqrt(self.residual_variance())
    }

    /// Coefficient of determination R² = 1 - SS_res / SS_tot (uncentred for the origin model);
    /// 0 when SS_tot is 0.
    pub fn r_squared(&self) -> f64 {
        if self.ss_tot > 0.0 {
            1.0 - self.ss_res / self.ss_tot
        } else {
            0.0
        }
    }

    /// The fitted value at `x`.
    pub fn predict(&self, x: f64) -> f64 {
        let b = basis((x - self.shift) / self.scale);
        b.iter().zip(self.beta.iter()).map(|(a, c)| a * c).sum()
    }

    /// dy/dx of the fitted curve at `x`.
    pub fn slope_at(&self, x: f64) -> f64 {
        let t = (x - self.shift) / self.scale;
        let [_, b1, b2] = self.beta;
        (b1 + 2.0 * b2 * t) / self.scale
    }

    /// The x at which the fitted curve reaches `y`, on the rising branch of the curve (the
    /// branch where dy/dx > 0); `None` if the curve never reaches `y` there (a quadratic beyond
    /// its vertex) or the model has no rising branch.
    ///
    /// Solved in the centred basis; the quadratic root uses the cancellation-free form.
    pub fn inverse(&self, y: f64) -> Option<f64> {
        let [b0, b1, b2] = self.beta;
        let d = y - b0;
        let t = if b2 == 0.0 {
            if b1 > 0.0 {
                d / b1
            } else {
                return None;
            }
        } else {
            // b2 t² + b1 t - d = 0; rising branch: dy/dt = b1 + 2 b2 t = +√disc.
            let disc = b1 * b1 + 4.0 * b2 * d;
            if disc.is_nan() || disc <= 0.0 {
                return None;
            }
            let root = math::sqrt(disc);
            if b1 > 0.0 {
                2.0 * d / (b1 + root)
            } else {
                (root - b1) / (2.0 * b2)
            }
        };
        let x = self.shift + self.scale * t;
        x.is_finite().then_some(x)
    }

    /// Variance of the fitted value at `x` (from the coefficient covariance).
    pub fn fitted_variance(&self, x: f64) -> f64 {
        self.residual_variance() * self.unscaled_leverage(x)
    }

    /// φ(x)ᵀ (XᵀWX)⁻¹ φ(x) in the centred basis (the leverage of a point of unit weight).
    pub(crate) fn unscaled_leverage(&self, x: f64) -> f64 {
        let b = basis((x - self.shift) / self.scale);
        self.quadratic_form(&b, &b).max(0.0)
    }

    /// Σ_k Σ_l a_k·inv(k, l)·b_l, summed in row order.
    fn quadratic_form(&self, a: &[f64; 3], b: &[f64; 3]) -> f64 {
        let mut acc = 0.0;
        for (k, &ak) in a.iter().enumerate() {
            for (l, &bl) in b.iter().enumerate() {
                acc += ak * self.inv(k, l) * bl;
            }
        }
        acc
    }

    /// Factor that turns a raw weight into the normalised weight the fit used (n / Σw).
    pub(crate) fn weight_norm(&self) -> f64 {
        f64::from(self.n) / self.weight_sum
    }

    /// Entry (k, l) of (XᵀWX)⁻¹ in the centred basis.
    fn inv(&self, k: usize, l: usize) -> f64 {
        self.xtwx_inv.get(packed(k, l)).copied().unwrap_or(0.0)
    }

    /// d(c)/d(β): c = J β for the centred-to-plain basis change.
    fn jacobian(&self) -> [[f64; 3]; 3] {
        let m = self.shift;
        let s = self.scale;
        [
            [1.0, -m / s, m * m / (s * s)],
            [0.0, 1.0 / s, -2.0 * m / (s * s)],
            [0.0, 0.0, 1.0 / (s * s)],
        ]
    }
}

/// Folds the row (v, z) into the triangular factor (r, qty) by Givens rotations.
fn givens_update(
    r: &mut [[f64; 3]; 3],
    qty: &mut [f64; 3],
    v: &mut [f64; 3],
    z: &mut f64,
    p: usize,
) {
    let p = p.min(3);
    for j in 0..p {
        let vj = get1(v, j);
        if vj == 0.0 {
            continue;
        }
        let rjj = at(r, j, j);
        let h = math::sqrt(rjj * rjj + vj * vj);
        let (c, s) = (rjj / h, vj / h);
        put(r, j, j, h);
        for k in j + 1..p {
            let (rk, vk) = (at(r, j, k), get1(v, k));
            put(r, j, k, c * rk + s * vk);
            put1(v, k, c * vk - s * rk);
        }
        let q = get1(qty, j);
        put1(qty, j, c * q + s * *z);
        *z = c * *z - s * q;
    }
}

/// Entry `i` of a 3-vector (0 outside it).
fn get1(v: &[f64; 3], i: usize) -> f64 {
    v.get(i).copied().unwrap_or(0.0)
}

/// Sets entry `i` of a 3-vector (nothing outside it).
fn put1(v: &mut [f64; 3], i: usize, x: f64) {
    if let Some(cell) = v.get_mut(i) {
        *cell = x;
    }
}

/// Entry (i, k) of a 3×3 matrix (0 outside it).
fn at(m: &[[f64; 3]; 3], i: usize, k: usize) -> f64 {
    m.get(i).and_then(|row| row.get(k)).copied().unwrap_or(0.0)
}

/// Sets entry (i, k) of a 3×3 matrix (nothing outside it).
fn put(m: &mut [[f64; 3]; 3], i: usize, k: usize, x: f64) {
    if let Some(cell) = m.get_mut(i).and_then(|row| row.get_mut(k)) {
        *cell = x;
    }
}

/// Inverse of the p×p upper-triangular r (nonzero diagonal checked by the caller).
fn upper_inverse(r: &[[f64; 3]; 3], p: usize) -> [[f64; 3]; 3] {
    let p = p.min(3);
    let mut inv = [[0.0f64; 3]; 3];
    for j in (0..p).rev() {
        put(&mut inv, j, j, 1.0 / at(r, j, j));
        for i in (0..j).rev() {
            let s: f64 = (i + 1..j + 1).map(|k| at(r, i, k) * at(&inv, k, j)).sum();
            put(&mut inv, i, j, -s / at(r, i, i));
        }
    }
    inv
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_and_parabola() {
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y: [f64; 5] = core::array::from_fn(|i| 0.5 + 2.0 * x[i]);
        let f = Fit::from_slices(&x, &y, None, Model::Linear).unwrap();
        let c = f.coefficients();
        assert!((c[0] - 0.5).abs() < 1e-13 && (c[1] - 2.0).abs() < 1e-13 && c[2] == 0.0);
        assert!(f.residual_sd() < 1e-13);
        assert!((f.r_squared() - 1.0).abs() < 1e-14);
        let y: [f64; 5] = core::array::from_fn(|i| 0.1 + 0.3 * x[i] - 0.02 * x[i] * x[i]);
        let f = Fit::from_slices(&x, &y, None, Model::Quadratic).unwrap();
        let c = f.coefficients();
        assert!((c[0] - 0.1).abs() < 1e-13 && (c[1] - 0.3).abs() < 1e-13);
        assert!((c[2] + 0.02).abs() < 1e-13);
        let f = Fit::from_slices(&x, &y, None, Model::Origin).unwrap();
        assert_eq!(f.coefficients()[0], 0.0);
    }

    #[test]
    fn typed_errors() {
        let x = [1.0, 1.0, 1.0];
        let y = [1.0, 2.0, 3.0];
        assert_eq!(
            Fit::from_slices(&x, &y, None, Model::Linear),
            Err(FitError::Degenerate)
        );
        assert_eq!(
            Fit::from_slices(&[1.0, 2.0], &[1.0, 2.0], None, Model::Linear),
            Err(FitError::TooFewPoints { needed: 3, got: 2 })
        );
        assert_eq!(
            Fit::from_slices(&[1.0, 2.0, 3.0], &[1.0, 2.0], None, Model::Linear),
            Err(FitError::LengthMismatch)
        );
        assert_eq!(
            Fit::from_slices(&[1.0, 2.0, f64::NAN], &y, None, Model::Linear),
            Err(FitError::NotFinite)
        );
        assert_eq!(
            Fit::from_slices(&[1.0, 2.0, 3.0], &y, Some(&[1.0, 0.0, 1.0]), Model::Linear),
            Err(FitError::InvalidWeight)
        );
        // Two distinct x cannot determine a parabola.
        assert_eq!(
            Fit::from_slices(
                &[1.0, 1.0, 2.0, 2.0],
                &[1.0, 1.1, 2.0, 2.1],
                None,
                Model::Quadratic
            ),
            Err(FitError::Degenerate)
        );
        assert_eq!(
            Fit::from_slices(
                &[1e300, 2e300, 3e300],
                &[1e300, -1e300, 1e300],
                None,
                Model::Quadratic
            ),
            Err(FitError::TooFewPoints { needed: 4, got: 3 })
        );
    }

    #[test]
    fn weights_scale_invariant() {
        // Multiplying all weights by a constant changes nothing (weights are relative).
        let x = [0.0, 1.0, 2.0, 3.0, 5.0];
        let y = [0.02, 0.98, 2.1, 2.9, 5.2];
        let w = [1.0, 2.0, 0.5, 3.0, 1.0];
        let w2 = w.map(|v| v * 1000.0);
        let a = Fit::from_slices(&x, &y, Some(&w), Model::Linear).unwrap();
        let b = Fit::from_slices(&x, &y, Some(&w2), Model::Linear).unwrap();
        for (p, q) in a.coefficients().iter().zip(b.coefficients()) {
            assert!((p - q).abs() < 1e-12);
        }
        assert!((a.residual_sd() - b.residual_sd()).abs() < 1e-12);
    }
}
