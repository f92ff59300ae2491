//! Instruction-count benchmark of a 16-point calibration fit with its statistics, for
//! `valgrind --tool=callgrind` (see `budgets/calibration.sh`; figures in the rustdoc of
//! `lumisorb::calibration`).
//!
//! The data are invented (a simulated linear calibration with duplicate standards at eight
//! levels). `fit_and_statistics` is what callgrind counts: fitting, t quantiles, limits,
//! lack-of-fit test, residuals with studentized residuals, and one quantification.

use std::hint::black_box;

use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
use lumisorb::quantification::Dilution;
use lumisorb::{Absorbance, Flags};

fn standards() -> CalibrationSet<16> {
    let mut set = CalibrationSet::new();
    for i in 0..16u16 {
        let c = f32::from(i / 2) * 0.5;
        let noise = if i % 2 == 0 { 0.0012 } else { -0.0009 } * f32::from(1 + i % 3);
        let a = Absorbance::new(0.004 + 0.21 * c - 0.002 * c * c + noise).expect("finite");
        set.push(Standard::new(c, a).expect("valid"))
            .expect("capacity 16");
    }
    set
}

/// One 16-point fit with every statistic the calibration offers, and one quantification.
#[inline(never)]
fn fit_and_statistics(set: &CalibrationSet<16>, model: Model) -> f64 {
    let cal = Calibration::fit(set, model, Weighting::None).expect("fit");
    let mut acc = cal.r_squared() + cal.residual_sd() + f64::from(cal.lod() + cal.loq());
    acc += cal.standard_errors().iter().sum::<f64>();
    for r in cal.residuals() {
        acc += r.studentized + if r.suspicious { 1.0 } else { 0.0 };
    }
    if let Some(t) = cal.lack_of_fit().test() {
        acc += t.p_value;
    }
    let q = cal
        .quantify(
            Absorbance::new(0.5).expect("finite"),
            3,
            Dilution::NONE,
            Flags::NONE,
        )
        .expect("quantify");
    acc + f64::from(q.high - q.low)
}

fn main() {
    // One fit per run, so that callgrind's collected count is the cost of one fit:
    // `calibration_bench [origin|linear|quadratic]` (default linear).
    let name = std::env::args().nth(1).unwrap_or_else(|| "linear".into());
    let model = Model::from_name(&name).expect("model: origin, linear or quadratic");
    let set = standards();
    let total = fit_and_statistics(black_box(&set), black_box(model));
    println!("{model}: checksum {total:.6}");
}
