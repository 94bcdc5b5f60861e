//! `headroom convert` end to end: CSV and binary round trips, refusals,
//! error messages with positions, and recovery from a damaged binary log.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use headroom::record::codec::{Encoder, MAX_FRAME};
use headroom::record::{LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};

fn headroom(args: &[&Path]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("convert")
        .args(args)
        .output()
        .expect("run headroom")
}

fn headroom_flags(args: &[&Path], flags: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("convert")
        .args(args)
        .args(flags)
        .output()
        .expect("run headroom")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Files in `dir` (to see that no temporary file is left behind).
fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// A log of our own invented node, written by the engine's encoder.
fn engine_log(path: &Path, n: u64) -> (Vec<u8>, Vec<(usize, usize)>) {
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = Vec::new();
    let mut spans = Vec::new();
    let h = LogHeader {
        device_id: 7_001,
        epoch_ms: 1_786_000_000_000,
        min_tx: Some(Dbm(-2.0)),
        max_tx: Some(Dbm(14.0)),
        tx_step: Some(Db(2.0)),
        antenna_gain: Some(Dbi(0.5)),
        required_snr: Some(Db(-7.5)),
        eirp_cap: Some(Dbm(16.15)),
        rates: headroom::rate::RateTable::empty(),
    };
    let f = enc.header(&h, &mut buf).unwrap();
    spans.push((0, f.len()));
    bytes.extend_from_slice(f);
    let specials = [
        f32::NAN,
        f32::INFINITY,
        f32::NEG_INFINITY,
        -0.0,
        f32::MIN_POSITIVE / 8.0,
        f32::MAX,
    ];
    for i in 0..n {
        let r = LogRecord {
            t_ms: 250 * i,
            tx_dbm: Some(14.0 - 2.0 * (i % 9) as f32),
            rssi_dbm: match i % 13 {
                0 => None,
                k @ 1..=6 => Some(specials[k as usize - 1]),
                k => Some(-120.0 + 0.1 * (i as f32) + 1.0 / (k as f32)),
            },
            noise_dbm: if i % 4 == 0 { Some(-117.3) } else { None },
            rate: None,
        };
        let f = enc.record(&r, &mut buf).unwrap();
        spans.push((bytes.len(), bytes.len() + f.len()));
        bytes.extend_from_slice(f);
    }
    std::fs::write(path, &bytes).unwrap();
    (bytes, spans)
}

#[test]
fn format_2_is_the_default_and_survives_csv_and_format_1_byte_for_byte() {
    use headroom::record::codec::BlockEncoder;
    let dir = tempfile::tempdir().unwrap();
    let v1 = dir.path().join("node.hrlog");
    engine_log(&v1, 500);
    // The same records as format 2, written by the engine's encoder.
    let mut want = Vec::new();
    let mut enc = BlockEncoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let log = headroom_cli::logio::open(&v1).unwrap();
    let header = log.header().copied().unwrap();
    want.extend_from_slice(enc.header(&header, &mut buf).unwrap());
    for r in log {
        want.extend_from_slice(enc.record(&r.unwrap(), &mut buf).unwrap());
    }
    want.extend_from_slice(enc.flush(&mut buf).unwrap());
    // format 1 -> format 2 (the default) -> CSV -> format 2 -> format 1.
    let v2 = dir.path().join("v2.hrlog");
    let c = dir.path().join("v2.csv");
    let v2b = dir.path().join("again.hrlog");
    let v1b = dir.path().join("again-v1.hrlog");
    let o = headroom(&[&v1, &v2]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("to binary format 2"), "{}", stderr(&o));
    assert_eq!(std::fs::read(&v2).unwrap(), want);
    for (from, to, flags) in [
        (&v2, &c, &[][..]),
        (&c, &v2b, &[][..]),
        (&v2b, &v1b, &["--binary-version", "1"][..]),
    ] {
        let o = headroom_flags(&[from, to], flags);
        assert!(o.status.success(), "{}", stderr(&o));
    }
    assert_eq!(std::fs::read(&v2b).unwrap(), want);
    assert_eq!(std::fs::read(&v1b).unwrap(), std::fs::read(&v1).unwrap());
    // Far smaller than format 1.
    let (a, b) = (
        std::fs::metadata(&v1).unwrap().len(),
        std::fs::metadata(&v2).unwrap().len(),
    );
    assert!(b * 2 < a, "format 2 {b} bytes, format 1 {a}");
}

#[test]
fn binary_to_csv_to_binary_is_byte_identical() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("node.hrlog");
    let c = dir.path().join("node.csv");
    let b = dir.path().join("again.hrlog");
    let c2 = dir.path().join("again.csv");
    let (bytes, _) = engine_log(&a, 500);
    let o = headroom(&[&a, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("converted 500 record(s)"),
        "{}",
        stderr(&o)
    );
    let o = headroom_flags(&[&c, &b], &["--binary-version", "1"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(
        std::fs::read(&b).unwrap(),
        bytes,
        "engine-written frames survive csv and back"
    );
    let o = headroom(&[&b, &c2]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(&c).unwrap();
    assert_eq!(std::fs::read_to_string(&c2).unwrap(), csv);
    assert!(
        csv.starts_with("# headroom-log 1.2\n# device_id: 7001\n"),
        "{csv}"
    );
    assert!(
        csv.contains(",NaN,")
            && csv.contains(",inf,")
            && csv.contains(",-inf,")
            && csv.contains(",-0,")
    );
}

#[test]
fn csv_to_binary_to_csv_is_text_identical() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("bench.csv");
    let b = dir.path().join("bench.hrlog");
    let c = dir.path().join("bench2.csv");
    let text = "# headroom-log 1.0\n# device_id: 12\n# epoch_ms: 0\n# max_tx_dbm: 20\n\
                t_ms,tx_dbm,rssi_dbm,noise_dbm\n\
                0,20,-101.7,-119\n\
                40,,,\n\
                18446744073709551615,-0.1,0.000001,1e-40\n\
                90,NaN,inf,-inf\n";
    std::fs::write(&a, text).unwrap();
    assert!(headroom(&[&a, &b]).status.success());
    let o = headroom(&[&b, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    let back = std::fs::read_to_string(&c).unwrap();
    // f32 Display writes 1e-40 (a subnormal) in full decimal: compare values
    // for that cell, text for the rest.
    // A 1.0 log comes back written in the current version, 1.2.
    let want = text
        .replace("1e-40", &format!("{}", "1e-40".parse::<f32>().unwrap()))
        .replace("headroom-log 1.0", "headroom-log 1.2");
    assert_eq!(back, want);
}

#[test]
fn columns_in_any_order_extra_ignored_and_format_override() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("field.txt");
    let b = dir.path().join("field.bin");
    let c = dir.path().join("out.csv");
    std::fs::write(&a, "site,rssi_dbm,t_ms\nnorth,-80,5\r\nsouth,,6\r\n").unwrap();
    let o = headroom_flags(&[&a, &b], &["--from", "csv", "--to", "binary"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let o = headroom_flags(&[&b, &c], &["--from", "binary"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(
        std::fs::read_to_string(&c).unwrap(),
        "t_ms,tx_dbm,rssi_dbm,noise_dbm\n5,,-80,\n6,,,\n"
    );
    let o = headroom(&[&a, &c]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("cannot tell the log format"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn overwrite_is_refused_without_force() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("in.csv");
    let b = dir.path().join("out.hrlog");
    std::fs::write(&a, "t_ms,tx_dbm\n1,2\n").unwrap();
    std::fs::write(&b, b"keep me").unwrap();
    let o = headroom(&[&a, &b]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("already exists (use --force to overwrite)"),
        "{}",
        stderr(&o)
    );
    assert_eq!(std::fs::read(&b).unwrap(), b"keep me");
    let o = headroom_flags(&[&a, &b], &["--force"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_ne!(std::fs::read(&b).unwrap(), b"keep me");
    assert_eq!(files(dir.path()), vec!["in.csv", "out.hrlog"]);
    // Converting a file onto itself is refused even with --force.
    let o = headroom_flags(&[&a, &a], &["--force"]);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&a).unwrap(), "t_ms,tx_dbm\n1,2\n");
}

#[test]
fn a_bad_cell_names_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("log.csv");
    let b = dir.path().join("log.hrlog");
    // Line 1 is a comment, line 2 the header row, the bad cell on line 5.
    std::fs::write(
        &a,
        "# from the roof node\nt_ms,tx_dbm,rssi_dbm\n0,10,-90\n1000,10,-91\n2000,10,abc\n",
    )
    .unwrap();
    let o = headroom(&[&a, &b]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(
        err.contains("log.csv:5: column rssi_dbm: 'abc' is not a number"),
        "{err}"
    );
    assert_eq!(err.lines().count(), 1, "{err}");
    assert_eq!(
        files(dir.path()),
        vec!["log.csv"],
        "no output, no temporary file"
    );
}

#[test]
fn csv_input_errors_are_clear() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o.hrlog");
    let cases: [(&str, &str); 9] = [
        // Line numbers count comment and blank lines too.
        (
            "# c\n\nt_ms,rssi_dbm\n1,2\n# mid\n\n3,x\n",
            "7: column rssi_dbm: 'x' is not a number",
        ),
        (
            "# x\n\nt_ms,a\n# y\n1,2\n\n3\n",
            "7: row has 1 cell, the header row has 2",
        ),
        ("\n\nt_ms,T_MS\n", "3: column t_ms appears twice"),
        ("tx_dbm,rssi_dbm\n1,2\n", "1: missing required column t_ms"),
        (
            "t_ms,rssi_dbm\n1,2\n3\n",
            "3: row has 1 cell, the header row has 2",
        ),
        (
            "t_ms,rssi_dbm\n1.5,2\n",
            "2: column t_ms: '1.5' is not a whole number of milliseconds",
        ),
        ("t_ms,rssi_dbm\n,2\n", "2: column t_ms: empty"),
        ("", "empty log (0 bytes)"),
        ("t_ms,t_ms\n1,2\n", "1: column t_ms appears twice"),
    ];
    for (i, (text, want)) in cases.iter().enumerate() {
        let a = dir.path().join(format!("c{i}.csv"));
        std::fs::write(&a, text).unwrap();
        let o = headroom(&[&a, &out]);
        assert_eq!(o.status.code(), Some(2), "{text:?}");
        assert!(stderr(&o).contains(want), "{text:?}: {}", stderr(&o));
    }
    // A line longer than the limit is refused with its line number, without
    // reading it whole.
    let a = dir.path().join("long.csv");
    let mut text = String::from("t_ms,rssi_dbm\n1,2\n3,");
    text.push_str(&"7".repeat(1 << 20));
    std::fs::write(&a, text).unwrap();
    let o = headroom(&[&a, &out]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("long.csv:3: line is longer than 4096 bytes"),
        "{}",
        stderr(&o)
    );
    assert!(!out.exists());
}

/// Overwrite frames `from..=to` (their delimiters included) with garbage.
fn smash(bytes: &mut [u8], spans: &[(usize, usize)], from: usize, to: usize) -> (usize, usize) {
    let (s, e) = (spans[from].0, spans[to].1);
    let mut x: u32 = 99;
    for b in &mut bytes[s..e] {
        x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        *b = (x >> 24) as u8 | 1;
    }
    bytes[s + 7] = 0;
    (s, e)
}

#[test]
fn damaged_binary_converts_every_intact_frame() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("hurt.hrlog");
    let c = dir.path().join("hurt.csv");
    let clean = dir.path().join("clean.csv");
    let (mut bytes, spans) = engine_log(&a, 300);
    assert!(headroom(&[&a, &clean]).status.success());
    // Frames 101..=110 (records 100..=109) become garbage; the log is cut
    // in the middle of its last frame.
    let (s, e) = smash(&mut bytes, &spans, 101, 110);
    let last = spans[300];
    bytes.truncate(last.0 + 5);
    std::fs::write(&a, &bytes).unwrap();
    let o = headroom(&[&a, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        err.contains(&format!(
            "byte {s}: skipped {} damaged bytes (10 frames lost)",
            e - s
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "byte {}: skipped 5 damaged bytes (1 frame lost)",
            last.0
        )),
        "{err}"
    );
    assert!(err.contains("converted 289 record(s)"), "{err}");
    // Every intact record is there, unchanged.
    let want: Vec<String> = std::fs::read_to_string(&clean)
        .unwrap()
        .lines()
        .enumerate()
        .filter(|(i, _)| {
            // 10 header lines (comments + column names) then record k on line 10+k.
            *i < 10 || !((10 + 100..10 + 110).contains(i) || *i == 10 + 299)
        })
        .map(|(_, l)| l.to_string())
        .collect();
    let got: Vec<String> = std::fs::read_to_string(&c)
        .unwrap()
        .lines()
        .map(String::from)
        .collect();
    assert_eq!(got, want);
    // The input was not touched.
    assert_eq!(std::fs::read(&a).unwrap(), bytes);

    // --strict: the first damage is the error, nothing is written.
    let c2 = dir.path().join("strict.csv");
    let o = headroom_flags(&[&a, &c2], &["--strict"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains(&format!("hurt.hrlog: byte {s}: damaged")),
        "{}",
        stderr(&o)
    );
    assert!(!c2.exists());
}

#[test]
fn not_a_log_is_damage_not_a_crash() {
    let dir = tempfile::tempdir().unwrap();
    let a: PathBuf = dir.path().join("noise.hrlog");
    let c = dir.path().join("noise.csv");
    let mut x: u64 = 7;
    let junk: Vec<u8> = (0..100_000)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 56) as u8
        })
        .collect();
    std::fs::write(&a, &junk).unwrap();
    let o = headroom(&[&a, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("converted 0 record(s)"),
        "{}",
        stderr(&o)
    );
    assert_eq!(
        std::fs::read_to_string(&c).unwrap(),
        "t_ms,tx_dbm,rssi_dbm,noise_dbm\n"
    );
}

/// Wait for `child` at most `limit` (a harness timeout: the child is killed
/// and the test fails if it hangs); its output.
fn wait_or_kill(mut child: std::process::Child, limit: std::time::Duration) -> Output {
    let start = std::time::Instant::now();
    loop {
        match child.try_wait().unwrap() {
            Some(_) => return child.wait_with_output().unwrap(),
            None if start.elapsed() > limit => {
                let _ = child.kill();
                let out = child.wait_with_output().unwrap();
                panic!("headroom hung; stderr: {}", stderr(&out));
            }
            None => std::thread::sleep(std::time::Duration::from_millis(20)),
        }
    }
}

/// A CSV log of `n` rows with a header block.
fn csv_rows(n: u64) -> String {
    let mut text =
        String::from("# headroom-log 1.1\n# max_tx_dbm: 5\nt_ms,tx_dbm,rssi_dbm,snr_db\n");
    for i in 0..n {
        text.push_str(&format!(
            "{},{},{},{}\n",
            i * 250,
            5,
            -100 - (i % 7) as i64,
            3
        ));
    }
    text
}

#[cfg(unix)]
#[test]
fn a_named_pipe_loses_no_row_and_does_not_hang() {
    use std::io::Write as _;
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("live.csv");
    let made = Command::new("mkfifo").arg(&fifo).status().unwrap();
    assert!(made.success());
    let out = dir.path().join("live.hrlog");
    let back = dir.path().join("back.csv");
    let n = 60_000;
    let text = csv_rows(n);
    let child = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("convert")
        .arg(&fifo)
        .arg(&out)
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let writer = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            let mut f = std::fs::OpenOptions::new().write(true).open(&fifo).unwrap();
            // In pieces, so that the reader sees partial lines.
            for part in text.as_bytes().chunks(7_919) {
                f.write_all(part).unwrap();
            }
        })
    };
    let o = wait_or_kill(child, std::time::Duration::from_secs(120));
    writer.join().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(&format!("converted {n} record(s)")),
        "{}",
        stderr(&o)
    );
    // Every row, the header block and the noise floor from the SNR.
    let o = headroom(&[&out, &back]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(&back).unwrap();
    assert!(csv.contains("# max_tx_dbm: 5\n"), "{csv}");
    assert_eq!(
        csv.lines().filter(|l| !l.starts_with('#')).count() as u64,
        n + 1
    );
    assert!(
        csv.contains(&format!("\n{},5,-100,-103\n", 7 * 250)),
        "{csv}"
    );
}

#[cfg(unix)]
#[test]
fn a_named_pipe_with_a_bad_row_names_its_line() {
    // The line of an error comes from the bytes already read: the pipe is
    // not opened a second time (which hung, or ate rows).
    use std::io::Write as _;
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("bad.csv");
    assert!(Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap()
        .success());
    let out = dir.path().join("bad.hrlog");
    let mut text = csv_rows(20_000);
    text.push_str("5000001,5,abc,3\n");
    let child = Command::new(env!("CARGO_BIN_EXE_headroom"))
        .arg("convert")
        .arg(&fifo)
        .arg(&out)
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let writer = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            let mut f = std::fs::OpenOptions::new().write(true).open(&fifo).unwrap();
            // The reader stops at the bad row; a closed pipe is fine here.
            let _ = f.write_all(text.as_bytes());
        })
    };
    let o = wait_or_kill(child, std::time::Duration::from_secs(120));
    writer.join().unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("bad.csv:20004: column rssi_dbm: 'abc' is not a number"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn standard_input_with_from() {
    use std::io::Write as _;
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("in.csv");
    let run = |flags: &[&str]| {
        let mut child = Command::new(env!("CARGO_BIN_EXE_headroom"))
            .arg("convert")
            .arg("-")
            .arg(&out)
            .args(flags)
            .stdin(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        let mut stdin = child.stdin.take().unwrap();
        let _ = stdin.write_all(csv_rows(3).as_bytes());
        drop(stdin);
        wait_or_kill(child, std::time::Duration::from_secs(60))
    };
    let o = run(&[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("standard input: cannot tell the log format (name it with --from"),
        "{}",
        stderr(&o)
    );
    let o = run(&["--from", "csv"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(&out).unwrap();
    assert!(
        csv.ends_with(
            "t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,5,-100,-103\n250,5,-101,-104\n500,5,-102,-105\n"
        ),
        "{csv}"
    );
}

#[test]
fn columns_named_otherwise_bom_and_warnings() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("dev.csv");
    let b = dir.path().join("dev.hrlog");
    let c = dir.path().join("back.csv");
    let mut text = b"\xEF\xBB\xBF# headroom-log 1.1\n# max_tx_dbm: 5\n".to_vec();
    text.extend_from_slice(b"ms,Power,RSSI,SNR,noise_dbm\n0,5,-90,-10,\n1,5,-91,-11,\n");
    std::fs::write(&a, &text).unwrap();
    let o = headroom_flags(
        &[&a, &b],
        &[
            "--column",
            "t_ms=ms",
            "--column",
            "tx_dbm=power",
            "--column",
            "rssi_dbm=rssi",
            "--column",
            "snr_db=snr",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let err = stderr(&o);
    // The SNR use and the empty column are said, not silent.
    assert!(
        err.contains("noise_dbm computed as rssi_dbm - snr_db in 2 rows"),
        "{err}"
    );
    assert!(
        err.contains("column noise_dbm (noise_dbm) is empty in all 2 rows"),
        "{err}"
    );
    assert!(headroom(&[&b, &c]).status.success());
    assert_eq!(
        std::fs::read_to_string(&c).unwrap(),
        "# headroom-log 1.2\n# device_id: 0\n# epoch_ms: 0\n# max_tx_dbm: 5\n\
         t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,5,-90,-80\n1,5,-91,-80\n"
    );
    // An unknown field is refused by the argument parser, naming the fields.
    let o = headroom_flags(&[&a, &b], &["--column", "rssi=RSSI", "--force"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains(
            "'rssi' is not a log field (fields: t_ms, tx_dbm, rssi_dbm, noise_dbm, snr_db, rate)"
        ),
        "{}",
        stderr(&o)
    );
}

#[test]
fn a_late_header_is_reported_by_convert() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("two.hrlog");
    let c = dir.path().join("two.csv");
    let (mut bytes, _) = engine_log(&a, 20);
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let other = LogHeader {
        max_tx: Some(Dbm(20.0)),
        ..LogHeader::default()
    };
    let at = bytes.len();
    bytes.extend_from_slice(enc.header(&other, &mut buf).unwrap());
    std::fs::write(&a, &bytes).unwrap();
    let o = headroom(&[&a, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(&format!(
            "two.hrlog: byte {at}: another header frame after 20 records with different device_id, epoch_ms, min_tx_dbm, max_tx_dbm, tx_step_db, antenna_gain_dbi, required_snr_db, eirp_cap_dbm: ignored (the first header applies)"
        )),
        "{}",
        stderr(&o)
    );
}

/// A header with a rate table of our own invented radio.
fn rated_header() -> LogHeader {
    use headroom::rate::{Rate, RateTable};
    LogHeader {
        device_id: 9,
        required_snr: Some(Db(-12.5)),
        rates: RateTable::new(&[
            Rate::new("sf7", Db(-7.5), 41_216, Some(125e3)).unwrap(),
            Rate::new("sf9", Db(-12.5), 144_384, Some(125e3)).unwrap(),
            Rate::new("sf12", Db(-20.0), 991_232, Some(125e3)).unwrap(),
        ])
        .unwrap(),
        ..LogHeader::default()
    }
}

#[test]
fn rates_survive_binary_to_csv_to_binary() {
    let dir = tempfile::tempdir().unwrap();
    let (a, c, b) = (
        dir.path().join("rated.hrlog"),
        dir.path().join("rated.csv"),
        dir.path().join("rated2.hrlog"),
    );
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = enc.header(&rated_header(), &mut buf).unwrap().to_vec();
    for i in 0..12u64 {
        let r = LogRecord {
            t_ms: 1000 * i,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-110.0),
            noise_dbm: Some(-117.0),
            // Every rate, and a record that does not say.
            rate: [Some(0), Some(1), Some(2), None][(i % 4) as usize],
        };
        bytes.extend_from_slice(enc.record(&r, &mut buf).unwrap());
    }
    std::fs::write(&a, &bytes).unwrap();
    let o = headroom(&[&a, &c]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(&c).unwrap();
    assert!(
        csv.contains(
            "# rate: sf7, -7.5 dB, 41.216 ms, 125000 Hz\n\
             # rate: sf9, -12.5 dB, 144.384 ms, 125000 Hz\n\
             # rate: sf12, -20 dB, 991.232 ms, 125000 Hz\n\
             t_ms,tx_dbm,rssi_dbm,noise_dbm,rate\n\
             0,10,-110,-117,sf7\n1000,10,-110,-117,sf9\n2000,10,-110,-117,sf12\n3000,10,-110,-117,\n"
        ),
        "{csv}"
    );
    // Back to format 1, the format it was written in: the same bytes.
    let o = headroom_flags(&[&c, &b], &["--binary-version", "1"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(std::fs::read(&b).unwrap(), bytes, "table and rates kept");
    // And through format 2 (the default) and back, the same CSV.
    let (b2, c2) = (
        dir.path().join("rated3.hrlog"),
        dir.path().join("rated3.csv"),
    );
    let o = headroom(&[&c, &b2]);
    assert!(o.status.success(), "{}", stderr(&o));
    let o = headroom(&[&b2, &c2]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(
        std::fs::read_to_string(&c2).unwrap(),
        csv,
        "format 2 keeps them too"
    );
}

#[test]
fn rate_lines_and_rate_cells_are_checked() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.hrlog");
    let good =
        "# headroom-log 1.2\n# rate: fast, -7.5 dB, 41.216 ms\n# rate: slow, -20 dB, 0.991232 s\n\
                t_ms,tx_dbm,rssi_dbm,noise_dbm,Used\n0,10,-110,-117,fast\n1000,10,-110,-117,slow\n";
    let run = |name: &str, text: &str, flags: &[&str]| {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        let _ = std::fs::remove_file(&out);
        headroom_flags(&[&p, &out], flags)
    };
    // The column named otherwise, mapped.
    let o = run("good.csv", good, &["--column", "rate=Used"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let back = dir.path().join("back.csv");
    assert!(headroom(&[&out, &back]).status.success());
    let text = std::fs::read_to_string(&back).unwrap();
    assert!(text.ends_with(",fast\n1000,10,-110,-117,slow\n"), "{text}");
    // Unmapped, the column is another column: no rate read.
    let o = run("good2.csv", good, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    for (name, text, want) in [
        (
            "unknown.csv",
            good.replace("117,slow", "117,sf9"),
            "unknown.csv:6: column rate: 'sf9' is not a rate of the log's header (rates: fast, slow)",
        ),
        (
            "bare.csv",
            good.replace("41.216 ms", "41.216"),
            "bare.csv:2: rate line: airtime: '41.216' needs a unit",
        ),
        (
            "fields.csv",
            good.replace("fast, -7.5 dB, 41.216 ms", "fast, -7.5 dB"),
            "fields.csv:2: rate line: 'fast, -7.5 dB' is not NAME, REQUIRED_SNR dB, AIRTIME",
        ),
        (
            "twice.csv",
            good.replace("# rate: slow", "# rate: fast"),
            "twice.csv:3: rate line: two rates in the table have the same name",
        ),
        (
            "notable.csv",
            good.replace("# rate: fast, -7.5 dB, 41.216 ms\n# rate: slow, -20 dB, 0.991232 s\n", ""),
            "notable.csv:3: column rate: 'fast' names a rate, but the log's header has no rate table",
        ),
    ] {
        let o = run(name, &text, &["--column", "rate=Used"]);
        assert_eq!(o.status.code(), Some(2), "{name}: {}", stderr(&o));
        assert!(stderr(&o).contains(want), "{name}: {}", stderr(&o));
        assert!(!out.exists(), "{name}: nothing written");
    }
}
