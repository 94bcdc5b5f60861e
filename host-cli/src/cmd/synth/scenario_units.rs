//! Scenario files in the units and names of link files: each quantity is
//! read by [`crate::quantity`] and written back, in place (so that lines do
//! not move and errors keep their line numbers), as the bare number in the
//! base unit the engine's scenario types read. `path_loss` and `fading` in
//! the spelling of [`crate::names`] become the engine's forms. Old spellings
//! are read with a warning; every quantity is checked against a plausible
//! range, given in the unit a person reads.

use clap::ValueEnum;
use headroom::units::Hertz;
use toml_edit::{DocumentMut, Item, Value};

use crate::error::{CliError, CliResult};
use crate::link::{range, warn};
use crate::names::{self, Environment, Extrapolate, Form, Keys, Model, PathParams};
use crate::quantity::{self, show, Q};

/// What a scenario key holds.
#[derive(Clone, Copy)]
enum Kind {
    /// Frequency: unit required (bare: Hz, old spelling).
    Frequency,
    /// Distance: unit required (bare: m, old spelling).
    Distance,
    /// Absolute power: unit required (bare: dBm, old spelling).
    Power,
    /// A power whose key says dBm: bare is dBm.
    Dbm,
    /// A ratio in dB: bare is dB.
    Db,
    /// An antenna gain: bare is dBi.
    Gain,
    /// A plain number.
    Number,
}

/// Keys of a scenario by path (`*`: every element of an array), with the
/// plausible range of each (in the base unit).
const KEYS: &[(&[&str], Kind, (f32, f32))] = &[
    (
        &["channel", "frequency"],
        Kind::Frequency,
        range::FREQUENCY_HZ,
    ),
    (&["channel", "tx_antenna_gain"], Kind::Gain, range::ITEM_DB),
    (&["channel", "rx_antenna_gain"], Kind::Gain, range::ITEM_DB),
    // Readings are rounded to at most 10 dB (common practice: radios report
    // in 1 dB steps or finer).
    (&["channel", "report_resolution"], Kind::Db, (0.001, 10.0)),
    (&["channel", "min_snr"], Kind::Db, range::REQUIRED_DB),
    (
        &["channel", "fading_correlation"],
        Kind::Number,
        (0.0, 0.999),
    ),
    (
        &["channel", "trajectory", "start"],
        Kind::Distance,
        range::DISTANCE_M,
    ),
    (
        &["channel", "trajectory", "min"],
        Kind::Distance,
        range::DISTANCE_M,
    ),
    (
        &["channel", "trajectory", "max"],
        Kind::Distance,
        range::DISTANCE_M,
    ),
    // Up to 100 m/s (a fast train; common practice).
    (
        &["channel", "trajectory", "speed_m_per_s"],
        Kind::Number,
        (-100.0, 100.0),
    ),
    // Shadowing σ up to 20 dB, as the engine's fading models take.
    (&["channel", "shadowing", "sigma"], Kind::Db, (0.0, 20.0)),
    (
        &["channel", "shadowing", "decorrelation_distance"],
        Kind::Distance,
        range::DISTANCE_M,
    ),
    (&["channel", "noise", "mean"], Kind::Power, (-180.0, 0.0)),
    (&["channel", "noise", "jitter"], Kind::Db, (0.0, 20.0)),
    (&["channel", "noise", "burst_rise"], Kind::Db, (0.0, 100.0)),
    (
        &["channel", "steps", "*", "change"],
        Kind::Db,
        (-100.0, 100.0),
    ),
    (&["power", "levels_dbm", "*"], Kind::Dbm, range::POWER_DBM),
    (&["radio", "min_tx_dbm"], Kind::Dbm, range::POWER_DBM),
    (&["radio", "max_tx_dbm"], Kind::Dbm, range::POWER_DBM),
    (&["radio", "eirp_cap_dbm"], Kind::Dbm, range::POWER_DBM),
    (&["radio", "tx_step_db"], Kind::Db, (0.001, 30.0)),
    (&["radio", "required_snr_db"], Kind::Db, range::REQUIRED_DB),
    (&["radio", "antenna_gain_dbi"], Kind::Gain, range::ITEM_DB),
];

fn q_of(v: &Value) -> Option<Q> {
    match v {
        Value::String(s) => Some(Q::Text(s.value().clone())),
        Value::Float(x) => Some(Q::Number(*x.value())),
        Value::Integer(i) => Some(Q::Number(*i.value() as f64)),
        _ => None,
    }
}

/// Replace `v` by `x`, keeping its comments and spacing.
fn set(v: &mut Value, x: f64) {
    let decor = v.decor().clone();
    *v = Value::from(x);
    *v.decor_mut() = decor;
}

fn convert(
    key: &str,
    v: &mut Value,
    kind: Kind,
    (lo, hi): (f32, f32),
    warnings: &mut Vec<String>,
) -> CliResult {
    let Some(q) = q_of(v) else { return Ok(()) };
    let err = |e: String| CliError::arg(key, e);
    // An old bare spelling: the value in the base unit, and that unit.
    let bare = match (&q, kind) {
        (Q::Number(x), Kind::Frequency) => Some((*x as f32, "Hz")),
        (Q::Number(x), Kind::Distance) => Some((*x as f32, "m")),
        (Q::Number(x), Kind::Power) => Some((*x as f32, "dBm")),
        _ => None,
    };
    let (x, shown): (f32, fn(f32) -> String) = match kind {
        Kind::Frequency => (
            bare.map_or_else(|| q.frequency().map(|f| f.0), |b| Ok(b.0))
                .map_err(err)?,
            show::frequency,
        ),
        Kind::Distance => (
            bare.map_or_else(|| q.distance().map(|d| d.0), |b| Ok(b.0))
                .map_err(err)?,
            show::distance,
        ),
        Kind::Power => (
            bare.map_or_else(|| q.power().map(|p| p.0), |b| Ok(b.0))
                .map_err(err)?,
            show::dbm,
        ),
        Kind::Dbm => (q.dbm().map_err(err)?.0, show::dbm),
        Kind::Db => (q.db().map_err(err)?.0, show::db),
        Kind::Gain => (q.gain().map_err(err)?.0, show::db),
        Kind::Number => (q.number().map_err(err)?, show::number),
    };
    quantity::check_range(x, lo, hi, &shown).map_err(err)?;
    if let Some((_, unit)) = bare {
        let example = match kind {
            Kind::Frequency => {
                let shown = show::frequency(x);
                let (n, unit) = shown.split_once(' ').unwrap_or((&shown, ""));
                let n = if n.contains('.') {
                    n.trim_end_matches('0').trim_end_matches('.')
                } else {
                    n
                };
                format!("{n}{unit}")
            }
            _ => format!("{}{unit}", q.text()),
        };
        warn(
            warnings,
            format!(
                "{key} = {}: a bare number is read as {unit} in this release only; write \"{example}\"",
                q.text()
            ),
        );
    }
    set(v, f64::from(x));
    Ok(())
}

/// Visit the values at `path` under `item`.
fn visit(item: &mut Item, path: &[&str], f: &mut dyn FnMut(&mut Value) -> CliResult) -> CliResult {
    let Some((first, rest)) = path.split_first() else {
        return match item {
            Item::Value(v) => f(v),
            _ => Ok(()),
        };
    };
    if *first == "*" {
        if let Some(a) = item.as_array_mut() {
            for v in a.iter_mut() {
                if rest.is_empty() {
                    f(v)?;
                } else if let Some(t) = v.as_inline_table_mut() {
                    // Elements of an array are inline tables.
                    let mut it = Item::Value(Value::InlineTable(std::mem::take(t)));
                    let r = visit(&mut it, rest, f);
                    if let Item::Value(Value::InlineTable(back)) = it {
                        *t = back;
                    }
                    r?;
                }
            }
        }
        return Ok(());
    }
    match item.as_table_like_mut().and_then(|t| t.get_mut(first)) {
        Some(next) => visit(next, rest, f),
        None => Ok(()),
    }
}

/// Rewrite `doc` in place into the engine's scenario spelling.
pub fn normalise(doc: &mut DocumentMut, warnings: &mut Vec<String>) -> CliResult {
    let root = doc.as_item_mut();
    for (path, kind, range) in KEYS {
        let key = path.join(".").replace(".*", "[]");
        visit(root, path, &mut |v| {
            convert(&key, v, *kind, *range, warnings)
        })?;
    }
    let frequency = root
        .get("channel")
        .and_then(|c| c.get("frequency"))
        .and_then(Item::as_float)
        .map(|f| Hertz(f as f32));
    if let Some(channel) = root.get_mut("channel").and_then(Item::as_table_like_mut) {
        if let Some(pl) = channel.get_mut("path_loss") {
            path_loss(pl, frequency, warnings)?;
        }
        if let Some(fading) = channel.get_mut("fading") {
            fast_fading(fading, warnings)?;
        }
    }
    Ok(())
}

fn engine_value<T: serde::Serialize>(key: &str, x: &T) -> CliResult<Value> {
    let v = toml::Value::try_from(x).map_err(|e| CliError::arg(key, e))?;
    v.to_string()
        .parse::<Value>()
        .map_err(|e| CliError::arg(key, e))
}

fn replace(item: &mut Item, v: Value) {
    if let Item::Value(old) = item {
        let decor = old.decor().clone();
        *old = v;
        *old.decor_mut() = decor;
    } else {
        *item = Item::Value(v);
    }
}

/// The table at `item` when it is in the new spelling (it names a
/// `model`); `None`, with a warning, for the engine's own spelling, which is
/// then read as it is (as is a plain name such as `"rayleigh"`).
fn new_spelling<'a>(
    item: &'a Item,
    key: &str,
    old: &str,
    new: &str,
    warnings: &mut Vec<String>,
) -> Option<&'a dyn toml_edit::TableLike> {
    let t = item.as_table_like()?;
    if t.get("model").is_some() {
        return Some(t);
    }
    warn(
        warnings,
        format!(
            "{key}: the engine's own spelling ({old}) is read in this release only; write {new}"
        ),
    );
    None
}

/// `path_loss = { model = "hata", tx_height = "30m", ... }` into the
/// engine's `{ hata = { ht = 30.0, ... } }`; the engine's own form is read
/// with a warning.
fn path_loss(item: &mut Item, frequency: Option<Hertz>, warnings: &mut Vec<String>) -> CliResult {
    const KEY: &str = "channel.path_loss";
    let Some(t) = new_spelling(
        item,
        KEY,
        "{ hata = { ht = ... } }",
        "{ model = \"...\", ... } with the keys of a link file's [path]",
        warnings,
    ) else {
        return Ok(());
    };
    let text = |k: &str| -> CliResult<Option<String>> {
        match t.get(k) {
            None => Ok(None),
            Some(i) => i
                .as_str()
                .map(|s| Some(s.to_string()))
                .ok_or_else(|| CliError::arg(&format!("{KEY}.{k}"), "must be a name in quotes")),
        }
    };
    let q = |k: &str| -> Option<Q> { t.get(k).and_then(Item::as_value).and_then(q_of) };
    let key = |k: &str| format!("{KEY}.{k}");
    let read = |k: &str, f: fn(&Q) -> Result<f32, String>| -> CliResult<Option<f32>> {
        q(k).map(|v| f(&v).map_err(|e| CliError::arg(&key(k), e)))
            .transpose()
    };
    let model: Model = names::parse(&key("model"), "model", &text("model")?.unwrap_or_default())?;
    let allowed = ["model"]
        .iter()
        .chain(model.params().iter())
        .copied()
        .collect::<Vec<_>>();
    for (k, _) in t.iter() {
        if !allowed.contains(&k) {
            let why = if Model::value_variants()
                .iter()
                .any(|m| m.params().contains(&k))
            {
                format!("does not apply to model {}", names::name(&model))
            } else {
                "unknown key".to_string()
            };
            return Err(CliError::arg(&key(k), why));
        }
    }
    let mut p = PathParams::new(model);
    p.exponent = read("exponent", |v| v.number())?;
    p.reference_distance =
        read("reference_distance", |v| v.distance().map(|d| d.0))?.map(headroom::units::Metres);
    p.reference_loss = read("reference_loss", |v| v.db().map(|d| d.0))?.map(headroom::units::Db);
    p.tx_height = read("tx_height", |v| v.distance().map(|d| d.0))?.map(headroom::units::Metres);
    p.rx_height = read("rx_height", |v| v.distance().map(|d| d.0))?.map(headroom::units::Metres);
    p.form = text("form")?
        .map(|f| names::parse::<Form>(&key("form"), "two-ray form", &f))
        .transpose()?;
    p.reflection = read("reflection", |v| v.number())?;
    p.environment = text("environment")?
        .map(|e| names::parse::<Environment>(&key("environment"), "environment", &e))
        .transpose()?;
    p.extrapolate = text("extrapolate")?
        .map(|e| names::parse::<Extrapolate>(&key("extrapolate"), "extrapolation", &e))
        .transpose()?;
    p.floors = read("floors", |v| v.number())?.map(|f| f as u8);
    p.coefficient_n = read("coefficient_n", |v| v.number())?;
    p.floor_loss = read("floor_loss", |v| v.db().map(|d| d.0))?.map(headroom::units::Db);
    p.floor_loss_per_extra_floor =
        read("floor_loss_per_extra_floor", |v| v.db().map(|d| d.0))?.map(headroom::units::Db);
    let f = frequency.unwrap_or(Hertz(f32::NAN));
    let built = p.build(f, Keys::File(KEY))?;
    replace(item, engine_value(KEY, &built)?);
    Ok(())
}

/// `fading = { model = "rician", k_factor = "6dB" }` into the engine's
/// `{ rician = { k_db = 6.0 } }`; `"rayleigh"` and `"none"` as they are.
fn fast_fading(item: &mut Item, warnings: &mut Vec<String>) -> CliResult {
    const KEY: &str = "channel.fading";
    let Some(t) = new_spelling(
        item,
        KEY,
        "{ rician = { k_db = ... } }",
        "{ model = \"rician\", k_factor = \"6dB\" }",
        warnings,
    ) else {
        return Ok(());
    };
    let model = t
        .get("model")
        .and_then(Item::as_str)
        .unwrap_or_default()
        .to_string();
    let k = t.get("k_factor").and_then(Item::as_value).and_then(q_of);
    for (key, _) in t.iter() {
        if key != "model" && key != "k_factor" {
            return Err(CliError::arg(
                &format!("{KEY}.{key}"),
                "unknown key (model, k_factor)",
            ));
        }
    }
    let v = match (model.as_str(), k) {
        ("rician", Some(k)) => {
            let k = k
                .db()
                .map_err(|e| CliError::arg(&format!("{KEY}.k_factor"), e))?;
            engine_value(KEY, &headroom::sim::FastFading::Rician { k_db: k.0 })?
        }
        ("rician", None) => {
            return Err(CliError::arg(
                &format!("{KEY}.k_factor"),
                "required by model rician",
            ))
        }
        ("rayleigh", None) => engine_value(KEY, &headroom::sim::FastFading::Rayleigh)?,
        ("none", None) => engine_value(KEY, &headroom::sim::FastFading::None)?,
        (m @ ("rayleigh" | "none"), Some(_)) => {
            return Err(CliError::arg(
                &format!("{KEY}.k_factor"),
                format!("does not apply to model {m}"),
            ))
        }
        (other, _) => {
            return Err(CliError::arg(
                &format!("{KEY}.model"),
                format!("unknown fast-fading model '{other}' (none, rayleigh, rician)"),
            ))
        }
    };
    replace(item, v);
    Ok(())
}
