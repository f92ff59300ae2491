//! The board's interrupt vectors, as a board support crate would supply them (cortex-m-rt's
//! `device` feature). Without it cortex-m-rt reserves 240 vectors on ARMv7-M: 960 bytes of
//! flash for interrupts neither board has. Both emulated boards have 32 external interrupts
//! (the CMSDK peripherals of the mps2-an386 image, the nRF51 of the microbit; from memory of
//! their reference manuals), and the firmware enables none of them: every vector goes to
//! cortex-m-rt's default handler.

extern "C" {
    /// cortex-m-rt's default exception handler (its `link.x` provides the symbol).
    fn DefaultHandler();
}

/// The external interrupt vectors, placed after the core exceptions by cortex-m-rt's `link.x`.
#[link_section = ".vector_table.interrupts"]
#[no_mangle]
#[used]
static __INTERRUPTS: [unsafe extern "C" fn(); 32] = [DefaultHandler; 32];
