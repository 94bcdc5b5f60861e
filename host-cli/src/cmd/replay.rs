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

use std::io::Write;
use std::path::{Path, PathBuf};

use headroom::control::{Fleet, Outcome, ReplayStep, Summary};
use headroom::energy::ReplayEnergy;
use headroom::record::codec::{Encoder, MAX_FRAME};
use headroom::record::{DecisionRecord, LogRecord};
use serde_json::{Map, Value};

use crate::atomic::AtomicFile;
use crate::error::{CliError, CliResult};
use crate::fleet::settings::{Resolver, SettingArgs};
use crate::fleet::{self, logs, report, HostReplay};
use crate::logio::LogFormat;
use crate::plot::{self, ReplayPoint, ReplaySeries};

/// How the summaries are printed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum ReplayFormat {
    /// The settings in force, then the replay beside the logged policy; one
    /// block per log, then the fleet.
    #[default]
    Table,
    /// One JSON object `{"logs": [...], "fleet": {...}}`, whatever the
    /// number of logs.
    Json,
    /// One JSON object per line, one line per log, each with its `log` path.
    Jsonl,
}

const AFTER_HELP: &str = concat!(
    "\
Settings: each setting in force has one value and one source. A flag beats \
the log's header (the device's own facts: its power limits and steps, \
antenna gain, the far end's required SNR, its EIRP cap), which beats a \
--config file (a template), which beats the built-in default. There is no \
built-in required SNR (a replay without one is refused) and no built-in \
EIRP cap (none is applied unless given). The table and the JSON show every \
setting with its source.

Rates: with a rate table, the energy profile's [[rate]] entries (--energy) \
or else the log header's, the controller chooses the rate with the power. A \
log whose records do not name their rate needs --logged-rate NAME when the \
table gives noise bandwidths (the rate is never guessed). There is no \
built-in duty-cycle limit: --duty-limit 1% states your band's (none is \
applied otherwise). --baselines compares the controller with the engine's \
baseline rules on each log.

Several logs: each log (or each .csv/.hrlog file of a directory, sorted by \
name) is one device, replayed separately with a fresh controller set up from \
its own header. The fleet total adds counts and linear powers (mW) over the \
logs; it never averages per-device rates. --out and --plot take one log. \
The first log that cannot be read stops the command with an error (jsonl \
lines already printed stay valid).

Outputs never replace an input; an existing output is replaced only with \
--force.",
    "\n\n",
    caution!()
);

/// Arguments of `headroom replay`.
#[derive(clap::Args)]
#[command(after_help = AFTER_HELP)]
pub struct Args {
    /// Field logs (`.csv` or `.hrlog`), directories of them, or `-` for
    /// standard input (with `--from`); each log is replayed separately (one
    /// device per log).
    #[arg(value_name = "LOG", required = true)]
    logs: Vec<PathBuf>,
    #[command(flatten)]
    settings: SettingArgs,
    /// Write one decision per record: CSV (`.csv`: t_ms, chosen_tx_dbm,
    /// replayed_snr_db, outcome, logged_outcome, at_max, path_loss_db,
    /// margin_db, reason) or binary decision frames (`.hrlog`); one log only.
    #[arg(long, value_name = "decisions.csv|decisions.hrlog")]
    out: Option<PathBuf>,
    /// Draw received power (logged and replayed), noise floor, the loss
    /// threshold (noise + required SNR), lost packets, chosen power with its
    /// limits, and margin against time; `.svg` or `.png` (one log only).
    #[arg(long, value_name = "FILE.svg|FILE.png")]
    plot: Option<PathBuf>,
    /// Energy profile of the radio (TOML; see examples/energy/): report the
    /// charge per packet, mean current and battery life of the replayed
    /// controller and of the device as logged.
    #[arg(long, value_name = "PROFILE.toml")]
    energy: Option<PathBuf>,
    /// With --energy: one packet every this long (`15min`), instead of the
    /// interval the log's time stamps give.
    #[arg(long, value_name = "DURATION", value_parser = crate::quantity::duration, requires = "energy")]
    interval: Option<headroom::units::Seconds>,
    /// Compare, on each log, the joint (rate, power) controller with the
    /// engine's baselines: power-only control at each fixed rate, the rate
    /// rule of common practice, and the best single rate with a fixed margin
    /// chosen in hindsight. Needs --energy with a rate table (the profile's
    /// or the log's); prints loss, charge per delivered packet, mean current,
    /// battery life and the most airtime in any hour per rule.
    #[arg(long, requires = "energy", conflicts_with_all = ["out", "plot"])]
    baselines: bool,
    /// Replace the files of `--out` and `--plot` if they exist (never an input).
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    input: crate::logio::InputArgs,
    /// Format of the summary.
    #[arg(long, value_enum, default_value_t = ReplayFormat::Table)]
    format: ReplayFormat,
}

/// What a caller of [`run_observed`] sees besides the printed report (the
/// Python binding: per-record decisions, the totals a cluster reduces, logs
/// given as arrays). Every method does nothing by default.
pub trait Observer {
    /// The records of the log named `path`, if the caller holds them (a log
    /// handed over as columns, `crate::logio::columns`); `None`: the file
    /// is read.
    fn records(&mut self, _path: &Path) -> Option<crate::logio::LogReader> {
        None
    }
    /// A record replayed, of the log at `index` in the order of the logs.
    fn step(&mut self, _index: usize, _rec: &LogRecord, _step: &ReplayStep) {}
    /// The log at `index` is replayed: its totals and its target outage,
    /// what the fleet total (`Fleet::add`) takes.
    fn done(&mut self, _index: usize, _summary: &Summary, _target_outage: f32) {}
}

/// No observer: the command as the binary runs it.
impl Observer for () {}

impl Args {
    /// The `--column FIELD=NAME` maps (a log given as columns reads its
    /// columns by the same names).
    pub fn input_columns(&self) -> Vec<crate::logio::ColumnMap> {
        self.input.columns.clone()
    }
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    run_observed(args, &mut ())
}

/// Run the command, telling `observer` about every record and log.
pub fn run_observed(args: Args, observer: &mut dyn Observer) -> CliResult {
    let list = logs::expand(&args.logs, args.input.strict)?;
    crate::atomic::note_inputs(list.logs.iter().chain(&args.settings.config));
    for (p, why) in &list.skipped {
        warn(&format!("{}: skipped: {why}", p.display()));
    }
    if list.logs.len() > 1 {
        for (flag, set) in [
            ("--out", args.out.is_some()),
            ("--plot", args.plot.is_some()),
        ] {
            if set {
                return Err(CliError::arg(
                    flag,
                    format!(
                        "takes one log, {} were named: replay them one at a time",
                        list.logs.len()
                    ),
                ));
            }
        }
    }
    // Refuse an existing plot or a bad --out name before the work, not after.
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    if let Some(p) = &args.out {
        crate::atomic::check_new(p, args.force)?;
        LogFormat::from_path(p).map_err(|_| {
            CliError::arg(
                "--out",
                format!(
                    "{}: name it .csv (decisions as text) or .hrlog (binary decision frames)",
                    p.display()
                ),
            )
        })?;
    }
    let energy = match &args.energy {
        Some(p) => Some(crate::energy::load(p)?),
        None => None,
    };
    let resolver = Resolver::new(&args.settings)?
        .with_profile_rates(energy.as_ref().map(|e| e.rates).unwrap_or_default());
    if args.baselines {
        if let Some(p) = &energy {
            return baselines(&list.logs, &resolver, p, &args);
        }
    }
    let mut fleet = Fleet::new();
    let mut fleet_energy = ReplayEnergy::new(None);
    let mut names: Vec<String> = Vec::new();
    let mut blocks: Vec<Map<String, Value>> = Vec::new();
    let mut table = String::new();
    for (index, path) in list.logs.iter().enumerate() {
        let name = path.display().to_string();
        let given = observer.records(path);
        let (settings, s, e) = replay_log(
            path,
            &resolver,
            energy.as_ref(),
            &args,
            &mut |rec, step| observer.step(index, rec, step),
            given,
        )?;
        for w in &settings.warnings {
            warn(&format!("{name}: {w}"));
        }
        let target = settings.resolved.config.target_outage;
        let mut obj = report::log_json(&name, &settings.resolved, &settings.warnings, &s);
        obj.insert("rates".into(), report::rates_json(&settings.resolved, &s));
        if let (Some(e), Some(p)) = (&e, &energy) {
            obj.insert("energy".into(), report::energy_json(e, p, true));
            fleet_energy.merge(e);
        }
        match args.format {
            ReplayFormat::Jsonl => {
                let line = crate::output::json_line(&Value::Object(obj))?;
                print_text(&format!("{line}\n"))?;
            }
            ReplayFormat::Json => blocks.push(obj),
            ReplayFormat::Table => {
                use std::fmt::Write as _;
                let _ = writeln!(table, "== {}", crate::error::printable(&name));
                report::settings_table(&mut table, &settings.resolved);
                let _ = writeln!(table);
                report::summary_table(&mut table, &s);
                report::rates_table(&mut table, &settings.resolved, &s);
                if let (Some(e), Some(p)) = (&e, &energy) {
                    report::energy_table(&mut table, e, p, true);
                }
                let _ = writeln!(table);
            }
        }
        observer.done(index, &s, target);
        fleet.add(&s, target);
        names.push(name);
    }
    match args.format {
        ReplayFormat::Jsonl => Ok(()),
        ReplayFormat::Json => {
            let mut m = Map::new();
            m.insert(
                "logs".into(),
                Value::Array(blocks.into_iter().map(Value::Object).collect()),
            );
            let mut f = report::fleet_json(&fleet, list.skipped.len(), &names);
            if let Some(p) = &energy {
                f.insert(
                    "energy".into(),
                    report::energy_json(&fleet_energy, p, false),
                );
            }
            m.insert("fleet".into(), Value::Object(f));
            let s = crate::output::json_text(&Value::Object(m))?;
            print_text(&format!("{s}\n"))
        }
        ReplayFormat::Table => {
            if names.len() > 1 || !list.skipped.is_empty() {
                use std::fmt::Write as _;
                let _ = writeln!(table, "== fleet ({} logs)", names.len());
                report::fleet_table(&mut table, &fleet, list.skipped.len(), &names);
                if let Some(p) = &energy {
                    report::energy_table(&mut table, &fleet_energy, p, false);
                }
            }
            print_text(&table)
        }
    }
}

/// Most records of one log `--baselines` holds (the hindsight search replays
/// them many times): about 40 MB.
const MAX_BASELINE_RECORDS: usize = 1_000_000;

/// `--baselines`: every rule over each log, as a table or JSON.
fn baselines(
    logs: &[std::path::PathBuf],
    resolver: &Resolver,
    energy: &crate::energy::LoadedProfile,
    args: &Args,
) -> CliResult {
    use std::fmt::Write as _;
    let mut table = String::new();
    let mut blocks = Vec::new();
    for path in logs {
        let name = path.display().to_string();
        let fleet::OpenLog {
            mut reader,
            settings,
        } = fleet::open(
            path,
            &args.input.options_with_rates(&energy_rates(Some(energy))),
            resolver,
            None,
        )?;
        for w in &settings.warnings {
            warn(&format!("{name}: {w}"));
        }
        let cfg = settings.resolved.config;
        if cfg.rates.is_empty() {
            return Err(CliError::arg(
                "--baselines",
                format!(
                    "{name}: no rate table: give --energy a profile with [[rate]] entries, or a log with '# rate:' lines"
                ),
            ));
        }
        let remap = crate::rates::Remap::new(
            &reader.header().map(|h| h.rates).unwrap_or_default(),
            &cfg.rates,
        );
        let mut records = Vec::new();
        for rec in &mut reader {
            let mut rec = rec?;
            rec.rate = remap.apply(rec.rate).map_err(|why| {
                CliError::Input(format!("{name}: record at t_ms {}: {why}", rec.t_ms))
            })?;
            if records.len() == MAX_BASELINE_RECORDS {
                return Err(CliError::arg(
                    "--baselines",
                    format!("{name}: more than {MAX_BASELINE_RECORDS} records: compare a part of the log"),
                ));
            }
            records.push(rec);
        }
        for w in reader.warnings() {
            warn(&w);
        }
        let rows =
            fleet::baselines::compare(&cfg, &energy.profile, &records).map_err(|e| match e {
                CliError::Input(m) => CliError::Input(format!("{name}: {m}")),
                other => other,
            })?;
        match args.format {
            ReplayFormat::Table => {
                let _ = writeln!(table, "== {}", crate::error::printable(&name));
                report::settings_table(&mut table, &settings.resolved);
                let _ = writeln!(table);
                fleet::baselines::table(&mut table, &rows, &energy.profile, cfg.target_outage);
                let _ = writeln!(table);
            }
            ReplayFormat::Json | ReplayFormat::Jsonl => {
                let mut obj = Map::new();
                obj.insert("log".into(), name.clone().into());
                obj.insert("settings".into(), report::settings_json(&settings.resolved));
                obj.insert(
                    "baselines".into(),
                    Value::Array(rows.iter().map(|r| r.json(&energy.profile)).collect()),
                );
                if args.format == ReplayFormat::Jsonl {
                    let line = crate::output::json_line(&Value::Object(obj))?;
                    print_text(&format!("{line}\n"))?;
                } else {
                    blocks.push(Value::Object(obj));
                }
            }
        }
    }
    match args.format {
        ReplayFormat::Table => print_text(&table),
        ReplayFormat::Json => {
            let mut m = Map::new();
            m.insert("logs".into(), Value::Array(blocks));
            let s = crate::output::json_text(&Value::Object(m))?;
            print_text(&format!("{s}\n"))
        }
        ReplayFormat::Jsonl => Ok(()),
    }
}

/// The rate table of the energy profile, if any (empty without one).
fn energy_rates(p: Option<&crate::energy::LoadedProfile>) -> headroom::rate::RateTable {
    p.map(|e| e.rates).unwrap_or_default()
}

/// A warning on stderr.
fn warn(msg: &str) {
    crate::diag::warn(msg);
}

/// Text on stdout, flushed; a closed pipe is an error, not a panic.
fn print_text(text: &str) -> CliResult {
    crate::output::write_stdout(text)
}

/// Replay one log (one device) with a fresh controller set up from the
/// flags, the log's header and the settings file; writes `--out` and
/// `--plot` if asked; `each` sees every record. `given`: the log's records
/// if the caller holds them, else the file is read.
fn replay_log(
    path: &Path,
    resolver: &Resolver,
    energy: Option<&crate::energy::LoadedProfile>,
    args: &Args,
    each: &mut dyn FnMut(&LogRecord, &ReplayStep),
    given: Option<crate::logio::LogReader>,
) -> CliResult<(fleet::settings::LogSettings, Summary, Option<ReplayEnergy>)> {
    let fleet::OpenLog { reader, settings } = match given {
        Some(reader) => fleet::open_reader(path, reader, resolver, None)?,
        None => fleet::open(
            path,
            &args.input.options_with_rates(&energy_rates(energy)),
            resolver,
            None,
        )?,
    };
    let cfg = settings.resolved.config;
    let mut replay = match energy {
        // The engine costs each packet (and chooses among rates) with the
        // profile.
        Some(p) => HostReplay::with_energy(cfg, &p.profile),
        None => HostReplay::new(cfg),
    }
    .map_err(|e| CliError::Input(format!("{}: controller settings: {e}", path.display())))?;
    // The log's rate indices, as indices of the table in force.
    let remap = crate::rates::Remap::new(
        &reader.header().map(|h| h.rates).unwrap_or_default(),
        &cfg.rates,
    );
    let out = match &args.out {
        Some(p) => Some(DecisionWriter::create(p, args.force, cfg.rates)?),
        None => None,
    };
    let mut sinks = Sinks {
        path,
        remap: &remap,
        energy,
        each,
        out,
        series: args.plot.as_ref().map(|_| ReplaySeries::new()),
        tally: energy.map(|_| ReplayEnergy::new(args.interval)),
        last_rate: None,
    };
    // The log is read and decoded on a thread of its own while the records
    // before are replayed. Each record's logged readings are checked (they
    // depend on the settings only) on the lighter of the two threads: the
    // reading thread for a binary log, with a copy of the replay that never
    // steps (callgrind, 200 000-record format 2 log: the replay thread went
    // from 1 027 to 803 x86 instructions a record, the reading thread from
    // 417 to 622), the replay thread for CSV (reading a row costs 1 350:
    // the reading thread is the critical path, and even handing an empty
    // check along cost it 31 a row).
    let reader = if reader.format() == LogFormat::Binary {
        let checker = Box::new(replay);
        let mut records = crate::logio::ReadAhead::with(reader, move |rec| checker.check(rec));
        sinks.run(&mut records, &mut replay, |r, rec, checked| {
            r.step_checked(rec, checked)
        })?;
        records.finish()?
    } else {
        let mut records = crate::logio::ReadAhead::new(reader);
        sinks.run(&mut records, &mut replay, |r, rec, ()| r.step(rec))?;
        records.finish()?
    };
    let Sinks {
        out,
        mut series,
        tally,
        ..
    } = sinks;
    for w in reader.warnings() {
        warn(&w);
    }
    if replay.summary().records == 0 && reader.damage_summary().regions > 0 {
        return Err(CliError::Input(format!(
            "{}: no readable record, only damaged bytes: is it a headroom log?",
            path.display()
        )));
    }
    if let Some(w) = out {
        w.finish()?;
    }
    if let (Some(p), Some(s)) = (&args.plot, &mut series) {
        if s.is_empty() {
            return Err(CliError::arg(
                "--plot",
                format!("{}: the log has no records to draw", path.display()),
            ));
        }
        let (lo, hi) = replay.controller().limits();
        s.limits_dbm = Some((lo.0, hi.0));
        s.cap_tx_dbm = cfg
            .eirp_cap_dbm
            .level()
            .map(|c| c.0 - cfg.antenna_gain_dbi.0);
        let name = path.file_name().map_or_else(
            || path.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        );
        plot::replay_plot(p, args.force, &format!("replay of {name}"), s)?;
    }
    Ok((settings, *replay.summary(), tally))
}

/// What [`replay_log`] does with each record of a log besides the replay:
/// the rate remapped before, the observer, the energy tally, `--out` and
/// `--plot` after.
struct Sinks<'a> {
    path: &'a Path,
    remap: &'a crate::rates::Remap,
    energy: Option<&'a crate::energy::LoadedProfile>,
    each: &'a mut dyn FnMut(&LogRecord, &ReplayStep),
    out: Option<DecisionWriter>,
    series: Option<ReplaySeries>,
    tally: Option<ReplayEnergy>,
    last_rate: Option<u8>,
}

impl Sinks<'_> {
    /// Replay `records` in order, each stepped by `step` with what the
    /// reading thread computed of it (one loop, compiled for each kind of
    /// reading ahead: a closure called from two loops was not inlined and
    /// cost the replay thread 58 instructions a record).
    #[inline(always)]
    fn run<T: Send + 'static>(
        &mut self,
        records: &mut crate::logio::ReadAhead<T>,
        replay: &mut HostReplay,
        step: impl Fn(&mut HostReplay, &LogRecord, &T) -> ReplayStep,
    ) -> CliResult {
        for item in records {
            let (mut rec, pre) = item?;
            rec.rate = self.remap.apply(rec.rate).map_err(|why| {
                CliError::Input(format!(
                    "{}: record at t_ms {}: {why}",
                    self.path.display(),
                    rec.t_ms
                ))
            })?;
            let step = step(replay, &rec, &pre);
            (self.each)(&rec, &step);
            if let (Some(t), Some(p)) = (self.tally.as_mut(), self.energy) {
                t.add(&p.profile, &rec, &step).map_err(|e| {
                    let why = crate::energy::refusal(&e, "--energy", "--interval", &[]);
                    CliError::Input(format!(
                        "{}: record at t_ms {}: {}",
                        self.path.display(),
                        rec.t_ms,
                        why
                    ))
                })?;
            }
            if let Some(w) = self.out.as_mut() {
                w.row(&step)?;
            }
            let rate_before = self.last_rate;
            if step.rate.is_some() {
                self.last_rate = step.rate;
            }
            if let Some(s) = self.series.as_mut() {
                s.push(ReplayPoint {
                    t_ms: step.t_ms,
                    logged_rx_dbm: rec.rssi_dbm,
                    replayed_rx_dbm: step.replayed_rx(&rec).map(|d| d.0),
                    noise_floor_dbm: rec.noise_dbm,
                    tx_power_dbm: Some(step.chosen.0),
                    margin_db: Some(step.margin.0),
                    lost: step.outcome == Outcome::Lost,
                    threshold_dbm: replay.loss_threshold(&rec).map(|d| d.0),
                    rate_changed: rate_before.is_some()
                        && step.rate.is_some()
                        && step.rate != rate_before,
                });
            }
        }
        Ok(())
    }
}

/// The columns of one decision per record, in order: the `--out` CSV's
/// header row and the Python binding's arrays.
pub const DECISION_COLUMNS: [&str; 9] = [
    "t_ms",
    "chosen_tx_dbm",
    "replayed_snr_db",
    "outcome",
    "logged_outcome",
    "at_max",
    "path_loss_db",
    "margin_db",
    "reason",
];

/// The `--out` decisions, CSV or binary frames by the name's extension,
/// written through [`AtomicFile`]: nothing under the final name until the
/// replay is complete.
struct DecisionWriter {
    file: AtomicFile,
    binary: Option<(Encoder, Box<[u8; MAX_FRAME]>)>,
    /// The rate table in force: CSV rows name the chosen rate when it is
    /// not empty.
    rates: headroom::rate::RateTable,
}

impl DecisionWriter {
    fn create(dest: &Path, force: bool, rates: headroom::rate::RateTable) -> CliResult<Self> {
        let format = LogFormat::from_path(dest)?;
        let mut w = DecisionWriter {
            file: AtomicFile::create(dest, force)?,
            binary: None,
            rates,
        };
        match format {
            LogFormat::Csv => {
                let mut head = DECISION_COLUMNS.join(",");
                if !rates.is_empty() {
                    head.push_str(",rate,airtime_us,charge_uc");
                }
                w.write_line(&head)?;
            }
            LogFormat::Binary => w.binary = Some((Encoder::new(), Box::new([0u8; MAX_FRAME]))),
        }
        Ok(w)
    }

    fn write_line(&mut self, line: &str) -> CliResult {
        writeln!(self.file, "{line}").map_err(|e| self.file.io_error(e))
    }

    fn row(&mut self, s: &ReplayStep) -> CliResult {
        if let Some((enc, buf)) = self.binary.as_mut() {
            let d = DecisionRecord {
                t_ms: s.t_ms,
                tx_dbm: s.chosen.0,
                outcome: s.outcome.code(),
                reason: s.reason.code(),
                rate: s.rate,
            };
            let frame = enc
                .decision(&d, &mut buf[..])
                .map_err(|e| CliError::Io(format!("cannot encode a decision frame: {e}")))?;
            return self
                .file
                .write_all(frame)
                .map_err(|e| self.file.io_error(e));
        }
        let num = |x: Option<f32>| x.map_or(String::new(), |v| format!("{v}"));
        let logged = match s.logged_lost {
            Some(true) => "lost",
            Some(false) => "delivered",
            None => "unjudged",
        };
        let line = format!(
            "{},{},{},{},{},{},{},{},{}",
            s.t_ms,
            s.chosen.0,
            num(s.replayed_snr.map(|d| d.0)),
            s.outcome.as_str(),
            logged,
            u8::from(s.at_max),
            num(s.path_loss_estimate.map(|d| d.0)),
            s.margin.0,
            s.reason.as_str()
        );
        if self.rates.is_empty() {
            return self.write_line(&line);
        }
        let rate = s
            .rate
            .and_then(|m| self.rates.get(m))
            .map_or("", |r| r.name.as_str());
        let line = format!(
            "{line},{rate},{},{}",
            s.airtime_us.map_or(String::new(), |a| a.to_string()),
            num(s.charge.map(|c| c.0))
        );
        self.write_line(&line)
    }

    fn finish(self) -> CliResult {
        self.file.commit()
    }
}

#[cfg(test)]
mod tests {
    use crate::fleet::settings::parse_config;
    use headroom::control::settings::{Role, Setting};

    /// The shipped template sets only how the controller moves and what
    /// readings are believable: never a device's facts or the judging rule.
    #[test]
    fn example_template_holds_no_device_facts() {
        let text = include_str!("../../../examples/controllers/tuning.toml");
        let layer = parse_config(text).expect("example parses");
        for s in Setting::ALL {
            if layer.is_set(s) {
                assert!(
                    matches!(s.role(), Role::Tuning | Role::Plausibility),
                    "examples/controllers/tuning.toml sets {s}"
                );
            }
        }
        assert!(layer.is_set(Setting::MarginStepDb));
    }
}
