//! `headroom synth`: write a synthetic field log from a channel scenario.
//!
//! The channel itself is the engine's seeded simulator
//! ([`headroom::sim::Channel`]); faults are applied by
//! [`headroom::sim::FaultInjector`]. This command reads the scenario, picks
//! the transmit power of each packet from the scenario's pattern, and writes
//! the records through [`crate::logio`] (a temporary file renamed into place).

use std::path::{Path, PathBuf};

use headroom::record::LogHeader;
use headroom::sim::{ChannelConfig, Fault, PowerPattern, RateSchedule, Synth, MAX_FAULTS};
use headroom::units::{Db, Dbi, Dbm};
use serde::Deserialize;

use crate::error::{CliError, CliResult};
use crate::logio;
use crate::output::{Format, Report};

mod scenario_units;

/// Most records one run writes (about 0.5 GB of CSV).
const MAX_RECORDS: u64 = 10_000_000;

/// Arguments of `headroom synth`.
#[derive(clap::Args)]
pub struct Args {
    /// Scenario file (TOML): the channel, the power pattern, the faults.
    #[arg(long, value_name = "FILE.toml")]
    scenario: PathBuf,
    /// Seed of the simulation: the same scenario and seed give the same log.
    #[arg(long, value_name = "N")]
    seed: u64,
    /// Number of records (packets) to write.
    #[arg(long, value_name = "K")]
    records: u64,
    /// Output log; `.csv` or `.hrlog` (framed binary), told by the extension.
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// Replace the output file if it exists.
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    write: logio::OutputArgs,
    /// Energy profile whose `[[rate]]` table the log is written with (its
    /// header carries the table, each record its rate): with
    /// `--rate-schedule`.
    #[arg(long, value_name = "PROFILE.toml", requires = "rate_schedule")]
    rates: Option<PathBuf>,
    /// The rates the packets are sent at, cycled, by name (`sf7,sf9,sf12`):
    /// the noise floor of each record is at its rate's noise bandwidth.
    #[arg(long, value_name = "NAME,...", requires = "rates")]
    rate_schedule: Option<String>,
    /// Packets sent at each rate of the schedule before the next.
    #[arg(
        long,
        value_name = "N",
        requires = "rate_schedule",
        default_value_t = 1
    )]
    rate_hold: u64,
    /// Format of the summary printed after writing.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
}

/// The rate schedule of `--rates`, `--rate-schedule` and `--rate-hold`.
fn rate_schedule(args: &Args) -> CliResult<Option<RateSchedule>> {
    let (Some(path), Some(names)) = (&args.rates, &args.rate_schedule) else {
        return Ok(None);
    };
    let table = crate::energy::load(path)?.rates;
    if table.is_empty() {
        return Err(CliError::arg(
            "--rates",
            format!("{}: the profile has no [[rate]] entries", path.display()),
        ));
    }
    let indices = names
        .split(',')
        .map(|n| {
            let n = n.trim();
            table.index_of(n).ok_or_else(|| {
                CliError::arg(
                    "--rate-schedule",
                    format!(
                        "'{}' is not a rate of {} (rates: {})",
                        crate::error::printable(n),
                        path.display(),
                        crate::rates::names(&table)
                    ),
                )
            })
        })
        .collect::<CliResult<Vec<u8>>>()?;
    RateSchedule::new(table, &indices, args.rate_hold)
        .map(Some)
        .map_err(|e| {
            crate::error::engine_error(
                &e,
                &[
                    ("rate schedule (index)", "--rate-schedule"),
                    ("rate schedule (count)", "--rate-schedule"),
                    ("rate schedule hold_packets", "--rate-hold"),
                ],
            )
        })
}

/// A scenario file.
///
/// Quantities take the unit strings of link files and the command line
/// ([`crate::quantity`]); names and parameters are those of
/// [`crate::names`] (`path_loss` is spelt as a link file's `[path]`).
///
/// ```toml
/// description = "free text, copied nowhere"   # optional
///
/// [channel]                       # headroom::sim::ChannelConfig
/// frequency = "868MHz"
/// packet_interval_ms = 60000
/// start_ms = 0                    # optional, time stamp of packet 0
/// tx_antenna_gain = "2dBi"        # optional (0)
/// rx_antenna_gain = "5dBi"        # optional (0)
/// fading = { model = "rician", k_factor = "6dB" }   # or "rayleigh", or "none"
/// fading_correlation = 0.0        # optional, [0, 1), lag-1 correlation
/// min_snr = "-15dB"               # optional: packets below are lost
/// report_resolution = "1dB"       # optional: readings rounded to this
/// path_loss = { model = "log-distance", reference_distance = "1m", reference_loss = "31.2dB", exponent = 3.2 }
/// trajectory = { start = "1.2km", speed_m_per_s = 0.0, min = "1.2km", max = "1.2km" }
/// shadowing = { sigma = "4dB", decorrelation_distance = "50m", time_constant_s = 3600.0 }  # optional
/// noise = { mean = "-117dBm", jitter = "0.7dB", bursts = { rate_per_hour = 0.5, mean_duration_s = 120.0 }, burst_rise = "15dB" }
/// feedback_dropouts = { rate_per_hour = 0.2, mean_duration_s = 600.0 }   # optional
/// steps = [ { at_packet = 5000, change = "20dB" }, { at_packet = 5600, change = "-20dB" } ]  # optional, ≤ 16
///
/// [power]                         # headroom::sim::PowerPattern
/// levels_dbm = [2.0, 8.0, 14.0]   # dBm, cycled, ≤ 32; one entry for a fixed power
/// hold_packets = 100              # packets per level before the next (default 1)
///
/// [radio]                         # optional; written into the log's header
/// device_id = 7
/// min_tx_dbm = -4.0               # or "-4dBm"
/// max_tx_dbm = 14.0
/// tx_step_db = 2.0
/// antenna_gain_dbi = 2.0
///
/// [[faults]]                      # optional, ≤ 16, applied to the records in order
/// kind = "stuck_rssi"             # or { saturation = { level = -30.0 } }, ...
/// start = 1000                    # index of the first damaged record
/// length = 50                     # records damaged
/// ```
///
/// The spellings of the previous release are still read, each with a
/// warning on stderr: bare numbers for the frequency (Hz), distances (m) and
/// the noise mean (dBm), and the engine's own `path_loss = { hata = { ht,
/// hr, env, ext = "refuse" } }` and `fading = { rician = { k_db } }` forms.
///
/// Fault kinds: `"feedback_dropout"`, `"stuck_rssi"`,
/// `{ saturation = { level = DBM } }`, `{ noise_burst = { rise = DB } }`,
/// `{ path_loss_step = { change = DB } }`, `"duplicate_timestamp"`,
/// `{ backwards_timestamp = { by_ms = MS } }`,
/// `{ milliwatts = { field = "tx" | "rssi" | "noise" } }`,
/// `{ not_a_number = { field = ... } }`,
/// `{ infinite = { field = ..., negative = BOOL } }`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Free text describing the scenario.
    #[serde(default)]
    pub description: Option<String>,
    /// The simulated link.
    pub channel: ChannelConfig,
    /// How the transmit power of each packet is chosen.
    pub power: PowerPattern,
    /// The logging radio, for the log header.
    #[serde(default)]
    pub radio: Option<Radio>,
    /// Faults applied to the logged records.
    #[serde(default)]
    pub faults: Vec<Fault>,
}

/// The logging radio's capabilities, copied into the log header.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Radio {
    /// Device identifier.
    #[serde(default)]
    pub device_id: u64,
    /// Lowest settable transmit power, dBm.
    pub min_tx_dbm: Option<f32>,
    /// Highest settable transmit power, dBm.
    pub max_tx_dbm: Option<f32>,
    /// Step between settable powers, dB.
    pub tx_step_db: Option<f32>,
    /// Antenna gain, dBi.
    pub antenna_gain_dbi: Option<f32>,
    /// SNR below which the far end loses a packet, dB (the demodulator's
    /// requirement at the rate the device uses).
    pub required_snr_db: Option<f32>,
    /// Regulatory EIRP cap the device is installed under, dBm.
    pub eirp_cap_dbm: Option<f32>,
}

fn check_power(p: &PowerPattern, radio: Option<&Radio>) -> CliResult {
    p.check().map_err(|e| CliError::arg("power", e))?;
    if let Some(r) = radio {
        let lo = r.min_tx_dbm.unwrap_or(f32::NEG_INFINITY);
        let hi = r.max_tx_dbm.unwrap_or(f32::INFINITY);
        for l in &p.levels_dbm {
            if l.0 < lo || l.0 > hi {
                return Err(CliError::arg(
                    "power.levels_dbm",
                    format!("{} dBm is outside the radio's range {lo}..{hi} dBm", l.0),
                ));
            }
        }
    }
    Ok(())
}

impl Radio {
    fn header(&self) -> CliResult<LogHeader> {
        let fin = |name: &str, v: Option<f32>| match v {
            Some(x) if !x.is_finite() => Err(CliError::arg(name, "must be a finite number")),
            _ => Ok(v),
        };
        let min = fin("radio.min_tx_dbm", self.min_tx_dbm)?;
        let max = fin("radio.max_tx_dbm", self.max_tx_dbm)?;
        if let (Some(a), Some(b)) = (min, max) {
            if a > b {
                return Err(CliError::arg(
                    "radio.min_tx_dbm",
                    "is above radio.max_tx_dbm",
                ));
            }
        }
        let step = fin("radio.tx_step_db", self.tx_step_db)?;
        if step.is_some_and(|s| s <= 0.0) {
            return Err(CliError::arg(
                "radio.tx_step_db",
                "must be greater than zero",
            ));
        }
        Ok(LogHeader {
            device_id: self.device_id,
            epoch_ms: 0,
            min_tx: min.map(Dbm),
            max_tx: max.map(Dbm),
            tx_step: step.map(Db),
            antenna_gain: fin("radio.antenna_gain_dbi", self.antenna_gain_dbi)?.map(Dbi),
            required_snr: fin("radio.required_snr_db", self.required_snr_db)?.map(Db),
            eirp_cap: fin("radio.eirp_cap_dbm", self.eirp_cap_dbm)?.map(Dbm),
            rates: headroom::rate::RateTable::empty(),
        })
    }
}

/// Read and check a scenario file.
pub fn load_scenario(path: &Path) -> CliResult<Scenario> {
    load_scenario_warn(path, &mut Vec::new())
}

/// [`load_scenario`], keeping the warnings.
pub fn load_scenario_warn(path: &Path, warnings: &mut Vec<String>) -> CliResult<Scenario> {
    let text = crate::atomic::read_text(path)?;
    parse_scenario_warn(&text, warnings).map_err(|e| match e {
        CliError::Input(m) => CliError::Input(format!("{}: {m}", path.display())),
        other => other,
    })
}

/// Parse a scenario from TOML text; errors name the line. Warnings about
/// old spellings are printed on stderr.
pub fn parse_scenario(text: &str) -> CliResult<Scenario> {
    let mut warnings = Vec::new();
    parse_scenario_warn(text, &mut warnings)
}

/// [`parse_scenario`], keeping the warnings.
pub fn parse_scenario_warn(text: &str, warnings: &mut Vec<String>) -> CliResult<Scenario> {
    let normalised = match text.parse::<toml_edit::DocumentMut>() {
        Ok(mut doc) => {
            scenario_units::normalise(&mut doc, warnings)?;
            doc.to_string()
        }
        // A syntax error: let the reader below report it with its line.
        Err(_) => text.to_string(),
    };
    let text = normalised.as_str();
    let sc: Scenario = toml::from_str(text).map_err(|e| {
        let line = e.span().map(|s| {
            text.get(..s.start)
                .map_or(1, |t| t.matches('\n').count() + 1)
        });
        let msg = e.message().trim().replace('\n', " ");
        match line {
            Some(l) => CliError::Input(format!("line {l}: {msg}")),
            None => CliError::Input(msg),
        }
    })?;
    if sc.faults.len() > MAX_FAULTS {
        return Err(CliError::arg(
            "faults",
            format!("at most {MAX_FAULTS} faults"),
        ));
    }
    if let Some(r) = &sc.radio {
        r.header()?;
    }
    check_power(&sc.power, sc.radio.as_ref())?;
    // Start the simulator once, so that what only it refuses (a NaN
    // frequency, say) is reported now, naming the key.
    Synth::<MAX_FAULTS>::new(sc.channel.clone(), sc.power.clone(), &sc.faults, 0)
        .map_err(|e| crate::error::engine_error(&e, KEYS))?;
    Ok(sc)
}

/// Keys of a scenario file by the engine parameter they become, so that an
/// engine error names the key.
const KEYS: &[(&str, &str)] = &[
    ("frequency", "channel.frequency"),
    ("tx_antenna_gain", "channel.tx_antenna_gain"),
    ("rx_antenna_gain", "channel.rx_antenna_gain"),
    ("packet_interval_ms", "channel.packet_interval_ms"),
    ("fading_correlation", "channel.fading_correlation"),
];

/// Counts of what a run wrote.
#[derive(Debug, Default, PartialEq, Eq)]
pub struct Tally {
    /// Records written.
    pub records: u64,
    /// Packets the far end did not receive (SNR below `min_snr`).
    pub lost: u64,
    /// Received packets whose report did not come back.
    pub feedback_lost: u64,
    /// Packets sent during a noise burst.
    pub in_noise_burst: u64,
    /// Records damaged by a scenario fault.
    pub faulty: u64,
}

/// Simulate `records` packets of `sc` with `seed` (at the rates of
/// `rates`, if given), handing each logged record to `sink`.
pub fn simulate(
    sc: &Scenario,
    seed: u64,
    records: u64,
    rates: Option<&RateSchedule>,
    mut sink: impl FnMut(&headroom::record::LogRecord) -> CliResult,
) -> CliResult<Tally> {
    let mut synth =
        Synth::<MAX_FAULTS>::new(sc.channel.clone(), sc.power.clone(), &sc.faults, seed)
            .map_err(|e| CliError::arg("scenario", e))?;
    if let Some(r) = rates {
        synth = synth.with_rates(r.clone());
    }
    let mut tally = Tally::default();
    for k in 0..records {
        let (s, rec) = synth
            .next_record()
            .map_err(|e| CliError::arg("scenario", e))?;
        tally.lost += u64::from(!s.received);
        tally.feedback_lost += u64::from(s.feedback_lost);
        tally.in_noise_burst += u64::from(s.in_noise_burst);
        tally.faulty += u64::from(synth.faults().is_faulty(k));
        sink(&rec)?;
        tally.records += 1;
    }
    Ok(tally)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    if args.records == 0 || args.records > MAX_RECORDS {
        return Err(CliError::arg(
            "--records",
            format!("must be between 1 and {MAX_RECORDS}"),
        ));
    }
    let mut warnings = Vec::new();
    let sc = load_scenario_warn(&args.scenario, &mut warnings)?;
    let mut header = sc.radio.as_ref().map(Radio::header).transpose()?;
    let schedule = rate_schedule(&args)?;
    if let Some(r) = &schedule {
        header.get_or_insert_with(LogHeader::default).rates = r.table;
    }
    let mut out = logio::create_versioned(
        &args.out,
        None,
        args.write.binary_version,
        args.force,
        header,
    )?;
    let tally = simulate(&sc, args.seed, args.records, schedule.as_ref(), |r| {
        out.write(r)
    })?;
    out.finish()?;

    let mut rep = Report::new();
    if let Some(d) = &sc.description {
        rep.value("scenario", d.clone().into());
    }
    rep.value("out", args.out.display().to_string().into())
        .value("seed", args.seed.into())
        .value("records", tally.records.into())
        .value("lost", tally.lost.into())
        .value("feedback_lost", tally.feedback_lost.into())
        .value("in_noise_burst", tally.in_noise_burst.into())
        .value("faulty_records", tally.faulty.into());
    if let (Some(r), Some(names)) = (&schedule, &args.rate_schedule) {
        rep.value("rate_schedule", names.clone().into())
            .value("rate_hold", r.hold_packets.into())
            .value(
                "rates",
                crate::rates::describe(&r.table)
                    .into_iter()
                    .map(serde_json::Value::from)
                    .collect::<Vec<_>>()
                    .into(),
            );
    }
    rep.value("warnings", warnings.into());
    rep.print(args.format)
}

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = r#"
[channel]
frequency = 868.0e6
packet_interval_ms = 1000
fading = "rayleigh"
path_loss = { log-distance = { d0 = 1.0, exponent = 3.0 } }
trajectory = { start = 500.0 }
noise = { mean = -117.0 }
[power]
levels_dbm = [2.0, 14.0]
hold_packets = 3
[[faults]]
kind = { saturation = { level = -20.0 } }
start = 4
length = 2
"#;

    #[test]
    fn minimal_scenario_parses_and_runs() {
        let sc = parse_scenario(MINIMAL).expect("the minimal scenario parses");
        let mut recs = Vec::new();
        let t = simulate(&sc, 5, 10, None, |r| {
            recs.push(*r);
            Ok(())
        });
        assert!(t.is_ok());
        let tx: Vec<Option<f32>> = recs.iter().map(|r| r.tx_dbm).collect();
        let want = [2.0, 2.0, 2.0, 14.0, 14.0, 14.0, 2.0, 2.0, 2.0, 14.0].map(Some);
        assert_eq!(tx, want);
        assert_eq!(recs.get(4).and_then(|r| r.rssi_dbm), Some(-20.0));
        assert_eq!(recs.get(9).map(|r| r.t_ms), Some(9000));
    }

    #[test]
    fn errors_name_the_line_and_field() {
        let bad = MINIMAL.replace("hold_packets = 3", "hold_packets = 3\ncolour = 1");
        let e = parse_scenario(&bad)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(e.contains("line 12") && e.contains("colour"), "{e}");
        let bad = MINIMAL.replace("levels_dbm = [2.0, 14.0]", "levels_dbm = []");
        let e = parse_scenario(&bad)
            .err()
            .map(|e| e.to_string())
            .unwrap_or_default();
        assert!(e.contains("power.levels_dbm"), "{e}");
        assert!(!e.contains('\n'));
    }

    fn same(a: Option<f32>, b: Option<f32>) -> bool {
        match (a, b) {
            (Some(x), Some(y)) => x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan()),
            (None, None) => true,
            _ => false,
        }
    }

    #[test]
    fn fault_scenarios_write_logs_that_read_back_unchanged() {
        let dir = tempfile::tempdir().expect("temporary directory");
        let scenarios = Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples/scenarios/faults");
        for name in ["non-finite", "wrong-unit", "timestamps"] {
            let sc =
                load_scenario(&scenarios.join(format!("{name}.toml"))).expect("scenario loads");
            for ext in ["csv", "hrlog"] {
                let out = dir.path().join(format!("{name}.{ext}"));
                let mut want = Vec::new();
                let mut w = logio::create(&out, false, None).expect("create");
                simulate(&sc, 7, 3100, None, |r| {
                    want.push(*r);
                    w.write(r)
                })
                .expect("simulated");
                w.finish().expect("written");
                // Refuses to overwrite without --force.
                assert!(logio::create(&out, false, None).is_err());
                let got: Vec<_> = logio::open(&out)
                    .expect("open")
                    .map(|r| r.expect("record"))
                    .collect();
                assert_eq!(got.len(), want.len(), "{name}.{ext}");
                for (g, w) in got.iter().zip(&want) {
                    assert_eq!(g.t_ms, w.t_ms);
                    assert!(same(g.tx_dbm, w.tx_dbm), "{name}.{ext}: {g:?} vs {w:?}");
                    assert!(same(g.rssi_dbm, w.rssi_dbm), "{name}.{ext}: {g:?} vs {w:?}");
                    assert!(
                        same(g.noise_dbm, w.noise_dbm),
                        "{name}.{ext}: {g:?} vs {w:?}"
                    );
                }
            }
        }
    }
}
