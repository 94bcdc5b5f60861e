//! `headroom solve LINK.toml --for tx-power|path-loss|range`: the inverse problems.

use std::path::PathBuf;

use clap::ValueEnum;
use headroom::units::{erp_from_eirp, Db, Dbm, Hertz};
use serde_json::json;

use crate::error::{CliError, CliResult};
use crate::link;
use crate::output::{Format, Report};
use crate::quantity::{self, show};

/// What to solve for.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Unknown {
    /// Transmit power that leaves the target margin (or gives --rx-power).
    TxPower,
    /// Largest path loss that leaves the target margin (max_path_loss_db).
    PathLoss,
    /// Largest distance, under the link's path model, that leaves the target margin.
    Range,
}

/// Arguments of `headroom solve`.
#[derive(clap::Args)]
pub struct Args {
    /// The link file (TOML).
    pub link: PathBuf,
    /// The unknown.
    #[arg(long = "for", value_enum)]
    pub unknown: Unknown,
    /// Margin to leave over requirement and fade allowance (default: the
    /// file's [solve] target_margin, else 0 dB).
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true)]
    pub target_margin: Option<Db>,
    /// With --for tx-power: solve for this received power instead of a margin.
    #[arg(long, value_parser = quantity::power_with_unit, allow_hyphen_values = true, conflicts_with = "target_margin")]
    pub rx_power: Option<Dbm>,
    /// Solve at this carrier frequency instead of the file's: shows how the
    /// answer scales with frequency (antenna gains held fixed).
    #[arg(long, value_parser = quantity::frequency)]
    pub frequency: Option<Hertz>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::link::pointing_at_help("solve", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    let l = link::load(&args.link, args.frequency)?;
    let target = args.target_margin.unwrap_or(l.target_margin);
    let mut rep = Report::new();
    rep.value("link", json!(l.name));
    rep.num("frequency_hz", l.frequency.0, "Hz");
    match args.unknown {
        Unknown::TxPower => {
            let tx = match args.rx_power {
                Some(p) => {
                    rep.num("target_rx_power_dbm", p.0, "dBm");
                    l.link.tx_power_for_rx_power(p)?
                }
                None => {
                    rep.num("target_margin_db", target.0, "dB");
                    l.link.tx_power_for_margin(target)?
                }
            };
            rep.num("tx_power_dbm", tx.0, "dBm");
            let eirp = l.link.eirp_at(tx);
            rep.num("eirp_dbm", eirp.0, "dBm");
            rep.num("erp_dbm", erp_from_eirp(eirp).0, "dBm");
            let mut warnings = l.warnings.clone();
            let within = crate::cmd::budget::check_limits(&l, tx, eirp, &mut warnings);
            if let Some(m) = l.limits.max_power {
                rep.num("max_tx_power_dbm", m.0, "dBm");
            }
            if let Some(c) = l.limits.eirp_cap {
                rep.num("eirp_cap_dbm", c.0, "dBm");
            }
            rep.value("within_limits", json!(within));
            rep.value("warnings", json!(warnings));
            return rep.print(args.format);
        }
        Unknown::PathLoss => {
            rep.num("target_margin_db", target.0, "dB");
            rep.num("max_path_loss_db", l.link.max_path_loss(target)?.0, "dB");
        }
        Unknown::Range => {
            let model = l.model.as_ref().ok_or_else(|| {
                CliError::arg(
                    "path.model",
                    "'fixed' has no distance dependence: give a model to solve for range",
                )
            })?;
            rep.num("target_margin_db", target.0, "dB");
            rep.num("max_path_loss_db", l.link.max_path_loss(target)?.0, "dB");
            let d = l
                .link
                .max_range(model, l.frequency, target)
                .map_err(|e| crate::names::engine_error(&e, &link::key_of))?;
            rep.num("range_m", d.0, "m");
            rep.value("range", json!(show::distance(d.0)));
        }
    }
    rep.value("warnings", json!(l.warnings));
    rep.print(args.format)
}
