//! Calibration: standards, fitted calibration curves with honest statistics, limits and the
//! inversion that turns a sample absorbance into a concentration.
//!
//! * [`Standard`] and [`CalibrationSet`]: up to `N` (default 16) standards in fixed storage;
//!   replicates allowed (repeated concentrations, or a mean with its sd and read count).
//! * [`Model`]: through the origin (A = k·c), straight line (A = a + b·c) or quadratic
//!   (A = a + b·c + q·c²); [`Weighting`]: none, inverse variance, or 1/c².
//! * [`Calibration::fit`] validates and fits, in f64, by an orthogonal (Givens QR) decomposition
//!   of the centred design matrix ([`Fit`]); it is the only way to obtain a [`Calibration`],
//!   and it is deterministic, so a stored calibration is its standards + model + weighting,
//!   refitted on load.
//! * Statistics: R², s_y/x, coefficient standard errors ([`Statistics`]), residuals with
//!   studentized residuals and a suspicious-standard flag ([`Residual`]), and with replicated
//!   standards a lack-of-fit F test that suggests the quadratic when the line is inadequate
//!   ([`LackOfFit`]).
//! * Limits: LOD = 3.3σ/S and LOQ = 10σ/S (ICH Q2(R1) §6.3, §7.3) with σ from s_y/x or from
//!   blank replicates ([`SigmaSource`]); the EPA method detection limit is in
//!   [`crate::limits`].
//! * Quantification ([`Calibration::quantify`], in [`crate::quantification`]): concentration
//!   with a 95 % confidence interval, `below_lod` / `below_loq` / `above_range` flags, dilution.
//!
//! Verified against the NIST StRD linear-regression datasets (`tests/calibration_nist.rs`:
//! LRE >= 12 on every certified value of Norris, Pontius, NoInt1 and NoInt2) and Harvey (2000)
//! examples 5.10–5.12 (`tests/calibration_harvey.rs`).
//!
//! # Example
//!
//! ```
//! use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
//! use lumisorb::quantification::Dilution;
//! use lumisorb::{Absorbance, Flags};
//!
//! // Invented demo data: five standards (mg/L) and their absorbances.
//! let mut set = CalibrationSet::<16>::new();
//! for (c, a) in [(0.0, 0.002), (0.5, 0.101), (1.0, 0.204), (2.0, 0.398), (4.0, 0.806)] {
//!     set.push(Standard::new(c, Absorbance::new(a).unwrap()).unwrap()).unwrap();
//! }
//! let cal = Calibration::fit(&set, Model::Linear, Weighting::None).unwrap();
//! let [a, b, _] = cal.coefficients();
//! assert!((b - 0.2).abs() < 0.005 && a.abs() < 0.01);
//! assert!(cal.r_squared() > 0.999);
//! assert!(cal.lod() < cal.loq());
//!
//! // A sample read three times, diluted 5-fold.
//! let sample = Absorbance::new(0.3).unwrap();
//! let q = cal.quantify(sample, 3, Dilution::new(5.0).unwrap(), Flags::NONE).unwrap();
//! assert!(q.low < q.concentration && q.concentration < q.high);
//! assert!((q.concentration - 7.5).abs() < 0.2);
//! ```
//!
//! # Budgets (measured; reproduce with `budgets/calibration.sh`)
//!
//! * **RAM**: `size_of::<Calibration<16>>()` = 472 bytes (16 standards + fitted model +
//!   statistics; budget 512, checked by a unit test). A [`CalibrationSet<16>`] alone is 264.
//! * **Flash** on thumbv7em-none-eabihf (Cortex-M4F), a bare-metal image that fits a 16-point
//!   inverse-variance quadratic with every statistic and quantifies a sample, minus a baseline
//!   image: **22.2 kB** of `.text` + 0.4 kB `.rodata` at `opt-level = "s"` with LTO (20.4 kB at
//!   `"z"`, 29.8 kB at `3`). Of this, about 5.2 kB is f64 software floating point and memory
//!   copies (the M4F FPU is single precision) and 0.7 kB libm (`log`); the Student t and F
//!   machinery (incomplete beta, ln Γ, the inlined `exp`, AS 241 normal quantile) is about
//!   5.3 kB.
//! * **Instructions**: one 16-point fit with all statistics (t quantiles, limits, lack-of-fit
//!   test, studentized residuals and outlier test) plus one quantification: 37 500 (linear),
//!   39 100 (quadratic), 38 900 (origin) x86-64 instructions (callgrind, release build). The
//!   least-squares fit itself is about 4 700; the t quantiles (solved once per fit and stored)
//!   are most of the rest. On a Cortex-M4F every f64 operation is a software routine of a few
//!   tens of cycles, so expect a few hundred thousand cycles (a few ms at 64–168 MHz; not
//!   measured on hardware).

mod curve;
mod fit;
mod lack_of_fit;
mod model;
mod standards;
mod statistics;

pub use curve::{Calibration, CalibrationError, SigmaSource};
pub use fit::{Fit, FitError, Point};
pub use lack_of_fit::{LackOfFit, LackOfFitTest, LACK_OF_FIT_ALPHA};
pub use model::{Model, Weighting};
pub use standards::{CalibrationSet, SetError, Standard, StandardError};
pub use statistics::{Residual, Residuals, Statistics, OUTLIER_ALPHA};
