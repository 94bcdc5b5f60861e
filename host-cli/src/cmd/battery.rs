//! `headroom battery`: what a radio's packets cost its battery, from an
//! energy profile, a packet interval and one or more transmit powers.

use std::path::PathBuf;

use headroom::energy::duty::{airtime_per_hour, duty_cycle, en_300_220_sub_bands, min_interval};
use headroom::energy::Delivery;
use headroom::units::{Dbm, Hertz, Milliseconds, Seconds};
use serde_json::{json, Map, Value};

use crate::energy;
use crate::error::{CliError, CliResult};
use crate::output::{json_num, Format, Report};
use crate::quantity;

/// Arguments of `headroom battery`.
///
/// For each transmit power: the supply current (interpolated in the
/// profile's table; a power outside the table is refused), the charge per
/// packet `I_tx·airtime + I_rx·rx_window + per_packet`, the mean current
/// `charge / interval + sleep`, and the battery life
/// `battery_mah · 1000 / mean current / 24` days (with the profile's
/// refinements when it sets them). With `--loss`, the charge per delivered
/// packet and the expected resends: a reading is sent up to
/// `max_retries + 1` times; expected attempts `(1 − p^(R+1)) / (1 − p)`,
/// delivered fraction `1 − p^(R+1)`; a resend repeats the transmission and
/// the receive window, not the per-packet charge.
#[derive(clap::Args)]
pub struct Args {
    /// The energy profile (TOML; see examples/energy/).
    pub profile: PathBuf,
    /// Packet interval, with its unit (250ms, 30s, 15min, 1h, 2d).
    #[arg(long, value_parser = quantity::duration)]
    pub interval: Seconds,
    /// Transmit power(s): 14dBm, or a list 2dBm,8dBm,14dBm.
    #[arg(long, required = true, value_delimiter = ',', value_parser = quantity::power)]
    pub tx: Vec<Dbm>,
    /// Carrier frequency (868.1MHz): shows the EN 300 220 sub-band that holds
    /// the channel and its duty-cycle limit.
    #[arg(long, value_parser = quantity::frequency)]
    pub frequency: Option<Hertz>,
    /// Channel bandwidth for the sub-band check (default: the chirp modem's
    /// bandwidth from the profile, else the centre frequency alone).
    #[arg(long, value_parser = quantity::frequency)]
    pub bandwidth: Option<Hertz>,
    /// Loss probability per attempt: a fraction below 1 (0.05) or a
    /// percentage with its sign (5%). Adds the charge per delivered packet.
    #[arg(long, value_parser = loss)]
    pub loss: Option<f32>,
    /// Resends per reading (default: the profile's max_retries, else 0).
    #[arg(long)]
    pub max_retries: Option<u8>,
    /// Output format.
    #[arg(long, value_enum, default_value_t)]
    pub format: Format,
}

/// A loss probability: `0.05` or `5%`; a bare number of 1 or more is
/// refused as ambiguous.
fn loss(s: &str) -> Result<f32, String> {
    let t = s.trim();
    let p = if t.ends_with('%') {
        quantity::percent(t)? / 100.0
    } else {
        let x = quantity::number(t)?;
        if x >= 1.0 {
            return Err(format!(
                "'{s}' is ambiguous: give a fraction below 1 (0.05) or a percentage with its sign (5%)"
            ));
        }
        x
    };
    if (0.0..1.0).contains(&p) {
        Ok(p)
    } else {
        Err(format!("'{s}' must be at least 0 and below 1 (100%)"))
    }
}

/// Engine parameters named as this command's options.
const OPTIONS: &[(&str, &str)] = &[
    ("interval_s", "--interval"),
    ("tx_dbm", "--tx"),
    ("loss_fraction", "--loss"),
];

fn refused(err: headroom::Error) -> CliError {
    energy::refusal(&err, "--tx", "--interval", OPTIONS)
}

/// Run the command.
pub fn run(args: Args) -> CliResult {
    let loaded = energy::load(&args.profile)?;
    let prof = &loaded.profile;
    let interval = args.interval;
    let (retries, retries_source) = match (args.max_retries, loaded.max_retries) {
        (Some(r), _) => (r, "--max-retries"),
        (None, Some(r)) => (r, "profile"),
        (None, None) => (0, "default (no resend)"),
    };

    let mut rep = Report::new();
    rep.value("profile", json!(args.profile.display().to_string()));
    if let Some(d) = &loaded.description {
        rep.value("description", json!(d));
    }
    rep.num("interval_s", interval.0, "s");
    rep.num("airtime_ms", prof.airtime().0, "ms");
    rep.value("airtime_source", json!(loaded.airtime_source.describe()));
    let duty = duty_cycle(prof.airtime(), interval).map_err(refused)?;
    rep.num("duty_cycle_percent", duty * 100.0, "%");
    let per_hour = airtime_per_hour(prof.airtime(), interval).map_err(refused)?;
    rep.num("airtime_per_hour_ms", per_hour.0, "ms");
    if let Some(f) = args.frequency {
        let (bw, bw_source) = match (args.bandwidth, loaded.airtime_source.bandwidth()) {
            (Some(b), _) => (b, "--bandwidth"),
            (None, Some(b)) => (b, "profile modem"),
            (None, None) => (Hertz(0.0), "not given: centre frequency only"),
        };
        rep.num("channel_bandwidth_hz", bw.0, "Hz");
        rep.value("channel_bandwidth_source", json!(bw_source));
        let bands: Vec<Value> = en_300_220_sub_bands(f, bw)
            .map(|b| {
                let fits = duty <= b.duty_limit;
                let mut m = Map::new();
                m.insert(
                    "band_mhz".into(),
                    json!(format!("{}-{}", b.low.0 / 1e6, b.high.0 / 1e6)),
                );
                m.insert("duty_limit_percent".into(), json_num(b.duty_limit * 100.0));
                m.insert("max_erp_mw".into(), json_num(b.max_erp.0));
                m.insert(
                    "min_interval_s".into(),
                    min_interval(prof.airtime(), b.duty_limit)
                        .map(|t| json_num(t.0))
                        .unwrap_or(Value::Null),
                );
                m.insert("within_duty_limit".into(), json!(fits));
                Value::Object(m)
            })
            .collect();
        let note = if bands.is_empty() {
            "no sub-band holds this channel (outside the table, or straddling an edge); \
             the table is from memory: check the current standard and national rules"
        } else {
            "sub-band table from memory: check the current standard and national rules"
        };
        rep.value("en_300_220_sub_bands", Value::Array(bands));
        rep.value("en_300_220_note", json!(note));
    }
    let r = prof.refinements();
    let off = || json!("off");
    rep.value(
        "usable_fraction",
        r.usable_fraction.map_or_else(off, json_num),
    );
    rep.value(
        "self_discharge_per_year",
        r.self_discharge_per_year.map_or_else(off, json_num),
    );
    rep.value("sleep_outside_active", json!(r.sleep_outside_active));
    match prof.battery() {
        Some(b) => rep.num("battery_mah", b.capacity().0, "mAh"),
        None => rep.value("battery_mah", json!("not in the profile: no battery life")),
    };
    rep.num("max_retries", f32::from(retries), "");
    rep.value("max_retries_source", json!(retries_source));
    if let Some(p) = args.loss {
        rep.num("loss_per_attempt", p, "");
        let d = Delivery::new(p, retries).map_err(refused)?;
        rep.num("expected_attempts", d.expected_attempts, "");
        rep.num("delivered_fraction", d.delivered_fraction, "");
    }

    let mut rows = Vec::new();
    for &p in &args.tx {
        let cost = prof.packet_cost(p).map_err(refused)?;
        let current = prof.tx_current().current_at(p).map_err(refused)?;
        let mut m = Map::new();
        m.insert("tx_dbm".into(), json_num(p.0));
        m.insert("tx_current_ma".into(), json_num(current.0));
        m.insert("charge_per_packet_uc".into(), json_num(cost.charge.0));
        m.insert(
            "energy_per_packet_uj".into(),
            json_num(cost.charge.at_supply(prof.supply()).0),
        );
        let mean = match args.loss {
            Some(l) => {
                let per_delivered = prof.charge_per_delivered(p, l, retries).map_err(refused)?;
                m.insert("charge_per_delivered_uc".into(), json_num(per_delivered.0));
                prof.mean_current_with_resends(p, interval, l, retries)
            }
            None => prof.mean_current(p, interval),
        }
        .map_err(refused)?;
        m.insert("mean_current_ua".into(), json_num(mean.0));
        if prof.battery().is_some() {
            let life = prof.battery_life(mean).map_err(refused)?;
            m.insert("battery_life_days".into(), json_num(life.0));
        }
        rows.push(Value::Object(m));
    }
    rep.value("per_power", Value::Array(rows));
    if !loaded.rates.is_empty() {
        // The profile's [[rate]] entries: each rate's airtime and the duty
        // cycle it takes at this interval.
        let mut rates = Vec::new();
        for r in loaded.rates.as_slice() {
            let airtime = Milliseconds(r.airtime_us as f32 / 1000.0);
            let mut m = Map::new();
            m.insert("name".into(), json!(r.name.as_str()));
            m.insert("required_snr_db".into(), json_num(r.required_snr.0));
            m.insert("airtime_ms".into(), json_num(airtime.0));
            if let Some(b) = r.noise_bandwidth_hz {
                m.insert("noise_bandwidth_hz".into(), json_num(b));
            }
            let duty = duty_cycle(airtime, interval).map_err(refused)?;
            m.insert("duty_cycle_percent".into(), json_num(duty * 100.0));
            rates.push(Value::Object(m));
        }
        rep.value("rates", Value::Array(rates));
    }
    rep.print(args.format)
}

#[cfg(test)]
mod tests {
    use super::loss;

    #[test]
    fn loss_forms() {
        assert_eq!(loss("0.05"), Ok(0.05));
        assert_eq!(loss("5%"), Ok(0.05));
        assert_eq!(loss("0"), Ok(0.0));
        assert!(loss("5").is_err_and(|m| m.contains("ambiguous")));
        assert!(loss("100%").is_err());
        assert!(loss("-1%").is_err());
    }
}
