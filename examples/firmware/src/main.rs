//! lumisorb on an emulated Cortex-M board: the whole pipeline on the simulated photometer,
//! results over semihosting, exit status to the host (0 only when every check passed).
//!
//! Also measures the stack high-water mark of one full pipeline run: the free stack is painted
//! with a pattern before, and after the run the deepest overwritten word is found.
#![no_std]
#![no_main]

mod pipeline;

// With the `defmt` feature the sequencer's events go out as defmt frames over semihosting.
#[cfg(feature = "defmt")]
use defmt_semihosting as _;

use core::fmt::{self, Write};
use core::panic::PanicInfo;

// Links cortex-m's single-core critical-section implementation (semihosting output uses it).
use cortex_m as _;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hio};

const PAINT: u32 = 0x5AA5_C33C;

extern "C" {
    /// End of .bss/.uninit: the lowest address the stack may grow to (cortex-m-rt's link.x).
    static __sheap: u32;
    /// Initial stack pointer: the top of RAM (cortex-m-rt's link.x).
    static _stack_start: u32;
}

struct Host(Option<hio::HostStream>);

impl Write for Host {
    fn write_str(&mut self, s: &str) -> fmt::Result {
        match self.0.as_mut() {
            Some(h) => h.write_all(s.as_bytes()).map_err(|_| fmt::Error),
            None => Err(fmt::Error),
        }
    }
}

fn stack_bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken, never their contents.
    (
        core::ptr::addr_of!(__sheap) as usize,
        core::ptr::addr_of!(_stack_start) as usize,
    )
}

/// Paints the unused stack (below the current stack pointer, minus a margin for this
/// function's own frame) with [`PAINT`].
#[inline(never)]
fn paint_stack() {
    let sp: usize;
    // SAFETY: reads the stack pointer register, no memory access.
    unsafe { core::arch::asm!("mov {}, sp", out(reg) sp) };
    let (bottom, _) = stack_bounds();
    let end = sp.saturating_sub(128) & !3;
    let mut p = bottom;
    while p < end {
        // SAFETY: [bottom, end) is RAM between the statics and the live stack: nothing lives
        // there yet.
        unsafe { (p as *mut u32).write_volatile(PAINT) };
        p += 4;
    }
}

/// Bytes of stack used so far: from the top of RAM down to the deepest overwritten word.
#[inline(never)]
fn stack_high_water() -> (usize, usize) {
    let (bottom, top) = stack_bounds();
    let mut p = bottom;
    // SAFETY: reads RAM words between the statics and the stack top, all initialised above.
    while p < top && unsafe { (p as *const u32).read_volatile() } == PAINT {
        p += 4;
    }
    (top - p, top - bottom)
}

#[entry]
fn main() -> ! {
    // One full measurement first, on a freshly painted stack.
    paint_stack();
    let single = pipeline::single_measurement();
    let (one, available) = stack_high_water();
    let ok = whole_pipeline(single, one, available);
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    #[allow(clippy::empty_loop)]
    loop {}
}

/// The whole pipeline, its report and checks; its own frame holds the results.
#[inline(never)]
fn whole_pipeline(single: Result<f32, pipeline::Failure>, one: usize, available: usize) -> bool {
    paint_stack();
    let outcome = pipeline::measure();
    let (all, _) = stack_high_water();

    let mut out = Host(hio::hstdout().ok());
    let board = env!("LUMISORB_BOARD");
    let _ = writeln!(out, "board {board}");
    match single {
        Ok(a) => {
            let _ = writeln!(out, "single A={}", pipeline::Fixed(f64::from(a), 5));
        }
        Err(e) => {
            let _ = writeln!(out, "single failed at: {}", e.describe());
        }
    }
    let _ = pipeline::report(&outcome, &mut out);
    let _ = writeln!(
        out,
        "stack one_measurement_bytes={one} whole_pipeline_bytes={all} available_bytes={available}"
    );
    let ok = pipeline::check(&outcome, &mut out) && single.is_ok();
    let _ = writeln!(out, "result {}", if ok { "PASS" } else { "FAIL" });
    ok
}

#[panic_handler]
fn panic(info: &PanicInfo) -> ! {
    let mut out = Host(hio::hstderr().ok());
    let _ = writeln!(out, "panic: {info}");
    debug::exit(debug::EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}
