//! `cargo xtask <step>`: project tasks that need more than cargo.
//!
//! Steps:
//! - `firmware`: build the Cortex-M demo for the Cortex-M4F and Cortex-M0
//!   QEMU boards, run the live demo and the replay-on-target equivalence
//!   check, prove the controller and codec panic-free at link time, and
//!   print the footprint and instruction-count table. Exits non-zero on any
//!   failure or mismatch. See `cargo xtask firmware --help`.
//! - `c-demo`: build the C library (`bindings/c`) for both boards, link
//!   the C demo firmware with `arm-none-eabi-gcc`, prove it panic-free at
//!   link time, and replay every field log on both boards under QEMU,
//!   each decision compared with `headroom replay`. See
//!   `cargo xtask c-demo --help`.
//! - `panic-sites ELF...`: the calls into `core::panicking` left in
//!   firmware images, with the source location each one reports.

use std::process::ExitCode;

mod bench;
mod c_demo;
mod elf;
mod firmware;
mod proc;

fn main() -> ExitCode {
    let mut args = std::env::args().skip(1);
    let step = args.next().unwrap_or_default();
    let rest: Vec<String> = args.collect();
    let result = match step.as_str() {
        "firmware" => firmware::run(&rest),
        "bench" => bench::run(&rest),
        "c-demo" => c_demo::run(&rest),
        "panic-sites" => firmware::panic::print_sites(&rest),
        _ => {
            eprintln!("usage: cargo xtask <firmware|c-demo|bench|panic-sites> [--help]");
            return ExitCode::from(2);
        }
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("xtask: {e}");
            ExitCode::FAILURE
        }
    }
}
