//! Errors of the measurement procedures.

use core::fmt;

use super::config::ConfigError;
use super::detector::DetectorErrorKind;
use crate::net_signal::NetSignalError;
use crate::photometry::PhotometryError;

/// Why auto-exposure could not put the blank inside its window.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ExposureError {
    /// At the most sensitive exposure and full LED drive the blank is still below the window:
    /// too little light (LED, alignment, a dirty or absorbing blank).
    TooDim {
        /// Lit level reached, as a fraction of full scale.
        lit_fraction: f32,
    },
    /// At the least sensitive exposure and lowest drive the blank still clips or is above the
    /// window: too much light (ambient light leak, a missing cuvette, wrong LED).
    TooBright {
        /// Lit level reached, as a fraction of full scale (1.0 when clipped).
        lit_fraction: f32,
    },
    /// The dark level alone is above the window's target: the front end's offset or ambient
    /// light leaves no room for signal.
    DarkTooHigh {
        /// Dark level as a fraction of full scale.
        dark_fraction: f32,
    },
    /// The allowed number of probes ran out before the level settled inside the window.
    NotConverged {
        /// Lit level of the last probe, as a fraction of full scale.
        lit_fraction: f32,
    },
}

impl fmt::Display for ExposureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ExposureError::TooDim { lit_fraction } => write!(
                f,
                "blank too dim: {:.0} % of full scale at the most sensitive exposure",
                lit_fraction * 100.0
            ),
            ExposureError::TooBright { lit_fraction } => write!(
                f,
                "blank too bright: {:.0} % of full scale at the least sensitive exposure",
                lit_fraction * 100.0
            ),
            ExposureError::DarkTooHigh { dark_fraction } => write!(
                f,
                "dark level at {:.0} % of full scale leaves no room for signal",
                dark_fraction * 100.0
            ),
            ExposureError::NotConverged { lit_fraction } => write!(
                f,
                "auto-exposure did not settle (last blank level {:.0} % of full scale)",
                lit_fraction * 100.0
            ),
        }
    }
}

/// Error of a sequencer procedure (warm-up, auto-exposure, blank, sample).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SequenceError {
    /// The LED pin failed.
    Led,
    /// The LED drive (duty cycle) failed.
    Dimmer,
    /// The measuring detector failed.
    Detector(DetectorErrorKind),
    /// The reference detector failed.
    Reference(DetectorErrorKind),
    /// The caller cancelled the procedure (checked between reads).
    Cancelled,
    /// One read took longer than its timeout.
    ReadTimeout {
        /// How long it took (ms).
        elapsed_ms: u32,
    },
    /// The whole measurement took longer than its timeout.
    MeasurementTimeout,
    /// The LED did not become stable before the warm-up timeout.
    WarmUpTimeout {
        /// Relative change between the last two warm-up points.
        relative_change: f32,
    },
    /// During warm-up the lit level was not above the dark level: no light reaches the
    /// detector.
    NoLight,
    /// Auto-exposure failed.
    Exposure(ExposureError),
    /// The reads could not form a net signal.
    Series(NetSignalError),
    /// The sample could not be evaluated against its blank.
    Photometry(PhotometryError),
    /// The configuration or the detector's exposure table is invalid.
    Config(ConfigError),
}

impl fmt::Display for SequenceError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SequenceError::Led => f.write_str("LED pin error"),
            SequenceError::Dimmer => f.write_str("LED drive error"),
            SequenceError::Detector(k) => write!(f, "measuring detector: {k}"),
            SequenceError::Reference(k) => write!(f, "reference detector: {k}"),
            SequenceError::Cancelled => f.write_str("cancelled"),
            SequenceError::ReadTimeout { elapsed_ms } => {
                write!(f, "a read took {elapsed_ms} ms, longer than its timeout")
            }
            SequenceError::MeasurementTimeout => f.write_str("measurement timed out"),
            SequenceError::WarmUpTimeout { relative_change } => write!(
                f,
                "LED not stable before the warm-up timeout (last change {:.3} %)",
                relative_change * 100.0
            ),
            SequenceError::NoLight => f.write_str("no light reaches the detector"),
            SequenceError::Exposure(e) => write!(f, "auto-exposure: {e}"),
            SequenceError::Series(e) => write!(f, "reads: {e}"),
            SequenceError::Photometry(e) => write!(f, "photometry: {e}"),
            SequenceError::Config(e) => write!(f, "configuration: {e}"),
        }
    }
}

impl core::error::Error for SequenceError {}

impl core::error::Error for ExposureError {}

impl core::error::Error for ConfigError {}

impl From<NetSignalError> for SequenceError {
    fn from(e: NetSignalError) -> Self {
        SequenceError::Series(e)
    }
}

impl From<PhotometryError> for SequenceError {
    fn from(e: PhotometryError) -> Self {
        SequenceError::Photometry(e)
    }
}

impl From<ExposureError> for SequenceError {
    fn from(e: ExposureError) -> Self {
        SequenceError::Exposure(e)
    }
}

impl From<ConfigError> for SequenceError {
    fn from(e: ConfigError) -> Self {
        SequenceError::Config(e)
    }
}
