//! `headroom fade`: the fade margin an availability needs, or the
//! availability a margin gives, under one fading model.

use clap::ValueEnum;
use headroom::fading::{margin_for_outage, outage_for_margin, FadingModel};
use headroom::units::Db;
use serde_json::{json, Value};

use crate::error::{CliError, CliResult};
use crate::output::{Format, Report};
use crate::quantity;

/// Fading model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Model {
    /// Rayleigh (no line of sight).
    Rayleigh,
    /// Rician: needs --k-factor-db (−30 to 26 dB).
    Rician,
    /// Log-normal shadowing: needs --sigma-db (0 to 20 dB).
    Lognormal,
    /// Log-normal shadowing times Rayleigh (Suzuki): needs --sigma-db.
    Composite,
}

impl Model {
    fn name(self) -> &'static str {
        match self {
            Model::Rayleigh => "rayleigh",
            Model::Rician => "rician",
            Model::Lognormal => "lognormal",
            Model::Composite => "composite",
        }
    }
}

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
    pub model: Model,
    /// Required availability, as a fraction strictly between 0 and 1 (0.999)
    /// or as a percentage with its sign (99.9%). A bare number of 1 or more
    /// (such as 99) is refused as ambiguous. Prints the margin.
    #[arg(long)]
    pub availability: Option<String>,
    /// Fade margin in dB: prints the availability instead.
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true)]
    pub margin_db: Option<Db>,
    /// Rician K factor in dB (line-of-sight over scattered power).
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true)]
    pub k_factor_db: Option<Db>,
    /// Standard deviation of log-normal shadowing in dB.
    #[arg(long, value_parser = quantity::db)]
    pub sigma_db: Option<Db>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

/// Outage `1 − availability` from `0.999` or `99.9%`, computed from the text
/// in f64 so that 99.9999 % keeps its digits.
pub fn parse_outage(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let (num, percent) = match t.strip_suffix('%') {
        Some(n) => (n.trim(), true),
        None => (t, false),
    };
    let x: f64 = num.parse().map_err(|_| format!("'{s}' is not a number"))?;
    if !x.is_finite() {
        return Err(format!("'{s}' is not a finite number"));
    }
    let outage = if percent {
        if !(x > 0.0 && x < 100.0) {
            return Err(format!("'{s}' must be strictly between 0% and 100%"));
        }
        (100.0 - x) / 100.0
    } else {
        if x >= 1.0 {
            return Err(format!(
                "'{s}' is ambiguous: give a fraction below 1 (0.99) or a percentage with its sign (99%)"
            ));
        }
        if x <= 0.0 {
            return Err(format!("'{s}' must be strictly between 0 and 1"));
        }
        1.0 - x
    };
    let o = outage as f32;
    if o > 0.0 && o < 1.0 {
        Ok(outage)
    } else {
        Err(format!("'{s}' is too close to 0 or 1 to compute with"))
    }
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
    model_keyed(
        args.model,
        (args.k_factor_db, "--k-factor-db"),
        (args.sigma_db, "--sigma-db"),
    )
}

/// The engine's fading model for `model` and its parameters, each given with
/// the name errors use for it (`--sigma-db` here, `fade.sigma` in a link file).
pub(crate) fn model_keyed(
    model: Model,
    (k, k_key): (Option<Db>, &str),
    (s, s_key): (Option<Db>, &str),
) -> CliResult<FadingModel> {
    let name = model.name();
    let unused = |key: &str| CliError::arg(key, format!("does not apply to model {name}"));
    let needs = |key: &str| CliError::arg(key, format!("model {name} needs {key}"));
    match model {
        Model::Rayleigh => match (k, s) {
            (Some(_), _) => Err(unused(k_key)),
            (_, Some(_)) => Err(unused(s_key)),
            _ => Ok(FadingModel::Rayleigh),
        },
        Model::Rician => match (k, s) {
            (_, Some(_)) => Err(unused(s_key)),
            (None, _) => Err(needs(k_key)),
            (Some(k), None) => Ok(FadingModel::Rician { k_factor: k }),
        },
        Model::Lognormal | Model::Composite => match (k, s) {
            (Some(_), _) => Err(unused(k_key)),
            (None, None) => Err(needs(s_key)),
            (None, Some(sigma)) if model == Model::Lognormal => {
                Ok(FadingModel::LogNormal { sigma })
            }
            (None, Some(sigma)) => Ok(FadingModel::Composite { sigma }),
        },
    }
}

/// The engine's complaint about a model parameter, named by its flag.
fn param_error(e: headroom::Error) -> CliError {
    let flag = match e {
        headroom::Error::OutOfValidity {
            param: "k_factor", ..
        } => "--k-factor-db",
        headroom::Error::OutOfValidity { param: "sigma", .. }
        | headroom::Error::NotPositive("sigma") => "--sigma-db",
        headroom::Error::NotFinite("margin") => "--margin-db",
        headroom::Error::NoSolution(_) => "--availability",
        _ => "--model",
    };
    CliError::arg(flag, e)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    let m = model(&args)?;
    let mut rep = Report::new();
    rep.value("model", json!(args.model.name()));
    if let Some(k) = args.k_factor_db {
        rep.num("k_factor_db", k.0, "dB");
    }
    if let Some(s) = args.sigma_db {
        rep.num("sigma_db", s.0, "dB");
    }
    match (&args.availability, args.margin_db) {
        (Some(text), _) => {
            let outage = parse_outage(text).map_err(|e| CliError::arg("--availability", e))?;
            let margin = margin_for_outage(m, outage as f32).map_err(param_error)?;
            rep.value("availability", prob(1.0 - outage));
            rep.value("outage", prob(outage));
            rep.num("margin_db", margin.0, "dB");
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

#[cfg(test)]
mod tests {
    use super::parse_outage;

    #[test]
    fn availability_text() {
        assert!((parse_outage("0.99").unwrap_or(0.0) - 0.01).abs() < 1e-12);
        assert!((parse_outage("99.9%").unwrap_or(0.0) - 0.001).abs() < 1e-12);
        assert!((parse_outage("99.99999 %").unwrap_or(0.0) - 1e-7).abs() < 1e-15);
        assert!(parse_outage("99").is_err());
        assert!(parse_outage("1").is_err());
        assert!(parse_outage("0").is_err());
        assert!(parse_outage("100%").is_err());
        assert!(parse_outage("-5%").is_err());
        assert!(parse_outage("nan").is_err());
        assert!(parse_outage("0.9x").is_err());
    }
}
