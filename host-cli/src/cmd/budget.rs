//! `headroom budget LINK.toml`: evaluate a link budget.

use std::path::PathBuf;

use clap::ValueEnum;
use headroom::budget::{fixed_aperture_gain_change, ItemNoise, Side};
use headroom::modulation::shannon_capacity;
use headroom::propagation::power_flux_density;
use headroom::units::{erp_from_eirp, Db, Dbm, Hertz, Metres};
use serde_json::json;

use crate::error::{CliError, CliResult};
use crate::link::{self, LoadedLink};
use crate::names;
use crate::output::{json_num, Format, Report};
use crate::plot;
use crate::quantity;
use crate::quantity::show;

/// Arguments of `headroom budget`.
#[derive(clap::Args)]
pub struct Args {
    /// The link file (TOML; see the README and examples/links/).
    pub link: PathBuf,
    /// Energy profile of the radio (instead of the link file's
    /// `[energy] profile`): report airtime, duty cycle, charge per packet,
    /// mean current and battery life at the design power and at the power
    /// that leaves the `[solve]` target margin.
    #[arg(long, value_name = "PROFILE.toml")]
    pub energy: Option<PathBuf>,
    /// Time between packets with --energy (`5min`; instead of the link
    /// file's `[energy] interval`).
    #[arg(long, value_name = "DURATION", value_parser = quantity::duration)]
    pub interval: Option<headroom::units::Seconds>,
    /// Evaluate at this carrier frequency instead of the file's (e.g. 2.4GHz):
    /// the path loss is recomputed; the antennas follow --antennas.
    #[arg(long, value_parser = quantity::frequency)]
    pub frequency: Option<Hertz>,
    /// What the antennas keep when the frequency changes (--frequency,
    /// --sweep frequency): their gains (default), the transmitter's
    /// effective aperture, or both apertures (each gain then grows by
    /// 20·log10(f/f0)).
    #[arg(long, value_enum, default_value = "fixed-gains")]
    pub antennas: Antennas,
    /// Instead of one budget, a coverage curve: the margin against distance
    /// or frequency, with the range (or the frequency) at the target margin
    /// marked. With --plot, the curve is drawn.
    #[arg(long, value_enum)]
    pub sweep: Option<Sweep>,
    /// Sweep start, with its unit (default: a tenth of the file's distance,
    /// or half its frequency).
    #[arg(long, requires = "sweep")]
    pub from: Option<String>,
    /// Sweep end, with its unit (default: ten times the file's distance, or
    /// twice its frequency).
    #[arg(long, requires = "sweep")]
    pub to: Option<String>,
    /// Points of the sweep, 2-1000 (log-spaced in distance, linear in frequency).
    #[arg(long, default_value_t = 41, requires = "sweep")]
    pub points: u32,
    /// Margin the sweep marks (default: the file's [solve] target_margin, else 0 dB).
    #[arg(long, value_parser = quantity::db, allow_hyphen_values = true)]
    pub target_margin: Option<Db>,
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

/// What the sweep varies.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Sweep {
    /// Margin and the transmit power for the target margin against distance.
    Distance,
    /// Margin and the range at the target margin against frequency.
    Frequency,
}

/// What the antennas hold when the frequency changes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Antennas {
    /// Both antennas keep their gains.
    FixedGains,
    /// The transmitting antenna keeps its effective aperture.
    OneFixedAperture,
    /// Both antennas keep their effective apertures.
    FixedApertures,
}

/// Load the link at frequency `f` (the file's when `None`), with the
/// antennas scaled as `antennas` says: a fixed aperture's gain change is a
/// line item of its own.
pub fn load_at(
    path: &std::path::Path,
    f: Option<Hertz>,
    antennas: Antennas,
) -> CliResult<LoadedLink> {
    let mut l = link::load(path, f)?;
    let (Some(f), true) = (f, antennas != Antennas::FixedGains) else {
        return Ok(l);
    };
    let f0 = link::load(path, None)?.frequency;
    let g = fixed_aperture_gain_change(f0, f)?;
    let at = |e| CliError::arg("--antennas", e);
    l.link
        .push("tx aperture held fixed", Side::Transmitter, g)
        .map_err(at)?;
    if antennas == Antennas::FixedApertures {
        // The receiving antenna's change, beside the path: it scales the
        // signal, not the receive chain's noise.
        l.link
            .push("rx aperture held fixed", Side::Path, g)
            .map_err(at)?;
    }
    l.evaluated = l
        .link
        .evaluate()
        .map_err(|e| CliError::arg("--antennas", e))?;
    Ok(l)
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
    let r = l.evaluated;
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
    crate::atomic::note_input(&args.link);
    crate::link::pointing_at_help("budget", run_inner(args))
}

fn run_inner(args: Args) -> CliResult {
    if let Some(p) = &args.plot {
        plot::check_destination(p, args.force)?;
    }
    if let Some(sweep) = args.sweep {
        return coverage(&args, sweep);
    }
    let l = load_at(&args.link, args.frequency, args.antennas)?;
    let mut rep = report(&l)?;
    let energy = match (&args.energy, &l.energy, args.interval) {
        (Some(p), _, Some(i)) => Some((p.clone(), i)),
        (Some(p), Some((_, i)), None) => Some((p.clone(), *i)),
        (Some(_), None, None) => {
            return Err(CliError::arg(
                "--interval",
                "--energy needs a packet interval: --interval 5min, or [energy] interval in the link file",
            ))
        }
        (None, Some((p, i)), over) => Some((p.clone(), over.unwrap_or(*i))),
        (None, None, Some(_)) => {
            return Err(CliError::arg("--interval", "needs --energy (or [energy] in the link file)"))
        }
        (None, None, None) => None,
    };
    if let Some((profile, interval)) = energy {
        rep.value("energy", energy_report(&l, &profile, interval)?);
    }
    if let Some(p) = &args.plot {
        plot::budget_plot(p, args.force, &l.name, &l.link, &l.evaluated)?;
    }
    rep.print(args.format)
}

/// Most points of a sweep.
const MAX_POINTS: u32 = 1000;

/// `n` points from `a` to `b`, log-spaced or linear.
fn spaced(a: f32, b: f32, n: u32, log: bool) -> Vec<f32> {
    let (a, b) = (f64::from(a), f64::from(b));
    (0..n)
        .map(|k| {
            let t = f64::from(k) / f64::from(n - 1);
            let x = if log {
                (a.ln() + t * (b.ln() - a.ln())).exp()
            } else {
                a + t * (b - a)
            };
            x as f32
        })
        .collect()
}

/// The coverage curve of `--sweep`.
fn coverage(args: &Args, sweep: Sweep) -> CliResult {
    if !(2..=MAX_POINTS).contains(&args.points) {
        return Err(CliError::arg(
            "--points",
            format!("must be 2 to {MAX_POINTS}"),
        ));
    }
    let base = load_at(&args.link, args.frequency, args.antennas)?;
    let target = args.target_margin.unwrap_or(base.target_margin);
    let mut warnings = base.warnings.clone();
    let bound = |flag: &str,
                 text: &Option<String>,
                 default: f32,
                 parse: fn(&str) -> Result<f32, String>| {
        text.as_deref()
            .map_or(Ok(default), parse)
            .map_err(|e| CliError::arg(flag, e))
    };
    let mut rep = Report::new();
    rep.value("link", json!(base.name));
    rep.value(
        "sweep",
        json!(match sweep {
            Sweep::Distance => "distance",
            Sweep::Frequency => "frequency",
        }),
    );
    rep.num("target_margin_db", target.0, "dB");
    let mut rows = Vec::new();
    let mut skipped = 0usize;
    let (xs, margins, marker, x_label, log_x);
    match sweep {
        Sweep::Distance => {
            let model = base.model.as_ref().ok_or_else(|| {
                CliError::arg(
                    "--sweep",
                    "a 'fixed' path has no distance dependence: give a path model",
                )
            })?;
            let d0 = base.distance.map_or(1000.0, |d| d.0);
            let a = bound("--from", &args.from, d0 / 10.0, |s| {
                quantity::distance(s).map(|d| d.0)
            })?;
            let b = bound("--to", &args.to, d0 * 10.0, |s| {
                quantity::distance(s).map(|d| d.0)
            })?;
            if !(a > 0.0 && b > a) {
                return Err(CliError::arg(
                    "--to",
                    "must be above --from, both above zero",
                ));
            }
            rep.num("frequency_hz", base.frequency.0, "Hz");
            let mut x = Vec::new();
            let mut m = Vec::new();
            for d in spaced(a, b, args.points, true) {
                let Ok(pl) = model.path_loss(base.frequency, Metres(d)) else {
                    skipped += 1;
                    continue;
                };
                let mut l = base.link.clone();
                l.path_loss = pl;
                let r = l.evaluate()?;
                let tx = l.tx_power_for_margin(target)?;
                rows.push(json!({
                    "distance_m": json_num(d),
                    "distance": show::distance(d),
                    "path_loss_db": json_num(pl.0),
                    "margin_db": json_num(r.margin.0),
                    "tx_power_for_target_dbm": json_num(tx.0),
                }));
                x.push(f64::from(d));
                m.push(f64::from(r.margin.0));
            }
            marker = match base.link.max_range(model, base.frequency, target) {
                Ok(r) => {
                    rep.num("range_at_target_m", r.0, "m");
                    rep.value("range_at_target", json!(show::distance(r.0)));
                    Some((f64::from(r.0), format!(" range {}", show::distance(r.0))))
                }
                Err(e) => {
                    link::warn(
                        &mut warnings,
                        format!(
                            "no range at the target margin: {}",
                            names::engine_error(&e, &link::key_of)
                        ),
                    );
                    None
                }
            };
            (xs, margins, x_label, log_x) = (x, m, "distance (m)".to_string(), true);
        }
        Sweep::Frequency => {
            let f0 = base.frequency.0;
            let a = bound("--from", &args.from, f0 / 2.0, |s| {
                quantity::frequency(s).map(|f| f.0)
            })?;
            let b = bound("--to", &args.to, f0 * 2.0, |s| {
                quantity::frequency(s).map(|f| f.0)
            })?;
            if !(a > 0.0 && b > a) {
                return Err(CliError::arg(
                    "--to",
                    "must be above --from, both above zero",
                ));
            }
            let mut x = Vec::new();
            let mut m = Vec::new();
            let mut crossing = None;
            for f in spaced(a, b, args.points, false) {
                // A frequency the path model refuses is left out of the curve.
                let Ok(l) = load_at(&args.link, Some(Hertz(f)), args.antennas) else {
                    skipped += 1;
                    continue;
                };
                let r = l.link.evaluate()?;
                let mut row = json!({
                    "frequency_hz": json_num(f),
                    "frequency": show::frequency(f),
                    "path_loss_db": json_num(l.link.path_loss.0),
                    "margin_db": json_num(r.margin.0),
                });
                if let Some(model) = &l.model {
                    if let Ok(range) = l.link.max_range(model, l.frequency, target) {
                        row["range_at_target_m"] = json_num(range.0);
                    }
                }
                if let (Some(&pm), Some(&px)) = (m.last(), x.last()) {
                    let (pm, mm): (f64, f64) = (pm, f64::from(r.margin.0));
                    if crossing.is_none()
                        && (pm - f64::from(target.0)) * (mm - f64::from(target.0)) <= 0.0
                        && pm != mm
                    {
                        let t = (f64::from(target.0) - pm) / (mm - pm);
                        crossing = Some(px + t * (f64::from(f) / 1e6 - px));
                    }
                }
                rows.push(row);
                x.push(f64::from(f) / 1e6);
                m.push(f64::from(r.margin.0));
            }
            marker = crossing.map(|c| {
                rep.num("frequency_at_target_hz", (c * 1e6) as f32, "Hz");
                (
                    c,
                    format!(" {} at the target", show::frequency((c * 1e6) as f32)),
                )
            });
            (xs, margins, x_label, log_x) = (x, m, "frequency (MHz)".to_string(), false);
        }
    }
    if skipped > 0 {
        link::warn(
            &mut warnings,
            format!("{skipped} of {} points lie outside the path model's validity range and are left out", args.points),
        );
    }
    if rows.is_empty() {
        return Err(CliError::arg(
            "--sweep",
            "no point of the sweep lies inside the path model's validity range",
        ));
    }
    rep.value("points", serde_json::Value::Array(rows));
    rep.value("warnings", json!(warnings));
    if let Some(p) = &args.plot {
        let curve = plot::CoverageCurve {
            title: format!(
                "{}: margin against {}",
                base.name,
                x_label.split(' ').next().unwrap_or("")
            ),
            x_label,
            x: xs,
            margin_db: margins,
            target_db: f64::from(target.0),
            marker,
            log_x,
        };
        plot::coverage_plot(p, args.force, &curve)?;
    }
    rep.print(args.format)
}

/// What a packet costs the battery at the design power and at the power that
/// leaves the `[solve]` target margin: airtime, duty cycle, charge per packet,
/// mean current, battery life (the engine's energy functions).
fn energy_report(
    l: &LoadedLink,
    profile: &std::path::Path,
    interval: headroom::units::Seconds,
) -> CliResult<serde_json::Value> {
    let loaded = crate::energy::load(profile)?;
    let p = &loaded.profile;
    let refuse = |e: headroom::Error| crate::energy::refusal(&e, "--energy", "--interval", &[]);
    let duty = headroom::energy::duty::duty_cycle(p.airtime(), interval).map_err(refuse)?;
    let at = |tx: Dbm| -> CliResult<serde_json::Value> {
        let q = p.charge_per_packet(tx).map_err(refuse)?;
        let i = p.mean_current(tx, interval).map_err(refuse)?;
        let life = p.battery_life(i).ok().map(|d| d.0);
        Ok(json!({
            "tx_dbm": json_num(tx.0),
            "charge_per_packet_uc": json_num(q.0),
            "mean_current_ua": json_num(i.0),
            "battery_life_days": life.map_or(serde_json::Value::Null, json_num),
        }))
    };
    // The power that just leaves the target margin; below the profile's
    // table (a radio's lowest setting) the radio sends at its lowest power.
    let solved = l.link.tx_power_for_margin(l.target_margin)?;
    let (solved, note) = match p.tx_current().range() {
        Some((lo, _)) if solved.0 < lo.0 => (
            lo,
            format!(
                "{:.2} dBm leaves the target margin; below the profile's lowest power, so at {:.2} dBm",
                solved.0, lo.0
            ),
        ),
        _ => (solved, String::new()),
    };
    let mut at_solved = at(solved)?;
    if !note.is_empty() {
        at_solved["note"] = json!(note);
    }
    Ok(json!({
        "profile": profile.display().to_string(),
        "interval_s": json_num(interval.0),
        "airtime_ms": json_num(p.airtime().0),
        "duty_cycle_percent": json_num(100.0 * duty),
        "at_design_power": at(l.link.tx_power)?,
        "target_margin_db": json_num(l.target_margin.0),
        "at_solved_power": at_solved,
    }))
}
