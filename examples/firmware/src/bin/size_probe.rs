//! The pipeline without any printing, for the size report: runs [`pipeline::measure`] and
//! its checks and tells the host only through the exit status. Its .text is the pipeline
//! (library and simulated photometer) plus the runtime, with no formatting code.
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
    let ok = match pipeline::measure(rig) {
        Ok(o) => pipeline::checks(&o).iter().all(|c| c.1),
        Err(_) => false,
    };
    probe_exit::exit(ok)
}
