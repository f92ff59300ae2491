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
            let n = u64::from(self.count);
            let s = self.sum.unsigned_abs();
            let numerator = wide(n, self.sum_sq).saturating_sub(wide(s, s));
            let denominator = n * (n - 1); // < 2^64 for n < 2^32
            to_f32(numerator) / to_f32(u128::from(denominator))
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
        let n = u64::from(self.count);
        // n² × the centred sums, as exact integers: Σk = n(n-1)/2 and Σk² give
        // S_kk = n·Σk² - (Σk)² = n²(n²-1)/12 = [n(n-1)/2]·[n(n+1)/2]/3, where the 3 is divided
        // out of whichever of n-1, n, n+1 is its multiple, in 32 bits (the halvings stay exact:
        // dividing by 3 keeps parity); S_kd = n·Σkd - Σk·Σd; S_dd = n·Σd² - (Σd)² (>= 0 by
        // Cauchy-Schwarz).
        let sk = n * (n - 1) / 2;
        let third = u64::from(self.count / 3);
        let sxx = match self.count % 3 {
            0 => wide(third * (n - 1) / 2, n * (n + 1) / 2),
            1 => wide(n * third / 2, n * (n + 1) / 2),
            _ => wide(sk, n * (third + 1) / 2),
        };
        let sxy = signed_wide(n, self.sum_kd) - signed_wide(sk, self.sum);
        let sd = self.sum.unsigned_abs();
        let syy = wide(n, self.sum_sq).saturating_sub(wide(sd, sd));
        if sxx == 0 {
            return None;
        }
        // f32 from here (the device path): the sums above are exact, so the slope is a few f32
        // roundings from its exact value. The residual sum is a difference: f32 leaves it a few
        // 2^-24 of S_dd off, which matters only when the trend explains nearly all the scatter,
        // i.e. far beyond any drift threshold (the drift test's verdict is the same).
        let nf = self.count as f32;
        let sxx_f = to_f32(sxx);
        let sxy_f = to_f32(sxy.unsigned_abs());
        let slope = if sxy < 0 { -sxy_f } else { sxy_f } / sxx_f;
        // Residual sum of squares × n = S_dd - S_kd²/S_kk, clamped at 0 against rounding.
        let rss_n = (to_f32(syy) - sxy_f * (sxy_f / sxx_f)).max(0.0);
        let s2 = rss_n / nf / (self.count - 2) as f32;
        let se = crate::math::sqrtf(s2 / (sxx_f / nf));
        Some(Trend {
            slope,
            slope_std_error: se,
            count: self.count,
        })
    }
}

/// a·b exactly (one shared copy of the widening multiply).
#[inline(never)]
fn wide(a: u64, b: u64) -> u128 {
    u128::from(a) * u128::from(b)
}

/// a·b exactly, for |a·b| < 2^127 (the accumulator's sums keep far inside).
fn signed_wide(a: u64, b: i64) -> i128 {
    let m = wide(a, b.unsigned_abs()) as i128;
    if b < 0 {
        -m
    } else {
        m
    }
}

/// `x` cut to its 64 leading bits with a sticky bit: (m, e), x ≈ m·2^e, where rounding m to
/// 53 or fewer bits gives the same result as rounding x (the lost bits only matter as
/// "nonzero", and the sticky bit keeps that).
fn sticky64(x: u128) -> (u64, i32) {
    let hi = (x >> 64) as u64;
    if hi == 0 {
        return (x as u64, 0);
    }
    let s = 64 - hi.leading_zeros(); // 1..=64 bits to drop
    let lost = (x << (128 - s)) != 0;
    ((x >> s) as u64 | u64::from(lost), s as i32)
}

/// `x as f32`, correctly rounded: a second sticky cut to 32 bits, then the 32-bit conversion
/// (one FPU instruction on a Cortex-M4F), scaled by an exact power of two.
fn to_f32(x: u128) -> f32 {
    let (m, e) = sticky64(x);
    let hi = (m >> 32) as u32;
    let (m32, e32) = if hi == 0 {
        (m as u32, e)
    } else {
        let s = 32 - hi.leading_zeros(); // 1..=32
        let lost = (m << (64 - s)) != 0;
        ((m >> s) as u32 | u32::from(lost), e + s as i32)
    };
    m32 as f32 * f32::from_bits(((127 + e32) as u32) << 23)
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

    /// The previous formulas in plain 128-bit arithmetic (the reference for the cheaper exact
    /// forms above): the variance, and the trend's slope, residual sum of squares × n and S_dd
    /// in f64.
    fn reference(a: &ReadAccumulator) -> (f32, Option<(f64, f64, f64)>) {
        let n = i128::from(a.count);
        let s = i128::from(a.sum);
        let variance = if a.count > 1 {
            ((n * i128::from(a.sum_sq) - s * s).max(0) as f32) / ((n * (n - 1)) as f32)
        } else {
            0.0
        };
        if a.count < 3 {
            return (variance, None);
        }
        let sk = n * (n - 1) / 2;
        let skk = (n - 1) * n * (2 * n - 1) / 6;
        let sxx = n * skk - sk * sk;
        let sxy = n * i128::from(a.sum_kd) - sk * s;
        let syy = n * i128::from(a.sum_sq) - s * s;
        let (sxx_f, sxy_f) = (sxx as f64, sxy as f64);
        let slope = sxy_f / sxx_f;
        let rss_n = (syy as f64 - sxy_f * slope).max(0.0);
        (variance, Some((slope, rss_n, syy as f64)))
    }

    fn check_against_reference(a: &ReadAccumulator) {
        let (variance, reference) = reference(a);
        if a.count > 0 {
            assert_eq!(
                a.stats().unwrap().variance.to_bits(),
                variance.to_bits(),
                "{a:?}"
            );
        }
        let ours = a.trend();
        assert_eq!(ours.is_some(), reference.is_some());
        let (Some(t), Some((slope, rss_n, syy))) = (ours, reference) else {
            return;
        };
        // The trend is f32 from exact sums: a few f32 roundings (ε = 2^-24) from the f64 figures;
        // the residual sum, a difference, to a few ε of S_dd.
        let eps = f64::from(f32::EPSILON) / 2.0;
        assert!(
            (f64::from(t.slope) - slope).abs() <= 4.0 * eps * slope.abs(),
            "{a:?}"
        );
        let n = f64::from(a.count);
        let sxx = n * n * (n * n - 1.0) / 12.0;
        let ours_rss_n = f64::from(t.slope_std_error).powi(2) * (sxx / n) * n * (n - 2.0);
        assert!(
            (ours_rss_n - rss_n).abs() <= 8.0 * eps * syy.abs() + 8.0 * eps * rss_n,
            "{a:?}: {ours_rss_n} vs {rss_n}"
        );
    }

    #[test]
    fn exact_forms_agree_with_128_bit_arithmetic() {
        // Streams of reads (simulated: a xorshift generator, ramps, steps, constant runs).
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        for len in 0..200u32 {
            for kind in 0..4 {
                let mut a = acc(crate::counts::MAX_COUNT);
                for k in 0..len {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    let read = match kind {
                        0 => (x % 16_777_216) as u32,
                        1 => 8_000_000 + (x % 7) as u32,
                        2 => 1_000 + 3 * k + (x % 2) as u32,
                        _ => 5,
                    };
                    a.push(read).unwrap();
                    check_against_reference(&a);
                }
            }
        }
        // Sums far beyond what a short stream reaches (the conversions' 128-bit range).
        for &(count, sum, sum_sq, sum_kd) in &[
            (u32::MAX, i64::MAX / 3, u64::MAX, i64::MIN / 5),
            (
                u32::MAX - 1,
                -(1i64 << 60),
                u64::MAX / 2 + 12_345,
                1i64 << 62,
            ),
            (
                3_000_000_001,
                123_456_789_012_345,
                987_654_321_098_765_432,
                -55_555_555_555_555,
            ),
            (65_537, -1, 1, 0),
            (4, 0, 0, 0),
        ] {
            let mut a = acc(crate::counts::MAX_COUNT);
            a.count = count;
            a.sum = sum;
            a.sum_sq = sum_sq;
            a.sum_kd = sum_kd;
            check_against_reference(&a);
        }
        // Conversions at and around powers of two and ties (reference: Rust's `as`).
        for e in 0..128u32 {
            let p = 1u128 << e;
            let ties = [p | (p >> 24), p | (p >> 24) | 1];
            for v in [p, p - 1, p + 1, p | (p >> 25)].into_iter().chain(ties) {
                assert_eq!(to_f32(v).to_bits(), (v as f32).to_bits(), "{v}");
            }
        }
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
