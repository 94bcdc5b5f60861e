//! `headroom._native`: the `headroom` commands from Python.
//!
//! Nothing here computes or words a result: every call is a command line of
//! the `headroom` binary, parsed by its parser and run by its code, with what
//! it prints on stdout captured (`headroom_cli::output::capture`) and its
//! warnings kept as lines (`headroom_cli::diag::capture`). So a call returns
//! the very JSON the command prints, and fails with the command's one-line
//! message. What the package adds is what a command line cannot carry: a
//! log given as arrays (read as the CSV it would be,
//! `headroom_cli::logio::columns`), the decision of every record as arrays,
//! and the totals of each log (the engine's `Summary`, serialised whole
//! with postcard) for a fleet reduced elsewhere (Dask) by the engine's own
//! `Fleet::add`, in the order of the logs.

use std::path::Path;

use headroom::control::{Fleet, Outcome, Reason, ReplayStep, Summary};
use headroom::record::LogRecord;
use headroom_cli::cmd::replay::{Observer, DECISION_COLUMNS};
use headroom_cli::error::{CliError, CliResult};
use headroom_cli::logio::columns::{self, Column};
use headroom_cli::logio::{Field, LogReader, ReadOptions};
use headroom_cli::{diag, output, Command};
use pyo3::prelude::*;
use pyo3::types::{PyByteArray, PyBytes};

/// `headroom.HeadroomError(message, exit_code)` (defined in Python, so that
/// it pickles between a Dask worker and its client); the message is the
/// line the binary prints after `error: ` (escaped, capped as it is).
fn py_err(py: Python<'_>, e: &CliError) -> PyErr {
    let made = py
        .import("headroom._errors")
        .and_then(|m| m.getattr("HeadroomError"))
        .and_then(|c| c.call1((diag::shown(&e.to_string()), e.exit_code())));
    match made {
        Ok(inst) => PyErr::from_value(inst),
        Err(err) => err,
    }
}

/// Run a command with stdout and diagnostics captured; the inputs of
/// earlier commands are forgotten (one command's input may be a later one's
/// output), this one's are registered (none of its outputs may replace
/// one).
fn captured<R>(f: impl FnOnce() -> CliResult<R>) -> (CliResult<R>, String, Vec<String>) {
    headroom_cli::atomic::forget_inputs();
    let ((r, text), lines) = diag::capture(|| output::capture(f));
    (r, text, lines)
}

/// `run(argv) -> (stdout, lines)`: run the command line `argv` (its first
/// item the program's name) as the binary does; what it printed on stdout,
/// and its diagnostic lines (`warning: ...`, `note: ...`).
#[pyfunction]
fn run(py: Python<'_>, argv: Vec<String>) -> PyResult<(String, Vec<String>)> {
    let (r, text, lines) = py.allow_threads(|| {
        captured(|| {
            let command = headroom_cli::parse_command_line(&argv)?;
            headroom_cli::run_command(command)
        })
    });
    r.map_err(|e| py_err(py, &e))?;
    Ok((text, lines))
}

/// One log given as columns: its name, header fields and columns.
type Arrays = (String, Vec<(String, String)>, Vec<(String, char, Vec<u8>)>);

/// The observer of a replay from Python.
struct Seen {
    /// A log given as columns, handed over when the replay reaches its name.
    arrays: Option<(String, LogReader)>,
    /// Keep every record's decision.
    keep_steps: bool,
    /// The decisions of each log.
    steps: Vec<Decisions>,
    /// Each log's totals and target outage.
    done: Vec<(Summary, f32)>,
}

/// The decisions of one log, a vector per column of [`DECISION_COLUMNS`].
#[derive(Default)]
struct Decisions {
    t_ms: Vec<u64>,
    chosen_tx_dbm: Vec<f32>,
    replayed_snr_db: Vec<f32>,
    outcome: Vec<u8>,
    logged_outcome: Vec<u8>,
    at_max: Vec<u8>,
    path_loss_db: Vec<f32>,
    margin_db: Vec<f32>,
    reason: Vec<u8>,
}

impl Decisions {
    fn push(&mut self, s: &ReplayStep) {
        self.t_ms.push(s.t_ms);
        self.chosen_tx_dbm.push(s.chosen.0);
        self.replayed_snr_db
            .push(s.replayed_snr.map_or(f32::NAN, |d| d.0));
        self.outcome.push(s.outcome.code());
        self.logged_outcome.push(
            match s.logged_lost {
                Some(true) => Outcome::Lost,
                Some(false) => Outcome::Delivered,
                None => Outcome::Unjudged,
            }
            .code(),
        );
        self.at_max.push(u8::from(s.at_max));
        self.path_loss_db
            .push(s.path_loss_estimate.map_or(f32::NAN, |d| d.0));
        self.margin_db.push(s.margin.0);
        self.reason.push(s.reason.code());
    }

    /// `(column, numpy dtype, little-endian bytes)` in the order of
    /// [`DECISION_COLUMNS`].
    fn columns(&self) -> Vec<(&'static str, &'static str, Vec<u8>)> {
        fn le<const N: usize, T: Copy>(v: &[T], f: fn(T) -> [u8; N]) -> Vec<u8> {
            v.iter().flat_map(|x| f(*x)).collect()
        }
        let data: [(&str, Vec<u8>); 9] = [
            ("<u8", le(&self.t_ms, u64::to_le_bytes)),
            ("<f4", le(&self.chosen_tx_dbm, f32::to_le_bytes)),
            ("<f4", le(&self.replayed_snr_db, f32::to_le_bytes)),
            ("|u1", self.outcome.clone()),
            ("|u1", self.logged_outcome.clone()),
            ("|b1", self.at_max.clone()),
            ("<f4", le(&self.path_loss_db, f32::to_le_bytes)),
            ("<f4", le(&self.margin_db, f32::to_le_bytes)),
            ("|u1", self.reason.clone()),
        ];
        DECISION_COLUMNS
            .iter()
            .zip(data)
            .map(|(name, (dtype, bytes))| (*name, dtype, bytes))
            .collect()
    }
}

impl Observer for Seen {
    fn records(&mut self, path: &Path) -> Option<LogReader> {
        match &self.arrays {
            Some((name, _)) if Path::new(name) == path => self.arrays.take().map(|(_, r)| r),
            _ => None,
        }
    }

    fn step(&mut self, index: usize, _rec: &LogRecord, step: &ReplayStep) {
        if !self.keep_steps {
            return;
        }
        while self.steps.len() <= index {
            self.steps.push(Decisions::default());
        }
        if let Some(d) = self.steps.get_mut(index) {
            d.push(step);
        }
    }

    fn done(&mut self, index: usize, summary: &Summary, target_outage: f32) {
        while self.keep_steps && self.steps.len() <= index {
            self.steps.push(Decisions::default());
        }
        self.done.push((*summary, target_outage));
    }
}

fn column(name: &str, kind: char, bytes: &[u8]) -> CliResult<Column> {
    let bad = || {
        CliError::Input(format!(
            "column {name}: {} bytes are not a whole number of 8-byte values",
            bytes.len()
        ))
    };
    if !bytes.len().is_multiple_of(8) {
        return Err(bad());
    }
    let words = bytes.chunks_exact(8).map(|c| {
        let mut w = [0u8; 8];
        w.copy_from_slice(c);
        w
    });
    match kind {
        'i' => Ok(Column::Whole(words.map(i64::from_le_bytes).collect())),
        'f' => Ok(Column::Real(words.map(f64::from_le_bytes).collect())),
        other => Err(CliError::Input(format!(
            "column {name}: kind '{other}' is neither 'i' (int64) nor 'f' (float64)"
        ))),
    }
}

/// What [`replay`] returns: the JSON text, the diagnostic lines, each log's
/// decisions (name, dtype, bytes per column) and each log's totals
/// (postcard bytes) with its target outage.
type ReplayOut = (
    String,
    Vec<String>,
    Vec<Vec<(&'static str, &'static str, Py<PyByteArray>)>>,
    Vec<(Py<PyBytes>, f32)>,
);

/// `replay(argv, arrays, decisions)`: run the `replay` command line `argv`;
/// `arrays` (name, header fields, columns as (name, 'i'|'f', bytes)) is the
/// log named `name` on that line; `decisions`: keep every record's decision.
#[pyfunction]
#[pyo3(signature = (argv, arrays=None, decisions=true))]
fn replay(
    py: Python<'_>,
    argv: Vec<String>,
    arrays: Option<Arrays>,
    decisions: bool,
) -> PyResult<ReplayOut> {
    let (r, text, lines) = py.allow_threads(|| {
        captured(|| {
            let Command::Replay(args) = headroom_cli::parse_command_line(&argv)? else {
                return Err(CliError::Input("not a replay command line".into()));
            };
            let given = match arrays {
                Some((name, header, cols)) => {
                    let cols = cols
                        .iter()
                        .map(|(n, k, b)| Ok((n.clone(), column(n, *k, b)?)))
                        .collect::<CliResult<Vec<_>>>()?;
                    let opts = ReadOptions {
                        columns: args.input_columns(),
                        ..ReadOptions::default()
                    };
                    let reader = columns::open(&name, &header, cols, &opts)?;
                    Some((name, reader))
                }
                None => None,
            };
            let mut seen = Seen {
                arrays: given,
                keep_steps: decisions,
                steps: Vec::new(),
                done: Vec::new(),
            };
            headroom_cli::cmd::replay::run_observed(args, &mut seen)?;
            Ok(seen)
        })
    });
    let seen = r.map_err(|e| py_err(py, &e))?;
    let steps = seen
        .steps
        .iter()
        .map(|d| {
            d.columns()
                .into_iter()
                .map(|(n, t, b)| (n, t, PyByteArray::new(py, &b).unbind()))
                .collect()
        })
        .collect();
    let mut done = Vec::with_capacity(seen.done.len());
    for (s, target) in &seen.done {
        let bytes = postcard::to_allocvec(s).map_err(|e| {
            py_err(
                py,
                &CliError::Io(format!("cannot serialise a summary: {e}")),
            )
        })?;
        done.push((PyBytes::new(py, &bytes).unbind(), *target));
    }
    Ok((text, lines, steps, done))
}

/// `fleet(parts, names, skipped) -> str`: the JSON text of the fleet object
/// of `replay --format json` for the logs whose totals are `parts`
/// ((postcard bytes of a `Summary`, target outage), in the order of the
/// logs, added with the engine's `Fleet::add` in that order), named
/// `names`, with `skipped` logs skipped.
#[pyfunction]
fn fleet(
    py: Python<'_>,
    parts: Vec<(Vec<u8>, f32)>,
    names: Vec<String>,
    skipped: usize,
) -> PyResult<String> {
    let mut f = Fleet::new();
    for (k, (bytes, target)) in parts.iter().enumerate() {
        let s: Summary = postcard::from_bytes(bytes).map_err(|e| {
            py_err(
                py,
                &CliError::Input(format!("log {k}: not the totals of a replay: {e}")),
            )
        })?;
        f.add(&s, *target);
    }
    let obj = headroom_cli::fleet::report::fleet_json(&f, skipped, &names);
    output_json(py, &serde_json::Value::Object(obj))
}

fn output_json(py: Python<'_>, v: &serde_json::Value) -> PyResult<String> {
    headroom_cli::output::json_text(v).map_err(|e| py_err(py, &e))
}

/// `toml_from_json(text) -> str`: a JSON object (a link file as a dict) as
/// TOML text, for the link reader.
#[pyfunction]
fn toml_from_json(py: Python<'_>, text: &str) -> PyResult<String> {
    let bad = |e: String| py_err(py, &CliError::Input(format!("a link as a dict: {e}")));
    let v: toml::Value = serde_json::from_str(text).map_err(|e| bad(e.to_string()))?;
    toml::to_string(&v).map_err(|e| bad(e.to_string()))
}

/// The logs named, and the entries skipped with why.
type Expanded = (Vec<String>, Vec<(String, String)>);

/// `expand(paths, strict) -> (logs, skipped)`: the logs the LOG arguments
/// `paths` name, as `replay` and `tune` expand them (a directory: its
/// `.csv` and `.hrlog` files, sorted), and the entries skipped with why.
#[pyfunction]
fn expand(py: Python<'_>, paths: Vec<std::path::PathBuf>, strict: bool) -> PyResult<Expanded> {
    let list = headroom_cli::fleet::logs::expand(&paths, strict).map_err(|e| py_err(py, &e))?;
    Ok((
        list.logs.iter().map(|p| p.display().to_string()).collect(),
        list.skipped
            .iter()
            .map(|(p, why)| (p.display().to_string(), why.clone()))
            .collect(),
    ))
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    // No output of a command may replace one of its inputs (as in the
    // binary). The binary's signal handlers are not installed: the
    // interpreter keeps its own.
    headroom_cli::atomic::track_inputs();
    m.add_function(wrap_pyfunction!(expand, m)?)?;
    m.add_function(wrap_pyfunction!(run, m)?)?;
    m.add_function(wrap_pyfunction!(replay, m)?)?;
    m.add_function(wrap_pyfunction!(fleet, m)?)?;
    m.add_function(wrap_pyfunction!(toml_from_json, m)?)?;
    m.add("FIELDS", Field::ALL.map(Field::name).to_vec())?;
    m.add("DECISION_COLUMNS", DECISION_COLUMNS.to_vec())?;
    let outcomes: Vec<&str> = (0..=u8::MAX)
        .map_while(Outcome::from_code)
        .map(Outcome::as_str)
        .collect();
    m.add("OUTCOMES", outcomes)?;
    m.add("REASONS", Reason::ALL.map(Reason::as_str).to_vec())?;
    m.add("VERSION", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
