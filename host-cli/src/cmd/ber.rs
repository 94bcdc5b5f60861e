//! `headroom ber`: the Eb/N0 a modulation needs for a bit error rate, or
//! the bit error rate at an Eb/N0 (AWGN channel).

use headroom::modulation::{bit_error_rate, required_ebn0, Modulation};
use headroom::units::Db;
use serde_json::{json, Value};

use crate::error::{CliError, CliResult};
use crate::names::{self, Scheme};
use crate::output::{Format, Report};
use crate::quantity;

/// Arguments of `headroom ber`.
#[derive(clap::Args)]
#[command(group(clap::ArgGroup::new("target").required(true).args(["ber", "ebn0_db"])))]
pub struct Args {
    /// Modulation scheme.
    #[arg(long, value_enum)]
    pub modulation: Scheme,
    /// Constellation size M, for psk and qam only.
    #[arg(long)]
    pub order: Option<u32>,
    /// Target bit error rate, strictly between 0 and 0.5 (e.g. 1e-5): prints
    /// the required Eb/N0.
    #[arg(long, value_parser = quantity::number, allow_hyphen_values = true)]
    pub ber: Option<f32>,
    /// Eb/N0 in dB (3 or 3dB): prints the bit error rate instead.
    #[arg(long = "ebn0", alias = "ebn0-db", value_parser = quantity::db, allow_hyphen_values = true)]
    pub ebn0_db: Option<Db>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

fn modulation(scheme: Scheme, order: Option<u32>) -> CliResult<Modulation> {
    scheme.build(order, "--order")
}

/// A probability as a JSON number with seven significant digits (a BER of
/// 1.234e-7 must not print as 0).
fn prob(x: f32) -> Value {
    format!("{x:.6e}")
        .parse::<f64>()
        .map(Value::from)
        .unwrap_or(Value::Null)
}

/// The engine's error about the order, reworded for the flag.
fn order_error(e: headroom::Error, scheme: Scheme) -> CliError {
    match e {
        headroom::Error::Unsupported(_) => CliError::arg(
            "--order",
            match scheme {
                Scheme::Qam => {
                    "must be an even power of two (4, 16, 64, 256, 1024, ...) for square QAM"
                }
                _ => "must be a power of two from 2 to 65536",
            },
        ),
        other => other.into(),
    }
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::link::pointing_at_help("ber", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    let m = modulation(args.modulation, args.order)?;
    let mut rep = Report::new();
    rep.value("modulation", json!(names::name(&args.modulation)));
    if let Some(o) = args.order {
        rep.value("order", json!(o));
    }
    match (args.ber, args.ebn0_db) {
        (Some(ber), _) => {
            let e = required_ebn0(m, ber).map_err(|e| match e {
                headroom::Error::Unsupported(_) => order_error(e, args.modulation),
                headroom::Error::NoSolution(_) => CliError::arg(
                    "--ber",
                    format!("{ber} is not reachable: this scheme's bit error rate is below it even at Eb/N0 → 0"),
                ),
                other => CliError::arg("--ber", other),
            })?;
            rep.value("ber", prob(ber));
            rep.num("ebn0_db", e.0, "dB");
        }
        (None, Some(e)) => {
            let ber = bit_error_rate(m, e).map_err(|err| match err {
                headroom::Error::Unsupported(_) => order_error(err, args.modulation),
                other => CliError::arg("--ebn0", other),
            })?;
            rep.num("ebn0_db", e.0, "dB");
            rep.value("ber", prob(ber));
        }
        (None, None) => return Err(CliError::arg("--ber", "give --ber or --ebn0")),
    }
    rep.print(args.format)
}
