//! `headroom noise`, `headroom ber` and `headroom fade` through the built
//! binary: JSON keys and values, and one-line refusals with exit code 2.

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

fn json(args: &[&str]) -> serde_json::Value {
    let out = headroom(args);
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
fn refused(args: &[&str], flag: &str) {
    let out = headroom(args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "stderr: {err}");
    assert!(err.contains(flag), "stderr: {err}");
}

#[test]
fn noise_json() {
    // kT0B at 125 kHz = −173.98 + 50.97 = −123.01 dBm; + NF 6 dB (from k and T0).
    let v = json(&[
        "noise",
        "--bandwidth",
        "125kHz",
        "--noise-figure-db",
        "6",
        "--format",
        "json",
    ]);
    assert!((num(&v, "thermal_noise_dbm") + 123.006).abs() < 0.01, "{v}");
    assert!((num(&v, "noise_power_dbm") + 117.006).abs() < 0.01, "{v}");
    // Te = 290·(10^0.6 − 1) = 864.5 K (definition of noise factor).
    assert!(
        (num(&v, "noise_temperature_k") - 864.51).abs() < 0.05,
        "{v}"
    );
    // Te = 290 K is a noise figure of 3.01 dB.
    let v = json(&[
        "noise",
        "--bandwidth",
        "1Hz",
        "--temperature-k",
        "290K",
        "--format",
        "json",
    ]);
    assert!((num(&v, "noise_figure_db") - 3.0103).abs() < 1e-3, "{v}");
    assert!(
        (num(&v, "noise_power_dbm") + 173.975 - 3.0103).abs() < 0.01,
        "{v}"
    );
}

#[test]
fn noise_refusals() {
    refused(&["noise", "--bandwidth", "0Hz"], "--bandwidth");
    refused(
        &["noise", "--bandwidth", "1MHz", "--noise-figure-db", "-2"],
        "--noise-figure-db",
    );
    refused(
        &["noise", "--bandwidth", "1MHz", "--temperature-k", "-5"],
        "--temperature-k",
    );
}

#[test]
fn ber_json() {
    // BPSK at 1e-5 needs 9.59 dB (common practice, textbook tables).
    let v = json(&[
        "ber",
        "--modulation",
        "bpsk",
        "--ber",
        "1e-5",
        "--format",
        "json",
    ]);
    assert!((num(&v, "ebn0_db") - 9.588).abs() < 0.01, "{v}");
    // 16-QAM at 1e-5 needs about 13.4 dB (common practice, textbook tables).
    let v = json(&[
        "ber",
        "--modulation",
        "qam",
        "--order",
        "16",
        "--ber",
        "1e-5",
        "--format",
        "json",
    ]);
    assert!((num(&v, "ebn0_db") - 13.43).abs() < 0.02, "{v}");
    // Non-coherent FSK at 10 dB: ½·e⁻⁵ = 3.369e-3; small values keep their digits.
    let v = json(&[
        "ber",
        "--modulation",
        "fsk-noncoherent",
        "--ebn0",
        "10",
        "--format",
        "json",
    ]);
    assert!((num(&v, "ber") - 3.3690e-3).abs() < 1e-6, "{v}");
    let v = json(&[
        "ber",
        "--modulation",
        "bpsk",
        "--ebn0",
        "12",
        "--format",
        "json",
    ]);
    assert!((num(&v, "ber") / 9.0060e-9 - 1.0).abs() < 1e-3, "{v}");
}

#[test]
fn ber_refusals() {
    refused(&["ber", "--modulation", "psk", "--ber", "1e-5"], "--order");
    refused(
        &[
            "ber",
            "--modulation",
            "qam",
            "--order",
            "8",
            "--ber",
            "1e-5",
        ],
        "--order",
    );
    refused(
        &[
            "ber",
            "--modulation",
            "bpsk",
            "--order",
            "2",
            "--ber",
            "1e-5",
        ],
        "--order",
    );
    refused(&["ber", "--modulation", "bpsk", "--ber", "0"], "--ber");
    refused(&["ber", "--modulation", "bpsk", "--ber", "0.7"], "--ber");
}

#[test]
fn fade_json() {
    // Rayleigh, 99 %: −1/ln 0.99 → 19.98 dB (closed form); fraction and percent agree.
    for a in ["0.99", "99%"] {
        let v = json(&[
            "fade",
            "--model",
            "rayleigh",
            "--availability",
            a,
            "--format",
            "json",
        ]);
        assert!((num(&v, "margin_db") - 19.978).abs() < 0.01, "{v}");
    }
    // Log-normal σ = 8 dB, 90 %: 1.2816·8 = 10.25 dB (normal tables).
    let v = json(&[
        "fade",
        "--model",
        "lognormal",
        "--sigma",
        "8",
        "--availability",
        "90%",
        "--format",
        "json",
    ]);
    assert!((num(&v, "margin_db") - 10.253).abs() < 0.01, "{v}");
    // Rician margin lies below Rayleigh's, and the margin form inverts it.
    let v = json(&[
        "fade",
        "--model",
        "rician",
        "--k-factor",
        "10",
        "--availability",
        "0.999",
        "--format",
        "json",
    ]);
    let m = num(&v, "margin_db");
    assert!(m > 0.0 && m < 29.99, "{v}");
    let ms = format!("{m}");
    let v = json(&[
        "fade",
        "--model",
        "rician",
        "--k-factor",
        "10",
        "--margin-db",
        &ms,
        "--format",
        "json",
    ]);
    assert!((num(&v, "availability") - 0.999).abs() < 1e-5, "{v}");
    // A 60 dB Rayleigh margin: outage 1 − exp(−1e-6) ≈ 1e-6, printed with its digits.
    let v = json(&[
        "fade",
        "--model",
        "rayleigh",
        "--margin-db",
        "60",
        "--format",
        "json",
    ]);
    assert!((num(&v, "outage") / 1e-6 - 1.0).abs() < 1e-3, "{v}");
}

#[test]
fn fade_refusals() {
    refused(
        &["fade", "--model", "rayleigh", "--availability", "99"],
        "--availability",
    );
    refused(
        &["fade", "--model", "rayleigh", "--availability", "100%"],
        "--availability",
    );
    refused(
        &["fade", "--model", "rayleigh", "--availability", "0"],
        "--availability",
    );
    refused(
        &["fade", "--model", "rician", "--availability", "0.9"],
        "--k-factor",
    );
    refused(
        &[
            "fade",
            "--model",
            "rician",
            "--k-factor",
            "40",
            "--availability",
            "0.9",
        ],
        "--k-factor",
    );
    refused(
        &["fade", "--model", "composite", "--availability", "0.9"],
        "--sigma",
    );
    refused(
        &[
            "fade",
            "--model",
            "rayleigh",
            "--sigma",
            "8",
            "--availability",
            "0.9",
        ],
        "--sigma",
    );
}
