//! The propagated standard uncertainty of an absorbance, checked against the scatter of
//! repeated simulated measurements through the whole raw-read path.
//!
//! Method: the first-order law of propagation of uncertainty (JCGM 100:2008, "GUM", eq. 10)
//! is what `photometric_result` implements; JCGM 101:2008 (GUM Supplement 1) validates such a
//! result by Monte Carlo propagation of the input distributions. Here the inputs are simulated
//! Gaussian reads (invented levels and noise, labelled as simulation), and the check is that the
//! standard deviation of the simulated absorbances agrees with the mean reported u(A) within
//! 12 % (a 2000-trial Monte Carlo estimate of an SD carries about 1.6 % relative sampling
//! error; the rest allows for the first-order approximation and the robust estimator).

use lumisorb::{photometric_result, DarkLitSeries, FullScale, PhotometryConfig, SeriesConfig};

struct Gauss(u64);
impl Gauss {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let x = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        ((x >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
    fn read(&mut self, level: f64, sd: f64) -> u32 {
        (level + sd * self.normal()).round().max(0.0) as u32
    }
}

/// One simulated measurement: `n` interleaved dark/lit pairs; lit level `p` above dark 2000;
/// read noise 15 counts plus shot-like noise sqrt(level); optional reference at 50 000 counts.
fn series(g: &mut Gauss, p: f64, reference: bool, led: f64) -> lumisorb::NetSignal {
    let fs = FullScale::from_bits(20).unwrap();
    let mut s = DarkLitSeries::<32>::new(fs, reference.then_some(fs));
    for _ in 0..24 {
        let rd = reference.then(|| g.read(1000.0, 10.0));
        s.push_dark(g.read(2000.0, 15.0), rd).unwrap();
        let lit = 2000.0 + p * led;
        let rl =
            reference.then(|| g.read(1000.0 + 50_000.0 * led, (100.0f64 + 50_000.0 * led).sqrt()));
        s.push_lit(g.read(lit, (225.0 + p * led).sqrt()), rl)
            .unwrap();
    }
    s.finish(&SeriesConfig::default()).unwrap()
}

fn check(true_t: f64, reference: bool) {
    let mut g = Gauss(0x0bad_cafe_1234_5678 ^ (true_t.to_bits()));
    let cfg = PhotometryConfig::default();
    let (mut sum, mut sum2, mut sum_u) = (0f64, 0f64, 0f64);
    let trials = 2000;
    for i in 0..trials {
        // LED output wanders by +-3 % from trial to trial: the reference must absorb it.
        let led = if reference {
            1.0 + 0.03 * ((i % 7) as f64 - 3.0) / 3.0
        } else {
            1.0
        };
        let blank = series(&mut g, 400_000.0, reference, led);
        let sample = series(&mut g, 400_000.0 * true_t, reference, led);
        let r = photometric_result(&blank, &sample, &cfg).unwrap();
        let a = r.absorbance.value() as f64;
        sum += a;
        sum2 += a * a;
        sum_u += r.absorbance_sd as f64;
    }
    let n = trials as f64;
    let mean = sum / n;
    let sd = ((sum2 - sum * sum / n) / (n - 1.0)).sqrt();
    let u = sum_u / n;
    let expected_a = -true_t.log10();
    println!("T={true_t} ref={reference}: mean A {mean:.5} (true {expected_a:.5}), MC sd {sd:.3e}, reported u {u:.3e}");
    assert!(
        (mean - expected_a).abs() < 4.0 * sd / n.sqrt() + 1e-4,
        "bias"
    );
    assert!((sd / u - 1.0).abs() < 0.12, "MC sd {sd} vs reported {u}");
}

#[test]
fn reported_uncertainty_matches_monte_carlo() {
    for t in [0.9, 0.3, 0.05, 0.005] {
        check(t, false);
    }
}

#[test]
fn reported_uncertainty_matches_monte_carlo_with_reference() {
    for t in [0.5, 0.02] {
        check(t, true);
    }
}
