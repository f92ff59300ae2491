//! lumisorb on an emulated Cortex-M board: the whole pipeline on the simulated photometer,
//! results over semihosting, exit status to the host (0 only when every check passed).
//!
//! Also measures the stack high-water marks of one full measurement and of the whole pipeline:
//! the free stack is painted with a pattern before each, and after it the deepest overwritten
//! word is found; the figure is the depth below the caller's stack pointer (the firmware's own
//! frames and the runtime's are reported apart, in the total).
#![no_std]
#![no_main]

mod pipeline;
mod vectors;

// With the `defmt` feature the sequencer's events go out as defmt frames over semihosting.
#[cfg(feature = "defmt")]
use defmt_semihosting as _;

use core::cell::RefCell;
use core::fmt::{self, Write};
use core::panic::PanicInfo;

use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hio};
use lumisorb::sim::SimRig;

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

/// The stack pointer.
#[inline(always)]
fn sp() -> usize {
    let sp: usize;
    // SAFETY: reads the stack pointer register, no memory access.
    unsafe { core::arch::asm!("mov {}, sp", out(reg) sp) };
    sp
}

/// Paints the unused stack (below the current stack pointer, minus a margin for this
/// function's own frame) with [`PAINT`].
#[inline(never)]
fn paint_stack() {
    let (bottom, _) = stack_bounds();
    let end = sp().saturating_sub(128) & !3;
    let mut p = bottom;
    while p < end {
        // SAFETY: [bottom, end) is RAM between the statics and the live stack: nothing lives
        // there yet.
        unsafe { (p as *mut u32).write_volatile(PAINT) };
        p += 4;
    }
}

/// The deepest stack address overwritten since the last paint.
#[inline(never)]
fn deepest_touched() -> usize {
    let (bottom, top) = stack_bounds();
    let mut p = bottom;
    // SAFETY: reads RAM words between the statics and the stack top, all initialised above.
    while p < top && unsafe { (p as *const u32).read_volatile() } == PAINT {
        p += 4;
    }
    p
}

#[entry]
fn main() -> ! {
    // The simulated photometer stands in for the hardware: its state lives in a static, like
    // a driver's peripheral, and the stack figures count what runs below the caller.
    let ok = match pipeline::new_rig() {
        Ok(r) => match cortex_m::singleton!(: RefCell<SimRig> = RefCell::new(r)) {
            Some(rig) => {
                // One full measurement first, on a freshly painted stack.
                paint_stack();
                let base = sp();
                let single = pipeline::single_measurement(rig);
                let one = base.saturating_sub(deepest_touched());
                whole_pipeline(rig, single, one)
            }
            None => false,
        },
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

/// The whole pipeline, its report and checks; its own frame holds the results.
#[inline(never)]
fn whole_pipeline(
    rig: &RefCell<SimRig>,
    single: Result<f32, pipeline::Failure>,
    one: usize,
) -> bool {
    paint_stack();
    let base = sp();
    let outcome = pipeline::measure(rig);
    let deepest = deepest_touched();
    let all = base.saturating_sub(deepest);
    let (bottom, top) = stack_bounds();
    let total = top - deepest;

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
        "stack one_measurement_bytes={one} whole_pipeline_bytes={all} firmware_total_bytes={total} available_bytes={}",
        top - bottom
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
