//! Stack and RAM probe: paints the free stack, runs every store operation (and the session
//! export), and prints the high-water mark and the store's size over semihosting.
#![no_std]
#![no_main]

#[path = "../common.rs"]
mod common;

use core::fmt::Write;

use cortex_m_rt::entry;
use cortex_m_semihosting::hio;

const PAINT: u32 = 0x5AA5_C33C;

extern "C" {
    /// End of .bss/.uninit: the lowest address the stack may grow to (cortex-m-rt's link.x).
    static __sheap: u32;
    /// Initial stack pointer: the top of RAM (cortex-m-rt's link.x).
    static _stack_start: u32;
}

fn bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken, never their contents.
    (
        core::ptr::addr_of!(__sheap) as usize,
        core::ptr::addr_of!(_stack_start) as usize,
    )
}

#[inline(never)]
fn paint() -> usize {
    let sp: usize;
    // SAFETY: reads the stack pointer register, no memory access.
    unsafe { core::arch::asm!("mov {}, sp", out(reg) sp) };
    let end = sp.saturating_sub(128) & !3;
    let mut p = bounds().0;
    while p < end {
        // SAFETY: [bottom, end) is RAM between the statics and the live stack: unused.
        unsafe { (p as *mut u32).write_volatile(PAINT) };
        p += 4;
    }
    sp
}

#[inline(never)]
fn high_water() -> usize {
    let (bottom, top) = bounds();
    let mut p = bottom;
    // SAFETY: reads RAM words between the statics and the stack top, all initialised.
    while p < top && unsafe { (p as *const u32).read_volatile() } == PAINT {
        p += 4;
    }
    top - p
}

#[inline(never)]
fn run(store: &mut common::Store) -> bool {
    common::store_ops(store).is_some()
        && common::csv_ops(store).is_some()
        && common::session_ops(store).is_some()
}

#[entry]
fn main() -> ! {
    let mut ok = false;
    // The store is built before painting: building it moves the driver, not part of the ops.
    if let Some(mut store) = common::store() {
        let sp = paint();
        let (_, top) = bounds();
        let before = top - sp;
        ok = run(&mut store);
        let used = high_water();
        if let Ok(mut out) = hio::hstdout() {
            let _ = writeln!(
                out,
                "size_of FlashStore: {} B (scratch {} B); stack used by the operations: {} B",
                core::mem::size_of::<common::Store>(),
                lumisorb::persistence::SCRATCH_LEN,
                used.saturating_sub(before)
            );
        }
    }
    common::exit(ok)
}
