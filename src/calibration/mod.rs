//! Calibration: standards, fitted calibration curves and their statistics.
//!
//! (Module overview, example and budgets: being written.)

mod fit;
mod model;
mod standards;

pub use fit::{Fit, FitError, Point};
pub use model::{Model, Weighting};
pub use standards::{CalibrationSet, SetError, Standard, StandardError};
