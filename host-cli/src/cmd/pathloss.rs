//! `headroom pathloss`: the loss of one propagation model at one frequency
//! and distance.

use clap::ValueEnum;
use headroom::propagation::{
    cost231_hata, free_space_path_loss, indoor_coefficients, itu_indoor, log_distance,
    okumura_hata, two_ray, two_ray_crossover, Extrapolation, FloorLoss, HataEnvironment,
    IndoorCoefficients, IndoorEnvironment, TwoRayForm,
};
use headroom::units::{Db, Hertz, Metres};
use serde_json::Value;

use crate::error::{CliError, CliResult};
use crate::output::{Format, Report};
use crate::quantity;

/// Propagation model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Model {
    /// Free space, ITU-R P.525 (no options).
    FreeSpace,
    /// Log-distance: --exponent, optional --reference-distance (default 1 m)
    /// and --reference-loss-db (default: free space at the reference distance).
    LogDistance,
    /// Two-ray ground reflection: --tx-height, --rx-height, optional
    /// --two-ray-form and --reflection.
    TwoRay,
    /// Okumura-Hata (150-1500 MHz, 1-20 km, hb 30-200 m, hm 1-10 m):
    /// --tx-height (base), --rx-height (mobile), --environment.
    Hata,
    /// COST 231-Hata (1500-2000 MHz, 1-20 km): --tx-height, --rx-height,
    /// optional --metropolitan.
    Cost231,
    /// ITU-R P.1238 indoor (d > 1 m): --indoor-environment, or your own
    /// --coefficient-n and --floor-loss-db; optional --floors.
    Indoor,
}

/// Hata environment class.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Environment {
    /// Open area.
    Open,
    /// Suburban.
    Suburban,
    /// Medium or small city.
    MediumCity,
    /// Large city.
    LargeCity,
}

/// P.1238 building type.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Building {
    /// Residential.
    Residential,
    /// Office.
    Office,
    /// Commercial.
    Commercial,
}

/// Two-ray formula.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Form {
    /// Phasor sum of direct and reflected rays.
    Exact,
    /// The d^4 asymptote (far beyond the crossover distance).
    Asymptotic,
}

/// Extrapolation beyond a Hata model's published range.
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

/// Arguments of `headroom pathloss`.
///
/// Frequencies take Hz, kHz, MHz or GHz (`868MHz`); distances and heights take
/// mm, cm, m or km (`3km`), a bare number being metres; losses are in dB.
#[derive(clap::Args, Debug)]
#[command(after_help = concat!("Units: frequencies in Hz, kHz, MHz or GHz (868MHz); distances and heights in \
mm, cm, m or km (3km; a bare number is metres); losses in dB. The result is path_loss_db, the \
basic transmission loss between isotropic antennas (median loss for Hata and COST 231). Inputs \
outside a model's published validity range are refused; for Hata and COST 231 --extrapolate \
names an extension instead.", "\n\n", caution!()))]
pub struct Args {
    /// Propagation model.
    #[arg(long, value_enum)]
    model: Model,
    /// Carrier frequency, e.g. 868MHz or 2.4GHz (bare number: Hz).
    #[arg(long, value_parser = quantity::frequency)]
    frequency: Hertz,
    /// Distance between the antennas, e.g. 3km (bare number: m). Horizontal
    /// distance for two-ray.
    #[arg(long, value_parser = quantity::distance)]
    distance: Metres,
    /// Transmitter (base station) antenna height above ground, e.g. 30m.
    #[arg(long, value_parser = quantity::distance)]
    tx_height: Option<Metres>,
    /// Receiver (mobile) antenna height above ground, e.g. 1.5m.
    #[arg(long, value_parser = quantity::distance)]
    rx_height: Option<Metres>,
    /// Hata environment class.
    #[arg(long, value_enum)]
    environment: Option<Environment>,
    /// COST 231: metropolitan centre (adds 3 dB).
    #[arg(long)]
    metropolitan: bool,
    /// Log-distance path-loss exponent n (plain number, e.g. 2.7).
    #[arg(long, value_parser = quantity::number, allow_negative_numbers = true)]
    exponent: Option<f32>,
    /// Log-distance reference distance d0 (default 1 m).
    #[arg(long, value_parser = quantity::distance)]
    reference_distance: Option<Metres>,
    /// Log-distance loss at d0 in dB (default: free space at d0).
    #[arg(long, value_parser = quantity::db, allow_negative_numbers = true)]
    reference_loss_db: Option<Db>,
    /// Two-ray formula (default exact).
    #[arg(long, value_enum)]
    two_ray_form: Option<Form>,
    /// Two-ray ground reflection coefficient, -1..1 (default -1).
    #[arg(long, value_parser = quantity::number, allow_negative_numbers = true)]
    reflection: Option<f32>,
    /// Indoor: floors between the terminals (default 0).
    #[arg(long)]
    floors: Option<u8>,
    /// Indoor: building type, selecting the ITU-R P.1238-7 table coefficients.
    /// Tabulated near 0.9, 1.25, 1.9, 4, 5.2 and 60 GHz (accepted 0.8-1,
    /// 1.15-1.35, 1.7-2.1, 3.8-4.2, 5.0-5.4 and 57-64 GHz); elsewhere give
    /// --coefficient-n and --floor-loss-db.
    #[arg(long, value_enum)]
    indoor_environment: Option<Building>,
    /// Indoor: your own distance power loss coefficient N (with --floor-loss-db,
    /// instead of --indoor-environment).
    #[arg(long, value_parser = quantity::number)]
    coefficient_n: Option<f32>,
    /// Indoor: your own total floor penetration loss Lf for the path, dB
    /// (with --coefficient-n).
    #[arg(long, value_parser = quantity::db)]
    floor_loss_db: Option<Db>,
    /// Hata/COST 231: apply the formula beyond its published range.
    #[arg(long, value_enum, default_value = "none")]
    extrapolate: Extrapolate,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

fn need<T>(v: Option<T>, flag: &str, model: &str) -> CliResult<T> {
    v.ok_or_else(|| CliError::arg(flag, format!("required by --model {model}")))
}

/// Options that only some models use: refuse them elsewhere rather than
/// silently ignoring them.
fn refuse_unused(a: &Args) -> CliResult {
    let uses = |models: &[Model]| models.contains(&a.model);
    let checks: [(&str, bool, &[Model]); 13] = [
        (
            "--tx-height",
            a.tx_height.is_some(),
            &[Model::TwoRay, Model::Hata, Model::Cost231],
        ),
        (
            "--rx-height",
            a.rx_height.is_some(),
            &[Model::TwoRay, Model::Hata, Model::Cost231],
        ),
        ("--environment", a.environment.is_some(), &[Model::Hata]),
        ("--metropolitan", a.metropolitan, &[Model::Cost231]),
        ("--exponent", a.exponent.is_some(), &[Model::LogDistance]),
        (
            "--reference-distance",
            a.reference_distance.is_some(),
            &[Model::LogDistance],
        ),
        (
            "--reference-loss-db",
            a.reference_loss_db.is_some(),
            &[Model::LogDistance],
        ),
        ("--two-ray-form", a.two_ray_form.is_some(), &[Model::TwoRay]),
        ("--reflection", a.reflection.is_some(), &[Model::TwoRay]),
        ("--floors", a.floors.is_some(), &[Model::Indoor]),
        (
            "--indoor-environment",
            a.indoor_environment.is_some(),
            &[Model::Indoor],
        ),
        (
            "--coefficient-n",
            a.coefficient_n.is_some(),
            &[Model::Indoor],
        ),
        (
            "--floor-loss-db",
            a.floor_loss_db.is_some(),
            &[Model::Indoor],
        ),
    ];
    for (flag, given, models) in checks {
        if given && !uses(models) {
            return Err(CliError::arg(
                flag,
                format!("does not apply to --model {}", model_name(a.model)),
            ));
        }
    }
    if a.extrapolate != Extrapolate::None && !uses(&[Model::Hata, Model::Cost231]) {
        return Err(CliError::arg(
            "--extrapolate",
            "applies to --model hata and cost231 only",
        ));
    }
    Ok(())
}

fn model_name(m: Model) -> &'static str {
    match m {
        Model::FreeSpace => "free-space",
        Model::LogDistance => "log-distance",
        Model::TwoRay => "two-ray",
        Model::Hata => "hata",
        Model::Cost231 => "cost231",
        Model::Indoor => "indoor",
    }
}

fn extrapolation(e: Extrapolate) -> Extrapolation {
    match e {
        Extrapolate::None => Extrapolation::Refuse,
        Extrapolate::Distance => Extrapolation::ExtendedDistance,
        Extrapolate::Frequency => Extrapolation::ExtendedFrequency,
        Extrapolate::DistanceAndFrequency => Extrapolation::ExtendedDistanceAndFrequency,
    }
}

fn name_of<E: ValueEnum>(e: &E) -> Value {
    e.to_possible_value()
        .map_or(Value::Null, |p| Value::String(p.get_name().to_string()))
}

/// Run the command.
/// The options of `pathloss` by the engine parameter they become, so that
/// an engine error names the option.
const OPTIONS: &[(&str, &str)] = &[
    ("frequency_hz", "--frequency"),
    ("distance_m", "--distance"),
    ("tx_height_m", "--tx-height"),
    ("rx_height_m", "--rx-height"),
    ("exponent", "--exponent"),
    ("reference_distance_m", "--reference-distance"),
    ("reference_loss_db", "--reference-loss-db"),
    ("reflection", "--reflection"),
    ("floors", "--floors"),
];

fn opt(e: headroom::Error) -> CliError {
    let beyond = matches!(e, headroom::Error::OutOfValidity { .. });
    match crate::error::engine_error(&e, OPTIONS) {
        CliError::Input(m) if beyond => CliError::Input(format!(
            "{m} (see --extrapolate to apply the formula beyond it)"
        )),
        err => err,
    }
}

pub fn run(a: Args) -> CliResult {
    refuse_unused(&a)?;
    let name = model_name(a.model);
    let (f, d) = (a.frequency, a.distance);
    let mut r = Report::new();
    r.value("model", Value::String(name.into()));
    r.num("frequency_hz", f.0, "Hz");
    r.num("distance_m", d.0, "m");
    let loss = match a.model {
        Model::FreeSpace => free_space_path_loss(f, d).map_err(opt)?,
        Model::LogDistance => {
            let n = need(a.exponent, "--exponent", name)?;
            let d0 = a.reference_distance.unwrap_or(Metres(1.0));
            r.num("exponent", n, "");
            r.num("reference_distance_m", d0.0, "m");
            if let Some(l0) = a.reference_loss_db {
                r.num("reference_loss_db", l0.0, "dB");
            }
            log_distance(f, d, d0, a.reference_loss_db, n).map_err(opt)?
        }
        Model::TwoRay => {
            let ht = need(a.tx_height, "--tx-height", name)?;
            let hr = need(a.rx_height, "--rx-height", name)?;
            let form = match (a.two_ray_form.unwrap_or(Form::Exact), a.reflection) {
                (Form::Exact, g) => TwoRayForm::Exact {
                    reflection: g.unwrap_or(-1.0),
                },
                (Form::Asymptotic, None) => TwoRayForm::Asymptotic,
                (Form::Asymptotic, Some(_)) => {
                    return Err(CliError::arg(
                        "--reflection",
                        "applies to --two-ray-form exact only",
                    ))
                }
            };
            r.num("tx_height_m", ht.0, "m");
            r.num("rx_height_m", hr.0, "m");
            match form {
                TwoRayForm::Exact { reflection } => {
                    r.value("two_ray_form", Value::String("exact".into()));
                    r.num("reflection", reflection, "");
                }
                TwoRayForm::Asymptotic => {
                    r.value("two_ray_form", Value::String("asymptotic".into()));
                }
            }
            let loss = two_ray(f, d, ht, hr, form).map_err(opt)?;
            r.num("crossover_distance_m", two_ray_crossover(f, ht, hr)?.0, "m");
            loss
        }
        Model::Hata => {
            let ht = need(a.tx_height, "--tx-height", name)?;
            let hr = need(a.rx_height, "--rx-height", name)?;
            let env = need(a.environment, "--environment", name)?;
            r.num("tx_height_m", ht.0, "m");
            r.num("rx_height_m", hr.0, "m");
            r.value("environment", name_of(&env));
            r.value("extrapolate", name_of(&a.extrapolate));
            let env = match env {
                Environment::Open => HataEnvironment::Open,
                Environment::Suburban => HataEnvironment::Suburban,
                Environment::MediumCity => HataEnvironment::MediumCity,
                Environment::LargeCity => HataEnvironment::LargeCity,
            };
            okumura_hata(f, d, ht, hr, env, extrapolation(a.extrapolate)).map_err(opt)?
        }
        Model::Cost231 => {
            let ht = need(a.tx_height, "--tx-height", name)?;
            let hr = need(a.rx_height, "--rx-height", name)?;
            r.num("tx_height_m", ht.0, "m");
            r.num("rx_height_m", hr.0, "m");
            r.value("metropolitan", Value::Bool(a.metropolitan));
            r.value("extrapolate", name_of(&a.extrapolate));
            cost231_hata(f, d, ht, hr, a.metropolitan, extrapolation(a.extrapolate)).map_err(opt)?
        }
        Model::Indoor => {
            let floors = a.floors.unwrap_or(0);
            let coeffs = match (a.indoor_environment, a.coefficient_n, a.floor_loss_db) {
                (Some(b), None, None) => {
                    r.value("indoor_environment", name_of(&b));
                    let b = match b {
                        Building::Residential => IndoorEnvironment::Residential,
                        Building::Office => IndoorEnvironment::Office,
                        Building::Commercial => IndoorEnvironment::Commercial,
                    };
                    indoor_coefficients(f, b).map_err(|e| {
                        CliError::arg(
                            "--indoor-environment",
                            format!("{e} (no ITU-R P.1238 table value here: give --coefficient-n and --floor-loss-db instead)"),
                        )
                    })?
                }
                (None, Some(n), lf) => {
                    let lf = match (lf, floors) {
                        (Some(lf), _) => lf,
                        (None, 0) => Db(0.0),
                        (None, _) => {
                            return Err(CliError::arg(
                                "--floor-loss-db",
                                "required with --coefficient-n when --floors > 0",
                            ))
                        }
                    };
                    // The given total applies to the given floor count.
                    IndoorCoefficients {
                        distance_power_coefficient_n: n,
                        floor_loss: FloorLoss::Linear {
                            first: lf,
                            per_extra_floor: Db(0.0),
                        },
                    }
                }
                (Some(_), _, _) => {
                    return Err(CliError::arg(
                        "--indoor-environment",
                        "give either it or --coefficient-n, not both",
                    ))
                }
                (None, None, _) => {
                    return Err(CliError::arg(
                        "--indoor-environment",
                        "required by --model indoor (or give --coefficient-n)",
                    ))
                }
            };
            r.num("floors", f32::from(floors), "");
            r.num("coefficient_n", coeffs.distance_power_coefficient_n, "");
            r.num(
                "floor_loss_db",
                coeffs.floor_loss.loss(floors).map_err(opt)?.0,
                "dB",
            );
            itu_indoor(f, d, floors, &coeffs).map_err(opt)?
        }
    };
    r.num("path_loss_db", loss.0, "dB");
    r.print(a.format)
}
