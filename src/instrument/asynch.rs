//! The async variant of the instrument layer (feature `async`): [`AsyncDetector`] and
//! [`AsyncSequencer`] over `embedded_hal_async::delay::DelayNs`.
//!
//! The procedures are the same code as the blocking [`super::Sequencer`] (one body, expanded
//! twice), so both behave identically read for read. LED pin and duty cycle stay blocking
//! (they are register writes); reads, exposure changes and waits are awaited.

use super::detector::ErrorType;
use crate::counts::FullScale;

/// A photodetector read through an ADC, awaited (see [`super::Detector`] for the contract).
#[allow(async_fn_in_trait)]
pub trait AsyncDetector: ErrorType {
    /// One conversion in counts (0 ..= full scale).
    async fn read(&mut self) -> Result<u32, Self::Error>;

    /// The largest count `read` returns.
    fn full_scale(&self) -> FullScale;

    /// Number of exposure steps; 1 when fixed.
    fn exposure_steps(&self) -> u8 {
        1
    }

    /// Relative sensitivity of exposure `step` (ascending), `None` outside the steps.
    fn sensitivity(&self, step: u8) -> Option<f32> {
        if step == 0 {
            Some(1.0)
        } else {
            None
        }
    }

    /// Selects exposure `step`.
    async fn set_exposure(&mut self, step: u8) -> Result<(), Self::Error> {
        let _ = step;
        Ok(())
    }
}

/// Runs a blocking [`super::Detector`] as an [`AsyncDetector`] (each read completes at once).
#[derive(Clone, Copy, Debug, Default)]
pub struct Blocking<D>(pub D);

impl<D: ErrorType> ErrorType for Blocking<D> {
    type Error = D::Error;
}

impl<D: super::Detector> AsyncDetector for Blocking<D> {
    async fn read(&mut self) -> Result<u32, Self::Error> {
        self.0.read()
    }
    fn full_scale(&self) -> FullScale {
        self.0.full_scale()
    }
    fn exposure_steps(&self) -> u8 {
        self.0.exposure_steps()
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        self.0.sensitivity(step)
    }
    async fn set_exposure(&mut self, step: u8) -> Result<(), Self::Error> {
        self.0.set_exposure(step)
    }
}

/// Blocking and async share `NoReference`.
impl AsyncDetector for super::NoReference {
    async fn read(&mut self) -> Result<u32, Self::Error> {
        Ok(0)
    }
    fn full_scale(&self) -> FullScale {
        super::Detector::full_scale(self)
    }
}

/// The async `call!`: awaits the expression.
macro_rules! awaited {
    ($e:expr) => {
        $e.await
    };
}

super::sequencer::define_sequencer! {
    /// The async measurement sequencer (embedded-hal-async delays, [`AsyncDetector`]s); the
    /// same procedures as [`super::Sequencer`].
    name: AsyncSequencer,
    detector: crate::instrument::AsyncDetector,
    delay: embedded_hal_async::delay::DelayNs,
    asyncness: [async],
    call: awaited,
}
