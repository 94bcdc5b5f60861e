//! `cargo xtask bench`: the performance table.
//!
//! Builds the release CLI and two bench binaries of headroom-tests
//! (`update_callgrind`, `log_throughput`), generates big logs in
//! `target/bench/` with `headroom synth` and `headroom convert`, then
//! measures (best of several runs, files already in the page cache): replay
//! end to end on binary and CSV, decoding alone and decoding plus replay
//! with the engine's own decoder (optimised, no CLI), peak RSS
//! (`/usr/bin/time -v`), instructions per controller update (callgrind),
//! host updates per second, the controller's state size, and the latency of
//! the calculator commands including process start. Firmware figures: with
//! `--firmware`, from a run of `cargo xtask firmware`; without it, by
//! running the `cost` firmware an earlier firmware step built
//! (target/firmware) under QEMU, or else from a saved `--firmware` output.
//!
//! Prints one markdown table (metric | target | measured | met? | note) and
//! writes it to `target/bench-table.md`. Missed targets do not fail the
//! step; a measurement that cannot be made does.

use std::fmt::Write as _;
use std::fs;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const HELP: &str = "\
cargo xtask bench [OPTIONS]

Measures the performance targets and prints one markdown table (also
written to target/bench-table.md).

Options:
  --records N    records in the big logs (default 10000000)
  --runs K       timed runs of each end-to-end measurement, best kept (default 5)
  --firmware     run `cargo xtask firmware` for the Cortex-M figures (slow);
                 without it the output of an earlier run is reused if present
  -h, --help     this text
";

/// Update counts of the two callgrind runs (their difference cancels
/// start-up and the generation of the observation mix).
const CALLGRIND_N: (u64, u64) = (16_384, 65_536);

/// One row of the table.
struct Row {
    metric: String,
    target: String,
    measured: String,
    met: Option<bool>,
    note: String,
}

impl Row {
    fn new(metric: &str, target: &str, measured: String, met: Option<bool>, note: String) -> Row {
        Row {
            metric: metric.into(),
            target: target.into(),
            measured,
            met,
            note,
        }
    }
}

/// Paths the step works with.
struct Ctx {
    root: PathBuf,
    work: PathBuf,
    cli: PathBuf,
    runs: usize,
}

/// Run the bench step.
pub fn run(args: &[String]) -> Result<(), String> {
    let mut records: u64 = 10_000_000;
    let mut runs: usize = 5;
    let mut firmware = false;
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--records" => {
                records = parse_count(it.next(), "--records")?;
                if records < 1_000 {
                    return Err("bench: --records must be at least 1000".into());
                }
            }
            "--runs" => runs = parse_count(it.next(), "--runs")? as usize,
            "--firmware" => firmware = true,
            "--help" | "-h" => {
                print!("{HELP}");
                return Ok(());
            }
            other => return Err(format!("bench: unknown option `{other}` (see --help)")),
        }
    }
    if runs == 0 {
        return Err("bench: --runs must be at least 1".into());
    }
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .ok_or("cannot find the repository root")?;
    let work = root.join("target").join("bench");
    fs::create_dir_all(&work).map_err(|e| format!("cannot create {}: {e}", work.display()))?;
    let ctx = Ctx {
        cli: root.join("target").join("release").join("headroom"),
        root,
        work,
        runs,
    };

    println!("== bench: building (release, LTO)");
    cargo(&ctx, &["build", "--release", "-p", "headroom-cli"])?;
    let callgrind_exe = build_bench_exe(&ctx, "update_callgrind")?;
    let throughput_exe = build_bench_exe(&ctx, "log_throughput")?;

    let machine = machine();
    println!("== bench: machine: {machine}");
    let mut rows: Vec<Row> = Vec::new();

    // Controller: state, callgrind, host rate.
    println!("== bench: controller update");
    let probe = run_out(Command::new(&callgrind_exe).args(["update", "1000"]))?;
    let state_bytes = key_u64(&probe, "state_bytes")?;
    rows.push(Row::new(
        "controller state, W = 32 (host, `size_of`)",
        "≤ 256 B",
        format!("{state_bytes} B"),
        Some(state_bytes <= 256),
        state_note(state_bytes),
    ));
    let ir = callgrind_per_update(&ctx, &callgrind_exe)?;
    rows.push(Row::new(
        "controller update, instructions (host x86-64, callgrind)",
        "(tracks regressions)",
        format!("{ir:.1} instr/update"),
        None,
        format!(
            "((Ir(update, {b}) − Ir(update, {a})) − (Ir(baseline, {b}) − Ir(baseline, {a}))) / {d}; exact, a 2× regression shows as 2×",
            a = CALLGRIND_N.0,
            b = CALLGRIND_N.1,
            d = CALLGRIND_N.1 - CALLGRIND_N.0
        ),
    ));
    let rate_out = run_out(Command::new(&callgrind_exe).args(["rate", "65536"]))?;
    let rate = key_f64(&rate_out, "updates_per_s")?;
    rows.push(Row::new(
        "controller updates per second, host, 1 core",
        "≥ 50 M/s",
        format!("{:.1} M/s", rate / 1e6),
        Some(rate >= 50e6),
        "best of 20 passes over 65 536 mixed observations".into(),
    ));
    firmware_rows(&ctx, firmware, &mut rows)?;

    // Logs.
    println!("== bench: logs of {records} records");
    let (bin_log, csv_log) = make_logs(&ctx, records)?;
    let small = (records / 10).max(1_000);
    let (small_bin, small_csv) = make_logs(&ctx, small)?;
    let bin_size = file_len(&bin_log)?;
    let csv_size = file_len(&csv_log)?;

    println!("== bench: replay");
    warm(&bin_log)?;
    let bin_replay = best_wall(&ctx, &[&bin_log])?;
    let decode = best_decode(&ctx, &throughput_exe, &bin_log, false)?;
    let decode_replay = best_decode(&ctx, &throughput_exe, &bin_log, true)?;
    let bin_rate = records as f64 / bin_replay.as_secs_f64();
    rows.push(Row::new(
        "`headroom replay` binary log, end to end",
        "≥ 20 M records/s",
        format!("{:.1} M records/s", bin_rate / 1e6),
        Some(bin_rate >= 20e6),
        format!(
            "{records} records, {:.0} MB ({:.1} B/record), page cache, best of {} ({:.3} s)",
            bin_size as f64 / 1e6,
            bin_size as f64 / records as f64,
            ctx.runs,
            bin_replay.as_secs_f64()
        ),
    ));
    let ratio = bin_replay.as_secs_f64() / decode.as_secs_f64();
    rows.push(Row::new(
        "replay time ÷ decode-only time (binary)",
        "≤ 1.5×",
        format!("{ratio:.2}×"),
        Some(ratio <= 1.5),
        format!(
            "decode only (engine FrameDecoder, 64 KiB reads, optimised, no CLI, one thread): {:.1} M records/s; decode + Replay::step, same harness, one thread: {:.1} M records/s ({:.2}× decode); the CLI reads ahead on a second thread",
            records as f64 / decode.as_secs_f64() / 1e6,
            records as f64 / decode_replay.as_secs_f64() / 1e6,
            decode_replay.as_secs_f64() / decode.as_secs_f64()
        ),
    ));
    warm(&csv_log)?;
    let csv_replay = best_wall(&ctx, &[&csv_log])?;
    let csv_rate = records as f64 / csv_replay.as_secs_f64();
    rows.push(Row::new(
        "`headroom replay` CSV log, end to end",
        "≥ 10 M records/s",
        format!("{:.1} M records/s", csv_rate / 1e6),
        Some(csv_rate >= 10e6),
        format!(
            "{:.0} MB ({:.1} B/row), page cache, best of {} ({:.3} s)",
            csv_size as f64 / 1e6,
            csv_size as f64 / records as f64,
            ctx.runs,
            csv_replay.as_secs_f64()
        ),
    ));

    println!("== bench: peak memory");
    let mut rss_rows = Vec::new();
    for (log, n) in [
        (&bin_log, records),
        (&small_bin, small),
        (&csv_log, records),
        (&small_csv, small),
    ] {
        rss_rows.push((log.clone(), n, peak_rss_kib(&ctx, log)?));
    }
    for kind in ["hrlog", "csv"] {
        let mine: Vec<&(PathBuf, u64, u64)> = rss_rows
            .iter()
            .filter(|(p, _, _)| p.extension().is_some_and(|e| e == kind))
            .collect();
        if let [(_, n_big, big), (_, n_small, small_kib)] = mine.as_slice() {
            rows.push(Row::new(
                &format!("peak RSS, replay of a {} M-record {} log", n_big / 1_000_000, kind),
                "< 50 MiB, constant",
                format!("{:.1} MiB", *big as f64 / 1024.0),
                Some((*big as f64) < 50.0 * 1024.0),
                format!(
                    "/usr/bin/time -v; {:.1} MiB for {n_small} records (constant memory: the two agree)",
                    *small_kib as f64 / 1024.0
                ),
            ));
        }
    }

    println!("== bench: bytes per record of each format");
    format_rows(&ctx, &mut rows)?;

    println!("== bench: tune");
    tune_row(&ctx, &mut rows, &small_bin, small)?;

    println!("== bench: calculator latency");
    calculator_rows(&ctx, &mut rows)?;

    let table = render(&machine, &rows);
    println!("\n{table}");
    let out = ctx.root.join("target").join("bench-table.md");
    fs::write(&out, &table).map_err(|e| format!("cannot write {}: {e}", out.display()))?;
    println!("(written to {})", out.display());
    Ok(())
}

fn parse_count(v: Option<&String>, name: &str) -> Result<u64, String> {
    let v = v.ok_or_else(|| format!("bench: {name} needs a value"))?;
    v.replace('_', "")
        .parse::<u64>()
        .map_err(|e| format!("bench: {name} {v}: {e}"))
}

fn state_note(bytes: u64) -> String {
    if bytes <= 256 {
        "core::mem::size_of::<Controller<32>>()".into()
    } else {
        format!(
            "core::mem::size_of::<Controller<32>>(); {} B over the goal",
            bytes - 256
        )
    }
}

fn cargo(ctx: &Ctx, args: &[&str]) -> Result<String, String> {
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let out = Command::new(cargo)
        .args(args)
        .current_dir(&ctx.root)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .output()
        .map_err(|e| format!("cannot run cargo: {e}"))?;
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    if !out.status.success() {
        return Err(format!("cargo {} failed:\n{stderr}", args.join(" ")));
    }
    Ok(stderr)
}

/// Build a bench target and return its executable (from cargo's
/// `Executable ... (path)` line).
fn build_bench_exe(ctx: &Ctx, name: &str) -> Result<PathBuf, String> {
    let err = cargo(
        ctx,
        &["bench", "-p", "headroom-tests", "--bench", name, "--no-run"],
    )?;
    let line = err
        .lines()
        .find(|l| l.contains("Executable") && l.contains(name))
        .ok_or_else(|| format!("cargo did not say where the `{name}` bench is:\n{err}"))?;
    let path = line
        .rsplit_once('(')
        .and_then(|(_, p)| p.strip_suffix(')'))
        .ok_or_else(|| format!("cannot read the executable from `{line}`"))?;
    Ok(ctx.root.join(path))
}

fn run_out(cmd: &mut Command) -> Result<String, String> {
    let shown = format!("{cmd:?}");
    let out = cmd
        .stderr(Stdio::piped())
        .output()
        .map_err(|e| format!("cannot run {shown}: {e}"))?;
    if !out.status.success() {
        return Err(format!(
            "{shown} failed ({}):\n{}",
            out.status,
            String::from_utf8_lossy(&out.stderr)
        ));
    }
    Ok(String::from_utf8_lossy(&out.stdout).into_owned())
}

/// The value of `key=value` in whitespace-separated output.
fn key_str<'a>(text: &'a str, key: &str) -> Result<&'a str, String> {
    text.split_whitespace()
        .find_map(|w| w.split_once('=').filter(|(k, _)| *k == key).map(|(_, v)| v))
        .ok_or_else(|| format!("`{key}=` missing in:\n{text}"))
}

fn key_u64(text: &str, key: &str) -> Result<u64, String> {
    let v = key_str(text, key)?;
    v.parse().map_err(|e| format!("`{key}={v}`: {e}"))
}

fn key_f64(text: &str, key: &str) -> Result<f64, String> {
    let v = key_str(text, key)?;
    v.parse().map_err(|e| format!("`{key}={v}`: {e}"))
}

fn machine() -> String {
    let model = Command::new("lscpu")
        .output()
        .ok()
        .and_then(|o| {
            String::from_utf8_lossy(&o.stdout)
                .lines()
                .find_map(|l| l.strip_prefix("Model name:").map(|m| m.trim().to_string()))
        })
        .or_else(|| {
            fs::read_to_string("/proc/cpuinfo").ok().and_then(|s| {
                s.lines().find_map(|l| {
                    l.split_once(':')
                        .filter(|(k, _)| k.trim() == "model name")
                        .map(|(_, v)| v.trim().to_string())
                })
            })
        })
        .unwrap_or_else(|| "unknown CPU".into());
    let cores = std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1);
    format!("{model}, {cores} logical CPU(s)")
}

/// Instructions of one controller update under callgrind.
fn callgrind_per_update(ctx: &Ctx, exe: &Path) -> Result<f64, String> {
    let ir = |mode: &str, n: u64| -> Result<u64, String> {
        let out = ctx.work.join(format!("callgrind.{mode}.{n}.out"));
        let status = Command::new("valgrind")
            .arg("--tool=callgrind")
            .arg(format!("--callgrind-out-file={}", out.display()))
            .arg(exe)
            .args([mode, &n.to_string()])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .map_err(|e| format!("cannot run valgrind (apt-get install valgrind): {e}"))?;
        if !status.success() {
            return Err(format!(
                "valgrind --tool=callgrind {} {mode} {n} failed ({status})",
                exe.display()
            ));
        }
        let text =
            fs::read_to_string(&out).map_err(|e| format!("cannot read {}: {e}", out.display()))?;
        text.lines()
            .find_map(|l| {
                l.strip_prefix("summary:")
                    .or_else(|| l.strip_prefix("totals:"))
            })
            .and_then(|v| v.split_whitespace().next())
            .and_then(|v| v.parse::<u64>().ok())
            .ok_or_else(|| format!("no `summary:` line in {}", out.display()))
    };
    let (a, b) = CALLGRIND_N;
    let u = ir("update", b)? as f64 - ir("update", a)? as f64;
    let base = ir("baseline", b)? as f64 - ir("baseline", a)? as f64;
    let per = (u - base) / (b - a) as f64;
    println!(
        "callgrind: {per:.1} instructions per update (loop baseline {:.1}); profile: callgrind_annotate {}",
        base / (b - a) as f64,
        ctx.work.join(format!("callgrind.update.{b}.out")).display()
    );
    Ok(per)
}

/// Cortex-M rows from `cargo xtask firmware`'s cost table.
fn firmware_rows(ctx: &Ctx, run_it: bool, rows: &mut Vec<Row>) -> Result<(), String> {
    let saved = ctx.work.join("firmware.txt");
    let (text, source) = if run_it {
        println!("== bench: cargo xtask firmware (this takes a while)");
        let exe =
            std::env::current_exe().map_err(|e| format!("cannot find the xtask binary: {e}"))?;
        let out = Command::new(exe)
            .arg("firmware")
            .current_dir(&ctx.root)
            .stderr(Stdio::inherit())
            .output()
            .map_err(|e| format!("cannot run the firmware step: {e}"))?;
        let text = String::from_utf8_lossy(&out.stdout).into_owned();
        fs::write(&saved, &text).map_err(|e| format!("cannot write {}: {e}", saved.display()))?;
        if !out.status.success() {
            println!("(the firmware step failed; its cost table is used if it printed one)");
        }
        (text, "this run's `cargo xtask firmware`".to_string())
    } else {
        if let Some(done) = qemu_cost_rows(ctx, rows)? {
            println!("{done}");
            return Ok(());
        }
        match fs::read_to_string(&saved) {
            Ok(t) => (
                t,
                format!(
                    "an earlier `cargo xtask bench --firmware` ({})",
                    saved.display()
                ),
            ),
            Err(_) => {
                for core in ["Cortex-M4F", "Cortex-M0"] {
                    rows.push(Row::new(
                        &format!("controller update, W = 32, {core} (QEMU -icount)"),
                        if core == "Cortex-M0" {
                            "≤ 2 500 instr"
                        } else {
                            "≤ 300 instr"
                        },
                        "not measured".into(),
                        None,
                        "run `cargo xtask bench --firmware`".into(),
                    ));
                }
                return Ok(());
            }
        }
    };
    // | board | core | state bytes | mean instr/update | max instr/update (≤) | goal | ...
    let mut found = 0;
    for line in text.lines() {
        let cells: Vec<&str> = line
            .trim()
            .trim_matches('|')
            .split('|')
            .map(str::trim)
            .collect();
        let (Some(core), Some(state), Some(mean), Some(max)) =
            (cells.get(1), cells.get(2), cells.get(3), cells.get(4))
        else {
            continue;
        };
        if !core.starts_with("Cortex-M") {
            continue;
        }
        let (Ok(mean), Ok(state)) = (mean.parse::<f64>(), state.parse::<u64>()) else {
            continue;
        };
        let goal = if core.contains("M0") { 2500.0 } else { 300.0 };
        found += 1;
        rows.push(Row::new(
            &format!("controller update, W = 32, {core} (QEMU -icount)"),
            if goal > 1000.0 {
                "≤ 2 500 instr"
            } else {
                "≤ 300 instr"
            },
            format!("{mean:.1} instr (mean)"),
            Some(mean <= goal),
            format!("slowest ≤ {max}; state {state} B on target; from {source}"),
        ));
    }
    if found == 0 {
        return Err(format!(
            "no cost table in the firmware output ({})",
            saved.display()
        ));
    }
    Ok(())
}

/// Without `--firmware`: run the `cost` firmware that an earlier
/// `cargo xtask firmware` built (`target/firmware/<target>/release/cost`)
/// under `qemu -icount shift=0`, the same way that step does, and read its
/// `key=value` lines. `None` if it was never built or QEMU is missing.
fn qemu_cost_rows(ctx: &Ctx, rows: &mut Vec<Row>) -> Result<Option<String>, String> {
    let mut found = Vec::new();
    for b in &crate::firmware::BOARDS {
        let elf = ctx
            .root
            .join("target")
            .join("firmware")
            .join(b.target)
            .join("release")
            .join("cost");
        let Ok(meta) = fs::metadata(&elf) else {
            return Ok(None);
        };
        let mut cmd = Command::new("qemu-system-arm");
        cmd.stdin(Stdio::null()).args(["-M", b.machine]);
        if let Some(cpu) = b.cpu {
            cmd.args(["-cpu", cpu]);
        }
        cmd.args(["-nographic", "-monitor", "none", "-serial", "none"])
            .args([
                "-semihosting-config",
                "enable=on,target=native",
                "-icount",
                "shift=0",
            ])
            .arg("-kernel")
            .arg(&elf);
        let Ok(text) = run_out(&mut cmd) else {
            return Ok(None);
        };
        let mean = key_u64(&text, "update_mean_milli_instructions")? as f64 / 1000.0;
        let max = key_u64(&text, "update_max_instructions_upper")?;
        let state = key_u64(&text, "controller_state_bytes")?;
        let age = meta
            .modified()
            .ok()
            .and_then(|m| m.elapsed().ok())
            .map(|d| format!("{} min old", d.as_secs() / 60))
            .unwrap_or_else(|| "of unknown age".into());
        let goal = b.update_goal as f64;
        found.push(Row::new(
            &format!("controller update, W = 32, {} (QEMU -icount)", b.core),
            if b.update_goal > 1000 { "≤ 2 500 instr" } else { "≤ 300 instr" },
            format!("{mean:.1} instr (mean)"),
            Some(mean <= goal),
            format!(
                "{:.2}× the goal; slowest ≤ {max}; state {state} B on target; cost firmware of the last `cargo xtask firmware` build ({age}), run here",
                mean / goal
            ),
        ));
    }
    rows.extend(found);
    Ok(Some(
        "firmware: cost ELFs from target/firmware run under QEMU".into(),
    ))
}

/// The binary and CSV logs of `n` records, generated once and kept.
fn make_logs(ctx: &Ctx, n: u64) -> Result<(PathBuf, PathBuf), String> {
    let bin = ctx.work.join(format!("cattle-{n}.hrlog"));
    let csv = ctx.work.join(format!("cattle-{n}.csv"));
    let scenario = ctx
        .root
        .join("examples")
        .join("scenarios")
        .join("cattle-collar-915.toml");
    if !bin.exists() {
        run_out(
            Command::new(&ctx.cli)
                .arg("synth")
                .arg("--scenario")
                .arg(&scenario)
                .args(["--seed", "2026", "--records", &n.to_string(), "--out"])
                .arg(&bin)
                .arg("--force"),
        )?;
    }
    if !csv.exists() {
        run_out(
            Command::new(&ctx.cli)
                .arg("convert")
                .arg(&bin)
                .arg(&csv)
                .arg("--force"),
        )?;
    }
    Ok((bin, csv))
}

fn file_len(p: &Path) -> Result<u64, String> {
    fs::metadata(p)
        .map(|m| m.len())
        .map_err(|e| format!("cannot stat {}: {e}", p.display()))
}

/// Read a file once so the timed runs find it in the page cache.
fn warm(p: &Path) -> Result<(), String> {
    let mut f = fs::File::open(p).map_err(|e| format!("cannot open {}: {e}", p.display()))?;
    let mut buf = vec![0u8; 1 << 20];
    while f
        .read(&mut buf)
        .map_err(|e| format!("cannot read {}: {e}", p.display()))?
        > 0
    {}
    Ok(())
}

/// The demo logs whose bytes per record the table reports.
const DEMO_LOGS: [&str; 3] = [
    "examples/logs/orchard-868.csv",
    "examples/logs/cattle-collar-915.csv",
    "examples/logs/workshop-mesh-2g4.csv",
];

/// Bytes per record of CSV, binary format 1 and binary format 2 on each
/// demo log (whole files, headers included), by converting it with the
/// release CLI; and the fault logs of `examples/logs/faults/` together.
fn format_rows(ctx: &Ctx, rows: &mut Vec<Row>) -> Result<(), String> {
    let mut logs: Vec<PathBuf> = DEMO_LOGS.iter().map(|p| ctx.root.join(p)).collect();
    let faults = ctx.root.join("examples").join("logs").join("faults");
    let mut fault_logs: Vec<PathBuf> = fs::read_dir(&faults)
        .map_err(|e| format!("cannot list {}: {e}", faults.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "csv"))
        .collect();
    fault_logs.sort();
    let n_demo = logs.len();
    logs.extend(fault_logs);
    // (name, records, [csv, v1, v2] bytes)
    let mut sizes: Vec<(String, u64, [u64; 3])> = Vec::new();
    for (i, log) in logs.iter().enumerate() {
        let stem = log
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        let mut bytes = [file_len(log)?, 0, 0];
        let mut records = 0;
        for (slot, version) in [(1usize, "1"), (2, "2")] {
            let out = ctx.work.join(format!("{stem}.v{version}.hrlog"));
            let o = Command::new(&ctx.cli)
                .arg("convert")
                .arg(log)
                .arg(&out)
                .args(["--binary-version", version, "--force"])
                .stdout(Stdio::null())
                .stderr(Stdio::piped())
                .output()
                .map_err(|e| format!("cannot run headroom convert: {e}"))?;
            let err = String::from_utf8_lossy(&o.stderr);
            if !o.status.success() {
                return Err(format!("headroom convert {} failed:\n{err}", log.display()));
            }
            records = err
                .split("converted ")
                .nth(1)
                .and_then(|r| r.split_whitespace().next())
                .and_then(|n| n.parse::<u64>().ok())
                .ok_or_else(|| format!("no record count in convert's output:\n{err}"))?;
            if let Some(b) = bytes.get_mut(slot) {
                *b = file_len(&out)?;
            }
        }
        if records == 0 {
            return Err(format!("{}: no records", log.display()));
        }
        let name = if i < n_demo {
            format!("`{stem}`")
        } else {
            format!("faults/{stem}")
        };
        sizes.push((name, records, bytes));
    }
    let per = |b: u64, n: u64| b as f64 / n as f64;
    let (demo, fault) = sizes.split_at(n_demo.min(sizes.len()));
    let mut worst_v2: f64 = 0.0;
    for (name, n, b) in demo {
        let [csv, v1, v2] = b.map(|x| per(x, *n));
        worst_v2 = worst_v2.max(v2);
        rows.push(Row::new(
            &format!("bytes per record, demo log {name}"),
            "format 2 ≤ 8 B",
            format!("CSV {csv:.1} / format 1 {v1:.1} / format 2 {v2:.2} B"),
            Some(v2 <= 8.0),
            format!(
                "{n} records, whole files (headers included), written by `headroom convert` (format 2: {} records a frame)",
                headroom::record::codec::RECORDS_PER_FRAME
            ),
        ));
    }
    if !fault.is_empty() {
        let n: u64 = fault.iter().map(|(_, n, _)| n).sum();
        let mut tot = [0u64; 3];
        for (_, _, b) in fault {
            for (t, x) in tot.iter_mut().zip(b) {
                *t += x;
            }
        }
        let [csv, v1, v2] = tot.map(|x| per(x, n));
        rows.push(Row::new(
            &format!("bytes per record, the {} fault logs together", fault.len()),
            "format 2 ≤ 8 B",
            format!("CSV {csv:.1} / format 1 {v1:.1} / format 2 {v2:.2} B"),
            Some(v2 <= 8.0),
            format!("{n} records in `examples/logs/faults/` (NaN, inf, mW readings among them)"),
        ));
    }
    println!("format 2: at most {worst_v2:.2} B/record on the demo logs");
    Ok(())
}

/// Best wall time of `headroom replay LOG...` over the runs.
fn best_wall(ctx: &Ctx, logs: &[&Path]) -> Result<Duration, String> {
    let mut best = Duration::MAX;
    for _ in 0..ctx.runs {
        let t = Instant::now();
        let status = Command::new(&ctx.cli)
            .arg("replay")
            .args(logs)
            .stdout(Stdio::null())
            .stderr(Stdio::inherit())
            .status()
            .map_err(|e| format!("cannot run headroom replay: {e}"))?;
        let dt = t.elapsed();
        if !status.success() {
            return Err(format!("headroom replay {:?} failed ({status})", logs));
        }
        best = best.min(dt);
    }
    Ok(best)
}

/// Best time to read `log` in 64 KiB chunks and decode its frames with
/// the engine's decoder, with (`replay`) or without stepping a replay over
/// the records, from the optimised `log_throughput` bench binary.
fn best_decode(ctx: &Ctx, exe: &Path, log: &Path, replay: bool) -> Result<Duration, String> {
    let mode = if replay { "replay" } else { "decode" };
    let out = run_out(
        Command::new(exe)
            .arg(mode)
            .arg(log)
            .arg(ctx.runs.to_string()),
    )?;
    let secs = key_f64(&out, "best_s")?;
    if !(secs > 0.0 && secs.is_finite()) {
        return Err(format!("log_throughput {mode}: implausible time {secs} s"));
    }
    Ok(Duration::from_secs_f64(secs))
}

/// Peak RSS of `headroom replay LOG`, KiB, from `/usr/bin/time -v`.
fn peak_rss_kib(ctx: &Ctx, log: &Path) -> Result<u64, String> {
    let out = Command::new("/usr/bin/time")
        .arg("-v")
        .arg(&ctx.cli)
        .arg("replay")
        .arg(log)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .output()
        .map_err(|e| format!("cannot run /usr/bin/time (apt-get install time): {e}"))?;
    let text = String::from_utf8_lossy(&out.stderr);
    if !out.status.success() {
        return Err(format!(
            "/usr/bin/time -v headroom replay {} failed:\n{text}",
            log.display()
        ));
    }
    text.lines()
        .find_map(|l| l.trim().strip_prefix("Maximum resident set size (kbytes):"))
        .and_then(|v| v.trim().parse::<u64>().ok())
        .ok_or_else(|| format!("no peak RSS in /usr/bin/time's output:\n{text}"))
}

/// The tune sweeps and the candidates they replay (five values of
/// `margin_step_db` times three of `max_step_down_db`, plus the default that
/// tune always replays): 16 candidates, which two threads share evenly (with
/// an odd count one thread runs one candidate more: 13 candidates cap the
/// scaling at 13/7 = 1.86×).
const TUNE_SWEEP: (&[&str], u64) = (
    &[
        "margin_step_db=0.25,0.5,0.75,1,1.5",
        "max_step_down_db=1,2,4",
    ],
    16,
);

/// `headroom tune` on one log with a fifteen-candidate sweep, one worker
/// thread against two: record-updates per second and the scaling.
fn tune_row(ctx: &Ctx, rows: &mut Vec<Row>, log: &Path, records: u64) -> Result<(), String> {
    let has_tune = Command::new(&ctx.cli)
        .args(["tune", "--help"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .map(|s| s.success())
        .unwrap_or(false);
    if !has_tune {
        rows.push(Row::new(
            "`headroom tune` scaling, 2 cores vs 1",
            "≥ 1.7×, ≥ 40 M record-updates/s/core",
            "not measured".into(),
            None,
            "`headroom tune` is not in this build".into(),
        ));
        return Ok(());
    }
    let best = |threads: &str| -> Result<Duration, String> {
        let mut best = Duration::MAX;
        for _ in 0..ctx.runs.min(3) {
            let t = Instant::now();
            let status = Command::new(&ctx.cli)
                .arg("tune")
                .args(TUNE_SWEEP.0.iter().flat_map(|s| ["--sweep", s]))
                .args(["--threads", threads])
                .arg(log)
                .stdout(Stdio::null())
                .stderr(Stdio::inherit())
                .status()
                .map_err(|e| format!("cannot run headroom tune: {e}"))?;
            let dt = t.elapsed();
            if !status.success() {
                return Err(format!(
                    "headroom tune --threads {threads} failed ({status})"
                ));
            }
            best = best.min(dt);
        }
        Ok(best)
    };
    let one = best("1")?;
    let two = best("2")?;
    let updates = (records * TUNE_SWEEP.1) as f64;
    let per_core = updates / one.as_secs_f64();
    let scaling = one.as_secs_f64() / two.as_secs_f64();
    rows.push(Row::new(
        "`headroom tune`, record-updates/s on 1 thread",
        "≥ 40 M/s per core",
        format!("{:.1} M/s", per_core / 1e6),
        Some(per_core >= 40e6),
        format!(
            "`--sweep {}` (5 × 3 values + the default = {} candidates) over one {records}-record binary log, best of {} ({:.3} s)",
            TUNE_SWEEP.0.join(" --sweep "),
            TUNE_SWEEP.1,
            ctx.runs.min(3),
            one.as_secs_f64()
        ),
    ));
    rows.push(Row::new(
        "`headroom tune` scaling, 2 threads vs 1",
        "≥ 1.7×",
        format!("{scaling:.2}×"),
        Some(scaling >= 1.7),
        format!(
            "{:.3} s with 2 threads; the machine's 2 cores are shared with other work",
            two.as_secs_f64()
        ),
    ));
    Ok(())
}

fn calculator_rows(ctx: &Ctx, rows: &mut Vec<Row>) -> Result<(), String> {
    let link = ctx
        .root
        .join("examples")
        .join("links")
        .join("orchard-sensor.toml");
    let link = link.to_string_lossy().into_owned();
    let cmds: [(&str, Vec<&str>); 5] = [
        (
            "pathloss (Hata)",
            vec![
                "pathloss",
                "--model",
                "hata",
                "--frequency",
                "868MHz",
                "--distance",
                "3km",
                "--tx-height",
                "30m",
                "--rx-height",
                "1.5m",
                "--environment",
                "suburban",
            ],
        ),
        (
            "fade (composite)",
            vec![
                "fade",
                "--model",
                "composite",
                "--sigma-db",
                "8",
                "--availability",
                "0.99",
            ],
        ),
        (
            "noise",
            vec!["noise", "--bandwidth", "125kHz", "--noise-figure-db", "6"],
        ),
        ("ber", vec!["ber", "--modulation", "bpsk", "--ber", "1e-5"]),
        ("budget (TOML link)", vec!["budget", link.as_str()]),
    ];
    const RUNS: usize = 30;
    let mut worst_median = Duration::ZERO;
    let mut parts = Vec::new();
    for (name, args) in &cmds {
        let mut times = Vec::with_capacity(RUNS);
        for _ in 0..RUNS {
            let t = Instant::now();
            let status = Command::new(&ctx.cli)
                .args(args)
                .stdout(Stdio::null())
                .stderr(Stdio::piped())
                .status()
                .map_err(|e| format!("cannot run headroom {name}: {e}"))?;
            let dt = t.elapsed();
            if !status.success() {
                return Err(format!("headroom {} failed ({status})", args.join(" ")));
            }
            times.push(dt);
        }
        times.sort();
        let median = times.get(RUNS / 2).copied().unwrap_or_default();
        let max = times.last().copied().unwrap_or_default();
        worst_median = worst_median.max(median);
        parts.push(format!(
            "{name} {:.1}/{:.1}",
            median.as_secs_f64() * 1e3,
            max.as_secs_f64() * 1e3
        ));
    }
    rows.push(Row::new(
        "calculator commands, process start included",
        "≪ 20 ms",
        format!(
            "{:.1} ms (slowest median)",
            worst_median.as_secs_f64() * 1e3
        ),
        Some(worst_median < Duration::from_millis(20)),
        format!("median/max ms over {RUNS} runs: {}", parts.join("; ")),
    ));
    Ok(())
}

fn render(machine: &str, rows: &[Row]) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "Machine: {machine}. Measured by `cargo xtask bench`.\n");
    let _ = writeln!(s, "| metric | target | measured | met? | note |");
    let _ = writeln!(s, "|---|---|---|---|---|");
    for r in rows {
        let met = match r.met {
            Some(true) => "yes",
            Some(false) => "**no**",
            None => "–",
        };
        let _ = writeln!(
            s,
            "| {} | {} | {} | {met} | {} |",
            r.metric,
            r.target,
            r.measured,
            r.note.replace('|', "/")
        );
    }
    s
}
