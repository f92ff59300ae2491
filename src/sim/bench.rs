//! [`SimBench`]: the whole simulated photometer (LED, cuvette, analyte, detectors) behind one
//! `read` call.

use core::fmt;

use super::detector::DetectorModel;
use super::led::{LedModel, LedState};
use super::optics::{Absorber, Cuvette, GaussianBand, Optics, SimSample};
use super::rng::SimRng;

/// Everything that defines a simulated photometer.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimConfig {
    /// The LED.
    pub led: LedModel,
    /// Absorber and cuvette.
    pub optics: Optics,
    /// The measuring detector behind the cuvette.
    pub signal: DetectorModel,
    /// An optional reference detector that sees the LED before the cuvette.
    pub reference: Option<ReferenceChannel>,
}

/// The reference detector: its own channel model and its share of the LED's light.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReferenceChannel {
    /// The reference detector and its ADC.
    pub detector: DetectorModel,
    /// Photoelectron rate at the reference detector relative to the signal detector's rate
    /// through a clear cuvette (a beam-splitter or a pick-off photodiode beside the LED).
    pub coupling: f32,
}

impl SimConfig {
    /// A plausible green-LED photometer (invented parameters for demos and tests, no real
    /// device): a 525 nm LED of 30 nm FWHM, a broad analyte band at 540 nm (FWHM 100 nm,
    /// 0.25 absorbance per concentration unit per cm at its peak), a 1 cm cuvette with 0.2 %
    /// stray light, a 16-bit ADC, and a reference photodiode. At full drive and 10 ms
    /// integration a blank reads about 78 % of full scale once the LED has warmed up.
    pub const GREEN_DEMO: SimConfig = SimConfig {
        led: LedModel {
            spectrum: GaussianBand {
                peak_nm: 525.0,
                fwhm_nm: 30.0,
            },
            photoelectrons_per_ms: 20_000.0,
            full_drive_rise_k: 15.0,
            thermal_tau_ms: 8_000.0,
            output_per_k: -0.003,
            peak_shift_nm_per_k: 0.04,
            drift_per_hour: -0.002,
        },
        optics: Optics {
            absorber: Absorber {
                band: GaussianBand {
                    peak_nm: 540.0,
                    fwhm_nm: 100.0,
                },
                absorptivity_per_cm: 0.25,
            },
            cuvette: Cuvette {
                path_cm: 1.0,
                stray_fraction: 0.002,
            },
        },
        signal: DetectorModel {
            full_scale: 65_535,
            counts_per_electron: 0.25,
            dark_current_e_per_ms: 5.0,
            dark_offset: 800.0,
            dark_drift_per_hour: 20.0,
            read_noise: 6.0,
        },
        reference: Some(ReferenceChannel {
            detector: DetectorModel {
                full_scale: 65_535,
                counts_per_electron: 0.25,
                dark_current_e_per_ms: 5.0,
                dark_offset: 650.0,
                dark_drift_per_hour: -15.0,
                read_noise: 6.0,
            },
            coupling: 0.3,
        }),
    };

    /// Checks every parameter; a [`SimBench`] is only built from a valid configuration.
    pub fn validate(&self) -> Result<(), SimConfigError> {
        if !self.led.is_valid() {
            return Err(SimConfigError::Led);
        }
        if !self.optics.is_valid() {
            return Err(SimConfigError::Optics);
        }
        if !self.signal.is_valid() {
            return Err(SimConfigError::SignalDetector);
        }
        if let Some(r) = &self.reference {
            if !r.detector.is_valid() || !r.coupling.is_finite() || r.coupling < 0.0 {
                return Err(SimConfigError::ReferenceDetector);
            }
        }
        Ok(())
    }
}

/// A simulator parameter that is not finite or not physical.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SimConfigError {
    /// An LED parameter (negative power, zero time constant, NaN, ...).
    Led,
    /// An optics parameter (path length <= 0, stray fraction outside 0..1, ...).
    Optics,
    /// A signal detector parameter (zero full scale, gain <= 0, ...).
    SignalDetector,
    /// A reference detector parameter or its coupling.
    ReferenceDetector,
    /// An exposure setting (integration time or gain not finite and > 0).
    Exposure,
}

impl fmt::Display for SimConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            SimConfigError::Led => "invalid simulated LED parameter",
            SimConfigError::Optics => "invalid simulated optics parameter",
            SimConfigError::SignalDetector => "invalid simulated signal detector parameter",
            SimConfigError::ReferenceDetector => "invalid simulated reference detector parameter",
            SimConfigError::Exposure => {
                "integration time and gain must be finite and greater than zero"
            }
        })
    }
}

impl core::error::Error for SimConfigError {}

/// One simulated read: the measuring detector and, if configured, the reference detector.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimRead {
    /// Measuring detector code (0..=full scale).
    pub signal: u32,
    /// Reference detector code, when the bench has one.
    pub reference: Option<u32>,
}

/// Noise-free expectation of a read (counts, before clipping and quantisation).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimExpected {
    /// Mean measuring-detector counts.
    pub signal: f32,
    /// Mean reference-detector counts, when the bench has one.
    pub reference: Option<f32>,
}

/// The simulated photometer: LED, cuvette, analyte, detector(s), and their noise.
///
/// Time is handed in (`t_ms`, milliseconds since power-up, non-decreasing); the bench never
/// reads a clock, so the same seed and the same call sequence give the same counts on every
/// target.
#[derive(Clone, Debug)]
pub struct SimBench {
    config: SimConfig,
    rng: SimRng,
    led: LedState,
    integration_ms: f32,
    gain: f32,
    /// Last optical computation: sample, LED peak, detected fraction.
    cache: Option<(SimSample, f32, f32)>,
}

impl SimBench {
    /// Default integration time (ms).
    pub const DEFAULT_INTEGRATION_MS: f32 = 10.0;

    /// A bench from a configuration and a seed for its noise.
    pub fn new(config: SimConfig, seed: u64) -> Result<SimBench, SimConfigError> {
        config.validate()?;
        Ok(SimBench {
            config,
            rng: SimRng::new(seed),
            led: LedState::default(),
            integration_ms: Self::DEFAULT_INTEGRATION_MS,
            gain: 1.0,
            cache: None,
        })
    }

    /// The configuration.
    pub fn config(&self) -> &SimConfig {
        &self.config
    }

    /// The LED's current state (drive level, junction temperature).
    pub fn led(&self) -> &LedState {
        &self.led
    }

    /// Sets the LED drive level (0..=1, clamped; non-finite gives 0).
    pub fn set_drive(&mut self, drive: f32) {
        self.led.set_drive(drive);
    }

    /// Sets the integration time of the detectors (ms).
    pub fn set_integration_ms(&mut self, ms: f32) -> Result<(), SimConfigError> {
        if ms.is_finite() && ms > 0.0 {
            self.integration_ms = ms;
            Ok(())
        } else {
            Err(SimConfigError::Exposure)
        }
    }

    /// The integration time (ms).
    pub fn integration_ms(&self) -> f32 {
        self.integration_ms
    }

    /// Sets the detectors' gain multiplier (1 = the configured conversion gain).
    pub fn set_gain(&mut self, gain: f32) -> Result<(), SimConfigError> {
        if gain.is_finite() && gain > 0.0 {
            self.gain = gain;
            Ok(())
        } else {
            Err(SimConfigError::Exposure)
        }
    }

    /// The gain multiplier.
    pub fn gain(&self) -> f32 {
        self.gain
    }

    /// Fraction of the clear-cuvette power reaching the measuring detector (`T + s`).
    fn detected_fraction(&mut self, sample: &SimSample) -> f32 {
        let spectrum = self.led.spectrum(&self.config.led);
        if let Some((s, peak, f)) = self.cache {
            if s == *sample && peak == spectrum.peak_nm {
                return f;
            }
        }
        let f = self.config.optics.detected_fraction(&spectrum, sample);
        self.cache = Some((*sample, spectrum.peak_nm, f));
        f
    }

    /// Photoelectron rates (signal, reference) for the LED `lit` or dark.
    fn rates(&mut self, t_ms: u32, lit: bool, sample: &SimSample) -> (f32, f32) {
        if !lit {
            return (0.0, 0.0);
        }
        let clear = self.led.clear_rate(&self.config.led, t_ms);
        let coupling = self.config.reference.map_or(0.0, |r| r.coupling);
        (clear * self.detected_fraction(sample), clear * coupling)
    }

    /// One read at time `t_ms` with the LED on or off and `sample` in the cuvette.
    ///
    /// The LED is taken to have been in the `led_on` state since the previous read (its
    /// junction warms or cools accordingly).
    pub fn read(&mut self, t_ms: u32, led_on: bool, sample: &SimSample) -> SimRead {
        self.led.advance(&self.config.led, t_ms, led_on);
        let (rate, ref_rate) = self.rates(t_ms, led_on, sample);
        let (int_ms, gain) = (self.integration_ms, self.gain);
        let signal = self
            .config
            .signal
            .read(&mut self.rng, rate, int_ms, gain, t_ms);
        let reference = match self.config.reference {
            Some(r) => Some(r.detector.read(&mut self.rng, ref_rate, int_ms, gain, t_ms)),
            None => None,
        };
        SimRead { signal, reference }
    }

    /// The noise-free mean of a read at `t_ms` with the LED state as it is now (the thermal
    /// state is not advanced), for test expectations.
    pub fn expected(&mut self, t_ms: u32, led_on: bool, sample: &SimSample) -> SimExpected {
        let (rate, ref_rate) = self.rates(t_ms, led_on, sample);
        let (int_ms, gain) = (self.integration_ms, self.gain);
        SimExpected {
            signal: self.config.signal.mean_counts(rate, int_ms, gain, t_ms),
            reference: self
                .config
                .reference
                .map(|r| r.detector.mean_counts(ref_rate, int_ms, gain, t_ms)),
        }
    }

    /// The apparent absorbance a perfect (noise-free) photometer would report for `sample`
    /// against a solvent blank with the LED as it is now: band-limited light and stray light
    /// included.
    pub fn apparent_absorbance(&self, sample: &SimSample) -> f32 {
        let spectrum = self.led.spectrum(&self.config.led);
        self.config.optics.apparent_absorbance(&spectrum, sample)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_unphysical_configuration() {
        let mut c = SimConfig::GREEN_DEMO;
        c.optics.cuvette.stray_fraction = 1.5;
        assert_eq!(SimBench::new(c, 1).err(), Some(SimConfigError::Optics));
        let mut c = SimConfig::GREEN_DEMO;
        c.led.thermal_tau_ms = 0.0;
        assert_eq!(SimBench::new(c, 1).err(), Some(SimConfigError::Led));
        let mut c = SimConfig::GREEN_DEMO;
        c.signal.full_scale = 0;
        assert_eq!(
            SimBench::new(c, 1).err(),
            Some(SimConfigError::SignalDetector)
        );
        let mut b = SimBench::new(SimConfig::GREEN_DEMO, 1).unwrap();
        assert_eq!(b.set_integration_ms(-1.0), Err(SimConfigError::Exposure));
        assert_eq!(b.set_gain(f32::INFINITY), Err(SimConfigError::Exposure));
    }

    #[test]
    fn demo_blank_sits_in_the_upper_part_of_full_scale_after_warm_up() {
        let mut b = SimBench::new(SimConfig::GREEN_DEMO, 1).unwrap();
        let blank = SimSample::BLANK;
        let cold = b.read(0, true, &blank).signal;
        let mut t = 0;
        while t < 60_000 {
            t += 100;
            b.read(t, true, &blank);
        }
        let warm = b.read(t, true, &blank).signal;
        let fs = 65_535.0;
        assert!(cold > warm, "a cold LED is brighter: {cold} vs {warm}");
        assert!((0.70..0.85).contains(&(warm as f32 / fs)), "{warm}");
        let dark = b.read(t + 10, false, &blank);
        assert!((780..840).contains(&dark.signal), "{dark:?}");
    }

    #[test]
    fn measured_absorbance_follows_the_model_and_the_reference_tracks_the_led() {
        // Net-signal ratio of many reads against a blank recovers the model's apparent
        // absorbance (averaging: standard error shrinks as 1/sqrt(n), common practice).
        let mut b = SimBench::new(SimConfig::GREEN_DEMO, 5).unwrap();
        let sample = SimSample::with_concentration(2.0);
        let mut t = 0u32;
        let net = |b: &mut SimBench, s: &SimSample, t: &mut u32, n: u32| {
            let (mut lit, mut dark, mut reference) = (0.0f64, 0.0f64, 0.0f64);
            for _ in 0..n {
                *t += 20;
                let r = b.read(*t, true, s);
                lit += r.signal as f64;
                reference += r.reference.map_or(0.0, |x| x as f64);
                *t += 20;
                let r = b.read(*t, false, s);
                dark += r.signal as f64;
                reference -= r.reference.map_or(0.0, |x| x as f64);
            }
            ((lit - dark) / n as f64, reference / n as f64)
        };
        // Warm up with the same 50 % duty pattern as the measurement, so the junction
        // temperature does not change between blank and sample.
        net(&mut b, &SimSample::BLANK, &mut t, 3000);
        let (p0, r0) = net(&mut b, &SimSample::BLANK, &mut t, 200);
        let (p, r) = net(&mut b, &sample, &mut t, 200);
        let measured = -(p / p0).log10() as f32;
        let model = b.apparent_absorbance(&sample);
        assert!((measured - model).abs() < 0.002, "{measured} vs {model}");
        // The reference detector sees the LED, not the sample: its net level stays put.
        assert!((r / r0 - 1.0).abs() < 0.002, "{r} vs {r0}");
        // Band-limited light against a band whose peak is off the LED peak: the apparent
        // absorbance differs from the monochromatic value at the LED peak, but is close.
        let mono = b
            .config()
            .optics
            .beer_lambert_absorbance(&b.led().spectrum(&b.config().led), &sample);
        assert!((model - mono).abs() < 0.05 * mono, "{model} vs {mono}");
    }
}
