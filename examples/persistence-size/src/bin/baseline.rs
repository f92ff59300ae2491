//! Baseline for the size report: the flash driver used directly and a calibration fit, no
//! persistence. `store` minus `baseline` is the persistence layer's cost.
#![no_std]
#![no_main]

#[path = "../common.rs"]
mod common;

use cortex_m_rt::entry;
use embedded_storage::nor_flash::{NorFlash, ReadNorFlash};

#[entry]
fn main() -> ! {
    let flash = common::flash();
    let mut word = [0u8; 8];
    let ok = flash.erase(0, 2048).is_ok()
        && flash.write(0, &[1; 8]).is_ok()
        && flash.read(0, &mut word).is_ok()
        && common::calibration().is_some();
    common::exit(ok)
}
