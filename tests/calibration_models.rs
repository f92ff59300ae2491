//! Calibration models, weightings, typed errors, lack of fit and suspicious standards.

use lumisorb::calibration::{
    Calibration, CalibrationError, CalibrationSet, Fit, LackOfFit, Model, SetError, SigmaSource,
    Standard, StandardError, Weighting,
};
use lumisorb::quantification::{quantify_reading, Dilution, QuantifyError};
use lumisorb::{Absorbance, Flag, Flags};
use statrs::distribution::{ContinuousCDF, FisherSnedecor};

fn a(v: f32) -> Absorbance {
    Absorbance::new(v).unwrap()
}

fn set_of(points: &[(f32, f32)]) -> CalibrationSet {
    let mut set = CalibrationSet::new();
    for &(c, y) in points {
        set.push(Standard::new(c, a(y)).unwrap()).unwrap();
    }
    set
}

#[test]
fn typed_errors_for_bad_sets() {
    let two = set_of(&[(0.0, 0.0), (1.0, 0.1)]);
    assert_eq!(
        Calibration::fit(&two, Model::Linear, Weighting::None),
        Err(CalibrationError::TooFewPoints { needed: 3, got: 2 })
    );
    let equal = set_of(&[(1.0, 0.1), (1.0, 0.11), (1.0, 0.09), (1.0, 0.1)]);
    for model in Model::ALL {
        assert_eq!(
            Calibration::fit(&equal, model, Weighting::None),
            Err(CalibrationError::ConcentrationsEqual)
        );
    }
    let two_levels = set_of(&[(1.0, 0.1), (1.0, 0.11), (2.0, 0.2), (2.0, 0.21)]);
    assert_eq!(
        Calibration::fit(&two_levels, Model::Quadratic, Weighting::None),
        Err(CalibrationError::TooFewConcentrations { needed: 3, got: 2 })
    );
    let falling = set_of(&[(0.0, 0.5), (1.0, 0.4), (2.0, 0.3), (3.0, 0.2)]);
    assert_eq!(
        Calibration::fit(
            &set_of(&[(1.0, -0.1), (2.0, -0.2)]),
            Model::Origin,
            Weighting::None
        ),
        Err(CalibrationError::NonPositiveSlope)
    );
    for model in [Model::Linear, Model::Quadratic] {
        assert_eq!(
            Calibration::fit(&falling, model, Weighting::None),
            Err(CalibrationError::NonPositiveSlope),
            "{model}"
        );
    }
    let flat = set_of(&[(0.0, 0.2), (1.0, 0.2), (2.0, 0.2)]);
    assert_eq!(
        Calibration::fit(&flat, Model::Linear, Weighting::None),
        Err(CalibrationError::NonPositiveSlope)
    );
    // A parabola A = c - 0.1 c² peaks at c = 5, inside the range 0..8: not invertible.
    let turning: Vec<(f32, f32)> = (0..=8)
        .map(|i| (i as f32, i as f32 - 0.1 * (i * i) as f32))
        .collect();
    assert_eq!(
        Calibration::fit(&set_of(&turning), Model::Quadratic, Weighting::None),
        Err(CalibrationError::NotMonotonic)
    );
    let line = set_of(&[(0.0, 0.0), (1.0, 0.1), (2.0, 0.2), (3.0, 0.31)]);
    assert_eq!(
        Calibration::fit(&line, Model::Linear, Weighting::InverseVariance),
        Err(CalibrationError::MissingUncertainty)
    );
    assert_eq!(
        Calibration::fit(&line, Model::Linear, Weighting::InverseConcentrationSquared),
        Err(CalibrationError::ZeroConcentration)
    );
    assert_eq!(
        Calibration::fit_with_sigma(
            &line,
            Model::Linear,
            Weighting::None,
            SigmaSource::Blank {
                sd: 0.001,
                replicates: 1
            }
        ),
        Err(CalibrationError::InvalidBlankSigma)
    );
    // Capacity and invalid standards are refused at the door.
    let mut small = CalibrationSet::<3>::new();
    let s = Standard::new(1.0, a(0.1)).unwrap();
    for _ in 0..3 {
        small.push(s).unwrap();
    }
    assert_eq!(small.push(s), Err(SetError::Full { capacity: 3 }));
    let negative = Standard {
        concentration: -1.0,
        ..s
    };
    assert_eq!(
        CalibrationSet::<4>::new().push(negative),
        Err(SetError::Invalid(StandardError::NegativeConcentration))
    );
    assert_eq!(
        Standard::new(f32::INFINITY, a(0.1)),
        Err(StandardError::NotFinite)
    );
}

#[test]
fn quadratic_inverts_inside_range() {
    // Simulated (invented) negative deviation: A = 0.002 + 0.25 c - 0.01 c², c = 0..8.
    let truth = |c: f32| 0.002 + 0.25 * c - 0.01 * c * c;
    let pts: Vec<(f32, f32)> = (0..=8).map(|i| (i as f32, truth(i as f32))).collect();
    let cal = Calibration::fit(&set_of(&pts), Model::Quadratic, Weighting::None).unwrap();
    let [c0, c1, c2] = cal.coefficients();
    assert!((c0 - 0.002).abs() < 1e-6 && (c1 - 0.25).abs() < 1e-6 && (c2 + 0.01).abs() < 1e-7);
    for c in [0.5f32, 3.3, 7.9] {
        let q = cal
            .quantify(a(truth(c)), 1, Dilution::NONE, Flags::NONE)
            .unwrap();
        assert!((q.concentration - c).abs() < 1e-4, "{c}: {q:?}");
        assert!(q.low <= q.concentration && q.concentration <= q.high);
    }
    // Above the vertex (c = 12.5, A = 1.5645) no concentration exists.
    assert_eq!(
        cal.quantify(a(1.7), 1, Dilution::NONE, Flags::NONE),
        Err(QuantifyError::BeyondCurve)
    );
    // Between the top standard and the vertex: extrapolated, flagged.
    let q = cal
        .quantify(a(1.45), 1, Dilution::NONE, Flags::NONE)
        .unwrap();
    assert!(q.flags.contains(Flag::AboveRange));
}

#[test]
fn origin_model_and_no_calibration() {
    let cal = Calibration::fit(
        &set_of(&[(1.0, 0.101), (2.0, 0.199), (4.0, 0.402), (8.0, 0.797)]),
        Model::Origin,
        Weighting::None,
    )
    .unwrap();
    let [c0, k, _] = cal.coefficients();
    assert_eq!(c0, 0.0);
    assert!((k - 0.0997).abs() < 5e-4);
    let r = quantify_reading(Some(&cal), a(0.3), 2, Dilution::NONE, Flags::NONE).unwrap();
    assert!((r.concentration.unwrap().concentration - 0.3 / k as f32).abs() < 1e-5);
    let none =
        quantify_reading::<16>(None, a(0.3), 2, Dilution::NONE, Flags::only(Flag::NoDark)).unwrap();
    assert!(none.concentration.is_none());
    assert!(none.flags.contains(Flag::NoCalibration) && none.flags.contains(Flag::NoDark));
    assert_eq!(
        cal.quantify(a(0.3), 0, Dilution::NONE, Flags::NONE),
        Err(QuantifyError::ZeroReplicates)
    );
    assert_eq!(Dilution::new(0.0), Err(QuantifyError::InvalidDilution));
    assert_eq!(Dilution::new(f32::NAN), Err(QuantifyError::InvalidDilution));
}

/// Invented replicate data with clear curvature: duplicates at six levels.
fn curved_duplicates() -> Vec<(f32, f32)> {
    let mut v = Vec::new();
    for (i, c) in [0.0f32, 1.0, 2.0, 3.0, 4.0, 5.0].iter().enumerate() {
        let y = 0.2 * c - 0.012 * c * c;
        let e = if i % 2 == 0 { 0.002 } else { -0.0015 };
        v.push((*c, y + e));
        v.push((*c, y - e));
    }
    v
}

#[test]
fn lack_of_fit_rejects_line_and_suggests_quadratic() {
    let pts = curved_duplicates();
    let set = set_of(&pts);
    let line = Calibration::fit(&set, Model::Linear, Weighting::None).unwrap();
    let LackOfFit::Inadequate { test, suggestion } = line.lack_of_fit() else {
        panic!(
            "line should fail the lack-of-fit test: {:?}",
            line.lack_of_fit()
        );
    };
    assert_eq!(suggestion, Some(Model::Quadratic));
    assert_eq!((test.df_lack_of_fit, test.df_pure_error), (4, 6));

    // Independent path: ANOVA of regression on the individual reads. SS_res = SS_pe + SS_lof,
    // SS_pe from the level means; p from statrs's F distribution (reference crate).
    let x: Vec<f64> = pts.iter().map(|p| f64::from(p.0)).collect();
    let y: Vec<f64> = pts.iter().map(|p| f64::from(p.1)).collect();
    let fit = Fit::from_slices(&x, &y, None, Model::Linear).unwrap();
    let mut ss_pe = 0.0;
    for pair in y.chunks(2) {
        let m = (pair[0] + pair[1]) / 2.0;
        ss_pe += (pair[0] - m).powi(2) + (pair[1] - m).powi(2);
    }
    let ss_lof = fit.residual_sum_of_squares() - ss_pe;
    let f = (ss_lof / 4.0) / (ss_pe / 6.0);
    assert!(((test.f - f) / f).abs() < 1e-9, "{} vs {f}", test.f);
    let p = 1.0 - FisherSnedecor::new(4.0, 6.0).unwrap().cdf(f);
    assert!((test.p_value - p).abs() < 1e-12 + 1e-9 * p);

    let quad = Calibration::fit(&set, Model::Quadratic, Weighting::None).unwrap();
    assert!(
        matches!(quad.lack_of_fit(), LackOfFit::Adequate(_)),
        "{:?}",
        quad.lack_of_fit()
    );
}

#[test]
fn replicates_as_entries_or_as_means_agree() {
    // The same duplicates, entered as one standard per read or as mean + sd with 2 replicates.
    let pts = curved_duplicates();
    let reads = set_of(&pts);
    let mut means = CalibrationSet::<16>::new();
    for pair in pts.chunks(2) {
        let (c, y1, y2) = (pair[0].0, pair[0].1, pair[1].1);
        let m = 0.5 * (y1 + y2);
        let sd = ((y1 - m).powi(2) + (y2 - m).powi(2)).sqrt();
        means
            .push(Standard::with_replicates(c, a(m), sd, 2).unwrap())
            .unwrap();
    }
    for model in [Model::Linear, Model::Quadratic] {
        let r = Calibration::fit(&reads, model, Weighting::None).unwrap();
        let m = Calibration::fit(&means, model, Weighting::None).unwrap();
        for (p, q) in r.coefficients().iter().zip(m.coefficients()) {
            assert!((p - q).abs() < 1e-6);
        }
        let (tr, tm) = (
            r.lack_of_fit().test().unwrap(),
            m.lack_of_fit().test().unwrap(),
        );
        assert_eq!(tr.df_pure_error, tm.df_pure_error);
        assert!((tr.f - tm.f).abs() < 1e-3 * tr.f, "{tr:?} {tm:?}");
    }
}

#[test]
fn flags_a_suspicious_standard() {
    // Invented: eight standards on A = 0.1 c with small alternating scatter, one misread.
    let mut pts: Vec<(f32, f32)> = (0..8)
        .map(|i| {
            (
                i as f32,
                0.1 * i as f32 + if i % 2 == 0 { 0.001 } else { -0.001 },
            )
        })
        .collect();
    pts[5].1 += 0.03;
    let cal = Calibration::fit(&set_of(&pts), Model::Linear, Weighting::None).unwrap();
    assert_eq!(cal.suspicious_standard(), Some(5));
    let flagged: Vec<usize> = cal
        .residuals()
        .filter(|r| r.suspicious)
        .map(|r| r.index)
        .collect();
    assert_eq!(flagged, vec![5]);
    for r in cal.residuals() {
        assert!(r.studentized.is_finite() && (0.0..=1.0).contains(&r.leverage));
    }
    // Leverages of a straight-line fit sum to p = 2 (trace of the hat matrix; common practice).
    let h: f64 = cal.residuals().map(|r| r.leverage).sum();
    assert!((h - 2.0).abs() < 1e-9);
}

#[test]
fn weighted_fits() {
    // Inverse-variance: standards with sd growing with concentration (invented).
    let mut set = CalibrationSet::<16>::new();
    for (c, y, sd) in [
        (0.5f32, 0.051f32, 0.001f32),
        (1.0, 0.099, 0.002),
        (2.0, 0.203, 0.004),
        (4.0, 0.396, 0.008),
        (8.0, 0.81, 0.016),
    ] {
        set.push(Standard::with_replicates(c, a(y), sd, 3).unwrap())
            .unwrap();
    }
    for w in [
        Weighting::InverseVariance,
        Weighting::InverseConcentrationSquared,
    ] {
        let cal = Calibration::fit(&set, Model::Linear, w).unwrap();
        let [_, b, _] = cal.coefficients();
        assert!((b - 0.1).abs() < 0.005, "{w}: {b}");
        let lo = cal
            .quantify(a(0.06), 1, Dilution::NONE, Flags::NONE)
            .unwrap();
        let hi = cal
            .quantify(a(0.7), 1, Dilution::NONE, Flags::NONE)
            .unwrap();
        // Relative error roughly constant: the interval grows with concentration.
        assert!(
            hi.high - hi.low > 3.0 * (lo.high - lo.low),
            "{w}: {lo:?} {hi:?}"
        );
    }
    // With equal weights the weighted fit is the ordinary fit.
    let mut eq = CalibrationSet::<16>::new();
    for (c, y) in [(0.0f32, 0.001f32), (1.0, 0.1), (2.0, 0.21), (3.0, 0.299)] {
        eq.push(Standard::with_replicates(c, a(y), 0.002, 1).unwrap())
            .unwrap();
    }
    let w = Calibration::fit(&eq, Model::Linear, Weighting::InverseVariance).unwrap();
    let u = Calibration::fit(&eq, Model::Linear, Weighting::None).unwrap();
    for (p, q) in w.coefficients().iter().zip(u.coefficients()) {
        assert!((p - q).abs() < 1e-12);
    }
    let (qw, qu) = (
        w.quantify(a(0.15), 2, Dilution::NONE, Flags::NONE).unwrap(),
        u.quantify(a(0.15), 2, Dilution::NONE, Flags::NONE).unwrap(),
    );
    assert!((qw.high - qu.high).abs() < 1e-6 && (qw.low - qu.low).abs() < 1e-6);
}

#[test]
fn blank_sigma_limits() {
    let set = set_of(&[(0.0, 0.0), (1.0, 0.1), (2.0, 0.2), (3.0, 0.3), (4.0, 0.41)]);
    let cal = Calibration::fit_with_sigma(
        &set,
        Model::Linear,
        Weighting::None,
        SigmaSource::Blank {
            sd: 0.002,
            replicates: 10,
        },
    )
    .unwrap();
    let b = cal.coefficients()[1];
    // ICH Q2(R1) §6.3.2 / §7.3.2 with σ = sd of the blank.
    assert!((f64::from(cal.lod()) - 3.3 * 0.002 / b).abs() < 1e-6);
    assert!((f64::from(cal.loq()) - 10.0 * 0.002 / b).abs() < 1e-6);
}

#[test]
fn recovery_of_check_sample() {
    let set = set_of(&[(0.0, 0.0), (1.0, 0.1), (2.0, 0.2), (3.0, 0.3), (4.0, 0.41)]);
    let cal = Calibration::fit(&set, Model::Linear, Weighting::None).unwrap();
    let known = 2.5f32;
    let r = cal
        .recovery(a(cal.absorbance_at(2.5) as f32), 1, Dilution::NONE, known)
        .unwrap();
    assert!((r - 100.0).abs() < 0.01, "{r}");
    assert_eq!(
        cal.recovery(a(0.2), 1, Dilution::NONE, 0.0),
        Err(QuantifyError::InvalidReference)
    );
    let spike = lumisorb::quantification::spike_recovery_percent(3.4, 1.5, 2.0).unwrap();
    assert!((spike - 95.0).abs() < 1e-4);
}

#[test]
fn studentized_residuals_match_refits_without_each_standard() {
    // Independent path (common practice, regression diagnostics): the externally studentized
    // residual t_i = e_i / (s_(i) sqrt(1 - h_i)), with s_(i) from a refit without standard i,
    // equals r_i sqrt((ν-1)/(ν-r_i²)) computed from the internal studentized residual r_i.
    let pts: Vec<(f32, f32)> = [0.0f32, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0]
        .iter()
        .zip([0.003f32, 0.098, 0.205, 0.297, 0.41, 0.493, 0.61, 0.695])
        .map(|(c, y)| (*c, y))
        .collect();
    let cal = Calibration::fit(&set_of(&pts), Model::Linear, Weighting::None).unwrap();
    let nu = f64::from(cal.statistics().degrees_of_freedom);
    for r in cal.residuals() {
        let (x, y): (Vec<f64>, Vec<f64>) = pts
            .iter()
            .enumerate()
            .filter(|(j, _)| *j != r.index)
            .map(|(_, p)| (f64::from(p.0), f64::from(p.1)))
            .unzip();
        let refit = Fit::from_slices(&x, &y, None, Model::Linear).unwrap();
        let t_deleted = r.residual / (refit.residual_sd() * (1.0 - r.leverage).sqrt());
        let t_formula = r.studentized * ((nu - 1.0) / (nu - r.studentized.powi(2))).sqrt();
        assert!(
            (t_deleted - t_formula).abs() < 1e-9,
            "{}: {t_deleted} vs {t_formula}",
            r.index
        );
    }
}
