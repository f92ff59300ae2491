//! Precision contract of the f32 device path: absorbance against an f64 evaluation of the
//! same formulas from the same inputs (common practice for a numeric contract, in the spirit
//! of libm's per-function error bounds; no external source).
//!
//! * default (libm): |A_f32 - A_f64| <= 1e-5 for 0 <= A <= 3;
//! * `fast-math` (micromath): the measured maximum is printed and held to the bound documented
//!   in DEVELOPERS.md ("Precision").

use lumisorb::Flags;
use lumisorb::{photometric_result, Level, NetSignal, PhotometryConfig, StrayFraction};

fn net(level: f32) -> NetSignal {
    NetSignal {
        signal: Level {
            net: level,
            std_error: 1.0,
        },
        reference: None,
        flags: Flags::NONE,
        lit_reads: 32,
        dark_reads: 32,
        rejected_reads: 0,
    }
}

/// f64 reference: A = -log10((S/B)·(1 + s) - s).
fn reference(blank: f32, sample: f32, s: f32) -> f64 {
    let (b, x, s) = (blank as f64, sample as f64, s as f64);
    -((x / b) * (1.0 + s) - s).log10()
}

fn max_error(stray: f32) -> (f64, f64) {
    let cfg = PhotometryConfig {
        stray: StrayFraction::new(stray).unwrap(),
        ..PhotometryConfig::default()
    };
    let blank = 12_345_678.0f32;
    let mut worst = (0.0f64, 0.0f64);
    // A from 0 to 3 in 30 001 steps; sample level rounded to f32 as the device holds it.
    for i in 0..=30_000u32 {
        let a = i as f64 * 1e-4;
        let t_true = 10f64.powf(-a);
        let t_app = (t_true + stray as f64) / (1.0 + stray as f64);
        let sample = (blank as f64 * t_app) as f32;
        let r = photometric_result(&net(blank), &net(sample), &cfg).unwrap();
        let err = (r.absorbance.value() as f64 - reference(blank, sample, stray)).abs();
        if err > worst.0 {
            worst = (err, a);
        }
    }
    worst
}

#[test]
fn absorbance_matches_f64_reference() {
    for stray in [0.0f32, 1e-3] {
        let (err, at) = max_error(stray);
        println!("stray {stray}: max |A_f32 - A_f64| = {err:.3e} at A = {at:.4}");
        if cfg!(feature = "fast-math") {
            // Measured with micromath 2.1 (see DEVELOPERS.md, "Precision").
            assert!(
                err <= FAST_MATH_BOUND,
                "fast-math error {err:e} at A = {at}"
            );
        } else {
            assert!(err <= 1e-5, "libm error {err:e} at A = {at}");
        }
    }
}

/// Documented bound of the fast-math path (measured; see DEVELOPERS.md).
const FAST_MATH_BOUND: f64 = 6e-2;
