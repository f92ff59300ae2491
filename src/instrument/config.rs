//! Settings of the measurement sequencer, with defaults and validation.

use core::fmt;

use crate::net_signal::SeriesConfig;
use crate::photometry::PhotometryConfig;

/// Settle times and limits of single reads.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReadTiming {
    /// Wait after switching the LED on before a lit read (µs; LED and photodiode rise time,
    /// anti-alias filter settling).
    pub settle_lit_us: u32,
    /// Wait after switching the LED off before a dark read (µs).
    pub settle_dark_us: u32,
    /// A read (measuring plus reference detector) taking longer than this is an error (ms).
    pub read_timeout_ms: u32,
}

impl Default for ReadTiming {
    fn default() -> Self {
        ReadTiming {
            settle_lit_us: 5_000,
            settle_dark_us: 5_000,
            read_timeout_ms: 500,
        }
    }
}

/// LED warm-up: repeated short dark/lit series until the net level stops changing.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WarmUpConfig {
    /// Dark/lit pairs averaged into one warm-up point (>= 1). A point spans the window over
    /// which the relative change is judged: make it long against the read noise and short
    /// against the LED's thermal time constant (default 64 pairs, about 2 s at 15 ms a read).
    pub pairs_per_point: u16,
    /// Extra wait with the LED lit between points (ms; 0 keeps the measurement's duty cycle).
    pub pause_ms: u32,
    /// The LED is stable when the net level changes by less than this fraction from one
    /// point to the next (> 0) ...
    pub max_relative_change: f32,
    /// ... for this many consecutive points (>= 1).
    pub stable_points: u8,
    /// Give up after this long (ms) ...
    pub timeout_ms: u32,
    /// ... or after this many points, whichever comes first (>= 2).
    pub max_points: u16,
}

impl Default for WarmUpConfig {
    fn default() -> Self {
        WarmUpConfig {
            pairs_per_point: 64,
            pause_ms: 0,
            max_relative_change: 0.001,
            stable_points: 3,
            timeout_ms: 180_000,
            max_points: 1_000,
        }
    }
}

/// Auto-exposure: put the blank's lit reads at a fraction of full scale.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ExposureConfig {
    /// Lowest acceptable lit level of the blank, as a fraction of full scale (default 0.60).
    pub low: f32,
    /// Highest acceptable lit level of the blank, as a fraction of full scale (default 0.85).
    pub high: f32,
    /// Level aimed at when a new exposure is chosen (default 0.725, mid-window).
    pub target: f32,
    /// Dark/lit pairs per probe (>= 1).
    pub probe_pairs: u16,
    /// Probes before giving up (>= 1).
    pub max_iterations: u8,
    /// Lowest LED drive as a fraction of the maximum duty cycle (0 < x <= 1).
    pub min_drive: f32,
    /// Sensitivity factor of one back-off step after a clipped read (0 < x < 1).
    pub back_off: f32,
}

impl Default for ExposureConfig {
    fn default() -> Self {
        ExposureConfig {
            low: 0.60,
            high: 0.85,
            target: 0.725,
            probe_pairs: 2,
            max_iterations: 8,
            min_drive: 0.02,
            back_off: 0.5,
        }
    }
}

/// Everything the sequencer needs to know.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SequenceConfig {
    /// Settle times and read timeout.
    pub timing: ReadTiming,
    /// LED warm-up.
    pub warm_up: WarmUpConfig,
    /// Auto-exposure.
    pub exposure: ExposureConfig,
    /// Run auto-exposure at the start of every blank (default true).
    pub auto_exposure: bool,
    /// Lit reads per measurement (there is one dark read more, first and last; >= 1; default
    /// 15, so the 16 dark reads still fit the robust buffers, see
    /// [`SERIES_CAPACITY`](super::sequencer::SERIES_CAPACITY)).
    pub pairs: u16,
    /// A whole blank or sample measurement taking longer than this is an error (ms).
    pub measurement_timeout_ms: u32,
    /// Leave the LED lit between procedures (keeps it thermally steady; default true).
    pub idle_lit: bool,
    /// Stability checks of each dark/lit series.
    pub series: SeriesConfig,
    /// Photometric evaluation of samples against their blank.
    pub photometry: PhotometryConfig,
}

impl Default for SequenceConfig {
    fn default() -> Self {
        SequenceConfig {
            timing: ReadTiming::default(),
            warm_up: WarmUpConfig::default(),
            exposure: ExposureConfig::default(),
            auto_exposure: true,
            pairs: 15,
            measurement_timeout_ms: 60_000,
            idle_lit: true,
            series: SeriesConfig::default(),
            photometry: PhotometryConfig::default(),
        }
    }
}

/// Which setting of a [`SequenceConfig`] is out of range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ConfigError {
    /// `pairs` is zero.
    Pairs,
    /// A warm-up setting.
    WarmUp,
    /// An exposure setting (window not 0 < low <= target <= high < 1, ...).
    Exposure,
    /// A timeout is zero.
    Timeout,
    /// The series configuration.
    Series,
    /// The photometry configuration.
    Photometry,
    /// The measuring detector's exposure sensitivities are not positive and ascending.
    DetectorSteps,
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            ConfigError::Pairs => "a measurement needs at least one dark/lit pair",
            ConfigError::WarmUp => "warm-up setting out of range",
            ConfigError::Exposure => "auto-exposure setting out of range",
            ConfigError::Timeout => "timeouts must be greater than zero",
            ConfigError::Series => "series setting out of range",
            ConfigError::Photometry => "photometry setting out of range",
            ConfigError::DetectorSteps => {
                "detector exposure sensitivities must be positive and ascending"
            }
        })
    }
}

impl SequenceConfig {
    /// Checks every setting.
    pub fn validate(&self) -> Result<(), ConfigError> {
        if self.pairs == 0 {
            return Err(ConfigError::Pairs);
        }
        let w = &self.warm_up;
        let warm_ok = w.pairs_per_point >= 1
            && w.max_relative_change.is_finite()
            && w.max_relative_change > 0.0
            && w.stable_points >= 1
            && w.max_points >= 2
            && w.timeout_ms > 0;
        if !warm_ok {
            return Err(ConfigError::WarmUp);
        }
        let e = &self.exposure;
        let finite = [e.low, e.high, e.target, e.min_drive, e.back_off]
            .iter()
            .all(|x| x.is_finite());
        let exposure_ok = finite
            && 0.0 < e.low
            && e.low <= e.target
            && e.target <= e.high
            && e.high < 1.0
            && e.probe_pairs >= 1
            && e.max_iterations >= 1
            && 0.0 < e.min_drive
            && e.min_drive <= 1.0
            && 0.0 < e.back_off
            && e.back_off < 1.0;
        if !exposure_ok {
            return Err(ConfigError::Exposure);
        }
        if self.timing.read_timeout_ms == 0 || self.measurement_timeout_ms == 0 {
            return Err(ConfigError::Timeout);
        }
        self.series.validate().map_err(|_| ConfigError::Series)?;
        self.photometry
            .validate()
            .map_err(|_| ConfigError::Photometry)?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_is_valid_and_bad_settings_are_named() {
        assert_eq!(SequenceConfig::default().validate(), Ok(()));
        let c = SequenceConfig {
            pairs: 0,
            ..SequenceConfig::default()
        };
        assert_eq!(c.validate(), Err(ConfigError::Pairs));
        let mut c = SequenceConfig::default();
        c.exposure.low = 0.9;
        assert_eq!(c.validate(), Err(ConfigError::Exposure));
        let mut c = SequenceConfig::default();
        c.warm_up.max_relative_change = f32::NAN;
        assert_eq!(c.validate(), Err(ConfigError::WarmUp));
        let mut c = SequenceConfig::default();
        c.timing.read_timeout_ms = 0;
        assert_eq!(c.validate(), Err(ConfigError::Timeout));
    }
}
