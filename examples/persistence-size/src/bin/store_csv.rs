//! Size probe: the store probe plus the CSV export of the log. Exit status only, no printing.
#![no_std]
#![no_main]

#[path = "../common.rs"]
mod common;

use cortex_m_rt::entry;

#[entry]
fn main() -> ! {
    let ok = common::store().and_then(|mut s| {
        common::store_ops(&mut s)?;
        common::csv_ops(&mut s)?;
        Some(())
    });
    common::exit(ok.is_some())
}
