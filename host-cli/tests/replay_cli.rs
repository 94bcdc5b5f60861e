//! `headroom replay` end to end: the settings in force and their sources,
//! the logged policy beside the replay, the JSON shape, the decisions
//! (CSV and binary), the plot, fleets, refusals of bad settings and of
//! overwriting, and readings that are ignored.

use headroom::control::settings::Setting;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn headroom(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("replay")
        .args(args)
        .output()
        .expect("run headroom")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn json(o: &Output) -> serde_json::Value {
    assert!(o.status.success(), "failed: {}", stderr(o));
    serde_json::from_slice(&o.stdout).expect("stdout is one JSON object")
}

/// The one log of a `--format json` result.
fn one(o: &Output) -> serde_json::Value {
    let v = json(o);
    let logs = v["logs"].as_array().expect("logs");
    assert_eq!(logs.len(), 1, "{v}");
    logs[0].clone()
}

fn example(rel: &str) -> String {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    root.join(rel).to_string_lossy().into_owned()
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .expect("read dir")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

const HEADER: &str = "# headroom-log 1.1\n# device_id: 5\n# epoch_ms: 0\n\
                      # min_tx_dbm: -9\n# max_tx_dbm: 22\n# tx_step_db: 1\n\
                      # antenna_gain_dbi: 2.15\n# required_snr_db: 8\n# eirp_cap_dbm: 16.15\n";

/// A small log of our own: two good packets, a NaN reading, a missing
/// reading, an implausible one, and one far below the required SNR.
fn small_log(dir: &Path) -> PathBuf {
    let p = dir.join("bench.csv");
    std::fs::write(
        &p,
        format!(
            "{HEADER}t_ms,tx_dbm,rssi_dbm,noise_dbm\n\
             0,14,-95,-117\n\
             1000,14,-96,-117\n\
             2000,14,nan,-117\n\
             3000,14,,-117\n\
             4000,14,-400,-117\n\
             5000,14,-125,-117\n"
        ),
    )
    .expect("write log");
    p
}

const SUMMARY_KEYS: [&str; 25] = [
    "charge_per_delivered_uc",
    "delivered_fraction",
    "duty_limited",
    "held",
    "rate_changes",
    "rates",
    "ignored_readings",
    "judged",
    "judged_at_max",
    "logged",
    "lost",
    "lost_at_max",
    "max_allowed_tx_dbm",
    "max_tx_dbm_used",
    "mean_tx_dbm",
    "outage_fraction",
    "outage_fraction_below_max",
    "power_changes",
    "records",
    "saving_vs_logged_db",
    "saving_vs_max_db",
    "sums",
    "unjudged",
    "log",
    "settings",
];

#[test]
fn the_demo_replays_from_its_header_alone_with_sources() {
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--format",
        "json",
    ]);
    let v = json(&o);
    let mut top: Vec<&str> = v
        .as_object()
        .expect("object")
        .keys()
        .map(String::as_str)
        .collect();
    top.sort_unstable();
    assert_eq!(top, ["fleet", "logs"]);
    let l = one(&o);
    let mut keys: Vec<&str> = l
        .as_object()
        .expect("object")
        .keys()
        .map(String::as_str)
        .collect();
    keys.sort_unstable();
    let mut want: Vec<&str> = SUMMARY_KEYS.to_vec();
    want.push("warnings");
    want.sort_unstable();
    assert_eq!(keys, want);
    let s = &l["settings"];
    assert_eq!(s["required_snr_db"]["value"], -12.5);
    assert_eq!(s["required_snr_db"]["source"], "log-header");
    assert_eq!(s["max_tx_dbm"]["source"], "log-header");
    assert_eq!(s["eirp_cap_dbm"]["value"], 16.15);
    assert_eq!(s["target_outage"]["source"], "default");
    // No start power anywhere: the highest allowed, min(14, 16.15 − 2).
    assert_eq!(s["start_tx_dbm"]["value"], 14.0);
    assert_eq!(s["steps"]["value"]["uniform"], 1.0);
    assert_eq!(s.as_object().expect("settings").len(), Setting::COUNT);
    // The field beside the counterfactual.
    assert_eq!(l["logged"]["mean_tx_dbm"], 14.0);
    let mean = l["mean_tx_dbm"].as_f64().expect("mean");
    let saving = l["saving_vs_logged_db"].as_f64().expect("saving");
    assert!((saving - (14.0 - mean)).abs() < 1e-3, "{saving} vs {mean}");
    assert!(mean >= 2.0 - 1e-6, "never under the header's floor: {mean}");
    assert_eq!(l["records"], 30_000);
    // The table starts with the settings in force.
    let o = headroom(&[&example("examples/logs/orchard-868.csv")]);
    assert!(o.status.success(), "{}", stderr(&o));
    let t = stdout(&o);
    let first: Vec<&str> = t.lines().take(3).collect();
    assert!(first[1].starts_with("settings in force"), "{t}");
    assert!(
        first[2].contains("required_snr_db") && first[2].contains("log-header"),
        "{t}"
    );
    assert!(t.contains("logged (field)"), "{t}");
    assert!(!t.contains("null"), "{t}");
}

#[test]
fn no_required_snr_is_refused_naming_the_three_ways() {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("bare.csv");
    std::fs::write(&p, "t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-95,-117\n").expect("write");
    let o = headroom(&[p.to_str().expect("utf-8")]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let e = stderr(&o);
    assert_eq!(e.trim_end().lines().count(), 1, "{e}");
    for way in ["--required-snr-db", "--config", "header"] {
        assert!(e.contains(way), "{way}: {e}");
    }
    // With the flag it runs, and says so; no cap is configured.
    let l = one(&headroom(&[
        p.to_str().expect("utf-8"),
        "--required-snr-db",
        "-7dB",
        "--format",
        "json",
    ]));
    assert_eq!(l["settings"]["required_snr_db"]["source"], "flag");
    assert_eq!(l["settings"]["required_snr_db"]["value"], -7.0);
    assert_eq!(l["settings"]["eirp_cap_dbm"]["value"], "none");
    assert_eq!(l["settings"]["eirp_cap_dbm"]["source"], "default");
}

#[test]
fn a_flag_beats_the_header_which_beats_the_config() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = dir.path().join("radio.toml");
    // A settings file that disagrees with the header about the radio.
    std::fs::write(
        &cfg,
        "max_tx_dbm = \"10dBm\"\nmin_tx_dbm = -9\nmargin_step_db = \"1dB\"\n",
    )
    .expect("write");
    let log = example("examples/logs/cattle-collar-915.csv");
    let cfg_s = cfg.to_str().expect("utf-8");
    let o = headroom(&[&log, "--config", cfg_s, "--format", "json"]);
    let l = one(&o);
    let s = &l["settings"];
    // The header (2..20 dBm) beats the file; the file's tuning stays.
    assert_eq!(s["max_tx_dbm"]["value"], 20.0);
    assert_eq!(s["max_tx_dbm"]["source"], "log-header");
    assert_eq!(s["min_tx_dbm"]["value"], 2.0);
    assert_eq!(s["margin_step_db"]["value"], 1.0);
    assert_eq!(s["margin_step_db"]["source"], "config");
    let e = stderr(&o);
    assert!(e.contains("max_tx_dbm") && e.contains("overrides"), "{e}");
    // The header's 36 dBm cap does not bind a 20 dBm radio: 20 dBm is used.
    assert_eq!(l["max_allowed_tx_dbm"], 20.0);
    // A flag beats both, with a visible effect.
    let l = one(&headroom(&[
        &log,
        "--config",
        cfg_s,
        "--max-tx-dbm",
        "12",
        "--format",
        "json",
    ]));
    assert_eq!(l["settings"]["max_tx_dbm"]["source"], "flag");
    assert_eq!(l["max_allowed_tx_dbm"], 12.0);
    assert!(l["max_tx_dbm_used"].as_f64().expect("max") <= 12.0);
    // A start power outside the radio's range is refused with the numbers.
    let o = headroom(&[&log, "--start-tx-dbm", "25dBm"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(
        e.contains("start_tx_dbm") && e.contains("25") && e.contains("20"),
        "{e}"
    );
}

#[test]
fn the_shipped_template_keeps_each_logs_radio() {
    let log = example("examples/logs/orchard-868.csv");
    let l = one(&headroom(&[
        &log,
        "--config",
        &example("examples/controllers/tuning.toml"),
        "--format",
        "json",
    ]));
    assert_eq!(l["settings"]["min_tx_dbm"]["value"], 2.0);
    assert_eq!(l["settings"]["min_tx_dbm"]["source"], "log-header");
    assert_eq!(l["settings"]["margin_step_db"]["source"], "config");
    let used = l["mean_tx_dbm"].as_f64().expect("mean");
    assert!(used >= 2.0 - 1e-6, "{used}");
}

#[test]
fn the_logged_policy_is_judged_by_the_same_rule() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let l = one(&headroom(&[
        log.to_str().expect("utf-8"),
        "--format",
        "json",
    ]));
    assert_eq!(l["records"], 6);
    // NaN, missing and implausible (−400 dBm) readings cannot be judged.
    assert_eq!(l["judged"], 3);
    assert_eq!(l["unjudged"], 3);
    assert_eq!(l["logged"]["judged"], 3);
    // As logged at 14 dBm: SNR 22, 21, −8 against 8 dB: one lost.
    assert_eq!(l["logged"]["lost"], 1);
    assert_eq!(l["logged"]["without_readings"], 1);
    assert_eq!(l["ignored_readings"]["ignored_not_finite"], 1);
    assert_eq!(l["ignored_readings"]["ignored_implausible"], 1);
    // The replay starts at the ceiling, 14 dBm: the same packets, the same
    // loss, all at the highest allowed level.
    assert_eq!(l["lost"], 1);
    assert_eq!(l["lost_at_max"], 1);
    assert_eq!(l["judged_at_max"], 3);
    assert!(l["outage_fraction_below_max"].is_null());
    assert!(l["saving_vs_logged_db"].as_f64().expect("saving").abs() < 1e-4);
    // Replayed at a higher power than logged, the replay spends more.
    let l = one(&headroom(&[
        log.to_str().expect("utf-8"),
        "--max-tx-dbm",
        "10",
        "--eirp-cap-dbm",
        "none",
        "--format",
        "json",
    ]));
    let s = l["saving_vs_logged_db"].as_f64().expect("saving");
    assert!((s - 4.0).abs() < 1e-3, "{s}");
}

#[test]
fn decisions_csv_and_binary_one_per_record_and_no_overwrite() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let out = dir.path().join("decisions.csv");
    let (log_s, out_s) = (
        log.to_string_lossy().into_owned(),
        out.to_string_lossy().into_owned(),
    );
    let l = one(&headroom(&[&log_s, "--out", &out_s, "--format", "json"]));
    assert_eq!(l["records"], 6);
    let text = std::fs::read_to_string(&out).expect("decisions written");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        "t_ms,chosen_tx_dbm,replayed_snr_db,outcome,logged_outcome,at_max,path_loss_db,margin_db,reason"
    );
    assert_eq!(lines.len(), 7);
    let first: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(
        &first[..6],
        &["0", "14", "22", "delivered", "delivered", "1"]
    );
    assert_eq!(first[8], "warm_up");
    assert!(lines[6].contains(",lost,lost,"), "{}", lines[6]);
    // Refused without --force, the file untouched.
    let o = headroom(&[&log_s, "--out", &out_s]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("already exists"), "{}", stderr(&o));
    assert_eq!(std::fs::read_to_string(&out).expect("still there"), text);
    // Binary decision frames under a binary name.
    let bin = dir.path().join("decisions.hrlog");
    let o = headroom(&[&log_s, "--out", bin.to_str().expect("utf-8")]);
    assert!(o.status.success(), "{}", stderr(&o));
    let bytes = std::fs::read(&bin).expect("written");
    assert_eq!(bytes.iter().filter(|&&b| b == 0).count(), 6, "six frames");
    assert!(!bytes.starts_with(b"t_ms"));
    // Any other name is refused before the work.
    let o = headroom(&[
        &log_s,
        "--out",
        dir.path().join("d.txt").to_str().expect("utf-8"),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains(".hrlog"), "{}", stderr(&o));
    assert_eq!(
        files(dir.path()),
        ["bench.csv", "decisions.csv", "decisions.hrlog"]
    );
}

#[test]
fn implausible_readings_are_counted_by_reason() {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("odd.csv");
    std::fs::write(
        &p,
        format!(
            "{HEADER}t_ms,tx_dbm,rssi_dbm,noise_dbm\n\
             0,14,-95,-117\n\
             1000,14,3,-117\n\
             2000,40,-95,-117\n\
             3000,14,-95,-117\n\
             2500,14,-95,-117\n"
        ),
    )
    .expect("write");
    let l = one(&headroom(&[p.to_str().expect("utf-8"), "--format", "json"]));
    let ig = &l["ignored_readings"];
    assert_eq!(ig["ignored_saturated"], 1, "{l}");
    assert_eq!(ig["ignored_implausible"], 1, "{l}");
    assert_eq!(ig["ignored_stale"], 1, "{l}");
}

#[test]
fn bad_settings_are_one_line_errors_naming_the_setting() {
    let log = example("examples/logs/orchard-868.csv");
    for (args, name) in [
        (vec!["--target-outage", "1.5"], "target_outage"),
        (vec!["--eirp-cap-dbm", "-40dBm"], "eirp_cap_dbm"),
        (vec!["--set", "mystery_knob=3"], "mystery_knob"),
        (vec!["--set", "margin_step_db"], "KEY=VALUE"),
        (vec!["--min-tx-dbm", "30"], "min_tx_dbm"),
        (vec!["--required-snr-db", "abc"], "--required-snr-db"),
    ] {
        let mut a = vec![log.as_str()];
        a.extend(args.iter().copied());
        let o = headroom(&a);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        let e = stderr(&o);
        assert_eq!(e.trim_end().lines().count(), 1, "{e}");
        assert!(e.contains(name), "{name}: {e}");
    }
    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = dir.path().join("c.toml");
    std::fs::write(&cfg, "target_outag = 0.1\n").expect("write");
    let o = headroom(&[&log, "--config", cfg.to_str().expect("utf-8")]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("target_outag"), "{}", stderr(&o));
}

fn svg_texts(path: &Path) -> String {
    let text = std::fs::read_to_string(path).expect("svg");
    let doc = roxmltree::Document::parse(&text).expect("well-formed svg");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    doc.descendants()
        .filter(|n| n.is_text())
        .filter_map(|n| n.text())
        .collect::<Vec<_>>()
        .join("\n")
}

#[test]
fn plot_svg_shows_the_rule_and_the_limits() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let svg = dir.path().join("r.svg");
    let (log_s, svg_s) = (log.to_str().expect("utf-8"), svg.to_str().expect("utf-8"));
    let o = headroom(&[log_s, "--plot", svg_s]);
    assert!(o.status.success(), "{}", stderr(&o));
    let t = svg_texts(&svg);
    for label in [
        "replay of bench.csv",
        "noise floor",
        "received power, logged",
        "received power, replayed",
        "loss threshold (noise + required SNR)",
        "transmit power chosen",
        "highest allowed",
        "lowest allowed",
        "EIRP cap - antenna gain",
        "packet lost",
    ] {
        assert!(t.contains(label), "{label} missing from {t}");
    }
    let o = headroom(&[log_s, "--plot", svg_s]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("already exists"), "{}", stderr(&o));
    let o = headroom(&[
        log_s,
        "--plot",
        dir.path().join("r.gif").to_str().expect("utf-8"),
    ]);
    assert_eq!(o.status.code(), Some(2));
}

fn fleet_dir(dir: &Path) -> (PathBuf, PathBuf) {
    let a = dir.join("a.csv");
    std::fs::write(
        &a,
        format!("{HEADER}t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-95,-117\n1000,14,-96,-117\n2000,14,nan,-117\n"),
    )
    .expect("write");
    let b = small_log(dir);
    (a, b)
}

#[test]
fn jsonl_one_line_per_log_each_a_separate_device() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (a, b) = fleet_dir(dir.path());
    let o = headroom(&[
        a.to_str().expect("utf-8"),
        b.to_str().expect("utf-8"),
        "--format",
        "jsonl",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = stdout(&o);
    let lines: Vec<serde_json::Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).expect("a JSON line"))
        .collect();
    assert_eq!(lines.len(), 2, "{text}");
    for (line, path) in lines.iter().zip([&a, &b]) {
        assert_eq!(line["log"], path.to_string_lossy().as_ref());
        // Alone, the same object: no state carried between devices.
        let alone = one(&headroom(&[
            path.to_str().expect("utf-8"),
            "--format",
            "json",
        ]));
        assert_eq!(line, &alone);
    }
    assert_eq!(lines[0]["records"], 3);
    assert_eq!(lines[1]["records"], 6);
}

#[test]
fn several_logs_carry_a_fleet_total_of_linear_sums() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (a, b) = fleet_dir(dir.path());
    let (a, b) = (
        a.to_string_lossy().into_owned(),
        b.to_string_lossy().into_owned(),
    );
    let v = json(&headroom(&[&a, &b, "--format", "json"]));
    let logs = v["logs"].as_array().expect("logs");
    assert_eq!(logs.len(), 2);
    let fleet = &v["fleet"];
    let sum = |k: &str| logs.iter().map(|l| l[k].as_u64().expect(k)).sum::<u64>();
    for k in ["records", "judged", "lost", "unjudged", "power_changes"] {
        assert_eq!(fleet[k].as_u64(), Some(sum(k)), "{k}");
    }
    assert_eq!(fleet["logs"], 2);
    assert_eq!(fleet["ignored_readings"]["ignored_not_finite"], 2);
    let lost = sum("lost") as f64;
    let f = fleet["outage_fraction"].as_f64().expect("fraction");
    assert!((f - lost / sum("judged") as f64).abs() < 1e-6, "{f}");
    let mw: f64 = logs
        .iter()
        .map(|l| l["sums"]["tx_mw_sum"].as_f64().expect("mw"))
        .sum();
    let mean = fleet["mean_tx_dbm"].as_f64().expect("mean");
    assert!((mean - 10.0 * (mw / sum("records") as f64).log10()).abs() < 1e-4);
    // The worst device and the devices that miss their target (1 %).
    assert_eq!(fleet["worst_log"], b.as_str());
    assert_eq!(fleet["devices_missing_target"], 1);
    let o = headroom(&[&a, &b]);
    assert!(o.status.success(), "{}", stderr(&o));
    let t = stdout(&o);
    assert!(
        t.contains(&format!("== {a}")) && t.contains(&format!("== {b}")),
        "{t}"
    );
    assert!(t.contains("== fleet (2 logs)"), "{t}");
    assert!(t.contains("devices_missing_target  1 of 2"), "{t}");
}

#[test]
fn fleet_refusals_and_skipped_entries() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (a, b) = fleet_dir(dir.path());
    let (a, b) = (
        a.to_string_lossy().into_owned(),
        b.to_string_lossy().into_owned(),
    );
    for flag in ["--out", "--plot"] {
        let dest = dir.path().join("x.svg");
        let o = headroom(&[&a, &b, flag, dest.to_str().expect("utf-8")]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
        assert!(stderr(&o).contains("takes one log"), "{}", stderr(&o));
        assert!(!dest.exists());
    }
    // A dangling link named like a log is skipped with a warning, counted,
    // and an error under --strict.
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(dir.path().join("gone.csv"), dir.path().join("c.csv"))
            .expect("symlink");
        let d = dir.path().to_str().expect("utf-8");
        let o = headroom(&[d, "--format", "json"]);
        let v = json(&o);
        assert_eq!(v["fleet"]["skipped_logs"], 1);
        assert_eq!(v["fleet"]["logs"], 2);
        assert!(stderr(&o).contains("c.csv"), "{}", stderr(&o));
        let o = headroom(&[d, "--strict"]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
        assert!(stderr(&o).contains("c.csv"), "{}", stderr(&o));
    }
}

#[test]
fn energy_reports_the_battery_life_of_the_field_policy_and_of_the_controller() {
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--energy",
        &example("examples/energy/orchard-868.toml"),
        "--format",
        "json",
    ]);
    let v = json(&o);
    let e = &v["logs"][0]["energy"];
    for side in ["replayed", "logged"] {
        for k in [
            "charge_per_packet_uc",
            "charge_per_delivered_uc",
            "mean_current_ua",
            "battery_life_days",
        ] {
            assert!(
                e[side][k].as_f64().is_some_and(|x| x > 0.0),
                "{side}.{k}: {e}"
            );
        }
    }
    // The controller sends at lower power than the fixed 14 dBm: less charge,
    // longer life, and the gain is the difference of the two lives.
    let (r, l) = (&e["replayed"], &e["logged"]);
    assert!(r["charge_per_packet_uc"].as_f64() < l["charge_per_packet_uc"].as_f64());
    let gain = e["battery_life_gain_days"].as_f64().expect("gain");
    let diff =
        r["battery_life_days"].as_f64().expect("r") - l["battery_life_days"].as_f64().expect("l");
    assert!(
        (gain - diff).abs() < 1e-2 * diff.abs().max(1.0),
        "{gain} vs {diff}"
    );
    // A fixed interval instead of the time stamps: 5 min is the log's own.
    let v2 = json(&headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--energy",
        &example("examples/energy/orchard-868.toml"),
        "--interval",
        "5min",
        "--format",
        "json",
    ]));
    let i1 = e["replayed"]["mean_current_ua"].as_f64().expect("i");
    let i2 = v2["logs"][0]["energy"]["replayed"]["mean_current_ua"]
        .as_f64()
        .expect("i");
    assert!((i1 - i2).abs() < 1e-3 * i1, "{i1} vs {i2}");
    // The table says it too.
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--energy",
        &example("examples/energy/orchard-868.toml"),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("battery_life_gain"), "{}", stdout(&o));
    // --interval without a profile, and a bare interval, are refused.
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--interval",
        "5min",
    ]);
    assert_eq!(o.status.code(), Some(2));
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--energy",
        &example("examples/energy/orchard-868.toml"),
        "--interval",
        "300",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

#[test]
fn a_damaged_header_names_the_settings_that_fell_back() {
    let dir = tempfile::tempdir().expect("tempdir");
    let csv = small_log(dir.path());
    let bin = dir.path().join("bench.hrlog");
    let o = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args([
            "convert",
            csv.to_str().expect("utf-8"),
            bin.to_str().expect("utf-8"),
        ])
        .output()
        .expect("run");
    assert!(o.status.success(), "{}", stderr(&o));
    // Flip a bit inside the header frame (the first frame): its CRC fails.
    let mut bytes = std::fs::read(&bin).expect("read");
    bytes[5] ^= 0x10;
    std::fs::write(&bin, &bytes).expect("write");
    let b = bin.to_str().expect("utf-8");
    // Without the header there is no required SNR: refused, saying why.
    let o = headroom(&[b]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("damaged or lost"), "{}", stderr(&o));
    // With the requirement given, it replays and says what fell back.
    let o = headroom(&[b, "--required-snr-db", "8"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(
        e.contains("fell back to") && e.contains("max_tx_dbm = 22 dBm (default)"),
        "{e}"
    );
    // --strict makes it an error.
    let o = headroom(&[b, "--required-snr-db", "8", "--strict"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("header"), "{}", stderr(&o));
}
