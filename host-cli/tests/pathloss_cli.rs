//! `headroom pathloss` and `headroom rain` through the built binary.

use std::process::{Command, Output};

fn headroom(args: &[&str]) -> Output {
    match Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .output()
    {
        Ok(o) => o,
        Err(e) => panic!("cannot run headroom: {e}"),
    }
}

fn json(out: &Output) -> serde_json::Value {
    assert!(
        out.status.success(),
        "stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    match serde_json::from_slice(&out.stdout) {
        Ok(v) => v,
        Err(e) => panic!("not JSON ({e}): {}", String::from_utf8_lossy(&out.stdout)),
    }
}

fn num(v: &serde_json::Value, key: &str) -> f64 {
    match v.get(key).and_then(serde_json::Value::as_f64) {
        Some(x) => x,
        None => panic!("no number under {key}: {v}"),
    }
}

/// A refusal: exit code 2 and exactly one line on stderr naming `flag`.
fn refused(out: &Output, flag: &str) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "stderr: {err}");
    assert!(err.contains(flag), "stderr: {err}");
}

#[test]
fn free_space_json() {
    // 20·log10(4πd/λ) (ITU-R P.525-4 eq. (4)) evaluated in f64: 92.4478 dB at 1 GHz, 1 km.
    let out = headroom(&[
        "pathloss",
        "--model",
        "free-space",
        "--frequency",
        "1GHz",
        "--distance",
        "1km",
        "--format",
        "json",
    ]);
    let v = json(&out);
    assert!((num(&v, "path_loss_db") - 92.4478).abs() < 2e-3, "{v}");
    assert_eq!(v.get("model").and_then(|m| m.as_str()), Some("free-space"));
}

#[test]
fn hata_json_and_refusal() {
    let base = [
        "pathloss",
        "--model",
        "hata",
        "--frequency",
        "900MHz",
        "--tx-height",
        "50m",
        "--rx-height",
        "1.5m",
        "--environment",
        "medium-city",
        "--format",
        "json",
    ];
    // Hata 1980 urban formula in f64: 146.9428 dB at 5 km.
    let mut args = base.to_vec();
    args.extend(["--distance", "5km"]);
    let v = json(&headroom(&args));
    assert!((num(&v, "path_loss_db") - 146.9428).abs() < 2e-3, "{v}");
    // 40 km is outside 1-20 km: refused unless an extrapolation is named.
    let mut far = base.to_vec();
    far.extend(["--distance", "40km"]);
    refused(&headroom(&far), "--distance");
    far.extend(["--extrapolate", "distance"]);
    assert!(num(&json(&headroom(&far)), "path_loss_db") > 146.9428);
}

/// Refused by clap's value parser (before `run`): exit code 2, the first line
/// names the flag and the reason (clap adds a hint line after it).
fn rejected_by_parser(out: &Output, flag: &str, why: &str) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    let first = err.lines().next().unwrap_or("");
    assert!(first.contains(flag) && first.contains(why), "stderr: {err}");
}

#[test]
fn bad_arguments_exit_2_with_one_line() {
    refused(
        &headroom(&[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "1GHz",
            "--distance=-3km",
        ]),
        "--distance",
    );
    refused(
        &headroom(&[
            "pathloss",
            "--model",
            "hata",
            "--frequency",
            "900MHz",
            "--distance",
            "5km",
        ]),
        "--tx-height",
    );
    refused(
        &headroom(&[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "1GHz",
            "--distance",
            "1km",
            "--exponent",
            "3",
        ]),
        "--exponent",
    );
    refused(
        &headroom(&[
            "rain",
            "--frequency",
            "20GHz",
            "--rain-rate",
            "40",
            "--elevation",
            "30",
            "--tilt",
            "circular",
            "--exceeded-percent",
            "0.1",
        ]),
        "--rain-height",
    );
    refused(
        &headroom(&[
            "rain",
            "--frequency",
            "80GHz",
            "--rain-rate",
            "40",
            "--elevation",
            "30",
            "--tilt",
            "45",
            "--exceeded-percent",
            "0.1",
            "--rain-height",
            "3.6km",
            "--station-height",
            "0m",
            "--latitude",
            "50",
        ]),
        "--frequency",
    );
    rejected_by_parser(
        &headroom(&[
            "rain",
            "--frequency",
            "20GHz",
            "--rain-rate",
            "40",
            "--elevation",
            "30",
            "--tilt",
            "45",
            "--exceeded-percent",
            "0.1",
            "--rain-height",
            "3.6",
            "--station-height",
            "0m",
            "--latitude",
            "50",
        ]),
        "--rain-height",
        "give a unit",
    );
    rejected_by_parser(
        &headroom(&[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "2.4 parsecs",
            "--distance",
            "1km",
        ]),
        "--frequency",
        "unknown frequency unit",
    );
}

#[test]
fn rain_json() {
    // A row of tests/golden/rain.csv (itur 0.4, P.838-3 and P.618-13):
    // 20 GHz, R0.01 = 42 mm/h, elevation 3 deg, vertical, latitude 3.7,
    // rain height 4.736307 km, station 50 m, 0.1 %: gamma 3.813260 dB/km,
    // A = 47.18355 dB.
    let out = headroom(&[
        "rain",
        "--frequency",
        "20GHz",
        "--rain-rate",
        "42",
        "--elevation",
        "3",
        "--tilt",
        "vertical",
        "--exceeded-percent",
        "0.1%",
        "--rain-height",
        "4.736307km",
        "--station-height",
        "50m",
        "--latitude",
        "3.7",
        "--format",
        "json",
    ]);
    let v = json(&out);
    assert!(
        (num(&v, "specific_attenuation_db_per_km") - 3.813260).abs() < 1e-4,
        "{v}"
    );
    assert!((num(&v, "attenuation_db") - 47.18355).abs() < 0.01, "{v}");
    // Without the slant-path options there is no attenuation_db.
    let v = json(&headroom(&[
        "rain",
        "--frequency",
        "20GHz",
        "--rain-rate",
        "42",
        "--elevation",
        "3",
        "--tilt",
        "90",
        "--format",
        "json",
    ]));
    assert!(v.get("attenuation_db").is_none());
    assert!(
        (num(&v, "specific_attenuation_db_per_km") - 3.813260).abs() < 1e-4,
        "{v}"
    );
}
