//! Property tests: arbitrary point sets never panic or yield NaN, and the laws of a
//! least-squares calibration hold.

use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
use lumisorb::quantification::Dilution;
use lumisorb::{Absorbance, Flags};
use proptest::prelude::*;

fn any_value() -> impl Strategy<Value = f32> {
    prop_oneof![
        20 => 0.0f32..2.0,
        5 => -10.0f32..10.0,
        3 => 0.0f32..1e3,
        1 => Just(0.0f32),
        1 => Just(1e-30f32),
        1 => Just(3e38f32),
        1 => Just(-3e38f32),
        1 => Just(f32::MIN_POSITIVE),
        1 => any::<f32>(),
    ]
}

fn any_standard() -> impl Strategy<Value = (f32, f32, f32, u16)> {
    (
        any_value(),
        any_value(),
        prop_oneof![4 => 0.0f32..0.05, 1 => any_value()],
        prop_oneof![9 => 1u16..5, 1 => Just(0u16)],
    )
}

fn model() -> impl Strategy<Value = Model> {
    prop::sample::select(Model::ALL.to_vec())
}

fn weighting() -> impl Strategy<Value = Weighting> {
    prop::sample::select(Weighting::ALL.to_vec())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn arbitrary_sets_give_typed_errors_or_finite_results(
        raw in prop::collection::vec(any_standard(), 0..20),
        model in model(),
        weighting in weighting(),
        sample in any_value(),
        reps in 0u16..4,
        dilution in 0.1f32..100.0,
    ) {
        let mut set = CalibrationSet::<16>::new();
        for (c, y, sd, r) in raw {
            let Ok(a) = Absorbance::new(y) else { continue };
            // Invalid or surplus standards are refused with a typed error, never a panic.
            let _ = set.push(Standard { concentration: c, absorbance: a, absorbance_sd: sd, replicates: r });
        }
        let Ok(cal) = Calibration::fit(&set, model, weighting) else { return Ok(()) };
        let st = cal.statistics();
        prop_assert!(st.coefficients.iter().chain(st.standard_errors.iter()).all(|v| v.is_finite()));
        prop_assert!(st.r_squared.is_finite() && st.residual_sd.is_finite() && st.residual_sd >= 0.0);
        prop_assert!(cal.lod().is_finite() && cal.lod() >= 0.0 && cal.loq() >= cal.lod());
        let (lo, hi) = cal.range();
        prop_assert!(lo <= hi);
        for r in cal.residuals() {
            prop_assert!(r.fitted.is_finite() && r.residual.is_finite() && r.studentized.is_finite());
        }
        if let Some(t) = cal.lack_of_fit().test() {
            prop_assert!(t.f.is_finite() && (0.0..=1.0).contains(&t.p_value));
        }
        let Ok(a) = Absorbance::new(sample) else { return Ok(()) };
        let d = Dilution::new(dilution).unwrap();
        if let Ok(q) = cal.quantify(a, reps, d, Flags::NONE) {
            prop_assert!(q.concentration.is_finite() && q.low.is_finite() && q.high.is_finite());
            prop_assert!(q.low <= q.concentration && q.concentration <= q.high, "{:?}", q);
            prop_assert!(q.standard_uncertainty >= 0.0);
        }
    }

    #[test]
    fn exact_lines_are_recovered_and_inverted(
        a0 in -0.05f64..0.05,
        b in 0.01f64..2.0,
        n in 3usize..16,
        step in 0.1f32..10.0,
        probe in 0.0f64..1.0,
    ) {
        let mut set = CalibrationSet::<16>::new();
        for i in 0..n {
            let c = step * i as f32;
            let y = (a0 + b * f64::from(c)) as f32;
            set.push(Standard::new(c, Absorbance::new(y).unwrap()).unwrap()).unwrap();
        }
        let cal = Calibration::fit(&set, Model::Linear, Weighting::None).unwrap();
        let [c0, c1, _] = cal.coefficients();
        // f32 inputs: agreement to about 1e-6 of the absorbance scale.
        let span = b * f64::from(step) * (n - 1) as f64;
        prop_assert!((c1 - b).abs() <= 1e-5 * b + 1e-6 * span);
        prop_assert!((c0 - a0).abs() <= 1e-5 * (a0.abs() + span));
        let x = probe * f64::from(step) * (n - 1) as f64;
        let y = cal.absorbance_at(x) as f32;
        let q = cal.quantify(Absorbance::new(y).unwrap(), 1, Dilution::NONE, Flags::NONE).unwrap();
        prop_assert!((f64::from(q.concentration) - x).abs() <= 1e-5 * (x + f64::from(step)));
    }

    #[test]
    fn order_does_not_matter_and_more_reads_narrow_the_interval(
        pts in prop::collection::vec((0.0f32..50.0, 0.0f32..0.01), 5..16),
        model in model(),
    ) {
        let mut fwd = CalibrationSet::<16>::new();
        let mut rev = CalibrationSet::<16>::new();
        // A rising response with a bit of noise; the same standards in both orders.
        let std_of = |(c, e): (f32, f32)| Standard::new(c, Absorbance::new(0.02 * c + e).unwrap()).unwrap();
        for p in pts.iter() { fwd.push(std_of(*p)).unwrap(); }
        for p in pts.iter().rev() { rev.push(std_of(*p)).unwrap(); }
        let (Ok(f), Ok(r)) = (Calibration::fit(&fwd, model, Weighting::None), Calibration::fit(&rev, model, Weighting::None)) else {
            return Ok(());
        };
        for (x, y) in f.coefficients().iter().zip(r.coefficients()) {
            prop_assert!((x - y).abs() <= 1e-9 * (1.0 + x.abs()));
        }
        let (lo, hi) = f.range();
        let mid = Absorbance::new(f.absorbance_at(f64::from(0.5 * (lo + hi))) as f32).unwrap();
        if let (Ok(one), Ok(four)) = (
            f.quantify(mid, 1, Dilution::NONE, Flags::NONE),
            f.quantify(mid, 4, Dilution::NONE, Flags::NONE),
        ) {
            prop_assert!(four.high - four.low <= one.high - one.low);
        }
    }
}
