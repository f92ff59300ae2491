//! Stale calibrations: reported, never silently used.
//!
//! A stored calibration is *stale* for a measurement when any of these holds:
//!
//! - it is older than the method's limit: `now_s - created_s > max_calibration_age_s`
//!   (a limit of 0 means none);
//! - the instrument's clock is behind its creation time (`now_s < created_s`): its age cannot be
//!   known, so it is treated as stale rather than as new;
//! - it was made with another cuvette path length than the one set now (differing by more than
//!   0.1 %; Beer-Lambert absorbance scales with path length, so the slope no longer applies);
//! - it was made under another method, or another revision of the method (new reagent lot,
//!   changed procedure).
//!
//! A stale calibration still gives a concentration (the person may have a reason to use it),
//! but the result carries [`Flag::StaleCalibration`] (`stale_calibration` in CSV, JSON and the
//! replay vocabulary, advice: "calibration is stale or from other settings: recalibrate").
//! [`Staleness`] says which of the reasons applied, for a display or a log.

use super::{CalibrationRecord, MethodSettings};
use crate::{Flag, Flags};

/// Which staleness rules a calibration breaks (all `false`: fresh).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Staleness {
    /// Older than the method's age limit.
    pub too_old: bool,
    /// The clock reads earlier than the calibration's creation time.
    pub clock_behind: bool,
    /// Made with another path length.
    pub other_path_length: bool,
    /// Made under another method or method revision.
    pub other_method: bool,
}

impl Staleness {
    /// Judges `calibration` for a measurement under `settings` at `now_s` (instrument clock).
    pub fn of(calibration: &CalibrationRecord, settings: &MethodSettings, now_s: u32) -> Self {
        let limit = settings.max_calibration_age_s;
        let (too_old, clock_behind) = match now_s.checked_sub(calibration.created_s) {
            Some(age) => (limit != 0 && age > limit, false),
            None => (false, true),
        };
        let stored = calibration.path_length_mm;
        let now = settings.path_length_mm;
        // NaN (settings built by hand) compares as unordered: stale, never fresh.
        let other_path_length = !matches!(
            (stored - now).abs().partial_cmp(&(1.0e-3 * now.abs())),
            Some(core::cmp::Ordering::Less | core::cmp::Ordering::Equal)
        );
        Staleness {
            too_old,
            clock_behind,
            other_path_length,
            other_method: calibration.method != settings.method,
        }
    }

    /// Whether any rule is broken.
    pub const fn is_stale(self) -> bool {
        self.too_old || self.clock_behind || self.other_path_length || self.other_method
    }

    /// `{StaleCalibration}` when stale, empty otherwise: add it to the result's flags.
    pub const fn flags(self) -> Flags {
        if self.is_stale() {
            Flags::only(Flag::StaleCalibration)
        } else {
            Flags::NONE
        }
    }
}
