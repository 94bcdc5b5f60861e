//! The calculators cannot mislead: each case here is one way a new user got
//! nonsense with exit 0 before (units guessed, physics unchecked, the
//! receive chain's noise ignored, no transmitter limits, three TOML
//! dialects, hints that could not help).

use std::path::PathBuf;
use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .output()
        .expect("runs")
}

fn json(args: &[&str]) -> serde_json::Value {
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let out = run(&a);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("one JSON object")
}

fn num(v: &serde_json::Value, key: &str) -> f64 {
    v.get(key)
        .and_then(serde_json::Value::as_f64)
        .unwrap_or_else(|| panic!("no number under {key}: {v}"))
}

/// Exit 2, one line on stderr, containing every needle.
fn refused(args: &[&str], needles: &[&str]) -> String {
    let out = run(args);
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{args:?}: {err}");
    for n in needles {
        assert!(err.contains(n), "{args:?}: no {n:?} in {err}");
    }
    err
}

fn example(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../examples/links")
        .join(name)
}

fn orchard() -> String {
    std::fs::read_to_string(example("orchard-sensor.toml")).expect("example link")
}

fn write(dir: &tempfile::TempDir, name: &str, text: &str) -> String {
    let p = dir.path().join(name);
    std::fs::write(&p, text).expect("write");
    p.to_str().expect("utf-8").to_string()
}

// --- a bare number is never taken in the base unit ------------------------------

#[test]
fn a_bare_frequency_on_the_command_line_is_refused_with_a_hint() {
    refused(
        &[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "868",
            "--distance",
            "1km",
        ],
        &["--frequency", "868: give a unit, e.g. 868MHz"],
    );
    refused(
        &[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "868MHz",
            "--distance",
            "3",
        ],
        &["--distance", "give a unit"],
    );
    refused(
        &["noise", "--bandwidth", "125", "--noise-figure-db", "6"],
        &["--bandwidth", "give a unit"],
    );
}

#[test]
fn bare_frequency_and_bandwidth_in_a_link_file_are_refused() {
    let dir = tempfile::tempdir().expect("tempdir");
    let f = write(
        &dir,
        "f.toml",
        &orchard().replace("frequency = \"868.3MHz\"", "frequency = 2440"),
    );
    refused(
        &["budget", &f],
        &["f.toml", "frequency", "2440: give a unit"],
    );
    let b = write(
        &dir,
        "b.toml",
        &orchard().replace("bandwidth = \"125kHz\"", "bandwidth = 125"),
    );
    refused(&["budget", &b], &["receiver.bandwidth", "give a unit"]);
    // A frequency with its unit but a slip of a thousand: the plausible range.
    let slip = write(
        &dir,
        "slip.toml",
        &orchard().replace("\"868.3MHz\"", "\"868.3Hz\""),
    );
    refused(
        &["budget", &slip],
        &["frequency", "100.000 kHz..300.000 GHz"],
    );
}

// --- impossible answers do not pass ---------------------------------------------

#[test]
fn free_space_inside_a_wavelength_is_refused() {
    refused(
        &[
            "pathloss",
            "--model",
            "free-space",
            "--frequency",
            "868MHz",
            "--distance",
            "1cm",
        ],
        &["--distance", "10.0 mm", "at least 345.4 mm"],
    );
}

#[test]
fn the_asymptotic_two_ray_form_below_its_crossover_is_refused() {
    refused(
        &[
            "pathloss",
            "--model",
            "two-ray",
            "--form",
            "asymptotic",
            "--frequency",
            "868MHz",
            "--distance",
            "100m",
            "--tx-height",
            "10m",
            "--rx-height",
            "2m",
        ],
        &["--distance", "at least 727.7 m"],
    );
}

#[test]
fn an_implausible_log_distance_exponent_is_refused() {
    refused(
        &[
            "pathloss",
            "--model",
            "log-distance",
            "--frequency",
            "868MHz",
            "--distance",
            "1km",
            "--exponent",
            "30",
        ],
        &["--exponent", "1.50..6.00"],
    );
}

#[test]
fn received_power_above_transmitted_power_is_a_warning() {
    let dir = tempfile::tempdir().expect("tempdir");
    // An absurd 200 dBi receive antenna gain is refused by its range...
    let big = write(
        &dir,
        "big.toml",
        &orchard().replace("gain = \"5dBi\"", "gain = \"200dBi\""),
    );
    refused(&["budget", &big], &["item[3]", "-100.00 dB..100.00 dB"]);
    // ... and a plausible but overwhelming one passes with a warning.
    let near = write(
        &dir,
        "near.toml",
        &orchard()
            .replace("gain = \"5dBi\"", "gain = \"90dBi\"")
            .replace("distance = \"1.4km\"", "distance = \"100m\""),
    );
    let out = run(&["budget", &near, "--format", "json"]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let w = v["warnings"].as_array().expect("warnings list");
    assert!(
        w.iter().any(|m| m
            .as_str()
            .is_some_and(|m| m.contains("above the transmitted"))),
        "{v}"
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("warning"));
}

// --- the receive chain's noise ----------------------------------------------------

fn ground_station(rx_items: &str, receiver_nf: &str) -> String {
    format!(
        r#"name = "chain"
frequency = "436.5MHz"
[transmitter]
power = "30dBm"
[[item]]
name = "yagi"
side = "rx"
gain = "14dBi"
{rx_items}
[path]
model = "free-space"
distance = "2000km"
[receiver]
bandwidth = "12kHz"
noise_figure = "{receiver_nf}"
antenna_temperature = "50K"
[requirement]
snr = "10dB"
"#
    )
}

#[test]
fn a_feeder_before_the_receiver_adds_its_noise() {
    let dir = tempfile::tempdir().expect("tempdir");
    let feeder = "[[item]]\nname = \"feeder\"\nside = \"rx\"\nloss = \"1dB\"\n";
    let with = json(&[
        "budget",
        &write(&dir, "with.toml", &ground_station(feeder, "0.5dB")),
    ]);
    let without = json(&[
        "budget",
        &write(&dir, "without.toml", &ground_station("", "0.5dB")),
    ]);
    // Ta/L + Tp(1 − 1/L) + Trx = 39.716 + 59.645 + 35.385 K (independent f64
    // reference in tests/src/budget.rs; textbook feeder-before-LNA result).
    let t = num(&with, "system_temperature_k");
    assert!((t - 134.746).abs() < 0.05, "{with}");
    // The feeder costs 1 dB of signal and 1.98 dB of noise: C/N 2.98 dB worse,
    // not 1 dB.
    let d = num(&without, "cn_db") - num(&with, "cn_db");
    assert!((d - 2.98).abs() < 0.01, "{d}");
}

#[test]
fn an_lna_raises_cn_by_its_noise_not_by_its_gain() {
    let dir = tempfile::tempdir().expect("tempdir");
    let lna = "[[item]]\nname = \"lna\"\nside = \"rx\"\ngain = \"20dB\"\nnoise_figure = \"1dB\"\n";
    let with = json(&[
        "budget",
        &write(&dir, "lna.toml", &ground_station(lna, "6dB")),
    ]);
    let without = json(&[
        "budget",
        &write(&dir, "bare.toml", &ground_station("", "6dB")),
    ]);
    // Without: T = 50 + 864.51 K. With: 50 + 75.09 + 864.51/100 K. The
    // improvement is 10·log10(914.51/133.74) = 8.35 dB, not the 20 dB gain.
    let gain = num(&with, "cn_db") - num(&without, "cn_db");
    assert!((gain - 8.35).abs() < 0.01, "{gain}");
    // G/T is reported at the antenna terminals.
    let gt = num(&with, "g_over_t_db_per_k");
    assert!(
        (gt - (14.0 - 10.0 * 133.74f64.log10())).abs() < 0.01,
        "{gt}"
    );
    // An antenna gain after the amplifier is refused.
    let wrong = format!("{lna}[[item]]\nname = \"dish\"\nside = \"rx\"\ngain = \"3dBi\"\n");
    refused(
        &[
            "budget",
            &write(&dir, "wrong.toml", &ground_station(&wrong, "6dB")),
        ],
        &["'dish'", "noise_figure"],
    );
}

// --- transmitter limits -----------------------------------------------------------

#[test]
fn solving_for_tx_power_reports_eirp_and_the_limits() {
    let p = example("orchard-sensor.toml");
    let p = p.to_str().expect("utf-8");
    let ok = json(&["solve", p, "--for", "tx-power", "--target-margin", "3dB"]);
    assert_eq!(ok["within_limits"], serde_json::json!(true), "{ok}");
    assert!(
        (num(&ok, "eirp_dbm") - num(&ok, "tx_power_dbm") - 1.45).abs() < 1e-3,
        "{ok}"
    );
    let out = run(&[
        "solve",
        p,
        "--for",
        "tx-power",
        "--target-margin",
        "100dB",
        "--format",
        "json",
    ]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    assert_eq!(v["within_limits"], serde_json::json!(false), "{v}");
    let text = v["warnings"].to_string();
    assert!(text.contains("max_power") && text.contains("ERP"), "{v}");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("warning: transmit power"), "{err}");
}

#[test]
fn budget_prints_eirp_erp_and_the_engine_figures() {
    let v = json(&[
        "budget",
        example("smallsat-ground-station.toml")
            .to_str()
            .expect("utf-8"),
    ]);
    for key in [
        "eirp_dbm",
        "erp_dbm",
        "power_flux_density_dbw_m2",
        "system_temperature_k",
        "system_temperature_antenna_k",
        "g_over_t_db_per_k",
        "cn0_dbhz",
        "ebn0_db",
        "shannon_capacity_bps",
        "within_limits",
        "warnings",
    ] {
        assert!(v.get(key).is_some(), "no {key}: {v}");
    }
    assert!((num(&v, "eirp_dbm") - num(&v, "erp_dbm") - 2.15).abs() < 1e-3);
    // PFD = EIRP − 10·log10(4π d²): −1 dBW at 2000 km gives −137.0 dB(W/m²).
    let pfd = -1.0 - 10.0 * (4.0 * std::f64::consts::PI * 2e6f64.powi(2)).log10();
    assert!(
        (num(&v, "power_flux_density_dbw_m2") - pfd).abs() < 0.01,
        "{v}"
    );
}

#[test]
fn solve_names_its_answer_max_path_loss_db() {
    let p = example("orchard-sensor.toml");
    let v = json(&["solve", p.to_str().expect("utf-8"), "--for", "path-loss"]);
    assert!(
        v.get("max_path_loss_db").is_some() && v.get("path_loss_db").is_none(),
        "{v}"
    );
}

// --- one dialect ---------------------------------------------------------------------

#[test]
fn the_same_unit_strings_everywhere() {
    let dir = tempfile::tempdir().expect("tempdir");
    let pct = write(&dir, "pct.toml", &orchard().replace("\"99%\"", "\"99.9%\""));
    let v = json(&["budget", &pct]);
    assert!(num(&v, "fade_margin_db") > 11.0);
    let caps = json(&[
        "pathloss",
        "--model",
        "free-space",
        "--frequency",
        "868mhz",
        "--distance",
        "2KM",
    ]);
    assert_eq!(num(&caps, "distance_m"), 2000.0);
    let rain = json(&[
        "rain",
        "--frequency",
        "20GHz",
        "--rain-rate",
        "40",
        "--elevation",
        "30deg",
        "--tilt",
        "45deg",
    ]);
    assert_eq!(num(&rain, "elevation_deg"), 30.0);
    let fade = json(&[
        "fade",
        "--model",
        "rician",
        "--k-factor",
        "6dB",
        "--availability",
        "99%",
    ]);
    assert!(num(&fade, "margin_db") > 0.0);
}

#[test]
fn scenario_files_take_unit_strings_and_read_old_spellings_with_a_warning() {
    let dir = tempfile::tempdir().expect("tempdir");
    let scen = |name: &str, channel: &str| {
        let text = format!(
            "[channel]\n{channel}\npacket_interval_ms = 1000\nfading = \"rayleigh\"\n\
             trajectory = {{ start = \"500m\" }}\nnoise = {{ mean = \"-117dBm\" }}\n\
             [power]\nlevels_dbm = [\"14dBm\"]\n[radio]\nmax_tx_dbm = \"20dBm\"\n"
        );
        write(&dir, name, &text)
    };
    let out_path = |n: &str| dir.path().join(n).to_str().expect("utf-8").to_string();
    let synth = |file: &str, out: &str| {
        run(&[
            "synth",
            "--scenario",
            file,
            "--seed",
            "1",
            "--records",
            "5",
            "--out",
            &out_path(out),
            "--format",
            "json",
        ])
    };
    let new = scen(
        "new.toml",
        "frequency = \"915MHz\"\npath_loss = { model = \"log-distance\", reference_distance = \"1m\", exponent = 3 }",
    );
    let out = synth(&new, "new.csv");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let old = scen(
        "old.toml",
        "frequency = 915.0e6\npath_loss = { log-distance = { d0 = 1.0, exponent = 3.0 } }",
    );
    let out = synth(&old, "old.csv");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("channel.frequency") && err.contains("915MHz"),
        "{err}"
    );
    assert!(err.contains("channel.path_loss"), "{err}");
    // Both spellings give the same log.
    let a = std::fs::read(out_path("new.csv")).expect("new log");
    let b = std::fs::read(out_path("old.csv")).expect("old log");
    assert_eq!(a, b);
    // An absurd report resolution is refused with its range.
    let res = scen(
        "res.toml",
        "frequency = \"915MHz\"\nreport_resolution = 1e38\npath_loss = { model = \"free-space\" }",
    );
    let out = synth(&res, "res.csv");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("channel.report_resolution") && err.contains("10.00 dB"),
        "{err}"
    );
    // A parameter the model does not take is named.
    let bad = scen(
        "bad.toml",
        "frequency = \"915MHz\"\npath_loss = { model = \"free-space\", tx_height = \"3m\" }",
    );
    let out = synth(&bad, "bad.csv");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("channel.path_loss.tx_height"), "{err}");
}

// --- hints that help ------------------------------------------------------------------

#[test]
fn hints_are_given_only_where_they_help() {
    let hata = |extra: &[&str]| {
        let mut a = vec![
            "pathloss",
            "--model",
            "hata",
            "--frequency",
            "868MHz",
            "--environment",
            "open",
        ];
        a.extend_from_slice(extra);
        a.iter().map(|s| s.to_string()).collect::<Vec<_>>()
    };
    let args = hata(&[
        "--distance",
        "5km",
        "--tx-height",
        "2m",
        "--rx-height",
        "30m",
    ]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let err = refused(&args, &["--tx-height", "base station", "30.0 m..200.0 m"]);
    assert!(!err.contains("--extrapolate"), "{err}");
    let args = hata(&[
        "--distance",
        "40km",
        "--tx-height",
        "30m",
        "--rx-height",
        "2m",
    ]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    refused(
        &args,
        &[
            "--distance",
            "40.000 km",
            "1.000 km..20.000 km",
            "--extrapolate",
        ],
    );
    let err = refused(
        &[
            "pathloss",
            "--model",
            "indoor",
            "--frequency",
            "2.4GHz",
            "--distance",
            "10m",
            "--environment",
            "office",
        ],
        &["--environment", "--coefficient-n"],
    );
    assert!(!err.contains("--extrapolate"), "{err}");
    // Ranges are in the unit a person reads, not raw Hz.
    let err = refused(
        &[
            "pathloss",
            "--model",
            "hata",
            "--frequency",
            "2.4GHz",
            "--distance",
            "5km",
            "--tx-height",
            "30m",
            "--rx-height",
            "2m",
            "--environment",
            "open",
        ],
        &["--frequency", "2.400 GHz", "150.000 MHz..1.500 GHz"],
    );
    assert!(!err.contains("2400000000"), "{err}");
}

// --- coverage curve and frequency scaling ------------------------------------------------

#[test]
fn coverage_curve_marks_the_range_at_the_target_margin() {
    let p = example("orchard-sensor.toml");
    let p = p.to_str().expect("utf-8");
    let v = json(&["budget", p, "--sweep", "distance", "--points", "9"]);
    let range = num(&v, "range_at_target_m");
    let target = num(&v, "target_margin_db");
    let pts = v["points"].as_array().expect("points");
    assert_eq!(pts.len(), 9, "{v}");
    // The margin falls through the target between the points around the range.
    let below = pts
        .iter()
        .find(|r| num(r, "distance_m") > range)
        .expect("a point beyond");
    let above = pts
        .iter()
        .rev()
        .find(|r| num(r, "distance_m") < range)
        .expect("a point within");
    assert!(
        num(below, "margin_db") < target && num(above, "margin_db") > target,
        "{v}"
    );
    // The same range as `solve --for range`.
    let s = json(&["solve", p, "--for", "range"]);
    assert!((num(&s, "range_m") - range).abs() < 0.5, "{s}");
    let dir = tempfile::tempdir().expect("tempdir");
    let plot = dir.path().join("coverage.svg");
    let out = run(&[
        "budget",
        p,
        "--sweep",
        "frequency",
        "--plot",
        plot.to_str().expect("utf-8"),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let svg = std::fs::read_to_string(&plot).expect("plot written");
    assert!(svg.contains("margin against frequency"));
}

#[test]
fn fixed_apertures_turn_the_frequency_penalty_into_a_gain() {
    let p = example("smallsat-ground-station.toml");
    let p = p.to_str().expect("utf-8");
    let base = num(&json(&["budget", p]), "margin_db");
    let at = |antennas: &str| {
        num(
            &json(&["budget", p, "--frequency", "873MHz", "--antennas", antennas]),
            "margin_db",
        ) - base
    };
    // Twice the frequency in free space: −6.02 dB with fixed gains, 0 with one
    // fixed aperture, +6.02 dB with both (G = 4πA/λ², common practice).
    assert!((at("fixed-gains") + 6.0206).abs() < 0.01);
    assert!(at("one-fixed-aperture").abs() < 0.01);
    assert!((at("fixed-apertures") - 6.0206).abs() < 0.01);
}

// --- antennas from their apertures --------------------------------------------------------

fn dish_link(item: &str, distance: &str) -> String {
    format!(
        r#"frequency = "11.7GHz"
[transmitter]
power = "10dBm"
[[item]]
name = "dish"
side = "rx"
{item}
[path]
model = "free-space"
distance = "{distance}"
[receiver]
bandwidth = "1MHz"
noise_figure = "2dB"
[requirement]
snr = "10dB"
"#
    )
}

#[test]
fn a_dish_gives_its_gain_and_refuses_more() {
    let dir = tempfile::tempdir().expect("tempdir");
    // η(πD/λ)² for 1.2 m at 11.7 GHz and η = 0.6: 41.14 dBi (check value in
    // engine/src/propagation/free_space.rs).
    let v = json(&[
        "budget",
        &write(
            &dir,
            "dish.toml",
            &dish_link("dish_diameter = \"1.2m\"\nefficiency = 0.6", "10km"),
        ),
    ]);
    let g = v["line_items"][0]["gain_db"].as_f64().expect("gain");
    assert!((g - 41.14).abs() < 0.01, "{v}");
    // 45 dBi is more than 1.2 m can give at 100 % efficiency (43.35 dBi).
    refused(
        &[
            "budget",
            &write(
                &dir,
                "more.toml",
                &dish_link("gain = \"45dBi\"\ndish_diameter = \"1.2m\"", "10km"),
            ),
        ],
        &["'dish'", "more than a 1.2 m dish", "43.35 dB"],
    );
    // 50 m is inside the far field (2D²/λ = 112 m): a warning.
    let out = run(&[
        "budget",
        &write(
            &dir,
            "near.toml",
            &dish_link("dish_diameter = \"1.2m\"\nefficiency = \"60%\"", "50m"),
        ),
    ]);
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("far field") && err.contains("112.4 m"),
        "{err}"
    );
}

#[test]
fn jakes_area_coverage_is_within_reach() {
    // 75 % at the cell edge with σ/n = 2 covers about 90 % of the area
    // (Jakes 1974, §2.5, figure of area coverage; common practice).
    let v = json(&[
        "fade",
        "--model",
        "lognormal",
        "--sigma",
        "8dB",
        "--availability",
        "75%",
        "--exponent",
        "4",
    ]);
    assert!((num(&v, "area_coverage") - 0.907).abs() < 0.002, "{v}");
    refused(
        &[
            "fade",
            "--model",
            "rayleigh",
            "--availability",
            "75%",
            "--exponent",
            "4",
        ],
        &["--exponent", "lognormal"],
    );
}
