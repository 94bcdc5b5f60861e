//! `headroom noise`: thermal noise power and noise temperature of a receiver.

use headroom::noise::{
    noise_figure_from_temperature, noise_power, noise_temperature_from_figure, thermal_noise, T0_K,
};
use headroom::units::{Db, Hertz, Kelvin};

use crate::error::{CliError, CliResult};
use crate::output::{Format, Report};
use crate::quantity;

/// Arguments of `headroom noise`.
///
/// Prints the noise floor k·T0·B (T0 = 290 K), the receiver's noise figure
/// and equivalent input noise temperature Te = T0·(F − 1), and the noise
/// power referred to the receiver input, k·T0·B·F. Give the receiver either
/// by its noise figure or by its noise temperature; with neither, an ideal
/// (noiseless) receiver is assumed.
#[derive(clap::Args)]
pub struct Args {
    /// Noise bandwidth with its unit (e.g. 125kHz, 2MHz).
    #[arg(long, value_parser = quantity::frequency)]
    pub bandwidth: Hertz,
    /// Receiver noise figure in dB (e.g. 6 or 6dB).
    #[arg(long, value_parser = quantity::db, conflicts_with = "temperature_k", allow_hyphen_values = true)]
    pub noise_figure_db: Option<Db>,
    /// Receiver equivalent input noise temperature Te in K (e.g. 75 or 75K).
    #[arg(long, value_parser = quantity::temperature, allow_hyphen_values = true)]
    pub temperature_k: Option<Kelvin>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::link::pointing_at_help("noise", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    let (nf, te) = match (args.noise_figure_db, args.temperature_k) {
        (Some(nf), _) => {
            let te = noise_temperature_from_figure(nf)
                .map_err(|e| CliError::arg("--noise-figure-db", e))?;
            (nf, te)
        }
        (None, Some(t)) => {
            let nf = noise_figure_from_temperature(t)
                .map_err(|e| CliError::arg("--temperature-k", e))?;
            (nf, t)
        }
        (None, None) => (Db(0.0), Kelvin(0.0)),
    };
    let floor =
        thermal_noise(args.bandwidth, Kelvin(T0_K)).map_err(|e| CliError::arg("--bandwidth", e))?;
    let power =
        noise_power(args.bandwidth, nf).map_err(|e| CliError::arg("--noise-figure-db", e))?;
    let mut rep = Report::new();
    rep.num("bandwidth_hz", args.bandwidth.0, "Hz");
    rep.num("thermal_noise_dbm", floor.0, "dBm");
    rep.num("noise_figure_db", nf.0, "dB");
    rep.num("noise_temperature_k", te.0, "K");
    rep.num("noise_power_dbm", power.0, "dBm");
    rep.print(args.format)
}
