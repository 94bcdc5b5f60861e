//! A fixed number of controller updates for `valgrind --tool=callgrind`.
//!
//! `update_callgrind update N` runs N updates of a `Controller<32>` over the
//! bench observation mix; `update_callgrind baseline N` walks the same
//! observations without updating. Instructions per update are
//! `(I(update, N₂) − I(update, N₁) − I(baseline, N₂) + I(baseline, N₁)) / (N₂ − N₁)`,
//! which cancels start-up, the mix's generation and the loop itself;
//! `cargo xtask bench` does this arithmetic. `update_callgrind rate N`
//! prints the host's updates per second (best of 20 passes over N). Under `cargo bench` (which
//! passes `--bench`) it runs a short self-check and exits.

use std::hint::black_box;
use std::process::ExitCode;

#[allow(dead_code)] // each bench uses part of the shared helpers
mod common;

/// Observations generated for every run (N ≤ this).
const CALLGRIND_MIX_LEN: usize = 65_536;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let (mode, n) = match args.as_slice() {
        [] => ("update", 1_000usize),
        [mode, n] => match n.parse::<usize>() {
            Ok(n) => (mode.as_str(), n),
            Err(e) => {
                eprintln!("update_callgrind: `{n}` is not a count: {e}");
                return ExitCode::from(2);
            }
        },
        _ => {
            eprintln!("usage: update_callgrind (update|baseline) N");
            return ExitCode::from(2);
        }
    };
    // The same mix for every run, so its generation cancels in the
    // differences; N may not exceed it (time must not run backwards).
    let mix = common::observation_mix(CALLGRIND_MIX_LEN);
    if n > mix.len() {
        eprintln!(
            "update_callgrind: N = {n} is more than the {} observations of the mix",
            mix.len()
        );
        return ExitCode::from(2);
    }
    let mut ctl = common::controller();
    let mut acc = 0.0_f32;
    match mode {
        "update" => {
            for obs in mix.iter().take(n) {
                let d = ctl.update(black_box(obs));
                acc += black_box(d.tx.0);
            }
        }
        "baseline" => {
            for obs in mix.iter().take(n) {
                let o = black_box(obs);
                acc += black_box(o.t_ms() as f32);
            }
        }
        "rate" => {
            // Wall-clock rate for the table (not an assertion): best of 20
            // passes, each from a fresh controller.
            let mut best = f64::INFINITY;
            for _ in 0..20 {
                let mut c = common::controller();
                let t = std::time::Instant::now();
                for obs in mix.iter().take(n) {
                    let d = c.update(black_box(obs));
                    acc += black_box(d.tx.0);
                }
                best = best.min(t.elapsed().as_secs_f64());
            }
            println!("updates_per_s={:.0}", n as f64 / best);
        }
        other => {
            eprintln!("update_callgrind: unknown mode `{other}` (want update, baseline or rate)");
            return ExitCode::from(2);
        }
    }
    println!(
        "mode={mode} n={n} checksum={acc} state_bytes={}",
        core::mem::size_of::<headroom::control::Controller<{ common::W }>>()
    );
    ExitCode::SUCCESS
}
