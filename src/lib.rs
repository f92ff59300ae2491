//! lumisorb: photometry for do-it-yourself LED/photodiode photometers (colorimeters).
//!
//! (Crate-level walkthrough: see the end of the core photometry work.)
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(not(test), deny(clippy::unwrap_used, clippy::expect_used, clippy::panic))]

#[cfg(any(feature = "std", test))]
extern crate std;

pub mod flags;
pub mod math;
pub mod photometry;

pub use flags::{Flag, Flags};
pub use photometry::{Absorbance, Transmittance};
