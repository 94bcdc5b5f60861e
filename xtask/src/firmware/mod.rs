//! `cargo xtask firmware`: the Cortex-M demo on QEMU, end to end.
//!
//! 1. builds `firmware-demo/` for both boards (rustup's prebuilt targets
//!    when installed, else Debian's packaged toolchain with `-Zbuild-std`);
//! 2. runs the live demo on both and compares its decoded defmt log with
//!    `firmware-demo/expected/live.txt` (the two boards must agree bit for
//!    bit: the M0's soft floats and the M4F's FPU give the same numbers);
//! 3. replays field logs on both targets and compares every decision with
//!    the host's `headroom replay` and with the engine's replay run here;
//! 4. measures instructions per controller update under `-icount shift=0`;
//! 5. links the panic-freedom probes (controller, encoder, decoder);
//! 6. prints the footprint and cost table.
//!
//! Exits non-zero on any build failure, run failure or mismatch.

use std::env;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

use crate::elf;
use crate::proc::{self, run_capture, run_inherit};

mod cost;
mod live;
pub mod panic;
mod replay;
mod toolchain;

pub use toolchain::Toolchain;

/// A QEMU board and the target it needs.
#[derive(Debug, Clone, Copy)]
pub struct Board {
    /// Rust target triple.
    pub target: &'static str,
    /// QEMU machine name (also the board name the firmware prints).
    pub machine: &'static str,
    /// `-cpu` for QEMU, if the machine's default is not the one wanted.
    pub cpu: Option<&'static str>,
    /// Core, for the table.
    pub core: &'static str,
    /// Goal for the mean instructions per controller update (32-reading window).
    pub update_goal: u64,
}

/// The two boards of the demo.
pub const BOARDS: [Board; 2] = [
    Board {
        target: "thumbv7em-none-eabihf",
        machine: "mps2-an386",
        cpu: Some("cortex-m4"),
        core: "Cortex-M4F",
        update_goal: 300,
    },
    Board {
        target: "thumbv6m-none-eabi",
        machine: "microbit",
        cpu: None,
        core: "Cortex-M0",
        update_goal: 2500,
    },
];

/// The panic-freedom probes and what each covers.
pub const PANIC_PROBES: [(&str, &str); 3] = [
    (
        "panic_free_control",
        "Controller::update and held with rates, Replay::step with rates, Summary, energy (profile, charge table, airtime, duty window, tally)",
    ),
    (
        "panic_free_encoder",
        "encode_header/encode_record/encode_decision",
    ),
    (
        "panic_free_decoder",
        "FrameDecoder::feed/finish on damaged input",
    ),
];

/// Paths and settings shared by the steps.
pub struct Ctx {
    /// Repository root.
    pub root: PathBuf,
    /// `firmware-demo/`.
    pub fw: PathBuf,
    /// Cargo target directory of the firmware builds.
    pub target_dir: PathBuf,
    /// Scratch directory for logs, decisions and decoded output.
    pub work: PathBuf,
    /// Limit on each QEMU run.
    pub timeout: Duration,
    /// Rewrite the expected live output instead of comparing with it.
    pub bless: bool,
}

/// What a failed panic-free link check does to the exit status.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum PanicPolicy {
    /// A surviving panic path fails the run.
    Fail,
    /// It is reported, and the run does not fail for it.
    Warn,
}

impl Ctx {
    /// The ELF of `bin` for `board`.
    pub fn elf(&self, board: &Board, bin: &str) -> PathBuf {
        self.target_dir.join(board.target).join("release").join(bin)
    }

    /// A QEMU command for `elf` on `board`; `icount` makes virtual time
    /// count instructions; `append` is the firmware's command line.
    pub fn qemu(&self, board: &Board, elf: &Path, icount: bool, append: Option<&str>) -> Command {
        let mut c = Command::new("qemu-system-arm");
        c.stdin(std::process::Stdio::null());
        c.args(["-M", board.machine]);
        if let Some(cpu) = board.cpu {
            c.args(["-cpu", cpu]);
        }
        c.args(["-nographic", "-monitor", "none", "-serial", "none"]);
        c.args(["-semihosting-config", "enable=on,target=native"]);
        if icount {
            c.args(["-icount", "shift=0"]);
        }
        if let Some(a) = append {
            c.args(["-append", a]);
        }
        c.arg("-kernel").arg(elf);
        c
    }

    /// Run a QEMU command to completion; its standard output, or an error
    /// with what it printed if it failed or timed out.
    pub fn run_qemu(&self, mut cmd: Command, what: &str) -> Result<Vec<u8>, String> {
        let out = run_capture(&mut cmd, self.timeout).map_err(|e| format!("{what}: {e}"))?;
        if !out.success {
            return Err(format!(
                "{what}: firmware failed under QEMU\n  command: {}\n  stdout: {}\n  stderr: {}",
                proc::show(&cmd),
                String::from_utf8_lossy(&out.stdout).trim(),
                out.stderr.trim()
            ));
        }
        Ok(out.stdout)
    }
}

const HELP: &str = "\
cargo xtask firmware [--bless]

Builds firmware-demo/ for mps2-an386 (Cortex-M4F) and microbit (Cortex-M0),
runs the live demo, the replay-on-target equivalence check and the cost
measurement under QEMU, links the panic-freedom probes, and prints the
footprint and instruction-count table.

  --bless   write firmware-demo/expected/live.txt from this run (after a
            deliberate change of the controller, the simulator or the demo)
  --panic-check=warn
            report panic paths that survive optimisation without failing
            (default: --panic-check=fail)

Environment:
  QEMU_TIMEOUT   seconds allowed for each QEMU run (default 120)
";

/// Run the whole firmware step.
pub fn run(args: &[String]) -> Result<(), String> {
    let mut bless = false;
    let mut policy = PanicPolicy::Fail;
    for a in args {
        match a.as_str() {
            "--bless" => bless = true,
            "--panic-check=fail" => policy = PanicPolicy::Fail,
            "--panic-check=warn" => policy = PanicPolicy::Warn,
            "--help" | "-h" => {
                print!("{HELP}");
                return Ok(());
            }
            other => return Err(format!("firmware: unknown option `{other}` (see --help)")),
        }
    }
    let timeout =
        match env::var("QEMU_TIMEOUT") {
            Ok(s) => {
                Duration::from_secs(s.trim().parse::<u64>().ok().filter(|&n| n > 0).ok_or_else(
                    || format!("QEMU_TIMEOUT={s}: want a whole number of seconds > 0"),
                )?)
            }
            Err(_) => Duration::from_secs(120),
        };
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .ok_or("cannot find the repository root")?;
    let target_dir = root.join("target").join("firmware");
    let work = target_dir.join("work");
    fs::create_dir_all(&work).map_err(|e| format!("cannot create {}: {e}", work.display()))?;
    let ctx = Ctx {
        fw: root.join("firmware-demo"),
        root,
        target_dir,
        work,
        timeout,
        bless,
    };

    check_qemu()?;
    let mut failures: Vec<String> = Vec::new();
    let mut warnings: Vec<String> = Vec::new();

    step("build");
    let mut toolchains = Vec::new();
    for b in &BOARDS {
        let tc = Toolchain::detect(b.target)?;
        println!("{}: {}", b.target, tc.describe());
        tc.cargo_build(&ctx, b.target, &["--bins"])?;
        toolchains.push(tc);
    }

    step("live demo (defmt, decoded with defmt-print)");
    match live::run(&ctx) {
        Ok(()) => {}
        Err(e) => failures.push(format!("live demo: {e}")),
    }

    step("replay on target against the host");
    match replay::run(&ctx) {
        Ok(()) => {}
        Err(e) => failures.push(format!("replay equivalence: {e}")),
    }

    step("instructions per update (-icount shift=0)");
    let mut costs = Vec::new();
    for b in &BOARDS {
        match cost::measure(&ctx, b) {
            Ok(c) => costs.push((*b, c)),
            Err(e) => failures.push(format!("cost on {}: {e}", b.machine)),
        }
    }

    step("panic-freedom probes run");
    for b in &BOARDS {
        for (bin, _) in PANIC_PROBES {
            let elf = ctx.elf(b, bin);
            if let Err(e) = ctx.run_qemu(
                ctx.qemu(b, &elf, false, None),
                &format!("{bin} on {}", b.machine),
            ) {
                failures.push(e);
            }
        }
    }

    // Footprints before the panic-check builds overwrite the probe ELFs.
    let mut footprints = Vec::new();
    for b in &BOARDS {
        for bin in ["live", "replay"] {
            let path = ctx.elf(b, bin);
            let image =
                fs::read(&path).map_err(|e| format!("cannot read {}: {e}", path.display()))?;
            let fp = elf::footprint(&image).map_err(|e| format!("{}: {e}", path.display()))?;
            footprints.push((b.machine, bin, fp));
        }
    }

    step("panic-free link check (feature panic-free-check)");
    let mut panic_rows = Vec::new();
    for (b, tc) in BOARDS.iter().zip(&toolchains) {
        for (bin, covers) in PANIC_PROBES {
            println!("{bin} on {}:", b.machine);
            let linked = match panic::check(&ctx, *tc, b, bin) {
                Ok(true) => {
                    println!("  links: no panic path left");
                    true
                }
                Ok(false) => {
                    let msg = format!(
                        "{bin} on {}: a panic path survives optimisation in {covers} (sites listed above)",
                        b.machine
                    );
                    match policy {
                        PanicPolicy::Fail => failures.push(msg),
                        PanicPolicy::Warn => warnings.push(msg),
                    }
                    false
                }
                Err(e) => {
                    failures.push(e);
                    false
                }
            };
            panic_rows.push((b.machine, bin, covers, linked));
        }
    }

    step("footprint and cost");
    print_table(&footprints, &costs, &panic_rows);

    for w in &warnings {
        eprintln!("WARNING (--panic-check=warn): {w}");
    }
    if failures.is_empty() {
        println!("\nfirmware: all checks passed");
        Ok(())
    } else {
        eprintln!();
        for f in &failures {
            eprintln!("FAILED: {f}");
        }
        Err(format!("{} firmware check(s) failed", failures.len()))
    }
}

fn step(name: &str) {
    println!("\n--- firmware: {name} ---");
}

fn check_qemu() -> Result<(), String> {
    run_inherit(
        Command::new("qemu-system-arm")
            .arg("--version")
            .stdout(std::process::Stdio::null()),
    )
    .map_err(|e| {
        format!(
            "{e}\nqemu-system-arm is needed: `apt-get install qemu-system-arm` (see DEVELOPERS.md)"
        )
    })
}

fn print_table(
    footprints: &[(&str, &str, elf::Footprint)],
    costs: &[(Board, cost::Cost)],
    panic_rows: &[(&str, &str, &str, bool)],
) {
    println!(
        "\nFootprint (from the ELF section headers; RAM is static data, the stack takes the rest)"
    );
    println!("| board | binary | flash bytes | static RAM bytes |");
    println!("|---|---|---:|---:|");
    for (board, bin, fp) in footprints {
        println!("| {board} | {bin} | {} | {} |", fp.flash, fp.static_ram);
    }

    println!(
        "\nController cost, window of {} readings, under qemu -icount shift=0",
        cost::WINDOW
    );
    println!("(QEMU counts instructions, not cycles; SysTick resolution is one tick per span)");
    // The pass lengths as the firmware reports them.
    let (timed, settle) = costs
        .first()
        .map_or((0, 0), |(_, c)| (c.updates_timed, c.settle_packets));
    println!(
        "(mean: steady state, {timed} updates after {settle} packets of the closed loop, window and \
         spread memory full; max: the slowest single update of either pass)"
    );
    println!(
        "| board | core | state bytes | mean instr/update | max instr/update (≤) | \
         mean, first {timed} from fresh | goal | with rates: mean instr/update | with rates: max (≤) | \
         replay step | encode decision frame | peak stack bytes |"
    );
    println!("|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
    for (b, c) in costs {
        let verdict = if c.update_mean_milli <= b.update_goal * 1000 {
            "met"
        } else {
            "NOT met"
        };
        println!(
            "| {} | {} | {} | {:.1} | {} | {:.1} | ≤ {} ({verdict}) | {:.1} | {} | {:.1} | {:.1} | {} |",
            b.machine,
            b.core,
            c.controller_state_bytes,
            c.update_mean_milli as f64 / 1000.0,
            c.update_max_upper,
            c.update_fresh_mean_milli as f64 / 1000.0,
            b.update_goal,
            c.rates_update_mean_milli as f64 / 1000.0,
            c.rates_update_max_upper,
            c.replay_step_mean_milli as f64 / 1000.0,
            c.encode_mean_milli as f64 / 1000.0,
            c.stack_peak_bytes
        );
    }
    if let Some((_, c)) = costs.iter().find(|(b, _)| b.machine == "microbit") {
        // 16 MHz, one packet per ms: 16 000 cycles. Cycles per instruction
        // on a Cortex-M0 lie between 1 and 3 (loads/stores 2, taken
        // branches 3; Cortex-M0 TRM, instruction timings); 1.5 is a common
        // estimate for compiled code (common practice).
        let budget = 16_000f64;
        let worst = c.update_max_upper as f64;
        println!(
            "\n1 kHz loop on a 16 MHz Cortex-M0: budget 16000 cycles per packet; the slowest update is \
             ≤ {} instructions = {:.0}–{:.0} cycles at 1–2 cycles/instruction ({:.0}–{:.0} % of the budget)",
            c.update_max_upper,
            worst,
            worst * 2.0,
            100.0 * worst / budget,
            200.0 * worst / budget
        );
    }

    println!("\nPanic-free link check");
    println!("| board | probe | covers | links with an undefined panic handler |");
    println!("|---|---|---|---|");
    for (board, bin, covers, ok) in panic_rows {
        println!(
            "| {board} | {bin} | {covers} | {} |",
            if *ok { "yes: panic-free" } else { "NO" }
        );
    }
}
