//! A small deterministic, seedable pseudo-random number generator and the noise draws the
//! simulator needs (uniform, Gaussian, Poisson shot noise). No dependencies, no heap, `Copy`.
//!
//! The generator is xoshiro128++ (Blackman and Vigna, "Scrambled linear pseudorandom number
//! generators", ACM TOMS 47, 2021): 128 bits of state, 32-bit output, only shifts, rotations,
//! additions and xors, so it is as fast on a Cortex-M0 as on a PC and gives the same stream on
//! every target. The state is seeded from a `u64` through SplitMix64 (same authors), which
//! never yields the all-zero state xoshiro must avoid for any practical seed.
//!
//! * [`SimRng::gaussian`] uses the Marsaglia polar method (exact standard normal deviates from
//!   pairs of uniforms). The rejection loop is bounded (the chance that 32 tries all fail is
//!   about 1e-21); in that case 0.0 is returned, so the draw never hangs.
//! * [`SimRng::poisson`] is exact for small means (Knuth's product of uniforms, bounded) and
//!   uses the normal approximation `N(mean, mean)`, rounded and clamped at zero, above
//!   [`POISSON_EXACT_MAX`]; at photodiode photoelectron numbers (thousands to millions per
//!   read) the difference is far below anything the photometry can see.

use crate::math;

/// Means up to this value get an exact Poisson draw; above it, the normal approximation.
pub const POISSON_EXACT_MAX: f32 = 30.0;

/// Deterministic pseudo-random generator (xoshiro128++ seeded through SplitMix64).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimRng {
    s: [u32; 4],
    /// A spare normal deviate from the polar method (it yields two per accepted pair).
    spare: Option<u32>,
}

fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl SimRng {
    /// A generator seeded from `seed`; the same seed gives the same stream on every target.
    pub fn new(seed: u64) -> SimRng {
        let mut sm = seed;
        let a = splitmix64(&mut sm);
        let b = splitmix64(&mut sm);
        let mut s = [a as u32, (a >> 32) as u32, b as u32, (b >> 32) as u32];
        if a | b == 0 {
            // Cannot happen for SplitMix64 output in practice; kept so the state is never stuck.
            s[0] = 1;
        }
        SimRng { s, spare: None }
    }

    /// The next 32 random bits.
    pub fn next_u32(&mut self) -> u32 {
        let [s0, s1, s2, s3] = self.s;
        let result = s0.wrapping_add(s3).rotate_left(7).wrapping_add(s0);
        let t = s1 << 9;
        let mut n = [s0, s1, s2 ^ s0, s3 ^ s1];
        n[1] ^= n[2];
        n[0] ^= n[3];
        n[2] ^= t;
        n[3] = n[3].rotate_left(11);
        self.s = n;
        result
    }

    /// A uniform deviate in `[0, 1)` with 24 random bits (every value exactly representable).
    pub fn uniform(&mut self) -> f32 {
        (self.next_u32() >> 8) as f32 * (1.0 / 16_777_216.0)
    }

    /// A uniform deviate in `(0, 1]` (never zero, safe under a logarithm).
    pub fn uniform_open0(&mut self) -> f32 {
        ((self.next_u32() >> 8) + 1) as f32 * (1.0 / 16_777_216.0)
    }

    /// A standard normal deviate (mean 0, variance 1), Marsaglia polar method.
    pub fn gaussian(&mut self) -> f32 {
        if let Some(bits) = self.spare.take() {
            return f32::from_bits(bits);
        }
        for _ in 0..32 {
            let u = 2.0 * self.uniform() - 1.0;
            let v = 2.0 * self.uniform() - 1.0;
            let s = u * u + v * v;
            if s > 0.0 && s < 1.0 {
                let k = math::sqrtf(-2.0 * math::lnf(s) / s);
                self.spare = Some((v * k).to_bits());
                return u * k;
            }
        }
        0.0
    }

    /// A Poisson-distributed count with the given mean (photoelectrons: shot noise).
    ///
    /// Negative, zero or non-finite means give 0.
    pub fn poisson(&mut self, mean: f32) -> f32 {
        if !mean.is_finite() || mean <= 0.0 {
            return 0.0;
        }
        if mean <= POISSON_EXACT_MAX {
            // Knuth: count uniforms until their product drops below exp(-mean). The loop bound
            // (8 * 30 + 40 = 280) is many standard deviations above the largest exact mean.
            let limit = math::expf(-mean);
            let mut product = self.uniform_open0();
            let mut k = 0u32;
            while product > limit && k < 280 {
                product *= self.uniform_open0();
                k += 1;
            }
            k as f32
        } else {
            let x = mean + math::sqrtf(mean) * self.gaussian();
            // Round half up; the saturating float-to-int cast clamps negatives at zero.
            (x + 0.5) as u32 as f32
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn moments(mut f: impl FnMut() -> f32, n: u32) -> (f64, f64) {
        let (mut s, mut s2) = (0.0f64, 0.0f64);
        for _ in 0..n {
            let x = f() as f64;
            s += x;
            s2 += x * x;
        }
        let mean = s / n as f64;
        (mean, s2 / n as f64 - mean * mean)
    }

    #[test]
    fn same_seed_same_stream_other_seed_other_stream() {
        let mut a = SimRng::new(7);
        let mut b = SimRng::new(7);
        let mut c = SimRng::new(8);
        let xs: [u32; 4] = core::array::from_fn(|_| a.next_u32());
        let ys: [u32; 4] = core::array::from_fn(|_| b.next_u32());
        let zs: [u32; 4] = core::array::from_fn(|_| c.next_u32());
        assert_eq!(xs, ys);
        assert_ne!(xs, zs);
    }

    #[test]
    fn uniform_has_the_moments_of_the_unit_interval() {
        // Fact: U(0,1) has mean 1/2 and variance 1/12. With n = 200 000 the standard error of
        // the mean is 0.00065, of the variance about 0.00019: tolerances are > 4 standard errors.
        let mut r = SimRng::new(1);
        let (m, v) = moments(|| r.uniform(), 200_000);
        assert!((m - 0.5).abs() < 0.003, "mean {m}");
        assert!((v - 1.0 / 12.0).abs() < 0.001, "variance {v}");
    }

    #[test]
    fn gaussian_is_standard_normal() {
        // Fact: the standard normal has mean 0, variance 1 and P(|z| < 1.96) = 0.95
        // (NIST/SEMATECH e-Handbook, table of the normal distribution).
        let mut r = SimRng::new(2);
        let n = 200_000;
        let mut inside = 0u32;
        let (m, v) = moments(
            || {
                let z = r.gaussian();
                if z.abs() < 1.96 {
                    inside += 1;
                }
                z
            },
            n,
        );
        assert!(m.abs() < 0.01, "mean {m}");
        assert!((v - 1.0).abs() < 0.02, "variance {v}");
        let p = inside as f64 / n as f64;
        assert!((p - 0.95).abs() < 0.003, "coverage {p}");
    }

    #[test]
    fn shot_noise_variance_equals_mean() {
        // Poisson counting statistics: variance = mean (common practice; e.g. any text on
        // photon counting / shot noise). Both the exact and the approximated branch.
        for (seed, mean) in [(3u64, 4.0f32), (4, 25.0), (5, 1000.0), (6, 250_000.0)] {
            let mut r = SimRng::new(seed);
            let n = 100_000;
            let (m, v) = moments(|| r.poisson(mean), n);
            let mean = mean as f64;
            // Standard error of the sample mean is sqrt(mean / n); of the variance about
            // mean * sqrt(2 / n) (+ a small excess-kurtosis term 1/mean): 5 standard errors.
            assert!(
                (m - mean).abs() < 5.0 * (mean / n as f64).sqrt(),
                "mean {m} vs {mean}"
            );
            assert!(
                (v - mean).abs() < 5.0 * mean * (2.0 / n as f64 + 1.0 / (mean * n as f64)).sqrt(),
                "variance {v} vs {mean}"
            );
        }
        let mut r = SimRng::new(9);
        assert_eq!(r.poisson(0.0), 0.0);
        assert_eq!(r.poisson(-3.0), 0.0);
        assert_eq!(r.poisson(f32::NAN), 0.0);
    }
}
