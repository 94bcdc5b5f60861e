//! `headroom fade`: the fade margin an availability needs, or the
//! availability a margin gives, under one fading model.

use headroom::fading::{area_coverage, margin_for_outage, outage_for_margin, FadingModel};
use headroom::units::Db;
use serde_json::{json, Value};

use crate::error::{CliError, CliResult};
use crate::names::{self, Fading, Keys};
use crate::output::{Format, Report};
use crate::quantity;

/// Arguments of `headroom fade`.
///
/// The margin is the mean received power over the receiver threshold; the
/// availability is the probability that the received power is at or above
/// the threshold.
#[derive(clap::Args)]
#[command(group(clap::ArgGroup::new("target").required(true).args(["availability", "margin_db"])))]
pub struct Args {
    /// Fading model.
    #[arg(long, value_enum)]
    pub model: Fading,
    /// Required availability, as a fraction strictly between 0 and 1 (0.999)
    /// or as a percentage with its sign (99.9%). A bare number of 1 or more
    /// (such as 99) is refused as ambiguous. Prints the margin.
    #[arg(long)]
    pub availability: Option<String>,
    /// Fade margin in dB: prints the availability instead.
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true)]
    pub margin_db: Option<Db>,
    /// Rician K factor in dB (line-of-sight over scattered power), 6 or 6dB.
    #[arg(long = "k-factor", alias = "k-factor-db", value_parser = quantity::db, allow_hyphen_values = true)]
    pub k_factor_db: Option<Db>,
    /// Standard deviation of log-normal shadowing in dB, 4 or 4dB.
    #[arg(long = "sigma", alias = "sigma-db", value_parser = quantity::db)]
    pub sigma_db: Option<Db>,
    /// With --model lognormal and --availability (the probability at the
    /// cell edge): the path-loss exponent n, 1-10, for the fraction of the
    /// cell's area covered (Jakes, area_coverage).
    #[arg(long, value_parser = quantity::number)]
    pub exponent: Option<f32>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

/// A probability as a JSON number with seven significant digits (tiny
/// outages must not print as 0).
fn prob(x: f64) -> Value {
    format!("{x:.6e}")
        .parse::<f64>()
        .map(Value::from)
        .unwrap_or(Value::Null)
}

fn model(args: &Args) -> CliResult<FadingModel> {
    args.model
        .build(args.k_factor_db, args.sigma_db, Keys::Flags)
}

/// The engine's complaint about a model parameter, named by its flag.
fn param_error(e: headroom::Error) -> CliError {
    let flag = match e {
        headroom::Error::OutOfValidity {
            param: "k_factor", ..
        } => "--k-factor",
        headroom::Error::OutOfValidity { param: "sigma", .. }
        | headroom::Error::NotPositive("sigma") => "--sigma",
        headroom::Error::NotFinite("margin") => "--margin-db",
        headroom::Error::NoSolution(_) => "--availability",
        _ => "--model",
    };
    CliError::arg(flag, e)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::link::pointing_at_help("fade", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    let m = model(&args)?;
    let mut rep = Report::new();
    rep.value("model", json!(names::name(&args.model)));
    if let Some(k) = args.k_factor_db {
        rep.num("k_factor_db", k.0, "dB");
    }
    if let Some(s) = args.sigma_db {
        rep.num("sigma_db", s.0, "dB");
    }
    if args.exponent.is_some() && args.availability.is_none() {
        return Err(CliError::arg(
            "--exponent",
            "goes with --availability (the cell-edge probability)",
        ));
    }
    match (&args.availability, args.margin_db) {
        (Some(text), _) => {
            let outage = quantity::outage(text).map_err(|e| CliError::arg("--availability", e))?;
            let margin = margin_for_outage(m, outage as f32).map_err(param_error)?;
            rep.value("availability", prob(1.0 - outage));
            rep.value("outage", prob(outage));
            rep.num("margin_db", margin.0, "dB");
            if let Some(n) = args.exponent {
                let (Fading::Lognormal, Some(sigma)) = (args.model, args.sigma_db) else {
                    return Err(CliError::arg(
                        "--exponent",
                        "the area coverage needs --model lognormal and --sigma",
                    ));
                };
                let area = area_coverage((1.0 - outage) as f32, sigma, n).map_err(|e| match e {
                    headroom::Error::OutOfValidity {
                        param: "path_loss_exponent",
                        ..
                    } => CliError::arg("--exponent", "must be 1 to 10"),
                    other => param_error(other),
                })?;
                rep.num("path_loss_exponent", n, "");
                rep.value("area_coverage", prob(f64::from(area)));
                rep.value(
                    "area_coverage_method",
                    json!("Jakes 1974, section 2.5 (edge availability, sigma, n)"),
                );
            }
        }
        (None, Some(margin)) => {
            let outage = f64::from(outage_for_margin(m, margin).map_err(param_error)?);
            rep.num("margin_db", margin.0, "dB");
            rep.value("availability", prob(1.0 - outage));
            rep.value("outage", prob(outage));
        }
        (None, None) => {
            return Err(CliError::arg(
                "--availability",
                "give --availability or --margin-db",
            ))
        }
    }
    rep.print(args.format)
}
