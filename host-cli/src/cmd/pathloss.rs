//! `headroom pathloss`: the loss of one propagation model at one frequency
//! and distance. Models, environments and parameters are named by
//! [`crate::names`], as in link and scenario files.

use headroom::propagation::{two_ray_crossover, PathLossModel, TwoRayForm};
use headroom::units::{Db, Hertz, Metres};
use serde_json::Value;

use crate::error::{CliError, CliResult};
use crate::link::range as link_range;
use crate::names::{self, Environment, Extrapolate, Form, Keys, Model, PathParams};
use crate::output::{Format, Report};
use crate::quantity::{self, show};

/// Arguments of `headroom pathloss`.
///
/// Frequencies take Hz, kHz, MHz or GHz (`868MHz`); distances and heights take
/// mm, cm, m or km (`3km`), and must carry their unit; losses are in dB.
#[derive(clap::Args, Debug)]
#[command(after_help = concat!("Units: frequencies in Hz, kHz, MHz or GHz (868MHz); distances and heights in \
mm, cm, m or km (3km); a bare number is refused for them. Losses in dB. The result is path_loss_db, the \
basic transmission loss between isotropic antennas (median loss for Hata and COST 231). Inputs \
outside a model's validity range are refused; for Hata and COST 231 --extrapolate \
names an extension of the frequency or distance range instead (never of the heights). \
The same names and parameters are used in link files ([path]) and scenario files (path_loss). \
See 'headroom pathloss --help'.", "\n\n", caution!()))]
pub struct Args {
    /// Propagation model.
    #[arg(long, value_enum)]
    model: Model,
    /// Carrier frequency, e.g. 868MHz or 2.4GHz (unit required).
    #[arg(long, value_parser = quantity::frequency)]
    frequency: Hertz,
    /// Distance between the antennas, e.g. 3km or 250m (unit required).
    /// Horizontal distance for two-ray.
    #[arg(long, value_parser = quantity::distance)]
    distance: Metres,
    /// Transmitter antenna height above ground, e.g. 30m. Hata and COST 231:
    /// the BASE station's height (30-200 m), whichever end transmits.
    #[arg(long, value_parser = quantity::distance)]
    tx_height: Option<Metres>,
    /// Receiver antenna height above ground, e.g. 1.5m. Hata and COST 231:
    /// the MOBILE's height (1-10 m).
    #[arg(long, value_parser = quantity::distance)]
    rx_height: Option<Metres>,
    /// Environment: hata open, suburban, medium-city, large-city; cost231
    /// medium-city (default), metropolitan; indoor residential, office,
    /// commercial (ITU-R P.1238-7 table coefficients, tabulated near 0.9,
    /// 1.25, 1.9, 4, 5.2 and 60 GHz; elsewhere give --coefficient-n).
    #[arg(long, value_enum, alias = "indoor-environment")]
    environment: Option<Environment>,
    /// Old spelling of --environment metropolitan (accepted with a warning).
    #[arg(long, hide = true)]
    metropolitan: bool,
    /// Log-distance path-loss exponent n, 1.5-6 (plain number, e.g. 2.7).
    #[arg(long, value_parser = quantity::number, allow_negative_numbers = true)]
    exponent: Option<f32>,
    /// Log-distance reference distance d0 (default 1 m).
    #[arg(long, value_parser = quantity::distance)]
    reference_distance: Option<Metres>,
    /// Log-distance loss at d0 in dB (default: free space at d0).
    #[arg(long, alias = "reference-loss-db", value_parser = quantity::db, allow_negative_numbers = true)]
    reference_loss: Option<Db>,
    /// Two-ray formula (default exact).
    #[arg(long, value_enum, alias = "two-ray-form")]
    form: Option<Form>,
    /// Two-ray ground reflection coefficient, -1..1 (default -1).
    #[arg(long, value_parser = quantity::number, allow_negative_numbers = true)]
    reflection: Option<f32>,
    /// Indoor: floors between the terminals (default 0).
    #[arg(long)]
    floors: Option<u8>,
    /// Indoor: your own distance power loss coefficient N (instead of
    /// --environment).
    #[arg(long, value_parser = quantity::number)]
    coefficient_n: Option<f32>,
    /// Indoor, with --coefficient-n: loss through the first floor, dB.
    #[arg(long, alias = "floor-loss-db", value_parser = quantity::db)]
    floor_loss: Option<Db>,
    /// Indoor, with --coefficient-n: loss of each further floor, dB (default 0).
    #[arg(long, value_parser = quantity::db)]
    floor_loss_per_extra_floor: Option<Db>,
    /// Hata/COST 231: apply the formula beyond its published frequency or
    /// distance range (default none).
    #[arg(long, value_enum)]
    extrapolate: Option<Extrapolate>,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

fn flag(setting: &str) -> String {
    Keys::Flags.key(setting)
}

/// The engine's error, naming the flag, with a hint where one can help:
/// --extrapolate for a Hata frequency or distance, the base/mobile meaning
/// of Hata's heights.
fn opt(e: headroom::Error, model: Model) -> CliError {
    let hata = matches!(model, Model::Hata | Model::Cost231);
    let hint = match e {
        headroom::Error::OutOfValidity { param, .. } if hata => match param {
            "frequency_hz" | "distance_m" => {
                " (see --extrapolate to apply the formula beyond its published range)"
            }
            "tx_height_m" | "rx_height_m" => {
                " (Hata's heights are the base station's, 30-200 m, as --tx-height and the \
                 mobile's, 1-10 m, as --rx-height, whichever end transmits)"
            }
            _ => "",
        },
        _ => "",
    };
    match names::engine_error(&e, &flag) {
        CliError::Input(m) => CliError::Input(format!("{m}{hint}")),
        other => other,
    }
}

/// Run the command.
pub fn run(a: Args) -> CliResult {
    crate::link::pointing_at_help("pathloss", run_inner(a))
}

fn run_inner(a: Args) -> CliResult {
    // Plausible ranges (as for link files) catch a slip of a thousand; a
    // value that is not positive is left to the engine to name.
    for (flag, x, range, shown) in [
        (
            "--frequency",
            a.frequency.0,
            link_range::FREQUENCY_HZ,
            show::frequency as fn(f32) -> String,
        ),
        (
            "--distance",
            a.distance.0,
            link_range::DISTANCE_M,
            show::distance,
        ),
    ] {
        if x > 0.0 {
            quantity::check_range(x, range.0, range.1, &shown)
                .map_err(|e| CliError::arg(flag, e))?;
        }
    }
    let mut warnings = Vec::new();
    let mut p = PathParams::new(a.model);
    p.exponent = a.exponent;
    p.reference_distance = a.reference_distance;
    p.reference_loss = a.reference_loss;
    p.tx_height = a.tx_height;
    p.rx_height = a.rx_height;
    p.form = a.form;
    p.reflection = a.reflection;
    p.environment = a.environment;
    if a.metropolitan {
        if a.environment.is_some() {
            return Err(CliError::arg(
                "--metropolitan",
                "old spelling of --environment metropolitan: give one",
            ));
        }
        crate::link::warn(
            &mut warnings,
            "--metropolitan is the old spelling of --environment metropolitan; it will be refused in a later release".into(),
        );
        p.environment = Some(Environment::Metropolitan);
    }
    p.extrapolate = a.extrapolate;
    p.floors = a.floors;
    p.coefficient_n = a.coefficient_n;
    p.floor_loss = a.floor_loss;
    p.floor_loss_per_extra_floor = a.floor_loss_per_extra_floor;
    let model = p.build(a.frequency, Keys::Flags)?;
    let (f, d) = (a.frequency, a.distance);
    let loss = model.path_loss(f, d).map_err(|e| opt(e, a.model))?;
    if let Some(w) = model.degraded(f, d) {
        crate::link::warn(&mut warnings, w.to_string());
    }

    let mut r = Report::new();
    r.value("model", Value::String(names::name(&a.model)));
    r.num("frequency_hz", f.0, "Hz");
    r.num("distance_m", d.0, "m");
    match model {
        PathLossModel::FreeSpace => {}
        PathLossModel::LogDistance {
            d0,
            pl_d0,
            exponent,
        } => {
            r.num("exponent", exponent, "");
            r.num("reference_distance_m", d0.0, "m");
            if let Some(l0) = pl_d0 {
                r.num("reference_loss_db", l0.0, "dB");
            }
        }
        PathLossModel::TwoRay { ht, hr, form } => {
            r.num("tx_height_m", ht.0, "m");
            r.num("rx_height_m", hr.0, "m");
            match form {
                TwoRayForm::Exact { reflection } => {
                    r.value("form", Value::String("exact".into()));
                    r.num("reflection", reflection, "");
                }
                TwoRayForm::Asymptotic => {
                    r.value("form", Value::String("asymptotic".into()));
                }
            }
            r.num("crossover_distance_m", two_ray_crossover(f, ht, hr)?.0, "m");
        }
        PathLossModel::Hata { ht, hr, .. } | PathLossModel::Cost231 { ht, hr, .. } => {
            r.num("tx_height_m", ht.0, "m");
            r.num("rx_height_m", hr.0, "m");
            let env = p.environment.unwrap_or(Environment::MediumCity);
            r.value("environment", Value::String(names::name(&env)));
            r.value(
                "extrapolate",
                Value::String(names::name(&a.extrapolate.unwrap_or(Extrapolate::None))),
            );
        }
        PathLossModel::Indoor { floors, coeffs } => {
            if let Some(e) = p.environment {
                r.value("environment", Value::String(names::name(&e)));
            }
            r.num("floors", f32::from(floors), "");
            r.num("coefficient_n", coeffs.distance_power_coefficient_n, "");
            r.num(
                "floor_loss_db",
                coeffs
                    .floor_loss
                    .loss(floors)
                    .map_err(|e| opt(e, a.model))?
                    .0,
                "dB",
            );
        }
    }
    r.num("path_loss_db", loss.0, "dB");
    if !warnings.is_empty() {
        r.value("warnings", Value::from(warnings));
    }
    r.print(a.format)
}
