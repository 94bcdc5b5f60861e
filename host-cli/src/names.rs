//! The one table of names: path-loss models, environments, modulations and
//! fading models, each named once and used by the command line
//! (`headroom pathloss --model hata`), link files (`[path] model = "hata"`)
//! and scenario files (`path_loss = { model = "hata", ... }`).
//!
//! Each parameter has one spelling too: a file key `tx_height` is the flag
//! `--tx-height` ([`Keys`]). The builders here turn names and parameters into
//! engine values; `cmd/*` and `link.rs` call them, never each other.

use clap::ValueEnum;
use headroom::fading::FadingModel;
use headroom::modulation::Modulation;
use headroom::propagation::{
    indoor_coefficients, Extrapolation, FloorLoss, HataEnvironment, IndoorCoefficients,
    IndoorEnvironment, PathLossModel, TwoRayForm,
};
use headroom::units::{Db, Hertz, Metres};

use crate::error::{CliError, CliResult};
use crate::quantity::show;

/// The name of a table entry, as typed.
pub fn name<E: ValueEnum>(e: &E) -> String {
    e.to_possible_value()
        .map(|p| p.get_name().to_string())
        .unwrap_or_default()
}

/// Every name of a table, comma separated.
pub fn list<E: ValueEnum>() -> String {
    E::value_variants()
        .iter()
        .map(name)
        .collect::<Vec<_>>()
        .join(", ")
}

/// The entry named `text`, or an error naming `key` and listing the names.
pub fn parse<E: ValueEnum>(key: &str, what: &str, text: &str) -> CliResult<E> {
    E::from_str(text, false)
        .map_err(|_| CliError::arg(key, format!("unknown {what} '{text}' ({})", list::<E>())))
}

/// How the parameters are spelt where they came from, so that an error names
/// what the user typed: `--tx-height` on the command line, `path.tx_height`
/// in a link file, `channel.path_loss.tx_height` in a scenario file.
#[derive(Clone, Copy, Debug)]
pub enum Keys {
    /// Command-line flags.
    Flags,
    /// Keys of a TOML table at this dotted prefix.
    File(&'static str),
}

impl Keys {
    /// The spelling of parameter `param` (a file key such as `tx_height`).
    pub fn key(self, param: &str) -> String {
        match self {
            Keys::Flags => format!("--{}", param.replace('_', "-")),
            Keys::File(prefix) => format!("{prefix}.{param}"),
        }
    }
}

/// Side of a line item in a link budget.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Side {
    /// Transmitter side: counts in the EIRP.
    Tx,
    /// Along the path, beside the modelled path loss.
    Path,
    /// Receiver side: in listed order, the receive chain.
    Rx,
}

/// How a value is shown to a person.
type Shown = fn(f32) -> String;

/// Engine parameters by the setting they come from (the file key; flags
/// are the same with dashes) and the way a person reads their values.
const PARAMS: &[(&str, &str, Shown)] = &[
    ("frequency_hz", "frequency", show::frequency),
    ("distance_m", "distance", show::distance),
    ("tx_height_m", "tx_height", show::distance),
    ("rx_height_m", "rx_height", show::distance),
    ("reference_distance_m", "reference_distance", show::distance),
    ("reference_loss_db", "reference_loss", show::db),
    ("exponent", "exponent", show::number),
    ("reflection", "reflection", show::number),
    ("floors", "floors", show::number),
    ("k_factor", "k_factor", show::db),
    ("sigma", "sigma", show::db),
    ("availability", "availability", show::number),
];

/// An engine error about a parameter, naming the setting as the user spells
/// it (`key_of("tx_height")` → `--tx-height` or `path.tx_height`) and giving
/// an out-of-range value and its range in the unit a person reads.
pub fn engine_error(e: &headroom::Error, key_of: &dyn Fn(&str) -> String) -> CliError {
    let Some(&(_, setting, shown)) = PARAMS.iter().find(|(p, _, _)| *p == e.param()) else {
        return CliError::Input(e.to_string());
    };
    let key = key_of(setting);
    match *e {
        headroom::Error::OutOfValidity {
            value, min, max, ..
        } => {
            let range = if max.is_finite() {
                format!("{}..{}", shown(min), shown(max))
            } else {
                format!("at least {}", shown(min))
            };
            CliError::arg(
                &key,
                format!(
                    "{} is outside the model's validity range {range}",
                    shown(value)
                ),
            )
        }
        _ => {
            let msg = e.to_string();
            let rest = msg
                .strip_prefix(e.param())
                .and_then(|r| r.strip_prefix(": "))
                .unwrap_or(&msg);
            CliError::arg(&key, rest)
        }
    }
}

/// Path-loss model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Model {
    /// Free space, ITU-R P.525 (no options; far field only).
    FreeSpace,
    /// Log-distance: exponent (1.5..6), optional reference-distance (default
    /// 1 m) and reference-loss (default: free space at the reference distance).
    LogDistance,
    /// Two-ray ground reflection: tx-height, rx-height, optional form and
    /// reflection.
    TwoRay,
    /// Okumura-Hata (150-1500 MHz, 1-20 km, base 30-200 m, mobile 1-10 m):
    /// tx-height is the BASE station's, rx-height the MOBILE's; environment.
    Hata,
    /// COST 231-Hata (1500-2000 MHz, 1-20 km): tx-height (base), rx-height
    /// (mobile), optional environment medium-city or metropolitan.
    Cost231,
    /// ITU-R P.1238 indoor (d > 1 m): environment residential, office or
    /// commercial, or your own coefficient-n and floor-loss; optional floors.
    Indoor,
}

impl Model {
    /// Which parameters this model takes (besides frequency and distance).
    pub fn params(self) -> &'static [&'static str] {
        match self {
            Model::FreeSpace => &[],
            Model::LogDistance => &["exponent", "reference_distance", "reference_loss"],
            Model::TwoRay => &["tx_height", "rx_height", "form", "reflection"],
            Model::Hata => &["tx_height", "rx_height", "environment", "extrapolate"],
            Model::Cost231 => &["tx_height", "rx_height", "environment", "extrapolate"],
            Model::Indoor => &[
                "environment",
                "floors",
                "coefficient_n",
                "floor_loss",
                "floor_loss_per_extra_floor",
            ],
        }
    }

    /// The name of the engine model `m`. The match is exhaustive: a model
    /// added to the engine does not compile until it is named here.
    pub fn of(m: &PathLossModel) -> Model {
        match m {
            PathLossModel::FreeSpace => Model::FreeSpace,
            PathLossModel::LogDistance { .. } => Model::LogDistance,
            PathLossModel::TwoRay { .. } => Model::TwoRay,
            PathLossModel::Hata { .. } => Model::Hata,
            PathLossModel::Cost231 { .. } => Model::Cost231,
            PathLossModel::Indoor { .. } => Model::Indoor,
        }
    }
}

/// Environment of a model: Hata's classes, COST 231's two, P.1238's buildings.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Environment {
    /// Hata: open area.
    Open,
    /// Hata: suburban.
    Suburban,
    /// Hata and COST 231: medium or small city.
    MediumCity,
    /// Hata: large city.
    LargeCity,
    /// COST 231: metropolitan centre (+3 dB).
    Metropolitan,
    /// Indoor: residential building.
    Residential,
    /// Indoor: office building.
    Office,
    /// Indoor: commercial building.
    Commercial,
}

impl Environment {
    /// The environments model `m` takes.
    pub fn of_model(m: Model) -> &'static [Environment] {
        use Environment::*;
        match m {
            Model::Hata => &[Open, Suburban, MediumCity, LargeCity],
            Model::Cost231 => &[MediumCity, Metropolitan],
            Model::Indoor => &[Residential, Office, Commercial],
            _ => &[],
        }
    }
}

/// Two-ray formula.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Form {
    /// Phasor sum of direct and reflected rays.
    Exact,
    /// The d^4 asymptote, valid beyond the crossover distance only.
    Asymptotic,
}

/// Applying a Hata model beyond its published range.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Extrapolate {
    /// Refuse out-of-range inputs.
    None,
    /// Distances up to 100 km.
    Distance,
    /// Frequencies 100-3000 MHz (Hata), 1000-3000 MHz (COST 231).
    Frequency,
    /// Both.
    DistanceAndFrequency,
}

impl Extrapolate {
    fn engine(self) -> Extrapolation {
        match self {
            Extrapolate::None => Extrapolation::Refuse,
            Extrapolate::Distance => Extrapolation::ExtendedDistance,
            Extrapolate::Frequency => Extrapolation::ExtendedFrequency,
            Extrapolate::DistanceAndFrequency => Extrapolation::ExtendedDistanceAndFrequency,
        }
    }
}

/// Modulation scheme.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Scheme {
    /// Coherent BPSK.
    Bpsk,
    /// Coherent QPSK, Gray coded.
    Qpsk,
    /// Differentially coherent BPSK.
    Dbpsk,
    /// Binary orthogonal FSK, coherent detection.
    FskCoherent,
    /// Binary orthogonal FSK, non-coherent detection.
    FskNoncoherent,
    /// M-PSK, Gray coded: needs an order (a power of two).
    Psk,
    /// Square M-QAM, Gray coded: needs an order (4, 16, 64, 256, ...).
    Qam,
}

impl Scheme {
    /// The name of the engine modulation `m` (exhaustive, as [`Model::of`]).
    pub fn of(m: &Modulation) -> Scheme {
        match m {
            Modulation::Bpsk => Scheme::Bpsk,
            Modulation::Qpsk => Scheme::Qpsk,
            Modulation::Dbpsk => Scheme::Dbpsk,
            Modulation::FskCoherent => Scheme::FskCoherent,
            Modulation::FskNoncoherent => Scheme::FskNoncoherent,
            Modulation::Psk { .. } => Scheme::Psk,
            Modulation::Qam { .. } => Scheme::Qam,
        }
    }

    /// The engine's modulation, with the order named `order_key` in errors.
    pub fn build(self, order: Option<u32>, order_key: &str) -> CliResult<Modulation> {
        let need = |o: Option<u32>| {
            o.ok_or_else(|| {
                CliError::arg(
                    order_key,
                    format!("modulation {} needs an order M", name(&self)),
                )
            })
        };
        match (self, order) {
            (Scheme::Psk, o) => Ok(Modulation::Psk { order: need(o)? }),
            (Scheme::Qam, o) => Ok(Modulation::Qam { order: need(o)? }),
            (_, Some(_)) => Err(CliError::arg(
                order_key,
                format!("applies to psk and qam only, not to {}", name(&self)),
            )),
            (Scheme::Bpsk, None) => Ok(Modulation::Bpsk),
            (Scheme::Qpsk, None) => Ok(Modulation::Qpsk),
            (Scheme::Dbpsk, None) => Ok(Modulation::Dbpsk),
            (Scheme::FskCoherent, None) => Ok(Modulation::FskCoherent),
            (Scheme::FskNoncoherent, None) => Ok(Modulation::FskNoncoherent),
        }
    }
}

/// Fading model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Fading {
    /// Rayleigh (no line of sight).
    Rayleigh,
    /// Rician: needs a K factor (-30 to 26 dB).
    Rician,
    /// Log-normal shadowing: needs sigma (0 to 20 dB).
    Lognormal,
    /// Log-normal shadowing times Rayleigh (Suzuki): needs sigma.
    Composite,
    /// Log-normal shadowing times Rician (a line of sight under moving
    /// shadows): needs a K factor and sigma.
    RicianLognormal,
}

impl Fading {
    /// The name of the engine model `m` (exhaustive, as [`Model::of`]).
    pub fn of(m: &FadingModel) -> Fading {
        match m {
            FadingModel::Rayleigh => Fading::Rayleigh,
            FadingModel::Rician { .. } => Fading::Rician,
            FadingModel::LogNormal { .. } => Fading::Lognormal,
            FadingModel::Composite { .. } => Fading::Composite,
            FadingModel::RicianLogNormal { .. } => Fading::RicianLognormal,
        }
    }

    /// The engine's fading model from its parameters, each named by `keys`
    /// (`--sigma` on the command line, `fade.sigma` in a link file).
    pub fn build(self, k: Option<Db>, sigma: Option<Db>, keys: Keys) -> CliResult<FadingModel> {
        let (k_key, s_key) = (keys.key("k_factor"), keys.key("sigma"));
        let n = name(&self);
        let unused = |key: &str| CliError::arg(key, format!("does not apply to model {n}"));
        let needs = |key: &str| CliError::arg(key, format!("model {n} needs {key}"));
        match self {
            Fading::Rayleigh => match (k, sigma) {
                (Some(_), _) => Err(unused(&k_key)),
                (_, Some(_)) => Err(unused(&s_key)),
                _ => Ok(FadingModel::Rayleigh),
            },
            Fading::Rician => match (k, sigma) {
                (_, Some(_)) => Err(unused(&s_key)),
                (None, _) => Err(needs(&k_key)),
                (Some(k), None) => Ok(FadingModel::Rician { k_factor: k }),
            },
            Fading::Lognormal | Fading::Composite => match (k, sigma) {
                (Some(_), _) => Err(unused(&k_key)),
                (None, None) => Err(needs(&s_key)),
                (None, Some(sigma)) if self == Fading::Lognormal => {
                    Ok(FadingModel::LogNormal { sigma })
                }
                (None, Some(sigma)) => Ok(FadingModel::Composite { sigma }),
            },
            Fading::RicianLognormal => match (k, sigma) {
                (None, _) => Err(needs(&k_key)),
                (_, None) => Err(needs(&s_key)),
                (Some(k_factor), Some(sigma)) => {
                    Ok(FadingModel::RicianLogNormal { k_factor, sigma })
                }
            },
        }
    }
}

/// A path-loss model and its parameters, however they were given. Every
/// field is named as the file key; the flag is the same with dashes.
#[derive(Clone, Debug)]
pub struct PathParams {
    /// The model.
    pub model: Model,
    /// Log-distance exponent n.
    pub exponent: Option<f32>,
    /// Log-distance reference distance d0 (default 1 m).
    pub reference_distance: Option<Metres>,
    /// Log-distance loss at d0 (default: free space at d0).
    pub reference_loss: Option<Db>,
    /// Transmitter height (Hata: the base station's).
    pub tx_height: Option<Metres>,
    /// Receiver height (Hata: the mobile's).
    pub rx_height: Option<Metres>,
    /// Two-ray formula (default exact).
    pub form: Option<Form>,
    /// Two-ray ground reflection coefficient (default −1).
    pub reflection: Option<f32>,
    /// Hata, COST 231, indoor environment.
    pub environment: Option<Environment>,
    /// Hata, COST 231 extrapolation (default none).
    pub extrapolate: Option<Extrapolate>,
    /// Indoor: floors between the terminals (default 0).
    pub floors: Option<u8>,
    /// Indoor, own coefficients: distance power loss coefficient N.
    pub coefficient_n: Option<f32>,
    /// Indoor, own coefficients: loss through the first floor.
    pub floor_loss: Option<Db>,
    /// Indoor, own coefficients: loss of each further floor (default 0 dB).
    pub floor_loss_per_extra_floor: Option<Db>,
}

impl PathParams {
    /// Parameters of `model`, none given yet.
    pub fn new(model: Model) -> Self {
        PathParams {
            model,
            exponent: None,
            reference_distance: None,
            reference_loss: None,
            tx_height: None,
            rx_height: None,
            form: None,
            reflection: None,
            environment: None,
            extrapolate: None,
            floors: None,
            coefficient_n: None,
            floor_loss: None,
            floor_loss_per_extra_floor: None,
        }
    }

    fn given(&self) -> [(&'static str, bool); 13] {
        [
            ("exponent", self.exponent.is_some()),
            ("reference_distance", self.reference_distance.is_some()),
            ("reference_loss", self.reference_loss.is_some()),
            ("tx_height", self.tx_height.is_some()),
            ("rx_height", self.rx_height.is_some()),
            ("form", self.form.is_some()),
            ("reflection", self.reflection.is_some()),
            ("environment", self.environment.is_some()),
            ("extrapolate", self.extrapolate.is_some()),
            ("floors", self.floors.is_some()),
            ("coefficient_n", self.coefficient_n.is_some()),
            ("floor_loss", self.floor_loss.is_some()),
            (
                "floor_loss_per_extra_floor",
                self.floor_loss_per_extra_floor.is_some(),
            ),
        ]
    }

    /// The engine model, at frequency `f` (the indoor tables depend on it).
    /// A parameter the model does not take is refused rather than ignored;
    /// a missing one is named as the user spells it.
    pub fn build(&self, f: Hertz, keys: Keys) -> CliResult<PathLossModel> {
        let m = self.model;
        let mname = name(&m);
        for (param, given) in self.given() {
            if given && !m.params().contains(&param) {
                return Err(CliError::arg(
                    &keys.key(param),
                    format!("does not apply to model {mname}"),
                ));
            }
        }
        let need =
            |param: &str| CliError::arg(&keys.key(param), format!("required by model {mname}"));
        let heights = || -> CliResult<(Metres, Metres)> {
            Ok((
                self.tx_height.ok_or_else(|| need("tx_height"))?,
                self.rx_height.ok_or_else(|| need("rx_height"))?,
            ))
        };
        let env_ok = |e: Environment| -> CliResult<Environment> {
            let allowed = Environment::of_model(m);
            if allowed.contains(&e) {
                Ok(e)
            } else {
                let names: Vec<String> = allowed.iter().map(name).collect();
                Err(CliError::arg(
                    &keys.key("environment"),
                    format!(
                        "'{}' is not an environment of model {mname} ({})",
                        name(&e),
                        names.join(", ")
                    ),
                ))
            }
        };
        let ext = self.extrapolate.unwrap_or(Extrapolate::None).engine();
        Ok(match m {
            Model::FreeSpace => PathLossModel::FreeSpace,
            Model::LogDistance => PathLossModel::LogDistance {
                d0: self.reference_distance.unwrap_or(Metres(1.0)),
                pl_d0: self.reference_loss,
                exponent: self.exponent.ok_or_else(|| need("exponent"))?,
            },
            Model::TwoRay => {
                let (ht, hr) = heights()?;
                let form = match (self.form.unwrap_or(Form::Exact), self.reflection) {
                    (Form::Exact, g) => TwoRayForm::Exact {
                        reflection: g.unwrap_or(-1.0),
                    },
                    (Form::Asymptotic, None) => TwoRayForm::Asymptotic,
                    (Form::Asymptotic, Some(_)) => {
                        return Err(CliError::arg(
                            &keys.key("reflection"),
                            "applies to the exact two-ray form only",
                        ))
                    }
                };
                PathLossModel::TwoRay { ht, hr, form }
            }
            Model::Hata => {
                let (ht, hr) = heights()?;
                let env = match env_ok(self.environment.ok_or_else(|| need("environment"))?)? {
                    Environment::Open => HataEnvironment::Open,
                    Environment::Suburban => HataEnvironment::Suburban,
                    Environment::MediumCity => HataEnvironment::MediumCity,
                    _ => HataEnvironment::LargeCity,
                };
                PathLossModel::Hata { ht, hr, env, ext }
            }
            Model::Cost231 => {
                let (ht, hr) = heights()?;
                let env = env_ok(self.environment.unwrap_or(Environment::MediumCity))?;
                PathLossModel::Cost231 {
                    ht,
                    hr,
                    metropolitan: env == Environment::Metropolitan,
                    ext,
                }
            }
            Model::Indoor => {
                let floors = self.floors.unwrap_or(0);
                let coeffs = match (self.environment, self.coefficient_n) {
                    (Some(e), None) => {
                        if self.floor_loss.is_some() || self.floor_loss_per_extra_floor.is_some() {
                            return Err(CliError::arg(
                                &keys.key("floor_loss"),
                                "applies with coefficient_n only (the environment's table gives the floor loss)",
                            ));
                        }
                        let b = match env_ok(e)? {
                            Environment::Residential => IndoorEnvironment::Residential,
                            Environment::Office => IndoorEnvironment::Office,
                            _ => IndoorEnvironment::Commercial,
                        };
                        indoor_coefficients(f, b).map_err(|e| {
                            CliError::arg(
                                &keys.key("environment"),
                                format!(
                                    "{e} (no ITU-R P.1238 table value here: give {} and {} instead)",
                                    keys.key("coefficient_n"),
                                    keys.key("floor_loss")
                                ),
                            )
                        })?
                    }
                    (None, Some(n)) => IndoorCoefficients {
                        distance_power_coefficient_n: n,
                        floor_loss: match (self.floor_loss, floors) {
                            (Some(first), _) => FloorLoss::Linear {
                                first,
                                per_extra_floor: self.floor_loss_per_extra_floor.unwrap_or(Db(0.0)),
                            },
                            (None, 0) => FloorLoss::SameFloorOnly,
                            (None, _) => {
                                return Err(CliError::arg(
                                    &keys.key("floor_loss"),
                                    format!(
                                        "required with {} when floors > 0",
                                        keys.key("coefficient_n")
                                    ),
                                ))
                            }
                        },
                    },
                    (Some(_), Some(_)) => {
                        return Err(CliError::arg(
                            &keys.key("environment"),
                            format!("give either it or {}, not both", keys.key("coefficient_n")),
                        ))
                    }
                    (None, None) => {
                        return Err(CliError::arg(
                            &keys.key("environment"),
                            format!(
                                "required by model indoor (or give {})",
                                keys.key("coefficient_n")
                            ),
                        ))
                    }
                };
                PathLossModel::Indoor { floors, coeffs }
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Parameters that build each model of the table.
    fn example(m: Model) -> PathParams {
        let mut p = PathParams::new(m);
        match m {
            Model::FreeSpace => {}
            Model::LogDistance => p.exponent = Some(3.0),
            Model::TwoRay | Model::Hata | Model::Cost231 => {
                p.tx_height = Some(Metres(30.0));
                p.rx_height = Some(Metres(1.5));
                if m == Model::Hata {
                    p.environment = Some(Environment::Open);
                }
            }
            Model::Indoor => p.environment = Some(Environment::Office),
        }
        p
    }

    #[test]
    fn every_named_model_builds_the_engine_model_of_that_name() {
        for &m in Model::value_variants() {
            let built = example(m).build(Hertz(900e6), Keys::Flags);
            let built = built.unwrap_or_else(|e| panic!("{}: {e}", name(&m)));
            assert_eq!(Model::of(&built), m);
        }
    }

    #[test]
    fn every_named_modulation_and_fading_model_builds() {
        for &s in Scheme::value_variants() {
            let order = matches!(s, Scheme::Psk | Scheme::Qam).then_some(16);
            let m = s.build(order, "--order").unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(Scheme::of(&m), s);
        }
        for &f in Fading::value_variants() {
            let (k, s) = match f {
                Fading::Rician => (Some(Db(6.0)), None),
                Fading::RicianLognormal => (Some(Db(6.0)), Some(Db(4.0))),
                Fading::Rayleigh => (None, None),
                _ => (None, Some(Db(4.0))),
            };
            let m = f.build(k, s, Keys::Flags).unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(Fading::of(&m), f);
        }
    }

    #[test]
    fn every_environment_belongs_to_a_model() {
        for e in Environment::value_variants() {
            assert!(
                Model::value_variants()
                    .iter()
                    .any(|&m| Environment::of_model(m).contains(e)),
                "{e:?}"
            );
        }
    }

    #[test]
    fn errors_use_the_spelling_of_their_source() {
        let mut p = example(Model::FreeSpace);
        p.tx_height = Some(Metres(3.0));
        let e = p
            .build(Hertz(868e6), Keys::File("path"))
            .err()
            .map(|e| e.to_string());
        assert_eq!(
            e.as_deref(),
            Some("path.tx_height: does not apply to model free-space")
        );
        let p = PathParams::new(Model::Hata);
        let e = p
            .build(Hertz(868e6), Keys::Flags)
            .err()
            .map(|e| e.to_string());
        assert_eq!(e.as_deref(), Some("--tx-height: required by model hata"));
        let mut p = example(Model::Hata);
        p.environment = Some(Environment::Office);
        let e = p
            .build(Hertz(868e6), Keys::Flags)
            .err()
            .map(|e| e.to_string());
        assert!(e.is_some_and(|e| e.contains("open, suburban, medium-city, large-city")));
    }
}
