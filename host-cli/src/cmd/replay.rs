//! `headroom replay`: run field logs through the transmit-power controller
//! and say what it would have chosen, and lost.
//!
//! The replay semantics are the engine's (`headroom::control::Replay`), the
//! same code the firmware runs on target. The logs named on the command line
//! are replayed one after the other as one stream, through one controller.
//!
//! The controller's settings come, in increasing precedence, from: the
//! defaults of `ControllerConfig::sub_ghz_node`; the radio fields of the
//! first log's header (`min_tx_dbm`, `max_tx_dbm`, `tx_step_db`,
//! `antenna_gain_dbi`) for the keys the TOML file does not set; the TOML
//! file of `--config` (keys = the field names of `ControllerConfig`, see
//! `examples/controllers/default.toml`); the flags.

use std::fs::{self, File};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

use headroom::control::{ControllerConfig, PowerSteps, Reason, Replay, ReplayStep, Summary};
use headroom::record::LogHeader;
use headroom::units::{Db, Dbi, Dbm};
use serde_json::{Map, Value};

use crate::error::{CliError, CliResult};
use crate::logio;
use crate::output::{json_num, Format, Report};
use crate::quantity;

/// Window of the controller used by the host replay (readings).
pub const WINDOW: usize = 32;

/// Arguments of `headroom replay`.
#[derive(clap::Args)]
pub struct Args {
    /// Field logs (`.csv` or `.hrlog`), replayed in order as one stream.
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
    #[arg(long, value_parser = quantity::db, value_name = "D")]
    tx_step_db: Option<Db>,
    /// Write one CSV row per record: t_ms, chosen_tx_dbm, replayed_snr_db,
    /// outcome, path_loss_db, margin_db, reason.
    #[arg(long, value_name = "decisions.csv")]
    out: Option<PathBuf>,
    /// Replace `--out` if it exists.
    #[arg(long)]
    force: bool,
    /// Format of the summary.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
}

/// A probability as `0.01` or `1%`.
pub(crate) fn probability(s: &str) -> Result<f32, String> {
    if s.trim_end().ends_with('%') {
        Ok(quantity::percent(s)? / 100.0)
    } else {
        quantity::number(s)
    }
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    // Open the first log early: its header may carry the radio's limits.
    let mut logs = args.logs.iter();
    let first_path = logs
        .next()
        .ok_or_else(|| CliError::arg("LOG", "name at least one log"))?;
    let first = logio::open(first_path)?;
    let cfg = build_config(&args, first.header())?;
    let mut replay = Replay::<WINDOW>::new(cfg)
        .map_err(|e| CliError::Input(format!("controller settings: {e}")))?;

    let mut out = match &args.out {
        Some(p) => Some(DecisionWriter::create(p, args.force)?),
        None => None,
    };
    let mut last_t: Option<(u64, &Path)> = None;
    replay_one(first_path, first, &mut replay, &mut out, &mut last_t)?;
    for path in logs {
        let reader = logio::open(path)?;
        replay_one(path, reader, &mut replay, &mut out, &mut last_t)?;
    }
    if let Some(w) = out {
        w.finish()?;
    }
    report(replay.summary()).print(args.format)
}

fn replay_one<'a>(
    path: &'a Path,
    mut reader: logio::LogReader,
    replay: &mut Replay<WINDOW>,
    out: &mut Option<DecisionWriter>,
    last_t: &mut Option<(u64, &'a Path)>,
) -> CliResult {
    let mut first = true;
    for rec in &mut reader {
        let rec = rec?;
        if first {
            if let Some((t, prev)) = *last_t {
                if rec.t_ms < t {
                    eprintln!(
                        "headroom: warning: {} starts at t_ms {} before {} ends (t_ms {t}): the logs are \
                         replayed as one stream, so its readings until then count as stale; replay the \
                         logs of different devices separately",
                        path.display(),
                        rec.t_ms,
                        prev.display()
                    );
                }
            }
            first = false;
        }
        *last_t = Some((rec.t_ms, path));
        let step = replay.step(&rec);
        if let Some(w) = out.as_mut() {
            w.row(&step)?;
        }
    }
    for d in reader.damage() {
        eprintln!("headroom: warning: {}: {d}", path.display());
    }
    Ok(())
}

/// Defaults, then the log header, then the TOML file, then the flags.
fn build_config(args: &Args, header: Option<&LogHeader>) -> CliResult<ControllerConfig> {
    let (mut cfg, keys) = match &args.config {
        Some(p) => load_toml(p)?,
        None => (ControllerConfig::sub_ghz_node(), Vec::new()),
    };
    let set = |k: &str| keys.iter().any(|x| x == k);
    if let Some(h) = header {
        if let (Some(v), false) = (h.min_tx, set("min_tx_dbm")) {
            cfg.min_tx_dbm = v;
        }
        if let (Some(v), false) = (h.max_tx, set("max_tx_dbm")) {
            cfg.max_tx_dbm = v;
        }
        if let (Some(v), false) = (h.tx_step, set("steps")) {
            cfg.steps = PowerSteps::Uniform(v);
        }
        if let (Some(v), false) = (h.antenna_gain, set("antenna_gain_dbi")) {
            cfg.antenna_gain_dbi = v;
        }
        // A start power the header's radio cannot produce would be refused:
        // start at its highest allowed power instead, unless set.
        if !set("start_tx_dbm") {
            let ceiling = cfg.tx_ceiling();
            if cfg.start_tx_dbm.0 > ceiling.0 || cfg.start_tx_dbm.0 < cfg.min_tx_dbm.0 {
                cfg.start_tx_dbm = ceiling;
            }
        }
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
    let text = fs::read_to_string(path)
        .map_err(|e| CliError::Io(format!("{}: cannot read: {e}", path.display())))?;
    let table: toml::Table = toml::from_str(&text)
        .map_err(|e| CliError::arg("--config", format!("{}: {}", path.display(), one_line(&e.to_string()))))?;
    let keys = table.keys().cloned().collect();
    let cfg: ControllerConfig = toml::from_str(&text)
        .map_err(|e| CliError::arg("--config", format!("{}: {}", path.display(), one_line(&e.to_string()))))?;
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

fn report(s: &Summary) -> Report {
    let opt = |x: Option<f32>| x.map_or(Value::Null, json_num);
    let mut ignored = Map::new();
    for r in Reason::ALL.iter().filter(|r| r.is_ignored_reading()) {
        ignored.insert(r.as_str().to_string(), s.ignored(*r).into());
    }
    let mut rep = Report::new();
    rep.value("records", s.records.into())
        .value("judged", s.judged.into())
        .value("outage_fraction", opt(s.outage_fraction()))
        .value("mean_tx_dbm", opt(s.mean_tx_dbm().map(|d| d.0)))
        .value("energy_saving_db", opt(s.energy_saving_db().map(|d| d.0)))
        .value("power_changes", s.power_changes.into())
        .value("max_tx_dbm_used", opt(s.max_tx_dbm_used.map(|d| d.0)))
        .value("ignored_readings", Value::Object(ignored));
    rep
}

/// The `--out` CSV, written to a temporary file and moved into place.
struct DecisionWriter {
    dest: PathBuf,
    tmp: PathBuf,
    file: Option<BufWriter<File>>,
    force: bool,
}

impl DecisionWriter {
    fn create(dest: &Path, force: bool) -> CliResult<Self> {
        if !force && fs::symlink_metadata(dest).is_ok() {
            return Err(CliError::arg(
                "--out",
                format!("{}: already exists (use --force to overwrite)", dest.display()),
            ));
        }
        let name = dest
            .file_name()
            .ok_or_else(|| CliError::arg("--out", format!("{}: not a file name", dest.display())))?;
        let dir = match dest.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let mut tmp_name = std::ffi::OsString::from(".");
        tmp_name.push(name);
        tmp_name.push(format!(".tmp-{}", std::process::id()));
        let tmp = dir.join(tmp_name);
        let f = fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map_err(|e| CliError::Io(format!("{}: cannot create a temporary file: {e}", tmp.display())))?;
        let mut w = DecisionWriter { dest: dest.to_path_buf(), tmp, file: Some(BufWriter::new(f)), force };
        w.write_line("t_ms,chosen_tx_dbm,replayed_snr_db,outcome,path_loss_db,margin_db,reason")?;
        Ok(w)
    }

    fn write_line(&mut self, line: &str) -> CliResult {
        let r = match &mut self.file {
            Some(f) => writeln!(f, "{line}"),
            None => Err(io::Error::other("output already closed")),
        };
        r.map_err(|e| CliError::Io(format!("{}: cannot write: {e}", self.dest.display())))
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

    fn finish(mut self) -> CliResult {
        let io_err = |dest: &Path, e: io::Error| CliError::Io(format!("{}: cannot write: {e}", dest.display()));
        let Some(buf) = self.file.take() else {
            return Err(CliError::Io(format!("{}: output already closed", self.dest.display())));
        };
        let file = buf.into_inner().map_err(|e| io_err(&self.dest, e.into_error()))?;
        file.sync_all().map_err(|e| io_err(&self.dest, e))?;
        drop(file);
        let placed = if self.force {
            fs::rename(&self.tmp, &self.dest)
        } else {
            // A hard link refuses to replace a file that appeared meanwhile.
            match fs::hard_link(&self.tmp, &self.dest) {
                Ok(()) => fs::remove_file(&self.tmp),
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {
                    return Err(CliError::arg(
                        "--out",
                        format!("{}: already exists (use --force to overwrite)", self.dest.display()),
                    ))
                }
                Err(_) => fs::rename(&self.tmp, &self.dest),
            }
        };
        placed.map_err(|e| CliError::Io(format!("{}: cannot move into place: {e}", self.dest.display())))?;
        self.tmp = PathBuf::new();
        Ok(())
    }
}

impl Drop for DecisionWriter {
    fn drop(&mut self) {
        self.file = None;
        if !self.tmp.as_os_str().is_empty() {
            let _ = fs::remove_file(&self.tmp);
        }
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
            assert!(table.contains_key(k), "examples/controllers/default.toml lacks {k}");
        }
    }

    #[test]
    fn level_tables_and_typos() {
        let cfg: ControllerConfig =
            toml::from_str("steps = { table = [-9, 0, 5, 10, 14] }\nmax_step_down_db = 9").expect("table");
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
