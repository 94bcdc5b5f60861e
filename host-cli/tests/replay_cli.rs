//! `headroom replay` end to end: the JSON summary, the decisions CSV, the
//! plot, fleets of logs (jsonl, json, table), refusals of bad settings and of
//! overwriting, and readings that are ignored.

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
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--format",
        "json",
    ]);
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
    for k in [
        "ignored_not_finite",
        "ignored_implausible",
        "ignored_saturated",
        "ignored_stale",
    ] {
        assert!(ignored.contains_key(k), "{k}");
    }
}

#[test]
fn decisions_csv_one_row_per_record_and_no_overwrite() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let out = dir.path().join("decisions.csv");
    let (log_s, out_s) = (
        log.to_string_lossy().into_owned(),
        out.to_string_lossy().into_owned(),
    );
    let v = json(&headroom(&[&log_s, "--out", &out_s, "--format", "json"]));
    assert_eq!(v["records"], 6);
    // The NaN, missing and implausible (-400 dBm) readings cannot be judged.
    assert_eq!(v["judged"], 3);
    assert_eq!(v["ignored_readings"]["ignored_not_finite"], 1);
    assert_eq!(v["ignored_readings"]["ignored_implausible"], 1);
    let text = std::fs::read_to_string(&out).expect("decisions written");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        "t_ms,chosen_tx_dbm,replayed_snr_db,outcome,path_loss_db,margin_db,reason"
    );
    assert_eq!(lines.len(), 7);
    // First record at the start power 14 dBm: 14 - 14 - 95 + 117 = 22 dB.
    let first: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(&first[..4], &["0", "14", "22", "delivered"]);
    assert_eq!(first[6], "warm_up");
    assert!(
        lines[3].contains(",unjudged,") && lines[3].ends_with("ignored_not_finite"),
        "{}",
        lines[3]
    );
    assert!(
        lines[4].contains(",unjudged,") && lines[4].ends_with("no_information"),
        "{}",
        lines[4]
    );
    assert!(
        lines[5].contains(",unjudged,") && lines[5].ends_with("ignored_implausible"),
        "{}",
        lines[5]
    );
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
    assert!(
        e.contains("min_tx_dbm") && e.contains("--min-tx-dbm"),
        "{e}"
    );

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
    let o = headroom(&[
        &log,
        "--config",
        &cfg.to_string_lossy(),
        "--max-tx-dbm",
        "-20",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("min_tx_dbm"), "{}", stderr(&o));

    // A log that is not there is a bad argument (2), as a missing link file.
    let o = headroom(&[&dir.path().join("absent.csv").to_string_lossy()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
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

const SUMMARY_KEYS: [&str; 8] = [
    "records",
    "judged",
    "outage_fraction",
    "mean_tx_dbm",
    "energy_saving_db",
    "power_changes",
    "max_tx_dbm_used",
    "ignored_readings",
];

fn svg_texts(path: &Path) -> String {
    let text = std::fs::read_to_string(path).expect("svg written");
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    doc.descendants()
        .filter_map(|n| n.text())
        .collect::<Vec<_>>()
        .join("\n")
}

/// Width and height from a PNG's IHDR chunk, after checking the signature.
fn png_size(path: &Path) -> (u32, u32) {
    let b = std::fs::read(path).expect("png written");
    assert_eq!(b.get(..8), Some(&b"\x89PNG\r\n\x1a\n"[..]), "PNG signature");
    assert_eq!(b.get(12..16), Some(&b"IHDR"[..]), "IHDR first");
    let be = |r: std::ops::Range<usize>| {
        u32::from_be_bytes(b.get(r).and_then(|x| x.try_into().ok()).expect("4 bytes"))
    };
    (be(16..20), be(20..24))
}

#[test]
fn plot_svg_names_the_log_and_its_series() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = small_log(dir.path());
    let svg = dir.path().join("r.svg");
    let (log_s, svg_s) = (
        log.to_string_lossy().into_owned(),
        svg.to_string_lossy().into_owned(),
    );
    let v = json(&headroom(&[&log_s, "--plot", &svg_s, "--format", "json"]));
    assert_eq!(v["records"], 6);
    let t = svg_texts(&svg);
    assert!(
        t.contains("replay of bench.csv") && t.contains("6 records"),
        "{t}"
    );
    for label in [
        "received power, logged",
        "received power, replayed",
        "noise floor",
        "packet lost",
        "transmit power chosen",
    ] {
        assert!(t.contains(label), "{label} missing from {t}");
    }
    // An existing plot is refused before the replay: nothing printed.
    let o = headroom(&[&log_s, "--plot", &svg_s]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("already exists"), "{}", stderr(&o));
    assert!(o.stdout.is_empty());
    let o = headroom(&[&log_s, "--plot", &svg_s, "--force"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(files(dir.path()), ["bench.csv", "r.svg"]);
    let o = headroom(&[
        &log_s,
        "--plot",
        &dir.path().join("r.gif").to_string_lossy(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains(".gif"), "{}", stderr(&o));
}

#[test]
fn plot_png_of_a_long_log_has_its_size() {
    let dir = tempfile::tempdir().expect("tempdir");
    let png = dir.path().join("orchard.png");
    let o = headroom(&[
        &example("examples/logs/orchard-868.csv"),
        "--plot",
        &png.to_string_lossy(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(png_size(&png), (1200, 760));
}

/// Two logs of our own in a directory, with a file that is not a log.
fn fleet_dir(dir: &Path) -> (PathBuf, PathBuf) {
    let a = small_log(dir);
    let b = dir.join("another.csv");
    std::fs::write(
        &b,
        "t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,10,-100,-117\n1000,10,-101,-117\n2000,10,-130,-117\n",
    )
    .expect("write log");
    std::fs::write(dir.join("notes.txt"), "not a log\n").expect("write notes");
    (b, a)
}

#[test]
fn jsonl_one_line_per_log_each_a_separate_device() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (first, second) = fleet_dir(dir.path());
    let o = headroom(&[&dir.path().to_string_lossy(), "--format", "jsonl"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8(o.stdout).expect("utf-8");
    let lines: Vec<serde_json::Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).expect("each line is JSON"))
        .collect();
    assert_eq!(lines.len(), 2, "{text}");
    // Sorted by name: another.csv, then bench.csv.
    for (line, path) in lines.iter().zip([&first, &second]) {
        let m = line.as_object().expect("object");
        let keys: Vec<&str> = m.keys().map(String::as_str).collect();
        let mut want = vec!["log"];
        want.extend(SUMMARY_KEYS);
        assert_eq!(keys, want);
        assert_eq!(line["log"], path.to_string_lossy().as_ref());
        // A fresh controller per log: the same numbers as replaying it alone.
        let mut alone = json(&headroom(&[&path.to_string_lossy(), "--format", "json"]));
        alone["log"] = line["log"].clone();
        let mut line = line.clone();
        line.as_object_mut().expect("object").sort_keys();
        alone.as_object_mut().expect("object").sort_keys();
        assert_eq!(line, alone);
    }
    assert_eq!(lines[0]["records"], 3);
    assert_eq!(lines[1]["records"], 6);
}

#[test]
fn several_logs_as_json_and_table_carry_a_fleet_total() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (a, b) = fleet_dir(dir.path());
    let (a, b) = (
        a.to_string_lossy().into_owned(),
        b.to_string_lossy().into_owned(),
    );
    let v = json(&headroom(&[&a, &b, "--format", "json"]));
    let logs = v["logs"].as_array().expect("logs array");
    assert_eq!(logs.len(), 2);
    assert_eq!(logs[0]["log"], a.as_str());
    let fleet = &v["fleet"];
    let keys: Vec<&str> = fleet
        .as_object()
        .expect("object")
        .keys()
        .map(String::as_str)
        .collect();
    assert_eq!(keys, SUMMARY_KEYS);
    let sum = |k: &str| {
        logs.iter()
            .map(|l| l[k].as_u64().expect("count"))
            .sum::<u64>()
    };
    assert_eq!(fleet["records"].as_u64(), Some(sum("records")));
    assert_eq!(fleet["judged"].as_u64(), Some(sum("judged")));
    assert_eq!(fleet["power_changes"].as_u64(), Some(sum("power_changes")));
    assert_eq!(fleet["ignored_readings"]["ignored_not_finite"], 1);
    // Losses add: lost = fraction × judged per log.
    let lost: f64 = logs
        .iter()
        .map(|l| l["outage_fraction"].as_f64().expect("f") * l["judged"].as_f64().expect("n"))
        .sum();
    let f = fleet["outage_fraction"].as_f64().expect("fraction");
    assert!((f - lost / sum("judged") as f64).abs() < 1e-6, "{f}");
    // The mean of linear powers lies between the logs' means.
    let means: Vec<f64> = logs
        .iter()
        .map(|l| l["mean_tx_dbm"].as_f64().expect("mean"))
        .collect();
    let m = fleet["mean_tx_dbm"].as_f64().expect("mean");
    assert!(
        m >= means[0].min(means[1]) - 1e-4 && m <= means[0].max(means[1]) + 1e-4,
        "{m} {means:?}"
    );

    let o = headroom(&[&a, &b]);
    assert!(o.status.success(), "{}", stderr(&o));
    let t = String::from_utf8(o.stdout).expect("utf-8");
    assert!(
        t.contains(&format!("== {a}")) && t.contains(&format!("== {b}")),
        "{t}"
    );
    assert!(t.contains("== fleet (2 logs)"), "{t}");
}

#[test]
fn fleet_refusals() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (a, b) = fleet_dir(dir.path());
    let (a, b) = (
        a.to_string_lossy().into_owned(),
        b.to_string_lossy().into_owned(),
    );
    for flag in ["--out", "--plot"] {
        let dest = dir.path().join("x.svg");
        let o = headroom(&[&a, &b, flag, &dest.to_string_lossy()]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
        assert!(
            stderr(&o).contains(flag) && stderr(&o).contains("one log"),
            "{}",
            stderr(&o)
        );
        assert!(!dest.exists());
    }
    // A file that is not a binary log at all is an error, not 0 records.
    let junk = dir.path().join("junk.hrlog");
    std::fs::write(&junk, "not a framed log at all").expect("write");
    let o = headroom(&[&junk.to_string_lossy()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("no readable record"), "{}", stderr(&o));
    assert!(o.stdout.is_empty());

    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).expect("mkdir");
    let o = headroom(&[&empty.to_string_lossy()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("without .csv or .hrlog"),
        "{}",
        stderr(&o)
    );
}
