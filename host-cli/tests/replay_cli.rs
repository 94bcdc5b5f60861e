//! `headroom replay` end to end: the JSON summary, the decisions CSV,
//! refusals of bad settings and of overwriting, and readings that are ignored.

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

fn json(o: &Output) -> serde_json::Value {
    assert!(o.status.success(), "failed: {}", stderr(o));
    serde_json::from_slice(&o.stdout).expect("stdout is one JSON object")
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

/// A small log of our own: two good packets, a NaN reading, a missing
/// reading, an implausible one, and one far below the required SNR.
fn small_log(dir: &Path) -> PathBuf {
    let p = dir.join("bench.csv");
    std::fs::write(
        &p,
        "t_ms,tx_dbm,rssi_dbm,noise_dbm\n\
         0,14,-95,-117\n\
         1000,14,-96,-117\n\
         2000,14,nan,-117\n\
         3000,14,,-117\n\
         4000,14,-400,-117\n\
         5000,14,-125,-117\n",
    )
    .expect("write log");
    p
}

#[test]
fn json_summary_has_exactly_the_documented_keys() {
    let o = headroom(&[&example("examples/logs/orchard-868.csv"), "--format", "json"]);
    let v = json(&o);
    let m = v.as_object().expect("object");
    let mut keys: Vec<&str> = m.keys().map(String::as_str).collect();
    keys.sort_unstable();
    assert_eq!(
        keys,
        [
            "energy_saving_db",
            "ignored_readings",
            "judged",
            "max_tx_dbm_used",
            "mean_tx_dbm",
            "outage_fraction",
            "power_changes",
            "records",
        ]
    );
    let records = v["records"].as_u64().expect("records");
    let judged = v["judged"].as_u64().expect("judged");
    assert_eq!(records, 30_000);
    assert!(judged > 0 && judged <= records);
    let outage = v["outage_fraction"].as_f64().expect("fraction");
    assert!((0.0..=1.0).contains(&outage));
    // The log's header says 2..14 dBm, antenna 2 dBi; the EIRP cap 16.15 dBm.
    let max_used = v["max_tx_dbm_used"].as_f64().expect("max");
    assert!(max_used <= 14.0 + 1e-6, "{max_used}");
    let mean = v["mean_tx_dbm"].as_f64().expect("mean");
    assert!(mean >= 2.0 - 1e-6 && mean <= max_used + 1e-6);
    let saving = v["energy_saving_db"].as_f64().expect("saving");
    assert!((saving - (14.0 - mean)).abs() < 1e-3, "{saving} vs {mean}");
    let ignored = v["ignored_readings"].as_object().expect("object");
    for k in ["ignored_not_finite", "ignored_implausible", "ignored_saturated", "ignored_stale"] {
        assert!(ignored.contains_key(k), "{k}");
    }
}

#[test]
fn decisions_csv_one_row_per_record_and_no_overwrite() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let out = dir.path().join("decisions.csv");
    let (log_s, out_s) = (log.to_string_lossy().into_owned(), out.to_string_lossy().into_owned());
    let v = json(&headroom(&[&log_s, "--out", &out_s, "--format", "json"]));
    assert_eq!(v["records"], 6);
    // The NaN, missing and implausible (-400 dBm) readings cannot be judged.
    assert_eq!(v["judged"], 3);
    assert_eq!(v["ignored_readings"]["ignored_not_finite"], 1);
    assert_eq!(v["ignored_readings"]["ignored_implausible"], 1);
    let text = std::fs::read_to_string(&out).expect("decisions written");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines[0], "t_ms,chosen_tx_dbm,replayed_snr_db,outcome,path_loss_db,margin_db,reason");
    assert_eq!(lines.len(), 7);
    // First record at the start power 14 dBm: 14 - 14 - 95 + 117 = 22 dB.
    let first: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(&first[..4], &["0", "14", "22", "delivered"]);
    assert_eq!(first[6], "warm_up");
    assert!(lines[3].contains(",unjudged,") && lines[3].ends_with("ignored_not_finite"), "{}", lines[3]);
    assert!(lines[4].contains(",unjudged,") && lines[4].ends_with("no_information"), "{}", lines[4]);
    assert!(lines[5].contains(",unjudged,") && lines[5].ends_with("ignored_implausible"), "{}", lines[5]);
    // The 5000 ms packet: -125 at 14 dBm, replayed at the same power: SNR -8 dB, lost.
    assert!(lines[6].contains(",lost,"), "{}", lines[6]);

    // Refuses to overwrite; the file is unchanged and no temporary is left.
    let o = headroom(&[&log_s, "--out", &out_s]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("already exists"), "{}", stderr(&o));
    assert_eq!(std::fs::read_to_string(&out).expect("still there"), text);
    assert_eq!(files(dir.path()), ["bench.csv", "decisions.csv"]);
    let o = headroom(&[&log_s, "--out", &out_s, "--force", "--target-outage", "10%"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(files(dir.path()), ["bench.csv", "decisions.csv"]);
}

#[test]
fn implausible_readings_are_counted_by_reason() {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("odd.csv");
    // Received power above the saturation level (0 dBm), then a noise floor
    // of +10 dBm, then a good reading and one older than it.
    std::fs::write(
        &p,
        "t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-90,-117\n10,14,5,-117\n20,14,-90,10\n30,14,-90,-117\n25,14,-90,-117\n",
    )
    .expect("write");
    let v = json(&headroom(&[&p.to_string_lossy(), "--format", "json"]));
    let ig = &v["ignored_readings"];
    assert_eq!(ig["ignored_saturated"], 1, "{v}");
    assert_eq!(ig["ignored_implausible"], 1, "{v}");
    assert_eq!(ig["ignored_stale"], 1, "{v}");
}

#[test]
fn bad_settings_are_one_line_errors_naming_the_setting() {
    let log = example("examples/logs/orchard-868.csv");
    let o = headroom(&[&log, "--min-tx-dbm", "30"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert_eq!(e.trim_end().lines().count(), 1, "{e}");
    assert!(e.contains("min_tx_dbm") && e.contains("--min-tx-dbm"), "{e}");

    let o = headroom(&[&log, "--target-outage", "1.5"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("target_outage"), "{}", stderr(&o));

    let o = headroom(&[&log, "--eirp-cap-dbm", "-20"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("eirp_cap_dbm"), "{}", stderr(&o));

    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = dir.path().join("ctl.toml");
    std::fs::write(&cfg, "target_outage = 0.05\nmystery_knob = 3\n").expect("write");
    let o = headroom(&[&log, "--config", &cfg.to_string_lossy()]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("mystery_knob"), "{e}");
    assert_eq!(e.trim_end().lines().count(), 1, "{e}");

    // Flags override the file: the file is fine, the flag makes it contradictory.
    std::fs::write(&cfg, "min_tx_dbm = -9.0\n").expect("write");
    let o = headroom(&[&log, "--config", &cfg.to_string_lossy(), "--max-tx-dbm", "-20"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("min_tx_dbm"), "{}", stderr(&o));

    let o = headroom(&[&dir.path().join("absent.csv").to_string_lossy()]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
}

#[test]
fn shipped_config_replays() {
    let o = headroom(&[
        &example("examples/logs/workshop-mesh-2g4.csv"),
        "--config",
        &example("examples/controllers/default.toml"),
        "--format",
        "json",
    ]);
    let v = json(&o);
    assert_eq!(v["records"], 30_000);
}
