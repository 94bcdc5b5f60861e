//! Replay on target against the host, record by record.
//!
//! Every field log (the CSV logs in `examples/logs/`, converted with
//! `headroom convert`, and logs synthesized from every scenario in
//! `examples/scenarios/` with `headroom synth`) is replayed by the `replay`
//! firmware on both boards. Its decision frames must match, bit for bit in
//! the chosen power and exactly in outcome and reason:
//! - `headroom replay LOG --out decisions.csv` (the host CLI), and
//! - the engine's `Replay` run here on the decoded log.
//!
//! With rates in play: a log written here by the engine's channel simulator
//! at a rate schedule, in log format 1.2 (the rate table in the header, the
//! rate in every record), over an invented far link. Its header has several
//! rates, so the replay chooses the rate, costed by the engine's invented
//! demo node (`headroom::energy::demo`), on the target and here alike; the
//! host CLI, which needs an energy profile file to choose rates, is not in
//! that comparison (the rate itself is not in a decision frame: its effect
//! is, through the outcome judged at the rate's required SNR and the
//! reasons `rate_faster`, `rate_slower`).

use std::env;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use headroom::control::{settings, Outcome, Reason, Replay, REPLAY_WINDOW};
use headroom::energy::demo;
use headroom::propagation::PathLossModel;
use headroom::record::codec::{Encoder, Event, Frame, FrameDecoder, MAX_FRAME};
use headroom::record::{DecisionRecord, LogHeader};
use headroom::sim::{
    ChannelConfig, FastFading, NoiseFloor, PowerPattern, RateSchedule, Shadowing, Synth, Trajectory,
};
use headroom::units::{Db, Dbi, Dbm, Hertz, Metres};

use super::{Board, Ctx, BOARDS};
use crate::proc::{run_capture, run_inherit, show};

/// Seed and length of the logs made from the scenarios (the fault
/// scenarios inject their faults from record 2000 on).
const SYNTH_SEED: &str = "20261202";
const SYNTH_RECORDS: &str = "3000";

/// A firmware image that replays a log on a board: `-append "LOG OUT"`,
/// one decision frame per record written to `OUT`.
pub struct Image {
    /// The board it runs on.
    pub board: Board,
    /// The ELF.
    pub elf: PathBuf,
    /// What it is, for messages ("firmware", "C demo").
    pub what: &'static str,
    /// Tag of its output files (so that images do not share them).
    pub tag: &'static str,
}

/// Run the equivalence check of the Rust firmware's `replay` on every log
/// and board.
pub fn run(ctx: &Ctx) -> Result<(), String> {
    let images: Vec<Image> = BOARDS
        .iter()
        .map(|b| Image {
            board: *b,
            elf: ctx.elf(b, "replay"),
            what: "firmware",
            tag: "rust",
        })
        .collect();
    run_images(ctx, &images)
}

/// Run the equivalence check of `images` on every log.
pub fn run_images(ctx: &Ctx, images: &[Image]) -> Result<(), String> {
    let headroom = build_host_cli(ctx)?;
    let dir = ctx.work.join("replay");
    fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    let logs = gather_logs(ctx, &headroom, &dir)?;
    if logs.is_empty() {
        return Err(
            "no field logs to replay (examples/logs/*.csv, examples/scenarios/*.toml)".into(),
        );
    }
    let boards: Vec<&str> = images.iter().map(|i| i.board.machine).collect();
    let mut failures = Vec::new();
    for log in &logs {
        let name = log
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("log")
            .to_string();
        match check_log(ctx, &headroom, &dir, log, &name, images) {
            Ok((n, true)) => println!(
                "{name}: {n} decisions identical on the host and {}",
                boards.join(" and ")
            ),
            Ok((n, false)) => println!(
                "{name}: {n} decisions identical in the engine here (rates in play, the demo node's \
                 energy profile) and the {} on {}",
                images.first().map_or("firmware", |i| i.what),
                boards.join(" and ")
            ),
            Err(e) => {
                println!("{name}: MISMATCH");
                failures.push(format!("{name}: {e}"));
            }
        }
    }
    if failures.is_empty() {
        Ok(())
    } else {
        Err(failures.join("\n"))
    }
}

fn check_log(
    ctx: &Ctx,
    headroom: &Path,
    dir: &Path,
    log: &Path,
    name: &str,
    images: &[Image],
) -> Result<(usize, bool), String> {
    let bytes = fs::read(log).map_err(|e| format!("{}: {e}", log.display()))?;
    let (engine, rates) = engine_replay(&bytes)?;
    if rates > 1 {
        // Rates in play: the Rust firmware replays with the demo node's
        // energy profile built in; the C demo reads the demo node's rate
        // table and profile from a spec (a C log header has no rate table).
        let spec = write_demo_spec(log.parent().unwrap_or(dir))?;
        for image in images {
            let extra = (image.tag == "c").then_some(spec.as_str());
            let target = run_target(ctx, image, dir, log, name, extra)?;
            compare(
                &format!("{} on {}", image.what, image.board.machine),
                &target,
                "the engine's Replay in xtask (demo node's energy profile)",
                &engine,
            )?;
        }
        return Ok((engine.len(), false));
    }

    let csv = dir.join(format!("{name}.decisions.csv"));
    // The log as it is: its header's settings over the defaults, on the
    // host as on the target (the logs' headers are not the defaults).
    let mut cmd = Command::new(headroom);
    cmd.arg("replay").arg(log).arg("--out").arg(&csv);
    // An old output must not pass for a new one.
    let _ = fs::remove_file(&csv);
    let out = run_capture(&mut cmd, ctx.timeout)?;
    if !out.success {
        return Err(format!("`{}` failed: {}", show(&cmd), out.stderr.trim()));
    }
    let text = fs::read_to_string(&csv).map_err(|e| format!("{}: {e}", csv.display()))?;
    let cli = parse_cli_csv(&text).map_err(|e| format!("{}: {e}", csv.display()))?;
    compare(
        "headroom replay (host CLI)",
        &cli,
        "the engine's Replay in xtask",
        &engine,
    )?;

    for image in images {
        let b = &image.board;
        let target = run_target(ctx, image, dir, log, name, None)?;
        compare(
            &format!("{} on {}", image.what, b.machine),
            &target,
            "headroom replay (host CLI)",
            &cli,
        )?;
    }
    Ok((engine.len(), true))
}

/// The demo node's rate table and energy profile as the C demo reads them
/// (`replay_spec_parse` in `bindings/c/demo/replay_log.c`, written by the C
/// library's `write_spec`), to `rates-demo-node.spec` in `dir`; its file
/// name.
fn write_demo_spec(dir: &Path) -> Result<String, String> {
    let rates = demo::demo_rates().map_err(|e| format!("demo rates: {e}"))?;
    let prof = demo::demo_profile().map_err(|e| format!("demo profile: {e}"))?;
    let mut spec = String::new();
    headroom_c::rates::write_spec(&mut spec, &rates, &prof)
        .map_err(|e| format!("demo spec: {e}"))?;
    let name = "rates-demo-node.spec";
    let path = dir.join(name);
    fs::write(&path, spec).map_err(|e| format!("{}: {e}", path.display()))?;
    Ok(name.to_string())
}

/// The decisions of `image` (a replay firmware) for `log`; `extra` is a
/// third word of the command line (the C demo's spec).
fn run_target(
    ctx: &Ctx,
    image: &Image,
    dir: &Path,
    log: &Path,
    name: &str,
    extra: Option<&str>,
) -> Result<Vec<DecisionRecord>, String> {
    let b = &image.board;
    let out_name = format!("{name}.{}.{}.decisions.hrlog", image.tag, b.machine);
    let out_path = dir.join(&out_name);
    let _ = fs::remove_file(&out_path);
    let log_name = log
        .file_name()
        .and_then(|s| s.to_str())
        .ok_or("log name is not UTF-8")?;
    let args = match extra {
        Some(x) => format!("{log_name} {out_name} {x}"),
        None => format!("{log_name} {out_name}"),
    };
    let mut q = ctx.qemu(b, &image.elf, false, Some(&args));
    q.current_dir(log.parent().unwrap_or(dir));
    let said = ctx.run_qemu(
        q,
        &format!("{} replay of {name} on {}", image.what, b.machine),
    )?;
    let frames = fs::read(log.parent().unwrap_or(dir).join(&out_name))
        .map_err(|e| format!("{out_name}: {e}"))?;
    decode_decisions(&frames).map_err(|e| {
        format!(
            "{out_name}: {e}\n  {} said: {}",
            image.what,
            String::from_utf8_lossy(&said).trim()
        )
    })
}

/// A log with rates in play, written by the engine's channel simulator in
/// log format 1.2: an invented node 2 to 4 km from its gateway at 868 MHz
/// (log-distance, exponent 3.2; shadowing 4 dB; Rician K = 6 dB), one packet
/// every 30 s for 3000 packets at 14 dBm, cycling spreading factors 7, 9
/// and 12 of the demo node every 50 packets.
fn write_rate_log(dir: &Path) -> Result<PathBuf, String> {
    let rates = demo::demo_rates().map_err(|e| format!("demo rates: {e}"))?;
    let channel = ChannelConfig {
        frequency: Hertz(868.0e6),
        path_loss: PathLossModel::LogDistance {
            d0: Metres(1.0),
            pl_d0: None,
            exponent: 3.2,
        },
        tx_antenna_gain: Dbi(2.15),
        rx_antenna_gain: Dbi(5.0),
        trajectory: Trajectory {
            start: Metres(2000.0),
            speed_m_per_s: 0.5,
            min: Some(Metres(2000.0)),
            max: Some(Metres(4000.0)),
        },
        packet_interval_ms: 30_000,
        start_ms: 0,
        shadowing: Some(Shadowing {
            sigma: Db(4.0),
            decorrelation_distance: Metres(50.0),
            time_constant_s: None,
        }),
        fading: FastFading::Rician { k_db: 6.0 },
        fading_correlation: 0.2,
        noise: NoiseFloor {
            mean: Dbm(-117.0),
            jitter: Db(0.5),
            bursts: None,
            burst_rise: Db(0.0),
        },
        min_snr: None,
        feedback_dropouts: None,
        report_resolution: Some(Db(1.0)),
        steps: Default::default(),
    };
    let schedule = RateSchedule::new(rates, &[0, 2, 4], 50).map_err(|e| format!("{e}"))?;
    let mut synth = Synth::<0>::new(channel, PowerPattern::fixed(Dbm(14.0)), &[], 20_261_203)
        .map_err(|e| format!("rate log: {e}"))?
        .with_rates(schedule);
    let header = LogHeader {
        device_id: 1515,
        min_tx: Some(Dbm(-9.0)),
        max_tx: Some(Dbm(22.0)),
        tx_step: Some(Db(1.0)),
        antenna_gain: Some(Dbi(2.15)),
        eirp_cap: Some(Dbm(16.15)),
        rates,
        ..LogHeader::default()
    };
    let mut enc = Encoder::new();
    let mut frame = [0u8; MAX_FRAME];
    let mut bytes = enc
        .header(&header, &mut frame)
        .map_err(|e| format!("rate log header: {e}"))?
        .to_vec();
    for _ in 0..3000 {
        let (_, rec) = synth.next_record().map_err(|e| format!("rate log: {e}"))?;
        bytes.extend_from_slice(
            enc.record(&rec, &mut frame)
                .map_err(|e| format!("rate log record: {e}"))?,
        );
    }
    let out = dir.join("rates-demo-node.hrlog");
    fs::write(&out, bytes).map_err(|e| format!("{}: {e}", out.display()))?;
    Ok(out)
}

/// `cargo build -p headroom-cli` (debug, as the tests build it); its path.
fn build_host_cli(ctx: &Ctx) -> Result<PathBuf, String> {
    let cargo = env::var_os("CARGO").unwrap_or_else(|| "cargo".into());
    run_inherit(Command::new(cargo).current_dir(&ctx.root).args([
        "build",
        "--quiet",
        "-p",
        "headroom-cli",
    ]))?;
    let target = env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .map(|p| if p.is_absolute() { p } else { ctx.root.join(p) })
        .unwrap_or_else(|| ctx.root.join("target"));
    let exe = target
        .join("debug")
        .join(format!("headroom{}", env::consts::EXE_SUFFIX));
    if exe.exists() {
        Ok(exe)
    } else {
        Err(format!(
            "built headroom-cli but {} is missing",
            exe.display()
        ))
    }
}

/// Binary logs to replay, made in `dir`.
fn gather_logs(ctx: &Ctx, headroom: &Path, dir: &Path) -> Result<Vec<PathBuf>, String> {
    let mut logs = Vec::new();
    for csv in files_with(&ctx.root.join("examples").join("logs"), "csv")? {
        let stem = csv.file_stem().and_then(|s| s.to_str()).unwrap_or("log");
        let out = dir.join(format!("log-{stem}.hrlog"));
        let mut c = Command::new(headroom);
        c.arg("convert").arg(&csv).arg(&out).arg("--force");
        let o = run_capture(&mut c, ctx.timeout)?;
        if !o.success {
            return Err(format!("`{}` failed: {}", show(&c), o.stderr.trim()));
        }
        logs.push(out);
    }
    let scenarios = ctx.root.join("examples").join("scenarios");
    let mut tomls = files_with(&scenarios, "toml")?;
    tomls.extend(files_with(&scenarios.join("faults"), "toml")?);
    for s in tomls {
        let stem = s.file_stem().and_then(|s| s.to_str()).unwrap_or("scenario");
        let fault = s
            .parent()
            .and_then(|p| p.file_name())
            .is_some_and(|n| n == "faults");
        let out = dir.join(format!(
            "{}{stem}.hrlog",
            if fault { "fault-" } else { "synth-" }
        ));
        let mut c = Command::new(headroom);
        c.args(["synth", "--scenario"])
            .arg(&s)
            .args([
                "--seed",
                SYNTH_SEED,
                "--records",
                SYNTH_RECORDS,
                "--force",
                "--out",
            ])
            .arg(&out);
        let o = run_capture(&mut c, ctx.timeout)?;
        if !o.success {
            return Err(format!("`{}` failed: {}", show(&c), o.stderr.trim()));
        }
        logs.push(out);
    }
    logs.push(write_rate_log(dir)?);
    Ok(logs)
}

fn files_with(dir: &Path, ext: &str) -> Result<Vec<PathBuf>, String> {
    if !dir.is_dir() {
        return Ok(Vec::new());
    }
    let mut v: Vec<PathBuf> = fs::read_dir(dir)
        .map_err(|e| format!("{}: {e}", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_file() && p.extension().is_some_and(|x| x == ext))
        .collect();
    v.sort();
    Ok(v)
}

/// The engine's replay of a binary log, as the firmware's decision frames
/// would say it.
fn engine_replay(log: &[u8]) -> Result<(Vec<DecisionRecord>, usize), String> {
    let mut rates = 0usize;
    let mut start = |h: Option<&headroom::record::LogHeader>| {
        let r = settings::for_log(h).map_err(|e| format!("controller settings: {e}"))?;
        rates = r.config.rates.len();
        if rates > 1 {
            // As the firmware does: the engine's invented demo node.
            let p = demo::demo_profile().map_err(|e| format!("demo profile: {e}"))?;
            Replay::<REPLAY_WINDOW>::with_energy(r.config, &p)
        } else {
            Replay::<REPLAY_WINDOW>::new(r.config)
        }
        .map_err(|e| format!("controller settings: {e}"))
    };
    let mut replay: Option<Replay<REPLAY_WINDOW>> = None;
    let mut failed: Option<String> = None;
    let mut out = Vec::new();
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut input = log;
    let mut on = |ev: Event| {
        if let Event::Frame {
            frame: Frame::Header { header, .. },
            ..
        } = ev
        {
            if replay.is_none() {
                match start(Some(&header)) {
                    Ok(r) => replay = Some(r),
                    Err(e) => failed = Some(e),
                }
            }
        }
        if let Event::Frame {
            frame: Frame::Record(r),
            ..
        } = ev
        {
            if replay.is_none() {
                match start(None) {
                    Ok(r) => replay = Some(r),
                    Err(e) => failed = Some(e),
                }
            }
            let Some(replay) = replay.as_mut() else {
                return;
            };
            let s = replay.step(&r);
            out.push(DecisionRecord {
                t_ms: s.t_ms,
                tx_dbm: s.chosen.0,
                outcome: s.outcome.code(),
                reason: s.reason.code(),
                rate: s.rate,
            });
        }
    };
    while let Some(ev) = dec.feed(&mut input) {
        on(ev);
    }
    if let Some(ev) = dec.finish() {
        on(ev);
    }
    match failed {
        Some(e) => Err(e),
        None => Ok((out, rates)),
    }
}

/// The decision frames the firmware wrote. Any damaged byte is an error:
/// the file went from QEMU to the host without a channel in between.
fn decode_decisions(bytes: &[u8]) -> Result<Vec<DecisionRecord>, String> {
    let mut out = Vec::new();
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut input = bytes;
    let mut err = None;
    let mut on = |ev: Event| match ev {
        Event::Frame {
            frame: Frame::Decision(d),
            ..
        } => out.push(d),
        Event::Frame {
            frame: Frame::Header { .. },
            ..
        } => {}
        Event::Frame { frame, offset, .. } => {
            err.get_or_insert(format!("unexpected frame {frame:?} at byte {offset}"));
        }
        Event::Damaged { offset, len, error } => {
            err.get_or_insert(format!("{len} damaged byte(s) at {offset}: {error}"));
        }
    };
    while let Some(ev) = dec.feed(&mut input) {
        on(ev);
    }
    if let Some(ev) = dec.finish() {
        on(ev);
    }
    match err {
        Some(e) => Err(e),
        None => Ok(out),
    }
}

/// `headroom replay --out` CSV: one row per record with at least the
/// columns `t_ms`, `chosen_dbm`, `outcome` (name) and `reason` (name).
fn parse_cli_csv(text: &str) -> Result<Vec<DecisionRecord>, String> {
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'));
    let (_, header) = lines.next().ok_or("empty CSV")?;
    let cols: Vec<&str> = header.split(',').map(str::trim).collect();
    let col = |names: &[&str]| {
        cols.iter()
            .position(|c| names.contains(c))
            .ok_or_else(|| format!("no column {} in header `{header}`", names.join(" or ")))
    };
    let i_t = col(&["t_ms"])?;
    let i_tx = col(&["chosen_dbm", "chosen_tx_dbm", "tx_dbm"])?;
    let i_out = col(&["outcome"])?;
    let i_reason = col(&["reason"])?;
    let mut out = Vec::new();
    for (n, line) in lines {
        let f: Vec<&str> = line.split(',').map(str::trim).collect();
        let get = |i: usize| {
            f.get(i)
                .copied()
                .ok_or_else(|| format!("line {}: too few fields", n + 1))
        };
        let t_ms = get(i_t)?
            .parse::<u64>()
            .map_err(|e| format!("line {}: t_ms: {e}", n + 1))?;
        let tx_dbm = get(i_tx)?
            .parse::<f32>()
            .map_err(|e| format!("line {}: chosen power: {e}", n + 1))?;
        let o = get(i_out)?;
        let outcome = [Outcome::Delivered, Outcome::Lost, Outcome::Unjudged]
            .into_iter()
            .find(|x| x.as_str() == o)
            .ok_or_else(|| format!("line {}: unknown outcome `{o}`", n + 1))?;
        let r = get(i_reason)?;
        let reason =
            Reason::from_name(r).ok_or_else(|| format!("line {}: unknown reason `{r}`", n + 1))?;
        out.push(DecisionRecord {
            t_ms,
            tx_dbm,
            outcome: outcome.code(),
            reason: reason.code(),
            rate: None,
        });
    }
    Ok(out)
}

/// Record-by-record comparison; the chosen power must be the same f32 bits.
fn compare(
    a_name: &str,
    a: &[DecisionRecord],
    b_name: &str,
    b: &[DecisionRecord],
) -> Result<(), String> {
    for (i, (x, y)) in a.iter().zip(b).enumerate() {
        let same = x.t_ms == y.t_ms
            && x.tx_dbm.to_bits() == y.tx_dbm.to_bits()
            && x.outcome == y.outcome
            && x.reason == y.reason
            && x.rate == y.rate;
        if !same {
            return Err(format!(
                "record {i} differs:\n  {a_name}: {}\n  {b_name}: {}",
                show_decision(x),
                show_decision(y)
            ));
        }
    }
    if a.len() != b.len() {
        return Err(format!(
            "{a_name} has {} decisions, {b_name} has {}",
            a.len(),
            b.len()
        ));
    }
    Ok(())
}

fn show_decision(d: &DecisionRecord) -> String {
    let outcome = Outcome::from_code(d.outcome).map_or("?", Outcome::as_str);
    let reason = Reason::from_code(d.reason).map_or("?", Reason::as_str);
    let rate = d.rate.map_or_else(|| "-".to_string(), |m| m.to_string());
    format!(
        "t_ms={} tx={} dBm (bits {:#010x}) outcome={outcome} reason={reason} rate={rate}",
        d.t_ms,
        d.tx_dbm,
        d.tx_dbm.to_bits()
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(t_ms: u64, tx: f32, outcome: u8, reason: u8) -> DecisionRecord {
        DecisionRecord {
            t_ms,
            tx_dbm: tx,
            outcome,
            reason,
            rate: None,
        }
    }

    #[test]
    fn compare_wants_identical_bits() {
        let a = [d(0, 14.0, 0, 0), d(1000, 13.0, 1, 2)];
        assert!(compare("a", &a, "b", &a).is_ok());
        let mut b = a;
        b[1].tx_dbm = f32::from_bits(13.0f32.to_bits() + 1);
        assert!(compare("a", &a, "b", &b).unwrap_err().contains("record 1"));
        assert!(compare("a", &a, "b", &a[..1])
            .unwrap_err()
            .contains("has 2 decisions"));
        let mut c = a;
        c[0].reason = 1;
        assert!(compare("a", &a, "b", &c).is_err());
    }

    #[test]
    fn reads_the_cli_csv_by_column_name() {
        let csv = "t_ms,logged_tx_dbm,chosen_dbm,outcome,reason\n0,14,14,delivered,warm_up\n60000,14,12.5,lost,hold\n";
        let v = parse_cli_csv(csv).unwrap();
        assert_eq!(v, vec![d(0, 14.0, 0, 0), d(60000, 12.5, 1, 1)]);
        assert!(parse_cli_csv("t_ms,outcome\n").is_err());
        assert!(parse_cli_csv("t_ms,chosen_dbm,outcome,reason\n0,14,fine,hold\n").is_err());
    }

    #[test]
    fn firmware_frames_round_trip() {
        use headroom::record::codec::{Encoder, MAX_FRAME};
        use headroom::record::LogHeader;
        let mut enc = Encoder::new();
        let mut buf = [0u8; MAX_FRAME];
        let mut bytes = enc
            .header(&LogHeader::default(), &mut buf)
            .unwrap()
            .to_vec();
        let want = [d(0, -3.0, 0, 1), d(5, 7.0, 2, 10)];
        for x in &want {
            bytes.extend_from_slice(enc.decision(x, &mut buf).unwrap());
        }
        assert_eq!(decode_decisions(&bytes).unwrap(), want);
        let last = bytes.len() - 3;
        bytes[last] ^= 0x40;
        assert!(decode_decisions(&bytes).unwrap_err().contains("damaged"));
    }
}
