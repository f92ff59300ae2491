//! Streaming accumulation of raw reads: count, mean, variance, extremes, clipping and trend.
//!
//! # Algorithm
//! The accumulator keeps exact integer sums of the reads *shifted by the first read*
//! (d_k = x_k - x_0, the "shifted data" method): Σd, Σd² and Σk·d with k the read index. The
//! mean, the variance and the least-squares trend are derived from these sums only when asked,
//! with the cancellation-prone differences (n·Σd² - (Σd)², n·Σkd - Σk·Σd) formed in exact 128-bit
//! integer arithmetic before the single conversion to `f32`. The variance is therefore exact up
//! to the final rounding, whatever the offset of the reads (a 24-bit count with a few counts of
//! noise loses nothing), and no division happens per read.
//!
//! # Capacity
//! Every sum is updated with checked arithmetic; a read that would overflow any of them is
//! refused with [`AccumulateError::Full`] and leaves the state unchanged, so no data are lost
//! silently. With 24-bit reads the worst case (every read 2^24 - 1 counts away from the first)
//! still holds [`GUARANTEED_READS`] = 65 536 reads; reads that stay close together hold far more.
//!
//! # Cost
//! One [`ReadAccumulator::push`] is a compare against full scale, min/max updates and three
//! 64-bit multiply-adds: see DEVELOPERS.md ("Budgets") for the instruction count measured with
//! callgrind on the host (`examples/accumulate_bench.rs`).

use core::fmt;

use crate::counts::FullScale;

/// Reads an accumulator is guaranteed to hold whatever their values.
pub const GUARANTEED_READS: u32 = 65_536;

/// Error feeding or summarising a [`ReadAccumulator`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AccumulateError {
    /// The read is larger than the detector's full scale: it cannot come from this detector.
    AboveFullScale {
        /// The offending read.
        read: u32,
    },
    /// The accumulator cannot take another read without overflow (at least 65 536 reads fit).
    Full,
    /// No reads were accumulated: there is nothing to summarise.
    Empty,
}

impl fmt::Display for AccumulateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            AccumulateError::AboveFullScale { read } => {
                write!(f, "read {read} is above the detector's full scale")
            }
            AccumulateError::Full => f.write_str("accumulator is full"),
            AccumulateError::Empty => f.write_str("no reads accumulated"),
        }
    }
}

impl core::error::Error for AccumulateError {}

/// Summary statistics of the accumulated reads (counts).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReadStats {
    /// Number of reads.
    pub count: u32,
    /// Arithmetic mean of the reads.
    pub mean: f32,
    /// Sample variance (n - 1 in the denominator); 0 for a single read.
    pub variance: f32,
    /// Smallest read.
    pub min: u32,
    /// Largest read.
    pub max: u32,
    /// Number of reads at the detector's full scale (clipped).
    pub at_full_scale: u32,
}

impl ReadStats {
    /// Sample standard deviation of one read.
    pub fn std_dev(&self) -> f32 {
        crate::math::sqrtf(self.variance)
    }

    /// Standard error of the mean, s / sqrt(n).
    pub fn std_error(&self) -> f32 {
        if self.count == 0 {
            return 0.0;
        }
        crate::math::sqrtf(self.variance / self.count as f32)
    }
}

/// Least-squares trend of the reads against their index (drift within one series).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Trend {
    /// Slope in counts per read.
    pub slope: f32,
    /// Standard error of the slope, from the residual scatter about the line.
    pub slope_std_error: f32,
    /// Number of reads the trend rests on (at least 3).
    pub count: u32,
}

impl Trend {
    /// Total change across the series, slope × (n - 1), in counts.
    pub fn span_change(&self) -> f32 {
        self.slope * (self.count.saturating_sub(1)) as f32
    }

    /// Standard error of [`Trend::span_change`].
    pub fn span_change_std_error(&self) -> f32 {
        self.slope_std_error * (self.count.saturating_sub(1)) as f32
    }
}

/// Fixed-size streaming accumulator of raw reads from one detector (48 bytes, `Copy`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReadAccumulator {
    full_scale: FullScale,
    count: u32,
    shift: u32,
    min: u32,
    max: u32,
    at_full_scale: u32,
    sum: i64,
    sum_sq: u64,
    sum_kd: i64,
}

impl ReadAccumulator {
    /// An empty accumulator for a detector of the given full scale.
    pub const fn new(full_scale: FullScale) -> ReadAccumulator {
        ReadAccumulator {
            full_scale,
            count: 0,
            shift: 0,
            min: u32::MAX,
            max: 0,
            at_full_scale: 0,
            sum: 0,
            sum_sq: 0,
            sum_kd: 0,
        }
    }

    /// The detector's full scale.
    pub const fn full_scale(&self) -> FullScale {
        self.full_scale
    }

    /// Number of reads accumulated.
    pub const fn count(&self) -> u32 {
        self.count
    }

    /// Number of reads at full scale so far.
    pub const fn at_full_scale(&self) -> u32 {
        self.at_full_scale
    }

    /// Whether no read was accumulated.
    pub const fn is_empty(&self) -> bool {
        self.count == 0
    }

    /// Forgets every read, keeping the full scale.
    pub fn clear(&mut self) {
        *self = ReadAccumulator::new(self.full_scale);
    }

    /// Adds one raw read.
    ///
    /// Errors: [`AccumulateError::AboveFullScale`] for a read beyond the full scale,
    /// [`AccumulateError::Full`] when a sum would overflow. On error nothing changes.
    #[inline]
    pub fn push(&mut self, read: u32) -> Result<(), AccumulateError> {
        let fs = self.full_scale.value();
        if read > fs {
            return Err(AccumulateError::AboveFullScale { read });
        }
        if self.count == 0 {
            self.shift = read;
        }
        // |d| < 2^24, k < 2^32: every product below fits its type; only the sums can overflow.
        let d = i64::from(read) - i64::from(self.shift);
        let k = i64::from(self.count);
        let d2 = d.unsigned_abs() * d.unsigned_abs();
        if self.count < GUARANTEED_READS {
            // Fast path: below 2^16 reads no sum can overflow (|Σd| < 2^40, Σd² < 2^64,
            // |Σkd| < 2^56), so plain adds are exact.
            self.count += 1;
            self.sum += d;
            self.sum_sq += d2;
            self.sum_kd += k * d;
        } else {
            let (Some(count), Some(sum), Some(sum_sq), Some(sum_kd)) = (
                self.count.checked_add(1),
                self.sum.checked_add(d),
                self.sum_sq.checked_add(d2),
                self.sum_kd.checked_add(k * d),
            ) else {
                return Err(AccumulateError::Full);
            };
            self.count = count;
            self.sum = sum;
            self.sum_sq = sum_sq;
            self.sum_kd = sum_kd;
        }
        self.min = self.min.min(read);
        self.max = self.max.max(read);
        if read == fs {
            self.at_full_scale += 1;
        }
        Ok(())
    }

    /// Mean, variance, extremes and clipping count of the reads so far.
    pub fn stats(&self) -> Result<ReadStats, AccumulateError> {
        if self.count == 0 {
            return Err(AccumulateError::Empty);
        }
        let n = self.count as f32;
        let mean = self.shift as f32 + (self.sum as f32) / n;
        let variance = if self.count > 1 {
            // n·Σd² - (Σd)² >= 0 exactly (Cauchy-Schwarz), formed without rounding.
            let n_i = i128::from(self.count);
            let s = i128::from(self.sum);
            let numerator = n_i * i128::from(self.sum_sq) - s * s;
            let denominator = n_i * (n_i - 1);
            (numerator.max(0) as f32) / (denominator as f32)
        } else {
            0.0
        };
        Ok(ReadStats {
            count: self.count,
            mean,
            variance,
            min: self.min,
            max: self.max,
            at_full_scale: self.at_full_scale,
        })
    }

    /// Mean of the reads so far.
    pub fn mean(&self) -> Result<f32, AccumulateError> {
        self.stats().map(|s| s.mean)
    }

    /// Least-squares trend of the reads against their index; `None` below three reads.
    pub fn trend(&self) -> Option<Trend> {
        if self.count < 3 {
            return None;
        }
        let n = i128::from(self.count);
        let sk = n * (n - 1) / 2; // Σk, k = 0 .. n-1
        let skk = (n - 1) * n * (2 * n - 1) / 6; // Σk²
        let sd = i128::from(self.sum);
        // n² × the centred sums: exact integers.
        let sxx = n * skk - sk * sk;
        let sxy = n * i128::from(self.sum_kd) - sk * sd;
        let syy = n * i128::from(self.sum_sq) - sd * sd;
        if sxx <= 0 {
            return None;
        }
        let sxx_f = sxx as f64;
        let sxy_f = sxy as f64;
        let slope = sxy_f / sxx_f;
        // Residual sum of squares × n, clamped at 0 against the last rounding.
        let rss_n = (syy as f64 - sxy_f * slope).max(0.0);
        let s2 = rss_n / (n as f64) / ((n - 2) as f64);
        let se = libm::sqrt(s2 / (sxx_f / n as f64));
        Some(Trend {
            slope: slope as f32,
            slope_std_error: se as f32,
            count: self.count,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn acc(fs: u32) -> ReadAccumulator {
        match FullScale::new(fs) {
            Ok(f) => ReadAccumulator::new(f),
            Err(e) => panic!("{e}"),
        }
    }

    #[test]
    fn mean_and_variance_of_a_small_set() {
        // Worked by hand (common practice, textbook definition of the sample variance):
        // 2, 4, 4, 4, 5, 5, 7, 9 -> mean 5, sum of squared deviations 32, s² = 32/7.
        let mut a = acc(4095);
        for x in [2, 4, 4, 4, 5, 5, 7, 9] {
            a.push(x).unwrap();
        }
        let s = a.stats().unwrap();
        assert_eq!(s.count, 8);
        assert!((s.mean - 5.0).abs() < 1e-6);
        assert!((s.variance - 32.0 / 7.0).abs() < 1e-6);
        assert_eq!((s.min, s.max, s.at_full_scale), (2, 9, 0));
    }

    #[test]
    fn variance_is_exact_at_a_large_offset() {
        // Offset 16 777 000 with deviations 0,1,2: float-naive sums would lose it all.
        let mut a = acc(crate::counts::MAX_COUNT);
        for d in [0, 1, 2, 0, 1, 2] {
            a.push(16_777_000 + d).unwrap();
        }
        let s = a.stats().unwrap();
        assert!((s.variance - 0.8).abs() < 1e-6, "{}", s.variance);
    }

    #[test]
    fn refuses_reads_above_full_scale_and_counts_clipped() {
        let mut a = acc(1000);
        assert_eq!(
            a.push(1001),
            Err(AccumulateError::AboveFullScale { read: 1001 })
        );
        a.push(1000).unwrap();
        a.push(10).unwrap();
        assert_eq!(a.stats().unwrap().at_full_scale, 1);
        assert_eq!(a.count(), 2);
    }

    #[test]
    fn empty_is_an_error() {
        assert_eq!(acc(10).stats(), Err(AccumulateError::Empty));
        assert_eq!(acc(10).trend(), None);
    }

    #[test]
    fn holds_65536_worst_case_reads() {
        let mut a = acc(crate::counts::MAX_COUNT);
        a.push(0).unwrap();
        for _ in 1..GUARANTEED_READS {
            a.push(crate::counts::MAX_COUNT).unwrap();
        }
        assert_eq!(a.count(), GUARANTEED_READS);
        let s = a.stats().unwrap();
        assert!(s.mean > 16_776_900.0);
    }

    #[test]
    fn trend_finds_a_ramp() {
        let mut a = acc(4095);
        for k in 0..20u32 {
            a.push(100 + 2 * k + (k % 2)).unwrap();
        }
        let t = a.trend().unwrap();
        assert!((t.slope - 2.0).abs() < 0.05, "{t:?}");
        assert!(t.slope_std_error < 0.05);
    }
}
