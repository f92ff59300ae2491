//! lumisorb: photometry for do-it-yourself LED/photodiode photometers (colorimeters).
//!
//! lumisorb turns raw detector counts from one or more LED channels into transmittance,
//! absorbance and concentration, with the uncertainty and the quality flags a careful
//! instrument maker would report. It is `#![no_std]`, allocates nothing and has no `unsafe`:
//! the same code runs on a Cortex-M0 and on a PC replaying recorded counts.
//!
//! # From raw counts to a concentration
//!
//! The layers, each in the module named after its concept (see `DEVELOPERS.md` for the map):
//!
//! 1. [`accumulator`], [`robust`], [`net_signal`]: interleaved dark (LED off) and lit (LED on)
//!    reads go into a [`DarkLitSeries`]; [`DarkLitSeries::finish`] gives the dark-corrected
//!    [`NetSignal`] with its standard error and flags (saturated, unstable, no dark).
//! 2. [`photometry`]: a sample's net level against its blank's gives a [`PhotometricResult`]:
//!    [`Transmittance`], [`Absorbance`] A = -log10(T), its standard uncertainty, flags
//!    (low signal), with optional reference-detector and stray-light correction.
//! 3. [`calibration`]: absorbances of standards of known concentration form a
//!    [`calibration::CalibrationSet`]; [`calibration::Calibration::fit`] fits a model (through
//!    the origin, straight line, quadratic) with R², s_y/x, LOD, LOQ and a lack-of-fit test.
//! 4. [`quantification`]: a sample absorbance becomes a concentration with its 95 % confidence
//!    interval and flags (below LOD/LOQ, above range); [`limits`] holds the LOD/LOQ/MDL rules.
//! 5. [`session`]: the recorded-session format (reader, writer, replay); `instrument` is the
//!    measurement sequencer over embedded-hal traits; `persistence` keeps calibrations and
//!    results in flash; `sim` (feature `sim`) is a simulated photometer.
//!
//! The whole path in one example, with invented counts (a 16-bit detector, dark level 500
//! counts, blank 40 000 counts above dark, an analyte of absorbance 0.2 per mg/L):
//!
//! ```
//! use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
//! use lumisorb::quantification::Dilution;
//! use lumisorb::{photometric_result, DarkLitSeries, FullScale, NetSignal, PhotometryConfig};
//! use lumisorb::{Flag, SeriesConfig};
//!
//! let full_scale = FullScale::from_bits(16)?;
//! // Eight interleaved dark/lit read pairs for a solution that passes `t` of the blank's light;
//! // a small ripple stands in for noise.
//! let measure = |t: f64| -> Result<NetSignal, lumisorb::NetSignalError> {
//!     let mut series = DarkLitSeries::<16>::new(full_scale, None);
//!     for k in 0..8u32 {
//!         series.push_dark(500 + k % 3, None)?;
//!         series.push_lit(500 + (40_000.0 * t) as u32 + k % 3, None)?;
//!     }
//!     series.finish(&SeriesConfig::default())
//! };
//! let absorbance_of = |c: f64| 10f64.powf(-0.2 * c);
//! let config = PhotometryConfig::default();
//! let blank = measure(1.0)?;
//!
//! // Standards: 0, 0.5, 1, 2, 4 mg/L.
//! let mut standards = CalibrationSet::<16>::new();
//! for c in [0.0, 0.5, 1.0, 2.0, 4.0] {
//!     let result = photometric_result(&blank, &measure(absorbance_of(c))?, &config)?;
//!     standards.push(Standard::new(c as f32, result.absorbance)?)?;
//! }
//! let calibration = Calibration::fit(&standards, Model::Linear, Weighting::None)?;
//! assert!(calibration.r_squared() > 0.9999);
//!
//! // A sample at 1.5 mg/L, read once, undiluted.
//! let sample = photometric_result(&blank, &measure(absorbance_of(1.5))?, &config)?;
//! let q = calibration.quantify(sample.absorbance, 1, Dilution::NONE, sample.flags)?;
//! assert!((q.concentration - 1.5).abs() < 0.01);
//! assert!(q.low < 1.5 && 1.5 < q.high);
//! assert!(!q.flags.contains(Flag::AboveRange));
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```
//!
//! # Features
//!
//! * `std`: host conveniences only. Every error type implements `core::error::Error` (which is
//!   `std::error::Error` since Rust 1.81) in every build, so `?` into `Box<dyn Error>` works.
//! * `defmt`: `defmt::Format` on public types; the sequencer logs through defmt.
//! * `fast-math`: micromath's log/exp instead of libm's (smaller, much less precise: see
//!   [`math`] and the precision table in `DEVELOPERS.md`).
//! * `sim`: the simulated photometer.
//! * `async`: the async variant of the instrument layer (embedded-hal-async).
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
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
