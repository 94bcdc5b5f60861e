//! `headroom replay`: run field logs through the transmit-power controller
//! and say what it would have chosen, and lost.
//!
//! The replay semantics are the engine's (`headroom::control::Replay`), the
//! same code the firmware runs on target. Each log named on the command line
//! (a directory stands for its `.csv` and `.hrlog` files, sorted by name) is
//! one device: it is replayed on its own, through a fresh controller
//! configured from its own header. With several logs, `--format jsonl` prints
//! one summary line per log; `table` and `json` print each log's summary and
//! a fleet total (counts and linear mW sums added over the logs by the
//! engine's `Summary::merge`).
//!
//! The controller's settings come, in increasing precedence, from: the
//! defaults of `ControllerConfig::sub_ghz_node`; the radio fields of the
//! log's header (`min_tx_dbm`, `max_tx_dbm`, `tx_step_db`,
//! `antenna_gain_dbi`) for the keys the TOML file does not set; the TOML
//! file of `--config` (keys = the field names of `ControllerConfig`, see
//! `examples/controllers/default.toml`); the flags.

use std::fs;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use headroom::control::{
    ControllerConfig, ExplicitSettings, PowerSteps, Reason, Replay, ReplayStep, Summary,
};
use headroom::record::{LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};
use serde_json::{Map, Value};

use crate::atomic::AtomicFile;
use crate::error::{CliError, CliResult};
use crate::logio;
use crate::output::{json_num, Report};
use crate::plot::{self, ReplayPoint, ReplaySeries};
use crate::quantity;

/// Window of the controller used by the host replay (readings).
pub const WINDOW: usize = 32;

/// How the summaries are printed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum ReplayFormat {
    /// Aligned `key  value` lines; with several logs one block per log, then the fleet.
    #[default]
    Table,
    /// One JSON object; with several logs `{"logs": [...], "fleet": {...}}`.
    Json,
    /// One JSON object per line, one line per log, each with its `log` path.
    Jsonl,
}

const AFTER_HELP: &str = concat!(
    "\
Several logs: each log (or each .csv/.hrlog file of a directory, sorted by \
name) is one device, replayed separately with a fresh controller set up from \
its own header. `--format jsonl` prints one line per log (the summary keys \
plus `log`); `table` prints one block per log then a `fleet` block; `json` \
prints {\"logs\": [...], \"fleet\": {...}} (one log: the summary object \
alone). The fleet total adds counts and linear powers (mW) over the logs; its \
energy saving compares the mean power with each log's own highest allowed \
level, averaged in mW. --out and --plot take one log. The first log that \
cannot be read stops the command with an error (jsonl lines already printed \
stay valid).",
    "\n\n",
    caution!()
);

/// Arguments of `headroom replay`.
#[derive(clap::Args)]
#[command(after_help = AFTER_HELP)]
pub struct Args {
    /// Field logs (`.csv` or `.hrlog`) or directories of them; each log is
    /// replayed separately (one device per log).
    #[arg(value_name = "LOG", required = true)]
    logs: Vec<PathBuf>,
    /// Controller settings (TOML; keys as in examples/controllers/default.toml).
    #[arg(long, value_name = "CTRL.toml")]
    config: Option<PathBuf>,
    /// SNR below which a packet is lost, dB.
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true, value_name = "X")]
    required_snr_db: Option<Db>,
    /// Wanted probability of losing a packet: `0.01` or `1%`.
    #[arg(long, value_parser = probability, value_name = "P")]
    target_outage: Option<f32>,
    /// Lowest power of the radio.
    #[arg(long, value_parser = quantity::power, allow_hyphen_values = true, value_name = "A")]
    min_tx_dbm: Option<Dbm>,
    /// Highest power of the radio.
    #[arg(long, value_parser = quantity::power, allow_hyphen_values = true, value_name = "B")]
    max_tx_dbm: Option<Dbm>,
    /// Regulatory EIRP cap.
    #[arg(long, value_parser = quantity::power, allow_hyphen_values = true, value_name = "C")]
    eirp_cap_dbm: Option<Dbm>,
    /// Gain of the device's antenna.
    #[arg(long, value_parser = quantity::gain, allow_hyphen_values = true, value_name = "G")]
    antenna_gain_dbi: Option<Dbi>,
    /// Power before enough feedback.
    #[arg(long, value_parser = quantity::power, allow_hyphen_values = true, value_name = "S")]
    start_tx_dbm: Option<Dbm>,
    /// Uniform step between the radio's powers (replaces any level table).
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true, value_name = "D")]
    tx_step_db: Option<Db>,
    /// Write one CSV row per record: t_ms, chosen_tx_dbm, replayed_snr_db,
    /// outcome, path_loss_db, margin_db, reason (one log only).
    #[arg(long, value_name = "decisions.csv")]
    out: Option<PathBuf>,
    /// Draw received power (logged and replayed), noise floor, lost packets,
    /// chosen power and margin against time; `.svg` or `.png` (one log only).
    #[arg(long, value_name = "FILE.svg|FILE.png")]
    plot: Option<PathBuf>,
    /// Replace the files of `--out` and `--plot` if they exist.
    #[arg(long)]
    force: bool,
    /// Format of the summary.
    #[arg(long, value_enum, default_value_t = ReplayFormat::Table)]
    format: ReplayFormat,
}

/// A probability as `0.01` or `1%`.
pub(crate) fn probability(s: &str) -> Result<f32, String> {
    if s.trim_end().ends_with('%') {
        Ok(quantity::percent(s)? / 100.0)
    } else {
        quantity::number(s)
    }
}

/// The logs named by `args`: files as given, directories as their `.csv` and
/// `.hrlog` files sorted by name.
pub(crate) fn expand_logs(args: &[PathBuf]) -> CliResult<Vec<PathBuf>> {
    let mut logs = Vec::new();
    for a in args {
        if !a.is_dir() {
            logs.push(a.clone());
            continue;
        }
        let entries = fs::read_dir(a).map_err(|e| {
            CliError::Io(format!("{}: cannot list the directory: {e}", a.display()))
        })?;
        let mut found = Vec::new();
        for e in entries {
            let e = e.map_err(|e| {
                CliError::Io(format!("{}: cannot list the directory: {e}", a.display()))
            })?;
            let p = e.path();
            let ext = p
                .extension()
                .and_then(|x| x.to_str())
                .map(str::to_ascii_lowercase);
            if matches!(ext.as_deref(), Some("csv" | "hrlog")) && p.is_file() {
                found.push(p);
            }
        }
        if found.is_empty() {
            return Err(CliError::arg(
                "LOG",
                format!("{}: a directory without .csv or .hrlog logs", a.display()),
            ));
        }
        found.sort();
        logs.extend(found);
    }
    Ok(logs)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    let logs = expand_logs(&args.logs)?;
    crate::atomic::note_inputs(logs.iter().chain(&args.config));
    if logs.len() > 1 {
        for (flag, set) in [
            ("--out", args.out.is_some()),
            ("--plot", args.plot.is_some()),
        ] {
            if set {
                return Err(CliError::arg(
                    flag,
                    format!(
                        "takes one log, {} were named: replay them one at a time",
                        logs.len()
                    ),
                ));
            }
        }
    }
    // Refuse an existing plot before the work, not after.
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    let mut rows: Vec<(String, Summary)> = Vec::new();
    let mut fleet: Option<Summary> = None;
    for path in &logs {
        let s = replay_log(path, &args)?;
        if args.format == ReplayFormat::Jsonl {
            let mut m = Map::new();
            m.insert("log".into(), path.display().to_string().into());
            m.extend(fields(&s));
            let line = crate::output::json_line(&Value::Object(m))?;
            print_line(&line)?;
        }
        match fleet.as_mut() {
            Some(f) => f.merge(&s),
            None => fleet = Some(s),
        }
        rows.push((path.display().to_string(), s));
    }
    let Some(fleet) = fleet else {
        return Err(CliError::arg("LOG", "name at least one log"));
    };
    match (args.format, rows.as_slice()) {
        (ReplayFormat::Jsonl, _) => Ok(()),
        (ReplayFormat::Json, [(_, one)]) => print_json(&Value::Object(fields(one).collect())),
        (ReplayFormat::Table, [(_, one)]) => report(one).print(crate::output::Format::Table),
        (ReplayFormat::Json, _) => {
            let logs: Vec<Value> = rows
                .iter()
                .map(|(p, s)| {
                    let mut m = Map::new();
                    m.insert("log".into(), p.clone().into());
                    m.extend(fields(s));
                    Value::Object(m)
                })
                .collect();
            let mut m = Map::new();
            m.insert("logs".into(), Value::Array(logs));
            m.insert("fleet".into(), Value::Object(fields(&fleet).collect()));
            print_json(&Value::Object(m))
        }
        (ReplayFormat::Table, _) => {
            for (p, s) in &rows {
                print_line(&format!("== {}", crate::error::printable(p)))?;
                report(s).print(crate::output::Format::Table)?;
                print_line("")?;
            }
            print_line(&format!("== fleet ({} logs)", rows.len()))?;
            report(&fleet).print(crate::output::Format::Table)
        }
    }
}

/// One line on stdout, flushed; a closed pipe is an error, not a panic.
fn print_line(line: &str) -> CliResult {
    let mut stdout = io::stdout().lock();
    writeln!(stdout, "{line}")
        .and_then(|()| stdout.flush())
        .map_err(|e| CliError::Io(format!("stdout: cannot write: {e}")))
}

fn print_json(v: &Value) -> CliResult {
    print_line(&crate::output::json_text(v)?)
}

/// Replay one log (one device) with a fresh controller set up from `args`
/// and the log's header; writes `--out` and `--plot` if asked.
fn replay_log(path: &Path, args: &Args) -> CliResult<Summary> {
    let mut reader = logio::open(path)?;
    let cfg = build_config(args, reader.header())?;
    let mut replay = Replay::<WINDOW>::new(cfg)
        .map_err(|e| CliError::Input(format!("controller settings: {e}")))?;
    let mut out = match &args.out {
        Some(p) => Some(DecisionWriter::create(p, args.force)?),
        None => None,
    };
    let mut series = args.plot.as_ref().map(|_| ReplaySeries::default());
    for rec in &mut reader {
        let rec = rec?;
        let step = replay.step(&rec);
        if let Some(w) = out.as_mut() {
            w.row(&step)?;
        }
        if let Some(s) = series.as_mut() {
            push_series(s, &rec, &step);
        }
    }
    for d in reader.damage() {
        crate::diag::warn(format!("{}: {d}", path.display()));
    }
    if replay.summary().records == 0 && !reader.damage().is_empty() {
        return Err(CliError::Input(format!(
            "{}: no readable record, only damaged bytes: is it a headroom log?",
            path.display()
        )));
    }
    if let Some(w) = out {
        w.finish()?;
    }
    if let (Some(p), Some(s)) = (&args.plot, &series) {
        if s.is_empty() {
            return Err(CliError::arg(
                "--plot",
                format!("{}: the log has no records to draw", path.display()),
            ));
        }
        let name = path.file_name().map_or_else(
            || path.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        );
        plot::replay_plot(p, args.force, &format!("replay of {name}"), s)?;
    }
    Ok(*replay.summary())
}

/// One record's values for the plot, as logged or as the engine replayed them.
fn push_series(s: &mut ReplaySeries, rec: &LogRecord, step: &ReplayStep) {
    s.push(ReplayPoint {
        t_ms: step.t_ms,
        logged_rx_dbm: rec.rssi_dbm,
        replayed_rx_dbm: step.replayed_rx(rec).map(|d| d.0),
        noise_floor_dbm: rec.noise_dbm,
        tx_power_dbm: Some(step.chosen.0),
        margin_db: Some(step.margin.0),
        lost: step.outcome == headroom::control::Outcome::Lost,
    });
}

/// Defaults, then the log header, then the TOML file, then the flags.
fn build_config(args: &Args, header: Option<&LogHeader>) -> CliResult<ControllerConfig> {
    let (mut cfg, keys) = match &args.config {
        Some(p) => load_toml(p)?,
        None => (ControllerConfig::sub_ghz_node(), Vec::new()),
    };
    let set = |k: &str| keys.iter().any(|x| x == k);
    if let Some(h) = header {
        cfg.apply_log_header(
            h,
            ExplicitSettings::from_keys(keys.iter().map(String::as_str)),
        );
    }
    if let Some(v) = args.required_snr_db {
        cfg.required_snr_db = v;
    }
    if let Some(v) = args.target_outage {
        cfg.target_outage = v;
    }
    if let Some(v) = args.min_tx_dbm {
        cfg.min_tx_dbm = v;
    }
    if let Some(v) = args.max_tx_dbm {
        cfg.max_tx_dbm = v;
    }
    if let Some(v) = args.eirp_cap_dbm {
        cfg.eirp_cap_dbm = v;
    }
    if let Some(v) = args.antenna_gain_dbi {
        cfg.antenna_gain_dbi = v;
    }
    if let Some(v) = args.tx_step_db {
        cfg.steps = PowerSteps::Uniform(v);
    }
    match args.start_tx_dbm {
        Some(v) => cfg.start_tx_dbm = v,
        None if !set("start_tx_dbm") => {
            // Flags may have moved the limits: keep the default start inside.
            let ceiling = cfg.tx_ceiling();
            if cfg.start_tx_dbm.0 > ceiling.0 || cfg.start_tx_dbm.0 < cfg.min_tx_dbm.0 {
                cfg.start_tx_dbm = ceiling;
            }
        }
        None => {}
    }
    cfg.validate().map_err(|e| {
        let hint = match flag_for(e.setting()) {
            Some(f) => format!(" (flag {f} or TOML key {})", e.setting()),
            None => format!(" (TOML key {})", e.setting()),
        };
        CliError::Input(format!("controller settings: {e}{hint}"))
    })?;
    Ok(cfg)
}

/// The flag that sets a setting, if there is one.
fn flag_for(setting: &str) -> Option<&'static str> {
    Some(match setting {
        "required_snr_db" => "--required-snr-db",
        "target_outage" => "--target-outage",
        "min_tx_dbm" => "--min-tx-dbm",
        "max_tx_dbm" => "--max-tx-dbm",
        "eirp_cap_dbm" => "--eirp-cap-dbm",
        "antenna_gain_dbi" => "--antenna-gain-dbi",
        "start_tx_dbm" => "--start-tx-dbm",
        "steps.uniform" => "--tx-step-db",
        _ => return None,
    })
}

/// The TOML file as a config (missing keys take the defaults) and the keys it sets.
pub(crate) fn load_toml(path: &Path) -> CliResult<(ControllerConfig, Vec<String>)> {
    let text = crate::atomic::read_text(path)?;
    let table: toml::Table = toml::from_str(&text).map_err(|e| {
        CliError::arg(
            "--config",
            format!("{}: {}", path.display(), one_line(&e.to_string())),
        )
    })?;
    let keys = table.keys().cloned().collect();
    let cfg: ControllerConfig = toml::from_str(&text).map_err(|e| {
        CliError::arg(
            "--config",
            format!("{}: {}", path.display(), one_line(&e.to_string())),
        )
    })?;
    Ok((cfg, keys))
}

/// toml's messages span several lines (a caret under the source); keep one.
fn one_line(s: &str) -> String {
    let lines: Vec<&str> = s.lines().map(str::trim).filter(|l| !l.is_empty()).collect();
    // First line names the position, the last one says what is wrong.
    match (lines.first(), lines.last()) {
        (Some(a), Some(b)) if a != b => format!("{a} {b}"),
        (Some(a), _) => (*a).to_string(),
        _ => s.to_string(),
    }
}

/// The summary keys in their documented order.
fn fields(s: &Summary) -> impl Iterator<Item = (String, Value)> {
    let opt = |x: Option<f32>| x.map_or(Value::Null, json_num);
    let mut ignored = Map::new();
    for r in Reason::ALL.iter().filter(|r| r.is_ignored_reading()) {
        ignored.insert(r.as_str().to_string(), s.ignored(*r).into());
    }
    [
        ("records", s.records.into()),
        ("judged", s.judged.into()),
        ("outage_fraction", opt(s.outage_fraction())),
        ("mean_tx_dbm", opt(s.mean_tx_dbm().map(|d| d.0))),
        ("energy_saving_db", opt(s.energy_saving_db().map(|d| d.0))),
        ("power_changes", s.power_changes.into()),
        ("max_tx_dbm_used", opt(s.max_tx_dbm_used.map(|d| d.0))),
        ("ignored_readings", Value::Object(ignored)),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
}

fn report(s: &Summary) -> Report {
    let mut rep = Report::new();
    for (k, v) in fields(s) {
        rep.value(&k, v);
    }
    rep
}

/// The `--out` CSV, written through [`AtomicFile`]: nothing under the final
/// name until the replay is complete.
struct DecisionWriter {
    file: AtomicFile,
}

impl DecisionWriter {
    fn create(dest: &Path, force: bool) -> CliResult<Self> {
        let mut w = DecisionWriter {
            file: AtomicFile::create(dest, force)?,
        };
        w.write_line("t_ms,chosen_tx_dbm,replayed_snr_db,outcome,path_loss_db,margin_db,reason")?;
        Ok(w)
    }

    fn write_line(&mut self, line: &str) -> CliResult {
        writeln!(self.file, "{line}").map_err(|e| self.file.io_error(e))
    }

    fn row(&mut self, s: &ReplayStep) -> CliResult {
        let num = |x: Option<f32>| x.map_or(String::new(), |v| format!("{v}"));
        let line = format!(
            "{},{},{},{},{},{},{}",
            s.t_ms,
            s.chosen.0,
            num(s.replayed_snr.map(|d| d.0)),
            s.outcome.as_str(),
            num(s.path_loss_estimate.map(|d| d.0)),
            s.margin.0,
            s.reason.as_str()
        );
        self.write_line(&line)
    }

    fn finish(self) -> CliResult {
        self.file.commit()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The shipped example is the documented default, key for key.
    #[test]
    fn example_config_is_the_default() {
        let text = include_str!("../../../examples/controllers/default.toml");
        let cfg: ControllerConfig = toml::from_str(text).expect("example parses");
        assert_eq!(cfg, ControllerConfig::sub_ghz_node());
        let table: toml::Table = toml::from_str(text).expect("example parses");
        let round = toml::to_string(&ControllerConfig::sub_ghz_node()).expect("serialises");
        let back: toml::Table = toml::from_str(&round).expect("round trip");
        // Every field of the config is documented in the example.
        for k in back.keys() {
            assert!(
                table.contains_key(k),
                "examples/controllers/default.toml lacks {k}"
            );
        }
    }

    #[test]
    fn level_tables_and_typos() {
        let cfg: ControllerConfig =
            toml::from_str("steps = { table = [-9, 0, 5, 10, 14] }\nmax_step_down_db = 9")
                .expect("table");
        match cfg.steps {
            PowerSteps::Table(t) => assert_eq!(t.levels().len(), 5),
            other => panic!("{other:?}"),
        }
        assert!(toml::from_str::<ControllerConfig>("steps = { table = [3, 1] }").is_err());
        assert!(toml::from_str::<ControllerConfig>("target_outag = 0.1").is_err());
    }

    #[test]
    fn probabilities_parse_as_fraction_or_percent() {
        assert_eq!(probability("0.05"), Ok(0.05));
        assert_eq!(probability("5%"), Ok(0.05));
        assert!(probability("x").is_err());
    }
}
