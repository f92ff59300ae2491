//! Interleaved dark and lit reads: the dark-corrected net signal of one measurement.
//!
//! A measurement alternates reads with the LED off (dark: detector offset, dark current,
//! ambient light leaking in) and on (lit). Interleaving makes a slow dark drift fall equally on
//! both, so it cancels in the difference. [`DarkLitSeries`] takes the reads of the measuring
//! detector and, where fitted, of the reference detector that watches the LED before the
//! cuvette, and [`DarkLitSeries::finish`] gives a [`NetSignal`]:
//!
//! * level = lit location - dark location, for each detector;
//! * location: the robust Huber estimate of [`crate::robust`] while at most `N` reads of that
//!   kind were taken, the plain mean beyond (the buffer keeps the first `N` only);
//! * standard error u(net) = sqrt(u(lit)² + u(dark)²), each the standard error of its location,
//!   floored at the converter's resolution: a stream of n reads never reports less than
//!   sqrt(q²/12 / n) with q = 1 count (the rectangular distribution of a digital indication's
//!   resolution, JCGM 100:2008 "GUM", F.2.2.1), so a quiet converter whose reads are all equal
//!   does not claim zero uncertainty;
//! * flags: [`Flag::Saturated`] when a lit read reached full scale, [`Flag::NoDark`] when no
//!   dark read was taken (the dark level is then taken as zero, with zero uncertainty),
//!   [`Flag::Unstable`] when the reads drifted beyond what their noise explains (below).
//!
//! # Drift check
//! Each stream keeps its least-squares trend ([`crate::accumulator::Trend`]). The change of the
//! net level across the measurement is Δ = Δ_lit - Δ_dark (each slope × (n - 1), so lit and dark
//! streams of the same time span compare whatever their read counts), with standard error
//! u(Δ) from the slopes' standard errors. With a reference detector, the *relative* change of the
//! signal/reference ratio is tested instead, so LED drift that the reference follows is not
//! called instability. The statistic t = |Δ| / u(Δ) rests on estimated slope errors, so it is
//! compared with Student's t distribution (ν = n - 2 for the shortest stream, conservative):
//! `Unstable` is raised when the two-sided tail probability falls below
//! [`SeriesConfig::drift_false_alarm`] (default 1e-4: about one false alarm in 10 000 stable
//! measurements, whatever the number of reads). It is also raised when the robust estimate had
//! to reject more than [`SeriesConfig::max_rejected_fraction`] of at least
//! [`MIN_READS_FOR_SCATTER_CHECK`] lit reads (scatter beyond noise; with fewer reads the robust
//! scale is itself too uncertain to judge).

use core::fmt;

use crate::accumulator::{AccumulateError, ReadAccumulator, ReadStats, Trend};
use crate::counts::FullScale;
use crate::flags::{Flag, Flags};
use crate::math;
use crate::robust::RobustBuffer;
use crate::student_t;

/// Fewest lit reads for the rejected-reads scatter check.
pub const MIN_READS_FOR_SCATTER_CHECK: u32 = 10;

/// Variance of the rounding of one read, q²/12 with q = 1 count (JCGM 100:2008, F.2.2.1).
const QUANTISATION_VARIANCE: f32 = 1.0 / 12.0;

/// Error feeding or finishing a [`DarkLitSeries`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NetSignalError {
    /// No lit read was taken: there is no signal.
    NoLitReads,
    /// A read of the measuring detector exceeds its full scale.
    SignalAboveFullScale {
        /// The offending read.
        read: u32,
    },
    /// A read of the reference detector exceeds its full scale.
    ReferenceAboveFullScale {
        /// The offending read.
        read: u32,
    },
    /// The series has a reference detector but a read came without its reference read.
    ReferenceMissing,
    /// The series has no reference detector but a reference read was given.
    ReferenceUnexpected,
    /// The accumulators are full (at least 65 536 reads of each kind fit).
    Full,
    /// The series configuration is not finite or out of range.
    InvalidConfig,
}

impl fmt::Display for NetSignalError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NetSignalError::NoLitReads => f.write_str("no lit reads in the measurement"),
            NetSignalError::SignalAboveFullScale { read } => {
                write!(f, "signal read {read} is above the detector's full scale")
            }
            NetSignalError::ReferenceAboveFullScale { read } => {
                write!(
                    f,
                    "reference read {read} is above the reference detector's full scale"
                )
            }
            NetSignalError::ReferenceMissing => f.write_str("reference read missing"),
            NetSignalError::ReferenceUnexpected => {
                f.write_str("reference read given but the series has no reference detector")
            }
            NetSignalError::Full => f.write_str("too many reads in one measurement"),
            NetSignalError::InvalidConfig => f.write_str("series configuration out of range"),
        }
    }
}

impl core::error::Error for NetSignalError {}

/// Settings of the stability checks in [`DarkLitSeries::finish`].
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SeriesConfig {
    /// Two-sided probability of the drift test below which the measurement is flagged
    /// unstable: the false-alarm rate on stable reads (0 < p < 1; default 1e-4).
    pub drift_false_alarm: f32,
    /// Fraction of lit reads the robust estimate may reject before the measurement is flagged
    /// unstable (0 ..= 1; default 0.2).
    pub max_rejected_fraction: f32,
}

impl Default for SeriesConfig {
    fn default() -> Self {
        SeriesConfig {
            drift_false_alarm: 1e-4,
            max_rejected_fraction: 0.2,
        }
    }
}

impl SeriesConfig {
    /// Checks the settings are finite and in range.
    pub fn validate(&self) -> Result<(), NetSignalError> {
        let ok = self.drift_false_alarm > 0.0
            && self.drift_false_alarm < 1.0
            && (0.0..=1.0).contains(&self.max_rejected_fraction);
        if ok {
            Ok(())
        } else {
            Err(NetSignalError::InvalidConfig)
        }
    }
}

/// A dark-corrected level of one detector (counts).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Level {
    /// Lit location minus dark location (counts); may be zero or negative.
    pub net: f32,
    /// Standard error of `net` (counts).
    pub std_error: f32,
}

impl Level {
    /// Relative standard error u(net)/net; infinite when net is not positive.
    pub fn relative_std_error(&self) -> f32 {
        if self.net > 0.0 {
            self.std_error / self.net
        } else {
            f32::INFINITY
        }
    }
}

/// The outcome of one measurement's dark and lit reads.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NetSignal {
    /// The measuring detector's net level.
    pub signal: Level,
    /// The reference detector's net level, where one is fitted.
    pub reference: Option<Level>,
    /// Quality flags of the reads (saturated, no_dark, unstable).
    pub flags: Flags,
    /// Lit reads taken.
    pub lit_reads: u32,
    /// Dark reads taken.
    pub dark_reads: u32,
    /// Lit reads the robust estimate rejected as outliers.
    pub rejected_reads: u32,
}

/// Location and standard error of one stream of reads.
#[derive(Clone, Copy, Debug)]
struct Located {
    value: f32,
    std_error: f32,
    rejected: u32,
}

/// The reads of one measurement (dark and lit, measuring and reference detector).
///
/// `N` is the capacity of each robust buffer (dark and lit reads of the measuring detector);
/// `N = 0` disables the robust estimate and uses plain means. The rest of the state is 4
/// accumulators (under 256 bytes in all; see the size test).
#[derive(Clone, Debug)]
pub struct DarkLitSeries<const N: usize = 32> {
    streams: Streams,
    dark_buffer: RobustBuffer<N>,
    lit_buffer: RobustBuffer<N>,
}

/// The accumulators of a series: the part that does not depend on `N`, so its code exists once
/// whatever capacities a program uses.
#[derive(Clone, Debug)]
struct Streams {
    dark: ReadAccumulator,
    lit: ReadAccumulator,
    reference: Option<(ReadAccumulator, ReadAccumulator)>,
}

impl<const N: usize> DarkLitSeries<N> {
    /// An empty series for a measuring detector and, optionally, a reference detector.
    pub fn new(signal_full_scale: FullScale, reference_full_scale: Option<FullScale>) -> Self {
        DarkLitSeries {
            streams: Streams {
                dark: ReadAccumulator::new(signal_full_scale),
                lit: ReadAccumulator::new(signal_full_scale),
                reference: reference_full_scale
                    .map(|fs| (ReadAccumulator::new(fs), ReadAccumulator::new(fs))),
            },
            dark_buffer: RobustBuffer::new(),
            lit_buffer: RobustBuffer::new(),
        }
    }

    /// Forgets every read, keeping the detectors' full scales.
    pub fn clear(&mut self) {
        self.streams.clear();
        self.dark_buffer.clear();
        self.lit_buffer.clear();
    }

    /// Whether the series has a reference detector.
    pub fn has_reference(&self) -> bool {
        self.streams.reference.is_some()
    }

    /// Lit reads so far.
    pub fn lit_reads(&self) -> u32 {
        self.streams.lit.count()
    }

    /// Dark reads so far.
    pub fn dark_reads(&self) -> u32 {
        self.streams.dark.count()
    }

    /// Statistics of the lit reads of the measuring detector so far.
    pub fn lit_stats(&self) -> Result<ReadStats, AccumulateError> {
        self.streams.lit.stats()
    }

    /// Statistics of the dark reads of the measuring detector so far.
    pub fn dark_stats(&self) -> Result<ReadStats, AccumulateError> {
        self.streams.dark.stats()
    }

    /// Adds one dark read (LED off). On error nothing changes.
    pub fn push_dark(&mut self, signal: u32, reference: Option<u32>) -> Result<(), NetSignalError> {
        self.push(false, signal, reference)
    }

    /// Adds one lit read (LED on). On error nothing changes.
    pub fn push_lit(&mut self, signal: u32, reference: Option<u32>) -> Result<(), NetSignalError> {
        self.push(true, signal, reference)
    }

    fn push(
        &mut self,
        lit: bool,
        signal: u32,
        reference: Option<u32>,
    ) -> Result<(), NetSignalError> {
        self.streams.push(lit, signal, reference)?;
        // The buffer keeps the first N reads; beyond them the plain mean is used.
        let buffer = if lit {
            &mut self.lit_buffer
        } else {
            &mut self.dark_buffer
        };
        let _ = buffer.push(signal);
        Ok(())
    }

    /// The net levels, their standard errors and the quality flags of the measurement.
    pub fn finish(&self, config: &SeriesConfig) -> Result<NetSignal, NetSignalError> {
        config.validate()?;
        let lit = locate(&self.streams.lit, &self.lit_buffer);
        let dark = locate(&self.streams.dark, &self.dark_buffer);
        self.streams.finish(config, lit, dark)
    }
}

impl Streams {
    fn clear(&mut self) {
        self.dark.clear();
        self.lit.clear();
        if let Some((d, l)) = self.reference.as_mut() {
            d.clear();
            l.clear();
        }
    }

    /// Adds one read to the accumulators; on error nothing changes.
    fn push(
        &mut self,
        lit: bool,
        signal: u32,
        reference: Option<u32>,
    ) -> Result<(), NetSignalError> {
        let main = if lit { self.lit } else { self.dark };
        let mut main_next = main;
        main_next.push(signal).map_err(|e| match e {
            AccumulateError::AboveFullScale { read } => {
                NetSignalError::SignalAboveFullScale { read }
            }
            _ => NetSignalError::Full,
        })?;
        match (self.reference.as_mut(), reference) {
            (None, None) => {}
            (None, Some(_)) => return Err(NetSignalError::ReferenceUnexpected),
            (Some(_), None) => return Err(NetSignalError::ReferenceMissing),
            (Some((ref_dark, ref_lit)), Some(r)) => {
                let acc = if lit { ref_lit } else { ref_dark };
                acc.push(r).map_err(|e| match e {
                    AccumulateError::AboveFullScale { read } => {
                        NetSignalError::ReferenceAboveFullScale { read }
                    }
                    _ => NetSignalError::Full,
                })?;
            }
        }
        if lit {
            self.lit = main_next;
        } else {
            self.dark = main_next;
        }
        Ok(())
    }

    /// [`DarkLitSeries::finish`] once the locations of the lit and dark reads are known.
    fn finish(
        &self,
        config: &SeriesConfig,
        lit: Option<Located>,
        dark: Option<Located>,
    ) -> Result<NetSignal, NetSignalError> {
        let lit = lit.ok_or(NetSignalError::NoLitReads)?;
        let mut flags = Flags::NONE;
        flags.set_if(Flag::Saturated, self.lit.at_full_scale() > 0);
        flags.set_if(Flag::NoDark, dark.is_none());
        let dark = dark.unwrap_or(Located {
            value: 0.0,
            std_error: 0.0,
            rejected: 0,
        });
        let signal = Level {
            net: lit.value - dark.value,
            std_error: math::sqrtf(lit.std_error * lit.std_error + dark.std_error * dark.std_error),
        };
        let reference = match &self.reference {
            None => None,
            Some((rd, rl)) => {
                let rlit = rl.stats().map_err(|_| NetSignalError::NoLitReads)?;
                flags.set_if(Flag::Saturated, rlit.at_full_scale > 0);
                let (dm, dse) = rd
                    .stats()
                    .map(|s| (s.mean, s.std_error()))
                    .unwrap_or((0.0, 0.0));
                let se = rlit.std_error();
                Some(Level {
                    net: rlit.mean - dm,
                    std_error: math::sqrtf(se * se + dse * dse),
                })
            }
        };

        // Drift of the net level across the measurement.
        let net_change = change(&self.lit) - change(&self.dark);
        let net_change_se = hypot(change_se(&self.lit), change_se(&self.dark));
        let mut shortest = shortest_trend(self.lit.count(), self.dark.count());
        if let Some((rd, rl)) = &self.reference {
            shortest = shortest.min(shortest_trend(rl.count(), rd.count()));
        }
        let drift_t = match (&self.reference, reference) {
            (Some((rd, rl)), Some(r)) if signal.net > 0.0 && r.net > 0.0 => {
                let ref_change = change(rl) - change(rd);
                let ref_change_se = hypot(change_se(rl), change_se(rd));
                let rel = net_change / signal.net - ref_change / r.net;
                let rel_se = hypot(net_change_se / signal.net, ref_change_se / r.net);
                ratio(rel, rel_se)
            }
            _ => ratio(net_change, net_change_se),
        };
        flags.set_if(
            Flag::Unstable,
            drifted(drift_t, shortest, config.drift_false_alarm),
        );
        let rejected_fraction = lit.rejected as f32 / self.lit.count().max(1) as f32;
        flags.set_if(
            Flag::Unstable,
            self.lit.count() >= MIN_READS_FOR_SCATTER_CHECK
                && rejected_fraction > config.max_rejected_fraction,
        );

        Ok(NetSignal {
            signal,
            reference,
            flags,
            lit_reads: self.lit.count(),
            dark_reads: self.dark.count(),
            rejected_reads: lit.rejected,
        })
    }
}

/// Reads of the shortest stream that carries a trend (at least 3 reads), for the degrees of
/// freedom of the drift test; a stream too short for a trend does not count.
fn shortest_trend(lit: u32, dark: u32) -> u32 {
    if dark >= 3 {
        lit.min(dark)
    } else {
        lit
    }
}

/// Whether a drift statistic `t` from streams of `reads` reads is beyond noise at the
/// two-sided false-alarm probability `alpha`.
fn drifted(t: f32, reads: u32, alpha: f32) -> bool {
    if reads < 3 {
        return false;
    }
    if !t.is_finite() {
        return t > 0.0;
    }
    match student_t::upper_tail(reads - 2, f64::from(t)) {
        Ok(p) => 2.0 * p < f64::from(alpha),
        Err(_) => false,
    }
}

/// |a| / b, 0 when b is 0 (a noiseless series shows no drift beyond noise unless it changed).
fn ratio(a: f32, b: f32) -> f32 {
    if b > 0.0 {
        math::absf(a) / b
    } else if a == 0.0 {
        0.0
    } else {
        f32::INFINITY
    }
}

fn hypot(a: f32, b: f32) -> f32 {
    math::sqrtf(a * a + b * b)
}

fn change(acc: &ReadAccumulator) -> f32 {
    acc.trend().as_ref().map_or(0.0, Trend::span_change)
}

fn change_se(acc: &ReadAccumulator) -> f32 {
    acc.trend()
        .as_ref()
        .map_or(0.0, Trend::span_change_std_error)
}

/// The location of one stream: robust while every read is buffered, plain mean beyond.
fn locate<const N: usize>(acc: &ReadAccumulator, buffer: &RobustBuffer<N>) -> Option<Located> {
    let stats = acc.stats().ok()?;
    if N > 0 && stats.count as usize == buffer.len() && stats.count >= 3 {
        let mut b = buffer.clone();
        if let Some(h) = b.huber() {
            return Some(Located {
                value: h.location,
                std_error: resolution_floor(h.std_error, stats.count),
                rejected: h.rejected,
            });
        }
    }
    Some(Located {
        value: stats.mean,
        std_error: resolution_floor(stats.std_error(), stats.count),
        rejected: 0,
    })
}

/// The standard error of a location from `n` reads, at least sqrt(q²/12 / n).
fn resolution_floor(std_error: f32, n: u32) -> f32 {
    std_error.max(math::sqrtf(QUANTISATION_VARIANCE / n.max(1) as f32))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fs(v: u32) -> FullScale {
        FullScale::new(v).unwrap()
    }

    #[test]
    fn per_channel_state_fits_256_bytes() {
        // Budget of issue 2: accumulators and photometry state, robust buffers excluded.
        assert!(core::mem::size_of::<DarkLitSeries<0>>() <= 256);
        assert!(core::mem::size_of::<ReadAccumulator>() <= 48);
    }

    #[test]
    fn net_is_lit_minus_dark() {
        let mut s = DarkLitSeries::<8>::new(fs(4095), None);
        for (d, l) in [(100, 3100), (102, 3102), (98, 3098), (100, 3100)] {
            s.push_dark(d, None).unwrap();
            s.push_lit(l, None).unwrap();
        }
        let n = s.finish(&SeriesConfig::default()).unwrap();
        assert!((n.signal.net - 3000.0).abs() < 1e-3);
        assert!(n.flags.is_empty(), "{:?}", n.flags);
        assert_eq!((n.lit_reads, n.dark_reads), (4, 4));
    }

    #[test]
    fn no_dark_and_saturation_are_flagged() {
        let mut s = DarkLitSeries::<8>::new(fs(1000), None);
        s.push_lit(1000, None).unwrap();
        s.push_lit(999, None).unwrap();
        let n = s.finish(&SeriesConfig::default()).unwrap();
        assert!(n.flags.contains(Flag::NoDark));
        assert!(n.flags.contains(Flag::Saturated));
    }

    #[test]
    fn reference_errors_leave_the_series_unchanged() {
        let mut s = DarkLitSeries::<8>::new(fs(1000), Some(fs(1000)));
        assert_eq!(s.push_lit(10, None), Err(NetSignalError::ReferenceMissing));
        assert_eq!(
            s.push_lit(10, Some(1001)),
            Err(NetSignalError::ReferenceAboveFullScale { read: 1001 })
        );
        assert_eq!(s.lit_reads(), 0);
        let mut t = DarkLitSeries::<8>::new(fs(1000), None);
        assert_eq!(
            t.push_dark(1, Some(1)),
            Err(NetSignalError::ReferenceUnexpected)
        );
        assert_eq!(
            t.finish(&SeriesConfig::default()),
            Err(NetSignalError::NoLitReads)
        );
    }

    #[test]
    fn a_ramp_is_unstable_unless_the_reference_follows_it() {
        let mut plain = DarkLitSeries::<0>::new(fs(65535), None);
        let mut refd = DarkLitSeries::<0>::new(fs(65535), Some(fs(65535)));
        for k in 0..40u32 {
            // LED output rising 0.5 % per read, small alternating noise.
            let led = 40_000.0 * (1.0 + 0.005 * k as f32);
            let noise = if k % 2 == 0 { 3 } else { 0 };
            plain.push_dark(200 + noise, None).unwrap();
            plain
                .push_lit(200 + (led * 0.5) as u32 + noise, None)
                .unwrap();
            refd.push_dark(200 + noise, Some(100)).unwrap();
            refd.push_lit(
                200 + (led * 0.5) as u32 + noise,
                Some((led * 0.25) as u32 + 100),
            )
            .unwrap();
        }
        let cfg = SeriesConfig::default();
        assert!(plain.finish(&cfg).unwrap().flags.contains(Flag::Unstable));
        assert!(!refd.finish(&cfg).unwrap().flags.contains(Flag::Unstable));
    }

    #[test]
    fn equal_reads_still_carry_their_resolution() {
        let mut s = DarkLitSeries::<8>::new(fs(4095), None);
        for _ in 0..4 {
            s.push_dark(100, None).unwrap();
            s.push_lit(3100, None).unwrap();
        }
        let n = s.finish(&SeriesConfig::default()).unwrap();
        // JCGM 100:2008 F.2.2.1: u = q/sqrt(12) per read, here over 4 reads each of lit and dark.
        let expected = (2.0f32 / 12.0 / 4.0).sqrt();
        assert!(
            (n.signal.std_error - expected).abs() < 1e-6,
            "{}",
            n.signal.std_error
        );
    }

    #[test]
    fn false_alarm_rate_of_the_drift_test_on_stable_reads() {
        // Simulated stable Gaussian reads (invented levels): the drift test should flag at most
        // about drift_false_alarm of them whatever the read count (Student t, not a fixed limit).
        let mut state = 0x9e37_79b9_7f4a_7c15u64;
        let mut normal = move || {
            let mut u = || {
                state ^= state >> 12;
                state ^= state << 25;
                state ^= state >> 27;
                ((state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 + 0.5)
                    / (1u64 << 53) as f64
            };
            let (a, b) = (u(), u());
            libm::sqrt(-2.0 * libm::log(a)) * libm::cos(2.0 * core::f64::consts::PI * b)
        };
        let cfg = SeriesConfig {
            drift_false_alarm: 0.01,
            ..SeriesConfig::default()
        };
        for pairs in [5u32, 15, 40] {
            let trials = 4000;
            let mut flagged = 0;
            for _ in 0..trials {
                let mut s = DarkLitSeries::<0>::new(fs(65535), None);
                for _ in 0..pairs {
                    s.push_dark((1000.0 + 5.0 * normal()) as u32, None).unwrap();
                    s.push_lit((30_000.0 + 20.0 * normal()) as u32, None)
                        .unwrap();
                }
                if s.finish(&cfg).unwrap().flags.contains(Flag::Unstable) {
                    flagged += 1;
                }
            }
            let rate = flagged as f64 / trials as f64;
            // Conservative degrees of freedom: at most the nominal rate, plus sampling error.
            let limit = 0.01 + 3.0 * libm::sqrt(0.01 * 0.99 / trials as f64);
            assert!(rate < limit, "{pairs} pairs: {rate}");
        }
    }

    #[test]
    fn invalid_config_is_refused() {
        let mut s = DarkLitSeries::<0>::new(fs(10), None);
        s.push_lit(5, None).unwrap();
        let bad = SeriesConfig {
            drift_false_alarm: f32::NAN,
            ..SeriesConfig::default()
        };
        assert_eq!(s.finish(&bad), Err(NetSignalError::InvalidConfig));
    }
}
