//! The panic-free link check and, when it fails, where the panics are.
//!
//! Each probe binary is linked once more with the feature
//! `panic-free-check`, whose panic handler calls an undefined symbol: the
//! link succeeds only if no call to the panic handler survived. When it
//! fails, the probe built without the feature still holds those calls; its
//! disassembly (llvm-objdump, if installed) and the panic locations
//! those calls pass say which source lines they come from.

use std::path::{Path, PathBuf};
use std::process::Command;

use super::{Board, Ctx, Toolchain};
use crate::elf::{location_at, read_at};

/// Link the probe `bin` with the check; `Ok(true)` when it links.
pub fn check(ctx: &Ctx, tc: Toolchain, board: &Board, bin: &str) -> Result<bool, String> {
    // The probe as built without the feature, for the diagnosis.
    let plain = ctx.elf(board, bin);
    let keep = ctx.work.join(format!("{bin}-{}.elf", board.machine));
    let _ = std::fs::copy(&plain, &keep);
    let out = tc.cargo_build_captured(
        ctx,
        board.target,
        &["--bin", bin, "--features", "panic-free-check"],
    )?;
    if out.success {
        return Ok(true);
    }
    for line in out.stderr.lines() {
        let l = line.trim();
        if l.contains("undefined symbol")
            || l.starts_with(">>>")
            || l.starts_with("error: could not compile")
        {
            println!("  {l}");
        }
    }
    if !out
        .stderr
        .contains("headroom_error_a_panic_path_survived_optimisation")
    {
        return Err(format!(
            "{bin} on {}: the build failed for another reason:\n{}",
            board.target, out.stderr
        ));
    }
    match panic_sites(&keep) {
        Some(sites) if !sites.is_empty() => {
            println!(
                "  panic paths left in {bin} on {} (from the probe built without the check):",
                board.machine
            );
            for s in sites {
                println!("    {s}");
            }
        }
        _ => println!("  (install llvm-objdump to see where the panics come from)"),
    }
    Ok(false)
}

fn tool(names: &[&str]) -> Option<PathBuf> {
    names.iter().map(PathBuf::from).find(|p| {
        Command::new(p)
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
    })
}

/// Where the calls into `core::panicking` in `elf` come from: the panic
/// `Location` (file:line:column) each call site passes, read from the
/// image. (The debug line tables of an LTO build are too coarse for this.)
pub fn panic_sites(elf: &Path) -> Option<Vec<String>> {
    let objdump = tool(&[
        "llvm-objdump-22",
        "llvm-objdump",
        "llvm-objdump-19",
        "llvm-objdump-14",
    ])?;
    let image = std::fs::read(elf).ok()?;
    let dis = Command::new(objdump)
        .args(["-d", "--no-show-raw-insn", "-C"])
        .arg(elf)
        .output()
        .ok()?;
    let text = String::from_utf8_lossy(&dis.stdout);
    let mut current = String::new();
    // Constants the last few instructions put in registers: movw/movt
    // pairs (Armv7-M) and literal-pool loads (Armv6-M).
    let mut recent: Vec<u64> = Vec::new();
    let mut movw: Option<(String, u64)> = None;
    let mut sites = Vec::new();
    for line in text.lines() {
        if let Some(name) = line
            .strip_suffix(">:")
            .and_then(|l| l.split_once(" <"))
            .map(|(_, n)| n)
        {
            current = name.to_string();
            recent.clear();
            continue;
        }
        let Some((addr, insn)) = line.split_once(':') else {
            continue;
        };
        if addr.trim().is_empty() || !addr.trim().chars().all(|c| c.is_ascii_hexdigit()) {
            continue;
        }
        let insn = insn.trim();
        let mut parts = insn.split_whitespace();
        let op = parts.next().unwrap_or("");
        let reg = parts.next().unwrap_or("").trim_end_matches(',').to_string();
        let imm = |s: &str| -> Option<u64> {
            let v = s.split('#').nth(1)?.split_whitespace().next()?;
            match v.strip_prefix("0x") {
                Some(h) => u64::from_str_radix(h, 16).ok(),
                None => v.parse().ok(),
            }
        };
        match op {
            "movw" => movw = imm(insn).map(|v| (reg, v)),
            "movt" => {
                if let (Some((r, lo)), Some(hi)) = (movw.take(), imm(insn)) {
                    if r == reg {
                        recent.push((hi << 16) | lo);
                    }
                }
            }
            "ldr" if insn.contains("[pc") => {
                let lit = insn
                    .split("@ 0x")
                    .nth(1)
                    .and_then(|h| h.split_whitespace().next())
                    .and_then(|h| u64::from_str_radix(h, 16).ok());
                if let Some(word) = lit.and_then(|a| read_at(&image, a, 4)) {
                    if let Ok(b) = <[u8; 4]>::try_from(word) {
                        recent.push(u64::from(u32::from_le_bytes(b)));
                    }
                }
            }
            _ => {}
        }
        if recent.len() > 6 {
            recent.remove(0);
        }
        let is_call = matches!(op, "bl" | "b" | "b.w");
        if is_call
            && insn.contains("<core::panicking::")
            && !current.starts_with("core::panicking::")
        {
            let kind = insn
                .split("<core::panicking::")
                .nth(1)
                .and_then(|s| s.split('>').next())
                .unwrap_or("?");
            let loc = recent.iter().rev().find_map(|&a| location_at(&image, a));
            sites.push(format!(
                "{} in {current}: {}",
                kind,
                loc.unwrap_or_else(|| "(location not found)".into())
            ));
            recent.clear();
        }
    }
    sites.sort();
    sites.dedup();
    Some(sites)
}

/// `cargo xtask panic-sites ELF...`: list the panic call sites of firmware
/// images (built without `panic-free-check`).
pub fn print_sites(args: &[String]) -> Result<(), String> {
    if args.is_empty() {
        return Err("usage: cargo xtask panic-sites ELF...".into());
    }
    for a in args {
        let sites =
            panic_sites(Path::new(a)).ok_or("llvm-objdump not found, or the ELF cannot be read")?;
        println!("{a}: {} panic call site(s)", sites.len());
        for s in sites {
            println!("  {s}");
        }
    }
    Ok(())
}
