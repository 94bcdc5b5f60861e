//! Hostile and mistaken inputs to the `headroom` binary, as a table.
//!
//! Every case must end with a non-zero exit code (2 for bad input, 1 for a
//! file the system cannot give us), exactly one line on stderr that starts
//! with `headroom:` and names the argument, setting or position at fault,
//! nothing on stdout, and never a panic or a backtrace (the binary runs
//! with `RUST_BACKTRACE=1`, so a panic would show).
//!
//! A case marked `finding` is a known shortcoming reported to the owner of
//! the code: it is checked to still fall short in the way described, so
//! that the table is updated (the mark removed) when it is fixed.
//!
//! The second test runs every kept fuzz input of the `csv_log` and
//! `link_toml` targets (`fuzz/corpus/`, `fuzz/regressions/`) through the
//! commands that read them.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

fn run(dir: &Path, args: &[String]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .args(args)
        .current_dir(dir)
        .env("RUST_BACKTRACE", "1")
        .output()
        .expect("cannot run the headroom binary")
}

/// One bad input.
struct Case {
    /// What is wrong, as the README table says it.
    input: &'static str,
    /// Files to create in the case's directory: name and content.
    files: Vec<(&'static str, Vec<u8>)>,
    /// Arguments (relative paths are in the case's directory).
    args: &'static [&'static str],
    /// Expected exit code.
    exit: i32,
    /// Each must appear in the message: what names the culprit.
    names: &'static [&'static str],
    /// A known shortcoming: what the fixed message will do that this one
    /// does not, and what is wrong now.
    finding: Option<(Fix, &'static str)>,
}

/// What a fixed message does.
#[derive(Clone, Copy)]
#[allow(dead_code)]
enum Fix {
    /// It names this.
    Names(&'static str),
    /// The input is accepted today without a word (exit 0, nothing on
    /// stderr); the fix refuses it or at least reports it.
    Reported,
}

fn text(s: &str) -> Vec<u8> {
    s.as_bytes().to_vec()
}

/// An example file of the repository with one line replaced; the
/// replacement must happen, or the case would test the original.
fn edited(rel: &str, from: &str, to: &str) -> Vec<u8> {
    let orig = fs::read_to_string(repo().join(rel)).unwrap();
    assert!(
        orig.contains(from),
        "{rel} no longer contains {from:?}: update the case"
    );
    text(&orig.replacen(from, to, 1))
}

/// Bytes of a fixed pseudo-random sequence (a 32-bit LCG, constants from
/// Numerical Recipes, from memory), with a few NULs, CRs and high bytes.
fn garbage(n: usize, seed: u32) -> Vec<u8> {
    let mut x = seed;
    (0..n)
        .map(|_| {
            x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (x >> 24) as u8
        })
        .collect()
}

const LINK: &str = "examples/links/orchard-sensor.toml";
const SCENARIO: &str = "examples/scenarios/orchard-868.toml";

fn small_csv() -> Vec<u8> {
    text("# headroom-log 1.1\n# required_snr_db: 8\nt_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-90,-117\n1000,14,-91,-117\n2000,13,-92,-116\n3000,13,-90,-117\n")
}

fn csv_without_requirement() -> Vec<u8> {
    text("t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-90,-117\n1000,14,-91,-117\n")
}

fn cases() -> Vec<Case> {
    let link = |from: &str, to: &str| vec![("link.toml", edited(LINK, from, to))];
    let scen = |from: &str, to: &str| vec![("scen.toml", edited(SCENARIO, from, to))];
    let synth: &'static [&'static str] = &[
        "synth",
        "--scenario",
        "scen.toml",
        "--seed",
        "1",
        "--records",
        "5",
        "--out",
        "out.csv",
    ];
    vec![
        // --- Arguments ---
        Case {
            input: "distance with a wrong unit (`--distance 1kg`)",
            files: vec![],
            args: &[
                "pathloss",
                "--model",
                "free-space",
                "--frequency",
                "868MHz",
                "--distance",
                "1kg",
            ],
            exit: 2,
            names: &["--distance", "kg"],
            finding: None,
        },
        Case {
            input: "NaN as a frequency (`--frequency nan`)",
            files: vec![],
            args: &[
                "pathloss",
                "--model",
                "free-space",
                "--frequency",
                "nan",
                "--distance",
                "1km",
            ],
            exit: 2,
            names: &["--frequency", "nan"],
            finding: None,
        },
        Case {
            input: "negative bandwidth as a separate word (`--bandwidth -5`)",
            files: vec![],
            args: &["noise", "--bandwidth", "-5kHz", "--noise-figure-db", "6"],
            exit: 2,
            names: &["--bandwidth", "greater than zero"],
            finding: None,
        },
        Case {
            input: "negative frequency (`--frequency=-5MHz`)",
            files: vec![],
            args: &[
                "pathloss",
                "--model",
                "free-space",
                "--frequency=-5MHz",
                "--distance",
                "1km",
            ],
            exit: 2,
            names: &["--frequency", "greater than zero"],
            finding: None,
        },
        Case {
            input: "zero distance (`--distance 0m`)",
            files: vec![],
            args: &[
                "pathloss",
                "--model",
                "free-space",
                "--frequency",
                "868MHz",
                "--distance",
                "0m",
            ],
            exit: 2,
            names: &["--distance", "greater than zero"],
            finding: None,
        },
        Case {
            input: "model option missing (`--model hata` without heights)",
            files: vec![],
            args: &[
                "pathloss",
                "--model",
                "hata",
                "--frequency",
                "868MHz",
                "--distance",
                "1km",
            ],
            exit: 2,
            names: &["--tx-height"],
            finding: None,
        },
        Case {
            input: "availability of 1 (`fade --availability 1`)",
            files: vec![],
            args: &["fade", "--model", "rayleigh", "--availability", "1"],
            exit: 2,
            names: &["--availability"],
            finding: None,
        },
        Case {
            input: "availability of 0 (`fade --availability 0`)",
            files: vec![],
            args: &["fade", "--model", "rayleigh", "--availability", "0"],
            exit: 2,
            names: &["--availability"],
            finding: None,
        },
        Case {
            input: "bit error rate of 0 (`ber --ber 0`)",
            files: vec![],
            args: &["ber", "--modulation", "bpsk", "--ber", "0"],
            exit: 2,
            names: &["--ber"],
            finding: None,
        },
        Case {
            input: "PSK order not a power of two (`--order 3`)",
            files: vec![],
            args: &[
                "ber",
                "--modulation",
                "psk",
                "--order",
                "3",
                "--ber",
                "1e-5",
            ],
            exit: 2,
            names: &["--order"],
            finding: None,
        },
        Case {
            input: "zero bandwidth (`noise --bandwidth 0Hz`)",
            files: vec![],
            args: &["noise", "--bandwidth", "0Hz", "--noise-figure-db", "6"],
            exit: 2,
            names: &["--bandwidth"],
            finding: None,
        },
        Case {
            input: "unknown subcommand",
            files: vec![],
            args: &["bogus"],
            exit: 2,
            names: &["bogus"],
            finding: None,
        },
        // --- Link files ---
        Case {
            input: "link file missing",
            files: vec![],
            args: &["budget", "missing.toml"],
            exit: 2,
            names: &["missing.toml", "cannot read"],
            finding: None,
        },
        Case {
            input: "broken TOML (unclosed table header)",
            files: vec![(
                "link.toml",
                text("frequency = \"868MHz\"\n[transmitter\npower = 1\n"),
            )],
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "line 2"],
            finding: None,
        },
        Case {
            input: "unknown key in a link file (`noise_fgure`)",
            files: link(
                "noise_figure = \"6dB\"",
                "noise_figure = \"6dB\"\nnoise_fgure = \"5dB\"",
            ),
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "noise_fgure"],
            finding: None,
        },
        Case {
            input: "wrong unit in a link file (`power = \"14 kg\"`)",
            files: link("power = \"14dBm\"", "power = \"14 kg\""),
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "transmitter.power", "kg"],
            finding: None,
        },
        Case {
            input: "NaN in a link file (`power = nan`)",
            files: link("power = \"14dBm\"", "power = nan"),
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "transmitter.power"],
            finding: None,
        },
        Case {
            input: "broken TOML with NUL bytes on the bad line",
            files: vec![(
                "link.toml",
                text("frequency = \"868MHz\"\nname = \"a\0b\"\n"),
            )],
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "line 2"],
            finding: None,
        },
        Case {
            input: "availability of 1 in a link file",
            files: link("availability = \"99%\"", "availability = 1.0"),
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "fade.availability"],
            finding: None,
        },
        Case {
            input: "binary garbage as a link file",
            files: vec![("link.toml", garbage(600, 1))],
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "UTF-8"],
            finding: None,
        },
        // --- Field logs ---
        Case {
            input: "log file missing",
            files: vec![],
            args: &["convert", "missing.csv", "out.hrlog"],
            exit: 2,
            names: &["missing.csv", "cannot open"],
            finding: None,
        },
        Case {
            input: "binary garbage passed as CSV",
            files: vec![("garbage.csv", garbage(3000, 2))],
            args: &["convert", "garbage.csv", "out.hrlog"],
            exit: 2,
            names: &["garbage.csv:1", "t_ms"],
            finding: None,
        },
        Case {
            input: "CSV header block of an unknown version, CR line end",
            files: vec![(
                "cr.csv",
                text("# headroom-log 2.0\r# device_id: 1\nt_ms\n1\n"),
            )],
            args: &["convert", "cr.csv", "out.hrlog"],
            exit: 2,
            names: &["cr.csv:1", "version"],
            finding: None,
        },
        Case {
            input: "CSV with a 1 MB line",
            files: vec![("long.csv", {
                let mut v = text("t_ms,tx_dbm\n1,");
                v.extend(vec![b'9'; 1 << 20]);
                v.push(b'\n');
                v
            })],
            args: &["convert", "long.csv", "out.hrlog"],
            exit: 2,
            names: &["long.csv:2", "longer than 4096 bytes"],
            finding: None,
        },
        Case {
            input: "CSV cell with a unit (`-90dBm`)",
            files: vec![("unit.csv", text("t_ms,rssi_dbm\n1,-90\n2,-90dBm\n"))],
            args: &["convert", "unit.csv", "out.hrlog"],
            exit: 2,
            names: &["unit.csv:3", "rssi_dbm", "-90dBm"],
            finding: None,
        },
        Case {
            input: "CSV rate line with a bare airtime (`# rate: sf7, -7.5 dB, 41`)",
            files: vec![(
                "rate.csv",
                text("# headroom-log 1.2\n# rate: sf7, -7.5 dB, 41\nt_ms,rssi_dbm\n1,-90\n"),
            )],
            args: &["convert", "rate.csv", "out.hrlog"],
            exit: 2,
            names: &["rate.csv:2", "airtime", "needs a unit"],
            finding: None,
        },
        Case {
            input: "CSV record naming a rate not in the header (`sf13`)",
            files: vec![(
                "rates.csv",
                text("# headroom-log 1.2\n# rate: sf7, -7.5 dB, 41ms\nt_ms,rssi_dbm,rate\n1,-90,sf7\n2,-90,sf13\n"),
            )],
            args: &["convert", "rates.csv", "out.hrlog"],
            exit: 2,
            names: &["rates.csv:5", "column rate", "sf13"],
            finding: None,
        },
        Case {
            input: "energy profile `[[rate]]` with a bare airtime (`airtime = 41`)",
            files: vec![(
                "rates.toml",
                {
                    let mut t = fs::read(repo().join("examples/energy/orchard-868.toml")).unwrap();
                    t.extend_from_slice(b"\n[[rate]]\nname = \"sf7\"\nrequired_snr = \"-7.5 dB\"\nairtime = 41\n");
                    t
                },
            )],
            args: &["battery", "rates.toml", "--interval", "5min", "--tx", "14dBm"],
            exit: 2,
            names: &["rates.toml", "rate 1 (sf7)", "airtime", "needs a unit"],
            finding: None,
        },
        Case {
            input: "CSV row with more cells than the header",
            files: vec![("cells.csv", text("t_ms,rssi_dbm\n1,-90,5\n"))],
            args: &["convert", "cells.csv", "out.hrlog"],
            exit: 2,
            names: &["cells.csv:2", "3 cells"],
            finding: None,
        },
        Case {
            input: "CSV with a negative time",
            files: vec![("negt.csv", text("t_ms,rssi_dbm\n-1,-90\n"))],
            args: &["convert", "negt.csv", "out.hrlog"],
            exit: 2,
            names: &["negt.csv:2", "t_ms"],
            finding: None,
        },
        Case {
            input: "CSV without the t_ms column",
            files: vec![("nocol.csv", text("rssi_dbm\n-90\n"))],
            args: &["convert", "nocol.csv", "out.hrlog"],
            exit: 2,
            names: &["nocol.csv:1", "t_ms"],
            finding: None,
        },
        Case {
            input: "empty CSV",
            files: vec![("empty.csv", vec![])],
            args: &["convert", "empty.csv", "out.hrlog"],
            exit: 2,
            names: &["empty.csv", "no header row"],
            finding: None,
        },
        Case {
            input: "truncated binary log, `--strict`",
            files: vec![("small.csv", small_csv())], // made binary and cut in `prepare`
            args: &["convert", "--strict", "cut.hrlog", "out.csv"],
            exit: 2,
            names: &["cut.hrlog", "byte ", "ends inside a frame"],
            finding: None,
        },
        Case {
            input: "binary garbage passed as a binary log, `--strict`",
            files: vec![("garbage.hrlog", garbage(2000, 3))],
            args: &["convert", "--strict", "garbage.hrlog", "out.csv"],
            exit: 2,
            names: &["garbage.hrlog", "byte 0"],
            finding: None,
        },
        Case {
            input: "output that exists, without `--force`",
            files: vec![("small.csv", small_csv()), ("out.hrlog", vec![1, 2, 3])],
            args: &["convert", "small.csv", "out.hrlog"],
            exit: 2,
            names: &["out.hrlog", "already exists"],
            finding: None,
        },
        Case {
            input: "output name without a known extension",
            files: vec![("small.csv", small_csv())],
            args: &["convert", "small.csv", "out.txt"],
            exit: 2,
            names: &["out.txt", "log format"],
            finding: None,
        },
        // --- Controller settings (replay) ---
        Case {
            input: "replay: no required SNR from a flag, the header or a config file",
            files: vec![("log.csv", csv_without_requirement())],
            args: &["replay", "log.csv"],
            exit: 2,
            names: &["log.csv", "required SNR", "--required-snr-db"],
            finding: None,
        },
        Case {
            input: "replay: an EIRP cap that is neither a power nor none",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--eirp-cap-dbm", "loud"],
            exit: 2,
            names: &["--eirp-cap-dbm", "none"],
            finding: None,
        },
        Case {
            input: "controller: min_tx_dbm above max_tx_dbm",
            files: vec![("log.csv", small_csv())],
            args: &[
                "replay",
                "log.csv",
                "--min-tx-dbm",
                "20dBm",
                "--max-tx-dbm",
                "10dBm",
            ],
            exit: 2,
            names: &["min_tx_dbm", "above max_tx_dbm", "--min-tx-dbm"],
            finding: None,
        },
        Case {
            input: "controller: EIRP cap below the lowest EIRP",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--eirp-cap-dbm=-20dBm"],
            exit: 2,
            names: &["eirp_cap_dbm", "--eirp-cap-dbm"],
            finding: None,
        },
        Case {
            input: "controller: target outage of 0",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--target-outage", "0"],
            exit: 2,
            names: &["target_outage", "--target-outage"],
            finding: None,
        },
        Case {
            input: "controller: target outage of 1",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--target-outage", "1"],
            exit: 2,
            names: &["target_outage", "--target-outage"],
            finding: None,
        },
        Case {
            input: "controller: NaN target outage",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--target-outage", "nan"],
            exit: 2,
            names: &["--target-outage", "nan"],
            finding: None,
        },
        Case {
            input: "controller: power step of 0 dB",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--tx-step-db", "0dB"],
            exit: 2,
            names: &["steps.uniform", "--tx-step-db"],
            finding: None,
        },
        Case {
            input: "controller TOML: min above max",
            files: vec![
                ("log.csv", small_csv()),
                ("ctrl.toml", text("min_tx_dbm = 20\nmax_tx_dbm = 10\n")),
            ],
            args: &["replay", "log.csv", "--config", "ctrl.toml"],
            exit: 2,
            names: &["min_tx_dbm", "max_tx_dbm"],
            finding: None,
        },
        Case {
            input: "controller TOML: a window of 0 (no such key: the window is fixed)",
            files: vec![
                ("log.csv", small_csv()),
                ("ctrl.toml", text("window = 0\n")),
            ],
            args: &["replay", "log.csv", "--config", "ctrl.toml"],
            exit: 2,
            names: &["--config", "ctrl.toml", "window"],
            finding: None,
        },
        Case {
            input: "controller TOML: broken",
            files: vec![
                ("log.csv", small_csv()),
                ("ctrl.toml", text("min_tx_dbm = \"x\n")),
            ],
            args: &["replay", "log.csv", "--config", "ctrl.toml"],
            exit: 2,
            names: &["--config", "ctrl.toml", "line 1"],
            finding: None,
        },
        Case {
            input: "replay of a missing log",
            files: vec![],
            args: &["replay", "missing.csv"],
            exit: 2,
            names: &["missing.csv", "cannot open"],
            finding: None,
        },
        // --- Scenarios (synth) ---
        Case {
            input: "`synth --records 0`",
            files: vec![("scen.toml", edited(SCENARIO, "", ""))],
            args: &[
                "synth",
                "--scenario",
                "scen.toml",
                "--seed",
                "1",
                "--records",
                "0",
                "--out",
                "out.csv",
            ],
            exit: 2,
            names: &["--records"],
            finding: None,
        },
        Case {
            input: "scenario: radio min_tx_dbm above max_tx_dbm",
            files: scen("min_tx_dbm = 2.0", "min_tx_dbm = 20.0"),
            args: synth,
            exit: 2,
            names: &["scen.toml", "radio.min_tx_dbm", "above radio.max_tx_dbm"],
            finding: None,
        },
        Case {
            input: "scenario: power level above the radio's maximum",
            files: scen("levels_dbm = [14.0]", "levels_dbm = [30.0]"),
            args: synth,
            exit: 2,
            names: &["scen.toml", "power.levels_dbm", "30"],
            finding: None,
        },
        Case {
            input: "scenario: NaN frequency",
            files: scen("frequency = \"868MHz\"", "frequency = nan"),
            args: synth,
            exit: 2,
            names: &["scen.toml", "channel.frequency"],
            finding: None,
        },
        Case {
            input: "scenario: packet interval of zero",
            files: scen("packet_interval_ms = 300000", "packet_interval_ms = 0"),
            args: synth,
            exit: 2,
            names: &["packet_interval_ms"],
            finding: None,
        },
        Case {
            input: "scenario: fading correlation of 1",
            files: scen("fading_correlation = 0.2", "fading_correlation = 1.0"),
            args: synth,
            exit: 2,
            names: &["fading_correlation"],
            finding: None,
        },
        Case {
            input: "scenario: unknown key",
            files: scen("description =", "descriptionx ="),
            args: synth,
            exit: 2,
            names: &["scen.toml", "descriptionx"],
            finding: None,
        },
        Case {
            input: "scenario file missing",
            files: vec![],
            args: &[
                "synth",
                "--scenario",
                "missing.toml",
                "--seed",
                "1",
                "--records",
                "5",
                "--out",
                "out.csv",
            ],
            exit: 2,
            names: &["missing.toml", "cannot read"],
            finding: None,
        },
        // --- Outputs that are inputs, oversized messages ---
        Case {
            input: "the log as its own output (`replay log.csv --out log.csv --force`)",
            files: vec![("log.csv", small_csv())],
            args: &["replay", "log.csv", "--out", "log.csv", "--force"],
            exit: 2,
            names: &["log.csv", "never replaces an input"],
            finding: None,
        },
        Case {
            input: "the controller file as the output (`--config c.toml --out c.toml --force`)",
            files: vec![
                ("log.csv", small_csv()),
                ("c.toml", text("required_snr_db = 5.0\n")),
            ],
            args: &[
                "replay", "log.csv", "--config", "c.toml", "--out", "c.toml", "--force",
            ],
            exit: 2,
            names: &["c.toml", "never replaces an input"],
            finding: None,
        },
        Case {
            input: "`synth` over its own scenario",
            files: vec![("scen.csv", fs::read(repo().join(SCENARIO)).unwrap())],
            args: &[
                "synth",
                "--scenario",
                "scen.csv",
                "--seed",
                "1",
                "--records",
                "5",
                "--out",
                "scen.csv",
                "--force",
            ],
            exit: 2,
            names: &["scen.csv", "never replaces an input"],
            finding: None,
        },
        Case {
            input: "a link file with a 10 MB string and a bad escape (cut to 300 characters)",
            files: vec![(
                "link.toml",
                text(&format!("name = \"{}\\q\"\n", "x".repeat(10_000_000))),
            )],
            args: &["budget", "link.toml"],
            exit: 2,
            names: &["link.toml", "TOML parse error", "…"],
            finding: None,
        },
        Case {
            input: "an endless settings file (`budget /dev/zero`)",
            files: vec![],
            args: &["budget", "/dev/zero"],
            exit: 2,
            names: &["/dev/zero", "16 MiB"],
            finding: None,
        },
        // --- Accepted without a word today: reported to their owners ---
        Case {
            input: "an absurd rain height (`--rain-height 1e30m`)",
            files: vec![],
            args: &[
                "rain",
                "--frequency",
                "20GHz",
                "--rain-rate",
                "30",
                "--elevation",
                "30",
                "--tilt",
                "45",
                "--exceeded-percent",
                "0.01",
                "--rain-height",
                "1e30m",
                "--station-height",
                "100m",
                "--latitude",
                "45",
            ],
            exit: 2,
            names: &["--rain-height"],
            finding: None,
        },
        Case {
            input: "scenario: `report_resolution = 1e38`",
            files: scen("report_resolution = 1.0", "report_resolution = 1e38"),
            args: synth,
            exit: 2,
            names: &["report_resolution", "plausible range"],
            finding: None,
        },
        Case {
            input: "a binary log of only zero bytes",
            files: vec![("zeros.hrlog", vec![0u8; 4096])],
            args: &["replay", "zeros.hrlog", "--required-snr-db", "8"],
            exit: 2,
            names: &["zeros.hrlog"],
            finding: None,
        },
        Case {
            input: "CSV log without `rssi_dbm`",
            files: vec![("nr.csv", text("t_ms,tx_dbm,noise_dbm\n0,14,-117\n"))],
            args: &["replay", "nr.csv", "--required-snr-db", "8"],
            exit: 2,
            names: &["nr.csv", "rssi_dbm"],
            finding: None,
        },
        Case {
            input: "CSV log without `noise_dbm`",
            files: vec![("nn.csv", text("t_ms,tx_dbm,rssi_dbm\n0,14,-90\n"))],
            args: &["replay", "nn.csv", "--required-snr-db", "8"],
            exit: 2,
            names: &["nn.csv", "noise_dbm"],
            finding: None,
        },
    ]
}

/// Extra setup of a case that needs the binary itself (a truncated log
/// written by `convert`).
fn prepare(dir: &Path, case: &Case) {
    if case.args.contains(&"cut.hrlog") {
        let out = run(
            dir,
            &["convert".into(), "small.csv".into(), "whole.hrlog".into()],
        );
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let whole = fs::read(dir.join("whole.hrlog")).unwrap();
        // Drop the final delimiter and one byte before it.
        fs::write(dir.join("cut.hrlog"), &whole[..whole.len() - 2]).unwrap();
    }
}

/// A message as a Markdown table cell: control characters shown as U+FFFD,
/// `|` escaped.
fn cell(msg: &str) -> String {
    msg.chars()
        .map(|c| if c.is_control() { '\u{fffd}' } else { c })
        .collect::<String>()
        .replace('|', "\\|")
}

#[test]
fn each_bad_input_gets_one_line_naming_the_culprit() {
    let mut problems = Vec::new();
    let mut table = vec![
        "| input | message (stderr) | exit |".to_string(),
        "|---|---|---|".to_string(),
    ];
    for case in cases() {
        let dir = tempfile::tempdir().unwrap();
        for (name, content) in &case.files {
            fs::write(dir.path().join(name), content).unwrap();
        }
        prepare(dir.path(), &case);
        let args: Vec<String> = case.args.iter().map(|s| (*s).to_string()).collect();
        let out = run(dir.path(), &args);
        let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
        let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
        let code = out.status.code();
        let mut bad =
            |why: String| problems.push(format!("{}: {why}\n    stderr: {stderr:?}", case.input));
        if stderr.contains("panicked")
            || stderr.contains("backtrace")
            || stderr.contains("RUST_BACKTRACE")
        {
            bad("panic".into());
            continue;
        }
        if let Some((Fix::Reported, what)) = case.finding {
            if code == Some(0) && stderr.is_empty() {
                table.push(format!(
                    "| {} | accepted without a word (finding: {what}) | 0 |",
                    case.input
                ));
            } else {
                bad(format!("finding fixed ({what}): remove its mark"));
            }
            continue;
        }
        if code != Some(case.exit) {
            bad(format!("exit code {code:?}, expected {}", case.exit));
        }
        if !stdout.is_empty() {
            bad(format!("stdout not empty: {stdout:?}"));
        }
        let lines: Vec<&str> = stderr.lines().collect();
        if lines.len() != 1 || !stderr.ends_with('\n') {
            bad(format!("{} lines on stderr, expected one", lines.len()));
        }
        let msg = lines.first().copied().unwrap_or("");
        if !msg.starts_with("headroom: ") {
            bad("message does not start with 'headroom: '".into());
        }
        let control = msg.chars().any(char::is_control);
        if control {
            bad("control characters in the message".into());
        }
        for n in case.names {
            if !msg.contains(n) {
                bad(format!("message does not name {n:?}"));
            }
        }
        if let Some((fix, what)) = case.finding {
            let fixed = match fix {
                Fix::Names(w) => msg.contains(w),
                Fix::Reported => true,
            };
            if fixed {
                bad(format!("finding fixed ({what}): remove its mark"));
            }
            table.push(format!(
                "| {} | `{}` (finding: {what}) | {} |",
                case.input,
                cell(msg),
                case.exit
            ));
        } else {
            table.push(format!(
                "| {} | `{}` | {} |",
                case.input,
                cell(msg),
                case.exit
            ));
        }
    }
    println!("{}", table.join("\n"));
    assert!(
        problems.is_empty(),
        "{} problem(s):\n{}",
        problems.len(),
        problems.join("\n")
    );
}

/// Kept inputs of fuzz target `target` (corpus and regressions).
fn fuzz_inputs(target: &str) -> Vec<PathBuf> {
    let mut v = Vec::new();
    for kind in ["corpus", "regressions"] {
        if let Ok(rd) = fs::read_dir(repo().join("fuzz").join(kind).join(target)) {
            v.extend(
                rd.filter_map(|e| e.ok())
                    .map(|e| e.path())
                    .filter(|p| p.is_file()),
            );
        }
    }
    v.sort();
    v
}

/// No panic, a known exit code, and each stderr line from headroom.
fn check_no_panic(what: &Path, out: &Output, ok_codes: &[i32]) -> Option<String> {
    let stderr = String::from_utf8_lossy(&out.stderr);
    if stderr.contains("panicked") || stderr.contains("backtrace") {
        return Some(format!("{}: panic: {stderr}", what.display()));
    }
    match out.status.code() {
        Some(c) if ok_codes.contains(&c) => {}
        c => return Some(format!("{}: exit {c:?}: {stderr}", what.display())),
    }
    if let Some(l) = stderr.lines().find(|l| !l.starts_with("headroom: ")) {
        return Some(format!("{}: stray stderr line {l:?}", what.display()));
    }
    None
}

#[test]
fn fuzz_corpus_of_the_host_readers_through_the_binary() {
    let dir = tempfile::tempdir().unwrap();
    let mut problems = Vec::new();
    let csvs = fuzz_inputs("csv_log");
    let links = fuzz_inputs("link_toml");
    assert!(
        !csvs.is_empty() && !links.is_empty(),
        "fuzz corpus missing under {}",
        repo().join("fuzz").display()
    );
    for f in &csvs {
        if fs::copy(f, dir.path().join("in.csv")).is_err() {
            continue; // removed meanwhile by a running fuzzer
        }
        let args: Vec<String> = ["convert", "--force", "in.csv", "out.hrlog"]
            .iter()
            .map(|s| (*s).to_string())
            .collect();
        let out = run(dir.path(), &args);
        problems.extend(check_no_panic(f, &out, &[0, 2]));
        if out.status.success() {
            // What was converted converts back.
            let back: Vec<String> = ["convert", "--force", "out.hrlog", "back.csv"]
                .iter()
                .map(|s| (*s).to_string())
                .collect();
            let out = run(dir.path(), &back);
            problems.extend(check_no_panic(f, &out, &[0]));
        }
    }
    for f in &links {
        if fs::copy(f, dir.path().join("link.toml")).is_err() {
            continue;
        }
        let args: Vec<String> = ["budget", "link.toml"]
            .iter()
            .map(|s| (*s).to_string())
            .collect();
        let out = run(dir.path(), &args);
        problems.extend(check_no_panic(f, &out, &[0, 2]));
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}
