//! How a replay's totals are shown: the one JSON shape and the one table of
//! a log's or a fleet's [`Summary`], with the settings in force, used by
//! `replay` and `tune`.
//!
//! JSON of one log (every key always present; `null` where a value does not
//! exist, e.g. a loss rate without a judged packet):
//! `log`, `settings` (`{KEY: {"value", "source"}}` for every controller
//! setting), `warnings`, then the summary keys of [`summary_json`].
//! JSON of a fleet: the summary keys, plus `logs`, `skipped_logs`,
//! `devices_missing_target`, `devices_without_judged`,
//! `worst_outage_fraction`, `worst_log`.

use std::fmt::Write as _;

use headroom::control::settings::{Resolved, Setting, Source, Value as SettingValue};
use headroom::control::{DutyLimit, EirpCap, Fleet, PowerSteps, Reason, Summary};
use headroom::energy::{EnergyTally, ReplayEnergy};

use crate::energy::LoadedProfile;
use serde_json::{Map, Value};

use super::settings::{show, source_name, OWN_FLAG};
use crate::output::json_num;

/// A setting's value in JSON: a number, a whole number, `{"uniform": dB}`
/// or `{"table": [dBm...]}`, or `"none"` for no EIRP cap.
pub fn value_json(v: SettingValue) -> Value {
    match v {
        SettingValue::Number(x) => json_num(x),
        SettingValue::Whole(n) => n.into(),
        SettingValue::Steps(PowerSteps::Uniform(d)) => {
            let mut m = Map::new();
            m.insert("uniform".into(), json_num(d.0));
            Value::Object(m)
        }
        SettingValue::Steps(PowerSteps::Table(t)) => {
            let mut m = Map::new();
            m.insert(
                "table".into(),
                Value::Array(t.levels().iter().map(|l| json_num(l.0)).collect()),
            );
            Value::Object(m)
        }
        SettingValue::Cap(EirpCap::AtMost(l)) => json_num(l.0),
        SettingValue::Cap(EirpCap::NoCap) => "none".into(),
        SettingValue::Duty(DutyLimit::AtMost(f)) => json_num(f),
        SettingValue::Duty(DutyLimit::NoLimit) => "none".into(),
        SettingValue::Rate(Some(n)) => n.as_str().into(),
        SettingValue::Rate(None) => Value::Null,
        SettingValue::Rates(t) => Value::Array(
            t.as_slice()
                .iter()
                .map(|r| Value::from(r.name.as_str()))
                .collect(),
        ),
    }
}

/// `{KEY: {"value": ..., "source": ...}}` for every setting.
pub fn settings_json(r: &Resolved) -> Value {
    let mut m = Map::new();
    for s in Setting::ALL {
        let mut e = Map::new();
        e.insert("value".into(), value_json(r.value(s)));
        e.insert("source".into(), source_name(r, s).into());
        m.insert(s.key().into(), Value::Object(e));
    }
    Value::Object(m)
}

fn opt(x: Option<f32>) -> Value {
    x.map_or(Value::Null, json_num)
}

/// The summary keys, in their documented order.
pub fn summary_json(s: &Summary) -> Map<String, Value> {
    let mut m = Map::new();
    let mut ins = |k: &str, v: Value| {
        m.insert(k.into(), v);
    };
    ins("records", s.records.into());
    ins("judged", s.judged.into());
    ins("unjudged", s.unjudged.into());
    ins("lost", s.lost.into());
    ins("outage_fraction", opt(s.outage_fraction()));
    ins("judged_at_max", s.judged_at_max.into());
    ins("lost_at_max", s.lost_at_max.into());
    ins("outage_fraction_below_max", opt(s.outage_below_max()));
    ins("mean_tx_dbm", opt(s.mean_tx_dbm().map(|d| d.0)));
    ins(
        "saving_vs_logged_db",
        opt(s.saving_vs_logged_db().map(|d| d.0)),
    );
    ins("saving_vs_max_db", opt(s.saving_vs_max_db().map(|d| d.0)));
    ins("max_allowed_tx_dbm", json_num(s.max_allowed.0));
    ins("max_tx_dbm_used", opt(s.max_tx_dbm_used.map(|d| d.0)));
    ins("power_changes", s.power_changes.into());
    ins("rate_changes", s.rate_changes.into());
    ins("held", s.held.into());
    ins("duty_limited", s.duty_limited.into());
    ins("delivered_fraction", opt(s.delivered_fraction()));
    ins(
        "charge_per_delivered_uc",
        s.charge_per_delivered_uc().map_or(Value::Null, Value::from),
    );
    let mut logged = Map::new();
    logged.insert("judged".into(), s.logged.judged.into());
    logged.insert("lost".into(), s.logged.lost.into());
    logged.insert("outage_fraction".into(), opt(s.logged.outage_fraction()));
    logged.insert(
        "mean_tx_dbm".into(),
        opt(s.logged.mean_tx_dbm().map(|d| d.0)),
    );
    logged.insert("without_readings".into(), s.logged.without_readings.into());
    ins("logged", Value::Object(logged));
    let mut ignored = Map::new();
    for r in Reason::ALL.iter().filter(|r| r.is_ignored_reading()) {
        ignored.insert(r.as_str().to_string(), s.ignored(*r).into());
    }
    ins("ignored_readings", Value::Object(ignored));
    let mut sums = Map::new();
    sums.insert("logs".into(), s.logs.into());
    sums.insert("tx_mw_sum".into(), Value::from(s.tx_mw_sum));
    sums.insert("max_mw_sum".into(), Value::from(s.max_mw_sum));
    sums.insert("airtime_us".into(), s.airtime_us.into());
    sums.insert("charge_uc".into(), Value::from(s.charge_uc));
    sums.insert("charged".into(), s.charged.into());
    sums.insert("judged_charge_uc".into(), Value::from(s.judged_charge_uc));
    sums.insert(
        "logged_records_with_tx".into(),
        s.logged.records_with_tx.into(),
    );
    sums.insert("logged_tx_mw_sum".into(), Value::from(s.logged.tx_mw_sum));
    sums.insert(
        "logged_chosen_mw_sum".into(),
        Value::from(s.logged.chosen_mw_sum),
    );
    ins("sums", Value::Object(sums));
    m
}

/// One log's JSON object.
pub fn log_json(
    log: &str,
    settings: &Resolved,
    warnings: &[String],
    s: &Summary,
) -> Map<String, Value> {
    let mut m = Map::new();
    m.insert("log".into(), log.into());
    m.insert("settings".into(), settings_json(settings));
    m.insert(
        "warnings".into(),
        Value::Array(warnings.iter().map(|w| Value::from(w.as_str())).collect()),
    );
    m.extend(summary_json(s));
    m
}

/// The fleet's JSON object; `names` are the logs in the order added.
pub fn fleet_json(f: &Fleet, skipped: usize, names: &[String]) -> Map<String, Value> {
    let mut m = Map::new();
    m.insert("logs".into(), f.total.logs.into());
    m.insert("skipped_logs".into(), skipped.into());
    m.insert("devices_missing_target".into(), f.missing_target.into());
    m.insert("devices_without_judged".into(), f.without_judged.into());
    m.insert("worst_outage_fraction".into(), opt(f.worst.map(|w| w.0)));
    m.insert(
        "worst_log".into(),
        f.worst
            .and_then(|(_, k)| usize::try_from(k).ok())
            .and_then(|k| names.get(k))
            .map_or(Value::Null, |n| Value::from(n.as_str())),
    );
    m.extend(summary_json(&f.total));
    m
}

fn pct(x: Option<f32>) -> String {
    x.map_or_else(|| "n/a".into(), |x| format!("{:.3} %", 100.0 * x))
}

fn dbm(x: Option<f32>) -> String {
    x.map_or_else(|| "n/a".into(), |x| format!("{x:.2} dBm"))
}

fn db(x: Option<f32>) -> String {
    x.map_or_else(|| "n/a".into(), |x| format!("{x:+.2} dB"))
}

/// The settings in force, as table lines: the judging rule, the radio's
/// facts and the start power always; the others when they are not at their
/// default.
pub fn settings_table(out: &mut String, r: &Resolved) {
    let _ = writeln!(out, "settings in force (value, source):");
    let mut hidden = 0;
    for s in Setting::ALL {
        let always = OWN_FLAG.contains(&s);
        if !always && r.source(s) == Source::Default {
            hidden += 1;
            continue;
        }
        let v = show(s, r.value(s));
        let source = if s == Setting::StartTxDbm && r.source(s) == Source::Default {
            "default: the highest allowed"
        } else {
            source_name(r, s)
        };
        let _ = writeln!(out, "  {:<22}{:<28} {source}", s.key(), v);
    }
    if hidden > 0 {
        let _ = writeln!(
            out,
            "  ({hidden} more settings at their defaults; --format json lists every one)"
        );
    }
}

/// A summary as table lines: the replay beside what the device did.
pub fn summary_table(out: &mut String, s: &Summary) {
    let _ = writeln!(out, "{:<24}{:<16}logged (field)", "", "replayed");
    let row = |out: &mut String, k: &str, a: String, b: String| {
        let _ = writeln!(out, "  {k:<22}{a:<16}{b}");
    };
    row(
        out,
        "judged",
        s.judged.to_string(),
        s.logged.judged.to_string(),
    );
    row(out, "lost", s.lost.to_string(), s.logged.lost.to_string());
    row(
        out,
        "outage_fraction",
        pct(s.outage_fraction()),
        pct(s.logged.outage_fraction()),
    );
    row(
        out,
        "mean_tx_dbm",
        dbm(s.mean_tx_dbm().map(|d| d.0)),
        dbm(s.logged.mean_tx_dbm().map(|d| d.0)),
    );
    let line = |out: &mut String, k: &str, v: String| {
        let _ = writeln!(out, "{k:<24}{v}");
    };
    line(
        out,
        "saving_vs_logged_db",
        format!(
            "{}  (positive: the controller spends less than the device did)",
            db(s.saving_vs_logged_db().map(|d| d.0))
        ),
    );
    line(
        out,
        "saving_vs_max_db",
        format!(
            "{}  (against always sending at the highest allowed power, {:.2} dBm)",
            db(s.saving_vs_max_db().map(|d| d.0)),
            s.max_allowed.0
        ),
    );
    line(
        out,
        "lost_at_max",
        format!(
            "{} of {} judged packets sent at the highest allowed power (out of reach)",
            s.lost_at_max, s.judged_at_max
        ),
    );
    line(
        out,
        "outage_below_max",
        format!(
            "{}  (loss rate of the other judged packets)",
            pct(s.outage_below_max())
        ),
    );
    line(out, "records", s.records.to_string());
    line(
        out,
        "unjudged",
        format!(
            "{} ({} sent with no readings back: the packet or its report was lost in the field)",
            s.unjudged, s.logged.without_readings
        ),
    );
    line(out, "power_changes", s.power_changes.to_string());
    line(out, "max_tx_dbm_used", dbm(s.max_tx_dbm_used.map(|d| d.0)));
    let ignored: Vec<String> = Reason::ALL
        .iter()
        .filter(|r| r.is_ignored_reading())
        .map(|r| {
            format!(
                "{} {}",
                r.as_str().trim_start_matches("ignored_"),
                s.ignored(*r)
            )
        })
        .collect();
    line(out, "ignored_readings", ignored.join(", "));
}

/// The rate table in force and what the replay did at each rate, in JSON:
/// `source` (`energy-profile`, `log-header` or `default` for none), and per
/// rate its `name`, `required_snr_db`, `airtime_ms`, `noise_bandwidth_hz`,
/// then the replay's `packets`, `share`, `delivered`, `lost`,
/// `airtime_ms_sum` and `charge_uc` at that rate (the engine's
/// [`Summary::per_rate`] and [`Summary::rate_share`]).
pub fn rates_json(r: &Resolved, s: &Summary) -> Value {
    let table = match r.value(Setting::Rates) {
        SettingValue::Rates(t) => t,
        _ => headroom::rate::RateTable::empty(),
    };
    let mut rows = Vec::new();
    for (i, (rate, tot)) in table.as_slice().iter().zip(s.per_rate.iter()).enumerate() {
        let mut m = Map::new();
        m.insert("name".into(), rate.name.as_str().into());
        m.insert("required_snr_db".into(), json_num(rate.required_snr.0));
        #[allow(clippy::cast_precision_loss)] // µs below 2^32: exact in f64
        m.insert(
            "airtime_ms".into(),
            Value::from(f64::from(rate.airtime_us) / 1000.0),
        );
        m.insert("noise_bandwidth_hz".into(), opt(rate.noise_bandwidth_hz));
        m.insert("packets".into(), tot.packets.into());
        m.insert(
            "share".into(),
            opt(u8::try_from(i).ok().and_then(|i| s.rate_share(i))),
        );
        m.insert("delivered".into(), tot.delivered.into());
        m.insert("lost".into(), tot.lost.into());
        #[allow(clippy::cast_precision_loss)] // a sum far below 2^53
        m.insert(
            "airtime_ms_sum".into(),
            Value::from(tot.airtime_us as f64 / 1000.0),
        );
        m.insert("charge_uc".into(), Value::from(tot.charge_uc));
        rows.push(Value::Object(m));
    }
    let mut m = Map::new();
    m.insert("source".into(), source_name(r, Setting::Rates).into());
    m.insert("table".into(), Value::Array(rows));
    Value::Object(m)
}

/// The rate table in force and the replay's use of each rate, as table
/// lines (nothing without a rate table): the same numbers as [`rates_json`],
/// then the packets held by the duty budget, the decisions limited by it,
/// the rate changes and the charge per delivered packet.
pub fn rates_table(out: &mut String, r: &Resolved, s: &Summary) {
    let v = rates_json(r, s);
    let Some(rows) = v["table"].as_array().filter(|t| !t.is_empty()) else {
        return;
    };
    let _ = writeln!(
        out,
        "rate table in force (source: {}):",
        v["source"].as_str().unwrap_or("")
    );
    let _ = writeln!(
        out,
        "  {:<10}{:>10}{:>13}{:>12}{:>10}{:>9}{:>8}{:>14}",
        "rate", "req SNR", "airtime", "bandwidth", "packets", "share", "lost", "charge"
    );
    for row in rows {
        let num = |k: &str| row[k].as_f64();
        let _ = writeln!(
            out,
            "  {:<10}{:>10}{:>13}{:>12}{:>10}{:>9}{:>8}{:>14}",
            row["name"].as_str().unwrap_or(""),
            num("required_snr_db").map_or("n/a".into(), |x| format!("{x:.1} dB")),
            num("airtime_ms").map_or("n/a".into(), |x| format!("{x:.3} ms")),
            num("noise_bandwidth_hz").map_or("-".into(), |x| format!("{:.1} kHz", x / 1e3)),
            row["packets"].to_string(),
            num("share").map_or("n/a".into(), |x| format!("{:.1} %", 100.0 * x)),
            row["lost"].to_string(),
            num("charge_uc").map_or("n/a".into(), |x| format!("{x:.0} µC")),
        );
    }
    let _ = writeln!(
        out,
        "  {:<22}{}  (not sent: no rate fitted the duty-cycle budget)",
        "held", s.held
    );
    let _ = writeln!(
        out,
        "  {:<22}{}  (decisions limited by the duty-cycle budget)",
        "duty_limited", s.duty_limited
    );
    let _ = writeln!(out, "  {:<22}{}", "rate_changes", s.rate_changes);
    let _ = writeln!(
        out,
        "  {:<22}{}",
        "charge_per_delivered",
        s.charge_per_delivered_uc().map_or_else(
            || "n/a (needs --energy)".into(),
            |x| format!("{x:.1} µC  (the judged and held packets' charge over the delivered ones)")
        )
    );
}

/// The fleet's lines (after its summary).
pub fn fleet_table(out: &mut String, f: &Fleet, skipped: usize, names: &[String]) {
    let _ = writeln!(out, "{:<24}{}", "logs", f.total.logs);
    if skipped > 0 {
        let _ = writeln!(out, "{:<24}{skipped} (see the warnings)", "skipped_logs");
    }
    let worst = f.worst.map_or_else(
        || "n/a".to_string(),
        |(w, k)| {
            let name = usize::try_from(k)
                .ok()
                .and_then(|k| names.get(k))
                .map_or("", String::as_str);
            format!("{} ({})", pct(Some(w)), crate::error::printable(name))
        },
    );
    let _ = writeln!(out, "{:<24}{worst}", "worst_outage_fraction");
    let _ = writeln!(
        out,
        "{:<24}{} of {} logs (each against its own target)",
        "devices_missing_target", f.missing_target, f.total.logs
    );
    summary_table(out, &f.total);
}

/// The energy of a replay beside the device's own, in JSON: for each of
/// `replayed` and `logged`, `charge_per_packet_uc`,
/// `charge_per_delivered_uc`, `mean_current_ua`, `battery_life_days`; then
/// the saving in battery days and percent, and the linear sums. `one_log`:
/// battery life and the saving are a device's (a fleet has no one battery).
pub fn energy_json(e: &ReplayEnergy, p: &LoadedProfile, one_log: bool) -> Value {
    let side = |t: &EnergyTally| {
        let mut m = Map::new();
        m.insert(
            "charge_per_packet_uc".into(),
            opt(t.charge_per_packet().map(|q| q.0)),
        );
        m.insert(
            "charge_per_delivered_uc".into(),
            opt(t.charge_per_delivered().map(|q| q.0)),
        );
        m.insert("mean_current_ua".into(), opt(t.mean_current().map(|i| i.0)));
        let life = t
            .mean_current()
            .filter(|_| one_log)
            .and_then(|i| p.profile.battery_life(i).ok());
        m.insert("battery_life_days".into(), opt(life.map(|d| d.0)));
        let mut sums = Map::new();
        sums.insert("packets".into(), t.packets.into());
        sums.insert("judged".into(), t.judged.into());
        sums.insert("delivered".into(), t.delivered.into());
        sums.insert("charge_uc".into(), Value::from(t.charge_uc));
        sums.insert("judged_charge_uc".into(), Value::from(t.judged_charge_uc));
        sums.insert("airtime_ms".into(), Value::from(t.airtime_ms));
        sums.insert("span_ms".into(), t.span_ms.into());
        sums.insert("span_charge_uc".into(), Value::from(t.span_charge_uc));
        sums.insert("sleep_charge_uc".into(), Value::from(t.sleep_charge_uc));
        m.insert("sums".into(), Value::Object(sums));
        (Value::Object(m), life)
    };
    let (replayed, life_r) = side(&e.replayed);
    let (logged, life_l) = side(&e.logged);
    let mut m = Map::new();
    m.insert("replayed".into(), replayed);
    m.insert("logged".into(), logged);
    let (days, pct) = match (life_r, life_l) {
        (Some(r), Some(l)) if l.0 > 0.0 => (Some(r.0 - l.0), Some(100.0 * (r.0 - l.0) / l.0)),
        _ => (None, None),
    };
    m.insert("battery_life_gain_days".into(), opt(days));
    m.insert("battery_life_gain_percent".into(), opt(pct));
    m.insert("logged_uncosted".into(), e.logged_uncosted.into());
    Value::Object(m)
}

/// The energy lines of a table: the replay beside the device.
pub fn energy_table(out: &mut String, e: &ReplayEnergy, p: &LoadedProfile, one_log: bool) {
    let v = energy_json(e, p, one_log);
    let num = |side: &str, k: &str, unit: &str, d: usize| {
        v[side][k]
            .as_f64()
            .map_or_else(|| "n/a".to_string(), |x| format!("{x:.d$} {unit}"))
    };
    let _ = writeln!(
        out,
        "energy (airtime {} ms: {}):",
        p.profile.airtime().0,
        p.airtime_source.describe()
    );
    for (k, unit, d) in [
        ("charge_per_packet_uc", "µC", 1),
        ("charge_per_delivered_uc", "µC", 1),
        ("mean_current_ua", "µA", 2),
        ("battery_life_days", "days", 1),
    ] {
        if k == "battery_life_days" && !one_log {
            continue;
        }
        let _ = writeln!(
            out,
            "  {k:<25}{:<16}{}",
            num("replayed", k, unit, d),
            num("logged", k, unit, d)
        );
    }
    if one_log {
        let gain = match (
            v["battery_life_gain_days"].as_f64(),
            v["battery_life_gain_percent"].as_f64(),
        ) {
            (Some(d), Some(p)) => format!("{d:+.1} days ({p:+.1} %) with the controller"),
            _ => "n/a (no battery in the profile, or no time span in the log)".into(),
        };
        let _ = writeln!(out, "{:<24}{gain}", "battery_life_gain");
    }
}
