//! `headroom tune`: replay a fleet of field logs under a grid of controller
//! settings and show which settings spend the least transmit power for the
//! packets they lose.
//!
//! ## What is replayed
//! Each log is one device: it is replayed on its own, from a fresh
//! controller, with the replay semantics of `headroom replay` (the engine's
//! `headroom::control::Replay`), the same logs (`crate::fleet::logs`) and
//! the same settings: the flags of `replay`, each log's header, `--config`,
//! the defaults, resolved per log by the engine. `tune` without a sweep
//! gives the totals of `replay`, bit for bit.
//!
//! The parts: [`sweep`] (the grammar and the grid), [`schedule`] (parallel
//! replays, a log decoded once per group of candidates), [`front`] (the
//! Pareto front and the choice, computed once for the table, the JSON and
//! the plot) and [`report`].
//!
//! ## Settings
//! Each `--sweep NAME=...` sets a controller setting by its key, above the
//! flags. Sweeping the judging rule (`required_snr_db`, `target_outage`) or
//! the radio's facts is refused unless `--incomparable`. Not sweepable: the
//! window (the engine's `REPLAY_WINDOW`), a level table and the EIRP cap.
//!
//! ## Candidates, front and best
//! The candidates are the default (candidate 0: the settings without any
//! sweep) and every combination of the grid (1..=N, the first `--sweep`
//! varying slowest). A candidate's fleet totals are the engine's `Fleet`:
//! Σ lost / Σ judged, `10·log10(Σ mW / Σ records)`, and each device against
//! its own target. The Pareto front is the set of candidates no other one
//! beats on both mean power and pooled loss. "best" is the candidate of
//! least mean power that meets the target (pooled; with `--each-device`,
//! every device too); ties go to the lower loss, then the lower number.

pub mod front;
pub mod report;
pub mod schedule;
pub mod sweep;

use std::io::{self, IsTerminal, Write};
use std::path::PathBuf;

use headroom::control::Fleet;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;

use crate::error::{CliError, CliResult};
use crate::fleet::logs;
use crate::fleet::settings::{Resolver, SettingArgs};
use crate::plot;
use front::Point;
use schedule::Done;
use sweep::{parse_sweep, Grid, Sweep};

/// (candidate, log) replays handed to the thread pool at a time. A constant,
/// not a function of the thread count, so that output and errors do not
/// depend on `--threads`.
const CHUNK: usize = 512;

/// Output format of `headroom tune`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum TuneFormat {
    /// The settings, the default, the Pareto front and the best setting.
    #[default]
    Table,
    /// One JSON object: every candidate, the front, the best, the default.
    Json,
    /// One JSON line per (log, candidate), with the linear sums to
    /// aggregate lines from many machines.
    Jsonl,
}

/// What a candidate's point on the front measures, against its loss.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum Objective {
    /// Mean transmit power (dBm, the mean of mW over every record).
    #[default]
    Power,
    /// Charge per delivered packet (µC; needs --energy): a lost packet costs
    /// its charge and delivers nothing.
    Charge,
    /// Mean current over the logs' time spans (µA; needs --energy): the
    /// battery's drain, sleep included; the lower, the longer it lasts.
    BatteryLife,
}

/// Arguments of `headroom tune`.
#[derive(clap::Args)]
pub struct Args {
    /// Field logs (`.csv` or `.hrlog`), one per device, or directories of
    /// them (their `.csv`/`.hrlog` files, sorted; not recursive).
    #[arg(value_name = "LOG", required = true)]
    logs: Vec<PathBuf>,
    /// A setting to sweep, by its key in the controller TOML:
    /// `NAME=FROM..TO:STEP` (e.g. `margin_step_db=0.25..1:0.25`),
    /// `NAME=A,B,C` (units allowed: `deadband_db=0.5dB,1dB`) or `NAME=A`.
    /// Repeat for a grid (their product). Without any, only the default is
    /// replayed.
    #[arg(long = "sweep", value_name = "NAME=FROM..TO:STEP", value_parser = parse_sweep)]
    sweeps: Vec<Sweep>,
    #[command(flatten)]
    settings: SettingArgs,
    /// Allow sweeping the judging rule (required_snr_db, target_outage) or
    /// the radio's facts; the results are marked as not comparable.
    #[arg(long)]
    incomparable: bool,
    /// Energy profile of the radio (TOML, as for `battery` and `replay`):
    /// cost every candidate's packets in charge.
    #[arg(long, value_name = "PROFILE.toml")]
    energy: Option<PathBuf>,
    /// What the front and the best minimise, against the loss: mean
    /// transmit power, charge per delivered packet, or mean current
    /// (battery life); the last two need --energy.
    #[arg(long, value_enum, default_value_t = Objective::Power)]
    objective: Objective,
    /// A candidate meets the target only if every device does (not only the
    /// pooled fleet).
    #[arg(long)]
    each_device: bool,
    #[command(flatten)]
    input: crate::logio::InputArgs,
    /// Format of the result.
    #[arg(long, value_enum, default_value_t = TuneFormat::Table)]
    format: TuneFormat,
    /// Table: list every candidate, not only the front.
    #[arg(long)]
    all: bool,
    /// Draw mean power against loss rate for every candidate (`.svg` or `.png`).
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<PathBuf>,
    /// Replace the `--plot` file if it exists (never an input).
    #[arg(long)]
    force: bool,
    /// No progress bar (it is also hidden when stderr is not a terminal).
    #[arg(long)]
    quiet: bool,
    /// Worker threads (default: one per core).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=1024))]
    threads: Option<u16>,
}

fn warn(msg: &str) {
    crate::diag::warn(msg);
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    let list = logs::expand(&args.logs, args.input.strict)?;
    crate::atomic::note_inputs(list.logs.iter().chain(&args.settings.config));
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    for (p, why) in &list.skipped {
        warn(&format!("{}: skipped: {why}", p.display()));
    }
    let logs = list.logs;
    for p in &logs {
        schedule::check_rereadable(p)?;
    }
    let names: Vec<String> = logs.iter().map(|p| p.display().to_string()).collect();
    let grid = Grid::new(args.sweeps.clone(), args.incomparable)?;
    let energy = match &args.energy {
        Some(p) => Some(crate::energy::load(p)?),
        None => None,
    };
    let resolver = Resolver::new(&args.settings)?
        .with_profile_rates(energy.as_ref().map(|e| e.rates).unwrap_or_default());
    if grid
        .sweeps
        .iter()
        .any(|s| s.setting == headroom::control::settings::Setting::Rates)
        && energy.is_none()
    {
        return Err(CliError::arg(
            "--sweep",
            "rates: choosing among rates costs each packet: add --energy PROFILE.toml",
        ));
    }
    if args.objective != Objective::Power && energy.is_none() {
        return Err(CliError::arg(
            "--objective",
            "charge and battery-life need an energy profile: add --energy PROFILE.toml",
        ));
    }
    let profile = energy.as_ref().map(|e| &e.profile);
    let first = logs
        .first()
        .ok_or_else(|| CliError::arg("LOG", "name at least one log"))?;
    // Refuse a bad combination before any replay (against the first log;
    // the others are checked as they run).
    let opts = args
        .input
        .options_with_rates(&energy.as_ref().map(|e| e.rates).unwrap_or_default());
    schedule::check_grid(first, &opts, &resolver, &grid)?;
    let base = crate::fleet::open(first, &opts, &resolver, None)?
        .settings
        .resolved;

    let candidates = grid.len + 1;
    let nlogs = logs.len();
    let jobs = candidates * nlogs;
    let bar = if args.quiet || !io::stderr().is_terminal() {
        ProgressBar::with_draw_target(Some(jobs as u64), ProgressDrawTarget::hidden())
    } else {
        let b = ProgressBar::new(jobs as u64);
        if let Ok(style) = ProgressStyle::with_template(
            "{elapsed_precise} [{bar:40}] {pos}/{len} replays, eta {eta}",
        ) {
            b.set_style(style.progress_chars("=> "));
        }
        b
    };
    let pool = {
        let mut b = rayon::ThreadPoolBuilder::new();
        if let Some(n) = args.threads {
            b = b.num_threads(usize::from(n));
        }
        b.build()
            .map_err(|e| CliError::Io(format!("cannot start worker threads: {e}")))?
    };

    let mut fleets = vec![Fleet::new(); candidates];
    let mut energies = vec![headroom::energy::ReplayEnergy::new(None); candidates];
    let mut warnings: Vec<String> = Vec::new();
    let mut out = io::BufWriter::new(crate::output::Stdout);
    let mut start = 0;
    while start < jobs {
        let end = (start + CHUNK).min(jobs);
        // Enough groups per log to keep every thread busy when there are
        // fewer logs than threads (the results do not depend on it).
        let per_log = pool.current_num_threads().div_ceil(nlogs).max(1);
        let groups = schedule::group_jobs(start, end, nlogs, per_log);
        let mut done: Vec<(usize, CliResult<Done>)> = pool.install(|| {
            groups
                .into_par_iter()
                .flat_map_iter(|(log, js)| {
                    let n = js.len();
                    let r = match logs.get(log) {
                        Some(path) => {
                            schedule::replay_group(path, &opts, &resolver, &grid, profile, &js)
                        }
                        None => js
                            .iter()
                            .map(|&(j, _)| {
                                (j, Err(CliError::Input("log index out of range".into())))
                            })
                            .collect(),
                    };
                    bar.inc(n as u64);
                    r
                })
                .collect()
        });
        done.sort_by_key(|(j, _)| *j);
        for (j, d) in done {
            let d = match d {
                Ok(d) => d,
                Err(e) => {
                    bar.finish_and_clear();
                    return Err(e);
                }
            };
            let (cand, log) = (j / nlogs, j % nlogs);
            if cand == 0 {
                warnings.extend(d.warnings);
            }
            if let Some(f) = fleets.get_mut(cand) {
                f.add(&d.summary, d.target);
            }
            if let (Some(e), Some(total)) = (&d.energy, energies.get_mut(cand)) {
                total.merge(e);
            }
            if args.format == TuneFormat::Jsonl {
                let name = names.get(log).map_or("", String::as_str);
                let line = report::jsonl_line(&grid, cand, name, &d.summary)?;
                writeln!(out, "{line}").map_err(|e| CliError::Io(format!("stdout: {e}")))?;
            }
        }
        start = end;
    }
    bar.finish_and_clear();
    for w in &warnings {
        warn(w);
    }

    let target = base.config.target_outage;
    let points: Vec<Option<Point>> = fleets
        .iter()
        .zip(&energies)
        .map(|(f, e)| {
            let cost = match args.objective {
                Objective::Power => f.total.mean_tx_dbm()?.0,
                Objective::Charge => e.replayed.charge_per_delivered()?.0,
                Objective::BatteryLife => e.replayed.mean_current()?.0,
            };
            Some((f64::from(cost), f64::from(f.total.outage_fraction()?)))
        })
        .collect();
    let on_front = front::pareto_front(&points);
    let front_order = front::front_order(&points, &on_front);
    let mut result = report::TuneResult {
        grid: &grid,
        logs: &names,
        fleets: &fleets,
        points: &points,
        front: &on_front,
        front_order: &front_order,
        best: None,
        beats: None,
        target,
        each_device: args.each_device,
        base: &base,
        objective: args.objective,
        energies: energy.as_ref().map(|_| energies.as_slice()),
    };
    let best = front::cheapest(&points, |k, _| result.meets(k));
    let beats = front::beats_default(&points, |k| result.meets(k));
    result.best = best;
    result.beats = beats;

    match args.format {
        TuneFormat::Jsonl => {}
        TuneFormat::Json => {
            let s = crate::output::json_text(&result.json())?;
            writeln!(out, "{s}").map_err(|e| CliError::Io(format!("stdout: {e}")))?;
        }
        TuneFormat::Table => {
            let s = result.table(args.all);
            out.write_all(s.as_bytes())
                .map_err(|e| CliError::Io(format!("stdout: {e}")))?;
        }
    }
    out.flush()
        .map_err(|e| CliError::Io(format!("stdout: {e}")))?;
    drop(out);

    if let Some(p) = &args.plot {
        // Points with a loss rate, and where each candidate landed among them.
        let mut index = vec![None; candidates];
        let mut pts: Vec<(f32, f32, String, bool)> = Vec::new();
        for (k, pt) in points.iter().enumerate() {
            if let Some((tx, loss)) = pt {
                if let Some(slot) = index.get_mut(k) {
                    *slot = Some(pts.len());
                }
                #[allow(clippy::cast_possible_truncation)]
                pts.push((
                    *tx as f32,
                    *loss as f32,
                    if k == 0 {
                        "default".to_string()
                    } else {
                        format!("#{k}")
                    },
                    result.meets(k),
                ));
            }
        }
        let at = |k: usize| index.get(k).copied().flatten();
        let marks = plot::FrontMarks {
            front: front_order.iter().filter_map(|&k| at(k)).collect(),
            best: best.and_then(at),
            default: at(0),
            x_label: Some(
                match args.objective {
                    Objective::Power => "mean transmit power (dBm)",
                    Objective::Charge => "charge per delivered packet (µC)",
                    Objective::BatteryLife => "mean current, sleep included (µA)",
                }
                .to_string(),
            ),
        };
        let title = format!(
            "headroom tune: {} settings over {} logs",
            candidates,
            logs.len()
        );
        plot::pareto_plot(p, args.force, &title, &pts, &marks, target)?;
    }
    Ok(())
}
