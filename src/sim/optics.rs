//! Optics of the simulated photometer: the LED's emission band against the analyte's absorption
//! band in a cuvette, with stray light.
//!
//! # Model
//!
//! Both the LED emission `S(λ)` and the analyte's decadic absorptivity `ε(λ)` are Gaussian bands
//! ([`GaussianBand`], given by peak wavelength and full width at half maximum). Real LED spectra
//! are a little asymmetric and real absorption bands are not Gaussian, but the pair captures
//! what matters for a photometer: a source of finite bandwidth against a band whose absorptivity
//! changes across it.
//!
//! Light that passes the sample (path length `l` in cm, concentration `c`, a wavelength-flat
//! background attenuance `b` for turbidity or a coloured matrix) is
//!
//! ```text
//! T_true = 10^(-b) · ∫ S(λ) · 10^(-ε(λ)·c·l) dλ / ∫ S(λ) dλ
//! ```
//!
//! integrated numerically (composite Simpson rule, [`SIMPSON_INTERVALS`] intervals over
//! ±3 FWHM of the LED band, which holds all but 1e-11 of a Gaussian's area). Because the
//! average of `10^(-A(λ))` is not `10^(-average A)`, the apparent absorbance of a band-limited
//! source bends below `ε·c·l` as the absorbance grows: the real *negative deviation from
//! Beer-Lambert* of polychromatic light appears by itself, and vanishes in the limit of a narrow
//! LED, where `A = ε·l·c` (Beer-Lambert law; IUPAC Gold Book, "Beer-Lambert law").
//!
//! Stray light (light that reaches the detector without passing the sample's absorbing path)
//! is a fraction `s = P_s / P_0` of the clear-cuvette power, so the detector sees
//! `P_0 · (T_true + s)` and a blank at `P_0 · (1 + s)`, giving the textbook apparent absorbance
//! `A_app = -log10((T + s) / (1 + s))` (e.g. Harvey, *Analytical Chemistry 2.1*, ch. 10, from memory).

use crate::math;

/// Intervals of the composite Simpson rule over the LED band (even).
pub const SIMPSON_INTERVALS: u32 = 64;

/// FWHM = 2·sqrt(2·ln 2)·σ for a Gaussian.
const FWHM_PER_SIGMA: f32 = 2.354_82;

/// Bands narrower than this (nm) are treated as a single wavelength.
pub const MONOCHROMATIC_FWHM_NM: f32 = 1e-3;

/// A Gaussian spectral band: peak wavelength and full width at half maximum, in nanometres.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GaussianBand {
    /// Peak wavelength (nm).
    pub peak_nm: f32,
    /// Full width at half maximum (nm); at most [`MONOCHROMATIC_FWHM_NM`] means one wavelength.
    pub fwhm_nm: f32,
}

impl GaussianBand {
    /// Relative height of the band at `wavelength_nm` (1.0 at the peak).
    pub fn shape(&self, wavelength_nm: f32) -> f32 {
        if self.fwhm_nm <= MONOCHROMATIC_FWHM_NM {
            return if wavelength_nm == self.peak_nm {
                1.0
            } else {
                0.0
            };
        }
        let sigma = self.fwhm_nm / FWHM_PER_SIGMA;
        let d = (wavelength_nm - self.peak_nm) / sigma;
        math::expf(-0.5 * d * d)
    }

    fn is_valid(&self) -> bool {
        self.peak_nm.is_finite()
            && self.peak_nm > 0.0
            && self.fwhm_nm.is_finite()
            && self.fwhm_nm >= 0.0
    }
}

/// The analyte: its absorption band and its absorptivity at the band's peak.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Absorber {
    /// The absorption band (shape of ε(λ)).
    pub band: GaussianBand,
    /// Decadic absorbance per concentration unit per cm at the band peak (ε in the units the
    /// simulation uses for concentration, e.g. L mg⁻¹ cm⁻¹).
    pub absorptivity_per_cm: f32,
}

impl Absorber {
    /// Decadic absorbance at one wavelength for concentration `c` over `path_cm`.
    pub fn absorbance_at(&self, wavelength_nm: f32, concentration: f32, path_cm: f32) -> f32 {
        self.absorptivity_per_cm * self.band.shape(wavelength_nm) * concentration * path_cm
    }
}

/// The cuvette and the optical path: path length and stray-light fraction.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cuvette {
    /// Optical path length (cm).
    pub path_cm: f32,
    /// Stray light `s = P_s / P_0` as a fraction of the clear-cuvette power (0 <= s < 1).
    pub stray_fraction: f32,
}

/// What is in the cuvette.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimSample {
    /// Analyte concentration in the units of [`Absorber::absorptivity_per_cm`]; negative or
    /// non-finite values are taken as zero.
    pub concentration: f32,
    /// Wavelength-flat attenuance of the matrix (turbidity, a coloured reagent blank), decadic;
    /// negative or non-finite values are taken as zero.
    pub background_absorbance: f32,
}

impl SimSample {
    /// A clear cuvette of solvent (the blank).
    pub const BLANK: SimSample = SimSample {
        concentration: 0.0,
        background_absorbance: 0.0,
    };

    /// A sample with the given analyte concentration and no background.
    pub const fn with_concentration(concentration: f32) -> SimSample {
        SimSample {
            concentration,
            background_absorbance: 0.0,
        }
    }
}

fn non_negative(x: f32) -> f32 {
    if x.is_finite() && x > 0.0 {
        x
    } else {
        0.0
    }
}

/// Optical model: absorber, cuvette.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Optics {
    /// The analyte's absorption.
    pub absorber: Absorber,
    /// Path length and stray light.
    pub cuvette: Cuvette,
}

impl Optics {
    /// Whether every parameter is finite and physical.
    pub fn is_valid(&self) -> bool {
        let a = &self.absorber;
        let c = &self.cuvette;
        a.band.is_valid()
            && a.absorptivity_per_cm.is_finite()
            && a.absorptivity_per_cm >= 0.0
            && c.path_cm.is_finite()
            && c.path_cm > 0.0
            && c.stray_fraction.is_finite()
            && c.stray_fraction >= 0.0
            && c.stray_fraction < 1.0
    }

    /// True transmittance of the sample for light of the `emission` band (no stray light):
    /// the emission-weighted mean of `10^(-A(λ))`, times `10^(-background)`.
    pub fn true_transmittance(&self, emission: &GaussianBand, sample: &SimSample) -> f32 {
        let c = non_negative(sample.concentration);
        let background = math::exp10f(-non_negative(sample.background_absorbance));
        let l = self.cuvette.path_cm;
        if emission.fwhm_nm <= MONOCHROMATIC_FWHM_NM || c == 0.0 {
            let a = self.absorber.absorbance_at(emission.peak_nm, c, l);
            return background * math::exp10f(-a);
        }
        let half_span = 3.0 * emission.fwhm_nm;
        let start = emission.peak_nm - half_span;
        let h = 2.0 * half_span / SIMPSON_INTERVALS as f32;
        let (mut weighted, mut total) = (0.0f32, 0.0f32);
        for i in 0..=SIMPSON_INTERVALS {
            let simpson = if i == 0 || i == SIMPSON_INTERVALS {
                1.0
            } else if i % 2 == 1 {
                4.0
            } else {
                2.0
            };
            let lambda = start + h * i as f32;
            let w = simpson * emission.shape(lambda);
            total += w;
            weighted += w * math::exp10f(-self.absorber.absorbance_at(lambda, c, l));
        }
        if total > 0.0 {
            background * weighted / total
        } else {
            background
        }
    }

    /// Power at the detector relative to the clear-cuvette power `P_0`: `T_true + s`.
    pub fn detected_fraction(&self, emission: &GaussianBand, sample: &SimSample) -> f32 {
        self.true_transmittance(emission, sample) + self.cuvette.stray_fraction
    }

    /// The noise-free apparent absorbance a perfect detector would report against a solvent
    /// blank: `-log10((T + s) / (1 + s))`.
    pub fn apparent_absorbance(&self, emission: &GaussianBand, sample: &SimSample) -> f32 {
        let blank = self.detected_fraction(emission, &SimSample::BLANK);
        let seen = self.detected_fraction(emission, sample);
        -math::log10f(seen / blank)
    }

    /// The Beer-Lambert absorbance at the LED peak, `ε(λ_peak)·l·c` (what a monochromatic,
    /// stray-free photometer would read), plus the background.
    pub fn beer_lambert_absorbance(&self, emission: &GaussianBand, sample: &SimSample) -> f32 {
        self.absorber.absorbance_at(
            emission.peak_nm,
            non_negative(sample.concentration),
            self.cuvette.path_cm,
        ) + non_negative(sample.background_absorbance)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn optics(stray: f32) -> Optics {
        Optics {
            absorber: Absorber {
                band: GaussianBand {
                    peak_nm: 540.0,
                    fwhm_nm: 80.0,
                },
                absorptivity_per_cm: 0.5,
            },
            cuvette: Cuvette {
                path_cm: 1.0,
                stray_fraction: stray,
            },
        }
    }

    #[test]
    fn narrow_led_obeys_beer_lambert() {
        // Beer-Lambert law A = ε·l·c (IUPAC Gold Book, "Beer-Lambert law"): in the limit of a
        // monochromatic source without stray light the apparent absorbance is exactly linear.
        let o = optics(0.0);
        for fwhm in [0.0f32, 0.5] {
            let led = GaussianBand {
                peak_nm: 540.0,
                fwhm_nm: fwhm,
            };
            for c in [0.1f32, 1.0, 2.0, 4.0, 6.0] {
                let s = SimSample::with_concentration(c);
                let a = o.apparent_absorbance(&led, &s);
                let expected = 0.5 * c;
                assert!(
                    (a - expected).abs() < 1e-4 * expected.max(1.0),
                    "fwhm {fwhm} c {c}: {a} vs {expected}"
                );
            }
        }
    }

    #[test]
    fn broad_led_bends_below_beer_lambert() {
        // Polychromatic radiation gives a negative deviation from Beer's law that grows with
        // absorbance (textbook fact, e.g. Harvey, Analytical Chemistry 2.1, §10.2 [mem]).
        let o = optics(0.0);
        let led = GaussianBand {
            peak_nm: 540.0,
            fwhm_nm: 40.0,
        };
        let mut last_ratio = 1.0f32;
        for c in [0.2f32, 1.0, 2.0, 4.0, 8.0] {
            let s = SimSample::with_concentration(c);
            let ratio = o.apparent_absorbance(&led, &s) / o.beer_lambert_absorbance(&led, &s);
            assert!(ratio < 1.0 && ratio < last_ratio, "c {c}: ratio {ratio}");
            last_ratio = ratio;
        }
        // At low absorbance the apparent absorptivity is the emission-weighted mean of ε(λ)
        // (first-order expansion of 10^-A). For two Gaussians of σ_e, σ_a that mean is
        // ε_peak·σ_a/sqrt(σ_a²+σ_e²) [calc, convolution of Gaussians]; same peak here.
        let (se, sa) = (40.0f32 / FWHM_PER_SIGMA, 80.0f32 / FWHM_PER_SIGMA);
        let eff = 0.5 * sa / (sa * sa + se * se).sqrt();
        let c = 1e-3;
        let a = o.apparent_absorbance(&led, &SimSample::with_concentration(c));
        assert!((a / c - eff).abs() < 1e-3 * eff, "{} vs {eff}", a / c);
    }

    #[test]
    fn stray_light_matches_textbook_table() {
        // A_app = -log10((T + s)/(1 + s)); values [calc] from published-values.md §4:
        // true A = 2.0 → 1.9590 (s = 0.001), 1.7033 (s = 0.01); true A = 3.0 → 2.6994, 1.9629.
        let led = GaussianBand {
            peak_nm: 540.0,
            fwhm_nm: 0.0,
        };
        for (s, a_true, expected) in [
            (0.001f32, 2.0f32, 1.9590f32),
            (0.01, 2.0, 1.7033),
            (0.001, 3.0, 2.6994),
            (0.01, 3.0, 1.9629),
        ] {
            let o = optics(s);
            let a = o.apparent_absorbance(&led, &SimSample::with_concentration(a_true / 0.5));
            assert!(
                (a - expected).abs() < 2e-4,
                "s {s}, A {a_true}: {a} vs {expected}"
            );
        }
    }

    #[test]
    fn background_is_flat_and_additive() {
        // Decadic absorbances of independent attenuators add (IUPAC Gold Book, "absorbance").
        let o = optics(0.0);
        let led = GaussianBand {
            peak_nm: 540.0,
            fwhm_nm: 0.0,
        };
        let a = o.apparent_absorbance(
            &led,
            &SimSample {
                concentration: 1.0,
                background_absorbance: 0.3,
            },
        );
        assert!((a - 0.8).abs() < 1e-5);
        // Bad inputs are clamped, never NaN.
        let a = o.apparent_absorbance(
            &led,
            &SimSample {
                concentration: f32::NAN,
                background_absorbance: -1.0,
            },
        );
        assert_eq!(a, 0.0);
    }
}
