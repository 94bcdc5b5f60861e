//! With an empty rate table, or a table of one rate whose required SNR is
//! the `required_snr_db` setting, and no duty limit, every decision and
//! every total of a replay is the power-only controller's, bit for bit: on
//! the bundled field logs (`examples/logs`) and on the fault scenarios
//! (`examples/scenarios/faults`), with and without an energy profile.

use std::path::{Path, PathBuf};

use headroom::control::settings::for_log;
use headroom::control::{ControllerConfig, Replay, ReplayStep, Summary, REPLAY_WINDOW};
use headroom::energy::{
    EnergyProfile, Microamps, Microcoulombs, Milliamps, Milliseconds, TxCurrentTable, Volts,
};
use headroom::rate::{Rate, RateTable};
use headroom::record::{LogHeader, LogRecord};
use headroom::sim::{ChannelConfig, Fault, PowerPattern, Synth, MAX_FAULTS};
use headroom::units::{Db, Dbi, Dbm};
use serde::Deserialize;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// A CSV log of the bundled examples with the standard columns
/// (`t_ms,tx_dbm,rssi_dbm,noise_dbm`) and its `# key: value` header, read
/// here with the csv crate (only what this test needs: the product's reader
/// is the host's `logio`).
fn read_csv(path: &Path) -> Option<(LogHeader, Vec<LogRecord>)> {
    let text = std::fs::read_to_string(path).expect("readable log");
    let mut h = LogHeader::default();
    let mut body = String::new();
    for line in text.lines() {
        if let Some(kv) = line.strip_prefix("# ") {
            if let Some((k, v)) = kv.split_once(':') {
                let x: Option<f32> = v.trim().parse().ok();
                match k.trim() {
                    "min_tx_dbm" => h.min_tx = x.map(Dbm),
                    "max_tx_dbm" => h.max_tx = x.map(Dbm),
                    "tx_step_db" => h.tx_step = x.map(Db),
                    "antenna_gain_dbi" => h.antenna_gain = x.map(Dbi),
                    "required_snr_db" => h.required_snr = x.map(Db),
                    "eirp_cap_dbm" => h.eirp_cap = x.map(Dbm),
                    _ => {}
                }
            }
        } else {
            body.push_str(line);
            body.push('\n');
        }
    }
    let mut rd = csv::Reader::from_reader(body.as_bytes());
    let cols: Vec<String> = rd.headers().ok()?.iter().map(str::to_string).collect();
    if cols != ["t_ms", "tx_dbm", "rssi_dbm", "noise_dbm"] {
        return None;
    }
    let cell = |s: &str| -> Option<f32> { s.trim().parse().ok() };
    let recs = rd
        .records()
        .map(|r| {
            let r = r.expect("csv row");
            LogRecord {
                t_ms: r.get(0).and_then(|s| s.trim().parse().ok()).expect("time"),
                tx_dbm: r.get(1).and_then(cell),
                rssi_dbm: r.get(2).and_then(cell),
                noise_dbm: r.get(3).and_then(cell),
                rate: None,
            }
        })
        .collect();
    Some((h, recs))
}

/// The parts of a scenario file the test needs (`description` and `[radio]`
/// are not needed here).
#[derive(Deserialize)]
struct Scenario {
    channel: ChannelConfig,
    power: PowerPattern,
    #[serde(default)]
    faults: Vec<Fault>,
}

fn logs() -> Vec<(String, ControllerConfig, Vec<LogRecord>)> {
    let mut out = Vec::new();
    let mut files = Vec::new();
    for dir in [
        "examples/logs",
        "examples/logs/faults",
        "examples/logs/devices",
    ] {
        for e in std::fs::read_dir(root().join(dir)).expect("examples") {
            let p = e.expect("entry").path();
            if p.extension().is_some_and(|x| x == "csv") {
                files.push(p);
            }
        }
    }
    files.sort();
    for p in files {
        if let Some((h, recs)) = read_csv(&p) {
            let cfg = for_log(Some(&h)).expect("settings").config;
            out.push((p.display().to_string(), cfg, recs));
        }
    }
    assert!(out.len() >= 10, "bundled logs: {}", out.len());
    let mut files: Vec<PathBuf> = std::fs::read_dir(root().join("examples/scenarios/faults"))
        .expect("scenarios")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    for p in files {
        let sc: Scenario = toml::from_str(&std::fs::read_to_string(&p).expect("readable"))
            .unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        let mut s = Synth::<MAX_FAULTS>::new(sc.channel, sc.power, &sc.faults, 7).expect("valid");
        let recs = (0..3000)
            .map(|_| s.next_record().expect("record").1)
            .collect();
        out.push((
            p.display().to_string(),
            ControllerConfig::sub_ghz_node(),
            recs,
        ));
    }
    out
}

/// An invented energy profile covering −30..+40 dBm.
fn profile() -> EnergyProfile {
    let t = TxCurrentTable::from_points(&[(-30.0, 15.0), (0.0, 25.0), (20.0, 90.0), (40.0, 900.0)])
        .expect("table");
    EnergyProfile::new(
        Volts(3.3),
        t,
        Milliseconds(60.0),
        Milliseconds(20.0),
        Milliamps(10.0),
        Microcoulombs(30.0),
        Microamps(2.0),
    )
    .expect("profile")
}

/// Everything a step says about the power, the outcome and the reasons.
fn power_part(s: &ReplayStep) -> impl PartialEq + std::fmt::Debug {
    (
        s.t_ms,
        s.chosen.0.to_bits(),
        s.replayed_snr.map(|x| x.0.to_bits()),
        s.outcome,
        s.logged_lost,
        s.at_max,
        s.path_loss_estimate.map(|x| x.0.to_bits()),
        s.margin.0.to_bits(),
        s.reason,
        s.next_tx.0.to_bits(),
    )
}

/// Every total the power-only summary has.
fn power_totals(s: &Summary) -> impl PartialEq + std::fmt::Debug {
    (
        (s.logs, s.records, s.judged, s.lost, s.unjudged),
        (s.judged_at_max, s.lost_at_max, s.power_changes),
        s.max_tx_dbm_used.map(|x| x.0.to_bits()),
        s.ignored_readings,
        (s.tx_mw_sum.to_bits(), s.max_mw_sum.to_bits()),
        (
            s.logged.judged,
            s.logged.lost,
            s.logged.without_readings,
            s.logged.records_with_tx,
            s.logged.tx_mw_sum.to_bits(),
            s.logged.chosen_mw_sum.to_bits(),
        ),
        s.max_allowed.0.to_bits(),
        (s.held, s.duty_limited, s.rate_changes),
    )
}

#[test]
fn no_table_or_one_rate_is_the_power_only_controller_bit_for_bit() {
    let p = profile();
    for (name, cfg, recs) in logs() {
        let one = ControllerConfig {
            rates: RateTable::new(&[
                Rate::new("only", cfg.required_snr_db, 50_000, Some(125e3)).expect("rate")
            ])
            .expect("table"),
            ..cfg
        };
        let mut plain = Replay::<REPLAY_WINDOW>::new(cfg).expect("valid");
        let mut variants = [
            Replay::<REPLAY_WINDOW>::new(one).expect("one rate"),
            Replay::<REPLAY_WINDOW>::with_energy(cfg, &p).expect("profile"),
            Replay::<REPLAY_WINDOW>::with_energy(one, &p).expect("one rate, profile"),
        ];
        for (k, rec) in recs.iter().enumerate() {
            // The one-rate table has bandwidths: its records say their rate.
            let at_rate = LogRecord {
                rate: Some(0),
                ..*rec
            };
            let want = plain.step(rec);
            for (v, r) in variants.iter_mut().enumerate() {
                let got = r.step(if v == 1 { rec } else { &at_rate });
                assert_eq!(
                    power_part(&got),
                    power_part(&want),
                    "{name}: record {k}, variant {v}"
                );
            }
        }
        for (v, r) in variants.iter().enumerate() {
            assert_eq!(
                power_totals(r.summary()),
                power_totals(plain.summary()),
                "{name}: variant {v}"
            );
        }
        // With a profile, the charge is counted; without one, not.
        assert!(plain.summary().charge_per_delivered_uc().is_none());
        assert!(
            variants[1].summary().charge_uc > 0.0 || plain.summary().records == 0,
            "{name}"
        );
    }
}
