//! `headroom budget LINK.toml`: evaluate a link budget.

use std::path::PathBuf;

use headroom::budget::ItemNoise;
use headroom::modulation::shannon_capacity;
use headroom::propagation::power_flux_density;
use headroom::units::{erp_from_eirp, Dbm, Hertz};
use serde_json::json;

use crate::error::{CliError, CliResult};
use crate::link::{self, LoadedLink};
use crate::output::{json_num, Format, Report};
use crate::plot;
use crate::quantity;
use crate::quantity::show;

/// Arguments of `headroom budget`.
#[derive(clap::Args)]
pub struct Args {
    /// The link file (TOML; see the README and examples/links/).
    pub link: PathBuf,
    /// Evaluate at this carrier frequency instead of the file's (e.g. 2.4GHz):
    /// the path loss is recomputed, antenna gains are kept.
    #[arg(long, value_parser = quantity::frequency)]
    pub frequency: Option<Hertz>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
    /// Also draw the level diagram to this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// Overwrite the --plot file if it exists.
    #[arg(long)]
    pub force: bool,
}

/// Whether `eirp` at transmit power `tx` keeps the link file's limits; each
/// limit exceeded is a warning.
pub fn check_limits(l: &LoadedLink, tx: Dbm, eirp: Dbm, warnings: &mut Vec<String>) -> bool {
    let mut ok = true;
    if let Some(max) = l.limits.max_power {
        if tx.0 > max.0 {
            ok = false;
            link::warn(
                warnings,
                format!(
                    "transmit power {} is above the transmitter's max_power {}",
                    show::dbm(tx.0),
                    show::dbm(max.0)
                ),
            );
        }
    }
    if let Some(cap) = l.limits.eirp_cap {
        if eirp.0 > cap.0 {
            ok = false;
            let (what, e, c) = if l.limits.cap_given_as_erp {
                ("ERP", erp_from_eirp(eirp), erp_from_eirp(cap))
            } else {
                ("EIRP", eirp, cap)
            };
            link::warn(
                warnings,
                format!(
                    "{what} {} is above the cap {}",
                    show::dbm(e.0),
                    show::dbm(c.0)
                ),
            );
        }
    }
    ok
}

/// Put the limits of a loaded link into a report.
fn limits(rep: &mut Report, l: &LoadedLink) {
    if let Some(m) = l.limits.max_power {
        rep.num("max_tx_power_dbm", m.0, "dBm");
    }
    if let Some(c) = l.limits.eirp_cap {
        rep.num("eirp_cap_dbm", c.0, "dBm");
        rep.num("erp_cap_dbm", erp_from_eirp(c).0, "dBm");
    }
}

/// Put the budget of a loaded link into a report (shared with `solve`).
pub fn report(l: &LoadedLink) -> CliResult<Report> {
    let r = l.link.evaluate()?;
    let mut warnings = l.warnings.clone();
    let mut rep = Report::new();
    rep.value("link", json!(l.name));
    rep.num("frequency_hz", l.frequency.0, "Hz");
    rep.value("frequency", json!(show::frequency(l.frequency.0)));
    if let Some(d) = l.distance {
        rep.num("distance_m", d.0, "m");
        rep.value("distance", json!(show::distance(d.0)));
    }
    rep.num("tx_power_dbm", l.link.tx_power.0, "dBm");
    rep.num("eirp_dbm", r.eirp.0, "dBm");
    rep.num("erp_dbm", erp_from_eirp(r.eirp).0, "dBm");
    limits(&mut rep, l);
    let within = check_limits(l, l.link.tx_power, r.eirp, &mut warnings);
    rep.value("within_limits", json!(within));
    if let Some(d) = l.distance {
        let (_, pfd) = power_flux_density(r.eirp.to_dbw(), d)
            .map_err(|e| CliError::arg("path.distance", e))?;
        rep.num("power_flux_density_dbw_m2", pfd.0, "dB(W/m2)");
    }
    rep.num("path_loss_db", l.link.path_loss.0, "dB");
    rep.num("rx_power_dbm", r.rx_power.0, "dBm");
    rep.num("system_temperature_k", r.system_temperature.0, "K");
    rep.value("system_temperature_referred_to", json!("receiver input"));
    rep.num(
        "system_temperature_antenna_k",
        r.system_temperature_antenna.0,
        "K",
    );
    rep.num("g_over_t_db_per_k", r.g_over_t.0, "dB/K");
    rep.num("noise_power_dbm", r.noise_power.0, "dBm");
    rep.num("cn_db", r.cn.0, "dB");
    rep.num("cn0_dbhz", r.cn0.0, "dB-Hz");
    if let Some(e) = r.ebn0 {
        rep.num("ebn0_db", e.0, "dB");
    }
    let capacity = shannon_capacity(l.link.noise.bandwidth, r.cn)?;
    rep.num("shannon_capacity_bps", capacity, "bit/s");
    rep.num("required_cn_db", r.required_cn.0, "dB");
    rep.num("sensitivity_dbm", r.sensitivity.0, "dBm");
    rep.num("fade_margin_db", r.fade_margin.0, "dB");
    rep.num("margin_db", r.margin.0, "dB");
    let items: Vec<_> = l
        .link
        .items
        .iter()
        .map(|i| {
            let mut o = json!({"name": i.name.as_str(), "side": i.side.as_str(), "gain_db": json_num(i.gain.0)});
            match i.noise {
                ItemNoise::None => {}
                ItemNoise::Passive { temperature } => {
                    o["temperature_k"] = json_num(temperature.0);
                }
                ItemNoise::Amplifier { noise_figure } => {
                    o["noise_figure_db"] = json_num(noise_figure.0);
                }
            }
            o
        })
        .collect();
    rep.value("line_items", serde_json::Value::Array(items));
    rep.value("warnings", json!(warnings));
    Ok(rep)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::link::pointing_at_help("budget", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    let l = link::load(&args.link, args.frequency)?;
    let rep = report(&l)?;
    if let Some(p) = &args.plot {
        plot::budget_plot(p, args.force, &l.name, &l.link)?;
    }
    rep.print(args.format)
}
