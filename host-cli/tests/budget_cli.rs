//! `headroom budget` and `headroom solve` as a user runs them.

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
}

fn example(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../examples/links")
        .join(name)
}

fn json(args: &[&str]) -> serde_json::Value {
    let out = bin()
        .args(args)
        .args(["--format", "json"])
        .output()
        .expect("runs");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("one JSON object")
}

#[test]
fn every_example_link_evaluates_with_the_fixed_keys() {
    for f in [
        "orchard-sensor.toml",
        "smallsat-ground-station.toml",
        "workshop-mesh.toml",
    ] {
        let p = example(f);
        let v = json(&["budget", p.to_str().expect("utf-8 path")]);
        for key in [
            "eirp_dbm",
            "rx_power_dbm",
            "noise_power_dbm",
            "cn_db",
            "margin_db",
            "line_items",
        ] {
            assert!(v.get(key).is_some(), "{f}: no {key} in {v}");
        }
        let eirp = v["eirp_dbm"].as_f64().expect("number");
        let rx = v["rx_power_dbm"].as_f64().expect("number");
        assert!(rx < eirp, "{f}: received power above EIRP");
    }
}

#[test]
fn solve_closes_the_loop_through_the_budget() {
    let p = example("orchard-sensor.toml");
    let p = p.to_str().expect("utf-8 path");
    let v = json(&["solve", p, "--for", "tx-power", "--target-margin", "5dB"]);
    let tx = v["tx_power_dbm"].as_f64().expect("number");
    let b = json(&["budget", p]);
    let margin = b["margin_db"].as_f64().expect("number");
    let tx0 = b["tx_power_dbm"].as_f64().expect("number");
    // Margin is linear in transmit power (all in dB): tx = tx0 + (5 − margin).
    assert!(
        (tx - (tx0 + 5.0 - margin)).abs() < 1e-3,
        "{tx} vs {tx0} {margin}"
    );
    let r = json(&["solve", p, "--for", "range"]);
    assert!(
        r["range_m"].as_f64().expect("number") > 1400.0,
        "margin is positive, so range exceeds the distance"
    );
    let pl = json(&["solve", p, "--for", "path-loss", "--target-margin", "0"]);
    let pl0 = b["path_loss_db"].as_f64().expect("number");
    assert!((pl["max_path_loss_db"].as_f64().expect("number") - (pl0 + margin)).abs() < 1e-3);
}

fn fails_with(args: &[&str], needle: &str) {
    let out = bin().args(args).output().expect("runs");
    assert_eq!(out.status.code(), Some(2), "{args:?}");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains(needle), "{args:?}: {err}");
    assert_eq!(err.trim().lines().count(), 1, "one line: {err}");
    assert!(!err.contains("panicked"));
}

#[test]
fn bad_link_files_get_one_line_errors() {
    let dir = tempfile::tempdir().expect("tempdir");
    let write = |name: &str, text: &str| {
        let p = dir.path().join(name);
        std::fs::write(&p, text).expect("write");
        p.to_str().expect("utf-8").to_string()
    };
    let good = std::fs::read_to_string(example("orchard-sensor.toml")).expect("read");
    let typo = write("typo.toml", &good.replace("noise_figure", "noise_fgure"));
    fails_with(&["budget", &typo], "noise_fgure");
    let unit = write("unit.toml", &good.replace("\"1.4km\"", "\"1.4 furlongs\""));
    fails_with(&["budget", &unit], "path.distance");
    let broken = write("broken.toml", "frequency = \"868MHz\"\n[transmitter\n");
    fails_with(&["budget", &broken], "broken.toml");
    fails_with(&["budget", "/no/such/link.toml"], "cannot read");
    let short = write("short.toml", &good.replace("\"1.4km\"", "\"10m\""));
    fails_with(&["budget", &short], "distance");
    let fixed = write(
        "fixed.toml",
        &good.replace(
            "model = \"log-distance\"\ndistance = \"1.4km\"\nreference_distance = \"100m\"   # free space up to 100 m ...\nexponent = 3.2",
            "model = \"fixed\"\nloss = \"120dB\"",
        ),
    );
    fails_with(&["solve", &fixed, "--for", "range"], "path.model");
}

/// `[energy]` in a link file (or `--energy` and `--interval`): airtime,
/// duty cycle, charge per packet, mean current and battery life at the
/// design power and at the power that leaves the target margin.
#[test]
fn budget_reports_what_a_packet_costs_the_battery() {
    // The orchard link with an [energy] table naming the example profile.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    let profile = root.join("examples/energy/orchard-868.toml");
    let text = std::fs::read_to_string(root.join("examples/links/orchard-sensor.toml")).unwrap()
        + &format!(
            "\n[energy]\nprofile = {:?}\ninterval = \"5min\"\n",
            profile.to_str().unwrap()
        );
    let dir = tempfile::tempdir().unwrap();
    let link = dir.path().join("orchard.toml");
    std::fs::write(&link, text).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(["budget", link.to_str().unwrap(), "--format", "json"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let e = &v["energy"];
    assert_eq!(e["interval_s"], 300.0);
    let design = &e["at_design_power"];
    let solved = &e["at_solved_power"];
    assert_eq!(design["tx_dbm"], 14.0);
    // Less power for the target margin: less charge, longer life.
    assert!(solved["tx_dbm"].as_f64().unwrap() < 14.0);
    assert!(
        solved["charge_per_packet_uc"].as_f64().unwrap()
            < design["charge_per_packet_uc"].as_f64().unwrap()
    );
    assert!(
        solved["battery_life_days"].as_f64().unwrap()
            > design["battery_life_days"].as_f64().unwrap()
    );
    // Duty cycle = airtime / interval.
    let duty = e["duty_cycle_percent"].as_f64().unwrap();
    let air = e["airtime_ms"].as_f64().unwrap();
    assert!(
        (duty - 100.0 * air / 300_000.0).abs() < 1e-6,
        "{duty} {air}"
    );
    // The same from the command line.
    let o = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args([
            "budget",
            root.join("examples/links/orchard-sensor.toml")
                .to_str()
                .unwrap(),
            "--energy",
            profile.to_str().unwrap(),
            "--interval",
            "5min",
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    let w: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(w["energy"]["at_solved_power"], e["at_solved_power"]);
    // An interval flag without a profile anywhere is refused.
    let plain = Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples/links/workshop-mesh.toml");
    let o = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(["budget", plain.to_str().unwrap(), "--interval", "5min"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
}
