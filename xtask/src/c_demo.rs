//! `cargo xtask c-demo`: the C library on Cortex-M under QEMU, end to end.
//!
//! 1. builds `libheadroom_c.a` (crate `bindings/c`) for both boards' targets
//!    (rustup's prebuilt targets when installed, else Debian's packaged
//!    toolchain with `-Zbuild-std`), once as it ships and once with the
//!    feature `panic-free-check`;
//! 2. compiles and links the C demo firmware (`bindings/c/demo/`) with
//!    Debian's `arm-none-eabi-gcc` against each;
//! 3. links a probe that keeps every function `headroom.h` declares against
//!    the checking library: it links only if no panic path is left;
//! 4. replays every field log on both boards under QEMU and compares each
//!    decision, bit for bit, with `headroom replay` (the same logs and the
//!    same comparison as `cargo xtask firmware`);
//! 5. prints the sizes.
//!
//! Exits non-zero on any build failure, run failure or mismatch.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use crate::elf;
use crate::firmware::replay::{run_images, Image};
use crate::firmware::{check_qemu, qemu_timeout, Board, Ctx, Toolchain, BOARDS};
use crate::proc::{run_capture, run_inherit, show};

const HELP: &str = "\
cargo xtask c-demo [--panic-check=warn]

Builds the C library (bindings/c) for mps2-an386 (Cortex-M4F) and microbit
(Cortex-M0), links the C demo firmware (bindings/c/demo) with
arm-none-eabi-gcc, proves at link time that no panic path is left in any
function of headroom.h, replays every field log on both boards under QEMU
and compares each decision with `headroom replay`, and prints the sizes.

Needs qemu-system-arm, gcc-arm-none-eabi and libnewlib-arm-none-eabi, plus
either rustup's targets or Debian's packaged Rust (see DEVELOPERS.md).

  --panic-check=warn   report a surviving panic path without failing
                       (default: --panic-check=fail)

Environment:
  QEMU_TIMEOUT   seconds allowed for each QEMU run (default 120)
";

/// The C compiler for the boards.
const GCC: &str = "arm-none-eabi-gcc";

/// Symbol the checking library's panic handler calls (defined nowhere).
const PANIC_SYMBOL: &str = "headroom_error_a_panic_path_survived_optimisation";

/// The C sources of the demo, in `bindings/c/demo/`.
const SOURCES: [&str; 4] = ["main.c", "replay_log.c", "semihost.c", "startup.c"];

/// Compiler flags of a board's core and floating-point ABI (that of the
/// Rust target the library is built for).
fn cpu_flags(board: &Board) -> &'static [&'static str] {
    match board.target {
        "thumbv7em-none-eabihf" => &[
            "-mcpu=cortex-m4",
            "-mthumb",
            "-mfloat-abi=hard",
            "-mfpu=fpv4-sp-d16",
        ],
        _ => &["-mcpu=cortex-m0", "-mthumb", "-mfloat-abi=soft"],
    }
}

/// What was measured on one board.
struct Sizes {
    board: Board,
    lib_bytes: u64,
    image: elf::Footprint,
    panic_free: bool,
}

/// Run the whole C demo step.
pub fn run(args: &[String]) -> Result<(), String> {
    let mut fail_on_panic = true;
    for a in args {
        match a.as_str() {
            "--panic-check=fail" => fail_on_panic = true,
            "--panic-check=warn" => fail_on_panic = false,
            "--help" | "-h" => {
                print!("{HELP}");
                return Ok(());
            }
            other => return Err(format!("c-demo: unknown option `{other}` (see --help)")),
        }
    }
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .ok_or("cannot find the repository root")?;
    let target_dir = root.join("target").join("c-demo");
    let work = target_dir.join("work");
    fs::create_dir_all(&work).map_err(|e| format!("cannot create {}: {e}", work.display()))?;
    let ctx = Ctx {
        fw: root.join("bindings").join("c"),
        root,
        target_dir,
        work,
        timeout: qemu_timeout()?,
        bless: false,
    };
    check_qemu()?;
    check_gcc()?;
    let functions = header_functions(&ctx.fw.join("include").join("headroom.h"))?;

    let mut failures = Vec::new();
    let mut images = Vec::new();
    let mut sizes = Vec::new();
    for b in &BOARDS {
        step(&format!("build for {} ({})", b.machine, b.target));
        let tc = Toolchain::detect(b.target)?;
        println!("{}: {}", b.target, tc.describe());
        let dir = ctx.work.join(b.machine);
        fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        // The checking library first, so the one left in the target
        // directory is the library as it ships.
        let checking = build_lib(&ctx, tc, b, &["--features", "panic-free-check"], &dir)?;
        let lib = build_lib(&ctx, tc, b, &[], &dir)?;
        let elf = dir.join("c-replay.elf");
        link(&ctx, b, &lib, &elf, &[])?;
        println!("linked {}", elf.display());

        let keep: Vec<String> = functions
            .iter()
            .map(|f| format!("-Wl,--undefined={f}"))
            .collect();
        let probe = dir.join("panic-probe.elf");
        let panic_free = match link(&ctx, b, &checking, &probe, &keep) {
            Ok(()) => {
                println!(
                    "panic-free: every one of the {} functions of headroom.h links without a panic path",
                    functions.len()
                );
                true
            }
            Err(e) if e.contains(PANIC_SYMBOL) => {
                let msg = format!(
                    "{}: a panic path survives optimisation in the C library (link of the probe failed)",
                    b.machine
                );
                println!("{msg}");
                if fail_on_panic {
                    failures.push(msg);
                } else {
                    eprintln!("WARNING (--panic-check=warn): {msg}");
                }
                false
            }
            Err(e) => return Err(e),
        };
        let image = fs::read(&elf).map_err(|e| format!("{}: {e}", elf.display()))?;
        let lib_bytes = fs::metadata(&lib).map(|m| m.len()).unwrap_or(0);
        sizes.push(Sizes {
            board: *b,
            lib_bytes,
            image: elf::footprint(&image).map_err(|e| format!("{}: {e}", elf.display()))?,
            panic_free,
        });
        images.push(Image {
            board: *b,
            elf,
            what: "C demo",
            tag: "c",
        });
    }

    step("replay on target (C demo) against the host");
    if let Err(e) = run_images(&ctx, &images) {
        failures.push(format!("replay equivalence: {e}"));
    }

    step("sizes");
    println!("| board | target | libheadroom_c.a bytes | C demo flash bytes | C demo static RAM bytes | panic-free link |");
    println!("|---|---|---:|---:|---:|---|");
    for s in &sizes {
        println!(
            "| {} | {} | {} | {} | {} | {} |",
            s.board.machine,
            s.board.target,
            s.lib_bytes,
            s.image.flash,
            s.image.static_ram,
            if s.panic_free { "yes" } else { "NO" }
        );
    }

    if failures.is_empty() {
        println!("\nc-demo: all checks passed");
        Ok(())
    } else {
        eprintln!();
        for f in &failures {
            eprintln!("FAILED: {f}");
        }
        Err(format!("{} C demo check(s) failed", failures.len()))
    }
}

fn step(name: &str) {
    println!("\n--- c-demo: {name} ---");
}

fn check_gcc() -> Result<(), String> {
    run_inherit(
        Command::new(GCC)
            .arg("--version")
            .stdout(std::process::Stdio::null()),
    )
    .map_err(|e| {
        format!(
            "{e}\n{GCC} is needed: `apt-get install gcc-arm-none-eabi libnewlib-arm-none-eabi` \
             (see DEVELOPERS.md)"
        )
    })
}

/// Build the static library for `board` (with `extra` cargo arguments) and
/// copy it into `dir`; its copy.
fn build_lib(
    ctx: &Ctx,
    tc: Toolchain,
    board: &Board,
    extra: &[&str],
    dir: &Path,
) -> Result<PathBuf, String> {
    // The workspace's release profile (opt-level 3, fat LTO). At
    // opt-level "s" LLVM keeps a few slice-length checks of the log codec
    // out of line (`copy_from_slice`, `rotate_left`): unreachable, but no
    // longer provably so, and the panic-free link fails.
    tc.cargo_build(ctx, board.target, extra)?;
    let built = ctx
        .target_dir
        .join(board.target)
        .join("release")
        .join("libheadroom_c.a");
    let name = if extra.is_empty() {
        "libheadroom_c.a"
    } else {
        "libheadroom_c-checking.a"
    };
    let copy = dir.join(name);
    fs::copy(&built, &copy)
        .map_err(|e| format!("{} -> {}: {e}", built.display(), copy.display()))?;
    Ok(copy)
}

/// Compile the demo's sources and link them with `lib` into `out`.
fn link(ctx: &Ctx, board: &Board, lib: &Path, out: &Path, extra: &[String]) -> Result<(), String> {
    let demo = ctx.fw.join("demo");
    let script = format!("{}.ld", board.machine);
    let mut c = Command::new(GCC);
    c.args(cpu_flags(board))
        .args([
            "-std=c11",
            "-Os",
            "-g",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-ffunction-sections",
            "-fdata-sections",
        ])
        .arg("-I")
        .arg(ctx.fw.join("include"))
        .arg("-I")
        .arg(&demo);
    for s in SOURCES {
        c.arg(demo.join(s));
    }
    c.arg(lib)
        .args(["-nostartfiles", "-Wl,--gc-sections", "-Wl,-z,noexecstack"])
        .arg("-L")
        .arg(&demo)
        .arg("-T")
        .arg(&script)
        .args(extra)
        .arg("-o")
        .arg(out);
    let o = run_capture(&mut c, std::time::Duration::from_secs(300))?;
    if o.success {
        Ok(())
    } else {
        Err(format!("`{}` failed:\n{}", show(&c), o.stderr.trim()))
    }
}

/// The functions `headroom.h` declares: each `headroom_…(` that starts a
/// declaration (outside comments).
fn header_functions(header: &Path) -> Result<Vec<String>, String> {
    let text = fs::read_to_string(header).map_err(|e| format!("{}: {e}", header.display()))?;
    let mut names = Vec::new();
    for line in text.lines() {
        let l = line.trim_start();
        if l.starts_with('*') || l.starts_with("/*") || l.starts_with('#') {
            continue;
        }
        if let Some(open) = l.find('(') {
            let before = &l[..open];
            let name = before.rsplit([' ', '*']).next().unwrap_or("");
            if name.starts_with("headroom_")
                && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
                && before.len() > name.len()
            {
                names.push(name.to_string());
            }
        }
    }
    names.sort();
    names.dedup();
    if names.is_empty() {
        return Err(format!("{}: no function declared", header.display()));
    }
    Ok(names)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_every_function_of_the_header() {
        let header =
            PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../bindings/c/include/headroom.h");
        let names = header_functions(&header).unwrap();
        for f in [
            "headroom_controller_init",
            "headroom_controller_update",
            "headroom_replay_step",
            "headroom_encode_decision",
            "headroom_decoder_feed",
            "headroom_battery_life",
            "headroom_status_message",
        ] {
            assert!(names.iter().any(|n| n == f), "{f} not in {names:?}");
        }
        // The header's example call inside a comment is not a declaration.
        assert!(names.iter().all(|n| !n.contains('&')));
    }
}
