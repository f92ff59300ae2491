//! The real sequencer against the simulated photometer (feature `sim`): warm-up, auto-exposure,
//! blank and samples, checked against the physical model's own noise-free absorbance.
#![cfg(feature = "sim")]

use std::cell::RefCell;

use lumisorb::instrument::{NeverCancel, SequenceConfig, Sequencer};
use lumisorb::sim::{SimBench, SimConfig, SimRig, SimSample};

fn rig(seed: u64) -> RefCell<SimRig> {
    RefCell::new(SimRig::new(
        SimBench::new(SimConfig::GREEN_DEMO, seed).unwrap(),
    ))
}

#[test]
fn pipeline_on_the_simulator_recovers_the_model_absorbance() {
    let rig = rig(2024);
    let mut seq = Sequencer::new(SimRig::hardware(&rig), SequenceConfig::default()).unwrap();
    let e = seq.auto_expose(&mut NeverCancel).unwrap();
    assert!((0.60..=0.85).contains(&e.lit_fraction), "{e:?}");
    let w = seq.warm_up(&mut NeverCancel).unwrap();
    // The demo LED's thermal time constant is 8 s: warm-up must take a few of them... at least
    // more than one, and far less than the timeout.
    assert!(w.elapsed_ms > 8_000 && w.elapsed_ms < 120_000, "{w:?}");
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    assert!(blank.net.flags.is_empty(), "{:?}", blank.net.flags);
    for c in [0.5f32, 2.0, 4.0, 8.0] {
        let sample = SimSample::with_concentration(c);
        rig.borrow_mut().set_sample(sample);
        let m = seq.measure_sample(&blank, &mut NeverCancel).unwrap();
        let model = rig.borrow().bench().apparent_absorbance(&sample);
        let a = m.result.absorbance.value();
        // Within 4 standard uncertainties plus 0.002 for the LED's residual thermal drift
        // between blank and sample (the reference detector removes most of it).
        let tol = 4.0 * m.result.absorbance_sd + 0.002;
        assert!(
            (a - model).abs() < tol,
            "c {c}: {a} vs model {model} (sd {})",
            m.result.absorbance_sd
        );
        assert!(!m.result.flags.contains(lumisorb::Flag::Saturated));
    }
}

#[test]
fn same_seed_same_counts_same_result() {
    let run = |seed| {
        let rig = rig(seed);
        let mut seq = Sequencer::new(SimRig::hardware(&rig), SequenceConfig::default()).unwrap();
        let blank = seq.measure_blank(&mut NeverCancel).unwrap();
        rig.borrow_mut()
            .set_sample(SimSample::with_concentration(1.0));
        seq.measure_sample(&blank, &mut NeverCancel).unwrap()
    };
    assert_eq!(run(5), run(5));
    assert_ne!(run(5), run(6));
}

#[cfg(feature = "async")]
#[test]
fn async_sequencer_reads_exactly_like_the_blocking_one() {
    use core::future::Future;
    use core::pin::pin;
    use core::task::{Context, Poll, Waker};
    use lumisorb::instrument::AsyncSequencer;

    // Every simulated operation completes at once: one poll finishes the future.
    fn block_on<F: Future>(f: F) -> F::Output {
        let mut f = pin!(f);
        let mut cx = Context::from_waker(Waker::noop());
        for _ in 0..1000 {
            if let Poll::Ready(v) = f.as_mut().poll(&mut cx) {
                return v;
            }
        }
        panic!("future did not complete");
    }

    let sync_rig = rig(77);
    let mut seq = Sequencer::new(SimRig::hardware(&sync_rig), SequenceConfig::default()).unwrap();
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    sync_rig
        .borrow_mut()
        .set_sample(SimSample::with_concentration(3.0));
    let sample = seq.measure_sample(&blank, &mut NeverCancel).unwrap();

    let async_rig = rig(77);
    let mut aseq =
        AsyncSequencer::new(SimRig::hardware(&async_rig), SequenceConfig::default()).unwrap();
    let ablank = block_on(aseq.measure_blank(&mut NeverCancel)).unwrap();
    async_rig
        .borrow_mut()
        .set_sample(SimSample::with_concentration(3.0));
    let asample = block_on(aseq.measure_sample(&ablank, &mut NeverCancel)).unwrap();
    assert_eq!(blank, ablank);
    assert_eq!(sample, asample);
    assert_eq!(sync_rig.borrow().reads(), async_rig.borrow().reads());
}
