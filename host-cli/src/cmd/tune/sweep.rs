//! The sweep grammar of `headroom tune`: `NAME=FROM..TO:STEP`,
//! `NAME=A,B,C` or `NAME=A`, where NAME is a controller setting's key (the
//! engine's table of names) and the values take the setting's units
//! (`margin_step_db=0.25dB,0.5dB`, `target_outage=0.5%,1%`).
//!
//! `rates=A.toml,B.toml,none` sweeps the choice of rate table: each value is
//! an energy profile whose `[[rate]]` entries make the table (`none`: no
//! table, the power only). The candidates are comparable: each packet is
//! judged at the rate its candidate chose, by that rate's required SNR, and
//! `--objective charge` compares their charge per delivered packet.
//!
//! Settings that decide how a packet is judged (`required_snr_db`,
//! `target_outage`) or that state the radio's facts (power limits, steps,
//! antenna gains, EIRP cap) change what is being compared, not how the
//! controller does: sweeping them is refused unless `--incomparable`, and
//! the results are then marked as not comparable.

use headroom::control::settings::{Kind, Layer, Role, Setting, Value};
use headroom::control::PowerSteps;
use headroom::units::Db;
use serde_json::{Map, Value as Json};

use crate::error::{CliError, CliResult};
use crate::fleet::report::value_json;
use crate::fleet::settings::{parse_value, show};

/// Most combinations a grid may have.
pub const MAX_COMBINATIONS: usize = 10_000;

/// One `--sweep`: a setting and the values it takes.
#[derive(Clone, Debug, PartialEq)]
pub struct Sweep {
    /// The setting swept.
    pub setting: Setting,
    /// Its values, in order.
    pub values: Vec<Value>,
    /// What each value is called in labels, when not its value (the file
    /// a rate table came from).
    pub names: Vec<String>,
}

const SWEEP_FORM: &str =
    "expected NAME=FROM..TO:STEP, NAME=A,B,C or NAME=A (e.g. margin_step_db=0.25..1:0.25)";

fn sweep_number(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let x: f64 = t
        .parse()
        .map_err(|_| format!("'{t}' is not a number ({SWEEP_FORM})"))?;
    if x.is_finite() {
        Ok(x)
    } else {
        Err(format!("'{t}' is not a finite number"))
    }
}

/// A value on the grid without the 0.30000000000000004 of repeated adding.
fn tidy(x: f64) -> f64 {
    format!("{x:.12e}").parse().unwrap_or(x)
}

/// The setting a sweep names (`steps.uniform` is the uniform step).
fn setting_named(name: &str) -> Result<Setting, String> {
    let key = if name == "steps.uniform" {
        "steps"
    } else {
        name
    };
    let s = Setting::from_key(key).ok_or_else(|| {
        format!(
            "'{name}' is not a controller setting (sweepable: {})",
            Setting::ALL
                .iter()
                .filter(|s| s.kind() != Kind::Cap)
                .map(|s| s.key())
                .collect::<Vec<_>>()
                .join(", ")
        )
    })?;
    if matches!(s.kind(), Kind::Cap) {
        return Err(format!(
            "'{name}' cannot be swept (compare caps with separate runs: --eirp-cap-dbm)"
        ));
    }
    Ok(s)
}

/// A number of a range as the setting's value.
fn range_value(s: Setting, x: f64) -> Result<Value, String> {
    #[allow(clippy::cast_possible_truncation)] // range-checked by the engine
    let f = x as f32;
    match s.kind() {
        Kind::Count | Kind::Milliseconds => {
            if x.fract() != 0.0 || !(0.0..=f64::from(u32::MAX)).contains(&x) {
                Err(format!("{} takes whole numbers, not {x}", s.key()))
            } else {
                #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
                Ok(Value::Whole(x as u32))
            }
        }
        Kind::Steps => Ok(Value::Steps(PowerSteps::Uniform(Db(f)))),
        _ => Ok(Value::Number(f)),
    }
}

/// Parse `NAME=FROM..TO:STEP`, `NAME=A,B,C` or `NAME=A`.
pub fn parse_sweep(s: &str) -> Result<Sweep, String> {
    let (name, spec) = s.split_once('=').ok_or_else(|| SWEEP_FORM.to_string())?;
    let name = name.trim();
    if name.is_empty() {
        return Err(format!("no setting named before '=' ({SWEEP_FORM})"));
    }
    let setting = setting_named(name)?;
    let spec = spec.trim();
    if setting == Setting::Rates {
        return rate_tables(spec);
    }
    let values = if let Some((from, rest)) = spec.split_once("..") {
        let (to, step) = rest
            .split_once(':')
            .ok_or_else(|| format!("range '{spec}' needs a step: FROM..TO:STEP"))?;
        let (from, to, step) = (sweep_number(from)?, sweep_number(to)?, sweep_number(step)?);
        if from > to {
            return Err(format!("range '{spec}': FROM {from} is above TO {to}"));
        }
        if step <= 0.0 {
            return Err(format!(
                "range '{spec}': STEP {step} must be greater than zero"
            ));
        }
        // Values FROM + k·STEP up to TO, TO included when it is on the grid
        // to within rounding.
        let span = (to - from) / step;
        if !span.is_finite() || span >= MAX_COMBINATIONS as f64 {
            return Err(format!(
                "range '{spec}' has more than {MAX_COMBINATIONS} values (the most a grid may have)"
            ));
        }
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // 0 ≤ span < 10⁴
        let n = (span + 1e-9).floor() as usize + 1;
        (0..n)
            .map(|k| range_value(setting, tidy(from + k as f64 * step)))
            .collect::<Result<Vec<_>, _>>()?
    } else {
        spec.split(',')
            .map(|v| parse_value(setting, v).map_err(|e| format!("{name}: {e}")))
            .collect::<Result<Vec<_>, _>>()?
    };
    Ok(Sweep {
        setting,
        values,
        names: Vec::new(),
    })
}

/// `rates=A.toml,B.toml,none`: the rate tables of energy profiles.
fn rate_tables(spec: &str) -> Result<Sweep, String> {
    let mut values = Vec::new();
    let mut names = Vec::new();
    for item in spec.split(',').map(str::trim) {
        if item.eq_ignore_ascii_case("none") {
            values.push(Value::Rates(headroom::rate::RateTable::empty()));
            names.push("none".to_string());
            continue;
        }
        let path = std::path::Path::new(item);
        let loaded = crate::energy::load(path).map_err(|e| format!("rates: {e}"))?;
        if loaded.rates.is_empty() {
            return Err(format!(
                "rates: {item}: the profile has no [[rate]] entries (write none for no table)"
            ));
        }
        values.push(Value::Rates(loaded.rates));
        names.push(item.to_string());
    }
    Ok(Sweep {
        setting: Setting::Rates,
        values,
        names,
    })
}

/// The grid: the sweeps and its size.
pub struct Grid {
    /// The sweeps, first varying slowest.
    pub sweeps: Vec<Sweep>,
    /// Number of combinations (0 without a sweep).
    pub len: usize,
    /// Whether the grid varies the judging rule or the radio's facts.
    pub incomparable: bool,
}

impl Grid {
    /// The grid of `sweeps`; `allow_incomparable` lets it vary what is
    /// judged or the radio's facts.
    pub fn new(sweeps: Vec<Sweep>, allow_incomparable: bool) -> CliResult<Grid> {
        // No sweep: no combination, only the default is replayed.
        let mut len: usize = usize::from(!sweeps.is_empty());
        let mut incomparable = false;
        for (k, s) in sweeps.iter().enumerate() {
            if sweeps.iter().take(k).any(|o| o.setting == s.setting) {
                return Err(CliError::arg(
                    "--sweep",
                    format!("'{}' is swept twice", s.setting),
                ));
            }
            match s.setting.role() {
                // The choice of rate table is what is being tuned.
                _ if s.setting == Setting::Rates => {}
                Role::JudgingRule | Role::RadioFact => {
                    if !allow_incomparable {
                        let what = if s.setting.role() == Role::JudgingRule {
                            "the rule packets are judged by"
                        } else {
                            "a fact of the radio"
                        };
                        return Err(CliError::arg(
                            "--sweep",
                            format!(
                                "{} is {what}: candidates that differ in it are not comparable \
                                 (add --incomparable to sweep it anyway; the results are then \
                                 marked as not comparable)",
                                s.setting
                            ),
                        ));
                    }
                    incomparable = true;
                }
                Role::Tuning | Role::Plausibility => {}
            }
            len = len.saturating_mul(s.values.len());
        }
        if len > MAX_COMBINATIONS {
            return Err(CliError::arg(
                "--sweep",
                format!(
                    "the grid has {len} combinations; at most {MAX_COMBINATIONS} (use coarser steps or fewer settings)"
                ),
            ));
        }
        Ok(Grid {
            sweeps,
            len,
            incomparable,
        })
    }

    /// The values of combination `k` (0-based), first sweep slowest.
    fn values(&self, k: usize) -> Vec<(Setting, Value)> {
        self.named_values(k)
            .into_iter()
            .map(|(s, v, _)| (s, v))
            .collect()
    }

    /// The values of combination `k`, each with its name in labels.
    fn named_values(&self, k: usize) -> Vec<(Setting, Value, Option<&str>)> {
        let mut rest = k;
        let mut out = Vec::with_capacity(self.sweeps.len());
        for s in self.sweeps.iter().rev() {
            let n = s.values.len().max(1);
            let i = rest % n;
            if let Some(v) = s.values.get(i) {
                out.push((s.setting, *v, s.names.get(i).map(String::as_str)));
            }
            rest /= n;
        }
        out.reverse();
        out
    }

    /// The settings of candidate `cand` (0: the default, nothing swept) as a
    /// layer above the flags.
    pub fn layer(&self, cand: usize) -> CliResult<Layer> {
        let mut l = Layer::empty();
        if let Some(k) = cand.checked_sub(1) {
            for (s, v) in self.values(k) {
                l.set(s, v).map_err(|e| CliError::arg("--sweep", e))?;
            }
        }
        Ok(l)
    }

    /// The swept settings of candidate `cand` as JSON (empty for the default).
    pub fn settings_json(&self, cand: usize) -> Map<String, Json> {
        let mut m = Map::new();
        if let Some(k) = cand.checked_sub(1) {
            for (s, v, name) in self.named_values(k) {
                let v = match name {
                    Some(n) => Json::from(n),
                    None => value_json(v),
                };
                m.insert(s.key().into(), v);
            }
        }
        m
    }

    /// A candidate's label: its swept values, or `default`.
    pub fn label(&self, cand: usize) -> String {
        match cand.checked_sub(1) {
            None => "default".into(),
            Some(k) => self
                .named_values(k)
                .into_iter()
                .map(|(s, v, name)| {
                    format!("{s}={}", name.map_or_else(|| show(s, v), String::from))
                })
                .collect::<Vec<_>>()
                .join(" "),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sweeps_parse() {
        let s = parse_sweep("margin_step_db=0.25..1:0.25").expect("range");
        assert_eq!(s.setting, Setting::MarginStepDb);
        assert_eq!(s.values, [0.25, 0.5, 0.75, 1.0].map(Value::Number).to_vec());
        let s = parse_sweep("deadband_db=0.5dB,1").expect("list with units");
        assert_eq!(s.values, [0.5, 1.0].map(Value::Number).to_vec());
        let s = parse_sweep("target_outage=1%,2%").expect("percent");
        assert_eq!(s.values, [0.01, 0.02].map(Value::Number).to_vec());
        let s = parse_sweep("min_readings=4..8:2").expect("whole");
        assert_eq!(s.values, [4, 6, 8].map(Value::Whole).to_vec());
        assert!(parse_sweep("min_readings=4..5:0.5").is_err());
        assert!(parse_sweep("nope=1").is_err());
        assert!(parse_sweep("eirp_cap_dbm=10,12").is_err());
        assert!(parse_sweep("margin_step_db").is_err());
        assert!(parse_sweep("margin_step_db=1..0:0.1").is_err());
    }

    #[test]
    fn judging_rule_and_radio_facts_need_a_flag() {
        let rule = vec![parse_sweep("required_snr_db=5,8").expect("parses")];
        assert!(Grid::new(rule.clone(), false).is_err());
        let g = Grid::new(rule, true).expect("allowed");
        assert!(g.incomparable);
        let fact = vec![parse_sweep("max_tx_dbm=10,14").expect("parses")];
        assert!(Grid::new(fact, false).is_err());
        let ok = vec![
            parse_sweep("margin_step_db=0.25,0.5").expect("parses"),
            parse_sweep("deadband_db=0,1,2").expect("parses"),
        ];
        let g = Grid::new(ok, false).expect("grid");
        assert_eq!(g.len, 6);
        assert!(!g.incomparable);
        // First sweep slowest.
        assert_eq!(g.label(2), "margin_step_db=0.25 dB deadband_db=1 dB");
        assert!(g
            .layer(0)
            .expect("default")
            .get(Setting::MarginStepDb)
            .is_none());
    }
}
