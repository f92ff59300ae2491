//! Calibration: standards, fitted calibration curves and their statistics.
//!
//! (Module overview, example and budgets: being written.)

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
