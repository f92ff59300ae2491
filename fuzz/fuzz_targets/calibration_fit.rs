//! Fuzz target: arbitrary bytes -> calibration standards -> every model and weighting ->
//! quantification. Nothing may panic, and every result must be finite and ordered.
//!
//! Run: `cargo +nightly fuzz run calibration_fit -- -max_total_time=60` (from the repository root).
#![no_main]

use libfuzzer_sys::fuzz_target;
use lumisorb::calibration::{Calibration, CalibrationSet, Model, SigmaSource, Standard, Weighting};
use lumisorb::quantification::Dilution;
use lumisorb::{Absorbance, Flags};

fn f32_at(data: &[u8], at: usize) -> f32 {
    let mut b = [0u8; 4];
    for (i, slot) in b.iter_mut().enumerate() {
        *slot = data.get(at + i).copied().unwrap_or(0);
    }
    f32::from_le_bytes(b)
}

fuzz_target!(|data: &[u8]| {
    // Header: model, weighting, sigma source, sample absorbance, reads, dilution (14 bytes);
    // then 14-byte standards: concentration, absorbance, sd (f32 LE), replicates (u16 LE).
    let Some((&selector, rest)) = data.split_first() else {
        return;
    };
    let model = Model::ALL[usize::from(selector % 3)];
    let weighting = Weighting::ALL[usize::from((selector / 3) % 3)];
    let sigma = if selector & 0x80 != 0 {
        SigmaSource::Blank {
            sd: f32_at(rest, 0),
            replicates: u16::from(selector & 0x0f),
        }
    } else {
        SigmaSource::ResidualSd
    };
    let sample = f32_at(rest, 4);
    let reads = u16::from(rest.get(8).copied().unwrap_or(1));
    let dilution = f32_at(rest, 9);
    let mut set = CalibrationSet::<16>::new();
    for chunk in rest.get(13..).unwrap_or(&[]).chunks(14) {
        let Ok(a) = Absorbance::new(f32_at(chunk, 4)) else {
            continue;
        };
        let reps = u16::from_le_bytes([
            chunk.get(12).copied().unwrap_or(1),
            chunk.get(13).copied().unwrap_or(0),
        ]);
        let s = Standard {
            concentration: f32_at(chunk, 0),
            absorbance: a,
            absorbance_sd: f32_at(chunk, 8),
            replicates: reps,
        };
        let _ = set.push(s);
    }
    let Ok(cal) = Calibration::fit_with_sigma(&set, model, weighting, sigma) else {
        return;
    };
    // Refitting is deterministic.
    assert_eq!(
        Calibration::fit_with_sigma(&set, model, weighting, sigma).as_ref(),
        Ok(&cal)
    );
    let st = cal.statistics();
    assert!(st
        .coefficients
        .iter()
        .chain(&st.standard_errors)
        .all(|v| v.is_finite()));
    assert!(st.r_squared.is_finite() && st.residual_sd.is_finite());
    assert!(cal.lod().is_finite() && cal.loq().is_finite());
    for r in cal.residuals() {
        assert!(r.fitted.is_finite() && r.residual.is_finite() && r.studentized.is_finite());
    }
    if let Some(t) = cal.lack_of_fit().test() {
        assert!(t.f.is_finite() && (0.0..=1.0).contains(&t.p_value));
    }
    let (Ok(a), Ok(d)) = (Absorbance::new(sample), Dilution::new(dilution)) else {
        return;
    };
    if let Ok(q) = cal.quantify(a, reads, d, Flags::NONE) {
        assert!(
            q.concentration.is_finite() && q.low <= q.concentration && q.concentration <= q.high
        );
    }
});
