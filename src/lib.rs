//! lumisorb: photometry for do-it-yourself LED/photodiode photometers (colorimeters).
//!
//! (Crate-level walkthrough: see the end of the core photometry work.)
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]

#[cfg(any(feature = "std", test))]
extern crate std;

pub mod accumulator;
pub mod calibration;
pub mod counts;
pub mod flags;
mod incomplete_beta;
pub mod instrument;
pub mod limits;
pub mod math;
pub mod net_signal;
pub mod persistence;
pub mod photometry;
pub mod quantification;
pub mod robust;
pub mod session;
#[cfg(feature = "sim")]
pub mod sim;
pub mod student_t;

pub use accumulator::{AccumulateError, ReadAccumulator, ReadStats};
pub use counts::{FullScale, MAX_COUNT};
pub use flags::{Flag, Flags};
pub use net_signal::{DarkLitSeries, Level, NetSignal, NetSignalError, SeriesConfig};
pub use photometry::{
    photometric_result, Absorbance, PhotometricResult, PhotometryConfig, PhotometryError,
    StrayFraction, Transmittance,
};
pub use robust::{RobustBuffer, RobustEstimate};
