//! Puts the board's memory.x on the linker path: the Cortex-M4F target builds for the
//! mps2-an386 board, the Cortex-M0 target for the microbit.
use std::{env, fs, path::PathBuf};

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    let board = if target.starts_with("thumbv6m") {
        "microbit"
    } else {
        "mps2-an386"
    };
    let out = PathBuf::from(env::var("OUT_DIR").expect("cargo sets OUT_DIR"));
    let memory = fs::read(format!("memory-{board}.x")).expect("memory-<board>.x beside build.rs");
    fs::write(out.join("memory.x"), memory).expect("OUT_DIR is writable");
    // cortex-m-rt's `device` feature includes a device.x with the interrupt handlers' weak
    // aliases; every vector of src/vectors.rs is the default handler, so it is empty.
    fs::write(out.join("device.x"), "/* no device interrupt handlers */\n")
        .expect("OUT_DIR is writable");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-env=LUMISORB_BOARD={board}");
    println!("cargo:rerun-if-changed=memory-{board}.x");
    if env::var_os("CARGO_FEATURE_DEFMT").is_some() {
        println!("cargo:rustc-link-arg=-Tdefmt.x");
    }
    println!("cargo:rerun-if-changed=build.rs");
}
