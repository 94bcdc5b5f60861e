//! The settings of a replay: the flags that set them, settings files, and
//! their resolution against each log's header (the engine's
//! `headroom::control::settings`, the same rule the firmware applies).
//!
//! `replay` and `tune` take the same [`SettingArgs`]. Values take unit
//! strings everywhere (`-12.5dB`, `20dBm`, `25mW`, `1%`) or bare numbers in
//! the unit the key names (`max_tx_dbm = 20` is dBm); `eirp_cap_dbm` also
//! takes `none`.

use std::path::{Path, PathBuf};

use headroom::control::settings::{self, Kind, Layer, ResolveError, Resolved, Setting, Value};
use headroom::control::{DutyLimit, EirpCap, PowerSteps};
use headroom::record::LogHeader;
use headroom::units::Db;

use crate::error::{CliError, CliResult};
use crate::quantity;

/// The flags that set controller settings, shared by `replay` and `tune`.
#[derive(clap::Args, Clone, Debug, Default)]
pub struct SettingArgs {
    /// Controller settings file (TOML; keys as in
    /// examples/controllers/tuning.toml). A template: a log's header beats
    /// it for the device's own facts; flags beat both.
    #[arg(long, value_name = "CTRL.toml")]
    pub config: Option<PathBuf>,
    /// SNR below which the far end loses a packet (e.g. `-12.5dB`); beats
    /// the log header's `required_snr_db`. There is no built-in value.
    #[arg(long, value_name = "X")]
    pub required_snr_db: Option<String>,
    /// Wanted probability of losing a packet: `0.01` or `1%`.
    #[arg(long, value_name = "P")]
    pub target_outage: Option<String>,
    /// Lowest power of the radio (`-9dBm`, `0.125mW`).
    #[arg(long, value_name = "A")]
    pub min_tx_dbm: Option<String>,
    /// Highest power of the radio.
    #[arg(long, value_name = "B")]
    pub max_tx_dbm: Option<String>,
    /// Regulatory EIRP cap (`16.15dBm`), or `none`. Without one from a
    /// flag, the log header or a settings file, no cap is applied.
    #[arg(long, value_name = "C|none")]
    pub eirp_cap_dbm: Option<String>,
    /// Gain of the device's antenna (`2.15dBi`).
    #[arg(long, value_name = "G")]
    pub antenna_gain_dbi: Option<String>,
    /// Power before enough feedback (default: the highest allowed power).
    #[arg(long, value_name = "S")]
    pub start_tx_dbm: Option<String>,
    /// Uniform step between the radio's powers (replaces any level table).
    #[arg(long, value_name = "D")]
    pub tx_step_db: Option<String>,
    /// Regional duty-cycle limit: the fraction of any hour the radio may
    /// be on air (`1%`, `0.001`), or `none`. There is no built-in value:
    /// without one, no duty budget is applied (shown as none). Check the
    /// rules of your band and region.
    #[arg(long, value_name = "F|none")]
    pub duty_limit: Option<String>,
    /// The rate a log's packets were sent at when its records do not say
    /// (no `rate` column or field): a name of the rate table in force.
    /// Needed to replay such a log across rates with noise bandwidths.
    #[arg(long, value_name = "NAME")]
    pub logged_rate: Option<String>,
    /// Any setting by its TOML key: `--set margin_step_db=0.25dB`
    /// (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
}

/// The settings with a flag of their own (the ones users set most); the
/// settings table always shows them.
pub const OWN_FLAG: [Setting; 10] = [
    Setting::RequiredSnrDb,
    Setting::TargetOutage,
    Setting::MinTxDbm,
    Setting::MaxTxDbm,
    Setting::EirpCapDbm,
    Setting::AntennaGainDbi,
    Setting::StartTxDbm,
    Setting::Steps,
    Setting::DutyLimit,
    Setting::LoggedRate,
];

/// The flag that sets a setting, for messages.
pub fn flag_for(s: Setting) -> String {
    match s {
        Setting::Steps => "--tx-step-db".into(),
        s if OWN_FLAG.contains(&s) => format!("--{}", s.key().replace('_', "-")),
        _ => format!("--set {}=...", s.key()),
    }
}

/// Parse a setting's value from text (a flag, `--set`, a TOML string).
pub fn parse_value(s: Setting, text: &str) -> Result<Value, String> {
    let t = text.trim();
    match s.kind() {
        Kind::Db => quantity::db(t).map(|d| Value::Number(d.0)),
        Kind::Dbm => quantity::power(t).map(|d| Value::Number(d.0)),
        Kind::Dbi => quantity::gain(t).map(|d| Value::Number(d.0)),
        Kind::Probability => probability(t).map(Value::Number),
        Kind::Count | Kind::Milliseconds => t
            .parse::<u32>()
            .map(Value::Whole)
            .map_err(|_| format!("'{t}' is not a whole number")),
        Kind::Steps => quantity::db(t).map(|d| Value::Steps(PowerSteps::Uniform(Db(d.0)))),
        Kind::Cap => {
            if t.eq_ignore_ascii_case("none") {
                Ok(Value::Cap(EirpCap::NoCap))
            } else {
                quantity::power(t)
                    .map(|d| Value::Cap(EirpCap::AtMost(d)))
                    .map_err(|e| format!("{e} (or 'none')"))
            }
        }
        Kind::Fraction => probability(t).map(Value::Number),
        Kind::Duty => {
            if t.eq_ignore_ascii_case("none") {
                Ok(Value::Duty(DutyLimit::NoLimit))
            } else {
                probability(t)
                    .map(|f| Value::Duty(DutyLimit::AtMost(f)))
                    .map_err(|e| format!("{e} (or 'none')"))
            }
        }
        Kind::RateName => headroom::rate::RateName::new(t)
            .map(|n| Value::Rate(Some(n)))
            .map_err(|e| e.to_string()),
        Kind::Rates => Err(
            "a rate table comes from an energy profile's [[rate]] entries (--energy) or the log header"
                .into(),
        ),
    }
}

/// A probability as `0.01` or `1%`.
pub fn probability(s: &str) -> Result<f32, String> {
    if s.trim_end().ends_with('%') {
        Ok(quantity::percent(s)? / 100.0)
    } else {
        quantity::number(s)
    }
}

/// A setting's value from a TOML value: a bare number in the key's unit, a
/// string with a unit, a table for `steps`.
fn toml_value(s: Setting, v: &toml::Value) -> Result<Value, String> {
    match (s.kind(), v) {
        (_, toml::Value::String(t)) => parse_value(s, t),
        (Kind::Count | Kind::Milliseconds, toml::Value::Integer(i)) => u32::try_from(*i)
            .map(Value::Whole)
            .map_err(|_| format!("{i} is not a whole number in 0..{}", u32::MAX)),
        (Kind::Count | Kind::Milliseconds, _) => Err("expected a whole number".into()),
        (Kind::Steps, toml::Value::Table(_)) => v
            .clone()
            .try_into::<PowerSteps>()
            .map(Value::Steps)
            .map_err(|e| one_line(&e.to_string())),
        (Kind::Steps, _) => {
            Err("expected { uniform = STEP } or { table = [LEVELS...] }".to_string())
        }
        (_, toml::Value::Integer(i)) => {
            #[allow(clippy::cast_precision_loss)] // range-checked by the engine
            let x = *i as f32;
            number_value(s, x)
        }
        (_, toml::Value::Float(x)) => {
            #[allow(clippy::cast_possible_truncation)] // range-checked by the engine
            let x = *x as f32;
            number_value(s, x)
        }
        _ => Err("expected a number or a string with a unit".into()),
    }
}

fn number_value(s: Setting, x: f32) -> Result<Value, String> {
    Ok(match s.kind() {
        Kind::Cap => Value::Cap(EirpCap::AtMost(headroom::units::Dbm(x))),
        Kind::Duty => Value::Duty(DutyLimit::AtMost(x)),
        _ => Value::Number(x),
    })
}

/// toml's messages span several lines (a caret under the source); keep one.
pub fn one_line(s: &str) -> String {
    let lines: Vec<&str> = s.lines().map(str::trim).filter(|l| !l.is_empty()).collect();
    // First line names the position, the last one says what is wrong.
    match (lines.first(), lines.last()) {
        (Some(a), Some(b)) if a != b => format!("{a} {b}"),
        (Some(a), _) => (*a).to_string(),
        _ => s.to_string(),
    }
}

/// A settings file as a layer. Unknown keys are refused, with the known ones.
pub fn load_config(path: &Path) -> CliResult<Layer> {
    let text = crate::atomic::read_text(path)?;
    parse_config(&text).map_err(|e| CliError::arg("--config", format!("{}: {e}", path.display())))
}

/// A settings file's text as a layer.
pub fn parse_config(text: &str) -> Result<Layer, String> {
    let table: toml::Table = toml::from_str(text).map_err(|e| one_line(&e.to_string()))?;
    let mut layer = Layer::empty();
    for (k, v) in &table {
        let s = Setting::from_key(k).ok_or_else(|| {
            format!(
                "unknown key '{k}' (known: {})",
                Setting::ALL.map(Setting::key).join(", ")
            )
        })?;
        let value = toml_value(s, v).map_err(|e| format!("{k}: {e}"))?;
        layer.set(s, value).map_err(|e| e.to_string())?;
    }
    Ok(layer)
}

impl SettingArgs {
    /// The settings the flags set.
    pub fn flags(&self) -> CliResult<Layer> {
        let mut layer = Layer::empty();
        let named = [
            (Setting::RequiredSnrDb, &self.required_snr_db),
            (Setting::TargetOutage, &self.target_outage),
            (Setting::MinTxDbm, &self.min_tx_dbm),
            (Setting::MaxTxDbm, &self.max_tx_dbm),
            (Setting::EirpCapDbm, &self.eirp_cap_dbm),
            (Setting::AntennaGainDbi, &self.antenna_gain_dbi),
            (Setting::StartTxDbm, &self.start_tx_dbm),
            (Setting::Steps, &self.tx_step_db),
            (Setting::DutyLimit, &self.duty_limit),
            (Setting::LoggedRate, &self.logged_rate),
        ];
        for (s, text) in named {
            if let Some(t) = text {
                let v = parse_value(s, t).map_err(|e| CliError::arg(&flag_for(s), e))?;
                layer
                    .set(s, v)
                    .map_err(|e| CliError::arg(&flag_for(s), e))?;
            }
        }
        for item in &self.set {
            let (k, v) = item
                .split_once('=')
                .ok_or_else(|| CliError::arg("--set", format!("'{item}': expected KEY=VALUE")))?;
            let s = Setting::from_key(k.trim()).ok_or_else(|| {
                CliError::arg(
                    "--set",
                    format!(
                        "unknown setting '{}' (known: {})",
                        k.trim(),
                        Setting::ALL.map(Setting::key).join(", ")
                    ),
                )
            })?;
            if layer.is_set(s) {
                return Err(CliError::arg(
                    "--set",
                    format!("{} is set twice on the command line", s.key()),
                ));
            }
            let v = parse_value(s, v).map_err(|e| CliError::arg("--set", format!("{k}: {e}")))?;
            layer.set(s, v).map_err(|e| CliError::arg("--set", e))?;
        }
        Ok(layer)
    }
}

/// The settings of every log of a command: the flags and the settings file
/// once, each log's header per log.
#[derive(Clone, Debug)]
pub struct Resolver {
    flags: Layer,
    config: Layer,
    config_path: Option<PathBuf>,
    defaults: Layer,
    /// The rate table of the energy profile (`--energy`), above the log's
    /// header (empty: none).
    profile_rates: headroom::rate::RateTable,
}

/// One log's resolved settings and what the user should be told about them.
#[derive(Clone, Debug)]
pub struct LogSettings {
    /// The settings in force and their sources.
    pub resolved: Resolved,
    /// Warnings (without the log's name).
    pub warnings: Vec<String>,
}

impl Resolver {
    /// From the flags (and the settings file they name).
    pub fn new(args: &SettingArgs) -> CliResult<Self> {
        let config = match &args.config {
            Some(p) => load_config(p)?,
            None => Layer::empty(),
        };
        Ok(Resolver {
            flags: args.flags()?,
            config,
            config_path: args.config.clone(),
            defaults: Layer::defaults(),
            profile_rates: headroom::rate::RateTable::empty(),
        })
    }

    /// The rate table of an energy profile's `[[rate]]` entries: it beats
    /// the log header's (the source shown is `energy-profile`, see
    /// [`source_name`]). An empty table changes nothing.
    pub fn with_profile_rates(mut self, rates: headroom::rate::RateTable) -> Self {
        self.profile_rates = rates;
        self
    }

    /// The flags' layer.
    pub fn flags(&self) -> &Layer {
        &self.flags
    }

    /// The settings file's layer.
    pub fn config(&self) -> &Layer {
        &self.config
    }

    /// Resolve the settings of the log `log` with header `header` (`None`:
    /// the log has none), with `extra` set on top of the flags (a sweep).
    /// `header_damaged`: the log's header was lost or damaged.
    pub fn resolve(
        &self,
        log: &Path,
        header: Option<&LogHeader>,
        header_damaged: bool,
        extra: Option<&Layer>,
    ) -> CliResult<LogSettings> {
        let header_layer = header.map_or_else(Layer::empty, Layer::from_header);
        let mut flags = self.flags;
        if !self.profile_rates.is_empty() {
            flags
                .set(Setting::Rates, Value::Rates(self.profile_rates))
                .map_err(|e| CliError::arg("--energy", e))?;
        }
        if let Some(x) = extra {
            for s in Setting::ALL {
                if let Some(v) = x.get(s) {
                    flags.set(s, v).map_err(|e| CliError::arg("--sweep", e))?;
                }
            }
        }
        let mut warnings = Vec::new();
        if let Some(cfg_path) = &self.config_path {
            for s in header_layer.disagreements(&self.config) {
                let (h, c) = (header_layer.get(s), self.config.get(s));
                let over = if flags.is_set(s) {
                    " (both overridden by a flag)"
                } else {
                    ""
                };
                warnings.push(format!(
                    "the log header's {s} = {} overrides {}'s {}{over}",
                    h.map_or_else(String::new, |v| show(s, v)),
                    cfg_path.display(),
                    c.map_or_else(String::new, |v| show(s, v)),
                ));
            }
        }
        let resolved = settings::resolve(&flags, &header_layer, &self.config, &self.defaults)
            .map_err(|e| resolve_error(log, &e, header_damaged))?;
        if header_damaged {
            let fell_back: Vec<String> = HEADER_SETTINGS
                .iter()
                .filter(|s| !flags.is_set(**s))
                .map(|s| {
                    format!(
                        "{s} = {} ({})",
                        show(*s, resolved.value(*s)),
                        resolved.source(*s).as_str()
                    )
                })
                .collect();
            warnings.push(format!(
                "the log's header is damaged or lost: the settings a header carries fell back to {}",
                fell_back.join(", ")
            ));
        }
        Ok(LogSettings { resolved, warnings })
    }
}

/// The settings a log header can carry.
pub const HEADER_SETTINGS: [Setting; 6] = [
    Setting::RequiredSnrDb,
    Setting::MinTxDbm,
    Setting::MaxTxDbm,
    Setting::Steps,
    Setting::AntennaGainDbi,
    Setting::EirpCapDbm,
];

fn resolve_error(log: &Path, e: &ResolveError, header_damaged: bool) -> CliError {
    match e {
        ResolveError::Missing(Setting::RequiredSnrDb) => CliError::Input(format!(
            "{}: no required SNR{}: give --required-snr-db, a required_snr_db key in the \
             --config file, or a '# required_snr_db: X' line in the log's header block (the far \
             end's demodulation requirement at the rate used, e.g. -12.5dB)",
            log.display(),
            if header_damaged {
                " (the log's header is damaged or lost)"
            } else {
                ""
            }
        )),
        other => {
            let key = other.setting();
            let hint = Setting::from_key(key.split('.').next().unwrap_or(key))
                .map(|s| format!(" (flag {}, or TOML key {key})", flag_for(s)))
                .unwrap_or_default();
            CliError::Input(format!(
                "{}: controller settings: {other}{hint}",
                log.display()
            ))
        }
    }
}

/// Where a setting in force came from, as tables and JSON name it. The rate
/// table has no flag: set above the log's header, it came from the energy
/// profile (`--energy`), or from a candidate of a `tune` sweep.
pub fn source_name(r: &Resolved, s: Setting) -> &'static str {
    match (s, r.source(s)) {
        (Setting::Rates, headroom::control::settings::Source::Flag) => "energy-profile",
        (_, src) => src.as_str(),
    }
}

/// A value as a person reads it, with its unit.
pub fn show(s: Setting, v: Value) -> String {
    let unit = match s.kind() {
        Kind::Db | Kind::Steps => " dB",
        Kind::Dbm | Kind::Cap => " dBm",
        Kind::Dbi => " dBi",
        Kind::Milliseconds => " ms",
        Kind::Probability | Kind::Count | Kind::Fraction | Kind::Duty => "",
        Kind::RateName | Kind::Rates => "",
    };
    match v {
        Value::Number(x) if s.kind() == Kind::Probability => format!("{x} ({}%)", x * 100.0),
        Value::Number(x) => format!("{x}{unit}"),
        Value::Whole(n) => format!("{n}{unit}"),
        Value::Steps(PowerSteps::Uniform(d)) => format!("uniform {}{unit}", d.0),
        Value::Steps(PowerSteps::Table(t)) => format!(
            "table [{}] dBm",
            t.levels()
                .iter()
                .map(|l| l.0.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
        Value::Cap(EirpCap::AtMost(l)) => format!("{}{unit}", l.0),
        Value::Cap(EirpCap::NoCap) => "none (no cap configured)".into(),
        Value::Duty(DutyLimit::AtMost(f)) => format!("{f} ({}% of any hour)", f * 100.0),
        Value::Duty(DutyLimit::NoLimit) => "none (no limit given)".into(),
        Value::Rate(Some(n)) => n.as_str().to_string(),
        Value::Rate(None) => "none".into(),
        Value::Rates(t) if t.is_empty() => "none (power only)".into(),
        Value::Rates(t) => t
            .as_slice()
            .iter()
            .map(|r| r.name.as_str())
            .collect::<Vec<_>>()
            .join(", "),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn config_values_take_units_and_bare_numbers() {
        let l = parse_config(
            "max_tx_dbm = \"20dBm\"\nmin_tx_dbm = -9\ntarget_outage = \"2%\"\n\
             eirp_cap_dbm = \"none\"\nsteps = { uniform = 2.0 }\nmin_readings = 4",
        )
        .expect("parses");
        assert_eq!(l.get(Setting::MaxTxDbm), Some(Value::Number(20.0)));
        assert_eq!(l.get(Setting::MinTxDbm), Some(Value::Number(-9.0)));
        assert_eq!(l.get(Setting::TargetOutage), Some(Value::Number(0.02)));
        assert_eq!(l.get(Setting::EirpCapDbm), Some(Value::Cap(EirpCap::NoCap)));
        assert_eq!(
            l.get(Setting::Steps),
            Some(Value::Steps(PowerSteps::Uniform(Db(2.0))))
        );
        assert_eq!(l.get(Setting::MinReadings), Some(Value::Whole(4)));
        assert!(parse_config("target_outag = 0.1")
            .unwrap_err()
            .contains("unknown key 'target_outag'"));
        assert!(parse_config("min_readings = 2.5").is_err());
        assert!(parse_config("steps = { table = [3, 1] }").is_err());
    }

    #[test]
    fn probabilities_parse_as_fraction_or_percent() {
        assert_eq!(probability("0.05"), Ok(0.05));
        assert_eq!(probability("5%"), Ok(0.05));
        assert!(probability("x").is_err());
    }
}
