//! `headroom budget LINK.toml`: evaluate a link budget.

use std::path::PathBuf;

use headroom::units::Hertz;
use serde_json::json;

use crate::error::CliResult;
use crate::link::{self, LoadedLink};
use crate::output::{json_num, Format, Report};
use crate::plot;
use crate::quantity;

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

/// Put the budget of a loaded link into a report (shared with `solve`).
pub fn report(l: &LoadedLink) -> CliResult<Report> {
    let r = l.link.evaluate()?;
    let mut rep = Report::new();
    rep.value("link", json!(l.name));
    rep.num("frequency_hz", l.frequency.0, "Hz");
    if let Some(d) = l.distance {
        rep.num("distance_m", d.0, "m");
    }
    rep.num("tx_power_dbm", l.link.tx_power.0, "dBm");
    rep.num("eirp_dbm", r.eirp.0, "dBm");
    rep.num("path_loss_db", l.link.path_loss.0, "dB");
    rep.num("rx_power_dbm", r.rx_power.0, "dBm");
    rep.num("system_temperature_k", r.system_temperature.0, "K");
    rep.num("noise_power_dbm", r.noise_power.0, "dBm");
    rep.num("cn_db", r.cn.0, "dB");
    rep.num("cn0_dbhz", r.cn0.0, "dB-Hz");
    if let Some(e) = r.ebn0 {
        rep.num("ebn0_db", e.0, "dB");
    }
    rep.num("required_cn_db", r.required_cn.0, "dB");
    rep.num("sensitivity_dbm", r.sensitivity.0, "dBm");
    rep.num("fade_margin_db", r.fade_margin.0, "dB");
    rep.num("margin_db", r.margin.0, "dB");
    let items: Vec<_> = l
        .link
        .items
        .iter()
        .map(|i| json!({"name": i.name.as_str(), "side": i.side.as_str(), "gain_db": json_num(i.gain.0)}))
        .collect();
    rep.value("line_items", serde_json::Value::Array(items));
    Ok(rep)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    crate::atomic::note_input(&args.link);
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
