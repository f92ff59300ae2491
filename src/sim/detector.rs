//! The simulated photodetector and its ADC: responsivity, dark offset with slow drift, shot and
//! read noise, full-scale clipping and quantisation.
//!
//! # Model
//!
//! For an integration time `t_int` (ms), with `R` photoelectrons per ms arriving (zero when
//! the LED is dark) and a dark current `I_d` photoelectrons per ms, one read is
//!
//! ```text
//! n_e   ~ Poisson((R + I_d) · t_int)                        shot noise (variance = mean)
//! x     = g · n_e + D(t) + σ_read · z,   z ~ N(0, 1)         conversion gain, offset, read noise
//! code  = round(clamp(x, 0, full_scale))                    clipping and ADC quantisation
//! D(t)  = D_0 + D_drift · t_hours                           slow dark-offset drift
//! ```
//!
//! `g` is the conversion gain (counts per photoelectron) times the gain setting. Photodiode
//! front ends are shot-noise limited at high light and read-noise limited in the dark, which
//! is what makes the relative noise of a dark, strongly absorbing sample larger: the reason a
//! photometer's absorbance uncertainty grows at both ends of its range.

use super::rng::SimRng;

/// Parameters of one simulated detector channel.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DetectorModel {
    /// Largest code the ADC returns (reads clip there).
    pub full_scale: u32,
    /// Conversion gain at gain setting 1: ADC counts per photoelectron.
    pub counts_per_electron: f32,
    /// Dark current in photoelectrons per ms (thermal generation, leakage).
    pub dark_current_e_per_ms: f32,
    /// Electronic offset of the ADC front end at power-up (counts).
    pub dark_offset: f32,
    /// Drift of that offset per hour (counts/h; slow temperature drift of the front end).
    pub dark_drift_per_hour: f32,
    /// RMS read noise (counts, amplifier and ADC together).
    pub read_noise: f32,
}

impl DetectorModel {
    /// Whether every parameter is finite and physical.
    pub fn is_valid(&self) -> bool {
        let finite = [
            self.counts_per_electron,
            self.dark_current_e_per_ms,
            self.dark_offset,
            self.dark_drift_per_hour,
            self.read_noise,
        ]
        .iter()
        .all(|x| x.is_finite());
        finite
            && self.full_scale > 0
            && self.counts_per_electron > 0.0
            && self.dark_current_e_per_ms >= 0.0
            && self.read_noise >= 0.0
    }

    /// The noise-free mean of a read before clipping (counts).
    pub fn mean_counts(
        &self,
        rate_e_per_ms: f32,
        integration_ms: f32,
        gain: f32,
        t_ms: u32,
    ) -> f32 {
        let electrons = (rate_e_per_ms + self.dark_current_e_per_ms) * integration_ms;
        electrons * self.counts_per_electron * gain + self.offset_at(t_ms)
    }

    /// The dark offset at `t_ms` (counts).
    pub fn offset_at(&self, t_ms: u32) -> f32 {
        self.dark_offset + self.dark_drift_per_hour * (t_ms as f32 / 3_600_000.0)
    }

    /// One noisy, clipped, quantised read.
    pub fn read(
        &self,
        rng: &mut SimRng,
        rate_e_per_ms: f32,
        integration_ms: f32,
        gain: f32,
        t_ms: u32,
    ) -> u32 {
        let mean_e = (rate_e_per_ms + self.dark_current_e_per_ms) * integration_ms;
        let electrons = rng.poisson(mean_e);
        let x = electrons * self.counts_per_electron * gain
            + self.offset_at(t_ms)
            + self.read_noise * rng.gaussian();
        let fs = self.full_scale as f32;
        if x.is_nan() || x <= 0.0 {
            0
        } else if x >= fs {
            self.full_scale
        } else {
            // Round half up; below full scale, so the cast cannot saturate.
            ((x + 0.5) as u32).min(self.full_scale)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn model() -> DetectorModel {
        DetectorModel {
            full_scale: 65_535,
            counts_per_electron: 1.0,
            dark_current_e_per_ms: 0.0,
            dark_offset: 0.0,
            dark_drift_per_hour: 0.0,
            read_noise: 0.0,
        }
    }

    #[test]
    fn shot_noise_limited_read_has_poisson_variance() {
        // With one count per photoelectron, no read noise and no offset, counts are Poisson:
        // variance = mean (counting statistics, common practice).
        let d = model();
        let mut rng = SimRng::new(11);
        let n = 50_000u32;
        let (mut s, mut s2) = (0.0f64, 0.0f64);
        for _ in 0..n {
            let x = d.read(&mut rng, 400.0, 1.0, 1.0, 0) as f64;
            s += x;
            s2 += x * x;
        }
        let mean = s / n as f64;
        let var = s2 / n as f64 - mean * mean;
        assert!((mean - 400.0).abs() < 0.5, "mean {mean}");
        assert!(
            (var / mean - 1.0).abs() < 0.04,
            "variance/mean {}",
            var / mean
        );
    }

    #[test]
    fn read_noise_adds_in_quadrature_and_gain_scales_variance() {
        // Independent noise sources add in variance (common practice): var = g²·N + σ_r².
        let mut d = model();
        d.read_noise = 30.0;
        d.dark_offset = 1000.0;
        let mut rng = SimRng::new(12);
        let n = 50_000u32;
        let (mut s, mut s2) = (0.0f64, 0.0f64);
        for _ in 0..n {
            let x = d.read(&mut rng, 900.0, 1.0, 2.0, 0) as f64;
            s += x;
            s2 += x * x;
        }
        let mean = s / n as f64;
        let var = s2 / n as f64 - mean * mean;
        let expected = 4.0 * 900.0 + 900.0 + 1.0 / 12.0; // + quantisation (LSB²/12)
        assert!((mean - 2800.0).abs() < 1.0, "mean {mean}");
        assert!(
            (var / expected - 1.0).abs() < 0.04,
            "variance {var} vs {expected}"
        );
    }

    #[test]
    fn clips_at_full_scale_and_zero_and_drifts() {
        let mut d = model();
        let mut rng = SimRng::new(13);
        assert_eq!(d.read(&mut rng, 1e9, 1.0, 1.0, 0), 65_535);
        d.dark_offset = -500.0;
        assert_eq!(d.read(&mut rng, 0.0, 1.0, 1.0, 0), 0);
        d.dark_offset = 100.0;
        d.dark_drift_per_hour = 10.0;
        assert_eq!(d.read(&mut rng, 0.0, 1.0, 1.0, 7_200_000), 120);
        assert_eq!(d.read(&mut rng, f32::NAN, 1.0, 1.0, 0), 100);
    }
}
