//! The firmware's pipeline on the host: the same source file (`firmware/src/pipeline.rs`) and
//! the same simulated counts, printing the same lines, so CI can compare the emulated boards'
//! output with the host library's digit for digit.
//!
//! `cargo run --features sim --example firmware_pipeline`

#[path = "firmware/src/pipeline.rs"]
#[allow(dead_code)]
mod pipeline;

fn main() {
    let mut out = String::new();
    let rig = match pipeline::new_rig() {
        Ok(r) => std::cell::RefCell::new(r),
        Err(e) => {
            println!("pipeline failed at: {}", e.describe());
            std::process::exit(1);
        }
    };
    match pipeline::single_measurement(&rig) {
        Ok(a) => out.push_str(&format!("single A={}\n", pipeline::Fixed(f64::from(a), 5))),
        Err(e) => out.push_str(&format!("single failed at: {}\n", e.describe())),
    }
    let outcome = pipeline::measure(&rig);
    let _ = pipeline::report(&outcome, &mut out);
    let ok = pipeline::check(&outcome, &mut out);
    out.push_str(if ok { "result PASS\n" } else { "result FAIL\n" });
    print!("{out}");
    std::process::exit(if ok { 0 } else { 1 });
}
