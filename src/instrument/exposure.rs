//! Exposure: the detector's exposure step and the LED drive, and the auto-exposure planner
//! that chooses them (pure: it sees probe results, never hardware).
//!
//! # Sensitivity
//! An exposure's relative sensitivity is `sensitivity(step) · duty / max_duty`: the detector
//! step's sensitivity (integration time or gain, from [`super::Detector::sensitivity`]) times
//! the LED's relative drive. Both are taken as linear, which holds for integration time and PWM
//! drive; the reference detector, whose exposure is never changed, follows the drive alone.
//!
//! # Auto-exposure
//! A probe gives the mean lit and dark read of the blank. When the lit mean lies inside
//! `[low, high]` of full scale, the exposure is kept. Otherwise the sensitivity that would put
//! the lit mean at `target` is `k' = k · (target·FS - dark) / (lit - dark)` (a clipped probe
//! hides its level: `k' = k · back_off²`). The planner realises `k'` with full LED drive on
//! the least sensitive step that reaches it (most photons, least relative shot noise) and the
//! drive trimmed down to match. When `k'` lies beyond the reachable range and the planner is
//! already at that end, auto-exposure fails with [`ExposureError::TooDim`] or
//! [`ExposureError::TooBright`].

use super::config::ExposureConfig;
use super::error::ExposureError;

/// A detector exposure step and an LED drive level.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Exposure {
    /// The measuring detector's exposure step (0 = least sensitive).
    pub step: u8,
    /// The LED duty cycle (0 ..= the dimmer's maximum).
    pub duty: u16,
}

/// What the hardware can do: detector steps and LED drive range.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ExposureRange {
    /// Number of detector exposure steps (>= 1).
    pub steps: u8,
    /// The dimmer's maximum duty cycle (>= 1).
    pub max_duty: u16,
    /// The lowest duty cycle auto-exposure uses (1 ..= max_duty).
    pub min_duty: u16,
}

/// Mean reads of one auto-exposure probe.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Probe {
    /// Mean lit read (counts).
    pub lit: f32,
    /// Mean dark read (counts).
    pub dark: f32,
    /// Whether a lit read reached full scale.
    pub clipped: bool,
}

/// The planner's verdict on a probe.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ExposureDecision {
    /// The probe's exposure puts the blank inside the window.
    Accept,
    /// Probe again with this exposure.
    Try(Exposure),
}

/// Chooses exposures (pure).
#[derive(Clone, Copy, Debug)]
pub struct ExposurePlanner<S> {
    range: ExposureRange,
    config: ExposureConfig,
    full_scale: f32,
    sensitivity: S,
}

impl<S: Fn(u8) -> Option<f32>> ExposurePlanner<S> {
    /// A planner for a detector of `full_scale` counts whose step sensitivities `sensitivity`
    /// gives (positive and ascending; the sequencer checks this before).
    pub fn new(
        range: ExposureRange,
        config: ExposureConfig,
        full_scale: u32,
        sensitivity: S,
    ) -> Self {
        ExposurePlanner {
            range,
            config,
            full_scale: full_scale as f32,
            sensitivity,
        }
    }

    /// The most sensitive exposure: the top step at full drive.
    pub fn most_sensitive(&self) -> Exposure {
        Exposure {
            step: self.range.steps.saturating_sub(1),
            duty: self.range.max_duty,
        }
    }

    /// Relative sensitivity of an exposure (0 for a step the detector does not have).
    pub fn sensitivity(&self, e: Exposure) -> f32 {
        let step = (self.sensitivity)(e.step).unwrap_or(0.0);
        step * self.drive(e)
    }

    /// Relative LED drive of an exposure (duty / max duty).
    pub fn drive(&self, e: Exposure) -> f32 {
        f32::from(e.duty) / f32::from(self.range.max_duty.max(1))
    }

    /// The exposure closest to sensitivity `k` within the hardware's range.
    pub fn realise(&self, k: f32) -> Exposure {
        let max = f32::from(self.range.max_duty);
        for step in 0..self.range.steps {
            let s = (self.sensitivity)(step).unwrap_or(0.0);
            if s > 0.0 && s >= k {
                let duty = (k / s * max + 0.5) as u32;
                let duty =
                    (duty.min(u32::from(self.range.max_duty)) as u16).max(self.range.min_duty);
                return Exposure { step, duty };
            }
        }
        self.most_sensitive()
    }

    /// Judges a probe taken at exposure `current`.
    pub fn judge(
        &self,
        current: Exposure,
        probe: Probe,
    ) -> Result<ExposureDecision, ExposureError> {
        let fs = self.full_scale;
        let lit_fraction = if probe.clipped { 1.0 } else { probe.lit / fs };
        let inside =
            !probe.clipped && lit_fraction >= self.config.low && lit_fraction <= self.config.high;
        if inside {
            return Ok(ExposureDecision::Accept);
        }
        let k = self.sensitivity(current);
        let target_net = self.config.target * fs - probe.dark;
        if target_net <= 0.0 {
            return Err(ExposureError::DarkTooHigh {
                dark_fraction: probe.dark / fs,
            });
        }
        let net = probe.lit - probe.dark;
        let wanted = if probe.clipped {
            k * self.config.back_off * self.config.back_off
        } else if net > 0.0 {
            k * target_net / net
        } else {
            f32::INFINITY
        };
        let next = self.realise(wanted);
        if next == current {
            return Err(if wanted > k {
                ExposureError::TooDim { lit_fraction }
            } else {
                ExposureError::TooBright { lit_fraction }
            });
        }
        Ok(ExposureDecision::Try(next))
    }

    /// One back-off step after a clipped measurement: the exposure at `back_off` times the
    /// sensitivity, or `None` when nothing less sensitive exists.
    pub fn back_off(&self, current: Exposure) -> Option<Exposure> {
        let next = self.realise(self.sensitivity(current) * self.config.back_off);
        if self.sensitivity(next) < self.sensitivity(current) {
            Some(next)
        } else {
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const STEPS: [f32; 4] = [1.0, 2.0, 4.0, 8.0];

    fn planner() -> ExposurePlanner<impl Fn(u8) -> Option<f32>> {
        ExposurePlanner::new(
            ExposureRange {
                steps: 4,
                max_duty: 1000,
                min_duty: 20,
            },
            ExposureConfig::default(),
            10_000,
            |s| STEPS.get(usize::from(s)).copied(),
        )
    }

    #[test]
    fn predicts_the_exposure_that_hits_the_target() {
        let p = planner();
        // Lit 2000 over dark 500 at step 0 full drive: net 1500, wanted net 7250 - 500 = 6750,
        // k' = 4.5 → step 3 (8) at duty 4.5/8 = 0.5625 → 563.
        let d = p
            .judge(
                Exposure {
                    step: 0,
                    duty: 1000,
                },
                Probe {
                    lit: 2000.0,
                    dark: 500.0,
                    clipped: false,
                },
            )
            .unwrap();
        assert_eq!(d, ExposureDecision::Try(Exposure { step: 3, duty: 563 }));
        // Inside the window: accept.
        let d = p.judge(
            Exposure { step: 3, duty: 563 },
            Probe {
                lit: 7000.0,
                dark: 500.0,
                clipped: false,
            },
        );
        assert_eq!(d, Ok(ExposureDecision::Accept));
    }

    #[test]
    fn clipped_backs_off_and_limits_fail_clearly() {
        let p = planner();
        let top = p.most_sensitive();
        let d = p
            .judge(
                top,
                Probe {
                    lit: 10_000.0,
                    dark: 100.0,
                    clipped: true,
                },
            )
            .unwrap();
        // k = 8 → 8 · 0.25 = 2 → step 1 at full drive.
        assert_eq!(
            d,
            ExposureDecision::Try(Exposure {
                step: 1,
                duty: 1000
            })
        );
        let dim = p.judge(
            top,
            Probe {
                lit: 3000.0,
                dark: 100.0,
                clipped: false,
            },
        );
        assert!(matches!(dim, Err(ExposureError::TooDim { .. })));
        let bottom = Exposure { step: 0, duty: 20 };
        let bright = p.judge(
            bottom,
            Probe {
                lit: 10_000.0,
                dark: 100.0,
                clipped: true,
            },
        );
        assert_eq!(bright, Err(ExposureError::TooBright { lit_fraction: 1.0 }));
        let dark = p.judge(
            top,
            Probe {
                lit: 9000.0,
                dark: 8000.0,
                clipped: false,
            },
        );
        assert!(matches!(dark, Err(ExposureError::DarkTooHigh { .. })));
        assert_eq!(p.back_off(bottom), None);
        assert_eq!(
            p.back_off(Exposure {
                step: 2,
                duty: 1000
            }),
            Some(Exposure {
                step: 1,
                duty: 1000
            })
        );
    }
}
