//! `headroom tune`: replay a fleet of field logs under a grid of controller
//! settings and show which settings spend the least transmit power for the
//! packets they lose.
//!
//! ## What is replayed
//! Each log is one device: it is replayed on its own, from a fresh
//! controller, with the engine's replay semantics (`headroom::control::Replay`,
//! the same as `headroom replay`). Unlike `replay`, which chains the logs it
//! is given into one stream, `tune` never carries state from one log to the
//! next, so the (setting, log) replays are independent. They run in
//! parallel (rayon) in groups of one log and several settings: a group
//! decodes its log once, a batch of records at a time, and runs every one of
//! its settings over each batch, in constant memory.
//!
//! A directory among the LOG arguments stands for the `.csv` and `.hrlog`
//! files directly inside it, sorted by name; subdirectories are not entered
//! (name them, or use a shell glob, to include them).
//!
//! ## Settings
//! Per log, the settings are built as in `replay`: the defaults of
//! `ControllerConfig::sub_ghz_node`; the radio fields of the log's header
//! for the keys the `--config` file does not set; the `--config` file;
//! `--target-outage`. Then each `--sweep NAME=...` sets the field `NAME` of
//! `ControllerConfig` by its serde name (a dotted path reaches into a nested
//! one: `steps.uniform`). The field is set through serde (the config is
//! serialised to JSON, the key replaced, the result deserialised and
//! validated), so every numeric field is sweepable without a list kept
//! here. Not sweepable: the window of the controller (a const generic,
//! [`super::replay::WINDOW`] readings in the host tools) and the level table
//! `steps.table` (a list: compare tables with separate `--config` files).
//! When `start_tx_dbm` is neither set by `--config` nor swept, it is moved
//! to the highest allowed power if a swept limit leaves it outside the
//! radio's range, as `replay` does for the log header.
//!
//! ## Candidates, front and best
//! The candidates are the default (the settings above without any sweep,
//! candidate 0) and every combination of the grid (candidates 1..=N, the
//! first `--sweep` varying slowest). Per candidate the fleet totals add the
//! per-log counts and linear sums: the loss rate is Σ lost / Σ judged, the
//! mean power is `10·log10(Σ mW / Σ records)` over every record of every log.
//! The Pareto front is the set of candidates that no other candidate beats
//! on both mean power and loss rate (at least as good on both and better on
//! one). "best" is the candidate of least mean power whose loss rate meets
//! the target (`--target-outage`, else the config's `target_outage`); ties
//! go to the lower loss, then to the lower candidate number. Candidates
//! without a judged record have no loss rate and take no part in the front.

use std::fmt::Write as _;
use std::io::{self, IsTerminal, Write};
use std::path::{Path, PathBuf};

use headroom::control::{ControllerConfig, ExplicitSettings, Reason, Replay, Summary};
use headroom::record::LogHeader;
use headroom::units::{Dbm, Milliwatts};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;
use serde_json::{Map, Value};

use super::replay::{load_toml, probability, WINDOW};
use crate::error::{CliError, CliResult};
use crate::output::json_num;
use crate::{logio, plot};

/// Most combinations a grid may have.
pub const MAX_COMBINATIONS: usize = 10_000;

/// (setting, log) replays handed to the thread pool at a time. A constant,
/// not a function of the thread count, so that output and errors do not
/// depend on `--threads`.
const CHUNK: usize = 512;

/// Output format of `headroom tune`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum TuneFormat {
    /// The default, the Pareto front and the best setting, aligned.
    #[default]
    Table,
    /// One JSON object: every candidate, the front, the best, the default.
    Json,
    /// One JSON line per (log, candidate), with the linear sums to
    /// aggregate lines from many machines.
    Jsonl,
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
    /// `NAME=A,B,C` or `NAME=A`. Repeat for a grid (their product). Without
    /// any, only the default is replayed (per-log lines with `--format jsonl`).
    #[arg(long = "sweep", value_name = "NAME=FROM..TO:STEP", value_parser = parse_sweep)]
    sweeps: Vec<Sweep>,
    /// Controller settings the sweeps start from (TOML, as for `replay`).
    #[arg(long, value_name = "CTRL.toml")]
    config: Option<PathBuf>,
    /// Loss rate a setting must meet: `0.01` or `1%` (also the controller's
    /// `target_outage` unless swept).
    #[arg(long, value_parser = probability, value_name = "P")]
    target_outage: Option<f32>,
    /// Format of the result.
    #[arg(long, value_enum, default_value_t = TuneFormat::Table)]
    format: TuneFormat,
    /// Table: list every candidate, not only the front.
    #[arg(long)]
    all: bool,
    /// Draw mean power against loss rate for every candidate (`.svg` or `.png`).
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<PathBuf>,
    /// Replace the `--plot` file if it exists.
    #[arg(long)]
    force: bool,
    /// No progress bar (it is also hidden when stderr is not a terminal).
    #[arg(long)]
    quiet: bool,
    /// Worker threads (default: one per core).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=1024))]
    threads: Option<u16>,
}

/// One `--sweep`: a setting's name and the values it takes.
#[derive(Clone, Debug, PartialEq)]
pub struct Sweep {
    name: String,
    values: Vec<f64>,
}

const SWEEP_FORM: &str =
    "expected NAME=FROM..TO:STEP, NAME=A,B,C or NAME=A (e.g. margin_step_db=0.25..1:0.25)";

fn sweep_number(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let x: f64 = t
        .parse()
        .map_err(|_| format!("'{t}' is not a number ({SWEEP_FORM})"))?;
    if x.is_finite() {
        Ok(x)
    } else {
        Err(format!("'{t}' is not a finite number"))
    }
}

/// A value on the grid without the 0.30000000000000004 of repeated adding.
fn tidy(x: f64) -> f64 {
    format!("{x:.12e}").parse().unwrap_or(x)
}

/// Parse `NAME=FROM..TO:STEP`, `NAME=A,B,C` or `NAME=A`.
fn parse_sweep(s: &str) -> Result<Sweep, String> {
    let (name, spec) = s.split_once('=').ok_or_else(|| SWEEP_FORM.to_string())?;
    let name = name.trim();
    if name.is_empty() {
        return Err(format!("no setting named before '=' ({SWEEP_FORM})"));
    }
    let spec = spec.trim();
    let values = if let Some((from, rest)) = spec.split_once("..") {
        let (to, step) = rest
            .split_once(':')
            .ok_or_else(|| format!("range '{spec}' needs a step: FROM..TO:STEP"))?;
        let (from, to, step) = (sweep_number(from)?, sweep_number(to)?, sweep_number(step)?);
        if from > to {
            return Err(format!("range '{spec}': FROM {from} is above TO {to}"));
        }
        if step <= 0.0 {
            return Err(format!(
                "range '{spec}': STEP {step} must be greater than zero"
            ));
        }
        // Values FROM + k·STEP up to TO, TO included when it is on the grid
        // to within rounding.
        let span = (to - from) / step;
        if !span.is_finite() || span >= MAX_COMBINATIONS as f64 {
            return Err(format!(
                "range '{spec}' has more than {MAX_COMBINATIONS} values (the most a grid may have)"
            ));
        }
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // 0 ≤ span < 10⁴
        let n = (span + 1e-9).floor() as usize + 1;
        (0..n).map(|k| tidy(from + k as f64 * step)).collect()
    } else {
        spec.split(',')
            .map(sweep_number)
            .collect::<Result<Vec<f64>, String>>()?
    };
    Ok(Sweep {
        name: name.to_string(),
        values,
    })
}

/// Where a sweep writes in the serialised config, and what it accepts.
#[derive(Clone, Debug)]
struct Target {
    path: Vec<String>,
    integer: bool,
}

/// Dotted paths of the numeric settings of `v`, for error messages.
fn numeric_paths(v: &Value, prefix: &str, out: &mut Vec<String>) {
    if let Value::Object(m) = v {
        for (k, x) in m {
            let p = if prefix.is_empty() {
                k.clone()
            } else {
                format!("{prefix}.{k}")
            };
            match x {
                Value::Number(_) => out.push(p),
                Value::Object(_) => numeric_paths(x, &p, out),
                _ => {}
            }
        }
    }
}

/// The setting `name` of the serialised config `v`.
fn locate(v: &Value, name: &str) -> CliResult<Target> {
    let path: Vec<String> = name.split('.').map(str::to_string).collect();
    let mut at = v;
    for part in &path {
        match at.get(part) {
            Some(x) => at = x,
            None => {
                let mut known = Vec::new();
                numeric_paths(v, "", &mut known);
                return Err(CliError::arg(
                    "--sweep",
                    format!(
                        "'{name}' is not a setting of the controller here (sweepable: {})",
                        known.join(", ")
                    ),
                ));
            }
        }
    }
    match at {
        Value::Number(n) => Ok(Target {
            path,
            integer: n.is_u64() || n.is_i64(),
        }),
        _ => Err(CliError::arg(
            "--sweep",
            format!(
                "'{name}' is not one number and cannot be swept (a level table: compare tables \
                 with separate --config files; the window is fixed at {WINDOW} readings)"
            ),
        )),
    }
}

/// Write `x` at `t` in the serialised config.
fn put(v: &mut Value, t: &Target, name: &str, x: f64) -> CliResult {
    let new = if t.integer {
        if x.fract() != 0.0 || x.abs() > 9.0e15 {
            return Err(CliError::arg(
                "--sweep",
                format!("{name} takes whole numbers, not {x}"),
            ));
        }
        #[allow(clippy::cast_possible_truncation)] // whole and within ±9e15
        Value::from(x as i64)
    } else {
        Value::from(x)
    };
    let mut at = v;
    for part in &t.path {
        at = at.get_mut(part).ok_or_else(|| {
            CliError::arg(
                "--sweep",
                format!("'{name}' is not a setting of the controller here"),
            )
        })?;
    }
    *at = new;
    Ok(())
}

/// The grid: the sweeps, where they write, and its size.
struct Grid {
    sweeps: Vec<Sweep>,
    targets: Vec<Target>,
    len: usize,
}

impl Grid {
    fn new(sweeps: Vec<Sweep>, base: &Value) -> CliResult<Grid> {
        // No sweep: no combination, only the default is replayed.
        let mut len: usize = usize::from(!sweeps.is_empty());
        let mut targets = Vec::with_capacity(sweeps.len());
        for (k, s) in sweeps.iter().enumerate() {
            if sweeps.iter().take(k).any(|o| o.name == s.name) {
                return Err(CliError::arg(
                    "--sweep",
                    format!("'{}' is swept twice", s.name),
                ));
            }
            targets.push(locate(base, &s.name)?);
            len = len.saturating_mul(s.values.len());
        }
        if len > MAX_COMBINATIONS {
            return Err(CliError::arg(
                "--sweep",
                format!(
                    "the grid has {len} combinations; at most {MAX_COMBINATIONS} (use coarser steps or fewer settings)"
                ),
            ));
        }
        Ok(Grid {
            sweeps,
            targets,
            len,
        })
    }

    /// The values of combination `k` (0-based), first sweep slowest.
    fn values(&self, k: usize) -> Vec<f64> {
        let mut rest = k;
        let mut out = vec![0.0; self.sweeps.len()];
        for (slot, s) in out.iter_mut().zip(&self.sweeps).rev() {
            let n = s.values.len().max(1);
            *slot = s.values.get(rest % n).copied().unwrap_or(f64::NAN);
            rest /= n;
        }
        out
    }

    fn swept(&self, name: &str) -> bool {
        self.sweeps.iter().any(|s| s.name == name)
    }

    /// The settings of combination `k` as they appear in JSON.
    fn settings_json(&self, k: usize) -> Map<String, Value> {
        let mut m = Map::new();
        for ((s, t), x) in self.sweeps.iter().zip(&self.targets).zip(self.values(k)) {
            let v = if t.integer {
                #[allow(clippy::cast_possible_truncation)] // checked whole by `put`
                Value::from(x as i64)
            } else {
                #[allow(clippy::cast_possible_truncation)] // the config holds f32
                json_num(x as f32)
            };
            m.insert(s.name.clone(), v);
        }
        m
    }

    fn label(&self, k: usize) -> String {
        self.settings_json(k)
            .iter()
            .map(|(n, v)| format!("{n}={v}"))
            .collect::<Vec<_>>()
            .join(" ")
    }

    /// The config of combination `k` on top of `base` (`None`: the default).
    fn config(
        &self,
        base: &ControllerConfig,
        start_set: bool,
        k: Option<usize>,
    ) -> CliResult<ControllerConfig> {
        let mut cfg = *base;
        if let Some(k) = k {
            let mut v = serde_json::to_value(base).map_err(|e| {
                CliError::Input(format!("controller settings: cannot serialise: {e}"))
            })?;
            for ((s, t), x) in self.sweeps.iter().zip(&self.targets).zip(self.values(k)) {
                put(&mut v, t, &s.name, x)?;
            }
            cfg = serde_json::from_value(v).map_err(|e| {
                CliError::arg(
                    "--sweep",
                    format!("{}: the controller refuses it: {e}", self.label(k)),
                )
            })?;
        }
        if !start_set && !self.swept("start_tx_dbm") {
            let ceiling = cfg.tx_ceiling();
            if cfg.start_tx_dbm.0 > ceiling.0 || cfg.start_tx_dbm.0 < cfg.min_tx_dbm.0 {
                cfg.start_tx_dbm = ceiling;
            }
        }
        cfg.validate().map_err(|e| match k {
            Some(k) => CliError::arg(
                "--sweep",
                format!("{}: the controller refuses it: {e}", self.label(k)),
            ),
            None => CliError::Input(format!("controller settings: {e}")),
        })?;
        Ok(cfg)
    }
}

/// A log's settings before the sweeps: defaults, header, TOML, target.
fn log_base(
    toml: Option<&(ControllerConfig, Vec<String>)>,
    header: Option<&LogHeader>,
    target: Option<f32>,
) -> ControllerConfig {
    let (mut cfg, keys): (ControllerConfig, &[String]) = match toml {
        Some((c, k)) => (*c, k.as_slice()),
        None => (ControllerConfig::sub_ghz_node(), &[]),
    };
    if let Some(h) = header {
        // The same rule as `headroom replay` and the firmware: the engine's.
        cfg.apply_log_header(
            h,
            ExplicitSettings::from_keys(keys.iter().map(String::as_str)),
        );
    }
    if let Some(p) = target {
        cfg.target_outage = p;
    }
    cfg
}

/// Fleet totals of one candidate (or one log of it).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Totals {
    records: u64,
    judged: u64,
    lost: u64,
    power_changes: u64,
    max_tx_used: Option<f32>,
    ignored: [u64; Reason::COUNT],
    /// Σ chosen power over the records, mW.
    tx_mw_sum: f64,
    /// Σ highest allowed power over the records, mW (the reference of the saving).
    max_allowed_mw_sum: f64,
}

impl Totals {
    const ZERO: Totals = Totals {
        records: 0,
        judged: 0,
        lost: 0,
        power_changes: 0,
        max_tx_used: None,
        ignored: [0; Reason::COUNT],
        tx_mw_sum: 0.0,
        max_allowed_mw_sum: 0.0,
    };

    fn of_replay(s: &Summary) -> Totals {
        Totals {
            records: s.records,
            judged: s.judged,
            lost: s.lost,
            power_changes: s.power_changes,
            max_tx_used: s.max_tx_dbm_used.map(|d| d.0),
            ignored: s.ignored_readings,
            tx_mw_sum: s.tx_mw_sum(),
            #[allow(clippy::cast_precision_loss)] // exact below 2⁵³ records
            max_allowed_mw_sum: f64::from(s.max_allowed.to_milliwatts().0) * s.records as f64,
        }
    }

    fn add(&mut self, o: &Totals) {
        self.records += o.records;
        self.judged += o.judged;
        self.lost += o.lost;
        self.power_changes += o.power_changes;
        self.max_tx_used = match (self.max_tx_used, o.max_tx_used) {
            (Some(a), Some(b)) => Some(a.max(b)),
            (a, b) => a.or(b),
        };
        for (a, b) in self.ignored.iter_mut().zip(o.ignored.iter()) {
            *a += b;
        }
        self.tx_mw_sum += o.tx_mw_sum;
        self.max_allowed_mw_sum += o.max_allowed_mw_sum;
    }

    /// Lost / judged.
    #[allow(clippy::cast_precision_loss)]
    fn outage(&self) -> Option<f64> {
        (self.judged > 0).then(|| self.lost as f64 / self.judged as f64)
    }

    /// The mean of `sum` over the records, in dBm.
    #[allow(clippy::cast_precision_loss, clippy::cast_possible_truncation)]
    fn mean_dbm(&self, sum: f64) -> Option<Dbm> {
        if self.records == 0 {
            return None;
        }
        Dbm::from_milliwatts(Milliwatts((sum / self.records as f64) as f32)).ok()
    }

    fn mean_tx(&self) -> Option<Dbm> {
        self.mean_dbm(self.tx_mw_sum)
    }

    fn saving_db(&self) -> Option<f32> {
        Some(self.mean_dbm(self.max_allowed_mw_sum)?.0 - self.mean_tx()?.0)
    }

    /// (mean power in dBm, loss rate): the point on the plane of the front.
    fn key(&self) -> Option<(f64, f64)> {
        Some((f64::from(self.mean_tx()?.0), self.outage()?))
    }

    /// The keys of `headroom replay --format json`, plus `lost`.
    #[allow(clippy::cast_possible_truncation)] // a fraction in [0, 1]
    fn json(&self, m: &mut Map<String, Value>) {
        let opt = |x: Option<f32>| x.map_or(Value::Null, json_num);
        let mut ignored = Map::new();
        for r in Reason::ALL.iter().filter(|r| r.is_ignored_reading()) {
            ignored.insert(
                r.as_str().to_string(),
                self.ignored.get(r.index()).copied().unwrap_or(0).into(),
            );
        }
        m.insert("records".into(), self.records.into());
        m.insert("judged".into(), self.judged.into());
        m.insert("lost".into(), self.lost.into());
        m.insert(
            "outage_fraction".into(),
            opt(self.outage().map(|x| x as f32)),
        );
        m.insert("mean_tx_dbm".into(), opt(self.mean_tx().map(|d| d.0)));
        m.insert("energy_saving_db".into(), opt(self.saving_db()));
        m.insert("power_changes".into(), self.power_changes.into());
        m.insert("max_tx_dbm_used".into(), opt(self.max_tx_used));
        m.insert("ignored_readings".into(), Value::Object(ignored));
    }
}

/// Which candidates are on the Pareto front of (power, loss), both to be
/// low: `true` for those no other candidate beats on both (at least as good
/// on both, better on one). Candidates without a point are not on it.
fn pareto_front(points: &[Option<(f64, f64)>]) -> Vec<bool> {
    let mut order: Vec<(usize, (f64, f64))> = points
        .iter()
        .enumerate()
        .filter_map(|(k, p)| p.map(|p| (k, p)))
        .collect();
    order.sort_by(|a, b| {
        a.1 .0
            .total_cmp(&b.1 .0)
            .then(a.1 .1.total_cmp(&b.1 .1))
            .then(a.0.cmp(&b.0))
    });
    let mut on = vec![false; points.len()];
    // Walk by rising power, in groups of equal power; `lowest` is the least
    // loss at a lower power. In a group only its least loss can be on the
    // front, and only if it is below `lowest`.
    let mut lowest = f64::INFINITY;
    let mut i = 0;
    while let Some(&(_, (tx, _))) = order.get(i) {
        let group: Vec<(usize, f64)> = order
            .iter()
            .skip(i)
            .take_while(|(_, p)| p.0 == tx)
            .map(|&(k, p)| (k, p.1))
            .collect();
        i += group.len().max(1);
        let least = group.iter().map(|g| g.1).fold(f64::INFINITY, f64::min);
        if least < lowest {
            for (k, l) in &group {
                if *l == least {
                    if let Some(slot) = on.get_mut(*k) {
                        *slot = true;
                    }
                }
            }
            lowest = least;
        }
    }
    on
}

/// The candidate of least power among those whose point passes `keep`;
/// ties to the lower loss, then the lower index.
fn cheapest(
    points: &[Option<(f64, f64)>],
    keep: impl Fn(usize, &(f64, f64)) -> bool,
) -> Option<usize> {
    points
        .iter()
        .enumerate()
        .filter_map(|(k, p)| p.filter(|p| keep(k, p)).map(|p| (k, p)))
        .min_by(|a, b| {
            a.1 .0
                .total_cmp(&b.1 .0)
                .then(a.1 .1.total_cmp(&b.1 .1))
                .then(a.0.cmp(&b.0))
        })
        .map(|(k, _)| k)
}

/// The candidate of least power among those meeting the target.
fn best_of(points: &[Option<(f64, f64)>], target: f32) -> Option<usize> {
    #[allow(clippy::cast_possible_truncation)]
    cheapest(points, |_, p| (p.1 as f32) <= target)
}

/// The setting of the grid (candidate ≥ 1) of least power that loses no
/// more than the default (candidate 0), if it spends less power than it.
fn beats_default(points: &[Option<(f64, f64)>]) -> Option<usize> {
    let d = points.first().copied().flatten()?;
    let k = cheapest(points, |k, p| k > 0 && p.1 <= d.1)?;
    let p = points.get(k).copied().flatten()?;
    (p.0 < d.0).then_some(k)
}

/// The LOG arguments with directories expanded.
fn expand_logs(args: &[PathBuf]) -> CliResult<Vec<PathBuf>> {
    let mut out = Vec::new();
    for p in args {
        if p.is_dir() {
            let rd = std::fs::read_dir(p)
                .map_err(|e| CliError::Io(format!("{}: cannot list: {e}", p.display())))?;
            let mut found = Vec::new();
            for entry in rd {
                let entry = entry
                    .map_err(|e| CliError::Io(format!("{}: cannot list: {e}", p.display())))?;
                let path = entry.path();
                let is_log = matches!(
                    path.extension().and_then(|e| e.to_str()),
                    Some("csv") | Some(logio::BINARY_EXT)
                );
                if is_log && path.is_file() {
                    found.push(path);
                }
            }
            if found.is_empty() {
                return Err(CliError::arg(
                    "LOG",
                    format!("{}: no .csv or .hrlog file in this directory", p.display()),
                ));
            }
            found.sort();
            out.extend(found);
        } else {
            out.push(p.clone());
        }
    }
    Ok(out)
}

/// One finished (candidate, log) replay.
struct Done {
    totals: Totals,
    damage: Vec<String>,
}

/// Records decoded at a time and run through every candidate of a group
/// before the next ones are read: a log is decoded once per group instead of
/// once per candidate, in constant memory (a few hundred kB per thread).
const BATCH: usize = 4096;

/// Replay one log under several candidates' settings (`(job, settings)`),
/// decoding it once; the result of every job, in the order given.
fn replay_group(
    path: &Path,
    jobs: Vec<(usize, CliResult<ControllerConfig>)>,
) -> Vec<(usize, CliResult<Done>)> {
    let mut out = Vec::with_capacity(jobs.len());
    let mut reader = match logio::open(path) {
        Ok(r) => r,
        Err(e) => {
            return jobs.into_iter().map(|(j, _)| (j, Err(e.clone()))).collect();
        }
    };
    let mut live: Vec<(usize, Replay<WINDOW>)> = Vec::with_capacity(jobs.len());
    for (j, cfg) in jobs {
        let replay = cfg.and_then(|c| {
            Replay::<WINDOW>::new(c).map_err(|e| {
                CliError::Input(format!("{}: controller settings: {e}", path.display()))
            })
        });
        match replay {
            Ok(r) => live.push((j, r)),
            Err(e) => out.push((j, Err(e))),
        }
    }
    if live.is_empty() {
        return out;
    }
    let mut batch = Vec::with_capacity(BATCH);
    loop {
        batch.clear();
        let mut failed = None;
        for rec in reader.by_ref() {
            match rec {
                Ok(r) => {
                    batch.push(r);
                    if batch.len() == BATCH {
                        break;
                    }
                }
                Err(e) => {
                    failed = Some(e);
                    break;
                }
            }
        }
        for (_, replay) in &mut live {
            for rec in &batch {
                replay.step(rec);
            }
        }
        if let Some(e) = failed {
            out.extend(live.into_iter().map(|(j, _)| (j, Err(e.clone()))));
            return out;
        }
        if batch.len() < BATCH {
            break;
        }
    }
    let damage: Vec<String> = reader
        .damage()
        .iter()
        .map(|d| format!("{}: {d}", path.display()))
        .collect();
    out.extend(live.into_iter().map(|(j, replay)| {
        (
            j,
            Ok(Done {
                totals: Totals::of_replay(replay.summary()),
                damage: damage.clone(),
            }),
        )
    }));
    out
}

/// The jobs `start..end` (job `j` is candidate `j / nlogs` on log
/// `j % nlogs`) as groups of one log and several candidates: every log's
/// candidates split into `per_log` groups, so that a few logs still keep
/// all threads busy while each group decodes its log once.
fn group_jobs(start: usize, end: usize, nlogs: usize, per_log: usize) -> Vec<(usize, Vec<usize>)> {
    let mut by_log: Vec<Vec<usize>> = vec![Vec::new(); nlogs];
    for j in start..end {
        if let Some(v) = by_log.get_mut(j % nlogs) {
            v.push(j);
        }
    }
    let mut groups = Vec::new();
    for (log, js) in by_log.into_iter().enumerate() {
        if js.is_empty() {
            continue;
        }
        let size = js.len().div_ceil(per_log.max(1));
        for g in js.chunks(size.max(1)) {
            groups.push((log, g.to_vec()));
        }
    }
    groups
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::atomic::note_inputs(args.logs.iter().chain(&args.config));
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    let logs = expand_logs(&args.logs)?;
    let toml = match &args.config {
        Some(p) => Some(load_toml(p)?),
        None => None,
    };
    let start_set = toml
        .as_ref()
        .is_some_and(|(_, k)| k.iter().any(|x| x == "start_tx_dbm"));
    // Each log's settings before the sweeps (its header holds the radio).
    let mut bases = Vec::with_capacity(logs.len());
    for p in &logs {
        let reader = logio::open(p)?;
        bases.push(log_base(toml.as_ref(), reader.header(), args.target_outage));
    }
    let first = bases
        .first()
        .copied()
        .ok_or_else(|| CliError::arg("LOG", "name at least one log"))?;
    let first_value = serde_json::to_value(first)
        .map_err(|e| CliError::Input(format!("controller settings: cannot serialise: {e}")))?;
    let grid = Grid::new(args.sweeps.clone(), &first_value)?;
    let target = args.target_outage.unwrap_or(first.target_outage);

    // Refuse a bad combination before any replay (against the first log;
    // the others are checked as they run).
    let mut configs_first = Vec::with_capacity(grid.len + 1);
    configs_first.push(grid.config(&first, start_set, None)?);
    for k in 0..grid.len {
        configs_first.push(grid.config(&first, start_set, Some(k))?);
    }
    drop(configs_first);

    let candidates = grid.len + 1;
    let jobs = candidates * logs.len();
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

    let mut fleet = vec![Totals::ZERO; candidates];
    let mut damage: Vec<String> = Vec::new();
    let stdout = io::stdout();
    let mut out = io::BufWriter::new(stdout.lock());
    let nlogs = logs.len();
    let mut start = 0;
    while start < jobs {
        let end = (start + CHUNK).min(jobs);
        // Enough groups per log to keep every thread busy when there are
        // fewer logs than threads (the results do not depend on it).
        let per_log = pool.current_num_threads().div_ceil(nlogs).max(1);
        let groups = group_jobs(start, end, nlogs, per_log);
        let mut done: Vec<(usize, CliResult<Done>)> = pool.install(|| {
            groups
                .into_par_iter()
                .flat_map_iter(|(log, js)| {
                    let n = js.len();
                    let r = match (logs.get(log), bases.get(log)) {
                        (Some(path), Some(base)) => {
                            let cfgs = js
                                .into_iter()
                                .map(|j| {
                                    let cfg = grid
                                        .config(base, start_set, (j / nlogs).checked_sub(1))
                                        .map_err(|e| {
                                            CliError::Input(format!("{}: {e}", path.display()))
                                        });
                                    (j, cfg)
                                })
                                .collect();
                            replay_group(path, cfgs)
                        }
                        _ => js
                            .into_iter()
                            .map(|j| (j, Err(CliError::Input("log index out of range".into()))))
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
                damage.extend(d.damage);
            }
            if let Some(f) = fleet.get_mut(cand) {
                f.add(&d.totals);
            }
            if args.format == TuneFormat::Jsonl {
                let path = logs
                    .get(log)
                    .map(|p| p.display().to_string())
                    .unwrap_or_default();
                let line = jsonl_line(&grid, cand, &path, &d.totals)?;
                writeln!(out, "{line}").map_err(|e| CliError::Io(format!("stdout: {e}")))?;
            }
        }
        start = end;
    }
    bar.finish_and_clear();
    for d in &damage {
        crate::diag::warn(d);
    }

    let points: Vec<Option<(f64, f64)>> = fleet.iter().map(Totals::key).collect();
    let front = pareto_front(&points);
    let best = best_of(&points, target);
    let beats = beats_default(&points);
    let result = TuneResult {
        grid: &grid,
        logs: &logs,
        bases: &bases,
        fleet: &fleet,
        front: &front,
        best,
        beats,
        target,
    };

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
        let pts: Vec<(f32, f32, String, bool)> = fleet
            .iter()
            .enumerate()
            .filter_map(|(k, t)| {
                let (tx, loss) = t.key()?;
                #[allow(clippy::cast_possible_truncation)]
                let (tx, loss) = (tx as f32, loss as f32);
                // Short labels: the candidate numbers of the table and JSON.
                let label = if k == 0 {
                    "default".to_string()
                } else {
                    format!("#{k}")
                };
                Some((tx, loss, label, loss <= target))
            })
            .collect();
        let title = format!(
            "headroom tune: {} settings over {} logs",
            candidates,
            logs.len()
        );
        plot::pareto_plot(p, args.force, &title, &pts, target)?;
    }
    Ok(())
}

fn jsonl_line(grid: &Grid, cand: usize, log: &str, t: &Totals) -> CliResult<String> {
    let mut m = Map::new();
    m.insert("log".into(), log.into());
    m.insert("candidate".into(), cand.into());
    m.insert("default".into(), (cand == 0).into());
    m.insert(
        "settings".into(),
        Value::Object(
            cand.checked_sub(1)
                .map(|k| grid.settings_json(k))
                .unwrap_or_default(),
        ),
    );
    t.json(&mut m);
    m.insert("tx_mw_sum".into(), Value::from(t.tx_mw_sum));
    m.insert(
        "max_allowed_mw_sum".into(),
        Value::from(t.max_allowed_mw_sum),
    );
    crate::output::json_line(&Value::Object(m))
}

/// Everything the table, the JSON and the plot show.
struct TuneResult<'a> {
    grid: &'a Grid,
    logs: &'a [PathBuf],
    bases: &'a [ControllerConfig],
    fleet: &'a [Totals],
    front: &'a [bool],
    best: Option<usize>,
    /// The cheapest setting of the grid that loses no more than the default.
    beats: Option<usize>,
    target: f32,
}

impl TuneResult<'_> {
    fn label(&self, cand: usize) -> String {
        match cand.checked_sub(1) {
            None => "default".into(),
            Some(k) => self.grid.label(k),
        }
    }

    fn meets(&self, t: &Totals) -> bool {
        #[allow(clippy::cast_possible_truncation)]
        t.outage().is_some_and(|o| (o as f32) <= self.target)
    }

    /// The default's value of each swept setting, if the same for every log.
    fn default_values(&self) -> Vec<Option<Value>> {
        let values: Vec<Option<Value>> = self
            .bases
            .iter()
            .map(|b| serde_json::to_value(b).ok())
            .collect();
        self.grid
            .targets
            .iter()
            .map(|t| {
                let mut seen: Option<Value> = None;
                for v in &values {
                    let mut at = v.as_ref()?;
                    for part in &t.path {
                        at = at.get(part)?;
                    }
                    #[allow(clippy::cast_possible_truncation)]
                    let x = match at.as_f64() {
                        Some(f) if !t.integer => json_num(f as f32),
                        _ => at.clone(),
                    };
                    match &seen {
                        Some(s) if *s != x => return None,
                        _ => seen = Some(x),
                    }
                }
                seen
            })
            .collect()
    }

    fn point(&self, cand: usize) -> Value {
        let mut m = Map::new();
        m.insert("candidate".into(), cand.into());
        let settings = match cand.checked_sub(1) {
            Some(k) => self.grid.settings_json(k),
            None => {
                let mut s = Map::new();
                for (sw, v) in self.grid.sweeps.iter().zip(self.default_values()) {
                    s.insert(sw.name.clone(), v.unwrap_or(Value::Null));
                }
                s
            }
        };
        m.insert("settings".into(), Value::Object(settings));
        let t = self.fleet.get(cand).copied().unwrap_or(Totals::ZERO);
        m.insert("meets_target".into(), self.meets(&t).into());
        m.insert(
            "on_front".into(),
            self.front.get(cand).copied().unwrap_or(false).into(),
        );
        t.json(&mut m);
        Value::Object(m)
    }

    /// Candidates on the front, by rising power.
    fn front_order(&self) -> Vec<usize> {
        let mut f: Vec<(usize, (f64, f64))> = self
            .fleet
            .iter()
            .enumerate()
            .filter(|(k, _)| self.front.get(*k).copied().unwrap_or(false))
            .filter_map(|(k, t)| t.key().map(|p| (k, p)))
            .collect();
        f.sort_by(|a, b| {
            a.1 .0
                .total_cmp(&b.1 .0)
                .then(a.1 .1.total_cmp(&b.1 .1))
                .then(a.0.cmp(&b.0))
        });
        f.into_iter().map(|(k, _)| k).collect()
    }

    /// Change of candidate `k` against the default: (mean power dB, loss rate).
    fn versus_default(&self, k: Option<usize>) -> Option<(f32, f64)> {
        let b = self.fleet.get(k?)?;
        let d = self.fleet.first()?;
        Some((b.mean_tx()?.0 - d.mean_tx()?.0, b.outage()? - d.outage()?))
    }

    /// `{"mean_tx_change_db", "outage_change"}` of candidate `k` against the default.
    #[allow(clippy::cast_possible_truncation)]
    fn versus_json(&self, k: Option<usize>) -> Value {
        self.versus_default(k).map_or(Value::Null, |(db, loss)| {
            let mut v = Map::new();
            v.insert("mean_tx_change_db".into(), json_num(db));
            v.insert("outage_change".into(), json_num(loss as f32));
            Value::Object(v)
        })
    }

    fn json(&self) -> Value {
        let mut m = Map::new();
        m.insert(
            "logs".into(),
            Value::Array(
                self.logs
                    .iter()
                    .map(|p| Value::from(p.display().to_string()))
                    .collect(),
            ),
        );
        m.insert(
            "swept".into(),
            Value::Array(
                self.grid
                    .sweeps
                    .iter()
                    .map(|s| Value::from(s.name.clone()))
                    .collect(),
            ),
        );
        m.insert("combinations".into(), self.grid.len.into());
        m.insert("target_outage".into(), json_num(self.target));
        m.insert("default".into(), self.point(0));
        m.insert(
            "best".into(),
            self.best.map_or(Value::Null, |k| self.point(k)),
        );
        m.insert("best_vs_default".into(), self.versus_json(self.best));
        m.insert(
            "beats_default".into(),
            self.beats.map_or(Value::Null, |k| self.point(k)),
        );
        m.insert(
            "beats_default_vs_default".into(),
            self.versus_json(self.beats),
        );
        m.insert(
            "front".into(),
            Value::Array(
                self.front_order()
                    .into_iter()
                    .map(|k| self.point(k))
                    .collect(),
            ),
        );
        m.insert(
            "points".into(),
            Value::Array((1..self.fleet.len()).map(|k| self.point(k)).collect()),
        );
        Value::Object(m)
    }

    fn table(&self, all: bool) -> String {
        let mut s = String::new();
        let records = self.fleet.first().map_or(0, |t| t.records);
        let _ = writeln!(s, "logs            {} ({records} records)", self.logs.len());
        let _ = writeln!(s, "combinations    {} (+ the default)", self.grid.len);
        let _ = writeln!(s, "target_outage   {:.3} % lost", 100.0 * self.target);

        let defaults = self.default_values();
        let mut head: Vec<String> = vec!["candidate".into()];
        head.extend(self.grid.sweeps.iter().map(|x| x.name.clone()));
        head.extend(["lost %", "mean tx dBm", "saving dB", ""].map(String::from));
        let row = |cand: usize| -> Vec<String> {
            let mut r = vec![if cand == 0 {
                "default".to_string()
            } else {
                cand.to_string()
            }];
            match cand.checked_sub(1) {
                Some(k) => r.extend(self.grid.settings_json(k).values().map(Value::to_string)),
                None => r.extend(
                    defaults
                        .iter()
                        .map(|v| v.as_ref().map_or("(per log)".into(), Value::to_string)),
                ),
            }
            let t = self.fleet.get(cand).copied().unwrap_or(Totals::ZERO);
            let f = |x: Option<f64>, scale: f64, d: usize| {
                x.map_or("-".into(), |x| format!("{:.*}", d, x * scale))
            };
            r.push(f(t.outage(), 100.0, 3));
            r.push(f(t.mean_tx().map(|d| f64::from(d.0)), 1.0, 2));
            r.push(f(t.saving_db().map(f64::from), 1.0, 2));
            let mut marks = Vec::new();
            if Some(cand) == self.best {
                marks.push("best");
            }
            if Some(cand) == self.beats {
                marks.push("beats default");
            }
            if self.front.get(cand).copied().unwrap_or(false) {
                marks.push("front");
            }
            if !self.meets(&t) {
                marks.push("misses target");
            }
            r.push(marks.join(", "));
            r
        };
        let listed: Vec<usize> = if all {
            (0..self.fleet.len()).collect()
        } else {
            self.front_order()
        };
        let mut rows = vec![head, row(0)];
        rows.extend(listed.iter().filter(|&&k| k != 0).map(|&k| row(k)));
        let widths: Vec<usize> = (0..rows.first().map_or(0, Vec::len))
            .map(|c| {
                rows.iter()
                    .filter_map(|r| r.get(c))
                    .map(String::len)
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let _ = writeln!(s);
        let on_front = self.front.iter().filter(|&&b| b).count();
        if all {
            let _ = writeln!(
                s,
                "every candidate ({on_front} of {} on the Pareto front):",
                self.fleet.len()
            );
        } else {
            let _ = writeln!(
                s,
                "the default, then the Pareto front by rising power ({on_front} of {} candidates):",
                self.fleet.len()
            );
        }
        for r in &rows {
            let line: Vec<String> = r
                .iter()
                .zip(&widths)
                .map(|(c, w)| format!("{c:<w$}"))
                .collect();
            let _ = writeln!(s, "  {}", line.join("  ").trim_end());
        }
        let _ = writeln!(s);
        match (self.best, self.versus_default(self.best)) {
            (Some(0), _) => {
                let _ = writeln!(
                    s,
                    "best: the default (no setting of the grid meets the target at less power)"
                );
            }
            (Some(k), Some((db, loss))) => {
                let _ = writeln!(
                    s,
                    "best: candidate {k} ({}): {db:+.2} dB of mean power, {:+.3} points of loss against the default",
                    self.label(k),
                    100.0 * loss
                );
            }
            (Some(k), None) => {
                let _ = writeln!(s, "best: candidate {k} ({})", self.label(k));
            }
            (None, _) => {
                let _ = writeln!(
                    s,
                    "best: none (no candidate loses at most {:.3} % of its packets)",
                    100.0 * self.target
                );
            }
        }
        match (self.beats, self.versus_default(self.beats)) {
            (Some(k), Some((db, loss))) => {
                let _ = writeln!(
                    s,
                    "beats the default: candidate {k} ({}): {db:+.2} dB of mean power, {:+.3} points of loss",
                    self.label(k),
                    100.0 * loss
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    "beats the default: none (no setting of the grid loses no more for less power)"
                );
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sweeps_parse() {
        let s = parse_sweep("margin_step_db=0.25..1:0.25").expect("range");
        assert_eq!(s.name, "margin_step_db");
        assert_eq!(s.values, vec![0.25, 0.5, 0.75, 1.0]);
        // 0.1 steps do not lose the end to rounding, nor grow noise.
        let s = parse_sweep("deadband_db=0..0.3:0.1").expect("range");
        assert_eq!(s.values, vec![0.0, 0.1, 0.2, 0.3]);
        let s = parse_sweep("margin_min_db=-20..-5:5").expect("negative");
        assert_eq!(s.values, vec![-20.0, -15.0, -10.0, -5.0]);
        // An end off the grid is not reached.
        assert_eq!(
            parse_sweep("x=0..1:0.4").expect("range").values,
            vec![0.0, 0.4, 0.8]
        );
        assert_eq!(
            parse_sweep("min_readings=4,8,16").expect("list").values,
            vec![4.0, 8.0, 16.0]
        );
        assert_eq!(parse_sweep("x=3").expect("one").values, vec![3.0]);
        assert_eq!(parse_sweep("x=2..2:1").expect("one").values, vec![2.0]);
        for bad in [
            "x",
            "=1",
            "x=3..1:1",
            "x=0..1:0",
            "x=0..1:-1",
            "x=0..1",
            "x=a",
            "x=nan",
            "x=0..inf:1",
            "x=0..1e9:1e-3",
            "x=1,,2",
        ] {
            assert!(parse_sweep(bad).is_err(), "{bad} accepted");
        }
    }

    #[test]
    fn grid_sets_fields_through_serde() {
        let base = ControllerConfig::sub_ghz_node();
        let v = serde_json::to_value(base).expect("serialises");
        let sweeps = vec![
            parse_sweep("margin_step_db=0.25..0.5:0.25").expect("sweep"),
            parse_sweep("min_readings=4,16").expect("sweep"),
            parse_sweep("steps.uniform=1,2").expect("sweep"),
        ];
        let g = Grid::new(sweeps, &v).expect("grid");
        assert_eq!(g.len, 8);
        // First sweep slowest, last fastest.
        assert_eq!(g.values(0), vec![0.25, 4.0, 1.0]);
        assert_eq!(g.values(1), vec![0.25, 4.0, 2.0]);
        assert_eq!(g.values(2), vec![0.25, 16.0, 1.0]);
        assert_eq!(g.values(7), vec![0.5, 16.0, 2.0]);
        let c = g.config(&base, false, Some(3)).expect("valid");
        assert_eq!(c.margin_step_db.0, 0.25);
        assert_eq!(c.min_readings, 16);
        assert_eq!(
            c.steps,
            headroom::control::PowerSteps::Uniform(headroom::units::Db(2.0))
        );
        assert_eq!(c.deadband_db, base.deadband_db);
        assert_eq!(g.config(&base, false, None).expect("default"), base);
    }

    #[test]
    fn grid_refuses_what_the_config_refuses() {
        let base = ControllerConfig::sub_ghz_node();
        let v = serde_json::to_value(base).expect("serialises");
        let grid = |s: &str| Grid::new(vec![parse_sweep(s).expect("sweep")], &v);
        let msg = |r: CliResult<Grid>| match r {
            Err(e) => e.to_string(),
            Ok(_) => String::from("accepted"),
        };
        assert!(msg(grid("margin_stepdb=1")).contains("'margin_stepdb' is not a setting"));
        assert!(msg(grid("steps=1")).contains("cannot be swept"));
        assert!(msg(grid("steps.table=1")).contains("not a setting"));
        let g = grid("min_readings=2.5").expect("grid");
        assert!(g
            .config(&base, false, Some(0))
            .is_err_and(|e| e.to_string().contains("whole numbers")));
        let g = grid("min_readings=70000").expect("grid");
        assert!(g
            .config(&base, false, Some(0))
            .is_err_and(|e| e.to_string().contains("min_readings=70000")));
        let g = grid("margin_step_db=25").expect("grid");
        let e = g
            .config(&base, false, Some(0))
            .map(|_| ())
            .map_err(|e| e.to_string());
        assert!(
            e.as_ref()
                .is_err_and(|e| e.contains("margin_step_db: 25 is outside")),
            "{e:?}"
        );
        // Two sweeps of one setting, and a grid too large.
        let two = vec![
            parse_sweep("deadband_db=1").expect("s"),
            parse_sweep("deadband_db=2").expect("s"),
        ];
        assert!(Grid::new(two, &v).is_err());
        let big = vec![
            parse_sweep("deadband_db=0..99:1").expect("s"),
            parse_sweep("margin_step_db=0.1..10.1:0.1").expect("s"),
        ];
        assert!(msg(Grid::new(big, &v)).contains("at most 10000"));
    }

    #[test]
    fn start_power_follows_swept_limits() {
        let base = ControllerConfig::sub_ghz_node();
        let v = serde_json::to_value(base).expect("serialises");
        let g = Grid::new(vec![parse_sweep("max_tx_dbm=5").expect("s")], &v).expect("grid");
        // Start 14 dBm is above a 5 dBm radio: moved to it unless set.
        assert_eq!(
            g.config(&base, false, Some(0)).expect("moved").start_tx_dbm,
            Dbm(5.0)
        );
        assert!(g.config(&base, true, Some(0)).is_err());
    }

    /// Brute-force check of the front on a grid with ties and gaps.
    #[test]
    fn front_is_the_non_dominated_set() {
        let mut pts: Vec<Option<(f64, f64)>> = Vec::new();
        let mut x: u32 = 12345;
        for _ in 0..400 {
            x = x.wrapping_mul(1_103_515_245).wrapping_add(12345);
            let tx = f64::from((x >> 8) % 20);
            x = x.wrapping_mul(1_103_515_245).wrapping_add(12345);
            let loss = f64::from((x >> 8) % 15) / 100.0;
            pts.push(if x.is_multiple_of(17) {
                None
            } else {
                Some((tx, loss))
            });
        }
        let on = pareto_front(&pts);
        let dominates =
            |a: (f64, f64), b: (f64, f64)| a.0 <= b.0 && a.1 <= b.1 && (a.0 < b.0 || a.1 < b.1);
        for (k, p) in pts.iter().enumerate() {
            let expect = p.is_some_and(|p| !pts.iter().flatten().any(|&q| dominates(q, p)));
            assert_eq!(on.get(k).copied(), Some(expect), "point {k} {p:?}");
        }
        let best = best_of(&pts, 0.05).expect("some meet");
        let b = pts.get(best).copied().flatten().expect("point");
        assert!(b.1 <= 0.05);
        assert!(on.get(best).copied().unwrap_or(false));
        assert!(pts
            .iter()
            .flatten()
            .filter(|p| p.1 <= 0.05)
            .all(|p| p.0 >= b.0));
        // With a target of 0 only lossless points qualify: the cheapest of them.
        let zero = best_of(&pts, 0.0)
            .and_then(|k| pts.get(k).copied().flatten())
            .expect("lossless point");
        assert_eq!(zero.1, 0.0);
        assert!(pts
            .iter()
            .flatten()
            .filter(|p| p.1 == 0.0)
            .all(|p| p.0 >= zero.0));
        // The setting that beats candidate 0 is on the front, loses no more
        // and spends less; none when candidate 0 is itself unbeatable.
        if let Some(first) = pts.first_mut() {
            *first = Some((10.0, 0.10));
        }
        let k = beats_default(&pts).expect("something beats (10, 0.10)");
        let p = pts.get(k).copied().flatten().expect("point");
        assert!(k > 0 && p.0 < 10.0 && p.1 <= 0.10, "{k} {p:?}");
        assert_eq!(pareto_front(&pts).get(k), Some(&true));
        assert!(pts
            .iter()
            .skip(1)
            .flatten()
            .filter(|q| q.1 <= 0.10)
            .all(|q| q.0 >= p.0));
        if let Some(first) = pts.first_mut() {
            *first = Some((-1.0, 0.0));
        }
        assert_eq!(beats_default(&pts), None);
    }

    #[test]
    fn totals_add_linear_sums() {
        let mut a = Totals::ZERO;
        // 10 records at 10 mW and 10 at 1 mW: mean 5.5 mW = 7.4036 dBm
        // (10·log10(5.5), common practice).
        a.add(&Totals {
            records: 10,
            judged: 10,
            lost: 1,
            tx_mw_sum: 100.0,
            max_allowed_mw_sum: 100.0,
            max_tx_used: Some(10.0),
            ..Totals::ZERO
        });
        a.add(&Totals {
            records: 10,
            judged: 5,
            lost: 0,
            tx_mw_sum: 10.0,
            max_allowed_mw_sum: 100.0,
            max_tx_used: Some(0.0),
            ..Totals::ZERO
        });
        let m = a.mean_tx().expect("mean").0;
        assert!((m - 7.403_627).abs() < 1e-4, "{m}");
        assert_eq!(a.outage(), Some(1.0 / 15.0));
        assert_eq!(a.max_tx_used, Some(10.0));
        let s = a.saving_db().expect("saving");
        assert!((s - (10.0 - 7.403_627)).abs() < 1e-4, "{s}");
    }
}
