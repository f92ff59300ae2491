//! Quality flags that travel with every result.
//!
//! Flags are not errors: an error means an input could not yield a result at all, a flag means a
//! result exists but a person must know something about it before trusting it (the lit level was
//! clipped, the reads drifted, the sample lies above the highest standard, ...).
//!
//! The vocabulary is fixed and shared by every layer and by the recorded-session replay output
//! (`saturated`, `low_signal`, `above_range`, `below_lod`, `below_loq`, `unstable`, `no_blank`,
//! `no_calibration`, `no_dark`, `stale_calibration`). [`Flag::name`] gives the exact word used in
//! JSON and CSV output; [`Flag::advice`] gives the sentence a report shows to a person.

use core::fmt;

/// One quality flag.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u16)]
pub enum Flag {
    /// A lit read reached the detector's full scale: the level is clipped and too low in truth.
    Saturated = 1 << 0,
    /// The lit level is not clearly above the dark level: absorbance too high to measure.
    LowSignal = 1 << 1,
    /// The reads drifted or scattered beyond what their noise explains.
    Unstable = 1 << 2,
    /// No dark reads were available: the dark level was taken as zero.
    NoDark = 1 << 3,
    /// No blank was measured on this channel before the measurement.
    NoBlank = 1 << 4,
    /// The absorbance lies above the highest calibration standard (extrapolated).
    AboveRange = 1 << 5,
    /// The concentration is below the limit of detection.
    BelowLod = 1 << 6,
    /// The concentration is below the limit of quantification.
    BelowLoq = 1 << 7,
    /// No usable calibration exists for this channel.
    NoCalibration = 1 << 8,
    /// The calibration used is older than allowed or was made with other settings.
    StaleCalibration = 1 << 9,
}

impl Flag {
    /// Every flag, in the order reports list them.
    pub const ALL: [Flag; 10] = [
        Flag::Saturated,
        Flag::LowSignal,
        Flag::AboveRange,
        Flag::BelowLod,
        Flag::BelowLoq,
        Flag::Unstable,
        Flag::NoBlank,
        Flag::NoCalibration,
        Flag::NoDark,
        Flag::StaleCalibration,
    ];

    /// The flag's word in the fixed vocabulary of the replay output (`saturated`, `low_signal`, ...).
    pub const fn name(self) -> &'static str {
        match self {
            Flag::Saturated => "saturated",
            Flag::LowSignal => "low_signal",
            Flag::Unstable => "unstable",
            Flag::NoDark => "no_dark",
            Flag::NoBlank => "no_blank",
            Flag::AboveRange => "above_range",
            Flag::BelowLod => "below_lod",
            Flag::BelowLoq => "below_loq",
            Flag::NoCalibration => "no_calibration",
            Flag::StaleCalibration => "stale_calibration",
        }
    }

    /// Parses a word of the fixed vocabulary.
    pub fn from_name(name: &str) -> Option<Flag> {
        Flag::ALL.iter().copied().find(|f| f.name() == name)
    }

    /// What the flag means for the person reading the result, and what to do about it.
    pub const fn advice(self) -> &'static str {
        match self {
            Flag::Saturated => "detector saturated: lower the LED drive or the gain and repeat",
            Flag::LowSignal => "absorbance too high to measure: dilute and repeat",
            Flag::Unstable => {
                "reads drifted or scattered: check for bubbles, let the LED warm up, repeat"
            }
            Flag::NoDark => "no dark reads: result assumes zero dark level",
            Flag::NoBlank => "no blank on this channel: measure a blank first",
            Flag::AboveRange => "above the highest standard: dilute and repeat",
            Flag::BelowLod => "below the limit of detection: report as not detected",
            Flag::BelowLoq => {
                "below the limit of quantification: report as detected, not quantified"
            }
            Flag::NoCalibration => "no calibration on this channel: read standards first",
            Flag::StaleCalibration => "calibration is stale or from other settings: recalibrate",
        }
    }

    const fn bit(self) -> u16 {
        self as u16
    }
}

impl fmt::Display for Flag {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A set of [`Flag`]s, one bit each (`Copy`, two bytes).
#[derive(Clone, Copy, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Flags(u16);

impl Flags {
    /// The empty set.
    pub const NONE: Flags = Flags(0);

    /// The set holding just `flag`.
    pub const fn only(flag: Flag) -> Flags {
        Flags(flag.bit())
    }

    /// Adds `flag`.
    pub fn insert(&mut self, flag: Flag) {
        self.0 |= flag.bit();
    }

    /// Adds `flag` when `condition` holds.
    pub fn set_if(&mut self, flag: Flag, condition: bool) {
        if condition {
            self.insert(flag);
        }
    }

    /// Returns the set with `flag` added.
    #[must_use]
    pub const fn with(self, flag: Flag) -> Flags {
        Flags(self.0 | flag.bit())
    }

    /// Removes `flag`.
    pub fn remove(&mut self, flag: Flag) {
        self.0 &= !flag.bit();
    }

    /// Whether `flag` is in the set.
    pub const fn contains(self, flag: Flag) -> bool {
        self.0 & flag.bit() != 0
    }

    /// Whether no flag is set.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// The union of two sets.
    #[must_use]
    pub const fn union(self, other: Flags) -> Flags {
        Flags(self.0 | other.0)
    }

    /// The raw bits (for persistence); see [`Flags::from_bits`].
    pub const fn bits(self) -> u16 {
        self.0
    }

    /// Rebuilds a set from raw bits; `None` if a bit outside the vocabulary is set.
    pub fn from_bits(bits: u16) -> Option<Flags> {
        let known = Flag::ALL.iter().fold(0u16, |acc, f| acc | f.bit());
        if bits & !known == 0 {
            Some(Flags(bits))
        } else {
            None
        }
    }

    /// The flags in the set, in report order.
    pub fn iter(self) -> impl Iterator<Item = Flag> {
        Flag::ALL.into_iter().filter(move |f| self.contains(*f))
    }
}

impl From<Flag> for Flags {
    fn from(flag: Flag) -> Flags {
        Flags::only(flag)
    }
}

impl fmt::Debug for Flags {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_set().entries(self.iter()).finish()
    }
}

impl fmt::Display for Flags {
    /// Space-separated words of the vocabulary, or `-` for the empty set.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_empty() {
            return f.write_str("-");
        }
        let mut first = true;
        for flag in self.iter() {
            if !first {
                f.write_str(" ")?;
            }
            first = false;
            f.write_str(flag.name())?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip_and_are_unique() {
        for flag in Flag::ALL {
            assert_eq!(Flag::from_name(flag.name()), Some(flag));
        }
        let all = Flag::ALL.iter().fold(Flags::NONE, |s, f| s.with(*f));
        assert_eq!(all.iter().count(), Flag::ALL.len());
        assert_eq!(Flag::from_name("bogus"), None);
    }

    #[test]
    fn bits_round_trip_and_reject_unknown_bits() {
        let s = Flags::only(Flag::Saturated).with(Flag::NoBlank);
        assert_eq!(Flags::from_bits(s.bits()), Some(s));
        assert_eq!(Flags::from_bits(1 << 15), None);
    }
}
