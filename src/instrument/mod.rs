//! The instrument layer: hardware traits in the embedded-hal 1.0 style and a measurement
//! sequencer that drives them, pure of chemistry.
//!
//! * LED: on/off through [`embedded_hal::digital::OutputPin`], drive level through
//!   [`embedded_hal::pwm::SetDutyCycle`] ([`FixedDrive`] where it cannot be dimmed).
//! * Time: waits through [`embedded_hal::delay::DelayNs`], the time base through a [`Clock`]
//!   handed in (never a global clock), cancellation through a [`Cancel`] asked between reads.
//! * Detectors: the [`Detector`] trait (one read, full scale, optional exposure steps), with
//!   [`FnDetector`] over a plain read function.
//! * [`Sequencer`]: LED warm-up until stable ([`warm_up`]), auto-exposure of the blank into
//!   60-85 % of full scale ([`exposure`]), interleaved dark/lit measurements of blanks and
//!   samples with saturation back-off ([`sequencer`]), giving [`NetSignal`](crate::NetSignal)s
//!   and [`PhotometricResult`](crate::PhotometricResult)s.
//! * With the `async` feature, `asynch::AsyncSequencer` does the same over
//!   `embedded_hal_async::delay::DelayNs` and `asynch::AsyncDetector`.
//! * With the `defmt` feature the sequencer logs its events through defmt; without it no
//!   logging or formatting code exists.
//!
//! ```
//! # #[cfg(feature = "sim")] {
//! use core::cell::RefCell;
//! use lumisorb::instrument::{NeverCancel, SequenceConfig, Sequencer};
//! use lumisorb::sim::{SimBench, SimConfig, SimRig, SimSample};
//!
//! let rig = RefCell::new(SimRig::new(SimBench::new(SimConfig::GREEN_DEMO, 7).unwrap()));
//! let mut seq = Sequencer::new(SimRig::hardware(&rig), SequenceConfig::default()).unwrap();
//! let blank = seq.measure_blank(&mut NeverCancel).unwrap();
//! rig.borrow_mut().set_sample(SimSample::with_concentration(2.0));
//! let sample = seq.measure_sample(&blank, &mut NeverCancel).unwrap();
//! assert!(sample.result.absorbance.value() > 0.3);
//! # }
//! ```

pub mod clock;
pub mod config;
pub mod detector;
pub mod error;
pub mod exposure;
pub mod led;
pub(crate) mod log;
pub mod sequencer;
pub mod warm_up;

#[cfg(feature = "async")]
pub mod asynch;

pub use clock::{Cancel, Clock, FnCancel, FnClock, NeverCancel};
pub use config::{ConfigError, ExposureConfig, ReadTiming, SequenceConfig, WarmUpConfig};
pub use detector::{
    Detector, DetectorError, DetectorErrorKind, ErrorType, FnDetector, NoReference,
};
pub use error::{ExposureError, SequenceError};
pub use exposure::Exposure;
pub use led::FixedDrive;
pub use sequencer::{
    BlankMeasurement, ExposureReport, Hardware, SampleMeasurement, Sequencer, WarmUpReport,
};

#[cfg(feature = "async")]
pub use asynch::{AsyncDetector, AsyncSequencer, Blocking};
