//! The kept fuzz corpus and every crash input, run again on stable.
//!
//! `fuzz/src/checks.rs` holds the checks behind the `frame_decoder` and
//! `controller` fuzz targets (it needs only the engine); this file compiles
//! it as a module and feeds it every file of `fuzz/corpus/<target>/` and
//! `fuzz/regressions/<target>/`. A file that made a target fail stays in
//! `fuzz/regressions/` once fixed, so the failure cannot come back
//! unnoticed. The CSV and link-file targets go through the `headroom`
//! binary instead: `host-cli/tests/bad_inputs.rs`.

#![allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]

#[path = "../../fuzz/src/checks.rs"]
#[allow(dead_code)]
mod checks;

use std::fs;
use std::panic;
use std::path::{Path, PathBuf};

use headroom::control::{Controller, ControllerConfig, PowerSteps};
use headroom::units::{Db, Dbm};

fn fuzz_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz")
}

/// Files of `fuzz/<kind>/<target>/`, sorted; none if the folder is absent.
fn inputs(kind: &str, target: &str) -> Vec<PathBuf> {
    let dir = fuzz_dir().join(kind).join(target);
    let Ok(rd) = fs::read_dir(&dir) else {
        return Vec::new();
    };
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.is_file())
        .collect();
    v.sort();
    v
}

/// Run `check` on every corpus and regression input of `target`; report
/// all failing files at once, by name.
fn run_all(target: &str, check: fn(&[u8])) -> usize {
    let corpus = inputs("corpus", target);
    assert!(
        !corpus.is_empty(),
        "no corpus for {target} in {}",
        fuzz_dir().display()
    );
    let files: Vec<PathBuf> = corpus
        .into_iter()
        .chain(inputs("regressions", target))
        .collect();
    let mut failed = Vec::new();
    let hook = panic::take_hook();
    panic::set_hook(Box::new(|_| {}));
    for f in &files {
        let data = fs::read(f).unwrap();
        let r = panic::catch_unwind(|| check(&data));
        if let Err(e) = r {
            let msg = e
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| e.downcast_ref::<&str>().map(|s| (*s).to_string()))
                .unwrap_or_default();
            failed.push(format!(
                "{}: {}",
                f.display(),
                msg.lines().next().unwrap_or("")
            ));
        }
    }
    panic::set_hook(hook);
    assert!(
        failed.is_empty(),
        "{} of {} inputs fail:\n{}",
        failed.len(),
        files.len(),
        failed.join("\n")
    );
    files.len()
}

#[test]
fn frame_decoder_corpus_and_crashes() {
    let n = run_all("frame_decoder", checks::frame_decoder);
    assert!(n >= 5);
}

#[test]
fn controller_corpus_and_crashes() {
    let n = run_all("controller", checks::controller);
    assert!(n >= 5);
}

#[test]
fn corpus_is_small() {
    // The corpus lives in git: keep it under 1 MB.
    let mut total = 0u64;
    for kind in ["corpus", "regressions"] {
        let Ok(targets) = fs::read_dir(fuzz_dir().join(kind)) else {
            continue;
        };
        for t in targets.filter_map(|e| e.ok()) {
            for f in fs::read_dir(t.path())
                .into_iter()
                .flatten()
                .filter_map(|e| e.ok())
            {
                total += f.metadata().map(|m| m.len()).unwrap_or(0);
            }
        }
    }
    assert!(total < 1 << 20, "fuzz corpus is {total} bytes");
}

// The checks themselves must be able to fail, or the corpus run proves
// nothing.

fn fails(f: impl FnOnce() + panic::UnwindSafe) -> bool {
    let hook = panic::take_hook();
    panic::set_hook(Box::new(|_| {}));
    let r = panic::catch_unwind(f).is_err();
    panic::set_hook(hook);
    r
}

#[test]
fn power_check_catches_each_broken_invariant() {
    let cfg = ControllerConfig::sub_ghz_node(); // −9..22 dBm, 1 dB steps, cap 16.15 − 2.15 dBi
    assert!(!fails(|| checks::check_power(
        &cfg,
        Dbm(3.0),
        Some(Dbm(1.0)),
        "ok"
    )));
    assert!(!fails(|| checks::check_power(&cfg, Dbm(14.0), None, "top")));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(f32::NAN),
        None,
        "nan"
    )));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(-10.0),
        None,
        "below min"
    )));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(15.0),
        None,
        "above cap"
    )));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(3.5),
        None,
        "off grid"
    )));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(10.0),
        Some(Dbm(3.0)),
        "rose 7 dB"
    )));
    assert!(fails(|| checks::check_power(
        &cfg,
        Dbm(0.0),
        Some(Dbm(3.0)),
        "fell 3 dB"
    )));
    let mut wide = cfg;
    wide.steps = PowerSteps::Uniform(Db(0.5));
    assert!(!fails(move || checks::check_power(
        &wide,
        Dbm(3.5),
        None,
        "half-dB grid"
    )));
}

#[test]
fn stream_decoding_reports_frames_and_damage() {
    use headroom::record::codec::{CodecError, Encoder, MAX_FRAME};
    use headroom::record::LogRecord;
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut log = Vec::new();
    for t in [5u64, 6] {
        let r = LogRecord {
            t_ms: t,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-90.0),
            noise_dbm: None,
            rate: None,
        };
        log.extend_from_slice(enc.record(&r, &mut buf).unwrap());
    }
    let whole = checks::decode_stream::<MAX_FRAME>(&log, &[3, 1]);
    assert_eq!(whole.len(), 2, "{whole:?}");
    assert!(matches!(&whole[1], checks::Canon::Frame(_, 1, _)));
    // Without its final delimiter the second frame is truncated damage.
    let cut = checks::decode_stream::<MAX_FRAME>(&log[..log.len() - 1], &[]);
    assert_eq!(cut.len(), 2, "{cut:?}");
    assert!(
        matches!(cut[1], checks::Canon::Damaged(_, _, CodecError::Truncated)),
        "{cut:?}"
    );
    // A clean log built by the target's own mode 1 passes its check.
    let mut input = vec![1u8, 0, 5, 0];
    input.extend((0..200u32).map(|i| (i * 37 % 251) as u8));
    assert!(!fails(|| checks::frame_decoder(&input)));
}

/// Finding F1 of the `controller` fuzz target (reported; in
/// `engine/src/control/config.rs`): a positive but tiny uniform step is
/// accepted, and then the highest level is +inf and the controller's own
/// `is_level` is false for its own choice. Input:
/// `fuzz/regressions/controller/f1-subnormal-uniform-step`.
#[test]
fn f1_tiny_uniform_step_is_refused_or_harmless() {
    for step in [1.0e-39f32, 1.0e-30, 1.0e-6] {
        let mut cfg = ControllerConfig::sub_ghz_node();
        cfg.steps = PowerSteps::Uniform(Db(step));
        match Controller::<32>::new(cfg) {
            Err(e) => assert!(
                e.setting().starts_with("steps"),
                "step {step}: refused for {e}"
            ),
            Ok(c) => {
                let (lo, hi) = c.limits();
                assert!(
                    hi.0.is_finite() && hi.0 <= 14.0 + 1e-3,
                    "step {step}: limits {lo:?}..{hi:?}"
                );
                assert!(
                    c.is_level(c.tx()),
                    "step {step}: start power {:?} is not a level",
                    c.tx()
                );
            }
        }
    }
}

#[test]
fn block_decoder_corpus_and_crashes() {
    let n = run_all("block_decoder", checks::block_decoder);
    assert!(n >= 5);
}

#[test]
fn block_decoder_check_catches_a_lost_record() {
    // The check itself must fail on a decoder that drops a record: a log
    // of blocks decodes to fewer records than written.
    let recs: Vec<headroom::record::LogRecord> = (0..40u64)
        .map(|i| headroom::record::LogRecord {
            t_ms: i * 1000,
            rssi_dbm: Some(-90.0 - i as f32),
            ..Default::default()
        })
        .collect();
    let (log, blocks) = checks::encode_blocks_for_test(&recs, 16);
    assert_eq!(blocks, 3);
    let got = checks::stream_records(&log, &[5]);
    assert_eq!(got.len(), 40);
    assert!(fails(|| assert_eq!(
        checks::stream_records(&log[..log.len() - 1], &[]),
        recs.iter().map(checks::record_bits).collect::<Vec<_>>()
    )));
}
