//! Size probe: the baseline plus the store: settings, calibration (refit on load), log append and read-back; no export. Exit status only, no printing.
#![no_std]
#![no_main]

#[path = "../common.rs"]
mod common;

use cortex_m_rt::entry;

#[entry]
fn main() -> ! {
    let ok = common::store().and_then(|mut s| {
        common::store_ops(&mut s)?;

        Some(())
    });
    common::exit(ok.is_some())
}
