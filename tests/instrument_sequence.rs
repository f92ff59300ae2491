//! The exact sequence of pin, duty, delay and read calls the sequencer makes, checked against a
//! recorder of our own (an equivalent of embedded-hal-mock's transaction lists), plus the
//! bounds: saturation back-off, cancellation, read timeout, auto-exposure limits.

use std::cell::RefCell;
use std::collections::VecDeque;
use std::convert::Infallible;
use std::rc::Rc;

use embedded_hal::delay::DelayNs;
use embedded_hal::digital::{ErrorType as PinErrorType, OutputPin};
use embedded_hal::pwm::{ErrorType as PwmErrorType, SetDutyCycle};
use lumisorb::counts::FullScale;
use lumisorb::instrument::{
    Clock, Detector, DetectorErrorKind, ErrorType, Exposure, ExposureError, FnCancel, Hardware,
    NeverCancel, SequenceConfig, SequenceError, Sequencer,
};
use lumisorb::Flag;

#[derive(Clone, Copy, Debug, PartialEq)]
enum Ev {
    Led(bool),
    Duty(u16),
    Step(u8),
    DelayUs(u32),
    Read,
    ReadRef,
}

#[derive(Default)]
struct Bench {
    events: Vec<Ev>,
    now_us: u64,
    lit: bool,
    step: u8,
    duty: u16,
    /// Lit level at step 0, full drive (counts); sensitivity scales it.
    lit_level: f32,
    dark_level: u32,
    /// Extra time one read takes (µs), to provoke a read timeout.
    read_us: u64,
    /// Scripted overrides of signal reads (taken first).
    script: VecDeque<u32>,
}

const FS: u32 = 10_000;
const MAX_DUTY: u16 = 100;
const STEPS: [f32; 3] = [1.0, 2.0, 4.0];

type Shared = Rc<RefCell<Bench>>;

struct Pin(Shared);
struct Pwm(Shared);
struct Det(Shared);
struct RefDet(Shared);
struct Wait(Shared);
struct Time(Shared);

impl PinErrorType for Pin {
    type Error = Infallible;
}
impl OutputPin for Pin {
    fn set_low(&mut self) -> Result<(), Infallible> {
        let mut b = self.0.borrow_mut();
        b.lit = false;
        b.events.push(Ev::Led(false));
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        let mut b = self.0.borrow_mut();
        b.lit = true;
        b.events.push(Ev::Led(true));
        Ok(())
    }
}
impl PwmErrorType for Pwm {
    type Error = Infallible;
}
impl SetDutyCycle for Pwm {
    fn max_duty_cycle(&self) -> u16 {
        MAX_DUTY
    }
    fn set_duty_cycle(&mut self, duty: u16) -> Result<(), Infallible> {
        let mut b = self.0.borrow_mut();
        b.duty = duty;
        b.events.push(Ev::Duty(duty));
        Ok(())
    }
}
impl DelayNs for Wait {
    fn delay_ns(&mut self, ns: u32) {
        self.delay_us(ns.div_ceil(1000));
    }
    fn delay_us(&mut self, us: u32) {
        let mut b = self.0.borrow_mut();
        b.now_us += u64::from(us);
        b.events.push(Ev::DelayUs(us));
    }
    fn delay_ms(&mut self, ms: u32) {
        self.delay_us(ms * 1000);
    }
}
impl Clock for Time {
    fn now_ms(&mut self) -> u32 {
        (self.0.borrow().now_us / 1000) as u32
    }
}
impl ErrorType for Det {
    type Error = DetectorErrorKind;
}
impl Detector for Det {
    fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        let mut b = self.0.borrow_mut();
        b.events.push(Ev::Read);
        b.now_us += 1000 + b.read_us;
        if let Some(v) = b.script.pop_front() {
            return Ok(v);
        }
        let k = STEPS[usize::from(b.step)] * f32::from(b.duty) / f32::from(MAX_DUTY);
        let v = if b.lit {
            b.dark_level as f32 + b.lit_level * k
        } else {
            b.dark_level as f32
        };
        Ok((v as u32).min(FS))
    }
    fn full_scale(&self) -> FullScale {
        FullScale::new(FS).unwrap()
    }
    fn exposure_steps(&self) -> u8 {
        3
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        STEPS.get(usize::from(step)).copied()
    }
    fn set_exposure(&mut self, step: u8) -> Result<(), DetectorErrorKind> {
        let mut b = self.0.borrow_mut();
        b.step = step;
        b.events.push(Ev::Step(step));
        Ok(())
    }
}
impl ErrorType for RefDet {
    type Error = DetectorErrorKind;
}
impl Detector for RefDet {
    fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        let mut b = self.0.borrow_mut();
        b.events.push(Ev::ReadRef);
        let drive = f32::from(b.duty) / f32::from(MAX_DUTY);
        Ok(if b.lit {
            200 + (3000.0 * drive) as u32
        } else {
            200
        })
    }
    fn full_scale(&self) -> FullScale {
        FullScale::new(FS).unwrap()
    }
}

type Seq = Sequencer<Pin, Pwm, Det, RefDet, Wait, Time>;

fn setup(config: SequenceConfig, lit_level: f32) -> (Shared, Seq) {
    let b = Rc::new(RefCell::new(Bench {
        lit_level,
        dark_level: 500,
        ..Bench::default()
    }));
    let hw = Hardware {
        led: Pin(b.clone()),
        dimmer: Pwm(b.clone()),
        detector: Det(b.clone()),
        reference: Some(RefDet(b.clone())),
        delay: Wait(b.clone()),
        clock: Time(b.clone()),
    };
    (b, Sequencer::new(hw, config).unwrap())
}

fn fixed_config(pairs: u16) -> SequenceConfig {
    let mut c = SequenceConfig {
        auto_exposure: false,
        pairs,
        ..SequenceConfig::default()
    };
    c.timing.settle_lit_us = 5_000;
    c.timing.settle_dark_us = 3_000;
    c
}

/// One read in the interleaved pattern: switch, settle, measuring then reference detector.
fn read(lit: bool) -> [Ev; 4] {
    [
        Ev::Led(lit),
        Ev::DelayUs(if lit { 5_000 } else { 3_000 }),
        Ev::Read,
        Ev::ReadRef,
    ]
}

#[test]
fn blank_then_sample_call_sequence_is_exact() {
    let (b, mut seq) = setup(fixed_config(2), 5_000.0);
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    let mut expected = vec![Ev::Step(0), Ev::Duty(MAX_DUTY)];
    // D L D L D: two lit reads, three dark reads, dark first and last.
    for lit in [false, true, false, true, false] {
        expected.extend(read(lit));
    }
    // Idle: LED left lit.
    expected.push(Ev::Led(true));
    assert_eq!(b.borrow().events, expected);
    assert_eq!(blank.net.lit_reads, 2);
    assert_eq!(blank.net.dark_reads, 3);
    assert_eq!(blank.net.signal.net, 5_000.0);
    assert!(blank.net.reference.is_some());

    // The sample reuses the applied exposure: no step or duty writes.
    b.borrow_mut().events.clear();
    b.borrow_mut().lit_level = 500.0;
    let sample = seq.measure_sample(&blank, &mut NeverCancel).unwrap();
    let mut expected = Vec::new();
    for lit in [false, true, false, true, false] {
        expected.extend(read(lit));
    }
    expected.push(Ev::Led(true));
    assert_eq!(b.borrow().events, expected);
    // T = 500 / 5000 → A = 1 (IUPAC Gold Book, decadic absorbance).
    assert!((sample.result.absorbance.value() - 1.0).abs() < 1e-6);
}

#[test]
fn clipped_blank_backs_off_once_and_clipped_twice_is_flagged() {
    let (b, mut seq) = setup(fixed_config(1), 5_000.0);
    // First attempt clips on its lit read.
    b.borrow_mut().script.extend([500, FS, 500]);
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    assert!(blank.backed_off);
    assert_eq!(blank.exposure, Exposure { step: 0, duty: 50 });
    assert!(!blank.net.flags.contains(Flag::Saturated));
    let ev = b.borrow().events.clone();
    // Repeat at half drive: a duty write, then the whole D L D again.
    let repeat = ev.iter().position(|e| *e == Ev::Duty(50)).unwrap();
    assert_eq!(
        ev[repeat + 1..].iter().filter(|e| **e == Ev::Read).count(),
        3
    );

    // Both attempts clip: the result carries the flag.
    let (b, mut seq) = setup(fixed_config(1), 5_000.0);
    b.borrow_mut().script.extend([500, FS, 500, 500, FS, 500]);
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    assert!(blank.backed_off);
    assert!(blank.net.flags.contains(Flag::Saturated));
}

#[test]
fn clipped_sample_is_repeated_and_scaled_to_the_blank_exposure() {
    let (b, mut seq) = setup(fixed_config(1), 4_000.0);
    let blank = seq.measure_blank(&mut NeverCancel).unwrap();
    // The sample clips on its first lit read (a bubble, say), then reads like the blank.
    b.borrow_mut().script.extend([500, FS, 500]);
    b.borrow_mut().lit_level = 4_000.0;
    let s = seq.measure_sample(&blank, &mut NeverCancel).unwrap();
    assert!(s.backed_off);
    assert_eq!(s.exposure, Exposure { step: 0, duty: 50 });
    // Scaled back: same level as the blank, absorbance 0.
    assert!(s.result.absorbance.value().abs() < 1e-6, "{:?}", s.result);
    assert_eq!(seq.exposure(), blank.exposure);
}

#[test]
fn cancel_between_reads_stops_and_leaves_the_led_idle() {
    let (b, mut seq) = setup(fixed_config(4), 5_000.0);
    let mut budget = 3;
    let mut cancel = FnCancel(|| {
        budget -= 1;
        budget < 0
    });
    let r = seq.measure_blank(&mut cancel);
    assert_eq!(r.err(), Some(SequenceError::Cancelled));
    let ev = b.borrow().events.clone();
    assert_eq!(ev.iter().filter(|e| **e == Ev::Read).count(), 3);
    assert_eq!(ev.last(), Some(&Ev::Led(true)));
}

#[test]
fn slow_read_times_out() {
    let mut c = fixed_config(2);
    c.timing.read_timeout_ms = 50;
    let (b, mut seq) = setup(c, 5_000.0);
    b.borrow_mut().read_us = 80_000;
    let r = seq.measure_blank(&mut NeverCancel);
    assert!(matches!(r, Err(SequenceError::ReadTimeout { elapsed_ms }) if elapsed_ms >= 80));
}

#[test]
fn auto_exposure_reaches_the_window_or_fails_clearly() {
    let mut c = SequenceConfig::default();
    c.exposure.probe_pairs = 1;
    // Step 0 full drive gives 500 + 1500: predicted k = (7250 - 500)/1500 = 4.5 → top step.
    let (b, mut seq) = setup(c, 1_500.0);
    let report = seq.auto_expose(&mut NeverCancel).unwrap();
    let frac = report.lit_fraction;
    assert!((0.60..=0.85).contains(&frac), "{frac}");
    assert_eq!(report.exposure.step, 2);
    assert_eq!(report.probes, 2);
    assert_eq!(b.borrow().events.last(), Some(&Ev::Led(true)));

    // Too little light even at the top step and full drive.
    let (_, mut seq) = setup(c, 200.0);
    let r = seq.auto_expose(&mut NeverCancel);
    assert!(
        matches!(
            r,
            Err(SequenceError::Exposure(ExposureError::TooDim { .. }))
        ),
        "{r:?}"
    );

    // Far too much light: clipped even at step 0 and the lowest drive.
    let (_, mut seq) = setup(c, 1e9);
    let r = seq.auto_expose(&mut NeverCancel);
    assert!(
        matches!(r, Err(SequenceError::Exposure(ExposureError::TooBright { lit_fraction })) if lit_fraction == 1.0),
        "{r:?}"
    );
}

#[test]
fn warm_up_of_a_constant_led_ends_after_the_stable_points() {
    let mut c = fixed_config(1);
    c.warm_up.pairs_per_point = 2;
    c.warm_up.stable_points = 2;
    let (b, mut seq) = setup(c, 5_000.0);
    let w = seq.warm_up(&mut NeverCancel).unwrap();
    // Point 1 has nothing to compare with; points 2 and 3 show no change.
    assert_eq!(w.points, 3);
    assert_eq!(
        b.borrow().events.iter().filter(|e| **e == Ev::Read).count(),
        3 * 5
    );
}

#[test]
fn warm_up_without_light_fails() {
    let (_, mut seq) = setup(fixed_config(1), 0.0);
    assert_eq!(
        seq.warm_up(&mut NeverCancel).err(),
        Some(SequenceError::NoLight)
    );
}
