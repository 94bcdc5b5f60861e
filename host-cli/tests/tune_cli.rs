//! `headroom tune` end to end: the Pareto front, the best setting, the
//! default, agreement with `headroom replay`, the fleet sums, thread-count
//! independence, and one-line refusals of bad sweeps.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;

fn run(cmd: &str, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg(cmd)
        .args(args)
        .output()
        .expect("run headroom")
}

fn tune(args: &[&str]) -> Output {
    run("tune", args)
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn json(o: &Output) -> Value {
    assert!(o.status.success(), "failed: {}", stderr(o));
    serde_json::from_slice(&o.stdout).expect("stdout is one JSON object")
}

fn lines(o: &Output) -> Vec<Value> {
    assert!(o.status.success(), "failed: {}", stderr(o));
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).expect("each line is one JSON object"))
        .collect()
}

fn example(rel: &str) -> String {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    root.join(rel).to_string_lossy().into_owned()
}

fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64()
        .unwrap_or_else(|| panic!("{k} is not a number in {v}"))
}

fn u(v: &Value, k: &str) -> u64 {
    v[k].as_u64()
        .unwrap_or_else(|| panic!("{k} is not a count in {v}"))
}

/// A log of our own: a node 14 dBm into a link that fades slowly by ±9 dB
/// with a fast scatter of ±5 dB on top, the noise floor at −117 dBm, every
/// 37th reading missing. `shift` moves the whole link (dB).
fn synthetic_log(dir: &Path, name: &str, records: u32, shift: f32) -> PathBuf {
    let mut text = String::from(
        "# headroom-log 1.1\n# min_tx_dbm: -4\n# max_tx_dbm: 14\n# tx_step_db: 1\n# antenna_gain_dbi: 2\n# required_snr_db: 8\n# eirp_cap_dbm: 16.15\nt_ms,tx_dbm,rssi_dbm,noise_dbm\n",
    );
    let mut x: u32 = 2024;
    for k in 0..records {
        x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        let scatter = ((x >> 8) % 1001) as f32 / 100.0 - 5.0;
        let slow = 9.0 * (k as f32 / 180.0).sin();
        let rssi = -92.0 + shift + slow + scatter;
        if k % 37 == 36 {
            text.push_str(&format!("{},14,,\n", k as u64 * 60_000));
        } else {
            text.push_str(&format!("{},14,{rssi:.1},-117\n", k as u64 * 60_000));
        }
    }
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write log");
    p
}

fn fleet(dir: &Path) -> Vec<String> {
    vec![
        synthetic_log(dir, "a.csv", 2500, 0.0)
            .to_string_lossy()
            .into_owned(),
        synthetic_log(dir, "b.csv", 1800, -4.0)
            .to_string_lossy()
            .into_owned(),
    ]
}

fn points(v: &Value) -> Vec<Value> {
    let mut all = vec![v["default"].clone()];
    all.extend(v["points"].as_array().expect("points").iter().cloned());
    all
}

#[test]
fn front_is_non_dominated_and_best_meets_the_target() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend([
        "--sweep",
        "margin_step_db=0.25..1:0.25",
        "--sweep",
        "max_step_down_db=1,2,4",
        "--target-outage",
        "5%",
        "--format",
        "json",
    ]);
    let v = json(&tune(&args));
    assert_eq!(v["combinations"], 12);
    assert_eq!(v["points"].as_array().map(Vec::len), Some(12));
    let all = points(&v);
    let key = |p: &Value| (f(p, "mean_tx_dbm"), f(p, "outage_fraction"));
    let dominates =
        |a: (f64, f64), b: (f64, f64)| a.0 <= b.0 && a.1 <= b.1 && (a.0 < b.0 || a.1 < b.1);
    // on_front is exactly "no candidate dominates it", and "front" lists those.
    let mut on_front = BTreeSet::new();
    for p in &all {
        let dominated = all.iter().any(|q| dominates(key(q), key(p)));
        assert_eq!(p["on_front"], !dominated, "{p}");
        if !dominated {
            on_front.insert(u(p, "candidate"));
        }
    }
    let front: Vec<&Value> = v["front"].as_array().expect("front").iter().collect();
    assert_eq!(
        front
            .iter()
            .map(|p| u(p, "candidate"))
            .collect::<BTreeSet<_>>(),
        on_front
    );
    assert!(
        front
            .windows(2)
            .all(|w| f(w[0], "mean_tx_dbm") <= f(w[1], "mean_tx_dbm")),
        "front by rising power"
    );
    // The best meets the target and nothing meeting it is cheaper.
    let best = &v["best"];
    assert!(best.is_object(), "some setting loses at most 5 %: {v}");
    assert!(f(best, "outage_fraction") <= 0.05);
    assert_eq!(best["meets_target"], true);
    assert_eq!(best["on_front"], true);
    for p in &all {
        assert_eq!(
            p["meets_target"],
            f(p, "outage_fraction") <= 0.05 + 1e-9,
            "{p}"
        );
        if p["meets_target"] == true {
            assert!(
                f(p, "mean_tx_dbm") >= f(best, "mean_tx_dbm"),
                "{p} is cheaper than the best"
            );
        }
    }
    // Settings are echoed per point, the default's as its values.
    assert_eq!(v["default"]["settings"]["margin_step_db"], 0.5);
    assert_eq!(v["default"]["settings"]["max_step_down_db"], 2.0);
    assert_eq!(v["points"][0]["settings"]["margin_step_db"], 0.25);
    assert_eq!(v["points"][0]["settings"]["max_step_down_db"], 1.0);
    assert_eq!(v["points"][1]["settings"]["max_step_down_db"], 2.0);
}

#[test]
fn agrees_with_replay_log_by_log() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let cfg = dir.path().join("ctrl.toml");
    std::fs::write(&cfg, "margin_step_db = 0.75\n").expect("write config");
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend(["--sweep", "margin_step_db=0.25,0.75", "--format", "jsonl"]);
    let out = lines(&tune(&args));
    // One line per (log, candidate): 3 candidates × 2 logs, candidate-major.
    assert_eq!(out.len(), 6);
    let order: Vec<(u64, &str)> = out
        .iter()
        .map(|l| (u(l, "candidate"), l["log"].as_str().expect("log")))
        .collect();
    assert_eq!(
        order,
        vec![
            (0, logs[0].as_str()),
            (0, logs[1].as_str()),
            (1, logs[0].as_str()),
            (1, logs[1].as_str()),
            (2, logs[0].as_str()),
            (2, logs[1].as_str())
        ]
    );
    for (log_k, log) in logs.iter().enumerate() {
        let plain = json(&run("replay", &[log.as_str(), "--format", "json"]))["logs"][0].clone();
        let tuned = json(&run(
            "replay",
            &[
                log.as_str(),
                "--config",
                cfg.to_str().expect("utf-8"),
                "--format",
                "json",
            ],
        ))["logs"][0]
            .clone();
        for (line, want) in [(&out[log_k], &plain), (&out[4 + log_k], &tuned)] {
            // Bit for bit: every summary key of replay, sums included.
            for (k, v) in want.as_object().expect("object") {
                if matches!(k.as_str(), "log" | "settings" | "warnings" | "rates") {
                    continue;
                }
                assert_eq!(&line[k], v, "{k}: {line} vs {want}");
            }
        }
    }
    assert_eq!(out[4]["settings"]["margin_step_db"], 0.75);
    assert_eq!(out[0]["default"], true);
    assert_eq!(out[0]["settings"], serde_json::json!({}));
}

/// Candidates that check records differently (a plausibility bound swept,
/// more distinct bounds than tune shares checks for) each give `replay`'s
/// totals with that bound, bit for bit.
#[test]
fn swept_plausibility_bounds_agree_with_replay() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = synthetic_log(dir.path(), "node.csv", 600, 0.0);
    let log = log.to_str().expect("utf-8");
    let bounds = ["-80", "-84", "-88", "-92", "-96", "-100"];
    let sweep = format!("rssi_max_dbm={}", bounds.join(","));
    let out = lines(&tune(&[log, "--sweep", &sweep, "--format", "jsonl"]));
    assert_eq!(out.len(), bounds.len() + 1);
    let mut ignored = Vec::new();
    for (k, line) in out.iter().enumerate() {
        let mut args = vec![log, "--format", "json"];
        let set = k
            .checked_sub(1)
            .map(|b| format!("rssi_max_dbm={}", bounds[b]));
        if let Some(s) = &set {
            args.extend(["--set", s.as_str()]);
        }
        let want = json(&run("replay", &args))["logs"][0].clone();
        for (key, v) in want.as_object().expect("object") {
            if matches!(key.as_str(), "log" | "settings" | "warnings" | "rates") {
                continue;
            }
            assert_eq!(&line[key], v, "candidate {k}, {key}: {line} vs {want}");
        }
        ignored.push(want["ignored_readings"].clone());
    }
    // The bounds do change what is judged.
    ignored.dedup();
    assert!(ignored.len() > 4, "{ignored:?}");
}

#[test]
fn fleet_totals_are_sums_of_the_lines() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let mut base: Vec<&str> = logs.iter().map(String::as_str).collect();
    base.extend(["--sweep", "deadband_db=0..2:1"]);
    let mut a = base.clone();
    a.extend(["--format", "jsonl"]);
    let per_log = lines(&tune(&a));
    let mut b = base.clone();
    b.extend(["--format", "json"]);
    let v = json(&tune(&b));
    for p in points(&v) {
        let cand = u(&p, "candidate");
        let mine: Vec<&Value> = per_log
            .iter()
            .filter(|l| u(l, "candidate") == cand)
            .collect();
        assert_eq!(mine.len(), 2);
        let sum = |k: &str| mine.iter().map(|l| u(l, k)).sum::<u64>();
        assert_eq!(u(&p, "records"), sum("records"));
        assert_eq!(u(&p, "judged"), sum("judged"));
        assert_eq!(u(&p, "lost"), sum("lost"));
        let loss = sum("lost") as f64 / sum("judged") as f64;
        assert!((f(&p, "outage_fraction") - loss).abs() < 1e-6);
        // The mean of the linear powers, not of the dB values.
        let mw: f64 = mine.iter().map(|l| f(&l["sums"], "tx_mw_sum")).sum();
        let mean = 10.0 * (mw / sum("records") as f64).log10();
        assert!((f(&p, "mean_tx_dbm") - mean).abs() < 1e-4, "{p}");
        let db_mean: f64 = mine.iter().map(|l| f(l, "mean_tx_dbm")).sum::<f64>() / 2.0;
        assert!(
            (mean - db_mean).abs() > 1e-3,
            "the two logs differ enough to tell the means apart"
        );
    }
}

#[test]
fn result_does_not_depend_on_threads() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut logs = fleet(dir.path());
    logs.push(
        synthetic_log(dir.path(), "c.csv", 700, 4.0)
            .to_string_lossy()
            .into_owned(),
    );
    for format in ["json", "jsonl", "table"] {
        let mut outs = Vec::new();
        for threads in ["1", "2", "5"] {
            let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
            args.extend([
                "--sweep",
                "margin_step_db=0.1..1:0.1",
                "--sweep",
                "climb_after_losses=1,3",
                "--threads",
                threads,
                "--format",
                format,
            ]);
            let o = tune(&args);
            assert!(o.status.success(), "{}", stderr(&o));
            outs.push(o.stdout);
        }
        assert!(
            outs.windows(2).all(|w| w[0] == w[1]),
            "{format} output depends on --threads"
        );
    }
}

#[test]
fn directories_are_expanded_sorted_and_flat() {
    let dir = tempfile::tempdir().expect("tempdir");
    synthetic_log(dir.path(), "b.csv", 300, 0.0);
    synthetic_log(dir.path(), "a.csv", 300, 0.0);
    std::fs::write(dir.path().join("notes.txt"), "not a log").expect("write");
    let sub = dir.path().join("sub");
    std::fs::create_dir(&sub).expect("mkdir");
    synthetic_log(&sub, "c.csv", 300, 0.0);
    let d = dir.path().to_string_lossy().into_owned();
    let v = json(&tune(&[
        d.as_str(),
        "--sweep",
        "deadband_db=1",
        "--format",
        "json",
    ]));
    let names: Vec<String> = v["logs"]
        .as_array()
        .expect("logs")
        .iter()
        .map(|p| {
            Path::new(p.as_str().expect("path"))
                .file_name()
                .expect("name")
                .to_string_lossy()
                .into_owned()
        })
        .collect();
    assert_eq!(names, ["a.csv", "b.csv"]);
    let empty = tempfile::tempdir().expect("tempdir");
    let e = empty.path().to_string_lossy().into_owned();
    let o = tune(&[e.as_str(), "--sweep", "deadband_db=1"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("without .csv or .hrlog logs"),
        "{}",
        stderr(&o)
    );
}

/// Without a sweep only the default is replayed: one line per log.
#[test]
fn no_sweep_replays_the_default_per_log() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend(["--format", "jsonl"]);
    let out = lines(&tune(&args));
    assert_eq!(out.len(), 2);
    assert!(out
        .iter()
        .all(|l| l["candidate"] == 0 && l["default"] == true));
    args.truncate(logs.len());
    args.extend(["--format", "json"]);
    let v = json(&tune(&args));
    assert_eq!(v["combinations"], 0);
    assert_eq!(v["points"], serde_json::json!([]));
    assert_eq!(v["front"][0]["candidate"], 0);
    assert_eq!(v["beats_default"], Value::Null);
}

/// Exit 2, one line on stderr containing `needle`, nothing on stdout.
fn refused(args: &[&str], needle: &str) {
    let o = tune(args);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {e}");
    assert_eq!(
        e.trim_end().lines().count(),
        1,
        "{args:?}: not one line: {e}"
    );
    assert!(e.contains(needle), "{args:?}: '{e}' lacks '{needle}'");
    assert!(!e.contains("panicked"), "{e}");
    assert!(o.stdout.is_empty(), "{args:?}: printed a result");
}

#[test]
fn bad_sweeps_are_refused_in_one_line() {
    let dir = tempfile::tempdir().expect("tempdir");
    let log = synthetic_log(dir.path(), "a.csv", 200, 0.0)
        .to_string_lossy()
        .into_owned();
    let l = log.as_str();
    refused(
        &[l, "--sweep", "margin_stepdb=0.25..1:0.25"],
        "'margin_stepdb' is not a controller setting",
    );
    refused(
        &[l, "--sweep", "margin_step_db=1..0.25:0.25"],
        "FROM 1 is above TO 0.25",
    );
    refused(
        &[l, "--sweep", "margin_step_db=0.25..1:0"],
        "STEP 0 must be greater than zero",
    );
    refused(
        &[l, "--sweep", "margin_step_db=0.25..1:-0.25"],
        "must be greater than zero",
    );
    refused(&[l, "--sweep", "margin_step_db=0.25..1"], "needs a step");
    refused(&[l, "--sweep", "margin_step_db"], "NAME=FROM..TO:STEP");
    refused(
        &[l, "--sweep", "margin_step_db=abc"],
        "'abc' does not start with a number",
    );
    refused(
        &[l, "--sweep", "steps.table=1"],
        "is not a controller setting",
    );
    refused(&[l, "--sweep", "steps=1"], "a fact of the radio");
    refused(&[l, "--sweep", "required_snr_db=5,8"], "--incomparable");
    refused(&[l, "--sweep", "eirp_cap_dbm=10"], "cannot be swept");
    refused(
        &[l, "--sweep", "min_readings=2.5"],
        "'2.5' is not a whole number",
    );
    refused(
        &[l, "--sweep", "margin_step_db=21"],
        "margin_step_db: 21 is outside",
    );
    refused(
        &[l, "--sweep", "deadband_db=1", "--sweep", "deadband_db=2"],
        "swept twice",
    );
    refused(
        &[
            l,
            "--sweep",
            "deadband_db=0..9:0.1",
            "--sweep",
            "margin_step_db=0.1..20:0.1",
        ],
        "at most 10000",
    );
    refused(
        &[l, "--sweep", "deadband_db=1", "--threads", "0"],
        "--threads",
    );
    refused(
        &[l, "--sweep", "deadband_db=1", "--target-outage", "0"],
        "target_outage",
    );
    let missing = dir.path().join("missing.csv");
    let o = tune(&[missing.to_str().expect("utf-8"), "--sweep", "deadband_db=1"]);
    // A log that is not there is a bad argument.
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

#[test]
fn plot_is_written_and_not_replaced_without_force() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let svg = dir.path().join("front.svg");
    let s = svg.to_string_lossy().into_owned();
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend([
        "--sweep",
        "margin_step_db=0.25..1:0.25",
        "--plot",
        s.as_str(),
        "--quiet",
    ]);
    let o = tune(&args);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = std::fs::read_to_string(&svg).expect("plot written");
    roxmltree::Document::parse(&text).expect("the plot is well-formed SVG");
    // A second run refuses to replace it before replaying anything.
    let o = tune(&args);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(o.stdout.is_empty());
    args.push("--force");
    assert!(tune(&args).status.success());
}

/// The bundled demo fleet: a setting of this grid spends less mean power
/// than the default and loses no more packets.
#[test]
fn demo_fleet_has_a_setting_that_beats_the_default() {
    let logs: Vec<String> = [
        "orchard-868.csv",
        "cattle-collar-915.csv",
        "workshop-mesh-2g4.csv",
    ]
    .iter()
    .map(|n| example(&format!("examples/logs/{n}")))
    .collect();
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend(["--sweep", "climb_after_losses=1..3:2", "--format", "json"]);
    let o = tune(&args);
    // Stderr is not a terminal here: no progress bar, no noise.
    assert!(o.stderr.is_empty(), "{}", stderr(&o));
    let v = json(&o);
    let d = &v["default"];
    let b = &v["beats_default"];
    assert!(b.is_object(), "nothing beats the default: {v}");
    assert!(f(b, "mean_tx_dbm") < f(d, "mean_tx_dbm"));
    assert!(f(b, "outage_fraction") <= f(d, "outage_fraction"));
    assert_eq!(u(d, "records"), 90_000);
    assert!(f(&v["beats_default_vs_default"], "mean_tx_change_db") < 0.0);
}

/// `tune` without a sweep gives `replay`'s totals bit for bit, on every
/// bundled log (demo and fault logs), taking the same setting flags.
#[test]
fn without_a_sweep_tune_is_replay_on_every_bundled_log() {
    let mut logs: Vec<String> = [
        "orchard-868.csv",
        "cattle-collar-915.csv",
        "workshop-mesh-2g4.csv",
    ]
    .iter()
    .map(|n| example(&format!("examples/logs/{n}")))
    .collect();
    let faults = Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples/logs/faults");
    let mut names: Vec<PathBuf> = std::fs::read_dir(&faults)
        .expect("faults")
        .map(|e| e.expect("entry").path())
        .collect();
    names.sort();
    logs.extend(names.iter().map(|p| p.to_string_lossy().into_owned()));
    for flags in [
        vec![],
        vec!["--target-outage", "2%", "--set", "deadband_db=2dB"],
    ] {
        let mut a: Vec<&str> = logs.iter().map(String::as_str).collect();
        a.extend(flags.iter().copied());
        a.extend(["--format", "jsonl"]);
        let tuned = lines(&tune(&a));
        let mut b: Vec<&str> = logs.iter().map(String::as_str).collect();
        b.extend(flags.iter().copied());
        b.extend(["--format", "json"]);
        let replayed = json(&run("replay", &b));
        let per_log = replayed["logs"].as_array().expect("logs");
        assert_eq!(tuned.len(), per_log.len());
        for (t, r) in tuned.iter().zip(per_log) {
            for (k, v) in r.as_object().expect("object") {
                if matches!(k.as_str(), "settings" | "warnings" | "rates") {
                    continue;
                }
                assert_eq!(&t[k], v, "{k} of {}", r["log"]);
            }
        }
    }
}

/// `--each-device`: the pooled loss may meet the target while one device
/// misses it; the report shows each candidate's worst device.
#[test]
fn each_device_requires_every_device_to_meet_the_target() {
    let dir = tempfile::tempdir().expect("tempdir");
    let logs = fleet(dir.path());
    let mut args: Vec<&str> = logs.iter().map(String::as_str).collect();
    args.extend(["--sweep", "margin_step_db=0.25,1", "--format", "json"]);
    let pooled = json(&tune(&args));
    for p in points(&pooled) {
        assert!(p["worst_outage_fraction"].is_number(), "{p}");
        assert!(p["worst_log"].is_string(), "{p}");
        assert!(f(&p, "worst_outage_fraction") >= f(&p, "outage_fraction") - 1e-9);
    }
    args.push("--each-device");
    let each = json(&tune(&args));
    assert_eq!(each["each_device"], true);
    for p in points(&each) {
        let every = f(&p, "worst_outage_fraction") <= f(&each, "target_outage") + 1e-9;
        assert_eq!(
            p["meets_target"],
            every && f(&p, "outage_fraction") <= 0.01 + 1e-9,
            "{p}"
        );
    }
}

/// With an energy profile, the front can be drawn in charge per delivered
/// packet (or mean current) against loss; without one, those objectives
/// are refused.
#[test]
fn energy_objectives_need_a_profile_and_rank_by_charge() {
    let log = example("examples/logs/workshop-mesh-2g4.csv");
    let profile = example("examples/energy/workshop-mesh-2g4.toml");
    let o = tune(&[&log, "--objective", "charge", "--sweep", "deadband_db=0,1"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("--energy"), "{}", stderr(&o));
    let v = json(&tune(&[
        &log,
        "--energy",
        &profile,
        "--objective",
        "charge",
        "--sweep",
        "deadband_db=0,1,2",
        "--format",
        "json",
    ]));
    assert_eq!(v["objective"], "charge");
    let all = points(&v);
    for p in &all {
        assert!(
            p["energy"]["charge_per_delivered_uc"]
                .as_f64()
                .is_some_and(|q| q > 0.0),
            "{p}"
        );
    }
    // The front is non-dominated in (charge per delivered, loss).
    let key = |p: &Value| {
        (
            p["energy"]["charge_per_delivered_uc"]
                .as_f64()
                .expect("charge"),
            f(p, "outage_fraction"),
        )
    };
    for p in all.iter().filter(|p| p["on_front"] == true) {
        for q in &all {
            let (a, b) = (key(q), key(p));
            assert!(
                !(a.0 <= b.0 && a.1 <= b.1 && (a.0 < b.0 || a.1 < b.1)),
                "{q} dominates {p}"
            );
        }
    }
}
