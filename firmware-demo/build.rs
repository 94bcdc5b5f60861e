//! Chooses the board's memory map from the target and puts it in OUT_DIR as
//! `memory.x`, where cortex-m-rt's `link.x` looks for it. There is no
//! `memory.x` in the package root on purpose: the linker would find that one
//! first and silently use it for every board.

use std::{env, fs, path::PathBuf};

fn main() {
    println!("cargo::rerun-if-changed=build.rs");
    println!("cargo::rerun-if-changed=memory");
    println!("cargo::rustc-check-cfg=cfg(board, values(\"mps2_an386\", \"microbit\"))");

    let target = env::var("TARGET").unwrap_or_default();
    let board = if target.starts_with("thumbv7em-") {
        "mps2_an386"
    } else if target.starts_with("thumbv6m-") {
        "microbit"
    } else {
        // A host `cargo check` of this package: nothing to link, no board.
        return;
    };
    let map = match board {
        "microbit" => "memory/microbit.x",
        _ => "memory/mps2-an386.x",
    };
    let out = PathBuf::from(env::var_os("OUT_DIR").unwrap_or_default());
    if let Err(e) = fs::copy(map, out.join("memory.x")) {
        println!("cargo::error=cannot copy {map} to OUT_DIR: {e}");
        return;
    }
    println!("cargo::rustc-link-search={}", out.display());
    println!("cargo::rustc-cfg=board=\"{board}\"");
}
