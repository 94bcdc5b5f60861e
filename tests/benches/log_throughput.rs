//! Decode-only and decode-plus-replay throughput of a binary log file, in
//! an optimised build, for `cargo xtask bench`'s ratio "replay time ÷
//! decode-only time".
//!
//! `log_throughput (decode|replay) FILE.hrlog RUNS` reads the file in
//! 64 KiB chunks (as a streaming reader does), feeds the engine's
//! `FrameDecoder`, and with `replay` steps a `Replay<32>` with the default
//! settings over every record. Prints `records=… best_s=…` (best of RUNS).
//! Under `cargo bench` (which passes `--bench` and no file) it does nothing.

use std::fs::File;
use std::hint::black_box;
use std::io::Read;
use std::process::ExitCode;
use std::time::Instant;

use headroom::control::REPLAY_WINDOW;
use headroom::control::{ControllerConfig, Replay};
use headroom::record::codec::{Event, Frame, FrameDecoder, MAX_FRAME};

fn pass(path: &str, replay: bool) -> Result<u64, String> {
    let mut f = File::open(path).map_err(|e| format!("cannot open {path}: {e}"))?;
    let mut dec = FrameDecoder::<MAX_FRAME>::new();
    let mut rp = Replay::<REPLAY_WINDOW>::new(ControllerConfig::default())
        .map_err(|e| format!("replay settings: {e}"))?;
    let mut buf = vec![0u8; 64 * 1024];
    let mut records = 0u64;
    loop {
        let n = f
            .read(&mut buf)
            .map_err(|e| format!("cannot read {path}: {e}"))?;
        if n == 0 {
            break;
        }
        let mut input: &[u8] = buf.get(..n).unwrap_or(&[]);
        while let Some(ev) = dec.feed(&mut input) {
            if let Event::Frame {
                frame: Frame::Record(r),
                ..
            } = ev
            {
                records += 1;
                if replay {
                    black_box(rp.step(&r));
                }
            }
        }
    }
    black_box(rp.summary().records);
    Ok(records)
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let [mode, path, runs] = args.as_slice() else {
        if args.is_empty() {
            return ExitCode::SUCCESS;
        }
        eprintln!("usage: log_throughput (decode|replay) FILE.hrlog RUNS");
        return ExitCode::from(2);
    };
    let replay = match mode.as_str() {
        "decode" => false,
        "replay" => true,
        other => {
            eprintln!("log_throughput: unknown mode `{other}` (want decode or replay)");
            return ExitCode::from(2);
        }
    };
    let runs = match runs.parse::<u32>() {
        Ok(r) if r > 0 => r,
        _ => {
            eprintln!("log_throughput: RUNS must be a whole number > 0, not `{runs}`");
            return ExitCode::from(2);
        }
    };
    let mut best = f64::INFINITY;
    let mut records = 0;
    for _ in 0..runs {
        let t = Instant::now();
        match pass(path, replay) {
            Ok(n) => records = n,
            Err(e) => {
                eprintln!("log_throughput: {e}");
                return ExitCode::FAILURE;
            }
        }
        best = best.min(t.elapsed().as_secs_f64());
    }
    println!("mode={mode} records={records} best_s={best:.6}");
    ExitCode::SUCCESS
}
