//! Where each controller setting comes from: the one resolution of a
//! replay's settings, used by the host's `replay` and `tune`, the firmware's
//! replay on target and the tests alike.
//!
//! A setting is named by its [`Setting`] (the key of the controller TOML and
//! of the JSON `settings` object). Each source of settings is a [`Layer`]:
//! the flags of a command, the log's header, a settings file, the built-in
//! defaults. [`resolve`] takes, for every setting, the value of the layer of
//! highest precedence that sets it, and says which one ([`Source`]):
//!
//! `flag` > `log-header` > `config` > `default`.
//!
//! The header beats a settings file because it holds the device's own facts
//! (its radio's limits, the far end's required SNR, the EIRP cap it was
//! installed under), while a settings file is a template. Two settings have
//! no built-in default, because a wrong guess decides the answer:
//! `required_snr_db` (a replay without one is refused with
//! [`ResolveError::Missing`]) and `eirp_cap_dbm` (without one no cap is
//! applied: [`EirpCap::NoCap`], reported as such). When no layer sets
//! `start_tx_dbm`, the controller starts at the highest power it is allowed
//! ([`ControllerConfig::tx_ceiling`]).
//!
//! ```
//! use headroom::control::settings::{resolve, Layer, Setting, Source, Value};
//! use headroom::record::LogHeader;
//! use headroom::units::{Db, Dbm};
//!
//! let header = LogHeader {
//!     max_tx: Some(Dbm(14.0)),
//!     required_snr: Some(Db(-12.5)),
//!     ..LogHeader::default()
//! };
//! let mut flags = Layer::empty();
//! flags.set(Setting::TargetOutage, Value::Number(0.02))?;
//! let r = resolve(&flags, &Layer::from_header(&header), &Layer::empty(), &Layer::defaults())?;
//! assert_eq!(r.source(Setting::RequiredSnrDb), Source::LogHeader);
//! assert_eq!(r.source(Setting::TargetOutage), Source::Flag);
//! assert_eq!(r.source(Setting::EirpCapDbm), Source::Default); // no cap
//! assert_eq!(r.config.start_tx_dbm, Dbm(14.0)); // the ceiling
//! # Ok::<(), headroom::control::settings::ResolveError>(())
//! ```

use core::fmt;

use super::config::{ConfigError, ControllerConfig, DutyLimit, EirpCap, PowerSteps};
use crate::rate::{RateName, RateTable};
use crate::record::LogHeader;
use crate::units::{Db, Dbi, Dbm};

/// Where a setting's value came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Source {
    /// A command-line flag (or the caller's explicit choice on a device).
    Flag,
    /// The header of the log being replayed.
    LogHeader,
    /// A settings file.
    Config,
    /// The built-in default.
    Default,
}

impl Source {
    /// Stable name for tables and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            Source::Flag => "flag",
            Source::LogHeader => "log-header",
            Source::Config => "config",
            Source::Default => "default",
        }
    }
}

/// What a setting is about: tune may vary only [`Role::Tuning`] settings
/// and still compare candidates fairly.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Role {
    /// The rule a replay judges packets by (required SNR, target outage).
    JudgingRule,
    /// A fact of the radio or of its installation (power limits, steps,
    /// antenna gains, EIRP cap).
    RadioFact,
    /// How the controller moves the power.
    Tuning,
    /// Which readings are believable.
    Plausibility,
}

/// The type of a setting's value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Kind {
    /// A ratio, dB.
    Db,
    /// A power level, dBm.
    Dbm,
    /// An antenna gain, dBi.
    Dbi,
    /// A probability strictly between 0 and 1.
    Probability,
    /// A whole number of readings or packets.
    Count,
    /// A duration in whole milliseconds.
    Milliseconds,
    /// The radio's power steps ([`PowerSteps`]).
    Steps,
    /// The EIRP cap ([`EirpCap`]).
    Cap,
    /// A fraction in [0, 1).
    Fraction,
    /// A duty-cycle limit ([`DutyLimit`]).
    Duty,
    /// The name of a rate of the rate table.
    RateName,
    /// A rate table ([`RateTable`]).
    Rates,
}

macro_rules! settings_table {
    ($( $(#[$doc:meta])* $variant:ident => $key:literal, $kind:ident, $role:ident; )*) => {
        /// A controller setting: one entry of the table of names shared by
        /// the controller TOML, the command-line flags (`--` + key with `-`
        /// for `_`), the JSON `settings` object and the error messages.
        #[derive(Debug, Clone, Copy, PartialEq, Eq)]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[repr(u8)]
        pub enum Setting {
            $( $(#[$doc])* $variant, )*
        }

        impl Setting {
            /// Every setting, in the order of [`ControllerConfig`]'s fields.
            pub const ALL: [Setting; Setting::COUNT] = [$(Setting::$variant),*];

            /// The setting's key.
            pub const fn key(self) -> &'static str {
                match self { $(Setting::$variant => $key,)* }
            }

            /// The type of its value.
            pub const fn kind(self) -> Kind {
                match self { $(Setting::$variant => Kind::$kind,)* }
            }

            /// What it is about.
            pub const fn role(self) -> Role {
                match self { $(Setting::$variant => Role::$role,)* }
            }
        }
    };
}

settings_table! {
    /// `required_snr_db`.
    RequiredSnrDb => "required_snr_db", Db, JudgingRule;
    /// `target_outage`.
    TargetOutage => "target_outage", Probability, JudgingRule;
    /// `min_tx_dbm`.
    MinTxDbm => "min_tx_dbm", Dbm, RadioFact;
    /// `max_tx_dbm`.
    MaxTxDbm => "max_tx_dbm", Dbm, RadioFact;
    /// `eirp_cap_dbm`.
    EirpCapDbm => "eirp_cap_dbm", Cap, RadioFact;
    /// `antenna_gain_dbi`.
    AntennaGainDbi => "antenna_gain_dbi", Dbi, RadioFact;
    /// `far_antenna_gain_dbi`.
    FarAntennaGainDbi => "far_antenna_gain_dbi", Dbi, RadioFact;
    /// `start_tx_dbm`.
    StartTxDbm => "start_tx_dbm", Dbm, Tuning;
    /// `steps`.
    Steps => "steps", Steps, RadioFact;
    /// `max_step_up_db`.
    MaxStepUpDb => "max_step_up_db", Db, Tuning;
    /// `max_step_down_db`.
    MaxStepDownDb => "max_step_down_db", Db, Tuning;
    /// `deadband_db`.
    DeadbandDb => "deadband_db", Db, Tuning;
    /// `margin_step_db`.
    MarginStepDb => "margin_step_db", Db, Tuning;
    /// `margin_min_db`.
    MarginMinDb => "margin_min_db", Db, Tuning;
    /// `margin_max_db`.
    MarginMaxDb => "margin_max_db", Db, Tuning;
    /// `min_readings`.
    MinReadings => "min_readings", Count, Tuning;
    /// `spread_memory`.
    SpreadMemory => "spread_memory", Count, Tuning;
    /// `climb_after_losses`.
    ClimbAfterLosses => "climb_after_losses", Count, Tuning;
    /// `stale_after_ms`.
    StaleAfterMs => "stale_after_ms", Milliseconds, Tuning;
    /// `rssi_min_dbm`.
    RssiMinDbm => "rssi_min_dbm", Dbm, Plausibility;
    /// `rssi_max_dbm`.
    RssiMaxDbm => "rssi_max_dbm", Dbm, Plausibility;
    /// `rssi_saturation_dbm`.
    RssiSaturationDbm => "rssi_saturation_dbm", Dbm, Plausibility;
    /// `noise_min_dbm`.
    NoiseMinDbm => "noise_min_dbm", Dbm, Plausibility;
    /// `noise_max_dbm`.
    NoiseMaxDbm => "noise_max_dbm", Dbm, Plausibility;
    /// `default_noise_dbm`.
    DefaultNoiseDbm => "default_noise_dbm", Dbm, Plausibility;
    /// `rates`: the radio's rate table (from a radio profile or the log
    /// header); default: none (power only).
    Rates => "rates", Rates, RadioFact;
    /// `logged_rate`: the rate a log's records were sent at when they do
    /// not say; no default.
    LoggedRate => "logged_rate", RateName, RadioFact;
    /// `duty_limit`: fraction of any hour on air; no default (none).
    DutyLimit => "duty_limit", Duty, RadioFact;
    /// `rate_hysteresis`: fraction of charge a rate must save to replace
    /// the one in use.
    RateHysteresis => "rate_hysteresis", Fraction, Tuning;
    /// `rate_dwell`: packets between two rate changes made for cost.
    RateDwell => "rate_dwell", Count, Tuning;
    /// `outage_ceiling`: with several rates, the highest chance of loss the
    /// controller may plan for one packet (1: none).
    OutageCeiling => "outage_ceiling", Fraction, Tuning;
}

impl Setting {
    /// Number of settings.
    pub const COUNT: usize = 31;

    /// The setting named `key`, if any.
    pub fn from_key(key: &str) -> Option<Setting> {
        Setting::ALL.iter().copied().find(|s| s.key() == key)
    }

    /// Position in [`Setting::ALL`].
    pub const fn index(self) -> usize {
        self as usize
    }
}

impl fmt::Display for Setting {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.key())
    }
}

/// A setting's value.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Value {
    /// dB, dBm, dBi or a probability, as the setting's [`Kind`] says.
    Number(f32),
    /// A count or a number of milliseconds.
    Whole(u32),
    /// Power steps.
    Steps(PowerSteps),
    /// An EIRP cap.
    Cap(EirpCap),
    /// A duty-cycle limit.
    Duty(DutyLimit),
    /// A rate's name (`None`: not given).
    Rate(Option<RateName>),
    /// A rate table.
    Rates(RateTable),
}

/// Why settings could not be resolved.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ResolveError {
    /// No layer sets a setting that has no default.
    Missing(Setting),
    /// A value of the wrong type for the setting.
    WrongKind(Setting),
    /// A whole number too large for the setting.
    TooLarge {
        /// The setting.
        setting: Setting,
        /// Its largest value.
        max: u32,
    },
    /// The resolved settings are refused by the controller.
    Invalid(ConfigError),
}

impl ResolveError {
    /// The key of the setting at fault.
    pub fn setting(&self) -> &'static str {
        match self {
            ResolveError::Missing(s)
            | ResolveError::WrongKind(s)
            | ResolveError::TooLarge { setting: s, .. } => s.key(),
            ResolveError::Invalid(e) => e.setting(),
        }
    }
}

impl fmt::Display for ResolveError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ResolveError::Missing(s) => write!(f, "{s}: not set, and it has no default"),
            ResolveError::WrongKind(s) => write!(f, "{s}: a value of the wrong type"),
            ResolveError::TooLarge { setting, max } => {
                write!(f, "{setting}: must be at most {max}")
            }
            ResolveError::Invalid(e) => write!(f, "{e}"),
        }
    }
}

impl core::error::Error for ResolveError {}

impl From<ConfigError> for ResolveError {
    fn from(e: ConfigError) -> Self {
        ResolveError::Invalid(e)
    }
}

/// The settings one source gives: a value for some settings, nothing for
/// the others.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Layer {
    values: ControllerConfig,
    /// Bit `Setting::index()` set: the setting has a value here.
    set: u32,
}

impl Layer {
    /// A layer that sets nothing.
    pub const fn empty() -> Self {
        Layer {
            values: ControllerConfig::sub_ghz_node(),
            set: 0,
        }
    }

    /// The built-in defaults: how the controller moves the power and which
    /// readings are believable (the values of
    /// [`ControllerConfig::sub_ghz_node`]), a radio settable from −9 to
    /// +22 dBm in 1 dB steps, antennas of 0 dBi (unknown: isotropic), no
    /// rate table (the power only), a rate hysteresis of 0.05, a dwell of 2
    /// packets and no outage ceiling (1). No required SNR, no EIRP cap, no start power, no duty
    /// limit, no logged rate (see the module's doc).
    pub const fn defaults() -> Self {
        let mut values = ControllerConfig::sub_ghz_node();
        values.antenna_gain_dbi = Dbi(0.0);
        values.far_antenna_gain_dbi = Dbi(0.0);
        values.eirp_cap_dbm = EirpCap::NoCap;
        let unset = (1 << Setting::RequiredSnrDb.index())
            | (1 << Setting::StartTxDbm.index())
            | (1 << Setting::LoggedRate.index())
            | (1 << Setting::DutyLimit.index());
        Layer {
            values,
            set: ((1u32 << Setting::COUNT) - 1) & !unset,
        }
    }

    /// Every setting of a complete configuration (a device's own settings).
    pub const fn from_config(cfg: ControllerConfig) -> Self {
        Layer {
            values: cfg,
            set: (1u32 << Setting::COUNT) - 1,
        }
    }

    /// The settings a log header carries: `min_tx_dbm`, `max_tx_dbm`,
    /// `steps` (a uniform step of `tx_step_db`), `antenna_gain_dbi`,
    /// `required_snr_db`, `eirp_cap_dbm` and `rates`, each when the header
    /// has it (a header with an empty rate table sets no `rates`).
    pub fn from_header(h: &LogHeader) -> Self {
        let mut l = Layer::empty();
        // Each value has its setting's kind: no error is possible.
        let mut put = |s: Setting, v: Option<Value>| {
            if let Some(v) = v {
                let _ = l.set(s, v);
            }
        };
        put(Setting::MinTxDbm, h.min_tx.map(|v| Value::Number(v.0)));
        put(Setting::MaxTxDbm, h.max_tx.map(|v| Value::Number(v.0)));
        put(
            Setting::Steps,
            h.tx_step.map(|v| Value::Steps(PowerSteps::Uniform(v))),
        );
        put(
            Setting::AntennaGainDbi,
            h.antenna_gain.map(|v| Value::Number(v.0)),
        );
        put(
            Setting::RequiredSnrDb,
            h.required_snr.map(|v| Value::Number(v.0)),
        );
        put(
            Setting::EirpCapDbm,
            h.eirp_cap.map(|v| Value::Cap(EirpCap::AtMost(v))),
        );
        put(
            Setting::Rates,
            (!h.rates.is_empty()).then_some(Value::Rates(h.rates)),
        );
        l
    }

    /// Whether this layer sets `s`.
    pub const fn is_set(&self, s: Setting) -> bool {
        self.set & (1 << s.index()) != 0
    }

    /// This layer's value of `s`, if it sets it.
    pub fn get(&self, s: Setting) -> Option<Value> {
        if self.is_set(s) {
            Some(read(&self.values, s))
        } else {
            None
        }
    }

    /// Set `s` to `v` (checked against the setting's kind; the value itself
    /// is judged when the settings are resolved).
    pub fn set(&mut self, s: Setting, v: Value) -> Result<(), ResolveError> {
        write(&mut self.values, s, v)?;
        self.set |= 1 << s.index();
        Ok(())
    }

    /// Remove `s` from this layer.
    pub fn unset(&mut self, s: Setting) {
        self.set &= !(1 << s.index());
    }

    /// The settings this layer and `other` both set, to different values.
    pub fn disagreements<'a>(&'a self, other: &'a Layer) -> impl Iterator<Item = Setting> + 'a {
        Setting::ALL
            .iter()
            .copied()
            .filter(move |s| match (self.get(*s), other.get(*s)) {
                (Some(a), Some(b)) => a != b,
                _ => false,
            })
    }
}

fn read(c: &ControllerConfig, s: Setting) -> Value {
    use Setting as S;
    let n = Value::Number;
    match s {
        S::RequiredSnrDb => n(c.required_snr_db.0),
        S::TargetOutage => n(c.target_outage),
        S::MinTxDbm => n(c.min_tx_dbm.0),
        S::MaxTxDbm => n(c.max_tx_dbm.0),
        S::EirpCapDbm => Value::Cap(c.eirp_cap_dbm),
        S::AntennaGainDbi => n(c.antenna_gain_dbi.0),
        S::FarAntennaGainDbi => n(c.far_antenna_gain_dbi.0),
        S::StartTxDbm => n(c.start_tx_dbm.0),
        S::Steps => Value::Steps(c.steps),
        S::MaxStepUpDb => n(c.max_step_up_db.0),
        S::MaxStepDownDb => n(c.max_step_down_db.0),
        S::DeadbandDb => n(c.deadband_db.0),
        S::MarginStepDb => n(c.margin_step_db.0),
        S::MarginMinDb => n(c.margin_min_db.0),
        S::MarginMaxDb => n(c.margin_max_db.0),
        S::MinReadings => Value::Whole(u32::from(c.min_readings)),
        S::SpreadMemory => Value::Whole(u32::from(c.spread_memory)),
        S::ClimbAfterLosses => Value::Whole(u32::from(c.climb_after_losses)),
        S::StaleAfterMs => Value::Whole(c.stale_after_ms),
        S::RssiMinDbm => n(c.rssi_min_dbm.0),
        S::RssiMaxDbm => n(c.rssi_max_dbm.0),
        S::RssiSaturationDbm => n(c.rssi_saturation_dbm.0),
        S::NoiseMinDbm => n(c.noise_min_dbm.0),
        S::NoiseMaxDbm => n(c.noise_max_dbm.0),
        S::DefaultNoiseDbm => n(c.default_noise_dbm.0),
        S::Rates => Value::Rates(c.rates),
        S::LoggedRate => Value::Rate(c.logged_rate),
        S::DutyLimit => Value::Duty(c.duty_limit),
        S::RateHysteresis => n(c.rate_hysteresis),
        S::RateDwell => Value::Whole(u32::from(c.rate_dwell)),
        S::OutageCeiling => n(c.outage_ceiling),
    }
}

fn write(c: &mut ControllerConfig, s: Setting, v: Value) -> Result<(), ResolveError> {
    use Setting as S;
    let wrong = ResolveError::WrongKind(s);
    let count = |x: u32| {
        u16::try_from(x).map_err(|_| ResolveError::TooLarge {
            setting: s,
            max: u32::from(u16::MAX),
        })
    };
    match (s.kind(), v) {
        (
            Kind::Db | Kind::Dbm | Kind::Dbi | Kind::Probability | Kind::Fraction,
            Value::Number(x),
        ) => match s {
            S::RequiredSnrDb => c.required_snr_db = Db(x),
            S::TargetOutage => c.target_outage = x,
            S::MinTxDbm => c.min_tx_dbm = Dbm(x),
            S::MaxTxDbm => c.max_tx_dbm = Dbm(x),
            S::AntennaGainDbi => c.antenna_gain_dbi = Dbi(x),
            S::FarAntennaGainDbi => c.far_antenna_gain_dbi = Dbi(x),
            S::StartTxDbm => c.start_tx_dbm = Dbm(x),
            S::MaxStepUpDb => c.max_step_up_db = Db(x),
            S::MaxStepDownDb => c.max_step_down_db = Db(x),
            S::DeadbandDb => c.deadband_db = Db(x),
            S::MarginStepDb => c.margin_step_db = Db(x),
            S::MarginMinDb => c.margin_min_db = Db(x),
            S::MarginMaxDb => c.margin_max_db = Db(x),
            S::RssiMinDbm => c.rssi_min_dbm = Dbm(x),
            S::RssiMaxDbm => c.rssi_max_dbm = Dbm(x),
            S::RssiSaturationDbm => c.rssi_saturation_dbm = Dbm(x),
            S::NoiseMinDbm => c.noise_min_dbm = Dbm(x),
            S::NoiseMaxDbm => c.noise_max_dbm = Dbm(x),
            S::DefaultNoiseDbm => c.default_noise_dbm = Dbm(x),
            S::RateHysteresis => c.rate_hysteresis = x,
            S::OutageCeiling => c.outage_ceiling = x,
            _ => return Err(wrong),
        },
        (Kind::Count, Value::Whole(x)) => match s {
            S::MinReadings => c.min_readings = count(x)?,
            S::SpreadMemory => c.spread_memory = count(x)?,
            S::ClimbAfterLosses => c.climb_after_losses = count(x)?,
            S::RateDwell => c.rate_dwell = count(x)?,
            _ => return Err(wrong),
        },
        (Kind::Milliseconds, Value::Whole(x)) => c.stale_after_ms = x,
        (Kind::Steps, Value::Steps(x)) => c.steps = x,
        (Kind::Cap, Value::Cap(x)) => c.eirp_cap_dbm = x,
        (Kind::Duty, Value::Duty(x)) => c.duty_limit = x,
        (Kind::RateName, Value::Rate(x)) => c.logged_rate = x,
        (Kind::Rates, Value::Rates(x)) => c.rates = x,
        _ => return Err(wrong),
    }
    Ok(())
}

/// Resolved settings: a validated configuration and the source of each
/// setting.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Resolved {
    /// The configuration, validated.
    pub config: ControllerConfig,
    sources: [Source; Setting::COUNT],
}

impl Resolved {
    /// Where `s` came from.
    pub fn source(&self, s: Setting) -> Source {
        self.sources
            .get(s.index())
            .copied()
            .unwrap_or(Source::Default)
    }

    /// The value of `s` in force.
    pub fn value(&self, s: Setting) -> Value {
        read(&self.config, s)
    }
}

/// Resolve the settings of one replay: for each setting the value of the
/// first of `flags`, `header`, `config`, `defaults` that sets it (see the
/// module's doc for the two settings without a default and for the start
/// power), then validate.
pub fn resolve(
    flags: &Layer,
    header: &Layer,
    config: &Layer,
    defaults: &Layer,
) -> Result<Resolved, ResolveError> {
    let mut cfg = ControllerConfig::sub_ghz_node();
    let mut sources = [Source::Default; Setting::COUNT];
    let layers = [
        (Source::Flag, flags),
        (Source::LogHeader, header),
        (Source::Config, config),
        (Source::Default, defaults),
    ];
    let rates_given = layers
        .iter()
        .find_map(|(src, l)| match l.get(Setting::Rates) {
            Some(Value::Rates(t)) => Some((*src, t)),
            _ => None,
        })
        .filter(|(_, t)| !t.is_empty());
    for s in Setting::ALL {
        let found = layers
            .iter()
            .find_map(|(src, l)| l.get(s).map(|v| (*src, v)));
        match found {
            Some((src, v)) => {
                write(&mut cfg, s, v)?;
                if let Some(slot) = sources.get_mut(s.index()) {
                    *slot = src;
                }
            }
            None => match s {
                // Nothing caps the EIRP unless someone says so.
                Setting::EirpCapDbm => cfg.eirp_cap_dbm = EirpCap::NoCap,
                // No duty budget unless someone states the regional limit.
                Setting::DutyLimit => cfg.duty_limit = DutyLimit::NoLimit,
                // The records say, or the replay refuses where it matters.
                Setting::LoggedRate => cfg.logged_rate = None,
                Setting::Rates => cfg.rates = RateTable::empty(),
                // With a rate table each rate has its own: checked below.
                Setting::RequiredSnrDb if rates_given.is_some() => {}
                // Filled in below, from the limits in force.
                Setting::StartTxDbm => {}
                _ => return Err(ResolveError::Missing(s)),
            },
        }
    }
    // With a rate table and no required SNR anywhere, `required_snr_db` is
    // the first rate's (the one the controller starts at), from the table's
    // source: each rate's own required SNR decides its packets.
    if let Some((src, t)) = rates_given {
        let unset = !layers.iter().any(|(_, l)| l.is_set(Setting::RequiredSnrDb));
        if unset {
            if let Some(first) = t.get(0) {
                cfg.required_snr_db = first.required_snr;
            }
            if let Some(slot) = sources.get_mut(Setting::RequiredSnrDb.index()) {
                *slot = src;
            }
        }
    }
    let start_set = layers.iter().any(|(_, l)| l.is_set(Setting::StartTxDbm));
    if !start_set {
        cfg.start_tx_dbm = cfg.tx_ceiling();
    }
    cfg.validate()?;
    Ok(Resolved {
        config: cfg,
        sources,
    })
}

/// The settings of a log replayed as it is, with nothing but its header
/// and the built-in defaults: what the firmware's replay on target uses,
/// and the host's `headroom replay LOG` without flags or settings file.
pub fn for_log(header: Option<&LogHeader>) -> Result<Resolved, ResolveError> {
    // The constant layers live in flash, not on a small device's stack.
    static EMPTY: Layer = Layer::empty();
    static DEFAULTS: Layer = Layer::defaults();
    let h = header.map_or_else(Layer::empty, Layer::from_header);
    resolve(&EMPTY, &h, &EMPTY, &DEFAULTS)
}

#[cfg(test)]
#[allow(clippy::panic)]
mod tests {
    use super::*;

    fn header() -> LogHeader {
        LogHeader {
            min_tx: Some(Dbm(2.0)),
            max_tx: Some(Dbm(20.0)),
            tx_step: Some(Db(1.0)),
            antenna_gain: Some(Dbi(0.0)),
            required_snr: Some(Db(-15.0)),
            ..LogHeader::default()
        }
    }

    #[test]
    fn keys_are_unique_and_round_trip() {
        for (i, s) in Setting::ALL.iter().enumerate() {
            assert_eq!(s.index(), i);
            assert_eq!(Setting::from_key(s.key()), Some(*s));
        }
        assert_eq!(Setting::from_key("nope"), None);
    }

    #[test]
    fn precedence_is_flag_header_config_default() {
        let mut config = Layer::empty();
        config
            .set(Setting::MaxTxDbm, Value::Number(14.0))
            .unwrap_or(());
        config
            .set(Setting::MarginStepDb, Value::Number(1.0))
            .unwrap_or(());
        let mut flags = Layer::empty();
        flags
            .set(Setting::MinTxDbm, Value::Number(5.0))
            .unwrap_or(());
        let h = Layer::from_header(&header());
        let r = match resolve(&flags, &h, &config, &Layer::defaults()) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert_eq!(r.config.min_tx_dbm, Dbm(5.0));
        assert_eq!(r.source(Setting::MinTxDbm), Source::Flag);
        // The header's 20 dBm beats the file's 14.
        assert_eq!(r.config.max_tx_dbm, Dbm(20.0));
        assert_eq!(r.source(Setting::MaxTxDbm), Source::LogHeader);
        assert_eq!(r.config.margin_step_db, Db(1.0));
        assert_eq!(r.source(Setting::MarginStepDb), Source::Config);
        assert_eq!(r.source(Setting::DeadbandDb), Source::Default);
        assert_eq!(r.config.eirp_cap_dbm, EirpCap::NoCap);
        // No start power anywhere: the ceiling.
        assert_eq!(r.config.start_tx_dbm, Dbm(20.0));
        assert_eq!(
            h.disagreements(&config).collect::<heapless::Vec<_, 4>>(),
            [Setting::MaxTxDbm]
        );
    }

    #[test]
    fn required_snr_has_no_default() {
        let r = resolve(
            &Layer::empty(),
            &Layer::empty(),
            &Layer::empty(),
            &Layer::defaults(),
        );
        assert_eq!(r, Err(ResolveError::Missing(Setting::RequiredSnrDb)));
    }

    #[test]
    fn a_cap_below_the_radio_maximum_sets_the_ceiling() {
        let mut h = header();
        h.eirp_cap = Some(Dbm(16.15));
        let r = match resolve(
            &Layer::empty(),
            &Layer::from_header(&h),
            &Layer::empty(),
            &Layer::defaults(),
        ) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert_eq!(r.config.start_tx_dbm, Dbm(16.15));
        assert_eq!(r.source(Setting::EirpCapDbm), Source::LogHeader);
    }

    #[test]
    fn wrong_kinds_are_refused() {
        let mut l = Layer::empty();
        assert_eq!(
            l.set(Setting::Steps, Value::Number(1.0)),
            Err(ResolveError::WrongKind(Setting::Steps))
        );
        assert_eq!(
            l.set(Setting::MinReadings, Value::Whole(70_000)),
            Err(ResolveError::TooLarge {
                setting: Setting::MinReadings,
                max: 65_535
            })
        );
        assert!(!l.is_set(Setting::Steps));
    }
}
