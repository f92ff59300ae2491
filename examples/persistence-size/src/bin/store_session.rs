//! Size probe: the CSV probe plus the session-format export. Exit status only, no printing.
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
        common::csv_ops(&mut s)?;
        common::session_ops(&mut s)?;
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
