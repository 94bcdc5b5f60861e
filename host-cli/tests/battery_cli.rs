//! `headroom battery` through the built binary, on the example energy
//! profiles: JSON keys and values, and one-line refusals with exit code 2.

use std::io::Write as _;
use std::process::{Command, Output};

use serde_json::Value;

const ORCHARD: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../examples/energy/orchard-868.toml"
);
const COLLAR: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../examples/energy/cattle-collar-915.toml"
);
const WORKSHOP: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../examples/energy/workshop-mesh-2g4.toml"
);

fn headroom(args: &[&str]) -> Output {
    match Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .output()
    {
        Ok(o) => o,
        Err(e) => panic!("cannot run headroom: {e}"),
    }
}

fn json(args: &[&str]) -> Value {
    let mut all = args.to_vec();
    all.extend(["--format", "json"]);
    let out = headroom(&all);
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

fn num(v: &Value, key: &str) -> f64 {
    match v.get(key).and_then(Value::as_f64) {
        Some(x) => x,
        None => panic!("no number under {key}: {v}"),
    }
}

fn refused(args: &[&str], what: &str) {
    let out = headroom(args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "stderr: {err}");
    assert!(err.contains(what), "stderr: {err}");
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

#[test]
fn orchard_sf9_at_three_powers() {
    let v = json(&[
        "battery",
        ORCHARD,
        "--interval",
        "5min",
        "--tx",
        "14dBm,2dBm",
        "--frequency",
        "868.1MHz",
    ]);
    // SF9, 125 kHz, 4/5, 8 preamble symbols, explicit header, CRC, 20 bytes:
    // T_sym 4.096 ms; payload ⌈(160 − 36 + 28 + 16)/36⌉ = 5 blocks of 5
    // symbols + 8 = 33; (12.25 + 33) · 4.096 = 185.344 ms (data-sheet formula).
    assert_eq!(num(&v, "airtime_ms"), 185.344);
    assert!(rel(num(&v, "duty_cycle_percent"), 185.344 / 300_000.0 * 100.0) < 1e-6);
    let bands = v["en_300_220_sub_bands"]
        .as_array()
        .cloned()
        .unwrap_or_default();
    assert_eq!(bands.len(), 1, "{v}");
    assert_eq!(num(&bands[0], "duty_limit_percent"), 1.0);
    assert_eq!(bands[0]["within_duty_limit"], Value::Bool(true));
    let rows = v["per_power"].as_array().cloned().unwrap_or_default();
    assert_eq!(rows.len(), 2);
    // 14 dBm: 44 mA · 185.344 ms + 11.5 mA · 160 ms + 900 µC = 10 895.136 µC;
    // / 300 s + 1.8 µA = 38.117 µA; 3000 mAh → 3 000 000 / 38.117 / 24 days.
    let q = 44.0 * 185.344 + 11.5 * 160.0 + 900.0;
    assert!(rel(num(&rows[0], "charge_per_packet_uc"), q) < 1e-6);
    let i = q / 300.0 + 1.8;
    assert!(rel(num(&rows[0], "mean_current_ua"), i) < 1e-6);
    assert!(rel(num(&rows[0], "battery_life_days"), 3e6 / i / 24.0) < 1e-6);
    // Turning down to 2 dBm: 1/16 of the power, but the battery lasts only
    // about half as long again.
    let gain = num(&rows[1], "battery_life_days") / num(&rows[0], "battery_life_days");
    assert!(gain > 1.4 && gain < 1.7, "{gain}");
    assert_eq!(v["usable_fraction"], Value::from("off"));
}

#[test]
fn refinements_and_resends_are_shown() {
    let v = json(&[
        "battery",
        COLLAR,
        "--interval",
        "1min",
        "--tx",
        "20dBm",
        "--loss",
        "20%",
        "--max-retries",
        "2",
    ]);
    assert_eq!(num(&v, "usable_fraction"), 0.8);
    assert_eq!(num(&v, "self_discharge_per_year"), 0.01);
    assert_eq!(v["max_retries_source"], Value::from("--max-retries"));
    // 1 + 0.2 + 0.04 attempts; 1 − 0.008 delivered.
    assert!(rel(num(&v, "expected_attempts"), 1.24) < 1e-6);
    assert!(rel(num(&v, "delivered_fraction"), 0.992) < 1e-6);
    let row = &v["per_power"][0];
    let q = num(row, "charge_per_packet_uc");
    let radio = q - 120_000.0;
    let per_delivered = (120_000.0 + radio * 1.24) / 0.992;
    assert!(rel(num(row, "charge_per_delivered_uc"), per_delivered) < 1e-6);
    // Life with 80 % usable and 1 %/year: 19 000 mAh.
    let i = num(row, "mean_current_ua");
    let life = 19e6 * 0.8 / (i + 19e6 * 0.01 / 8766.0) / 24.0;
    assert!(rel(num(row, "battery_life_days"), life) < 1e-6);
    // The workshop profile's own max_retries is used when the option is absent.
    let v = json(&["battery", WORKSHOP, "--interval", "10s", "--tx", "0dBm"]);
    assert_eq!(num(&v, "max_retries"), 3.0);
    assert_eq!(v["max_retries_source"], Value::from("profile"));
    assert_eq!(num(&v, "airtime_ms"), 1.536);
}

#[test]
fn refusals() {
    refused(
        &["battery", ORCHARD, "--interval", "300", "--tx", "14dBm"],
        "needs a unit",
    );
    refused(
        &["battery", ORCHARD, "--interval", "5min", "--tx", "15dBm"],
        "--tx: 15 dBm is outside the profile's transmit current table",
    );
    refused(
        &["battery", ORCHARD, "--interval", "100ms", "--tx", "14dBm"],
        "--interval: 0.1 s is shorter than the active time",
    );
    refused(
        &[
            "battery",
            ORCHARD,
            "--interval",
            "5min",
            "--tx",
            "14dBm",
            "--loss",
            "5",
        ],
        "ambiguous",
    );
    refused(
        &[
            "battery",
            "/nonexistent/profile.toml",
            "--interval",
            "5min",
            "--tx",
            "14dBm",
        ],
        "/nonexistent/profile.toml",
    );
    let mut f = match tempfile::NamedTempFile::new() {
        Ok(f) => f,
        Err(e) => panic!("{e}"),
    };
    let text = std::fs::read_to_string(ORCHARD).unwrap_or_default();
    let bad = text.replace("sleep_current_ua = 1.8", "sleep_current_ua = -1");
    assert_ne!(bad, text);
    if let Err(e) = f.write_all(bad.as_bytes()) {
        panic!("{e}");
    }
    let path = f.path().display().to_string();
    refused(
        &["battery", &path, "--interval", "5min", "--tx", "14dBm"],
        "sleep_current_ua: -1 is outside the accepted range: from 0 up to 100000 µA",
    );
}

#[test]
fn a_rate_table_lists_each_rate_with_the_engine_airtime() {
    use headroom::energy::airtime::{ChirpModem, LowDataRate};
    use headroom::units::Hertz;
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../examples/energy/orchard-868-rates.toml"
    );
    let v = json(&["battery", path, "--interval", "5min", "--tx", "14dBm"]);
    let rates = v["rates"].as_array().expect("rates");
    assert_eq!(rates.len(), 6);
    for (r, sf) in rates.iter().zip(7u8..) {
        assert_eq!(r["name"], format!("sf{sf}"));
        // The engine's airtime of the profile's modem at this spreading
        // factor, for its 20-byte payload.
        let want = ChirpModem {
            spreading_factor: sf,
            bandwidth: Hertz(125e3),
            coding_rate: 1,
            preamble_symbols: 8,
            explicit_header: true,
            crc: true,
            low_data_rate: LowDataRate::Auto,
        }
        .airtime(20)
        .expect("airtime");
        let got = r["airtime_ms"].as_f64().expect("airtime_ms");
        assert!(
            (got - f64::from(want.0)).abs() < 1e-3,
            "sf{sf}: {got} vs {want:?}"
        );
        assert_eq!(r["noise_bandwidth_hz"], 125000.0);
    }
    // The profile's own airtime (SF9) is the sf9 rate's.
    assert_eq!(v["airtime_ms"], rates[2]["airtime_ms"]);
    // Without [[rate]] entries, no rates key.
    let v = json(&["battery", ORCHARD, "--interval", "5min", "--tx", "14dBm"]);
    assert!(v.get("rates").is_none());
}

#[test]
fn a_bare_airtime_in_a_rate_is_refused_naming_the_entry() {
    let text = std::fs::read_to_string(ORCHARD).expect("profile")
        + "\n[[rate]]\nname = \"sf7\"\nrequired_snr = \"-7.5 dB\"\nairtime = 41.216\n";
    let mut f = tempfile::NamedTempFile::new().expect("temp");
    f.write_all(text.as_bytes()).expect("write");
    let path = f.path().to_string_lossy().into_owned();
    let o = headroom(&["battery", &path, "--interval", "5min", "--tx", "14dBm"]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("rate 1 (sf7): airtime: '41.216' needs a unit"),
        "{e}"
    );
    assert_eq!(e.lines().count(), 1, "{e}");
}
