//! [`SimRig`]: the simulated photometer behind the instrument layer's hardware traits, so the
//! real sequencer runs against the physical model.
//!
//! The rig holds the [`SimBench`], the simulated time, the LED state and the sample in the
//! cuvette in one `RefCell`; each adapter borrows it briefly:
//!
//! * [`SimLed`]: `OutputPin` (high = lit);
//! * [`SimDimmer`]: `SetDutyCycle` over [`SimRig::MAX_DUTY`] steps (LED drive level);
//! * [`SimDelay`]: `DelayNs` (blocking and, with `async`, async): advances simulated time;
//! * [`SimDetector`]: the measuring detector ([`Detector`]): each read advances time by the
//!   integration time and takes one [`SimBench::read`]; its exposure steps are the
//!   integration times [`INTEGRATION_STEPS_MS`];
//! * [`SimReference`]: the reference detector: returns the reference half of the same read
//!   (or takes a new one when read on its own);
//! * [`SimClock`]: the [`Clock`] of simulated milliseconds.
//!
//! A borrow that cannot be taken (only possible if an adapter were used re-entrantly) makes
//! a detector read fail with [`DetectorErrorKind::Other`] instead of panicking.

use core::cell::RefCell;
use core::convert::Infallible;

use super::bench::SimBench;
use super::optics::SimSample;
use crate::counts::FullScale;
use crate::instrument::{Clock, Detector, DetectorErrorKind, ErrorType, Hardware};

/// Integration times of the simulated detector's exposure steps (ms); its sensitivities.
pub const INTEGRATION_STEPS_MS: [f32; 7] = [1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0];

/// The simulated photometer and its state (time, LED, sample).
#[derive(Clone, Debug)]
pub struct SimRig {
    bench: SimBench,
    now_us: u64,
    led_on: bool,
    sample: SimSample,
    pending_reference: Option<u32>,
    reads: u32,
}

/// The hardware bundle of a rig, ready for [`crate::instrument::Sequencer::new`].
pub type SimHardware<'a> = Hardware<
    SimLed<'a>,
    SimDimmer<'a>,
    SimDetector<'a>,
    SimReference<'a>,
    SimDelay<'a>,
    SimClock<'a>,
>;

impl SimRig {
    /// Duty-cycle steps of the simulated LED drive.
    pub const MAX_DUTY: u16 = 1000;

    /// A rig at time 0 with the LED off, a blank in the cuvette and the detector at its
    /// first exposure step.
    pub fn new(mut bench: SimBench) -> SimRig {
        // INTEGRATION_STEPS_MS[0] is positive, so this cannot fail; ignore the Ok.
        let _ = bench.set_integration_ms(INTEGRATION_STEPS_MS[0]);
        SimRig {
            bench,
            now_us: 0,
            led_on: false,
            sample: SimSample::BLANK,
            pending_reference: None,
            reads: 0,
        }
    }

    /// The adapters over a shared rig.
    pub fn hardware(rig: &RefCell<SimRig>) -> SimHardware<'_> {
        let reference = rig
            .borrow()
            .bench
            .config()
            .reference
            .map(|_| SimReference { rig });
        Hardware {
            led: SimLed { rig },
            dimmer: SimDimmer { rig },
            detector: SimDetector { rig },
            reference,
            delay: SimDelay { rig },
            clock: SimClock { rig },
        }
    }

    /// Puts a sample into the cuvette.
    pub fn set_sample(&mut self, sample: SimSample) {
        self.sample = sample;
    }

    /// The sample in the cuvette.
    pub fn sample(&self) -> SimSample {
        self.sample
    }

    /// Simulated time (µs).
    pub fn now_us(&self) -> u64 {
        self.now_us
    }

    /// Simulated time in whole milliseconds.
    pub fn now_ms_total(&self) -> u64 {
        micros_to_millis(self.now_us)
    }

    /// Lets simulated time pass (µs).
    pub fn advance_us(&mut self, us: u64) {
        self.now_us = self.now_us.saturating_add(us);
    }

    /// Whether the LED is lit.
    pub fn led_on(&self) -> bool {
        self.led_on
    }

    /// Measuring-detector reads taken so far.
    pub fn reads(&self) -> u32 {
        self.reads
    }

    /// The bench (for noise-free expectations).
    pub fn bench(&self) -> &SimBench {
        &self.bench
    }

    /// The bench, mutable.
    pub fn bench_mut(&mut self) -> &mut SimBench {
        &mut self.bench
    }

    fn now_ms(&self) -> u32 {
        // Wraps after about 49 days, as a millisecond timer does.
        micros_to_millis(self.now_us) as u32
    }

    /// One read: integration, then the bench's conversion at the end of it.
    fn convert(&mut self) -> (u32, Option<u32>) {
        let int_us = (self.bench.integration_ms() * 1000.0) as u64;
        self.advance_us(int_us);
        let t = self.now_ms();
        let sample = self.sample;
        let r = self.bench.read(t, self.led_on, &sample);
        self.reads = self.reads.saturating_add(1);
        (r.signal, r.reference)
    }
}

/// `us / 1000` with 32-bit divisions only: a Cortex-M has a 32-bit divide instruction, while a
/// 64-bit division links a software routine of about 0.9 kB. Long division in 16-bit digits:
/// every partial dividend is below 1000·2^16, so it fits 32 bits.
fn micros_to_millis(us: u64) -> u64 {
    let (hi, lo) = ((us >> 32) as u32, us as u32);
    let mid = ((hi % 1000) << 16) | (lo >> 16);
    let low = ((mid % 1000) << 16) | (lo & 0xFFFF);
    (u64::from(hi / 1000) << 32) + (u64::from(mid / 1000) << 16) + u64::from(low / 1000)
}

/// The simulated LED pin.
pub struct SimLed<'a> {
    rig: &'a RefCell<SimRig>,
}

impl embedded_hal::digital::ErrorType for SimLed<'_> {
    type Error = Infallible;
}

impl embedded_hal::digital::OutputPin for SimLed<'_> {
    fn set_low(&mut self) -> Result<(), Infallible> {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.led_on = false;
        }
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.led_on = true;
        }
        Ok(())
    }
}

/// The simulated LED drive.
pub struct SimDimmer<'a> {
    rig: &'a RefCell<SimRig>,
}

impl embedded_hal::pwm::ErrorType for SimDimmer<'_> {
    type Error = Infallible;
}

impl embedded_hal::pwm::SetDutyCycle for SimDimmer<'_> {
    fn max_duty_cycle(&self) -> u16 {
        SimRig::MAX_DUTY
    }
    fn set_duty_cycle(&mut self, duty: u16) -> Result<(), Infallible> {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.bench
                .set_drive(f32::from(duty) / f32::from(SimRig::MAX_DUTY));
        }
        Ok(())
    }
}

/// Simulated waits: they advance simulated time.
pub struct SimDelay<'a> {
    rig: &'a RefCell<SimRig>,
}

impl SimDelay<'_> {
    fn wait_ns(&mut self, ns: u32) {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.advance_us(u64::from(ns.div_ceil(1000)));
        }
    }
}

impl embedded_hal::delay::DelayNs for SimDelay<'_> {
    fn delay_ns(&mut self, ns: u32) {
        self.wait_ns(ns);
    }
    fn delay_us(&mut self, us: u32) {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.advance_us(u64::from(us));
        }
    }
    fn delay_ms(&mut self, ms: u32) {
        if let Ok(mut r) = self.rig.try_borrow_mut() {
            r.advance_us(u64::from(ms) * 1000);
        }
    }
}

#[cfg(feature = "async")]
impl embedded_hal_async::delay::DelayNs for SimDelay<'_> {
    async fn delay_ns(&mut self, ns: u32) {
        self.wait_ns(ns);
    }
}

/// The simulated measuring detector.
pub struct SimDetector<'a> {
    rig: &'a RefCell<SimRig>,
}

impl ErrorType for SimDetector<'_> {
    type Error = DetectorErrorKind;
}

fn full_scale_of(rig: &RefCell<SimRig>, reference: bool) -> FullScale {
    let fs = rig.try_borrow().ok().and_then(|r| {
        let c = r.bench.config();
        if reference {
            c.reference.map(|x| x.detector.full_scale)
        } else {
            Some(c.signal.full_scale)
        }
    });
    // Full scales above 24 bits are reported as 24 bits (reads then cannot exceed them only
    // if the model's full scale fits; configure the bench within 24 bits).
    match FullScale::new(
        fs.unwrap_or(crate::counts::MAX_COUNT)
            .min(crate::counts::MAX_COUNT),
    ) {
        Ok(f) => f,
        Err(_) => FULL_24,
    }
}

#[allow(clippy::panic)]
const FULL_24: FullScale = match FullScale::from_bits(24) {
    Ok(f) => f,
    // Evaluated at compile time: can only stop the build.
    Err(_) => panic!("24 bits is a valid full scale"),
};

impl Detector for SimDetector<'_> {
    fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        let mut r = self
            .rig
            .try_borrow_mut()
            .map_err(|_| DetectorErrorKind::Other)?;
        let (signal, reference) = r.convert();
        r.pending_reference = reference;
        Ok(signal)
    }
    fn full_scale(&self) -> FullScale {
        full_scale_of(self.rig, false)
    }
    fn exposure_steps(&self) -> u8 {
        INTEGRATION_STEPS_MS.len() as u8
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        INTEGRATION_STEPS_MS.get(usize::from(step)).copied()
    }
    fn set_exposure(&mut self, step: u8) -> Result<(), DetectorErrorKind> {
        let ms = INTEGRATION_STEPS_MS
            .get(usize::from(step))
            .copied()
            .ok_or(DetectorErrorKind::InvalidData)?;
        let mut r = self
            .rig
            .try_borrow_mut()
            .map_err(|_| DetectorErrorKind::Other)?;
        r.bench
            .set_integration_ms(ms)
            .map_err(|_| DetectorErrorKind::InvalidData)
    }
}

/// The simulated reference detector.
pub struct SimReference<'a> {
    rig: &'a RefCell<SimRig>,
}

impl ErrorType for SimReference<'_> {
    type Error = DetectorErrorKind;
}

impl Detector for SimReference<'_> {
    fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        let mut r = self
            .rig
            .try_borrow_mut()
            .map_err(|_| DetectorErrorKind::Other)?;
        let value = match r.pending_reference.take() {
            Some(v) => Some(v),
            None => r.convert().1,
        };
        value.ok_or(DetectorErrorKind::Other)
    }
    fn full_scale(&self) -> FullScale {
        full_scale_of(self.rig, true)
    }
}

#[cfg(feature = "async")]
impl crate::instrument::AsyncDetector for SimDetector<'_> {
    async fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        Detector::read(self)
    }
    fn full_scale(&self) -> FullScale {
        Detector::full_scale(self)
    }
    fn exposure_steps(&self) -> u8 {
        Detector::exposure_steps(self)
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        Detector::sensitivity(self, step)
    }
    async fn set_exposure(&mut self, step: u8) -> Result<(), DetectorErrorKind> {
        Detector::set_exposure(self, step)
    }
}

#[cfg(feature = "async")]
impl crate::instrument::AsyncDetector for SimReference<'_> {
    async fn read(&mut self) -> Result<u32, DetectorErrorKind> {
        Detector::read(self)
    }
    fn full_scale(&self) -> FullScale {
        Detector::full_scale(self)
    }
}

/// Simulated milliseconds.
pub struct SimClock<'a> {
    rig: &'a RefCell<SimRig>,
}

impl Clock for SimClock<'_> {
    fn now_ms(&mut self) -> u32 {
        self.rig.try_borrow().map(|r| r.now_ms()).unwrap_or(0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn millis_agree_with_64_bit_division() {
        // Reference: the plain u64 division it replaces.
        let mut x = 0x2545_F491_4F6C_DD1Du64;
        let edges = [
            0,
            999,
            1000,
            1001,
            u64::from(u32::MAX),
            1 << 32,
            (1 << 48) + 7,
            u64::MAX,
        ];
        for us in edges.into_iter().chain((0..10_000).map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x >> (x % 64)
        })) {
            assert_eq!(micros_to_millis(us), us / 1000, "{us}");
        }
    }
}
