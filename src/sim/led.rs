//! The simulated LED: drive level, warm-up and slow drift of its output.
//!
//! # Model
//!
//! Radiant output is proportional to the drive level `d` (0..=1, a duty cycle or a fraction of
//! the full current; linear, which holds well for PWM and roughly for current drive) times a
//! thermal factor and an ageing factor:
//!
//! ```text
//! P(t) = P_full · d · (1 + k_T · θ(t)) · (1 + k_age · t_hours)
//! ```
//!
//! `θ` is the junction temperature rise above ambient, a first-order thermal RC: while the LED
//! is lit it relaxes towards `d · θ_full` with time constant `τ`, while dark towards 0. LED
//! output falls as the junction warms (`k_T` < 0, a few tenths of a percent per kelvin for
//! common visible LEDs [mem, order of magnitude from LED data sheets]) and the peak wavelength
//! shifts red by a fraction of a nanometre per kelvin (same source and caution), so a freshly
//! lit LED starts bright and settles over a few `τ`: the warm-up the sequencer must wait out.
//! Between two reads the LED state is taken as constant (the state of the later read).

use crate::math;

use super::optics::GaussianBand;

/// Parameters of the simulated LED.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LedModel {
    /// Emission band when the junction is at ambient temperature.
    pub spectrum: GaussianBand,
    /// Photoelectrons per millisecond the signal detector collects through a clear cuvette at
    /// full drive and ambient junction temperature (the optical coupling and the photodiode's
    /// quantum efficiency folded into one number).
    pub photoelectrons_per_ms: f32,
    /// Junction temperature rise at full drive, once settled (K).
    pub full_drive_rise_k: f32,
    /// Thermal time constant of the junction and its mount (ms).
    pub thermal_tau_ms: f32,
    /// Relative change of output per kelvin of junction rise (negative: warmer is dimmer).
    pub output_per_k: f32,
    /// Shift of the peak wavelength per kelvin of junction rise (nm/K, positive: red shift).
    pub peak_shift_nm_per_k: f32,
    /// Relative change of output per hour of elapsed time (ageing, slow drift).
    pub drift_per_hour: f32,
}

impl LedModel {
    /// Whether every parameter is finite and physical.
    pub fn is_valid(&self) -> bool {
        let finite = [
            self.spectrum.peak_nm,
            self.spectrum.fwhm_nm,
            self.photoelectrons_per_ms,
            self.full_drive_rise_k,
            self.thermal_tau_ms,
            self.output_per_k,
            self.peak_shift_nm_per_k,
            self.drift_per_hour,
        ]
        .iter()
        .all(|x| x.is_finite());
        finite
            && self.spectrum.peak_nm > 0.0
            && self.spectrum.fwhm_nm >= 0.0
            && self.photoelectrons_per_ms >= 0.0
            && self.full_drive_rise_k >= 0.0
            && self.thermal_tau_ms > 0.0
    }
}

/// The LED's changing state: drive level and junction temperature rise.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LedState {
    /// Drive level 0..=1.
    drive: f32,
    /// Junction temperature rise (K).
    rise_k: f32,
    /// Time of the last update (ms), `None` before the first.
    last_ms: Option<u32>,
}

impl Default for LedState {
    fn default() -> Self {
        LedState {
            drive: 1.0,
            rise_k: 0.0,
            last_ms: None,
        }
    }
}

impl LedState {
    /// The drive level (0..=1).
    pub fn drive(&self) -> f32 {
        self.drive
    }

    /// Sets the drive level, clamped to 0..=1 (non-finite gives 0).
    pub fn set_drive(&mut self, drive: f32) {
        self.drive = if drive.is_finite() {
            drive.clamp(0.0, 1.0)
        } else {
            0.0
        };
    }

    /// The junction temperature rise (K).
    pub fn rise_k(&self) -> f32 {
        self.rise_k
    }

    /// Advances the thermal state to `t_ms`, the LED having been `lit` since the last update.
    /// Time running backwards (or the first call) only sets the reference time.
    pub fn advance(&mut self, model: &LedModel, t_ms: u32, lit: bool) {
        if let Some(last) = self.last_ms {
            if t_ms >= last {
                let dt = (t_ms - last) as f32;
                let target = if lit {
                    self.drive * model.full_drive_rise_k
                } else {
                    0.0
                };
                let relax = 1.0 - math::expf(-dt / model.thermal_tau_ms);
                self.rise_k += (target - self.rise_k) * relax;
            }
        }
        self.last_ms = Some(t_ms);
    }

    /// The emission band now (peak shifted with the junction temperature).
    pub fn spectrum(&self, model: &LedModel) -> GaussianBand {
        GaussianBand {
            peak_nm: model.spectrum.peak_nm + model.peak_shift_nm_per_k * self.rise_k,
            fwhm_nm: model.spectrum.fwhm_nm,
        }
    }

    /// Photoelectrons per ms at the signal detector through a clear cuvette, at time `t_ms`
    /// (the ageing term uses `t_ms` as elapsed time since power-up).
    pub fn clear_rate(&self, model: &LedModel, t_ms: u32) -> f32 {
        let hours = t_ms as f32 / 3_600_000.0;
        let thermal = 1.0 + model.output_per_k * self.rise_k;
        let ageing = 1.0 + model.drift_per_hour * hours;
        let rate = model.photoelectrons_per_ms * self.drive * thermal * ageing;
        if rate > 0.0 {
            rate
        } else {
            0.0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn model() -> LedModel {
        LedModel {
            spectrum: GaussianBand {
                peak_nm: 525.0,
                fwhm_nm: 30.0,
            },
            photoelectrons_per_ms: 1000.0,
            full_drive_rise_k: 10.0,
            thermal_tau_ms: 1000.0,
            output_per_k: -0.004,
            peak_shift_nm_per_k: 0.05,
            drift_per_hour: 0.0,
        }
    }

    #[test]
    fn warm_up_is_first_order() {
        // First-order RC response: after one time constant the rise reaches 1 - 1/e = 63.2 %
        // of its final value (common practice, thermal RC model).
        let m = model();
        let mut s = LedState::default();
        s.advance(&m, 0, true);
        s.advance(&m, 1000, true);
        assert!((s.rise_k() - 10.0 * (1.0 - (-1.0f32).exp())).abs() < 1e-3);
        // Steady state: output down by 4 %, peak up by 0.5 nm.
        s.advance(&m, 20_000, true);
        assert!((s.clear_rate(&m, 20_000) - 960.0).abs() < 0.1);
        assert!((s.spectrum(&m).peak_nm - 525.5).abs() < 1e-3);
        // Half drive: half the light, half the heating; dark: cools back.
        s.set_drive(0.5);
        s.advance(&m, 40_000, true);
        assert!((s.rise_k() - 5.0).abs() < 1e-3);
        s.advance(&m, 60_000, false);
        assert!(s.rise_k() < 1e-3);
        s.set_drive(f32::NAN);
        assert_eq!(s.drive(), 0.0);
    }
}
