//! A simulated photometer: a physical model of LED, cuvette, analyte and photodetector, for
//! host tests, demo data and the firmware example (feature `sim`; `no_std`, no heap).
//!
//! The model, one concept per file:
//!
//! * [`rng`]: a small deterministic seedable generator (xoshiro128++) with Gaussian and
//!   Poisson shot-noise draws, identical on every target.
//! * [`optics`]: a Gaussian LED emission band against a Gaussian absorption band, integrated
//!   over wavelength (so band-limited light bends below Beer-Lambert at high absorbance),
//!   path length, a flat background attenuance (turbidity) and stray light.
//! * [`led`]: drive level, junction warm-up as a first-order thermal RC (a cold LED is
//!   brighter and bluer), slow ageing drift.
//! * [`detector`]: conversion gain, dark current and dark offset with slow drift, shot noise
//!   (Poisson), read noise (Gaussian), full-scale clipping, ADC rounding.
//! * [`bench`](mod@bench): [`SimBench`] puts them together: `read(t_ms, led_on, &sample)` gives one
//!   [`SimRead`] of the measuring detector and, if configured, a reference detector that sees
//!   the LED before the cuvette.
//! * [`rig`]: [`SimRig`] puts the bench behind the instrument layer's embedded-hal traits, so
//!   the real [`crate::instrument::Sequencer`] measures the simulated photometer.
//!
//! All parameters are invented for simulation (see [`SimConfig::GREEN_DEMO`]); they describe
//! no real device. Time is handed in, never read from a clock, so a seed and a call sequence
//! reproduce the same counts on a PC and on a microcontroller.
//!
//! ```
//! use lumisorb::sim::{SimBench, SimConfig, SimSample};
//!
//! let mut bench = SimBench::new(SimConfig::GREEN_DEMO, 42).unwrap();
//! let dark = bench.read(0, false, &SimSample::BLANK);
//! let lit = bench.read(20, true, &SimSample::with_concentration(1.5));
//! assert!(lit.signal > dark.signal);
//! assert!(lit.reference.is_some());
//! ```

pub mod bench;
pub mod detector;
pub mod led;
pub mod optics;
pub mod rig;
pub mod rng;

pub use bench::{ReferenceChannel, SimBench, SimConfig, SimConfigError, SimExpected, SimRead};
pub use detector::DetectorModel;
pub use led::{LedModel, LedState};
pub use optics::{Absorber, Cuvette, GaussianBand, Optics, SimSample};
pub use rig::{SimHardware, SimRig, INTEGRATION_STEPS_MS};
pub use rng::SimRng;
