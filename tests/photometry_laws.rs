//! Laws of photometry checked as properties (proptest) through the full raw-read path:
//! reads -> DarkLitSeries -> photometric_result.
//!
//! The laws themselves are textbook consequences of the definition A = -log10(P/P0)
//! (IUPAC Gold Book, "absorbance", doi:10.1351/goldbook.A00028); the read values are generated.

use lumisorb::{
    photometric_result, DarkLitSeries, FullScale, NetSignal, PhotometryConfig, SeriesConfig,
    Transmittance,
};
use proptest::prelude::*;

const FS: u32 = 0x00FF_FFFF;

/// Tolerance of the additivity law: libm's log10f to a few ulp; micromath's (fast-math) log10
/// is only good to about 5e-2 per evaluation (measured, tests/precision_contract.rs).
const LOG_TOL: f32 = if cfg!(feature = "fast-math") {
    0.16
} else {
    2e-6
};

/// How far the slope of the log10 in use may differ from the true one (1: libm).
const SLOPE_FACTOR: f32 = if cfg!(feature = "fast-math") {
    10.0
} else {
    1.0
};

/// Net signal of a measurement with `n` interleaved dark/lit pairs, a small deterministic
/// ripple on each read, an offset added to every read, and an optional reference detector.
fn measure(lit: u32, dark: u32, offset: u32, reference: Option<u32>) -> NetSignal {
    let fs = FullScale::new(FS).unwrap();
    let mut s = DarkLitSeries::<16>::new(fs, reference.map(|_| fs));
    for k in 0..12u32 {
        let ripple = k % 3;
        let r_dark = reference.map(|_| 50 + offset + ripple);
        let r_lit = reference.map(|r| 50 + offset + r + ripple);
        s.push_dark(dark + offset + ripple, r_dark).unwrap();
        s.push_lit(lit + dark + offset + ripple, r_lit).unwrap();
    }
    s.finish(&SeriesConfig::default()).unwrap()
}

fn absorbance(blank: &NetSignal, sample: &NetSignal) -> f32 {
    photometric_result(blank, sample, &PhotometryConfig::default())
        .unwrap()
        .absorbance
        .value()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// More light through the sample means a lower absorbance (strictly monotone).
    #[test]
    fn more_light_lower_absorbance(blank in 20_000u32..4_000_000, a in 100u32..4_000_000, b in 100u32..4_000_000) {
        prop_assume!(a != b);
        let bl = measure(blank, 1000, 0, None);
        let (lo, hi) = if a < b { (a, b) } else { (b, a) };
        prop_assert!(absorbance(&bl, &measure(hi, 1000, 0, None)) < absorbance(&bl, &measure(lo, 1000, 0, None)));
    }

    /// A(T1·T2) = A(T1) + A(T2): absorbances of stacked layers add.
    #[test]
    fn absorbances_add(t1 in 0.001f32..1.0, t2 in 0.001f32..1.0) {
        let a12 = Transmittance::new(t1 * t2).unwrap().absorbance().value();
        let a1 = Transmittance::new(t1).unwrap().absorbance().value();
        let a2 = Transmittance::new(t2).unwrap().absorbance().value();
        prop_assert!((a12 - (a1 + a2)).abs() < LOG_TOL * (1.0 + a12.abs()));
    }

    /// Adding a constant offset to every read (dark and lit alike) changes nothing.
    #[test]
    fn constant_offset_changes_nothing(blank in 20_000u32..2_000_000, sample in 1_000u32..2_000_000, offset in 0u32..8_000_000) {
        let a0 = absorbance(&measure(blank, 500, 0, None), &measure(sample, 500, 0, None));
        let a1 = absorbance(&measure(blank, 500, offset, None), &measure(sample, 500, offset, None));
        prop_assert!((a0 - a1).abs() < 1e-5, "{} vs {}", a0, a1);
    }

    /// With the reference detector on, scaling the LED power by k (signal and reference alike)
    /// between blank and sample changes nothing.
    #[test]
    fn led_power_scaling_cancels_with_reference(blank in 20_000u32..1_000_000, t in 0.01f64..1.0, k in 0.3f64..3.0) {
        let r = 100_000u32;
        let sample = (blank as f64 * t) as u32;
        let a_ref = absorbance(&measure(blank, 800, 0, Some(r)), &measure(sample, 800, 0, Some(r)));
        let scaled = |x: u32| (x as f64 * k).round() as u32;
        let a_k = absorbance(&measure(blank, 800, 0, Some(r)), &measure(scaled(sample), 800, 0, Some(scaled(r))));
        // Only the rounding of the scaled counts to integers remains; micromath's log10
        // (fast-math) is a piecewise approximation whose slope is off by up to a few times, so
        // the same rounding can move its result further.
        let tol = SLOPE_FACTOR * 2.0 / (sample as f32 * std::f32::consts::LN_10) + 1e-5;
        prop_assert!((a_ref - a_k).abs() < tol, "{} vs {}", a_ref, a_k);
    }
}
