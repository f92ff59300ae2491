//! One measurement without any printing, for the size report: auto-exposure, blank and one
//! sample on the simulated photometer (sequencer, photometry, simulator; no calibration). The
//! exit status says whether the absorbance is plausible.
#![no_std]
#![no_main]

#[path = "../pipeline.rs"]
#[allow(dead_code)]
mod pipeline;
#[path = "../probe_exit.rs"]
mod probe_exit;
#[path = "../vectors.rs"]
mod vectors;

use core::cell::RefCell;

use cortex_m_rt::entry;

#[entry]
fn main() -> ! {
    let Some(rig) = pipeline::new_rig()
        .ok()
        .and_then(|r| cortex_m::singleton!(: RefCell<lumisorb::sim::SimRig> = RefCell::new(r)))
    else {
        probe_exit::exit(false)
    };
    // The demo dye at 2 units reads about A = 0.45 (see the firmware's report).
    let ok = matches!(pipeline::single_measurement(rig), Ok(a) if a > 0.40 && a < 0.50);
    probe_exit::exit(ok)
}
