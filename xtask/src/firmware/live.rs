//! The live demo on both boards, its defmt log decoded with `defmt-print`
//! and compared with `firmware-demo/expected/live.txt`.

use std::env;
use std::fs;
use std::path::PathBuf;
use std::process::{Command, Stdio};

use super::{Ctx, BOARDS};
use crate::proc::{run_capture, run_inherit, show};

/// The board's name in the first line of the log is replaced by this in
/// the expected file, so one file serves both boards.
const BOARD_PLACEHOLDER: &str = "{board}";

/// Lines with this mark (stack use, which depends on the board's RAM) are
/// shown but left out of the comparisons.
const BOARD_SPECIFIC: &str = "(differs by board)";

/// Run the live demo on every board and check its decoded output.
pub fn run(ctx: &Ctx) -> Result<(), String> {
    let decoder = defmt_print()?;
    let expected_path = ctx.fw.join("expected").join("live.txt");
    let mut outputs = Vec::new();
    for b in &BOARDS {
        let elf = ctx.elf(b, "live");
        let raw = ctx.run_qemu(
            ctx.qemu(b, &elf, false, None),
            &format!("live on {}", b.machine),
        )?;
        let raw_path = ctx.work.join(format!("live-{}.defmt", b.machine));
        fs::write(&raw_path, &raw).map_err(|e| format!("{}: {e}", raw_path.display()))?;
        let stdin =
            fs::File::open(&raw_path).map_err(|e| format!("{}: {e}", raw_path.display()))?;
        let mut cmd = Command::new(&decoder);
        cmd.arg("-e").arg(&elf).stdin(Stdio::from(stdin));
        let shown = show(&cmd);
        let out = run_capture(&mut cmd, ctx.timeout)?;
        if !out.success {
            return Err(format!("`{shown}` failed: {}", out.stderr.trim()));
        }
        let full = String::from_utf8_lossy(&out.stdout).replace(b.machine, BOARD_PLACEHOLDER);
        let decoded = ctx.work.join(format!("live-{}.txt", b.machine));
        fs::write(&decoded, &full).map_err(|e| format!("{}: {e}", decoded.display()))?;
        let mut text = String::new();
        for line in full.lines() {
            if line.contains(BOARD_SPECIFIC) {
                println!("{}: {}", b.machine, line.trim());
            } else {
                text.push_str(line);
                text.push('\n');
            }
        }
        let lines = text.lines().count();
        let summary = text
            .lines()
            .find(|l| l.contains("summary:"))
            .unwrap_or("(no summary line)");
        println!("{}: {lines} lines decoded, {}", b.machine, summary.trim());
        if !text.contains("summary:") {
            return Err(format!(
                "live on {}: no summary line; decoded log in {}",
                b.machine,
                decoded.display()
            ));
        }
        outputs.push((b.machine, text, decoded));
    }

    // The two cores must agree exactly.
    if let [(m0, a, pa), (m1, b, pb)] = outputs.as_slice() {
        if let Some(d) = first_difference(a, b) {
            return Err(format!(
                "{m0} and {m1} disagree at line {}:\n  {m0}: {}\n  {m1}: {}\n  (decoded logs: {}, {})",
                d.0, d.1, d.2, pa.display(), pb.display()
            ));
        }
    }
    let Some((_, ours, _)) = outputs.first() else {
        return Err("no board ran".into());
    };
    if ctx.bless {
        fs::write(&expected_path, ours).map_err(|e| format!("{}: {e}", expected_path.display()))?;
        println!("wrote {}", expected_path.display());
        return Ok(());
    }
    let expected = fs::read_to_string(&expected_path).map_err(|e| {
        format!(
            "{}: {e} (create it with `cargo xtask firmware --bless`)",
            expected_path.display()
        )
    })?;
    match first_difference(&expected, ours) {
        None => {
            println!("both boards match {}", expected_path.display());
            Ok(())
        }
        Some((line, want, got)) => Err(format!(
            "live output differs from {} at line {line}:\n  expected: {want}\n  got:      {got}\n\
             If the change is deliberate, run `cargo xtask firmware --bless` and commit the file.",
            expected_path.display()
        )),
    }
}

/// First differing line (1-based) of two texts, with both lines.
fn first_difference(a: &str, b: &str) -> Option<(usize, String, String)> {
    let mut la = a.lines();
    let mut lb = b.lines();
    let mut n = 0;
    loop {
        n += 1;
        match (la.next(), lb.next()) {
            (None, None) => return None,
            (x, y) if x == y => continue,
            (x, y) => {
                return Some((
                    n,
                    x.unwrap_or("(end of output)").to_string(),
                    y.unwrap_or("(end of output)").to_string(),
                ))
            }
        }
    }
}

/// Path of `defmt-print`, installing it with cargo if it is missing.
fn defmt_print() -> Result<PathBuf, String> {
    let cargo_bin = env::var_os("CARGO_HOME")
        .map(PathBuf::from)
        .or_else(|| env::var_os("HOME").map(|h| PathBuf::from(h).join(".cargo")))
        .map(|h| h.join("bin").join("defmt-print"));
    let found = |p: &PathBuf| {
        Command::new(p)
            .arg("--version")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .is_ok_and(|s| s.success())
    };
    let on_path = PathBuf::from("defmt-print");
    if found(&on_path) {
        return Ok(on_path);
    }
    if let Some(p) = cargo_bin.as_ref().filter(|p| found(p)) {
        return Ok(p.clone());
    }
    println!(
        "defmt-print not found: installing it (cargo install defmt-print --locked, about 100 s)"
    );
    let cargo = env::var_os("CARGO").unwrap_or_else(|| "cargo".into());
    run_inherit(Command::new(cargo).args([
        "install",
        "defmt-print",
        "--locked",
        "--version",
        "^1",
    ]))?;
    match cargo_bin.filter(|p| found(p)) {
        Some(p) => Ok(p),
        None if found(&on_path) => Ok(on_path),
        None => {
            Err("defmt-print was installed but cannot be found; add ~/.cargo/bin to PATH".into())
        }
    }
}

#[cfg(test)]
mod tests {
    use super::first_difference;

    #[test]
    fn finds_the_first_differing_line() {
        assert_eq!(first_difference("a\nb\n", "a\nb\n"), None);
        assert_eq!(
            first_difference("a\nb\n", "a\nc\n"),
            Some((2, "b".into(), "c".into()))
        );
        assert_eq!(
            first_difference("a\n", "a\nb\n"),
            Some((2, "(end of output)".into(), "b".into()))
        );
    }
}
