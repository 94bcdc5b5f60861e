//! `replay --baselines`: the joint (rate, power) controller beside the
//! rules it is compared with, each replayed over the same records and
//! judged by the same rule. The rules are the engine's
//! (`headroom::control::baseline`, the controller itself for power-only
//! control at one rate); the costs are the engine's energy profile
//! (`EnergyProfile::packet_cost_for`, `EnergyTally`); the duty use is the
//! engine's one-hour `AirtimeWindow`. This module only feeds them records
//! and collects their answers.
//!
//! Rows, for a log replayed with a rate table of `n` rates:
//! - `joint`: the controller choosing rate and power (`Replay::with_energy`);
//! - `power-only RATE`: the controller with a table of that rate alone
//!   (`baseline::single_rate`), one row per rate;
//! - `common-practice`: `baseline::CommonPracticeRate`;
//! - `hindsight`: `baseline::FixedMarginRate` at the rate and fixed margin
//!   that, knowing the whole log, deliver at the target for the least charge
//!   per delivered packet (per rate by the engine's
//!   `baseline::hindsight_margin`, the search the tests use; then the
//!   cheapest rate);
//! - `at the joint's loss`: the same search allowed the joint controller's
//!   own loss, when that differs from the target by more than 0.5 % of it
//!   (the comparison at equal loss).

use headroom::control::baseline::{self, CommonPracticeRate, FixedMarginRate, Judge, Rule};
use headroom::control::{ControllerConfig, Outcome};
use headroom::energy::duty::AirtimeWindow;
use headroom::energy::{EnergyProfile, EnergyTally, Milliseconds, ReplayEnergy};
use headroom::record::LogRecord;
use headroom::units::Dbm;
use serde_json::{Map, Value};

use super::HostReplay;
use crate::error::{CliError, CliResult};
use crate::output::json_num;

/// What one rule did over a log.
#[derive(Debug, Clone)]
pub struct Row {
    /// The rule, as the table names it.
    pub rule: String,
    /// Packets judged (readings to judge by).
    pub judged: u64,
    /// Judged packets lost.
    pub lost: u64,
    /// Packets held by a duty budget (the joint controller only).
    pub held: u64,
    /// The charge of every packet, the delivered ones counted.
    pub tally: EnergyTally,
    /// Most airtime in any hour, µs (the engine's one-hour window).
    pub max_hour_airtime_us: u32,
    /// Airtime of one hour, µs (the window's limit at a fraction of 1).
    pub hour_us: u32,
    /// The loss this rule was held to when not the target (the hindsight
    /// rule at the joint controller's own loss).
    pub allowed_loss: Option<f64>,
}

impl Row {
    fn new(rule: String) -> CliResult<Row> {
        let w = window()?;
        Ok(Row {
            rule,
            judged: 0,
            lost: 0,
            held: 0,
            tally: EnergyTally::new(),
            max_hour_airtime_us: 0,
            hour_us: w.limit_us(),
            allowed_loss: None,
        })
    }

    /// Loss over the judged and held packets.
    pub fn loss(&self) -> Option<f64> {
        let all = self.judged + self.held;
        #[allow(clippy::cast_precision_loss)] // counts far below 2^53
        (all > 0).then(|| (self.lost + self.held) as f64 / all as f64)
    }

    /// The row as JSON.
    pub fn json(&self, p: &EnergyProfile) -> Value {
        let mut m = Map::new();
        m.insert("rule".into(), self.rule.clone().into());
        m.insert("judged".into(), self.judged.into());
        m.insert("lost".into(), self.lost.into());
        m.insert("held".into(), self.held.into());
        m.insert(
            "loss_fraction".into(),
            self.loss().map_or(Value::Null, Value::from),
        );
        if let Some(l) = self.allowed_loss {
            m.insert("allowed_loss_fraction".into(), l.into());
        }
        let opt = |x: Option<f32>| x.map_or(Value::Null, json_num);
        m.insert(
            "charge_per_delivered_uc".into(),
            opt(self.tally.charge_per_delivered().map(|q| q.0)),
        );
        let mean = self.tally.mean_current();
        m.insert("mean_current_ua".into(), opt(mean.map(|i| i.0)));
        m.insert(
            "battery_life_days".into(),
            opt(mean.and_then(|i| p.battery_life(i).ok()).map(|d| d.0)),
        );
        #[allow(clippy::cast_precision_loss)]
        m.insert(
            "max_duty_fraction".into(),
            Value::from(f64::from(self.max_hour_airtime_us) / f64::from(self.hour_us.max(1))),
        );
        Value::Object(m)
    }
}

fn window() -> CliResult<AirtimeWindow> {
    AirtimeWindow::new(1.0).map_err(|e| CliError::Input(format!("airtime window: {e}")))
}

/// Cost and airtime bookkeeping of one rule.
struct Books {
    row: Row,
    window: AirtimeWindow,
}

impl Books {
    fn new(rule: String) -> CliResult<Books> {
        Ok(Books {
            row: Row::new(rule)?,
            window: window()?,
        })
    }

    /// A packet sent at `tx` and rate `m` (airtime `airtime_us`), judged
    /// `delivered` (`None`: not judged).
    fn sent(
        &mut self,
        p: &EnergyProfile,
        t_ms: u64,
        tx: f32,
        airtime_us: u32,
        delivered: Option<bool>,
    ) -> CliResult {
        let cost = p
            .packet_cost_for(Dbm(tx), Milliseconds(airtime_us as f32 / 1000.0))
            .map_err(|e| crate::energy::refusal(&e, "--energy", "--interval", &[]))?;
        self.row
            .tally
            .add(t_ms, &cost, p.sleep_current(), delivered);
        self.window.advance(t_ms);
        self.window.add(airtime_us);
        self.row.max_hour_airtime_us = self.row.max_hour_airtime_us.max(self.window.used_us());
        if let Some(d) = delivered {
            self.row.judged += 1;
            self.row.lost += u64::from(!d);
        }
        Ok(())
    }
}

/// Feed `rec` to `rule` (the engine's [`baseline::step`]) and book its
/// packet.
fn step_rule(
    rule: &mut dyn Rule,
    books: &mut Books,
    cfg: &ControllerConfig,
    p: &EnergyProfile,
    rec: &LogRecord,
) -> CliResult {
    let (tx, m, judged) = baseline::step(rule, rec);
    let airtime = cfg.rates.get(m).map_or(0, |r| r.airtime_us);
    books.sent(p, rec.t_ms, tx, airtime, judged.map(|j| j.delivered))
}

/// Every rule over `records` (read once into memory by the caller: the
/// hindsight search replays them many times). `cfg` is the joint
/// controller's configuration (its rate table, duty limit and target).
pub fn compare(
    cfg: &ControllerConfig,
    p: &EnergyProfile,
    records: &[LogRecord],
) -> CliResult<Vec<Row>> {
    let bad =
        |e: headroom::control::ConfigError| CliError::Input(format!("controller settings: {e}"));
    let mut rows = Vec::new();
    // The joint controller.
    // Its costs are the replay's own (`ReplayEnergy`, as `replay --energy`
    // reports them: a held packet costs the wake-up only).
    let mut joint = HostReplay::with_energy(*cfg, p).map_err(bad)?;
    let mut energy = ReplayEnergy::new(None);
    let mut books = Books::new("joint (rate, power)".into())?;
    for rec in records {
        let s = joint.step(rec);
        energy
            .add(p, rec, &s)
            .map_err(|e| crate::energy::refusal(&e, "--energy", "--interval", &[]))?;
        match s.outcome {
            Outcome::Held => books.row.held += 1,
            o => {
                let delivered = match o {
                    Outcome::Delivered => Some(true),
                    Outcome::Lost => Some(false),
                    _ => None,
                };
                let air = s.airtime_us.unwrap_or(0);
                books.sent(p, rec.t_ms, s.chosen.0, air, delivered)?;
            }
        }
    }
    books.row.tally = energy.replayed;
    rows.push(books.row);
    // Power-only control at each fixed rate.
    for (m, rate) in cfg.rates.as_slice().iter().enumerate() {
        let Some(one) = u8::try_from(m)
            .ok()
            .and_then(|m| baseline::single_rate(cfg, m))
        else {
            continue;
        };
        // The controller at this one rate; every packet judged by the
        // whole table's rule (the log's rate and bandwidth), as every row.
        let idx = u8::try_from(m).unwrap_or(0);
        let mut r = HostReplay::with_energy(one, p).map_err(bad)?;
        let mut books = Books::new(format!("power-only {}", rate.name))?;
        let judge = Judge::new(cfg);
        let logged_rate = cfg.logged_rate.and_then(|n| cfg.rates.index_of(n.as_str()));
        for rec in records {
            // The record as the one-rate controller sees it: its noise floor
            // at this rate's bandwidth (the engine's noise change between
            // the rate it was logged at and this one), sent at its one rate.
            let seen = match rec.rate.or(logged_rate) {
                Some(l) => LogRecord {
                    noise_dbm: rec
                        .noise_dbm
                        .zip(cfg.rates.noise_change_db(idx, l))
                        .map(|(n, d)| n + d.0),
                    rate: Some(0),
                    ..*rec
                },
                None => LogRecord { rate: None, ..*rec },
            };
            let s = r.step(&seen);
            // Judged by the same rule as every other row.
            let delivered = judge.judge(rec, s.chosen.0, idx).map(|j| j.delivered);
            books.sent(p, rec.t_ms, s.chosen.0, rate.airtime_us, delivered)?;
        }
        rows.push(books.row);
    }
    // The rate rule of common practice.
    let mut rule = CommonPracticeRate::new(cfg);
    let mut books = Books::new("common practice".into())?;
    for rec in records {
        step_rule(&mut rule, &mut books, cfg, p, rec)?;
    }
    rows.push(books.row);
    // The best single rate in hindsight, with a hindsight-tuned margin: at
    // the target, and at the joint controller's own loss when that differs
    // (the comparison at equal loss).
    let target = f64::from(cfg.target_outage);
    let joint_loss = rows.first().and_then(Row::loss);
    rows.push(
        hindsight(cfg, p, records, target, "hindsight")?.unwrap_or(Row::new(
            "hindsight: no single rate meets the target".into(),
        )?),
    );
    let at_target = rows
        .last()
        .map(|r| (r.loss(), r.tally.charge_per_delivered()));
    if let Some(l) = joint_loss.filter(|l| (l - target).abs() > 0.005 * target) {
        if let Some(row) = hindsight(cfg, p, records, l, "at the joint's loss")? {
            // Nothing new when the rule at the target is the same run.
            if Some((row.loss(), row.tally.charge_per_delivered())) != at_target {
                rows.push(Row {
                    allowed_loss: Some(l),
                    ..row
                });
            }
        }
    }
    Ok(rows)
}

/// The best single rate with a fixed margin chosen in hindsight so that the
/// loss is at most `target` (the engine's `baseline::hindsight_margin` per
/// rate, then the cheapest), labelled `what: RATE, margin M dB`; `None` when
/// no rate meets it at any margin.
fn hindsight(
    cfg: &ControllerConfig,
    p: &EnergyProfile,
    records: &[LogRecord],
    target: f64,
    what: &str,
) -> CliResult<Option<Row>> {
    let mut best: Option<Row> = None;
    for m in 0..u8::try_from(cfg.rates.len()).unwrap_or(0) {
        let name = cfg.rates.get(m).map_or("?", |r| r.name.as_str());
        let run = |margin: f32| -> CliResult<Row> {
            let mut rule = FixedMarginRate::new(cfg, m, margin);
            // The lowest margin tried may be above the one that would do.
            let at = if margin <= baseline::HINDSIGHT_MIN_MARGIN_DB {
                "≤ "
            } else {
                ""
            };
            let mut books = Books::new(format!("{what}: {name}, margin {at}{margin:.2} dB"))?;
            for rec in records {
                step_rule(&mut rule, &mut books, cfg, p, rec)?;
            }
            Ok(books.row)
        };
        let measure = |margin: f32| {
            run(margin).map(|r| baseline::MarginRun {
                loss: r.loss().unwrap_or(f64::NAN),
                charge_per_delivered: r
                    .tally
                    .charge_per_delivered()
                    .map_or(f64::NAN, |q| f64::from(q.0)),
            })
        };
        let Some((margin, _)) = baseline::hindsight_margin(target, measure)? else {
            continue;
        };
        let row = run(margin)?;
        let cost = row.tally.charge_per_delivered().map(|q| q.0);
        let better = match (&best, cost) {
            (None, Some(_)) => true,
            (Some(b), Some(c)) => b.tally.charge_per_delivered().is_none_or(|q| c < q.0),
            _ => false,
        };
        if better {
            best = Some(row);
        }
    }
    Ok(best)
}

/// The rows as a table: loss, charge per delivered packet, mean current,
/// battery life and the most airtime in any hour, per rule; the rows that
/// miss `target` are marked.
pub fn table(out: &mut String, rows: &[Row], p: &EnergyProfile, target: f32) {
    use std::fmt::Write as _;
    let _ = writeln!(
        out,
        "each rule over the same records, judged by the same rule (target: {} % lost):",
        target * 100.0
    );
    // The rule column fits the longest name (at least 34 characters).
    let w = rows
        .iter()
        .map(|r| r.rule.chars().count() + 1)
        .max()
        .unwrap_or(0)
        .max(34);
    let _ = writeln!(
        out,
        "  {:<w$}{:>9}{:>16}{:>11}{:>12}{:>13}",
        "rule", "lost %", "µC/delivered", "mean µA", "life days", "max duty %"
    );
    for r in rows {
        let v = r.json(p);
        let num = |k: &str, scale: f64, d: usize| {
            v[k].as_f64()
                .map_or_else(|| "n/a".to_string(), |x| format!("{:.d$}", x * scale))
        };
        let allowed = r.allowed_loss.unwrap_or(f64::from(target));
        let miss = if r.loss().is_some_and(|l| l > allowed) {
            "  misses the target"
        } else {
            ""
        };
        let _ = writeln!(
            out,
            "  {:<w$}{:>9}{:>16}{:>11}{:>12}{:>13}{miss}",
            r.rule,
            num("loss_fraction", 100.0, 3),
            num("charge_per_delivered_uc", 1.0, 1),
            num("mean_current_ua", 1.0, 2),
            num("battery_life_days", 1.0, 0),
            num("max_duty_fraction", 100.0, 3),
        );
    }
}
