//! Calibration standards and the fixed-capacity set that holds them.

use core::fmt;

use crate::photometry::Absorbance;

/// One calibration standard: a solution of known concentration and its measured absorbance.
///
/// `absorbance` is the mean of `replicates` reads and `absorbance_sd` the standard deviation of
/// a single read (0 when unknown, e.g. a single read). A standard read three times may be entered
/// either as one `Standard` with `replicates: 3` or as three standards of the same concentration
/// with `replicates: 1`; both feed the lack-of-fit test's pure error.
///
/// Concentrations are in the user's unit (mg/L, µmol/L, ...), stored as f32 (7 significant
/// digits, far beyond the accuracy of a prepared standard); the fit itself runs in f64.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Standard {
    /// Known concentration, >= 0.
    pub concentration: f32,
    /// Mean measured absorbance (blank-corrected; may be slightly negative for a zero standard).
    pub absorbance: Absorbance,
    /// Standard deviation of a single read of this standard, >= 0 (0 = unknown).
    pub absorbance_sd: f32,
    /// Number of reads averaged into `absorbance`, >= 1.
    pub replicates: u16,
}

/// Why a standard is not acceptable.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StandardError {
    /// The concentration or the standard deviation was NaN or infinite.
    NotFinite,
    /// The concentration was below zero.
    NegativeConcentration,
    /// The absorbance standard deviation was below zero.
    NegativeUncertainty,
    /// `replicates` was 0.
    ZeroReplicates,
}

impl fmt::Display for StandardError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            StandardError::NotFinite => "standard has a value that is not a finite number",
            StandardError::NegativeConcentration => "standard concentration is negative",
            StandardError::NegativeUncertainty => {
                "standard absorbance standard deviation is negative"
            }
            StandardError::ZeroReplicates => "standard has zero replicate reads",
        })
    }
}

impl core::error::Error for StandardError {}

impl Standard {
    /// A standard read once (no standard deviation known).
    pub fn new(concentration: f32, absorbance: Absorbance) -> Result<Standard, StandardError> {
        Standard::with_replicates(concentration, absorbance, 0.0, 1)
    }

    /// A standard whose absorbance is the mean of `replicates` reads with single-read standard
    /// deviation `absorbance_sd`.
    pub fn with_replicates(
        concentration: f32,
        absorbance: Absorbance,
        absorbance_sd: f32,
        replicates: u16,
    ) -> Result<Standard, StandardError> {
        let s = Standard {
            concentration,
            absorbance,
            absorbance_sd,
            replicates,
        };
        s.validate().map(|()| s)
    }

    /// Checks every field (the fields are public, so a standard built literally may be invalid).
    pub fn validate(&self) -> Result<(), StandardError> {
        if !self.concentration.is_finite()
            || !self.absorbance_sd.is_finite()
            || !self.absorbance.value().is_finite()
        {
            Err(StandardError::NotFinite)
        } else if self.concentration < 0.0 {
            Err(StandardError::NegativeConcentration)
        } else if self.absorbance_sd < 0.0 {
            Err(StandardError::NegativeUncertainty)
        } else if self.replicates == 0 {
            Err(StandardError::ZeroReplicates)
        } else {
            Ok(())
        }
    }
}

/// Error adding a standard to a [`CalibrationSet`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SetError {
    /// The set already holds its capacity of standards; the standard was not added.
    Full {
        /// The set's capacity.
        capacity: usize,
    },
    /// The standard is invalid; it was not added.
    Invalid(StandardError),
}

impl fmt::Display for SetError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SetError::Full { capacity } => {
                write!(f, "calibration set is full ({capacity} standards)")
            }
            SetError::Invalid(e) => write!(f, "invalid standard: {e}"),
        }
    }
}

impl core::error::Error for SetError {}

/// Up to `N` calibration standards (default 16) in fixed storage, in the order they were added.
///
/// Only valid standards get in (see [`Standard::validate`]). Equal concentrations are allowed
/// (replicate standards).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CalibrationSet<const N: usize = 16> {
    standards: heapless::Vec<Standard, N>,
}

impl<const N: usize> CalibrationSet<N> {
    /// An empty set.
    pub const fn new() -> Self {
        CalibrationSet {
            standards: heapless::Vec::new(),
        }
    }

    /// A set holding `standards`, checked one by one as by [`CalibrationSet::push`].
    pub fn from_standards(standards: &[Standard]) -> Result<Self, SetError> {
        let mut set = CalibrationSet::new();
        for s in standards {
            set.push(*s)?;
        }
        Ok(set)
    }

    /// Adds a standard; a typed error (and no change) if it is invalid or the set is full.
    pub fn push(&mut self, standard: Standard) -> Result<(), SetError> {
        standard.validate().map_err(SetError::Invalid)?;
        self.standards
            .push(standard)
            .map_err(|_| SetError::Full { capacity: N })
    }

    /// Removes and returns the standard at `index` (later ones move up); `None` if out of range.
    pub fn remove(&mut self, index: usize) -> Option<Standard> {
        if index < self.standards.len() {
            Some(self.standards.remove(index))
        } else {
            None
        }
    }

    /// Removes every standard.
    pub fn clear(&mut self) {
        self.standards.clear();
    }

    /// The standards, in the order they were added.
    pub fn standards(&self) -> &[Standard] {
        &self.standards
    }

    /// Number of standards held.
    pub fn len(&self) -> usize {
        self.standards.len()
    }

    /// Whether the set holds no standard.
    pub fn is_empty(&self) -> bool {
        self.standards.is_empty()
    }

    /// Capacity `N`.
    pub const fn capacity(&self) -> usize {
        N
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn a(v: f32) -> Absorbance {
        Absorbance::new(v).unwrap()
    }

    #[test]
    fn rejects_invalid_standards() {
        assert_eq!(
            Standard::new(-1.0, a(0.1)),
            Err(StandardError::NegativeConcentration)
        );
        assert_eq!(
            Standard::new(f32::NAN, a(0.1)),
            Err(StandardError::NotFinite)
        );
        assert_eq!(
            Standard::with_replicates(1.0, a(0.1), -0.1, 2),
            Err(StandardError::NegativeUncertainty)
        );
        assert_eq!(
            Standard::with_replicates(1.0, a(0.1), 0.1, 0),
            Err(StandardError::ZeroReplicates)
        );
    }

    #[test]
    fn push_until_full() {
        let mut set: CalibrationSet<2> = CalibrationSet::new();
        let s = Standard::new(1.0, a(0.1)).unwrap();
        assert!(set.push(s).is_ok());
        assert!(set.push(s).is_ok());
        assert_eq!(set.push(s), Err(SetError::Full { capacity: 2 }));
        assert_eq!(set.len(), 2);
        let bad = Standard {
            concentration: -2.0,
            ..s
        };
        let mut one: CalibrationSet<4> = CalibrationSet::new();
        assert_eq!(
            one.push(bad),
            Err(SetError::Invalid(StandardError::NegativeConcentration))
        );
        assert!(one.is_empty());
        assert_eq!(set.remove(5), None);
        assert_eq!(set.remove(0), Some(s));
        assert_eq!(set.len(), 1);
    }
}
