//! Size probe: the baseline plus the store: settings, calibration (refit on load), log append and read-back; no export. Exit status only, no printing.
#![no_std]
#![no_main]

#[path = "../common.rs"]
mod common;

use core::panic::PanicInfo;

use cortex_m_rt::entry;
use cortex_m_semihosting::debug;

#[entry]
fn main() -> ! {
    let ok = common::store().and_then(|mut s| {
        common::store_ops(&mut s)?;

        Some(())
    });
    debug::exit(if ok.is_some() {
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
