//! A published worked example: D. Harvey, *Modern Analytical Chemistry* (McGraw-Hill, 2000),
//! Examples 5.10–5.12 (unweighted straight-line calibration, then a triplicate sample).
//!
//! Published figures: b = 120.706, a = 0.209, s_b = 0.965, s_a = 0.292, C_A = 0.241 for the
//! sample (29.32, 29.16, 29.51), 95 % interval about ±0.007 ([mem] for the interval). The book
//! rounded its intermediates, so the tests also check the exact values recomputed from the
//! published data ([calc] in shared/reference-data/published-values.md §3): b = 120.705714,
//! a = 0.208571, s_y/x = 0.403297, s_b = 0.964065, s_a = 0.291885, x₀ = 0.24126,
//! s_x0 = 0.002364, t(4) = 2.7764, 95 % CI ±0.0066.

use lumisorb::calibration::{Calibration, CalibrationSet, LackOfFit, Model, Standard, Weighting};
use lumisorb::quantification::Dilution;
use lumisorb::{Absorbance, Flag, Flags};

const X: [f32; 6] = [0.000, 0.100, 0.200, 0.300, 0.400, 0.500];
const Y: [f32; 6] = [0.00, 12.36, 24.83, 35.91, 48.79, 60.42];

fn harvey() -> Calibration {
    let mut set = CalibrationSet::<16>::new();
    for (x, y) in X.iter().zip(Y.iter()) {
        set.push(Standard::new(*x, Absorbance::new(*y).unwrap()).unwrap())
            .unwrap();
    }
    Calibration::fit(&set, Model::Linear, Weighting::None).unwrap()
}

fn close(value: f64, expected: f64, rel: f64) -> bool {
    ((value - expected) / expected).abs() <= rel
}

#[test]
fn example_5_10_line_and_standard_errors() {
    let cal = harvey();
    let [a, b, q] = cal.coefficients();
    let [sa, sb, _] = cal.standard_errors();
    assert_eq!(q, 0.0);
    // Published (rounded in the book).
    assert!((b - 120.706).abs() < 0.0005, "b = {b}");
    assert!((a - 0.209).abs() < 0.0005, "a = {a}");
    assert!((sa - 0.292).abs() < 0.0005, "s_a = {sa}");
    // The book prints s_b = 0.965 from rounded intermediates; the exact value is 0.964065.
    assert!((sb - 0.965).abs() < 0.0015, "s_b = {sb}");
    // Exact recomputation [calc]; inputs enter as f32, so allow 1e-6 relative.
    assert!(close(b, 120.705714, 1e-6));
    assert!(close(a, 0.208571, 1e-5));
    assert!(close(cal.residual_sd(), 0.403297, 1e-5));
    assert!(close(sb, 0.964065, 1e-5));
    assert!(close(sa, 0.291885, 1e-5));
    // r = 0.999872 [calc] -> R² = r².
    assert!(close(cal.r_squared(), 0.999872f64 * 0.999872, 1e-6));
    assert_eq!(cal.range(), (0.0, 0.5));
    // Six single reads: no replicate, so no lack-of-fit test; nothing suspicious.
    assert_eq!(cal.lack_of_fit(), LackOfFit::NotTestable);
    assert_eq!(cal.suspicious_standard(), None);
}

#[test]
fn example_5_11_sample_with_interval() {
    let cal = harvey();
    let reads = [29.32f32, 29.16, 29.51];
    let mean = reads.iter().sum::<f32>() / 3.0;
    let q = cal
        .quantify(
            Absorbance::new(mean).unwrap(),
            3,
            Dilution::NONE,
            Flags::NONE,
        )
        .unwrap();
    // Published C_A = 0.241.
    assert!((q.concentration - 0.241).abs() < 0.0005, "{q:?}");
    // Exact [calc]: x0 = 0.24126, s_x0 = 0.002364, half-width t(4)·s_x0 = 0.0066 (book ±0.007).
    assert!((q.concentration - 0.24126).abs() < 1e-5);
    assert!((q.standard_uncertainty - 0.002364).abs() < 2e-6);
    let half = 0.5 * (q.high - q.low);
    assert!((half - 2.7764 * 0.002364).abs() < 1e-5, "half width {half}");
    assert!((half - 0.007).abs() < 0.0005);
    assert!(q.flags.is_empty());
    // The t factor is t(n - 2 = 4, 0.975) = 2.776 (NIST/SEMATECH table 1.3.6.7.2).
    assert!((cal.t_factor() - 2.776).abs() < 5e-4);
}

#[test]
fn dilution_scales_value_and_interval() {
    let cal = harvey();
    let a = Absorbance::new(29.33).unwrap();
    let q1 = cal.quantify(a, 3, Dilution::NONE, Flags::NONE).unwrap();
    let q10 = cal
        .quantify(a, 3, Dilution::new(10.0).unwrap(), Flags::NONE)
        .unwrap();
    assert!((q10.concentration - 10.0 * q1.concentration).abs() < 1e-5);
    assert!((q10.high - q10.low - 10.0 * (q1.high - q1.low)).abs() < 1e-5);
    // One read instead of three widens the interval (1/m term).
    let single = cal.quantify(a, 1, Dilution::NONE, Flags::NONE).unwrap();
    assert!(single.high - single.low > q1.high - q1.low);
}

#[test]
fn limits_and_flags() {
    let cal = harvey();
    // ICH Q2(R1): LOD = 3.3 s/b, LOQ = 10 s/b with s = s_y/x [calc: 0.011026, 0.033412].
    assert!((f64::from(cal.lod()) - 3.3 * 0.403297 / 120.705714).abs() < 1e-6);
    assert!((f64::from(cal.loq()) - 10.0 * 0.403297 / 120.705714).abs() < 1e-6);
    let low = cal
        .quantify(
            Absorbance::new(0.9).unwrap(),
            1,
            Dilution::NONE,
            Flags::NONE,
        )
        .unwrap();
    assert!(low.flags.contains(Flag::BelowLod));
    let mid = cal
        .quantify(
            Absorbance::new(3.0).unwrap(),
            1,
            Dilution::NONE,
            Flags::NONE,
        )
        .unwrap();
    assert!(mid.flags.contains(Flag::BelowLoq) && !mid.flags.contains(Flag::BelowLod));
    let high = cal
        .quantify(
            Absorbance::new(70.0).unwrap(),
            1,
            Dilution::NONE,
            Flags::only(Flag::Unstable),
        )
        .unwrap();
    assert!(high.flags.contains(Flag::AboveRange) && high.flags.contains(Flag::Unstable));
}
