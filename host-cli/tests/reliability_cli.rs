//! Reliability of the `headroom` binary against its environment: a closed
//! stderr, an output that is one of the inputs, long names, interrupts.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn headroom(dir: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_headroom"));
    c.current_dir(dir).env("RUST_BACKTRACE", "1");
    c
}

fn run(dir: &Path, args: &[&str]) -> Output {
    headroom(dir).args(args).output().expect("run headroom")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = fs::read_dir(dir)
        .expect("read dir")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

fn example(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

/// A binary log of 200 records cut inside its last frame: replayed with a
/// warning about the damaged end.
fn damaged_log(dir: &Path) -> PathBuf {
    let mut csv = String::from("t_ms,tx_dbm,rssi_dbm,noise_dbm\n");
    for k in 0..200u32 {
        csv.push_str(&format!("{},14,{},-117\n", k * 1000, -90 - (k % 7) as i32));
    }
    fs::write(dir.join("whole.csv"), csv).unwrap();
    let o = run(dir, &["convert", "whole.csv", "whole.hrlog"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let whole = fs::read(dir.join("whole.hrlog")).unwrap();
    let cut = dir.join("cut.hrlog");
    fs::write(&cut, &whole[..whole.len() - 2]).unwrap();
    fs::remove_file(dir.join("whole.hrlog")).unwrap();
    cut
}

/// Run with stderr a pipe whose reading end is already closed (as in
/// `2>&1 | head -0`).
fn with_closed_stderr(dir: &Path, args: &[&str]) -> Output {
    let (reader, writer) = std::io::pipe().expect("pipe");
    drop(reader);
    headroom(dir)
        .args(args)
        .stdout(Stdio::piped())
        .stderr(writer)
        .output()
        .expect("run headroom")
}

#[test]
fn a_closed_stderr_neither_panics_nor_changes_the_result() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    damaged_log(d);
    // With stderr open: the warning is there (the case is a real one).
    let o = run(
        d,
        &[
            "replay",
            "cut.hrlog",
            "--required-snr-db",
            "8",
            "--out",
            "open.csv",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("warning"), "{}", stderr(&o));
    // Closed: same exit code, the decisions file committed, no temporary.
    let o = with_closed_stderr(
        d,
        &[
            "replay",
            "cut.hrlog",
            "--required-snr-db",
            "8",
            "--out",
            "closed.csv",
        ],
    );
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(
        fs::read(d.join("closed.csv")).unwrap(),
        fs::read(d.join("open.csv")).unwrap()
    );
    // An error keeps its exit code too.
    let o = with_closed_stderr(d, &["replay", "missing.csv"]);
    assert_eq!(o.status.code(), Some(2));
    let o = with_closed_stderr(d, &["replay", "--no-such-flag"]);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(
        files(d),
        ["closed.csv", "cut.hrlog", "open.csv", "whole.csv"]
    );
}

#[test]
fn a_huge_bad_string_gives_a_short_error_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // A 10 MB TOML string with a bad escape at its end.
    let text = format!("required_snr_db = \"{}\\q\"\n", "x".repeat(10_000_000));
    fs::write(d.join("c.toml"), text).unwrap();
    let log = example("examples/logs/orchard-868.csv");
    let o = run(d, &["replay", log.to_str().unwrap(), "--config", "c.toml"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let e = stderr(&o);
    assert_eq!(e.lines().count(), 1, "{}", e.len());
    assert!(
        e.starts_with("headroom: error: --config: c.toml"),
        "{e:.400}"
    );
    assert!(e.chars().count() <= 320, "{} characters", e.chars().count());
}

/// The refusal of an output that is an input: exit 2, one line naming the
/// output, no suggestion of `--force`, the input unchanged.
fn assert_refused_as_input(dir: &Path, args: &[&str], out: &str, input: &str) {
    let before = fs::read(dir.join(input)).unwrap();
    let o = run(dir, args);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {e}");
    assert_eq!(e.lines().count(), 1, "{args:?}: {e}");
    assert!(e.contains(out), "{args:?}: {e}");
    assert!(e.contains("never replaces an input"), "{args:?}: {e}");
    assert!(!e.contains("--force"), "{args:?}: {e}");
    assert_eq!(fs::read(dir.join(input)).unwrap(), before, "{args:?}");
    assert!(
        files(dir).iter().all(|f| !f.contains(".tmp-")),
        "{:?}",
        files(dir)
    );
}

#[test]
fn an_output_is_never_one_of_the_inputs() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    fs::copy(example("examples/logs/orchard-868.csv"), d.join("log.csv")).unwrap();
    fs::copy(
        example("examples/controllers/tuning.toml"),
        d.join("c.toml"),
    )
    .unwrap();
    fs::copy(
        example("examples/links/orchard-sensor.toml"),
        d.join("link.toml"),
    )
    .unwrap();
    fs::copy(
        example("examples/scenarios/cattle-collar-915.toml"),
        d.join("scen.toml"),
    )
    .unwrap();
    // Other names of the same files: hard links (an output of another
    // extension) and a symbolic link.
    for (from, to) in [
        ("log.csv", "log-alias.csv"),
        ("log.csv", "log.svg"),
        ("c.toml", "c.csv"),
        ("link.toml", "link.svg"),
        ("scen.toml", "scen.csv"),
    ] {
        fs::hard_link(d.join(from), d.join(to)).unwrap();
    }
    std::os::unix::fs::symlink("log.csv", d.join("log-link.csv")).unwrap();
    for force in [false, true] {
        let f = |mut v: Vec<&'static str>| {
            if force {
                v.push("--force");
            }
            v
        };
        let cases: Vec<(Vec<&str>, &str, &str)> = vec![
            (
                f(vec!["replay", "log.csv", "--out", "log.csv"]),
                "log.csv",
                "log.csv",
            ),
            (
                f(vec!["replay", "log.csv", "--out", "log-alias.csv"]),
                "log-alias.csv",
                "log.csv",
            ),
            (
                f(vec!["replay", "log.csv", "--out", "log-link.csv"]),
                "log-link.csv",
                "log.csv",
            ),
            (
                f(vec!["replay", "log.csv", "--plot", "log.svg"]),
                "log.svg",
                "log.csv",
            ),
            (
                f(vec![
                    "replay", "log.csv", "--config", "c.toml", "--out", "c.csv",
                ]),
                "c.csv",
                "c.toml",
            ),
            (
                f(vec!["budget", "link.toml", "--plot", "link.svg"]),
                "link.svg",
                "link.toml",
            ),
            (
                f(vec![
                    "synth",
                    "--scenario",
                    "scen.toml",
                    "--seed",
                    "1",
                    "--records",
                    "5",
                    "--out",
                    "scen.csv",
                ]),
                "scen.csv",
                "scen.toml",
            ),
            (
                f(vec![
                    "tune",
                    "log.csv",
                    "--sweep",
                    "deadband_db=0..2:1",
                    "--quiet",
                    "--plot",
                    "log.svg",
                ]),
                "log.svg",
                "log.csv",
            ),
            (
                f(vec!["convert", "log.csv", "log-alias.csv"]),
                "log-alias.csv",
                "log.csv",
            ),
        ];
        for (args, out, input) in &cases {
            assert_refused_as_input(d, args, out, input);
        }
    }
}

#[test]
fn a_legal_250_byte_output_name_works() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let name = format!("{}.csv", "d".repeat(246));
    assert_eq!(name.len(), 250);
    let log = example("examples/logs/orchard-868.csv");
    let o = run(d, &["replay", log.to_str().unwrap(), "--out", &name]);
    assert!(o.status.success(), "{}", stderr(&o));
    // A name of many-byte characters too (4 bytes each, 252 bytes).
    let wide = format!("{}.csv", "\u{1f4e1}".repeat(62));
    assert_eq!(wide.len(), 252);
    let o = run(d, &["replay", log.to_str().unwrap(), "--out", &wide]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(files(d), {
        let mut v = vec![name, wide];
        v.sort();
        v
    });
}

/// `replay --out` reading a binary log from a named pipe that the test
/// keeps open (a log without end, as from a gateway): once the temporary
/// output exists, `signal` is sent. The handler must remove the temporary
/// file and exit with 130.
fn interrupted(signal: &str) {
    use std::io::Write;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let log = example("examples/logs/orchard-868.csv");
    let o = run(d, &["convert", log.to_str().unwrap(), "whole.hrlog"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let st = Command::new("mkfifo").arg(d.join("live.hrlog")).status();
    assert!(st.expect("mkfifo").success());
    let child = headroom(d)
        .args(["replay", "live.hrlog", "--out", "out.csv"])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    // Opening the writing end waits for the reader.
    let mut pipe = fs::OpenOptions::new()
        .write(true)
        .open(d.join("live.hrlog"))
        .expect("open the pipe");
    pipe.write_all(&fs::read(d.join("whole.hrlog")).unwrap())
        .expect("feed the log");
    pipe.flush().expect("flush");
    // Wait (at most about a minute) for the temporary output.
    let temp = |d: &Path| files(d).into_iter().any(|f| f.starts_with(".out.csv.tmp-"));
    let mut seen = false;
    for _ in 0..6000 {
        if temp(d) {
            seen = true;
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    assert!(seen, "no temporary output appeared: {:?}", files(d));
    let st = Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status();
    assert!(st.expect("kill").success());
    let out = child.wait_with_output().expect("wait");
    drop(pipe);
    assert_eq!(out.status.code(), Some(130), "{}", stderr(&out));
    assert_eq!(files(d), ["live.hrlog", "whole.hrlog"], "{signal}");
}

#[test]
fn an_interrupt_removes_the_temporary_output() {
    interrupted("-INT");
}

#[test]
fn a_termination_removes_the_temporary_output() {
    interrupted("-TERM");
}

fn assert_no_raw_controls(what: &str, text: &str) {
    let bad: Vec<char> = text
        .chars()
        .filter(|&c| {
            c != '\n'
                && (c.is_control()
                    || matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}'))
        })
        .collect();
    assert!(bad.is_empty(), "{what}: {bad:?} in {text:.600}");
}

#[test]
fn log_names_with_control_characters_in_every_replay_format() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let names = ["a\u{1b}[2J\r\n== fleet\u{7f}.csv", "b\u{9b}1m\u{202e}.csv"];
    for n in names {
        fs::copy(example("examples/logs/orchard-868.csv"), d.join(n)).unwrap();
    }
    for format in ["table", "json", "jsonl"] {
        let o = run(d, &["replay", names[0], names[1], "--format", format]);
        assert!(o.status.success(), "{}", stderr(&o));
        let out = String::from_utf8(o.stdout).expect("utf-8");
        assert_no_raw_controls(format, &out);
        match format {
            "json" => {
                let v: serde_json::Value = serde_json::from_str(&out).expect("JSON");
                assert_eq!(v["logs"][0]["log"], names[0]);
                assert_eq!(v["logs"][1]["log"], names[1]);
            }
            "jsonl" => {
                for (line, n) in out.lines().zip(names) {
                    let v: serde_json::Value = serde_json::from_str(line).expect("JSON");
                    assert_eq!(v["log"], n);
                }
            }
            _ => {
                // The forged heading stays inside the first log's line.
                assert!(out.matches("== fleet").count() >= 2, "{out}");
                let headings = out.lines().filter(|l| l.starts_with("== fleet"));
                assert_eq!(headings.count(), 1, "{out}");
            }
        }
    }
}
