//! The measurement sequencer: warm-up, auto-exposure, blank and sample procedures over the
//! hardware traits, pure of chemistry.
//!
//! # One measurement
//! A blank or sample measurement is `pairs` lit reads interleaved with `pairs + 1` dark reads,
//! dark first and last: `D L D L ... L D`. The dark reads then straddle the lit reads
//! symmetrically, so a linear drift of the dark level cancels exactly in lit - dark. Each switch
//! of the LED is followed by its settle time; each read is the measuring detector then, where
//! fitted, the reference detector. The reads feed a [`DarkLitSeries`], whose
//! [`finish`](DarkLitSeries::finish) gives the [`NetSignal`].
//!
//! # Saturation
//! When a lit read of a measurement clips, the sequencer backs off one step
//! ([`ExposureConfig::back_off`](super::ExposureConfig::back_off) of the sensitivity) and
//! repeats the measurement once. If that also clips, the result keeps its
//! [`Flag::Saturated`](crate::Flag::Saturated). A sample repeated at a lower exposure is
//! scaled back to its blank's exposure (signal by the sensitivity ratio, reference by the drive
//! ratio) so the two compare; that assumes the exposure is linear, as integration time and PWM
//! drive are.
//!
//! # Bounds
//! Every loop has a count bound, every wait a timeout (single reads:
//! [`ReadTiming::read_timeout_ms`](super::ReadTiming::read_timeout_ms); a measurement:
//! [`SequenceConfig::measurement_timeout_ms`]; warm-up: its own timeout and point budget), and
//! the [`Cancel`] is asked before every read. Time comes from the [`Clock`] handed in.
//! At the end of every procedure, successful or not, the LED is left in its idle state
//! ([`SequenceConfig::idle_lit`]).

#[cfg(doc)]
use embedded_hal::{digital::OutputPin, pwm::SetDutyCycle};

#[cfg(doc)]
use super::clock::{Cancel, Clock};
use super::config::{ConfigError, SequenceConfig};
use super::error::SequenceError;
use super::exposure::{Exposure, ExposureRange};
#[cfg(doc)]
use crate::net_signal::DarkLitSeries;
use crate::net_signal::{Level, NetSignal};
use crate::photometry::PhotometricResult;

/// Capacity of the robust buffers of a blank or sample measurement: 16 reads of each kind,
/// enough for the default 15 lit and 16 dark reads (reads beyond it are averaged plainly; see
/// [`crate::net_signal`]). Each read of capacity costs about 20 bytes of stack in a
/// measurement (buffers, the copies the robust estimate sorts).
pub const SERIES_CAPACITY: usize = 16;

/// The hardware a sequencer drives.
pub struct Hardware<P, W, D, R, T, C> {
    /// The LED on/off pin ([`OutputPin`]; high = lit).
    pub led: P,
    /// The LED drive level ([`SetDutyCycle`]); [`super::FixedDrive`] when it cannot be dimmed.
    pub dimmer: W,
    /// The measuring detector behind the cuvette.
    pub detector: D,
    /// The reference detector that sees the LED before the cuvette, if fitted
    /// (`None::<`[`super::NoReference`]`>` otherwise).
    pub reference: Option<R>,
    /// Waits.
    pub delay: T,
    /// The time base.
    pub clock: C,
}

/// Outcome of a warm-up.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WarmUpReport {
    /// Points measured.
    pub points: u16,
    /// Time the warm-up took (ms).
    pub elapsed_ms: u32,
    /// Relative change between the last two points.
    pub relative_change: f32,
}

/// Outcome of an auto-exposure.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ExposureReport {
    /// The exposure chosen.
    pub exposure: Exposure,
    /// The blank's lit level at that exposure, as a fraction of full scale.
    pub lit_fraction: f32,
    /// Probes taken.
    pub probes: u8,
}

/// A blank measurement: the 100 % T level of its channel, and the exposure it was taken at.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlankMeasurement {
    /// Net levels and flags.
    pub net: NetSignal,
    /// The exposure of the measurement (samples are measured at the same one).
    pub exposure: Exposure,
    /// Whether the first attempt clipped and the measurement was repeated at a lower exposure.
    pub backed_off: bool,
}

/// A sample measurement evaluated against its blank.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SampleMeasurement {
    /// Net levels and flags, scaled to the blank's exposure.
    pub net: NetSignal,
    /// Transmittance, absorbance, its uncertainty and the flags.
    pub result: PhotometricResult,
    /// The exposure the reads were taken at.
    pub exposure: Exposure,
    /// Whether the first attempt clipped and the measurement was repeated at a lower exposure.
    pub backed_off: bool,
}

/// Checks a detector's exposure table: positive, finite, strictly ascending.
pub(crate) fn check_steps(
    steps: u8,
    sensitivity: impl Fn(u8) -> Option<f32>,
) -> Result<(), SequenceError> {
    let mut prev = 0.0f32;
    for step in 0..steps {
        match sensitivity(step) {
            Some(s) if s.is_finite() && s > prev => prev = s,
            _ => return Err(SequenceError::Config(ConfigError::DetectorSteps)),
        }
    }
    Ok(())
}

/// The exposure range of the hardware under `config`.
pub(crate) fn exposure_range(steps: u8, max_duty: u16, config: &SequenceConfig) -> ExposureRange {
    let max_duty = max_duty.max(1);
    let min = config.exposure.min_drive * f32::from(max_duty);
    // Round up so the lowest drive is never below the configured fraction.
    let mut min_duty = min as u32;
    if (min_duty as f32) < min {
        min_duty += 1;
    }
    let min_duty = (min_duty.clamp(1, u32::from(max_duty))) as u16;
    ExposureRange {
        steps: steps.max(1),
        max_duty,
        min_duty,
    }
}

/// Scales a level by a factor (value and standard error).
pub(crate) fn scale_level(level: Level, k: f32) -> Level {
    Level {
        net: level.net * k,
        std_error: level.std_error * k,
    }
}

/// The blocking `call!`: the expression itself.
macro_rules! blocking {
    ($e:expr) => {
        $e
    };
}

/// Defines a sequencer type and its procedures, blocking or async (the same body twice: the
/// async variant differs only in `async fn` and `.await`).
macro_rules! define_sequencer {
    (
        $(#[$doc:meta])*
        name: $name:ident,
        detector: $det:path,
        delay: $delay:path,
        asyncness: [$($async:tt)?],
        call: $call:ident $(,)?
    ) => {
        $(#[$doc])*
        pub struct $name<P, W, D, R, T, C> {
            hw: $crate::instrument::Hardware<P, W, D, R, T, C>,
            config: $crate::instrument::SequenceConfig,
            exposure: $crate::instrument::Exposure,
            range: $crate::instrument::exposure::ExposureRange,
            applied: Option<$crate::instrument::Exposure>,
            led_lit: Option<bool>,
        }

        impl<P, W, D, R, T, C> $name<P, W, D, R, T, C>
        where
            P: embedded_hal::digital::OutputPin,
            W: embedded_hal::pwm::SetDutyCycle,
            D: $det,
            R: $det,
            T: $delay,
            C: $crate::instrument::Clock,
        {
            /// A sequencer over `hardware` with `config` (validated, as is the detector's
            /// exposure table). No hardware is touched until the first procedure; the first
            /// exposure is the least sensitive detector step at full LED drive.
            pub fn new(
                hardware: $crate::instrument::Hardware<P, W, D, R, T, C>,
                config: $crate::instrument::SequenceConfig,
            ) -> Result<Self, $crate::instrument::SequenceError> {
                config.validate()?;
                let steps = <D as $det>::exposure_steps(&hardware.detector).max(1);
                $crate::instrument::sequencer::check_steps(steps, |s| {
                    <D as $det>::sensitivity(&hardware.detector, s)
                })?;
                let max_duty = hardware.dimmer.max_duty_cycle();
                let range = $crate::instrument::sequencer::exposure_range(steps, max_duty, &config);
                Ok($name {
                    hw: hardware,
                    config,
                    exposure: $crate::instrument::Exposure {
                        step: 0,
                        duty: range.max_duty,
                    },
                    range,
                    applied: None,
                    led_lit: None,
                })
            }

            /// The configuration.
            pub fn config(&self) -> &$crate::instrument::SequenceConfig {
                &self.config
            }

            /// The exposure the next measurement uses.
            pub fn exposure(&self) -> $crate::instrument::Exposure {
                self.exposure
            }

            /// Sets the exposure of the next measurement (clamped to the hardware's range).
            pub fn set_exposure(&mut self, exposure: $crate::instrument::Exposure) {
                self.exposure = $crate::instrument::Exposure {
                    step: exposure.step.min(self.range.steps.saturating_sub(1)),
                    duty: exposure.duty.clamp(self.range.min_duty, self.range.max_duty),
                };
            }

            /// The hardware's exposure range.
            pub fn exposure_range(&self) -> $crate::instrument::exposure::ExposureRange {
                self.range
            }

            /// Gives the hardware back.
            pub fn release(self) -> $crate::instrument::Hardware<P, W, D, R, T, C> {
                self.hw
            }

            fn signal_full_scale(&self) -> $crate::counts::FullScale {
                <D as $det>::full_scale(&self.hw.detector)
            }

            fn reference_full_scale(&self) -> Option<$crate::counts::FullScale> {
                self.hw.reference.as_ref().map(|r| <R as $det>::full_scale(r))
            }

            fn planner(&self) -> $crate::instrument::exposure::ExposurePlanner<impl Fn(u8) -> Option<f32> + '_> {
                let detector = &self.hw.detector;
                $crate::instrument::exposure::ExposurePlanner::new(
                    self.range,
                    self.config.exposure,
                    self.signal_full_scale().value(),
                    move |s| <D as $det>::sensitivity(detector, s),
                )
            }

            fn now(&mut self) -> u32 {
                $crate::instrument::Clock::now_ms(&mut self.hw.clock)
            }

            $($async)? fn set_led(&mut self, lit: bool) -> Result<bool, $crate::instrument::SequenceError> {
                if self.led_lit == Some(lit) {
                    return Ok(false);
                }
                let r = if lit { self.hw.led.set_high() } else { self.hw.led.set_low() };
                r.map_err(|_| $crate::instrument::SequenceError::Led)?;
                self.led_lit = Some(lit);
                Ok(true)
            }

            /// Leaves the LED idle, then hands on the procedure's result (its error first).
            $($async)? fn idle<X>(
                &mut self,
                result: Result<X, $crate::instrument::SequenceError>,
            ) -> Result<X, $crate::instrument::SequenceError> {
                let lit = self.config.idle_lit;
                let led = $call!(self.set_led(lit));
                let x = result?;
                led?;
                Ok(x)
            }

            $($async)? fn apply_exposure(&mut self) -> Result<(), $crate::instrument::SequenceError> {
                let e = self.exposure;
                let before = self.applied;
                if before.map(|a| a.step) != Some(e.step) {
                    $call!(<D as $det>::set_exposure(&mut self.hw.detector, e.step)).map_err(|err| {
                        $crate::instrument::SequenceError::Detector(
                            $crate::instrument::DetectorError::kind(&err),
                        )
                    })?;
                }
                if before.map(|a| a.duty) != Some(e.duty) {
                    self.hw
                        .dimmer
                        .set_duty_cycle(e.duty)
                        .map_err(|_| $crate::instrument::SequenceError::Dimmer)?;
                }
                self.applied = Some(e);
                Ok(())
            }

            $($async)? fn read_one<K: $crate::instrument::Cancel>(
                &mut self,
                lit: bool,
                cancel: &mut K,
            ) -> Result<(u32, Option<u32>), $crate::instrument::SequenceError> {
                use $crate::instrument::SequenceError as E;
                if cancel.is_cancelled() {
                    return Err(E::Cancelled);
                }
                if $call!(self.set_led(lit))? {
                    let t = &self.config.timing;
                    let us = if lit { t.settle_lit_us } else { t.settle_dark_us };
                    if us > 0 {
                        $call!(<T as $delay>::delay_us(&mut self.hw.delay, us));
                    }
                }
                let t0 = self.now();
                let signal = $call!(<D as $det>::read(&mut self.hw.detector))
                    .map_err(|e| E::Detector($crate::instrument::DetectorError::kind(&e)))?;
                let reference = match self.hw.reference.as_mut() {
                    Some(r) => Some(
                        $call!(<R as $det>::read(r))
                            .map_err(|e| E::Reference($crate::instrument::DetectorError::kind(&e)))?,
                    ),
                    None => None,
                };
                let elapsed_ms = self.now().wrapping_sub(t0);
                if elapsed_ms > self.config.timing.read_timeout_ms {
                    return Err(E::ReadTimeout { elapsed_ms });
                }
                Ok((signal, reference))
            }

            /// `D (L D) × pairs` into `series`, within the measurement timeout from `start_ms`.
            $($async)? fn run_series<const N: usize, K: $crate::instrument::Cancel>(
                &mut self,
                series: &mut $crate::net_signal::DarkLitSeries<N>,
                pairs: u16,
                start_ms: u32,
                cancel: &mut K,
            ) -> Result<(), $crate::instrument::SequenceError> {
                let (s, r) = $call!(self.read_one(false, cancel))?;
                series.push_dark(s, r)?;
                for _ in 0..pairs {
                    let (s, r) = $call!(self.read_one(true, cancel))?;
                    series.push_lit(s, r)?;
                    let (s, r) = $call!(self.read_one(false, cancel))?;
                    series.push_dark(s, r)?;
                    if self.now().wrapping_sub(start_ms) > self.config.measurement_timeout_ms {
                        return Err($crate::instrument::SequenceError::MeasurementTimeout);
                    }
                }
                Ok(())
            }

            /// One full measurement at the current exposure. Never inlined: the blank and
            /// sample procedures call it twice (saturation repeat), and one frame holding its
            /// series at a time keeps the stack of a measurement small.
            #[inline(never)]
            $($async)? fn measure_once<K: $crate::instrument::Cancel>(
                &mut self,
                start_ms: u32,
                cancel: &mut K,
            ) -> Result<$crate::net_signal::NetSignal, $crate::instrument::SequenceError> {
                $call!(self.apply_exposure())?;
                let mut series = $crate::net_signal::DarkLitSeries::<{ $crate::instrument::sequencer::SERIES_CAPACITY }>::new(
                    self.signal_full_scale(),
                    self.reference_full_scale(),
                );
                let pairs = self.config.pairs;
                $call!(self.run_series(&mut series, pairs, start_ms, cancel))?;
                Ok(series.finish(&self.config.series)?)
            }

            /// Warms the LED up: short dark/lit series at the current exposure until the net
            /// level is stable (see [`crate::instrument::warm_up`]). A clipped point backs the
            /// exposure off and starts the criterion again.
            pub $($async)? fn warm_up<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::WarmUpReport, $crate::instrument::SequenceError> {
                let r = $call!(self.warm_up_inner(cancel));
                $call!(self.idle(r))
            }

            $($async)? fn warm_up_inner<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::WarmUpReport, $crate::instrument::SequenceError> {
                use $crate::instrument::warm_up::{WarmUpMonitor, WarmUpStatus};
                let cfg = self.config.warm_up;
                let start = self.now();
                let mut monitor = WarmUpMonitor::new(cfg, start);
                let mut series = $crate::net_signal::DarkLitSeries::<0>::new(
                    self.signal_full_scale(),
                    self.reference_full_scale(),
                );
                let mut last_change = f32::INFINITY;
                for _ in 0..cfg.max_points {
                    $call!(self.apply_exposure())?;
                    series.clear();
                    let point_start = self.now();
                    $call!(self.run_series(&mut series, cfg.pairs_per_point, point_start, cancel))?;
                    let net = series.finish(&self.config.series)?;
                    if net.flags.contains($crate::Flag::Saturated) {
                        let lit_fraction = 1.0;
                        let back_off = self.planner().back_off(self.exposure);
                        match back_off {
                            Some(e) => {
                                $crate::instrument::log::event!("warm-up clipped: backing off");
                                self.exposure = e;
                                monitor = WarmUpMonitor::new(cfg, start);
                                continue;
                            }
                            None => {
                                return Err($crate::instrument::ExposureError::TooBright { lit_fraction }.into())
                            }
                        }
                    }
                    let now = self.now();
                    match monitor.push(net.signal.net, now)? {
                        WarmUpStatus::Stable { relative_change } => {
                            $crate::instrument::log::event!("warm-up stable after {=u16} points", monitor.points());
                            return Ok($crate::instrument::WarmUpReport {
                                points: monitor.points(),
                                elapsed_ms: now.wrapping_sub(start),
                                relative_change,
                            });
                        }
                        WarmUpStatus::Settling { relative_change } => {
                            last_change = relative_change;
                            $crate::instrument::log::event!("warm-up change {=f32}", relative_change);
                            if cfg.pause_ms > 0 {
                                $call!(self.set_led(true))?;
                                $call!(<T as $delay>::delay_ms(&mut self.hw.delay, cfg.pause_ms));
                            }
                        }
                    }
                }
                Err($crate::instrument::SequenceError::WarmUpTimeout {
                    relative_change: last_change,
                })
            }

            /// Auto-exposure on the blank in the cuvette: probes until its lit level lies in
            /// the window (see [`crate::instrument::exposure`]); the chosen exposure stays set.
            pub $($async)? fn auto_expose<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::ExposureReport, $crate::instrument::SequenceError> {
                let r = $call!(self.auto_expose_inner(cancel));
                $call!(self.idle(r))
            }

            $($async)? fn auto_expose_inner<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::ExposureReport, $crate::instrument::SequenceError> {
                use $crate::instrument::exposure::{ExposureDecision, Probe};
                let mut series = $crate::net_signal::DarkLitSeries::<0>::new(
                    self.signal_full_scale(),
                    self.reference_full_scale(),
                );
                let fs = self.signal_full_scale().value() as f32;
                let mut lit_fraction = 0.0;
                for probes in 1..=self.config.exposure.max_iterations {
                    $call!(self.apply_exposure())?;
                    series.clear();
                    let start = self.now();
                    let pairs = self.config.exposure.probe_pairs;
                    $call!(self.run_series(&mut series, pairs, start, cancel))?;
                    let lit = series
                        .lit_stats()
                        .map_err(|_| $crate::net_signal::NetSignalError::NoLitReads)?;
                    let dark = series.dark_stats().map(|s| s.mean).unwrap_or(0.0);
                    let probe = Probe {
                        lit: lit.mean,
                        dark,
                        clipped: lit.at_full_scale > 0,
                    };
                    lit_fraction = lit.mean / fs;
                    let decision = self.planner().judge(self.exposure, probe)?;
                    match decision {
                        ExposureDecision::Accept => {
                            $crate::instrument::log::event!("exposure accepted at {=f32} of full scale", lit_fraction);
                            return Ok($crate::instrument::ExposureReport {
                                exposure: self.exposure,
                                lit_fraction,
                                probes,
                            });
                        }
                        ExposureDecision::Try(e) => {
                            $crate::instrument::log::event!("exposure try step {=u8} duty {=u16}", e.step, e.duty);
                            self.exposure = e;
                        }
                    }
                }
                Err($crate::instrument::ExposureError::NotConverged { lit_fraction }.into())
            }

            /// Measures the blank in the cuvette (auto-exposure first when configured); a
            /// clipped measurement is repeated once at a lower exposure.
            pub $($async)? fn measure_blank<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::BlankMeasurement, $crate::instrument::SequenceError> {
                let r = $call!(self.blank_inner(cancel));
                $call!(self.idle(r))
            }

            $($async)? fn blank_inner<K: $crate::instrument::Cancel>(
                &mut self,
                cancel: &mut K,
            ) -> Result<$crate::instrument::BlankMeasurement, $crate::instrument::SequenceError> {
                if self.config.auto_exposure {
                    $call!(self.auto_expose_inner(cancel))?;
                }
                let start = self.now();
                let mut net = $call!(self.measure_once(start, cancel))?;
                let mut backed_off = false;
                if net.flags.contains($crate::Flag::Saturated) {
                    let back_off = self.planner().back_off(self.exposure);
                    if let Some(e) = back_off {
                        $crate::instrument::log::event!("blank clipped: repeating at a lower exposure");
                        self.exposure = e;
                        backed_off = true;
                        net = $call!(self.measure_once(start, cancel))?;
                    }
                }
                Ok($crate::instrument::BlankMeasurement {
                    net,
                    exposure: self.exposure,
                    backed_off,
                })
            }

            /// Measures the sample in the cuvette at its blank's exposure and evaluates it
            /// against that blank; a clipped measurement is repeated once at a lower exposure.
            pub $($async)? fn measure_sample<K: $crate::instrument::Cancel>(
                &mut self,
                blank: &$crate::instrument::BlankMeasurement,
                cancel: &mut K,
            ) -> Result<$crate::instrument::SampleMeasurement, $crate::instrument::SequenceError> {
                let r = $call!(self.sample_inner(blank, cancel));
                self.exposure = blank.exposure;
                $call!(self.idle(r))
            }

            $($async)? fn sample_inner<K: $crate::instrument::Cancel>(
                &mut self,
                blank: &$crate::instrument::BlankMeasurement,
                cancel: &mut K,
            ) -> Result<$crate::instrument::SampleMeasurement, $crate::instrument::SequenceError> {
                use $crate::instrument::sequencer::scale_level;
                self.exposure = blank.exposure;
                let start = self.now();
                let mut net = $call!(self.measure_once(start, cancel))?;
                let mut backed_off = false;
                if net.flags.contains($crate::Flag::Saturated) {
                    let back_off = self.planner().back_off(self.exposure);
                    if let Some(e) = back_off {
                        $crate::instrument::log::event!("sample clipped: repeating at a lower exposure");
                        self.exposure = e;
                        backed_off = true;
                        let mut again = $call!(self.measure_once(start, cancel))?;
                        let planner = self.planner();
                        let k_signal = planner.sensitivity(blank.exposure) / planner.sensitivity(e);
                        let k_reference = planner.drive(blank.exposure) / planner.drive(e);
                        again.signal = scale_level(again.signal, k_signal);
                        again.reference = again.reference.map(|r| scale_level(r, k_reference));
                        net = again;
                    }
                }
                let result = $crate::photometry::photometric_result(&blank.net, &net, &self.config.photometry)?;
                $crate::instrument::log::event!("sample absorbance {=f32}", result.absorbance.value());
                Ok($crate::instrument::SampleMeasurement {
                    net,
                    result,
                    exposure: self.exposure,
                    backed_off,
                })
            }
        }
    };
}

#[cfg(feature = "async")]
pub(crate) use define_sequencer;

define_sequencer! {
    /// The blocking measurement sequencer (embedded-hal 1.0 traits).
    ///
    /// Typical use: [`auto_expose`](Self::auto_expose) and [`warm_up`](Self::warm_up) with the
    /// blank in place, then [`measure_blank`](Self::measure_blank), then
    /// [`measure_sample`](Self::measure_sample) for each sample (or standard).
    name: Sequencer,
    detector: crate::instrument::Detector,
    delay: embedded_hal::delay::DelayNs,
    asyncness: [],
    call: blocking,
}
