//! NIST Statistical Reference Datasets (StRD), linear least squares regression: the calibration
//! fit engine must reproduce the certified values.
//!
//! Source: NIST ITL Statistical Engineering Division, StRD "Linear Least Squares Regression"
//! (Norris, Pontius, NoInt1, NoInt2). The data files are read from the shared reference-data
//! folder beside the repository (they are not copied into it); the certified values below are
//! the published figures printed in those files. Accuracy is judged by the log relative error
//! LRE = -log10(|estimate - certified| / |certified|), a common practice for StRD checks;
//! required: >= 9 for Norris, NoInt1, NoInt2 and >= 7 for Pontius (project requirement).

use lumisorb::calibration::{Fit, Model};

const DIR: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../shared/reference-data/nist-strd/"
);

/// (y, x) columns of a StRD file: data rows start at line 61, first column y, then x.
fn load(name: &str) -> Option<(Vec<f64>, Vec<f64>)> {
    let path = format!("{DIR}{name}.dat");
    let Ok(text) = std::fs::read_to_string(&path) else {
        println!("SKIPPED: NIST StRD file {path} not found; {name} not checked");
        return None;
    };
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for line in text.lines().skip(60) {
        let cols: Vec<f64> = line
            .split_whitespace()
            .map(|c| c.parse().expect("number in StRD data row"))
            .collect();
        if cols.len() >= 2 {
            ys.push(cols[0]);
            xs.push(cols[1]);
        }
    }
    Some((xs, ys))
}

fn lre(estimate: f64, certified: f64) -> f64 {
    if estimate == certified {
        return 16.0;
    }
    -((estimate - certified).abs() / certified.abs()).log10()
}

struct Certified {
    /// [c0, c1, c2] and their standard deviations (None where the model has no such term).
    coef: [Option<(f64, f64)>; 3],
    rsd: f64,
    r2: f64,
}

fn check(name: &str, model: Model, rows: usize, cert: &Certified, min_lre: f64) {
    let Some((x, y)) = load(name) else { return };
    assert_eq!(x.len(), rows, "{name}: observation count");
    let fit = Fit::from_slices(&x, &y, None, model).expect("fit");
    let c = fit.coefficients();
    let se = fit.standard_errors();
    let mut worst = f64::INFINITY;
    let mut report = |what: &str, est: f64, certv: f64| {
        let l = lre(est, certv);
        println!("{name:8} {what:6} estimate {est:+.15e} certified {certv:+.15e} LRE {l:5.2}");
        worst = worst.min(l);
        assert!(l >= min_lre, "{name} {what}: LRE {l:.2} < {min_lre}");
    };
    for (k, cv) in cert.coef.iter().enumerate() {
        if let Some((b, sd)) = cv {
            report(&format!("B{k}"), c[k], *b);
            report(&format!("SD(B{k})"), se[k], *sd);
        } else {
            assert_eq!(c[k], 0.0);
        }
    }
    report("RSD", fit.residual_sd(), cert.rsd);
    report("R2", fit.r_squared(), cert.r2);
    println!("{name}: worst LRE {worst:.2} (required {min_lre})");
}

#[test]
fn norris_linear() {
    // NIST StRD Norris.dat, certified values (lower difficulty, y = B0 + B1 x, 36 observations).
    let cert = Certified {
        coef: [
            Some((-0.262323073774029, 0.232818234301152)),
            Some((1.00211681802045, 0.429796848199937E-03)),
            None,
        ],
        rsd: 0.884796396144373,
        r2: 0.999993745883712,
    };
    check("Norris", Model::Linear, 36, &cert, 9.0);
}

#[test]
fn pontius_quadratic() {
    // NIST StRD Pontius.dat, certified values (y = B0 + B1 x + B2 x^2, 40 observations).
    let cert = Certified {
        coef: [
            Some((0.673565789473684E-03, 0.107938612033077E-03)),
            Some((0.732059160401003E-06, 0.157817399981659E-09)),
            Some((-0.316081871345029E-14, 0.486652849992036E-16)),
        ],
        rsd: 0.205177424076185E-03,
        r2: 0.999999900178537,
    };
    check("Pontius", Model::Quadratic, 40, &cert, 7.0);
}

#[test]
fn noint1_through_origin() {
    // NIST StRD NoInt1.dat, certified values (y = B1 x, 11 observations; R^2 uncentred).
    let cert = Certified {
        coef: [None, Some((2.07438016528926, 0.165289256198347E-01)), None],
        rsd: 3.56753034006338,
        r2: 0.999365492298663,
    };
    check("NoInt1", Model::Origin, 11, &cert, 9.0);
}

#[test]
fn noint2_through_origin() {
    // NIST StRD NoInt2.dat, certified values (y = B1 x, 3 observations; R^2 uncentred).
    let cert = Certified {
        coef: [None, Some((0.727272727272727, 0.420827318078432E-01)), None],
        rsd: 0.369274472937998,
        r2: 0.993348115299335,
    };
    check("NoInt2", Model::Origin, 3, &cert, 9.0);
}

#[test]
fn noint_anova_sums() {
    // NIST StRD NoInt1.dat ANOVA: SS_res 127.272727272727, SS_reg 200457.727272727 (uncentred).
    let Some((x, y)) = load("NoInt1") else { return };
    let fit = Fit::from_slices(&x, &y, None, Model::Origin).expect("fit");
    assert!(lre(fit.residual_sum_of_squares(), 127.272727272727) >= 9.0);
    let ss_reg = fit.total_sum_of_squares() - fit.residual_sum_of_squares();
    assert!(lre(ss_reg, 200457.727272727) >= 9.0);
}
