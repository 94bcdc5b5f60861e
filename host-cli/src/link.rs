//! The link file: a TOML description of one radio link, read by
//! `headroom budget` and `headroom solve`.
//!
//! Quantities are strings with units (`"868MHz"`, `"1.2km"`, `"14dBm"`,
//! `"2.15dBi"`, `"6dB"`, `"99%"`), parsed by [`crate::quantity`]; a
//! frequency, bandwidth, distance, height or power must carry its unit.
//! Names (models, environments, modulations, fading models) come from
//! [`crate::names`]. Unknown keys are refused, so that a misspelt setting is
//! not silently ignored. The format is documented with an example in the
//! README and in `examples/links/`.

use std::path::Path;

use headroom::budget::{FadeAllowance, ItemNoise, Link, NoiseSpec, Requirement, Side};
use headroom::propagation::PathLossModel;
use headroom::units::{Db, Dbm, Hertz, Kelvin, Metres};
use serde::Deserialize;

use crate::error::{CliError, CliResult};
use crate::names::{self, Environment, Extrapolate, Fading, Form, Keys, Model, PathParams, Scheme};
use crate::quantity::{self, show, Q};

/// Most line items a link file may list.
pub const MAX_ITEMS: usize = 32;

/// Read `q` under `key` with accessor `f`.
pub fn read<T>(key: &str, q: &Q, f: fn(&Q) -> Result<T, String>) -> CliResult<T> {
    f(q).map_err(|e| CliError::arg(key, e))
}

fn read_opt<T>(key: &str, q: &Option<Q>, f: fn(&Q) -> Result<T, String>) -> CliResult<Option<T>> {
    q.as_ref().map(|q| read(key, q, f)).transpose()
}

/// Plausible ranges of the link file's settings, checked when read. They
/// catch a unit slip (a frequency in Hz read as MHz, a distance in km read
/// as m), not physics: the engine refuses what its formulas cannot take.
pub mod range {
    /// Carrier frequency: 100 kHz .. 300 GHz (common practice: the span of
    /// the radio bands this tool's models cover).
    pub const FREQUENCY_HZ: (f32, f32) = (100e3, 300e9);
    /// Noise bandwidth: 1 Hz .. 10 GHz.
    pub const BANDWIDTH_HZ: (f32, f32) = (1.0, 10e9);
    /// Distance: 1 mm .. 400 000 km (about the Moon).
    pub const DISTANCE_M: (f32, f32) = (1e-3, 4e8);
    /// Antenna heights: 1 cm .. 10 km.
    pub const HEIGHT_M: (f32, f32) = (0.01, 10e3);
    /// Transmit power and power limits: −60 dBm .. +90 dBm (1 MW).
    pub const POWER_DBM: (f32, f32) = (-60.0, 90.0);
    /// A line item's gain or loss: up to 100 dB (the largest dishes give
    /// about 70 dBi; common practice).
    pub const ITEM_DB: (f32, f32) = (-100.0, 100.0);
    /// Noise figure: 0 .. 30 dB.
    pub const NOISE_FIGURE_DB: (f32, f32) = (0.0, 30.0);
    /// Noise temperatures: 0 .. 10 000 K (common practice: a cold sky is a
    /// few K, the sun in the beam of a small dish a few thousand).
    pub const TEMPERATURE_K: (f32, f32) = (0.0, 10_000.0);
    /// Required SNR or Eb/N0: −40 .. +60 dB.
    pub const REQUIRED_DB: (f32, f32) = (-40.0, 60.0);
    /// Bit rate: 1 bit/s .. 100 Gbit/s.
    pub const BIT_RATE_BPS: (f32, f32) = (1.0, 100e9);
    /// Fixed fade margin and target margin: −50 .. +100 dB.
    pub const MARGIN_DB: (f32, f32) = (-50.0, 100.0);
    /// Reference loss of log-distance, floor losses: 0 .. 200 dB.
    pub const LOSS_DB: (f32, f32) = (0.0, 200.0);
}

fn within(key: &str, x: f32, (lo, hi): (f32, f32), shown: fn(f32) -> String) -> CliResult<f32> {
    quantity::check_range(x, lo, hi, &shown).map_err(|e| CliError::arg(key, e))
}

/// The whole file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LinkFile {
    /// Free text shown in reports.
    #[serde(default)]
    pub name: Option<String>,
    /// Carrier frequency.
    pub frequency: Q,
    /// The transmitter.
    pub transmitter: Transmitter,
    /// Named gains and losses, `[[item]]` tables.
    #[serde(default, rename = "item")]
    pub items: Vec<Item>,
    /// The path.
    pub path: PathSpec,
    /// The receiver.
    pub receiver: Receiver,
    /// What the receiver needs.
    pub requirement: RequirementSpec,
    /// Fade allowance; absent means none.
    #[serde(default)]
    pub fade: Option<FadeSpec>,
    /// Defaults for `headroom solve`.
    #[serde(default)]
    pub solve: Option<SolveSpec>,
    /// What a packet costs the battery: an energy profile and the packet
    /// interval.
    #[serde(default)]
    pub energy: Option<EnergySpec>,
}

/// `[energy]`: `profile = "PATH.toml"` (relative to the link file) and
/// `interval = "5min"`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnergySpec {
    /// The energy profile file.
    pub profile: String,
    /// Time between packets, with its unit.
    pub interval: String,
}

/// `[transmitter]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Transmitter {
    /// Power at the transmitter output.
    pub power: Q,
    /// Highest power the transmitter can give.
    #[serde(default)]
    pub max_power: Option<Q>,
    /// Regulatory EIRP cap.
    #[serde(default)]
    pub eirp_cap: Option<Q>,
    /// Regulatory ERP cap (EIRP cap − 2.15 dB); give this or `eirp_cap`.
    #[serde(default)]
    pub erp_cap: Option<Q>,
}

/// `[[item]]`: one gain or loss.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Item {
    /// Name in reports.
    pub name: String,
    /// `tx`, `path` or `rx`.
    pub side: String,
    /// A gain (`"2.15dBi"`, `"3dB"`); give this or `loss`.
    #[serde(default)]
    pub gain: Option<Q>,
    /// A loss as a positive number (`"0.8dB"`).
    #[serde(default)]
    pub loss: Option<Q>,
    /// An antenna's dish diameter: with `efficiency` (and no `gain`) it gives
    /// the gain η·(πD/λ)²; with a `gain`, the gain is checked against the
    /// most the aperture can give (η = 1), and the far field against 2D²/λ.
    #[serde(default)]
    pub dish_diameter: Option<Q>,
    /// Aperture efficiency of the dish, 0..1 (typically 0.5-0.7, common practice).
    #[serde(default)]
    pub efficiency: Option<Q>,
    /// Receive side, with `gain`: an amplifier of this noise figure.
    #[serde(default)]
    pub noise_figure: Option<Q>,
    /// Receive side, with `loss`: the item's physical temperature (290 K
    /// unless given); its loss adds noise at this temperature.
    #[serde(default)]
    pub temperature: Option<Q>,
}

/// `[path]`: the distance and the propagation model, with the parameters of
/// [`crate::names::PathParams`] under the same names.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PathSpec {
    /// A model of [`crate::names::Model`], or `fixed` (a given `loss`).
    pub model: String,
    /// Distance between the antennas (not needed by `fixed`).
    #[serde(default)]
    pub distance: Option<Q>,
    /// `fixed`: the path loss.
    #[serde(default)]
    pub loss: Option<Q>,
    /// `log-distance`: exponent n.
    #[serde(default)]
    pub exponent: Option<Q>,
    /// `log-distance`: reference distance d0 (default 1 m).
    #[serde(default)]
    pub reference_distance: Option<Q>,
    /// `log-distance`: loss at d0 (default: free space at d0).
    #[serde(default)]
    pub reference_loss: Option<Q>,
    /// `two-ray`, `hata`, `cost231`: transmitter (Hata: base) antenna height.
    #[serde(default)]
    pub tx_height: Option<Q>,
    /// `two-ray`, `hata`, `cost231`: receiver (Hata: mobile) antenna height.
    #[serde(default)]
    pub rx_height: Option<Q>,
    /// `two-ray`: `exact` (default) or `asymptotic`.
    #[serde(default)]
    pub form: Option<String>,
    /// `two-ray` exact: ground reflection coefficient (default −1).
    #[serde(default)]
    pub reflection: Option<Q>,
    /// `hata`, `cost231`, `indoor`: the environment.
    #[serde(default)]
    pub environment: Option<String>,
    /// Old spelling of `environment` for `indoor` (read with a warning).
    #[serde(default)]
    pub building: Option<String>,
    /// `hata`, `cost231`: `none` (default), `distance`, `frequency`, `distance-and-frequency`.
    #[serde(default)]
    pub extrapolate: Option<String>,
    /// `indoor`: floors between the terminals (default 0).
    #[serde(default)]
    pub floors: Option<u8>,
    /// `indoor`, own coefficients instead of the table: distance power loss coefficient N.
    #[serde(default)]
    pub coefficient_n: Option<Q>,
    /// `indoor`, own coefficients: loss through the first floor.
    #[serde(default)]
    pub floor_loss: Option<Q>,
    /// `indoor`, own coefficients: loss added by each further floor (default 0 dB).
    #[serde(default)]
    pub floor_loss_per_extra_floor: Option<Q>,
}

/// `[receiver]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Receiver {
    /// Noise bandwidth.
    pub bandwidth: Q,
    /// Noise figure.
    pub noise_figure: Q,
    /// Antenna noise temperature (default 290 K).
    #[serde(default)]
    pub antenna_temperature: Option<Q>,
}

/// `[requirement]`: one of `snr`, `ebn0` + `bit_rate`, or `modulation` + `ber` + `bit_rate`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RequirementSpec {
    /// Required C/N (a demodulator's data-sheet SNR).
    #[serde(default)]
    pub snr: Option<Q>,
    /// Required Eb/N0.
    #[serde(default)]
    pub ebn0: Option<Q>,
    /// Modulation name, as `headroom ber --modulation`.
    #[serde(default)]
    pub modulation: Option<String>,
    /// Order M for `psk` and `qam`.
    #[serde(default)]
    pub order: Option<u32>,
    /// Target bit error rate.
    #[serde(default)]
    pub ber: Option<Q>,
    /// Bit rate in bit/s.
    #[serde(default)]
    pub bit_rate: Option<Q>,
}

/// `[fade]`: `margin`, or `model` + `availability` (+ `k_factor` / `sigma`).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FadeSpec {
    /// A fixed margin.
    #[serde(default)]
    pub margin: Option<Q>,
    /// A model of [`crate::names::Fading`].
    #[serde(default)]
    pub model: Option<String>,
    /// Availability as a fraction (0.99) or a percentage (`"99%"`).
    #[serde(default)]
    pub availability: Option<Q>,
    /// Rician K factor.
    #[serde(default)]
    pub k_factor: Option<Q>,
    /// Log-normal standard deviation.
    #[serde(default)]
    pub sigma: Option<Q>,
}

/// `[solve]`: defaults for `headroom solve`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SolveSpec {
    /// Margin to leave (default 0 dB).
    #[serde(default)]
    pub target_margin: Option<Q>,
}

/// The transmitter's limits from the link file.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Limits {
    /// Highest power the transmitter gives.
    pub max_power: Option<Dbm>,
    /// Regulatory EIRP cap (an ERP cap is stored as its EIRP).
    pub eirp_cap: Option<Dbm>,
    /// Whether the cap was given as ERP.
    pub cap_given_as_erp: bool,
}

/// A link file turned into engine values.
pub struct LoadedLink {
    /// Name from the file, or the file name.
    pub name: String,
    /// Carrier frequency.
    pub frequency: Hertz,
    /// Distance, when the path has one.
    pub distance: Option<Metres>,
    /// The propagation model, unless the path loss is fixed.
    pub model: Option<PathLossModel>,
    /// The budget.
    pub link: Link<MAX_ITEMS>,
    /// The budget evaluated, once (re-evaluated only when `link` changes).
    pub evaluated: headroom::budget::BudgetResult,
    /// `[solve] target_margin`.
    pub target_margin: Db,
    /// `[energy]`: the profile file (resolved against the link file's
    /// folder) and the packet interval.
    pub energy: Option<(std::path::PathBuf, headroom::units::Seconds)>,
    /// The transmitter's limits.
    pub limits: Limits,
    /// Things that do not stop the calculation but weaken its answer (also
    /// printed on stderr as they are found).
    pub warnings: Vec<String>,
}

/// `r` with an input error pointing at the help of subcommand `cmd`, where
/// its units, ranges and names are listed.
pub fn pointing_at_help(cmd: &str, r: CliResult) -> CliResult {
    r.map_err(|e| match e {
        CliError::Input(m) => CliError::Input(format!("{m} (see 'headroom {cmd} --help')")),
        other => other,
    })
}

/// Print a warning on stderr and keep it for the JSON `warnings` list.
pub fn warn(warnings: &mut Vec<String>, msg: String) {
    crate::diag::warn(&msg);
    warnings.push(msg);
}

impl PathSpec {
    /// The engine model this spec names (`None` for `fixed`).
    pub fn model(
        &self,
        frequency: Hertz,
        warnings: &mut Vec<String>,
    ) -> CliResult<Option<PathLossModel>> {
        if self.model == "fixed" {
            for (key, given) in [
                ("path.distance", self.distance.is_some()),
                ("path.exponent", self.exponent.is_some()),
                ("path.tx_height", self.tx_height.is_some()),
                ("path.environment", self.environment.is_some()),
            ] {
                if given {
                    return Err(CliError::arg(key, "does not apply to model fixed"));
                }
            }
            return Ok(None);
        }
        let model: Model = names::parse("path.model", "model", &self.model).map_err(|_| {
            CliError::arg(
                "path.model",
                format!(
                    "unknown model '{}' ({}, fixed)",
                    self.model,
                    names::list::<Model>()
                ),
            )
        })?;
        let height = |key: &str, q: &Option<Q>| -> CliResult<Option<Metres>> {
            read_opt(key, q, Q::distance)?
                .map(|h| within(key, h.0, range::HEIGHT_M, show::distance).map(Metres))
                .transpose()
        };
        let loss = |key: &str, q: &Option<Q>| -> CliResult<Option<Db>> {
            read_opt(key, q, Q::db)?
                .map(|l| within(key, l.0, range::LOSS_DB, show::db).map(Db))
                .transpose()
        };
        let environment = match (&self.environment, &self.building) {
            (Some(_), Some(_)) => {
                return Err(CliError::arg(
                    "path.building",
                    "old spelling of path.environment: give one",
                ))
            }
            (Some(e), None) => Some(e),
            (None, Some(b)) => {
                warn(
                    warnings,
                    "path.building is the old spelling of path.environment; it will be refused in a later release".into(),
                );
                Some(b)
            }
            (None, None) => None,
        };
        let mut p = PathParams::new(model);
        p.exponent = read_opt("path.exponent", &self.exponent, Q::number)?;
        p.reference_distance = read_opt(
            "path.reference_distance",
            &self.reference_distance,
            Q::distance,
        )?;
        p.reference_loss = loss("path.reference_loss", &self.reference_loss)?;
        p.tx_height = height("path.tx_height", &self.tx_height)?;
        p.rx_height = height("path.rx_height", &self.rx_height)?;
        p.form = self
            .form
            .as_deref()
            .map(|f| names::parse::<Form>("path.form", "two-ray form", f))
            .transpose()?;
        p.reflection = read_opt("path.reflection", &self.reflection, Q::number)?;
        p.environment = environment
            .map(|e| names::parse::<Environment>("path.environment", "environment", e))
            .transpose()?;
        p.extrapolate = self
            .extrapolate
            .as_deref()
            .map(|e| names::parse::<Extrapolate>("path.extrapolate", "extrapolation", e))
            .transpose()?;
        p.floors = self.floors;
        p.coefficient_n = read_opt("path.coefficient_n", &self.coefficient_n, Q::number)?;
        p.floor_loss = loss("path.floor_loss", &self.floor_loss)?;
        p.floor_loss_per_extra_floor = loss(
            "path.floor_loss_per_extra_floor",
            &self.floor_loss_per_extra_floor,
        )?;
        p.build(frequency, Keys::File("path")).map(Some)
    }
}

/// The key of a link file that a setting of [`crate::names`] comes from.
pub fn key_of(setting: &str) -> String {
    match setting {
        "frequency" => "frequency".into(),
        "k_factor" | "sigma" | "availability" => format!("fade.{setting}"),
        other => format!("path.{other}"),
    }
}

fn engine_error(e: &headroom::Error) -> CliError {
    names::engine_error(e, &key_of)
}

/// Read and check a link file.
pub fn load(path: &Path, frequency: Option<Hertz>) -> CliResult<LoadedLink> {
    let text = crate::atomic::read_text(path)?;
    let file: LinkFile = toml::from_str(&text).map_err(|e| {
        CliError::Input(format!("{}: {}", path.display(), one_line(&e.to_string())))
    })?;
    let ctx = |e: CliError| match e {
        CliError::Input(m) => CliError::Input(format!("{}: {m}", path.display())),
        other => other,
    };
    build(file, path, frequency).map_err(ctx)
}

fn one_line(s: &str) -> String {
    s.lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join(" ")
}

fn build(file: LinkFile, path: &Path, frequency: Option<Hertz>) -> CliResult<LoadedLink> {
    let energy = match &file.energy {
        Some(e) => {
            let interval = crate::quantity::duration(&e.interval)
                .map_err(|why| CliError::arg("energy.interval", why))?;
            let dir = path.parent().unwrap_or_else(|| Path::new("."));
            Some((dir.join(&e.profile), interval))
        }
        None => None,
    };
    let mut warnings = Vec::new();
    let frequency = match frequency {
        Some(f) => f,
        None => read("frequency", &file.frequency, Q::frequency)?,
    };
    within(
        "frequency",
        frequency.0,
        range::FREQUENCY_HZ,
        show::frequency,
    )?;
    let power = |key: &str, q: &Q| -> CliResult<Dbm> {
        let p = read(key, q, Q::power)?;
        within(key, p.0, range::POWER_DBM, show::dbm).map(Dbm)
    };
    let t = &file.transmitter;
    let tx_power = power("transmitter.power", &t.power)?;
    let limits = Limits {
        max_power: t
            .max_power
            .as_ref()
            .map(|q| power("transmitter.max_power", q))
            .transpose()?,
        eirp_cap: match (&t.eirp_cap, &t.erp_cap) {
            (Some(_), Some(_)) => {
                return Err(CliError::arg(
                    "transmitter.erp_cap",
                    "give eirp_cap or erp_cap, not both",
                ))
            }
            (Some(q), None) => Some(power("transmitter.eirp_cap", q)?),
            (None, Some(q)) => Some(headroom::units::eirp_from_erp(power(
                "transmitter.erp_cap",
                q,
            )?)),
            (None, None) => None,
        },
        cap_given_as_erp: t.erp_cap.is_some(),
    };
    let model = file.path.model(frequency, &mut warnings)?;
    let distance = read_opt("path.distance", &file.path.distance, Q::distance)?
        .map(|d| within("path.distance", d.0, range::DISTANCE_M, show::distance).map(Metres))
        .transpose()?;
    let path_loss = match (&model, distance) {
        (None, _) => read(
            "path.loss",
            file.path
                .loss
                .as_ref()
                .ok_or_else(|| CliError::arg("path.loss", "required by path model 'fixed'"))?,
            Q::db,
        )?,
        (Some(m), Some(d)) => m.path_loss(frequency, d).map_err(|e| engine_error(&e))?,
        (Some(_), None) => {
            return Err(CliError::arg(
                "path.distance",
                "required by this path model",
            ))
        }
    };
    let bandwidth = read("receiver.bandwidth", &file.receiver.bandwidth, Q::frequency)?;
    within(
        "receiver.bandwidth",
        bandwidth.0,
        range::BANDWIDTH_HZ,
        show::frequency,
    )?;
    let noise_figure = read("receiver.noise_figure", &file.receiver.noise_figure, Q::db)?;
    within(
        "receiver.noise_figure",
        noise_figure.0,
        range::NOISE_FIGURE_DB,
        show::db,
    )?;
    let antenna_temperature = read_opt(
        "receiver.antenna_temperature",
        &file.receiver.antenna_temperature,
        Q::temperature,
    )?;
    if let Some(ta) = antenna_temperature {
        within(
            "receiver.antenna_temperature",
            ta.0,
            range::TEMPERATURE_K,
            show::kelvin,
        )?;
    }
    let noise = NoiseSpec {
        bandwidth,
        noise_figure,
        antenna_temperature,
    };
    let requirement = requirement(&file.requirement)?;
    let fade = match &file.fade {
        None => FadeAllowance::None,
        Some(f) => fade(f)?,
    };
    let mut link = Link::new(tx_power, path_loss, noise, requirement, fade);
    let mut largest_dish: Option<Metres> = None;
    for (i, item) in file.items.iter().enumerate() {
        if let Some(d) = push_item(&mut link, i, item, frequency)? {
            largest_dish = Some(Metres(largest_dish.map_or(d.0, |l| l.0.max(d.0))));
        }
    }
    if let (Some(dish), Some(d)) = (largest_dish, distance) {
        let ff = headroom::propagation::far_field_distance(frequency, dish)?;
        if d.0 < ff.0 {
            warn(
                &mut warnings,
                format!(
                    "path.distance {} is inside the far field of a {} dish (2D²/λ = {}): the path loss is underestimated",
                    show::distance(d.0),
                    show::distance(dish.0),
                    show::distance(ff.0)
                ),
            );
        }
    }
    let target_margin = match file.solve.as_ref().and_then(|s| s.target_margin.as_ref()) {
        Some(q) => {
            let m = read("solve.target_margin", q, Q::db)?;
            Db(within(
                "solve.target_margin",
                m.0,
                range::MARGIN_DB,
                show::db,
            )?)
        }
        None => Db(0.0),
    };
    let name = file.name.unwrap_or_else(|| {
        path.file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default()
    });
    // Evaluate once here, so that a value only the evaluation refuses (an
    // availability of 1, say) is reported with the file and its key.
    let r = link.evaluate().map_err(|e| engine_error(&e))?;
    if let (Some(m), Some(d)) = (&model, distance) {
        if let Some(w) = m.degraded(frequency, d) {
            warn(&mut warnings, format!("path: {w}"));
        }
    }
    if r.rx_power.0 > link.tx_power.0 {
        warn(
            &mut warnings,
            format!(
                "the received power ({}) is above the transmitted power ({}): check the gains and the path",
                show::dbm(r.rx_power.0),
                show::dbm(link.tx_power.0)
            ),
        );
    }
    Ok(LoadedLink {
        name,
        frequency,
        distance,
        model,
        link,
        evaluated: r,
        target_margin,
        energy,
        limits,
        warnings,
    })
}

fn requirement(r: &RequirementSpec) -> CliResult<Requirement> {
    let required = |key: &str, q: &Q| -> CliResult<Db> {
        let x = read(key, q, Q::db)?;
        within(key, x.0, range::REQUIRED_DB, show::db).map(Db)
    };
    let bit_rate = || -> CliResult<f32> {
        let q = r.bit_rate.as_ref().ok_or_else(|| {
            CliError::arg("requirement.bit_rate", "required with ebn0 or modulation")
        })?;
        let b = read("requirement.bit_rate", q, Q::number)?;
        within("requirement.bit_rate", b, range::BIT_RATE_BPS, |x| {
            format!("{x} bit/s")
        })
    };
    Ok(match (&r.snr, &r.ebn0, &r.modulation) {
        (Some(q), None, None) => Requirement::CarrierToNoise(required("requirement.snr", q)?),
        (None, Some(q), None) => Requirement::EbN0 {
            ebn0: required("requirement.ebn0", q)?,
            bit_rate_bps: bit_rate()?,
        },
        (None, None, Some(m)) => Requirement::Modulation {
            modulation: names::parse::<Scheme>("requirement.modulation", "modulation", m)?
                .build(r.order, "requirement.order")?,
            ber: read(
                "requirement.ber",
                r.ber
                    .as_ref()
                    .ok_or_else(|| CliError::arg("requirement.ber", "required with modulation"))?,
                Q::fraction,
            )?,
            bit_rate_bps: bit_rate()?,
        },
        _ => return Err(CliError::arg(
            "requirement",
            "give exactly one of snr, ebn0 (with bit_rate) or modulation (with ber and bit_rate)",
        )),
    })
}

fn fade(f: &FadeSpec) -> CliResult<FadeAllowance> {
    Ok(match (&f.margin, &f.model) {
        (Some(q), None) => {
            let m = read("fade.margin", q, Q::db)?;
            FadeAllowance::Fixed(Db(within("fade.margin", m.0, range::MARGIN_DB, show::db)?))
        }
        (None, Some(m)) => {
            let k = read_opt("fade.k_factor", &f.k_factor, Q::db)?;
            let s = read_opt("fade.sigma", &f.sigma, Q::db)?;
            let model = names::parse::<Fading>("fade.model", "fading model", m)?.build(
                k,
                s,
                Keys::File("fade"),
            )?;
            let outage = read(
                "fade.availability",
                f.availability.as_ref().ok_or_else(|| {
                    CliError::arg("fade.availability", "required with fade.model")
                })?,
                Q::outage,
            )?;
            FadeAllowance::Model {
                model,
                availability: (1.0 - outage) as f32,
            }
        }
        _ => {
            return Err(CliError::arg(
                "fade",
                "give either margin or model (with availability)",
            ))
        }
    })
}

/// Push one `[[item]]`; the dish diameter it names, if any.
fn push_item(
    link: &mut Link<MAX_ITEMS>,
    i: usize,
    item: &Item,
    f: Hertz,
) -> CliResult<Option<Metres>> {
    let key = format!("item[{i}] '{}'", item.name);
    let side: names::Side = names::parse(&key, "side", &item.side)?;
    let side = match side {
        names::Side::Tx => Side::Transmitter,
        names::Side::Path => Side::Path,
        names::Side::Rx => Side::Receiver,
    };
    let dish = read_opt(
        &format!("{key} dish_diameter"),
        &item.dish_diameter,
        Q::distance,
    )?;
    let efficiency = read_opt(&format!("{key} efficiency"), &item.efficiency, Q::fraction)?;
    let dish_gain = |eta: f32| -> CliResult<Option<Db>> {
        dish.map(|d| {
            headroom::propagation::gain_from_dish(d, eta, f)
                .map(|g| Db(g.0))
                .map_err(|e| CliError::arg(&key, e))
        })
        .transpose()
    };
    let gain = match (&item.gain, &item.loss, dish, efficiency) {
        (Some(q), None, _, None) => {
            let g = Db(read(&key, q, Q::gain)?.0);
            if let Some(most) = dish_gain(1.0)? {
                if g.0 > most.0 {
                    return Err(CliError::arg(
                        &key,
                        format!(
                            "a gain of {} is more than a {} dish can give at {} ({} at 100 % efficiency)",
                            show::db(g.0),
                            show::distance(dish.map_or(0.0, |d| d.0)),
                            show::frequency(f.0),
                            show::db(most.0)
                        ),
                    ));
                }
            }
            g
        }
        (None, None, Some(_), Some(eta)) => dish_gain(eta)?.unwrap_or(Db(0.0)),
        (None, None, Some(_), None) => {
            return Err(CliError::arg(
                &key,
                "dish_diameter without gain needs efficiency (0.5-0.7 is common practice)",
            ))
        }
        (_, _, None, Some(_)) | (Some(_), _, Some(_), Some(_)) => {
            return Err(CliError::arg(
                &key,
                "efficiency goes with dish_diameter and no gain",
            ))
        }
        (None, Some(q), None, None) => -read(&key, q, Q::db)?,
        _ => {
            return Err(CliError::arg(
                &key,
                "give exactly one of gain, loss or dish_diameter",
            ))
        }
    };
    within(&key, gain.0, range::ITEM_DB, show::db)?;
    let noise_figure = read_opt(&format!("{key} noise_figure"), &item.noise_figure, Q::db)?;
    let temperature = read_opt(
        &format!("{key} temperature"),
        &item.temperature,
        Q::temperature,
    )?;
    if let Some(t) = temperature {
        within(
            &format!("{key} temperature"),
            t.0,
            range::TEMPERATURE_K,
            show::kelvin,
        )?;
    }
    let noise = match (side, &item.loss, noise_figure, temperature) {
        (Side::Receiver, None, Some(nf), None) => {
            within(
                &format!("{key} noise_figure"),
                nf.0,
                range::NOISE_FIGURE_DB,
                show::db,
            )?;
            ItemNoise::Amplifier { noise_figure: nf }
        }
        (Side::Receiver, Some(_), None, t) => ItemNoise::Passive {
            temperature: t.unwrap_or(Kelvin(headroom::noise::T0_K)),
        },
        (Side::Receiver, None, None, None) => ItemNoise::None,
        (Side::Receiver, _, Some(_), _) => {
            return Err(CliError::arg(
                &key,
                "noise_figure goes with gain (an amplifier), not with loss",
            ))
        }
        (Side::Receiver, None, _, Some(_)) => {
            return Err(CliError::arg(
                &key,
                "temperature goes with loss (a passive item), not with gain",
            ))
        }
        (_, _, None, None) => ItemNoise::None,
        _ => {
            return Err(CliError::arg(
                &key,
                "noise_figure and temperature apply to receive-side (rx) items only",
            ))
        }
    };
    link.push_item(&item.name, side, gain, noise)
        .map_err(|e| CliError::arg(&key, e))?;
    Ok(dish)
}
