//! Raw detector counts and the full scale they are read against.
//!
//! A read is an unsigned integer count from an ADC or a digital light sensor, at most 24 bits
//! wide ([`MAX_COUNT`]). Every detector has a full scale: the largest count it can report. A read
//! at full scale is clipped (the true level may be higher), which is why the accumulators count
//! such reads and the photometry flags them as [`crate::Flag::Saturated`].

use core::fmt;

/// The largest raw count lumisorb accepts (24 bits).
pub const MAX_COUNT: u32 = 0x00FF_FFFF;

/// Error building a [`FullScale`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CountError {
    /// A full scale of zero counts cannot measure anything.
    Zero,
    /// The full scale is wider than 24 bits ([`MAX_COUNT`]).
    TooLarge,
}

impl fmt::Display for CountError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            CountError::Zero => "full scale must be at least one count",
            CountError::TooLarge => "full scale exceeds 24 bits (16777215 counts)",
        })
    }
}

impl core::error::Error for CountError {}

/// The largest count a detector reports (for example 4095 for a 12-bit ADC).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FullScale(u32);

impl FullScale {
    /// A full scale of `max` counts: 1 ..= [`MAX_COUNT`].
    pub const fn new(max: u32) -> Result<FullScale, CountError> {
        if max == 0 {
            Err(CountError::Zero)
        } else if max > MAX_COUNT {
            Err(CountError::TooLarge)
        } else {
            Ok(FullScale(max))
        }
    }

    /// A full scale of `bits` bits: 2^bits - 1 counts (1 ..= 24 bits).
    pub const fn from_bits(bits: u32) -> Result<FullScale, CountError> {
        if bits == 0 {
            Err(CountError::Zero)
        } else if bits > 24 {
            Err(CountError::TooLarge)
        } else {
            Ok(FullScale((1u32 << bits) - 1))
        }
    }

    /// The full scale in counts.
    pub const fn value(self) -> u32 {
        self.0
    }

    /// Whether `read` is at (or above) full scale, that is clipped.
    pub const fn is_clipped(self, read: u32) -> bool {
        read >= self.0
    }
}

impl fmt::Display for FullScale {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} counts", self.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn full_scale_bounds() {
        assert_eq!(FullScale::new(0), Err(CountError::Zero));
        assert_eq!(FullScale::new(MAX_COUNT + 1), Err(CountError::TooLarge));
        assert_eq!(
            FullScale::new(MAX_COUNT).map(FullScale::value),
            Ok(MAX_COUNT)
        );
        // Common practice: an n-bit converter reports 0 ..= 2^n - 1.
        assert_eq!(FullScale::from_bits(12).map(FullScale::value), Ok(4095));
        assert_eq!(
            FullScale::from_bits(24).map(FullScale::value),
            Ok(MAX_COUNT)
        );
        assert_eq!(FullScale::from_bits(25), Err(CountError::TooLarge));
    }
}
