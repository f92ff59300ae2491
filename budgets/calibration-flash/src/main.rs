//! Flash-cost probe: a bare-metal image whose only work is a calibration (feature
//! `calibration`) or, as baseline, one absorbance. The difference of the two `.text` sizes is
//! the flash cost of the calibration code, including the f64 software floating point and the
//! libm functions it pulls in.
#![no_std]
#![no_main]
// The image is only measured, never run: idle loops are all it needs.
#![allow(clippy::empty_loop)]

use core::hint::black_box;
use core::panic::PanicInfo;

use lumisorb::Absorbance;

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    loop {}
}

#[cfg(feature = "calibration")]
fn work(x: f32) -> f32 {
    use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
    use lumisorb::quantification::Dilution;
    use lumisorb::Flags;

    let mut set = CalibrationSet::<16>::new();
    for i in 0..16u16 {
        let c = f32::from(i) * x;
        if let Ok(a) = Absorbance::new(0.2 * c + black_box(0.001)) {
            let _ = set.push(
                Standard::with_replicates(c, a, black_box(0.001), 2).unwrap_or(Standard {
                    concentration: 0.0,
                    absorbance: a,
                    absorbance_sd: 0.0,
                    replicates: 1,
                }),
            );
        }
    }
    let model = black_box(Model::Quadratic);
    let weighting = black_box(Weighting::InverseVariance);
    let Ok(cal) = Calibration::fit(&set, model, weighting) else {
        return 0.0;
    };
    let mut acc = cal.r_squared() as f32 + cal.lod() + cal.loq();
    for r in cal.residuals() {
        acc += r.studentized as f32;
    }
    if let Some(t) = cal.lack_of_fit().test() {
        acc += t.p_value as f32;
    }
    if let (Ok(a), Ok(d)) = (Absorbance::new(x), Dilution::new(black_box(2.0))) {
        if let Ok(q) = cal.quantify(a, 3, d, Flags::NONE) {
            acc += q.concentration + q.high - q.low;
        }
    }
    acc
}

#[cfg(not(feature = "calibration"))]
fn work(x: f32) -> f32 {
    Absorbance::new(x).map(|a| a.value()).unwrap_or(0.0)
}

/// Entry point (no runtime crate: the image is only measured, never run).
#[no_mangle]
pub extern "C" fn _start() -> ! {
    let r = work(black_box(0.25));
    black_box(r);
    loop {}
}
