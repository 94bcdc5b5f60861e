//! The link file: a TOML description of one radio link, read by
//! `headroom budget` and `headroom solve`.
//!
//! Quantities are strings with units (`"868MHz"`, `"1.2km"`, `"14dBm"`,
//! `"2.15dBi"`, `"6dB"`) or bare numbers in the base unit. Unknown keys are
//! refused, so that a misspelt setting is not silently ignored. The format is
//! documented with an example in the README and in `examples/links/`.

use std::path::Path;

use clap::ValueEnum;
use headroom::budget::{FadeAllowance, Link, NoiseSpec, Requirement, Side};
use headroom::fading::FadingModel;
use headroom::modulation::Modulation;
use headroom::propagation::{
    indoor_coefficients, Extrapolation, FloorLoss, HataEnvironment, IndoorCoefficients,
    IndoorEnvironment, PathLossModel, TwoRayForm,
};
use headroom::units::{Db, Dbm, Hertz, Metres};
use serde::Deserialize;

use crate::error::{CliError, CliResult};
use crate::quantity;

/// Most line items a link file may list.
pub const MAX_ITEMS: usize = 32;

/// A quantity in a TOML file: a string with a unit or a bare number.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum Q {
    /// `"868MHz"`.
    Text(String),
    /// `868e6`.
    Number(f64),
}

impl Q {
    fn text(&self) -> String {
        match self {
            Q::Text(s) => s.clone(),
            Q::Number(x) => format!("{x}"),
        }
    }
}

fn parse<T>(key: &str, q: &Q, f: fn(&str) -> Result<T, String>) -> CliResult<T> {
    f(&q.text()).map_err(|e| CliError::arg(key, e))
}

fn need<'a, T>(key: &str, v: &'a Option<T>, model: &str) -> CliResult<&'a T> {
    v.as_ref()
        .ok_or_else(|| CliError::arg(key, format!("required by path model '{model}'")))
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
}

/// `[transmitter]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Transmitter {
    /// Power at the transmitter output.
    pub power: Q,
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
}

/// `[path]`: the distance and the propagation model.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PathSpec {
    /// `free-space`, `log-distance`, `two-ray`, `hata`, `cost231`, `indoor`,
    /// or `fixed` (a given `loss`).
    pub model: String,
    /// Distance between the antennas (not needed by `fixed`).
    #[serde(default)]
    pub distance: Option<Q>,
    /// `fixed`: the path loss.
    #[serde(default)]
    pub loss: Option<Q>,
    /// `log-distance`: exponent n.
    #[serde(default)]
    pub exponent: Option<f64>,
    /// `log-distance`: reference distance d0 (default 1 m).
    #[serde(default)]
    pub reference_distance: Option<Q>,
    /// `log-distance`: loss at d0 (default: free space at d0).
    #[serde(default)]
    pub reference_loss: Option<Q>,
    /// `two-ray`, `hata`, `cost231`: transmitter (base) antenna height.
    #[serde(default)]
    pub tx_height: Option<Q>,
    /// `two-ray`, `hata`, `cost231`: receiver (mobile) antenna height.
    #[serde(default)]
    pub rx_height: Option<Q>,
    /// `two-ray`: `exact` (default) or `asymptotic`.
    #[serde(default)]
    pub form: Option<String>,
    /// `two-ray` exact: ground reflection coefficient (default −1).
    #[serde(default)]
    pub reflection: Option<f64>,
    /// `hata`: `open`, `suburban`, `medium-city`, `large-city`;
    /// `cost231`: `medium-city` or `metropolitan`.
    #[serde(default)]
    pub environment: Option<String>,
    /// `hata`, `cost231`: `none` (default), `distance`, `frequency`, `distance-and-frequency`.
    #[serde(default)]
    pub extrapolate: Option<String>,
    /// `indoor`: `residential`, `office`, `commercial`.
    #[serde(default)]
    pub building: Option<String>,
    /// `indoor`: floors between the terminals (default 0).
    #[serde(default)]
    pub floors: Option<u8>,
    /// `indoor`, own coefficients instead of the table: distance power loss coefficient N.
    #[serde(default)]
    pub coefficient_n: Option<f64>,
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
    pub ber: Option<f64>,
    /// Bit rate in bit/s.
    #[serde(default)]
    pub bit_rate: Option<f64>,
}

/// `[fade]`: `margin`, or `model` + `availability` (+ `k_factor` / `sigma`).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FadeSpec {
    /// A fixed margin.
    #[serde(default)]
    pub margin: Option<Q>,
    /// `rayleigh`, `rician`, `lognormal`, `composite`.
    #[serde(default)]
    pub model: Option<String>,
    /// Availability as a fraction (0.99).
    #[serde(default)]
    pub availability: Option<f64>,
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
    /// `[solve] target_margin`.
    pub target_margin: Db,
}

/// A modulation named as for `headroom ber --modulation`, built by the same code.
fn modulation(name: &str, order: Option<u32>) -> CliResult<Modulation> {
    let scheme = crate::cmd::ber::Scheme::from_str(name, false)
        .map_err(|_| {
            CliError::arg(
                "requirement.modulation",
                format!("unknown modulation '{name}' (bpsk, qpsk, dbpsk, fsk-coherent, fsk-noncoherent, psk, qam)"),
            )
        })?;
    crate::cmd::ber::modulation_keyed(scheme, order, "requirement.order")
}

/// A fading model named as for `headroom fade --model`, built by the same code.
fn fading(name: &str, k_factor: Option<Db>, sigma: Option<Db>) -> CliResult<FadingModel> {
    let model = crate::cmd::fade::Model::from_str(name, false).map_err(|_| {
        CliError::arg(
            "fade.model",
            format!("unknown fading model '{name}' (rayleigh, rician, lognormal, composite)"),
        )
    })?;
    crate::cmd::fade::model_keyed(model, (k_factor, "fade.k_factor"), (sigma, "fade.sigma"))
}

fn extrapolation(s: Option<&str>) -> CliResult<Extrapolation> {
    Ok(match s.unwrap_or("none") {
        "none" => Extrapolation::Refuse,
        "distance" => Extrapolation::ExtendedDistance,
        "frequency" => Extrapolation::ExtendedFrequency,
        "distance-and-frequency" => Extrapolation::ExtendedDistanceAndFrequency,
        other => {
            return Err(CliError::arg(
                "path.extrapolate",
                format!("unknown '{other}' (none, distance, frequency, distance-and-frequency)"),
            ))
        }
    })
}

impl PathSpec {
    /// The engine model this spec names (`None` for `fixed`).
    pub fn model(&self, frequency: Hertz) -> CliResult<Option<PathLossModel>> {
        let m = self.model.as_str();
        let height = |key: &str, q: &Option<Q>| -> CliResult<Metres> {
            parse(key, need(key, q, m)?, quantity::distance)
        };
        Ok(Some(match m {
            "fixed" => return Ok(None),
            "free-space" => PathLossModel::FreeSpace,
            "log-distance" => PathLossModel::LogDistance {
                d0: match &self.reference_distance {
                    Some(q) => parse("path.reference_distance", q, quantity::distance)?,
                    None => Metres(1.0),
                },
                pl_d0: match &self.reference_loss {
                    Some(q) => Some(parse("path.reference_loss", q, quantity::db)?),
                    None => None,
                },
                exponent: *need("path.exponent", &self.exponent, m)? as f32,
            },
            "two-ray" => PathLossModel::TwoRay {
                ht: height("path.tx_height", &self.tx_height)?,
                hr: height("path.rx_height", &self.rx_height)?,
                form: match self.form.as_deref().unwrap_or("exact") {
                    "exact" => TwoRayForm::Exact { reflection: self.reflection.unwrap_or(-1.0) as f32 },
                    "asymptotic" => TwoRayForm::Asymptotic,
                    other => {
                        return Err(CliError::arg("path.form", format!("unknown '{other}' (exact, asymptotic)")))
                    }
                },
            },
            "hata" => PathLossModel::Hata {
                ht: height("path.tx_height", &self.tx_height)?,
                hr: height("path.rx_height", &self.rx_height)?,
                env: match need("path.environment", &self.environment, m)?.as_str() {
                    "open" => HataEnvironment::Open,
                    "suburban" => HataEnvironment::Suburban,
                    "medium-city" => HataEnvironment::MediumCity,
                    "large-city" => HataEnvironment::LargeCity,
                    other => {
                        return Err(CliError::arg(
                            "path.environment",
                            format!("unknown '{other}' (open, suburban, medium-city, large-city)"),
                        ))
                    }
                },
                ext: extrapolation(self.extrapolate.as_deref())?,
            },
            "cost231" => PathLossModel::Cost231 {
                ht: height("path.tx_height", &self.tx_height)?,
                hr: height("path.rx_height", &self.rx_height)?,
                metropolitan: match self.environment.as_deref().unwrap_or("medium-city") {
                    "medium-city" => false,
                    "metropolitan" | "large-city" => true,
                    other => {
                        return Err(CliError::arg(
                            "path.environment",
                            format!("unknown '{other}' for cost231 (medium-city, metropolitan)"),
                        ))
                    }
                },
                ext: extrapolation(self.extrapolate.as_deref())?,
            },
            "indoor" => {
                let coeffs = match self.coefficient_n {
                    Some(n) => IndoorCoefficients {
                        distance_power_coefficient_n: n as f32,
                        floor_loss: match &self.floor_loss {
                            Some(q) => FloorLoss::Linear {
                                first: parse("path.floor_loss", q, quantity::db)?,
                                per_extra_floor: match &self.floor_loss_per_extra_floor {
                                    Some(q) => parse("path.floor_loss_per_extra_floor", q, quantity::db)?,
                                    None => Db(0.0),
                                },
                            },
                            None => FloorLoss::SameFloorOnly,
                        },
                    },
                    None => {
                        let env = match need("path.building", &self.building, m)?.as_str() {
                            "residential" => IndoorEnvironment::Residential,
                            "office" => IndoorEnvironment::Office,
                            "commercial" => IndoorEnvironment::Commercial,
                            other => {
                                return Err(CliError::arg(
                                    "path.building",
                                    format!("unknown '{other}' (residential, office, commercial)"),
                                ))
                            }
                        };
                        indoor_coefficients(frequency, env)?
                    }
                };
                PathLossModel::Indoor { floors: self.floors.unwrap_or(0), coeffs }
            }
            other => {
                return Err(CliError::arg(
                    "path.model",
                    format!(
                        "unknown model '{other}' (free-space, log-distance, two-ray, hata, cost231, indoor, fixed)"
                    ),
                ))
            }
        }))
    }
}

/// The keys of a link file by the engine parameter they become, so that an
/// engine error names the key.
const KEYS: &[(&str, &str)] = &[
    ("availability", "fade.availability"),
    ("k_factor", "fade.k_factor"),
    ("sigma", "fade.sigma"),
    ("frequency_hz", "frequency"),
    ("distance_m", "path.distance"),
];

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
    let frequency = match frequency {
        Some(f) => f,
        None => parse("frequency", &file.frequency, quantity::frequency)?,
    };
    let tx_power: Dbm = parse(
        "transmitter.power",
        &file.transmitter.power,
        quantity::power,
    )?;
    let model = file.path.model(frequency)?;
    let distance = match &file.path.distance {
        Some(q) => Some(parse("path.distance", q, quantity::distance)?),
        None => None,
    };
    let path_loss = match (&model, distance) {
        (None, _) => parse(
            "path.loss",
            file.path
                .loss
                .as_ref()
                .ok_or_else(|| CliError::arg("path.loss", "required by path model 'fixed'"))?,
            quantity::db,
        )?,
        (Some(m), Some(d)) => m
            .path_loss(frequency, d)
            .map_err(|e| CliError::arg("path", e))?,
        (Some(_), None) => {
            return Err(CliError::arg(
                "path.distance",
                "required by this path model",
            ))
        }
    };
    let noise = NoiseSpec {
        bandwidth: parse(
            "receiver.bandwidth",
            &file.receiver.bandwidth,
            quantity::frequency,
        )?,
        noise_figure: parse(
            "receiver.noise_figure",
            &file.receiver.noise_figure,
            quantity::db,
        )?,
        antenna_temperature: match &file.receiver.antenna_temperature {
            Some(q) => Some(parse(
                "receiver.antenna_temperature",
                q,
                quantity::temperature,
            )?),
            None => None,
        },
    };
    let r = &file.requirement;
    let bit_rate = || -> CliResult<f32> {
        r.bit_rate.map(|b| b as f32).ok_or_else(|| {
            CliError::arg("requirement.bit_rate", "required with ebn0 or modulation")
        })
    };
    let requirement = match (&r.snr, &r.ebn0, &r.modulation) {
        (Some(q), None, None) => {
            Requirement::CarrierToNoise(parse("requirement.snr", q, quantity::db)?)
        }
        (None, Some(q), None) => Requirement::EbN0 {
            ebn0: parse("requirement.ebn0", q, quantity::db)?,
            bit_rate_bps: bit_rate()?,
        },
        (None, None, Some(m)) => Requirement::Modulation {
            modulation: modulation(m, r.order)?,
            ber: r
                .ber
                .ok_or_else(|| CliError::arg("requirement.ber", "required with modulation"))?
                as f32,
            bit_rate_bps: bit_rate()?,
        },
        _ => return Err(CliError::arg(
            "requirement",
            "give exactly one of snr, ebn0 (with bit_rate) or modulation (with ber and bit_rate)",
        )),
    };
    let fade = match &file.fade {
        None => FadeAllowance::None,
        Some(f) => match (&f.margin, &f.model) {
            (Some(q), None) => FadeAllowance::Fixed(parse("fade.margin", q, quantity::db)?),
            (None, Some(m)) => {
                let k = match &f.k_factor {
                    Some(q) => Some(parse("fade.k_factor", q, quantity::db)?),
                    None => None,
                };
                let s = match &f.sigma {
                    Some(q) => Some(parse("fade.sigma", q, quantity::db)?),
                    None => None,
                };
                FadeAllowance::Model {
                    model: fading(m, k, s)?,
                    availability: f.availability.ok_or_else(|| {
                        CliError::arg("fade.availability", "required with fade.model")
                    })? as f32,
                }
            }
            _ => {
                return Err(CliError::arg(
                    "fade",
                    "give either margin or model (with availability)",
                ))
            }
        },
    };
    let mut link = Link::new(tx_power, path_loss, noise, requirement, fade);
    for (i, item) in file.items.iter().enumerate() {
        let key = format!("item[{i}] '{}'", item.name);
        let side = match item.side.as_str() {
            "tx" => Side::Transmitter,
            "path" => Side::Path,
            "rx" => Side::Receiver,
            other => {
                return Err(CliError::arg(
                    &key,
                    format!("side '{other}' is not tx, path or rx"),
                ))
            }
        };
        let gain = match (&item.gain, &item.loss) {
            (Some(q), None) => Db(parse(&key, q, quantity::gain)?.0),
            (None, Some(q)) => -parse(&key, q, quantity::db)?,
            _ => return Err(CliError::arg(&key, "give exactly one of gain or loss")),
        };
        link.push(&item.name, side, gain)
            .map_err(|e| CliError::arg(&key, e))?;
    }
    let target_margin = match file.solve.as_ref().and_then(|s| s.target_margin.as_ref()) {
        Some(q) => parse("solve.target_margin", q, quantity::db)?,
        None => Db(0.0),
    };
    let name = file.name.unwrap_or_else(|| {
        path.file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default()
    });
    // Evaluate once here, so that a value only the evaluation refuses (an
    // availability of 1, say) is reported with the file and its key.
    link.evaluate()
        .map_err(|e| crate::error::engine_error(&e, KEYS))?;
    Ok(LoadedLink {
        name,
        frequency,
        distance,
        model,
        link,
        target_margin,
    })
}
