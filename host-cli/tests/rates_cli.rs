//! Rates through the `headroom` binary: the rate table from an energy
//! profile or a log's header, with its source; the new settings' flags; the
//! per-rate report in the table and JSON, which must be the engine's own
//! numbers; `--out` with the chosen rate; and the refusals.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use headroom::control::settings::{self, Layer, Setting, Value};
use headroom::control::{DutyLimit, Replay, REPLAY_WINDOW};
use headroom::rate::RateName;

fn headroom(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .output()
        .expect("run headroom")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn example(rel: &str) -> String {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    root.join(rel).to_string_lossy().into_owned()
}

fn json(o: &Output) -> serde_json::Value {
    assert!(o.status.success(), "failed: {}", stderr(o));
    serde_json::from_slice(&o.stdout).expect("one JSON object")
}

const ORCHARD_LOG: &str = "examples/logs/orchard-868.csv";
const ORCHARD_RATES: &str = "examples/energy/orchard-868-rates.toml";

fn orchard_json(extra: &[&str]) -> serde_json::Value {
    let (log, prof) = (example(ORCHARD_LOG), example(ORCHARD_RATES));
    let mut args = vec![
        "replay",
        log.as_str(),
        "--energy",
        prof.as_str(),
        "--format",
        "json",
    ];
    args.extend_from_slice(extra);
    let v = json(&headroom(&args));
    v["logs"][0].clone()
}

/// The host's numbers are the engine's: the same replay run here through
/// the engine alone (settings resolved by the engine, the profile loaded by
/// the host's one reader) gives the same per-rate counts and charge.
#[test]
fn the_per_rate_report_is_the_engines_replay() {
    let l = orchard_json(&["--logged-rate", "sf9", "--duty-limit", "1%"]);
    let rates = &l["rates"];
    assert_eq!(rates["source"], "energy-profile");
    assert_eq!(l["settings"]["rates"]["source"], "energy-profile");
    assert_eq!(l["settings"]["duty_limit"]["value"], 0.01);
    assert_eq!(l["settings"]["duty_limit"]["source"], "flag");
    assert_eq!(l["settings"]["logged_rate"]["value"], "sf9");
    let table = rates["table"].as_array().expect("table");
    assert_eq!(table.len(), 6);

    // The engine alone.
    let prof = headroom_cli::energy::load(Path::new(&example(ORCHARD_RATES))).unwrap();
    let log = headroom_cli::logio::open(Path::new(&example(ORCHARD_LOG))).unwrap();
    let header = log.header().copied();
    let mut flags = Layer::empty();
    flags.set(Setting::Rates, Value::Rates(prof.rates)).unwrap();
    flags
        .set(Setting::DutyLimit, Value::Duty(DutyLimit::AtMost(0.01)))
        .unwrap();
    flags
        .set(
            Setting::LoggedRate,
            Value::Rate(Some(RateName::new("sf9").unwrap())),
        )
        .unwrap();
    let h = header
        .as_ref()
        .map_or_else(Layer::empty, Layer::from_header);
    let resolved = settings::resolve(&flags, &h, &Layer::empty(), &Layer::defaults()).unwrap();
    let mut replay = Replay::<REPLAY_WINDOW>::with_energy(resolved.config, &prof.profile).unwrap();
    for rec in log {
        replay.step(&rec.unwrap());
    }
    let s = replay.summary();
    assert_eq!(l["records"], s.records);
    assert_eq!(l["lost"], s.lost);
    assert_eq!(l["held"], s.held);
    assert_eq!(l["duty_limited"], s.duty_limited);
    assert_eq!(l["rate_changes"], s.rate_changes);
    let want = s.charge_per_delivered_uc().unwrap();
    let got = l["charge_per_delivered_uc"].as_f64().unwrap();
    assert!((got - want).abs() <= 1e-12 * want, "{got} vs {want}");
    // One rule for charge per delivered packet: the summary's and the
    // energy tally's (an f32) agree.
    let tally = l["energy"]["replayed"]["charge_per_delivered_uc"]
        .as_f64()
        .unwrap();
    assert!((tally - want).abs() <= 1e-6 * want, "{tally} vs {want}");
    let mut shares = 0.0;
    for (i, row) in table.iter().enumerate() {
        let t = s.per_rate[i];
        assert_eq!(row["packets"], t.packets, "{row}");
        assert_eq!(row["lost"], t.lost, "{row}");
        // JSON keeps the digits; serde_json's reader may miss the last bit.
        let c = row["charge_uc"].as_f64().unwrap();
        assert!(
            (c - t.charge_uc).abs() <= 1e-12 * t.charge_uc.abs(),
            "{row}"
        );
        shares += row["share"].as_f64().unwrap();
    }
    assert!((shares - 1.0).abs() < 1e-6, "{shares}");
}

#[test]
fn the_table_shows_the_rates_in_force_and_their_source() {
    let (log, prof) = (example(ORCHARD_LOG), example(ORCHARD_RATES));
    let o = headroom(&["replay", &log, "--energy", &prof, "--logged-rate", "sf9"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("rate table in force (source: energy-profile):"),
        "{out}"
    );
    assert!(
        out.contains("  sf12        -20.0 dB  1318.912 ms   125.0 kHz"),
        "{out}"
    );
    assert!(out.contains("charge_per_delivered"), "{out}");
    assert!(
        out.contains("duty_limit            none (no limit given)"),
        "{out}"
    );
    // Without a rate table: no rate block, and the duty limit is still shown.
    let plain = example("examples/energy/orchard-868.toml");
    let o = headroom(&["replay", &log, "--energy", &plain]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(!out.contains("rate table in force"), "{out}");
    assert!(out.contains("duty_limit"), "{out}");
}

#[test]
fn a_log_without_its_rate_is_not_judged_across_bandwidths() {
    // The table gives noise bandwidths and the log does not say its rate:
    // never guessed, every record with readings is counted apart.
    let l = orchard_json(&[]);
    assert_eq!(l["judged"], 0);
    assert_eq!(l["ignored_readings"]["ignored_rate_unknown"], 29270);
}

fn rated_log(dir: &Path, rate_line: &str, rate_cell: &str) -> PathBuf {
    let p = dir.join("rated.csv");
    let mut text = format!(
        "# headroom-log 1.2\n# min_tx_dbm: 2\n# max_tx_dbm: 14\n# tx_step_db: 1\n{rate_line}\
         t_ms,tx_dbm,rssi_dbm,noise_dbm,rate\n"
    );
    for k in 0..200u64 {
        let rssi = -110.0 - (k % 7) as f32;
        text.push_str(&format!("{},14,{rssi},-117,{rate_cell}\n", k * 300_000));
    }
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn out_names_the_chosen_rate_and_a_foreign_rate_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let log = rated_log(
        dir.path(),
        "# rate: sf9, -12.5 dB, 185.344 ms, 125 kHz\n",
        "sf9",
    );
    let out = dir.path().join("d.csv");
    let prof = example(ORCHARD_RATES);
    let o = headroom(&[
        "replay",
        log.to_str().unwrap(),
        "--energy",
        &prof,
        "--out",
        out.to_str().unwrap(),
        "--format",
        "json",
    ]);
    let v = json(&o);
    let text = std::fs::read_to_string(&out).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some("t_ms,chosen_tx_dbm,replayed_snr_db,outcome,logged_outcome,at_max,path_loss_db,margin_db,reason,rate,airtime_us,charge_uc")
    );
    // Rows per rate name = the report's packets per rate.
    let table = v["logs"][0]["rates"]["table"].as_array().unwrap().clone();
    for row in &table {
        let name = row["name"].as_str().unwrap();
        let n = text
            .lines()
            .skip(1)
            .filter(|l| l.split(',').nth(9) == Some(name))
            .count();
        assert_eq!(row["packets"], n as u64, "{name}");
    }
    // The log's header table (sf9 only) differs from the profile's: its
    // records are read by name; the rate in force comes from the profile.
    assert_eq!(v["logs"][0]["rates"]["source"], "energy-profile");

    // A log whose packets used a rate the table in force does not have.
    let log = rated_log(dir.path(), "# rate: fsk, 8 dB, 4 ms, 125 kHz\n", "fsk");
    let o = headroom(&["replay", log.to_str().unwrap(), "--energy", &prof]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("rated.csv: record at t_ms 0: the packet's rate 'fsk' is not in the rate table in force"),
        "{e}"
    );
    assert_eq!(e.lines().count(), 1, "{e}");
}

#[test]
fn the_header_table_is_used_without_a_profile_table() {
    let dir = tempfile::tempdir().unwrap();
    let log = rated_log(
        dir.path(),
        "# rate: sf9, -12.5 dB, 185.344 ms, 125 kHz\n",
        "sf9",
    );
    let plain = example("examples/energy/orchard-868.toml");
    let o = headroom(&[
        "replay",
        log.to_str().unwrap(),
        "--energy",
        &plain,
        "--format",
        "json",
    ]);
    let l = json(&o)["logs"][0].clone();
    assert_eq!(l["rates"]["source"], "log-header");
    assert_eq!(l["settings"]["rates"]["value"][0], "sf9");
    assert_eq!(l["rates"]["table"][0]["packets"], 200);
}

#[test]
fn new_settings_refuse_bad_values_in_one_line() {
    let log = example(ORCHARD_LOG);
    let prof = example(ORCHARD_RATES);
    for (args, want) in [
        (vec!["--duty-limit", "150%"], "duty_limit"),
        (vec!["--logged-rate", "sf 9"], "--logged-rate"),
        (vec!["--logged-rate", "sf13"], "logged_rate"),
        (vec!["--set", "rate_hysteresis=2"], "rate_hysteresis"),
        (vec!["--set", "rates=sf7"], "rates"),
    ] {
        let mut all = vec!["replay", log.as_str(), "--energy", prof.as_str()];
        all.extend(args.iter().copied());
        let o = headroom(&all);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        let e = stderr(&o);
        assert!(e.contains(want), "{args:?}: {e}");
        assert_eq!(e.lines().count(), 1, "{args:?}: {e}");
    }
}

#[test]
fn tune_sweeps_the_rate_settings_and_the_choice_of_table() {
    let dir = tempfile::tempdir().unwrap();
    let log = example(ORCHARD_LOG);
    let prof = example(ORCHARD_RATES);
    // A second table: the slow rates only (sf9 and slower), same profile.
    let text = std::fs::read_to_string(&prof).unwrap();
    let cut = text.find("[[rate]]\nname = \"sf7\"").unwrap();
    let slow_text = text[..cut].to_string()
        + &text[cut..]
            .split("[[rate]]")
            .filter(|e| !e.contains("\"sf7\"") && !e.contains("\"sf8\"") && !e.trim().is_empty())
            .map(|e| format!("[[rate]]{e}"))
            .collect::<String>();
    let slow = dir.path().join("slow.toml");
    std::fs::write(&slow, slow_text).unwrap();
    let sweep = format!("rates={prof},{}", slow.display());
    let o = headroom(&[
        "tune",
        &log,
        "--energy",
        &prof,
        "--logged-rate",
        "sf9",
        "--objective",
        "charge",
        "--sweep",
        &sweep,
        "--sweep",
        "rate_dwell=4,16",
        "--format",
        "json",
        "--quiet",
    ]);
    let v = json(&o);
    let cands = v["points"].as_array().expect("points");
    assert_eq!(cands.len(), 4, "{v}");
    // Each candidate names its table by its file; the slow table costs more
    // per delivered packet on this close, static link (sf7 is available to
    // the full table only).
    let cost = |file: &str| -> f64 {
        cands
            .iter()
            .filter(|c| c["settings"]["rates"] == file)
            .map(|c| c["charge_per_delivered_uc"].as_f64().unwrap())
            .fold(f64::INFINITY, f64::min)
    };
    let (full, slow_cost) = (cost(&prof), cost(&slow.display().to_string()));
    assert!(full.is_finite() && slow_cost.is_finite(), "{v}");
    assert!(full < slow_cost, "{full} vs {slow_cost}");
    // A rate table sweep needs the costs.
    let o = headroom(&["tune", &log, "--sweep", &sweep, "--quiet"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--sweep: rates:"), "{}", stderr(&o));
    // A profile without [[rate]] entries is not a table.
    let plain = example("examples/energy/orchard-868.toml");
    let o = headroom(&[
        "tune",
        &log,
        "--energy",
        &prof,
        "--sweep",
        &format!("rates={plain}"),
        "--quiet",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("has no [[rate]] entries"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn baselines_compare_every_rule_and_the_joint_row_is_the_replay() {
    let (log, prof) = (example(ORCHARD_LOG), example(ORCHARD_RATES));
    let v = json(&headroom(&[
        "replay",
        &log,
        "--energy",
        &prof,
        "--logged-rate",
        "sf9",
        "--baselines",
        "--format",
        "json",
    ]));
    let rows = v["logs"][0]["baselines"].as_array().expect("rows").clone();
    let rules: Vec<&str> = rows.iter().map(|r| r["rule"].as_str().unwrap()).collect();
    assert_eq!(rules.len(), 1 + 6 + 2, "{rules:?}");
    assert_eq!(rules[0], "joint (rate, power)");
    assert_eq!(rules[1], "power-only sf7");
    assert_eq!(rules[6], "power-only sf12");
    assert_eq!(rules[7], "common practice");
    assert!(rules[8].starts_with("hindsight: "), "{rules:?}");
    for r in &rows {
        for k in [
            "loss_fraction",
            "charge_per_delivered_uc",
            "mean_current_ua",
            "battery_life_days",
            "max_duty_fraction",
        ] {
            assert!(r[k].is_number(), "{k}: {r}");
        }
    }
    // The joint row is the replay's own numbers (the engine's replay and
    // its energy tally), not a second computation.
    let l = orchard_json(&["--logged-rate", "sf9"]);
    assert_eq!(rows[0]["lost"], l["lost"]);
    assert_eq!(
        rows[0]["charge_per_delivered_uc"],
        l["energy"]["replayed"]["charge_per_delivered_uc"]
    );
    assert_eq!(
        rows[0]["mean_current_ua"],
        l["energy"]["replayed"]["mean_current_ua"]
    );
    // Slower rates cost more per delivered packet on this close link.
    let cost = |i: usize| rows[i]["charge_per_delivered_uc"].as_f64().unwrap();
    assert!((1..6).all(|i| cost(i) < cost(i + 1)), "{rows:?}");
    // The hindsight row meets the target (1 %).
    assert!(rows[8]["loss_fraction"].as_f64().unwrap() <= 0.01);

    // Without a rate table there is nothing to compare.
    let plain = example("examples/energy/orchard-868.toml");
    let o = headroom(&["replay", &log, "--energy", &plain, "--baselines"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--baselines:"), "{}", stderr(&o));
    // Nor without an energy profile.
    let o = headroom(&["replay", &log, "--baselines"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--energy"), "{}", stderr(&o));
}

#[test]
fn synth_logs_at_a_rate_schedule() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("s.csv");
    let scen = example("examples/scenarios/orchard-868.toml");
    let prof = example(ORCHARD_RATES);
    let o = headroom(&[
        "synth",
        "--scenario",
        &scen,
        "--seed",
        "4",
        "--records",
        "60",
        "--out",
        out.to_str().unwrap(),
        "--rates",
        &prof,
        "--rate-schedule",
        "sf7,sf12",
        "--rate-hold",
        "10",
        "--format",
        "json",
    ]);
    let v = json(&o);
    assert_eq!(v["rate_schedule"], "sf7,sf12");
    assert_eq!(v["rate_hold"], 10);
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(
        text.contains("# rate: sf12, -20 dB, 1318.912 ms, 125000 Hz\n"),
        "{text}"
    );
    let rates: Vec<&str> = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.rsplit(',').next().unwrap())
        .collect();
    assert_eq!(rates.len(), 60);
    for (k, r) in rates.iter().enumerate() {
        assert_eq!(*r, if (k / 10) % 2 == 0 { "sf7" } else { "sf12" }, "{k}");
    }
    // The log replays with its own table and rates.
    let o = headroom(&[
        "replay",
        out.to_str().unwrap(),
        "--energy",
        &prof,
        "--required-snr-db",
        "-7.5dB",
        "--format",
        "json",
    ]);
    let l = json(&o)["logs"][0].clone();
    assert_eq!(l["ignored_readings"]["ignored_rate_unknown"], 0, "{l}");
    // A name not in the table, and a schedule without its table.
    let o = headroom(&[
        "synth",
        "--scenario",
        &scen,
        "--seed",
        "4",
        "--records",
        "5",
        "--out",
        out.to_str().unwrap(),
        "--force",
        "--rates",
        &prof,
        "--rate-schedule",
        "sf6",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--rate-schedule: 'sf6' is not a rate of"),
        "{}",
        stderr(&o)
    );
    let o = headroom(&[
        "synth",
        "--scenario",
        &scen,
        "--seed",
        "4",
        "--records",
        "5",
        "--out",
        out.to_str().unwrap(),
        "--force",
        "--rate-schedule",
        "sf7",
    ]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn a_rate_column_without_header_lines_is_read_by_the_profiles_table() {
    let dir = tempfile::tempdir().unwrap();
    // A device's log: a rate column, no '# rate:' lines.
    let log = rated_log(dir.path(), "", "sf9");
    let prof = example(ORCHARD_RATES);
    let v = json(&headroom(&[
        "replay",
        log.to_str().unwrap(),
        "--energy",
        &prof,
        "--format",
        "json",
    ]));
    let l = &v["logs"][0];
    assert_eq!(l["rates"]["source"], "energy-profile");
    assert_eq!(l["ignored_readings"]["ignored_rate_unknown"], 0, "{l}");
    assert_eq!(l["judged"], 200);
    // A name the profile's table lacks is named with the table in force.
    let log = rated_log(dir.path(), "", "sf13");
    let o = headroom(&["replay", log.to_str().unwrap(), "--energy", &prof]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("column rate: 'sf13' is not a rate of the table in force (rates: sf7, sf8, sf9, sf10, sf11, sf12; the log's header has none)"),
        "{e}"
    );
    // convert has no table in force: the log must carry its own.
    let o = headroom(&[
        "convert",
        log.to_str().unwrap(),
        dir.path().join("x.hrlog").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("the log's header has no rate table"),
        "{}",
        stderr(&o)
    );
}

/// Where the joint controller's loss is not the target, the hindsight rule
/// is searched again at that loss (the comparison at equal loss), and that
/// row is not marked as missing the target.
#[test]
fn baselines_add_the_hindsight_rule_at_the_joint_controllers_loss() {
    let log = example("examples/logs/cattle-collar-915.csv");
    let prof = example("examples/energy/cattle-collar-915-rates.toml");
    let args = [
        "replay",
        &log,
        "--energy",
        &prof,
        "--logged-rate",
        "sf10",
        "--baselines",
    ];
    let v = json(&headroom(&[&args[..], &["--format", "json"]].concat()));
    let rows = v["logs"][0]["baselines"].as_array().expect("rows").clone();
    let loss = |r: &serde_json::Value| r["loss_fraction"].as_f64().unwrap();
    let joint = loss(&rows[0]);
    assert!(
        (joint - 0.01).abs() > 0.00005,
        "the joint loss is the target: {joint}"
    );
    let last = rows.last().unwrap();
    let rule = last["rule"].as_str().unwrap();
    assert!(rule.starts_with("at the joint's loss: "), "{rows:?}");
    assert!(loss(last) <= joint + 1e-12, "{last} against {joint}");
    assert_eq!(last["allowed_loss_fraction"].as_f64(), Some(joint));
    assert!(rows[rows.len() - 2]["rule"]
        .as_str()
        .unwrap()
        .starts_with("hindsight: "));
    let table = headroom(&args);
    let text = String::from_utf8_lossy(&table.stdout).into_owned();
    let line = text
        .lines()
        .find(|l| l.trim_start().starts_with("at the joint's loss"))
        .unwrap_or_else(|| panic!("{text}"));
    assert!(!line.contains("misses the target"), "{line}");
}
