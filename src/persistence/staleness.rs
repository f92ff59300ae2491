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
//!
//! A stored calibration is used through [`CalibrationRecord::quantify`], which judges it
//! against the current settings and clock and adds the flag itself, so that a caller cannot
//! forget to: the [`Calibration`](crate::calibration::Calibration) inside a record is public for
//! display, but the quantifying path of a firmware goes through the record.

use super::{CalibrationRecord, MethodSettings};
use crate::quantification::{Dilution, Quantified, QuantifyError};
use crate::{Absorbance, Flag, Flags};

impl CalibrationRecord {
    /// Concentration of a sample from this stored calibration, measured under `settings` at
    /// `now_s` (instrument clock, seconds): the method's dilution factor is applied and, when
    /// the calibration is stale for that measurement ([`Staleness::of`]), the result carries
    /// [`Flag::StaleCalibration`] on top of `photometric_flags`.
    ///
    /// Errors: as [`Calibration::quantify`](crate::calibration::Calibration::quantify), and
    /// [`QuantifyError`] for a dilution factor in the settings that is not valid.
    pub fn quantify(
        &self,
        settings: &MethodSettings,
        now_s: u32,
        absorbance: Absorbance,
        replicates: u16,
        photometric_flags: Flags,
    ) -> Result<Quantified, QuantifyError> {
        let dilution = Dilution::new(settings.dilution_factor)?;
        let flags = photometric_flags.union(Staleness::of(self, settings, now_s).flags());
        self.calibration
            .quantify(absorbance, replicates, dilution, flags)
    }
}

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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
    use crate::persistence::MethodId;
    use crate::Absorbance;

    fn calibration(created_s: u32, path_length_mm: f32, version: u16) -> CalibrationRecord {
        let mut set = CalibrationSet::new();
        for (c, a) in [(0.0f32, 0.01f32), (1.0, 0.21), (2.0, 0.40), (4.0, 0.81)] {
            set.push(Standard::new(c, Absorbance::new(a).unwrap()).unwrap())
                .unwrap();
        }
        CalibrationRecord {
            channel: 0,
            method: MethodId { id: 9, version },
            path_length_mm,
            created_s,
            sequence: 1,
            calibration: Calibration::fit(&set, Model::Linear, Weighting::None).unwrap(),
        }
    }

    fn settings(max_age_s: u32) -> MethodSettings {
        MethodSettings {
            channel: 0,
            method: MethodId { id: 9, version: 2 },
            wavelength_nm: 630,
            path_length_mm: 10.0,
            lit_reads: 8,
            dark_reads: 8,
            stray_fraction: 0.0,
            use_reference: false,
            dilution_factor: 1.0,
            max_calibration_age_s: max_age_s,
        }
    }

    #[test]
    fn quantifying_through_the_record_adds_the_flag() {
        let day = settings(3_600);
        let a = Absorbance::new(0.3).unwrap();
        let fresh = calibration(1_000, 10.0, 2)
            .quantify(&day, 2_000, a, 1, Flags::NONE)
            .unwrap();
        assert!(!fresh.flags.contains(Flag::StaleCalibration));
        let old = calibration(1_000, 10.0, 2)
            .quantify(&day, 10_000, a, 1, Flags::only(Flag::Unstable))
            .unwrap();
        assert!(old.flags.contains(Flag::StaleCalibration));
        assert!(old.flags.contains(Flag::Unstable));
        // A stale calibration still gives the same concentration: the flag says recalibrate.
        assert_eq!(old.concentration, fresh.concentration);
    }

    #[test]
    fn fresh_calibration_has_no_flag() {
        let s = Staleness::of(&calibration(1_000, 10.0, 2), &settings(3_600), 4_600);
        assert_eq!(s, Staleness::default());
        assert_eq!(s.flags(), Flags::NONE);
    }

    #[test]
    fn each_rule_alone_makes_it_stale() {
        let day = settings(3_600);
        let cases = [
            (calibration(1_000, 10.0, 2), 4_601, "too old"),
            (calibration(5_000, 10.0, 2), 4_999, "clock behind"),
            (calibration(1_000, 10.02, 2), 1_000, "other path length"),
            (calibration(1_000, 10.0, 1), 1_000, "other method version"),
        ];
        for (cal, now, why) in cases {
            let s = Staleness::of(&cal, &day, now);
            assert!(s.is_stale(), "{why}");
            assert_eq!(s.flags(), Flags::only(Flag::StaleCalibration), "{why}");
        }
        // Within 0.1 % the path length counts as the same.
        assert!(!Staleness::of(&calibration(1_000, 10.005, 2), &day, 1_000).is_stale());
        // No age limit: never too old.
        assert!(!Staleness::of(&calibration(0, 10.0, 2), &settings(0), u32::MAX).is_stale());
        // Settings built by hand with a NaN path: stale, never silently fresh.
        let mut nan = day;
        nan.path_length_mm = f32::NAN;
        assert!(Staleness::of(&calibration(1_000, 10.0, 2), &nan, 1_000).other_path_length);
    }
}
