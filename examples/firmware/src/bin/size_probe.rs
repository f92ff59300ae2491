//! The pipeline without any printing, for the size report: runs [`pipeline::measure`] and
//! its checks and tells the host only through the exit status. Its .text is the pipeline
//! (library and simulated photometer) plus the runtime, with no formatting code.
#![no_std]
#![no_main]

#[path = "../pipeline.rs"]
#[allow(dead_code)]
mod pipeline;
#[path = "../vectors.rs"]
mod vectors;

use core::cell::RefCell;
use core::panic::PanicInfo;

use cortex_m_rt::entry;
use cortex_m_semihosting::debug;

#[entry]
fn main() -> ! {
    let Some(rig) = pipeline::new_rig()
        .ok()
        .and_then(|r| cortex_m::singleton!(: RefCell<lumisorb::sim::SimRig> = RefCell::new(r)))
    else {
        debug::exit(debug::EXIT_FAILURE);
        #[allow(clippy::empty_loop)]
        loop {}
    };
    let ok = match pipeline::measure(rig) {
        Ok(o) => pipeline::checks(&o).iter().all(|c| c.1),
        Err(_) => false,
    };
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    #[allow(clippy::empty_loop)]
    loop {}
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}
