//! The warm-up criterion, pure of hardware: feed it one net level per point, it says when the
//! LED is stable or that time ran out.
//!
//! A freshly lit LED changes its output as its junction heats (most visible LEDs dim by a few
//! tenths of a percent per kelvin). The sequencer measures short dark/lit series ("points")
//! and calls the LED stable when the relative change |P_i - P_{i-1}| / P_i stays below
//! [`WarmUpConfig::max_relative_change`] for [`WarmUpConfig::stable_points`] consecutive
//! points. The threshold must sit above the point-to-point noise (about
//! sqrt(2) times the relative standard error of one point), or warm-up only ends by luck.

use super::config::WarmUpConfig;
use super::error::SequenceError;
use crate::math;

/// Progress of the warm-up after one point.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WarmUpStatus {
    /// Still changing (or not enough points yet).
    Settling {
        /// Relative change from the previous point (infinite for the first point).
        relative_change: f32,
    },
    /// Stable: the procedure is done.
    Stable {
        /// Relative change from the previous point.
        relative_change: f32,
    },
}

/// Tracks warm-up points against the criterion, the timeout and the point budget.
#[derive(Clone, Copy, Debug)]
pub struct WarmUpMonitor {
    config: WarmUpConfig,
    start_ms: u32,
    last: Option<f32>,
    last_change: f32,
    run: u8,
    points: u16,
}

impl WarmUpMonitor {
    /// Starts the warm-up at `start_ms`.
    pub fn new(config: WarmUpConfig, start_ms: u32) -> Self {
        WarmUpMonitor {
            config,
            start_ms,
            last: None,
            last_change: f32::INFINITY,
            run: 0,
            points: 0,
        }
    }

    /// Points seen so far.
    pub fn points(&self) -> u16 {
        self.points
    }

    /// Feeds the net level of one point measured at `now_ms`.
    pub fn push(&mut self, net: f32, now_ms: u32) -> Result<WarmUpStatus, SequenceError> {
        if !net.is_finite() || net <= 0.0 {
            return Err(SequenceError::NoLight);
        }
        self.points = self.points.saturating_add(1);
        let change = match self.last {
            Some(prev) => math::absf(net - prev) / net,
            None => f32::INFINITY,
        };
        self.last = Some(net);
        self.last_change = change;
        if change < self.config.max_relative_change {
            self.run = self.run.saturating_add(1);
        } else {
            self.run = 0;
        }
        if self.run >= self.config.stable_points {
            return Ok(WarmUpStatus::Stable {
                relative_change: change,
            });
        }
        let elapsed = now_ms.wrapping_sub(self.start_ms);
        if elapsed >= self.config.timeout_ms || self.points >= self.config.max_points {
            return Err(SequenceError::WarmUpTimeout {
                relative_change: change,
            });
        }
        Ok(WarmUpStatus::Settling {
            relative_change: change,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cfg() -> WarmUpConfig {
        WarmUpConfig {
            max_relative_change: 0.01,
            stable_points: 2,
            timeout_ms: 10_000,
            max_points: 50,
            ..WarmUpConfig::default()
        }
    }

    #[test]
    fn exponential_settling_becomes_stable() {
        let mut m = WarmUpMonitor::new(cfg(), 0);
        let mut t = 0;
        let mut level = 1000.0f32;
        loop {
            t += 100;
            level = 900.0 + (level - 900.0) * 0.7;
            match m.push(level, t).unwrap() {
                WarmUpStatus::Stable { relative_change } => {
                    assert!(relative_change < 0.01);
                    break;
                }
                WarmUpStatus::Settling { .. } => assert!(m.points() < 50),
            }
        }
        // Point k is 900 + 100·0.7^k; its change 30·0.7^(k-1) over ~900 drops below 1 % from
        // k = 5 (0.7^4 = 0.24); two consecutive stable points → 6 points.
        assert_eq!(m.points(), 6);
    }

    #[test]
    fn times_out_and_rejects_darkness() {
        let mut m = WarmUpMonitor::new(cfg(), 4_294_960_000);
        // Alternating levels never settle; time wraps around u32 and still counts.
        let mut out = Ok(WarmUpStatus::Settling {
            relative_change: 0.0,
        });
        for i in 0..20u32 {
            out = m.push(
                if i % 2 == 0 { 1000.0 } else { 1100.0 },
                4_294_960_000u32.wrapping_add(i * 1000),
            );
            if out.is_err() {
                break;
            }
        }
        assert!(matches!(out, Err(SequenceError::WarmUpTimeout { .. })));
        let mut m = WarmUpMonitor::new(cfg(), 0);
        assert_eq!(m.push(0.0, 1), Err(SequenceError::NoLight));
        assert_eq!(m.push(f32::NAN, 1), Err(SequenceError::NoLight));
    }
}
