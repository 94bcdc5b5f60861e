//! What `headroom tune` prints: the table, the JSON object and the JSON
//! lines, from the fleet totals of every candidate and the front computed
//! once ([`super::front`]).

use std::fmt::Write as _;

use headroom::control::settings::Resolved;
use headroom::control::Fleet;
use headroom::energy::ReplayEnergy;
use serde_json::{Map, Value};

use super::front::Point;
use super::sweep::Grid;
use crate::fleet::report::{settings_json, settings_table, summary_json, value_json};
use crate::output::json_num;

/// Everything the table, the JSON and the plot show.
pub struct TuneResult<'a> {
    /// The grid.
    pub grid: &'a Grid,
    /// The logs, by name.
    pub logs: &'a [String],
    /// Fleet totals of each candidate (0: the default).
    pub fleets: &'a [Fleet],
    /// Each candidate's (mean power, loss) point.
    pub points: &'a [Option<Point>],
    /// On the Pareto front.
    pub front: &'a [bool],
    /// The front by rising power.
    pub front_order: &'a [usize],
    /// The candidate of least power that meets the target.
    pub best: Option<usize>,
    /// The cheapest setting of the grid that loses no more than the default.
    pub beats: Option<usize>,
    /// The loss target.
    pub target: f32,
    /// Every device must meet the target, not only the pooled fleet.
    pub each_device: bool,
    /// The default's settings on the first log (sources included).
    pub base: &'a Resolved,
    /// What the points measure against the loss.
    pub objective: super::Objective,
    /// Each candidate's energy, with a profile.
    pub energies: Option<&'a [ReplayEnergy]>,
}

impl TuneResult<'_> {
    /// Whether candidate `cand` meets the target: the pooled loss, and with
    /// `--each-device` every device's own loss.
    pub fn meets(&self, cand: usize) -> bool {
        let Some(f) = self.fleets.get(cand) else {
            return false;
        };
        let pooled = f.total.outage_fraction().is_some_and(|o| o <= self.target);
        pooled && (!self.each_device || f.missing_target == 0)
    }

    fn worst(&self, cand: usize) -> (Option<f32>, Option<&str>) {
        let w = self.fleets.get(cand).and_then(|f| f.worst);
        (
            w.map(|w| w.0),
            w.and_then(|(_, k)| usize::try_from(k).ok())
                .and_then(|k| self.logs.get(k))
                .map(String::as_str),
        )
    }

    fn point(&self, cand: usize) -> Value {
        let mut m = Map::new();
        m.insert("candidate".into(), cand.into());
        m.insert("settings".into(), Value::Object(self.swept_values(cand)));
        m.insert("meets_target".into(), self.meets(cand).into());
        m.insert(
            "on_front".into(),
            self.front.get(cand).copied().unwrap_or(false).into(),
        );
        if let Some(f) = self.fleets.get(cand) {
            let (w, log) = self.worst(cand);
            m.insert(
                "worst_outage_fraction".into(),
                w.map_or(Value::Null, json_num),
            );
            m.insert("worst_log".into(), log.map_or(Value::Null, Value::from));
            m.insert("devices_missing_target".into(), f.missing_target.into());
            m.extend(summary_json(&f.total));
        }
        if let Some(e) = self.energies.and_then(|es| es.get(cand)) {
            let mut x = Map::new();
            let t = &e.replayed;
            x.insert(
                "charge_per_packet_uc".into(),
                t.charge_per_packet().map_or(Value::Null, |q| json_num(q.0)),
            );
            x.insert(
                "charge_per_delivered_uc".into(),
                t.charge_per_delivered()
                    .map_or(Value::Null, |q| json_num(q.0)),
            );
            x.insert(
                "mean_current_ua".into(),
                t.mean_current().map_or(Value::Null, |i| json_num(i.0)),
            );
            m.insert("energy".into(), Value::Object(x));
        }
        Value::Object(m)
    }

    /// The swept settings' values of candidate `cand`; for the default, the
    /// values it has on the first log.
    fn swept_values(&self, cand: usize) -> Map<String, Value> {
        if cand > 0 {
            return self.grid.settings_json(cand);
        }
        self.grid
            .sweeps
            .iter()
            .map(|sw| {
                (
                    sw.setting.key().to_string(),
                    value_json(self.base.value(sw.setting)),
                )
            })
            .collect()
    }

    /// Change of candidate `k` against the default: (mean power dB, loss rate).
    /// (Always mean power and loss, whatever the objective of the points.)
    fn versus_default(&self, k: Option<usize>) -> Option<(f64, f64)> {
        let point = |c: usize| {
            let t = &self.fleets.get(c)?.total;
            Some((
                f64::from(t.mean_tx_dbm()?.0),
                f64::from(t.outage_fraction()?),
            ))
        };
        let (b, d) = (point(k?)?, point(0)?);
        Some((b.0 - d.0, b.1 - d.1))
    }

    #[allow(clippy::cast_possible_truncation)]
    fn versus_json(&self, k: Option<usize>) -> Value {
        self.versus_default(k).map_or(Value::Null, |(db, loss)| {
            let mut v = Map::new();
            v.insert("mean_tx_change_db".into(), json_num(db as f32));
            v.insert("outage_change".into(), json_num(loss as f32));
            Value::Object(v)
        })
    }

    /// The JSON object.
    pub fn json(&self) -> Value {
        let mut m = Map::new();
        m.insert(
            "logs".into(),
            Value::Array(self.logs.iter().map(|p| Value::from(p.as_str())).collect()),
        );
        m.insert(
            "swept".into(),
            Value::Array(
                self.grid
                    .sweeps
                    .iter()
                    .map(|s| Value::from(s.setting.key()))
                    .collect(),
            ),
        );
        m.insert("comparable".into(), (!self.grid.incomparable).into());
        m.insert("combinations".into(), self.grid.len.into());
        m.insert("target_outage".into(), json_num(self.target));
        m.insert("each_device".into(), self.each_device.into());
        m.insert(
            "objective".into(),
            match self.objective {
                super::Objective::Power => "power",
                super::Objective::Charge => "charge",
                super::Objective::BatteryLife => "battery-life",
            }
            .into(),
        );
        m.insert("base_settings".into(), settings_json(self.base));
        m.insert("default".into(), self.point(0));
        m.insert(
            "best".into(),
            self.best.map_or(Value::Null, |k| self.point(k)),
        );
        m.insert("best_vs_default".into(), self.versus_json(self.best));
        m.insert(
            "beats_default".into(),
            self.beats.map_or(Value::Null, |k| self.point(k)),
        );
        m.insert(
            "beats_default_vs_default".into(),
            self.versus_json(self.beats),
        );
        m.insert(
            "front".into(),
            Value::Array(self.front_order.iter().map(|&k| self.point(k)).collect()),
        );
        m.insert(
            "points".into(),
            Value::Array((1..self.fleets.len()).map(|k| self.point(k)).collect()),
        );
        Value::Object(m)
    }

    /// The table.
    pub fn table(&self, all: bool) -> String {
        let mut s = String::new();
        let records = self.fleets.first().map_or(0, |t| t.total.records);
        let _ = writeln!(s, "logs            {} ({records} records)", self.logs.len());
        let _ = writeln!(s, "combinations    {} (+ the default)", self.grid.len);
        let _ = writeln!(
            s,
            "target_outage   {:.3} % lost{}",
            100.0 * self.target,
            if self.each_device {
                ", by every device (--each-device)"
            } else {
                ", pooled over the fleet"
            }
        );
        if self.grid.incomparable {
            let _ = writeln!(
                s,
                "NOT COMPARABLE: the grid varies the judging rule or the radio's facts \
                 (--incomparable); candidates are not judged alike"
            );
        }
        let _ = writeln!(s);
        let _ = write!(
            s,
            "{}",
            if self.logs.len() > 1 {
                "the default's "
            } else {
                ""
            }
        );
        settings_table(&mut s, self.base);
        if self.logs.len() > 1 {
            let _ = writeln!(
                s,
                "  (of {}; each log takes its own header's values)",
                self.logs.first().map_or("", String::as_str)
            );
        }

        let mut head: Vec<String> = vec!["candidate".into()];
        head.extend(self.grid.sweeps.iter().map(|x| x.setting.key().to_string()));
        head.extend(["lost %", "worst device %", "mean tx dBm", "vs logged dB"].map(String::from));
        if self.energies.is_some() {
            head.extend(["µC per delivered", "mean µA"].map(String::from));
        }
        head.push(String::new());
        let row = |cand: usize| -> Vec<String> {
            let mut r = vec![if cand == 0 {
                "default".to_string()
            } else {
                cand.to_string()
            }];
            let swept = self.swept_values(cand);
            for sw in &self.grid.sweeps {
                r.push(
                    swept
                        .get(sw.setting.key())
                        .map_or_else(String::new, Value::to_string),
                );
            }
            let f = self.fleets.get(cand).copied().unwrap_or_default();
            let show = |x: Option<f64>, scale: f64, d: usize| {
                x.map_or("n/a".into(), |x| format!("{:.*}", d, x * scale))
            };
            r.push(show(f.total.outage_fraction().map(f64::from), 100.0, 3));
            r.push(show(self.worst(cand).0.map(f64::from), 100.0, 3));
            r.push(show(f.total.mean_tx_dbm().map(|d| f64::from(d.0)), 1.0, 2));
            r.push(show(
                f.total.saving_vs_logged_db().map(|d| f64::from(d.0)),
                1.0,
                2,
            ));
            if let Some(e) = self.energies.and_then(|es| es.get(cand)) {
                r.push(show(
                    e.replayed.charge_per_delivered().map(|q| f64::from(q.0)),
                    1.0,
                    1,
                ));
                r.push(show(
                    e.replayed.mean_current().map(|i| f64::from(i.0)),
                    1.0,
                    2,
                ));
            }
            let mut marks = Vec::new();
            if Some(cand) == self.best {
                marks.push("best");
            }
            if Some(cand) == self.beats {
                marks.push("beats default");
            }
            if self.front.get(cand).copied().unwrap_or(false) {
                marks.push("front");
            }
            if !self.meets(cand) {
                marks.push("misses target");
            }
            r.push(marks.join(", "));
            r
        };
        let listed: Vec<usize> = if all {
            (0..self.fleets.len()).collect()
        } else {
            self.front_order.to_vec()
        };
        let mut rows = vec![head, row(0)];
        rows.extend(listed.iter().filter(|&&k| k != 0).map(|&k| row(k)));
        let widths: Vec<usize> = (0..rows.first().map_or(0, Vec::len))
            .map(|c| {
                rows.iter()
                    .filter_map(|r| r.get(c))
                    .map(|x| x.chars().count())
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let _ = writeln!(s);
        let on_front = self.front.iter().filter(|&&b| b).count();
        if all {
            let _ = writeln!(
                s,
                "every candidate ({on_front} of {} on the Pareto front):",
                self.fleets.len()
            );
        } else {
            let _ = writeln!(
                s,
                "the default, then the Pareto front by rising {} ({on_front} of {} candidates):",
                match self.objective {
                    super::Objective::Power => "mean power",
                    super::Objective::Charge => "charge per delivered packet",
                    super::Objective::BatteryLife => "mean current",
                },
                self.fleets.len()
            );
        }
        for r in &rows {
            let line: Vec<String> = r
                .iter()
                .zip(&widths)
                .map(|(c, w)| format!("{c:<w$}"))
                .collect();
            let _ = writeln!(s, "  {}", line.join("  ").trim_end());
        }
        let _ = writeln!(s);
        match (self.best, self.versus_default(self.best)) {
            (Some(0), _) => {
                let _ = writeln!(
                    s,
                    "best: the default (no setting of the grid meets the target at less power)"
                );
            }
            (Some(k), Some((db, loss))) => {
                let _ = writeln!(
                    s,
                    "best: candidate {k} ({}): {db:+.2} dB of mean power, {:+.3} points of loss against the default",
                    self.grid.label(k),
                    100.0 * loss
                );
            }
            (Some(k), None) => {
                let _ = writeln!(s, "best: candidate {k} ({})", self.grid.label(k));
            }
            (None, _) => {
                let _ = writeln!(
                    s,
                    "best: none (no candidate meets the target of {:.3} % lost{})",
                    100.0 * self.target,
                    if self.each_device {
                        " on every device"
                    } else {
                        ""
                    }
                );
            }
        }
        match (self.beats, self.versus_default(self.beats)) {
            (Some(k), Some((db, loss))) => {
                let _ = writeln!(
                    s,
                    "beats the default: candidate {k} ({}): {db:+.2} dB of mean power, {:+.3} points of loss",
                    self.grid.label(k),
                    100.0 * loss
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    "beats the default: none (no setting of the grid meets the target and loses no more for less power)"
                );
            }
        }
        s
    }
}

/// One JSON line of `--format jsonl`: a (log, candidate) replay, with the
/// linear sums that add up lines from many machines.
pub fn jsonl_line(
    grid: &Grid,
    cand: usize,
    log: &str,
    s: &headroom::control::Summary,
) -> crate::error::CliResult<String> {
    let mut m = Map::new();
    m.insert("log".into(), log.into());
    m.insert("candidate".into(), cand.into());
    m.insert("default".into(), (cand == 0).into());
    m.insert("settings".into(), Value::Object(grid.settings_json(cand)));
    m.extend(summary_json(s));
    crate::output::json_line(&Value::Object(m))
}
