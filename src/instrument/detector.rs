//! The photodetector trait: one read, its full scale, and an optional exposure setting.
//!
//! In the embedded-hal style every operation is fallible, the error type comes from
//! [`ErrorType`], and each error can tell its [`DetectorErrorKind`] so a generic sequencer can
//! react to it without knowing the driver.
//!
//! # For driver authors
//! Implement [`Detector`] for your ADC or light-sensor driver: `read` returns one conversion
//! in counts (0 ..= full scale; a clipped conversion returns the full scale), `full_scale`
//! the largest count. If the hardware has an integration time or a gain, expose it as
//! exposure steps: `exposure_steps` > 1, `sensitivity(step)` the relative sensitivity of each
//! step (ascending, step 0 the least sensitive; only ratios matter) and `set_exposure`. If
//! your read is a plain function, wrap it with [`FnDetector`] instead.
//!
//! # For users of the sequencer
//! The sequencer changes the exposure only of the measuring detector; a reference detector
//! keeps its exposure, so the ratio signal/reference follows LED drive changes exactly.

use core::convert::Infallible;
use core::fmt;

use crate::counts::FullScale;

/// What kind of failure a detector read had.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DetectorErrorKind {
    /// The conversion did not complete in time.
    Timeout,
    /// The bus to the converter failed (I2C NACK, SPI fault, ...).
    Bus,
    /// The converter reported an invalid or out-of-range result.
    InvalidData,
    /// Any other failure.
    Other,
}

impl fmt::Display for DetectorErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            DetectorErrorKind::Timeout => "detector conversion timed out",
            DetectorErrorKind::Bus => "detector bus error",
            DetectorErrorKind::InvalidData => "detector returned invalid data",
            DetectorErrorKind::Other => "detector error",
        })
    }
}

impl core::error::Error for DetectorErrorKind {}

/// A detector error: any type that can name its kind.
pub trait DetectorError: fmt::Debug {
    /// The kind of failure.
    fn kind(&self) -> DetectorErrorKind;
}

impl DetectorError for Infallible {
    fn kind(&self) -> DetectorErrorKind {
        match *self {}
    }
}

impl DetectorError for DetectorErrorKind {
    fn kind(&self) -> DetectorErrorKind {
        *self
    }
}

/// The error type of a detector.
pub trait ErrorType {
    /// Error of the detector's operations.
    type Error: DetectorError;
}

impl<T: ErrorType + ?Sized> ErrorType for &mut T {
    type Error = T::Error;
}

/// A photodetector read through an ADC (blocking).
pub trait Detector: ErrorType {
    /// One conversion in counts (0 ..= full scale).
    fn read(&mut self) -> Result<u32, Self::Error>;

    /// The largest count `read` returns.
    fn full_scale(&self) -> FullScale;

    /// Number of exposure steps (integration times or gains); 1 when fixed.
    fn exposure_steps(&self) -> u8 {
        1
    }

    /// Relative sensitivity of exposure `step` (ascending with the step), `None` outside
    /// `0..exposure_steps()`.
    fn sensitivity(&self, step: u8) -> Option<f32> {
        if step == 0 {
            Some(1.0)
        } else {
            None
        }
    }

    /// Selects exposure `step` (only called with `step < exposure_steps()`).
    fn set_exposure(&mut self, step: u8) -> Result<(), Self::Error> {
        let _ = step;
        Ok(())
    }
}

impl<T: Detector + ?Sized> Detector for &mut T {
    fn read(&mut self) -> Result<u32, Self::Error> {
        T::read(self)
    }
    fn full_scale(&self) -> FullScale {
        T::full_scale(self)
    }
    fn exposure_steps(&self) -> u8 {
        T::exposure_steps(self)
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        T::sensitivity(self, step)
    }
    fn set_exposure(&mut self, step: u8) -> Result<(), Self::Error> {
        T::set_exposure(self, step)
    }
}

/// Exposure setter of an [`FnDetector`] without adjustable exposure.
pub type NoExposure<E> = fn(u8) -> Result<(), E>;

/// A [`Detector`] over a plain read function (an ADC driver call, a closure).
///
/// ```
/// use lumisorb::counts::FullScale;
/// use lumisorb::instrument::{Detector, FnDetector};
///
/// let mut adc_value = 1234u32;
/// let fs = FullScale::from_bits(12).unwrap();
/// let mut det = FnDetector::infallible(fs, move || { adc_value += 1; adc_value });
/// assert_eq!(det.read(), Ok(1235));
/// assert_eq!(det.full_scale().value(), 4095);
/// ```
pub struct FnDetector<'a, R, S, E> {
    read: R,
    set: S,
    full_scale: FullScale,
    sensitivities: &'a [f32],
    _error: core::marker::PhantomData<E>,
}

impl<R, E> FnDetector<'static, R, NoExposure<E>, E>
where
    R: FnMut() -> Result<u32, E>,
    E: DetectorError,
{
    /// A fixed-exposure detector from a fallible read function.
    pub fn new(full_scale: FullScale, read: R) -> Self {
        FnDetector {
            read,
            set: |_| Ok(()),
            full_scale,
            sensitivities: &[1.0],
            _error: core::marker::PhantomData,
        }
    }
}

/// The read closure of [`FnDetector::infallible`].
pub struct Infallibly<F>(F);

impl<F: FnMut() -> u32> Infallibly<F> {
    fn call(&mut self) -> Result<u32, Infallible> {
        Ok((self.0)())
    }
}

impl<F> FnDetector<'static, Infallibly<F>, NoExposure<Infallible>, Infallible>
where
    F: FnMut() -> u32,
{
    /// A fixed-exposure detector from a read function that cannot fail.
    pub fn infallible(full_scale: FullScale, read: F) -> Self {
        FnDetector {
            read: Infallibly(read),
            set: |_| Ok(()),
            full_scale,
            sensitivities: &[1.0],
            _error: core::marker::PhantomData,
        }
    }
}

impl<'a, R, S0, E> FnDetector<'a, R, S0, E> {
    /// Adds exposure steps: `sensitivities[i]` is the relative sensitivity of step `i`
    /// (ascending; at most 255 steps are used), `set` selects a step in the hardware.
    pub fn with_exposure<'b, S>(self, sensitivities: &'b [f32], set: S) -> FnDetector<'b, R, S, E>
    where
        S: FnMut(u8) -> Result<(), E>,
    {
        FnDetector {
            read: self.read,
            set,
            full_scale: self.full_scale,
            sensitivities,
            _error: core::marker::PhantomData,
        }
    }
}

/// A read function the [`FnDetector`] can call.
pub trait ReadFn<E> {
    /// Calls the read.
    fn call_read(&mut self) -> Result<u32, E>;
}

impl<F: FnMut() -> Result<u32, E>, E> ReadFn<E> for F {
    fn call_read(&mut self) -> Result<u32, E> {
        self()
    }
}

impl<F: FnMut() -> u32> ReadFn<Infallible> for Infallibly<F> {
    fn call_read(&mut self) -> Result<u32, Infallible> {
        self.call()
    }
}

impl<R, S, E: DetectorError> ErrorType for FnDetector<'_, R, S, E> {
    type Error = E;
}

impl<R, S, E> Detector for FnDetector<'_, R, S, E>
where
    R: ReadFn<E>,
    S: FnMut(u8) -> Result<(), E>,
    E: DetectorError,
{
    fn read(&mut self) -> Result<u32, E> {
        self.read.call_read()
    }
    fn full_scale(&self) -> FullScale {
        self.full_scale
    }
    fn exposure_steps(&self) -> u8 {
        u8::try_from(self.sensitivities.len())
            .unwrap_or(u8::MAX)
            .max(1)
    }
    fn sensitivity(&self, step: u8) -> Option<f32> {
        if self.sensitivities.is_empty() && step == 0 {
            return Some(1.0);
        }
        self.sensitivities.get(usize::from(step)).copied()
    }
    fn set_exposure(&mut self, step: u8) -> Result<(), E> {
        (self.set)(step)
    }
}

/// The absent reference detector (use `None::<NoReference>` in [`super::Hardware`]).
#[derive(Clone, Copy, Debug, Default)]
pub struct NoReference;

impl ErrorType for NoReference {
    type Error = Infallible;
}

impl Detector for NoReference {
    fn read(&mut self) -> Result<u32, Infallible> {
        Ok(0)
    }
    fn full_scale(&self) -> FullScale {
        NO_REFERENCE_FULL_SCALE
    }
}

// Evaluated at compile time: the `panic!` can only stop the build, never a device.
#[allow(clippy::panic)]
const NO_REFERENCE_FULL_SCALE: FullScale = match FullScale::new(1) {
    Ok(fs) => fs,
    Err(_) => panic!("full scale 1 is valid"),
};

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fn_detector_with_steps() {
        let fs = FullScale::new(1000).unwrap();
        let mut chosen = None;
        {
            let mut d = FnDetector::new(fs, || Ok::<u32, DetectorErrorKind>(7)).with_exposure(
                &[1.0, 2.0, 4.0],
                |s| {
                    chosen = Some(s);
                    Ok(())
                },
            );
            assert_eq!(d.exposure_steps(), 3);
            assert_eq!(d.sensitivity(2), Some(4.0));
            assert_eq!(d.sensitivity(3), None);
            assert_eq!(d.set_exposure(1), Ok(()));
            assert_eq!(d.read(), Ok(7));
        }
        assert_eq!(chosen, Some(1));
        let mut failing = FnDetector::new(fs, || Err(DetectorErrorKind::Bus));
        assert_eq!(
            failing.read().map_err(|e| e.kind()),
            Err(DetectorErrorKind::Bus)
        );
        assert_eq!(failing.exposure_steps(), 1);
    }
}
