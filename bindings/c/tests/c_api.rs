//! The host C test: `tests/c_api.c` (with the demo's replay loop,
//! `demo/replay_log.c`) is compiled with the system's C compiler, linked
//! against this crate's static library and run; everything it prints is
//! computed again here with the engine's Rust API and must match bit for
//! bit.
#![allow(clippy::panic, clippy::indexing_slicing)] // a test fails by panicking

use std::path::{Path, PathBuf};
use std::process::Command;

use headroom::budget::{FadeAllowance, Link, NoiseSpec, Requirement, Side};
use headroom::control::settings::{resolve, Layer, Setting, Value};
use headroom::control::{
    settings, Controller, LevelTable, Observation, PowerSteps, Replay, REPLAY_WINDOW,
};
use headroom::energy::{
    Battery, ChirpModem, EnergyProfile, LowDataRate, Microamps, Microcoulombs, MilliampHours,
    Milliamps, Milliseconds, Seconds, TxCurrentTable, Volts,
};
use headroom::propagation::{free_space_path_loss, log_distance};
use headroom::record::codec::{Encoder, Event, Frame, FrameDecoder, MAX_FRAME};
use headroom::record::{DecisionRecord, LogHeader, LogRecord};
use headroom::units::{Db, Dbm, Hertz, Metres};

fn crate_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The static library cargo built for this test run: the newest
/// `libheadroom_c*.a` beside the test binary (a stale one is older than a
/// rebuilt one).
fn static_lib() -> PathBuf {
    let exe = std::env::current_exe().unwrap_or_default();
    let deps = exe.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut dirs = vec![deps.clone()];
    if let Some(p) = deps.parent() {
        dirs.push(p.to_path_buf());
    }
    let mut best: Option<(std::time::SystemTime, PathBuf)> = None;
    for d in dirs {
        for e in std::fs::read_dir(&d).into_iter().flatten().flatten() {
            let p = e.path();
            let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
            if name.starts_with("libheadroom_c") && name.ends_with(".a") {
                let t = e.metadata().and_then(|m| m.modified()).ok();
                if let Some(t) = t {
                    if best.as_ref().is_none_or(|(b, _)| t > *b) {
                        best = Some((t, p));
                    }
                }
            }
        }
    }
    match best {
        Some((_, p)) => p,
        None => panic!("no libheadroom_c*.a next to {}", exe.display()),
    }
}

/// The bundled demo log as a binary log, and its header and records.
fn demo_log(dir: &Path) -> (PathBuf, Option<LogHeader>, Vec<LogRecord>) {
    let csv = crate_dir().join("../../examples/logs/orchard-868.csv");
    let reader = match headroom_cli::logio::open(&csv) {
        Ok(r) => r,
        Err(e) => panic!("{}: {e}", csv.display()),
    };
    let header = reader.header().copied();
    let records: Vec<LogRecord> = reader
        .map(|r| r.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    // Written with the engine's encoder: the frames the CLI's `convert` writes.
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = Vec::new();
    if let Some(h) = &header {
        bytes.extend_from_slice(enc.header(h, &mut buf).unwrap_or_default());
    }
    for r in &records {
        bytes.extend_from_slice(enc.record(r, &mut buf).unwrap_or_default());
    }
    let path = dir.join("orchard-868.hrlog");
    std::fs::write(&path, &bytes).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    (path, header, records)
}

fn compile(dir: &Path) -> PathBuf {
    let exe = dir.join("c_api");
    let c = crate_dir();
    let cc = std::env::var_os("CC").unwrap_or_else(|| "cc".into());
    let mut cmd = Command::new(&cc);
    cmd.args([
        "-std=c11",
        "-Wall",
        "-Wextra",
        "-Werror",
        "-pedantic",
        "-O1",
    ])
    .arg("-I")
    .arg(c.join("include"))
    .arg("-I")
    .arg(c.join("demo"))
    .arg(c.join("tests/c_api.c"))
    .arg(c.join("demo/replay_log.c"))
    .arg(static_lib())
    // What Rust's standard library needs on a Linux host
    // (`rustc --print native-static-libs`).
    .args(["-lpthread", "-ldl", "-lm", "-lrt", "-lutil"])
    .arg("-o")
    .arg(&exe);
    let out = cmd
        .output()
        .unwrap_or_else(|e| panic!("cannot run the C compiler {cc:?}: {e}"));
    assert!(
        out.status.success(),
        "{cmd:?} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    exe
}

/// The C side's decision frames in `path`, read with the engine's decoder
/// (one header frame, then decisions only), equal to `want` one by one:
/// time, power bits, outcome, reason and rate. Returns them.
fn same_decisions(path: &Path, want: &[DecisionRecord]) -> Vec<DecisionRecord> {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{e}"));
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut input = bytes.as_slice();
    let mut got = Vec::new();
    let mut headers = 0;
    while let Some(ev) = dec.feed(&mut input) {
        match ev {
            Event::Frame {
                frame: Frame::Decision(d),
                ..
            } => got.push(d),
            Event::Frame {
                frame: Frame::Header { .. },
                ..
            } => headers += 1,
            other => panic!("unexpected {other:?}"),
        }
    }
    assert_eq!(dec.finish(), None);
    assert_eq!(headers, 1);
    assert_eq!(got.len(), want.len());
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        assert!(
            g.t_ms == w.t_ms
                && g.tx_dbm.to_bits() == w.tx_dbm.to_bits()
                && g.outcome == w.outcome
                && g.reason == w.reason
                && g.rate == w.rate,
            "record {i}: C {g:?}, Rust {w:?}"
        );
    }
    got
}

/// Every record through the engine's replay, as the decision frames the C
/// side writes (no rate without a rate table).
fn replayed(replay: &mut Replay<REPLAY_WINDOW>, records: &[LogRecord]) -> Vec<DecisionRecord> {
    records
        .iter()
        .map(|rec| {
            let s = replay.step(rec);
            DecisionRecord {
                t_ms: s.t_ms,
                tx_dbm: s.chosen.0,
                outcome: s.outcome.code(),
                reason: s.reason.code(),
                rate: s.rate,
            }
        })
        .collect()
}

/// The summary's counts as the C program prints them.
fn counts_of(s: &headroom::control::Summary) -> String {
    format!(
        "{} {} {} {} {} {} {} {} {}",
        s.logs,
        s.records,
        s.judged,
        s.lost,
        s.unjudged,
        s.judged_at_max,
        s.lost_at_max,
        s.power_changes,
        s.logged.judged
    )
}

/// Lines of the C program's output starting with `tag`, split in words.
fn lines<'a>(out: &'a str, tag: &str) -> Vec<Vec<&'a str>> {
    out.lines()
        .filter_map(|l| {
            let mut w = l.split_whitespace();
            (w.next() == Some(tag)).then(|| w.collect())
        })
        .collect()
}

fn f32_of(hex: &str) -> f32 {
    f32::from_bits(u32::from_str_radix(hex, 16).unwrap_or_else(|e| panic!("{hex}: {e}")))
}

fn hex(x: f32) -> String {
    format!("{:08x}", x.to_bits())
}

fn hex64(x: f64) -> String {
    format!("{:016x}", x.to_bits())
}

fn num<T: std::str::FromStr>(s: &str) -> T
where
    T::Err: std::fmt::Debug,
{
    s.parse().unwrap_or_else(|e| panic!("{s}: {e:?}"))
}

/// The settings of `device_settings` in c_api.c, through the same resolution.
fn device_config() -> headroom::control::ControllerConfig {
    let mut l = Layer::empty();
    let set = |l: &mut Layer, s: Setting, v: Value| l.set(s, v).unwrap_or_else(|e| panic!("{e}"));
    set(&mut l, Setting::RequiredSnrDb, Value::Number(-7.5));
    set(&mut l, Setting::MinTxDbm, Value::Number(-4.0));
    set(&mut l, Setting::MaxTxDbm, Value::Number(20.0));
    set(
        &mut l,
        Setting::EirpCapDbm,
        Value::Cap(headroom::control::EirpCap::AtMost(Dbm(16.15))),
    );
    set(&mut l, Setting::AntennaGainDbi, Value::Number(2.15));
    set(&mut l, Setting::MinReadings, Value::Whole(6));
    set(&mut l, Setting::MaxStepDownDb, Value::Number(4.0));
    let levels = [-4.0, 0.0, 4.0, 8.0, 11.0, 14.0].map(Dbm);
    let table = LevelTable::new(&levels).unwrap_or_else(|e| panic!("{e}"));
    set(
        &mut l,
        Setting::Steps,
        Value::Steps(PowerSteps::Table(table)),
    );
    resolve(&l, &Layer::empty(), &Layer::empty(), &Layer::defaults())
        .unwrap_or_else(|e| panic!("{e}"))
        .config
}

fn check_controller(out: &str) {
    let mut c = Controller::<REPLAY_WINDOW>::new(device_config()).unwrap_or_else(|e| panic!("{e}"));
    let limits = lines(out, "limits");
    let (lo, hi) = c.limits();
    assert_eq!(limits, vec![vec![hex(lo.0).as_str(), hex(hi.0).as_str()]]);
    let obs = lines(out, "obs");
    let dec = lines(out, "dec");
    assert_eq!(obs.len(), 400);
    assert_eq!(dec.len(), 400);
    let mut kinds = [0usize; 5];
    for (o, d) in obs.iter().zip(&dec) {
        let t_ms: u64 = num(o[1]);
        let kind: usize = num(o[0]);
        kinds[kind] += 1;
        let observation = match kind {
            0 => Observation::Feedback {
                t_ms,
                tx: Dbm(f32_of(o[2])),
                rssi: Dbm(f32_of(o[3])),
                noise: Dbm(f32_of(o[4])),
                snr: (o[5] != "0").then(|| Db(f32_of(o[6]))),
            },
            1 => Observation::Acked { t_ms },
            2 => Observation::Lost { t_ms },
            3 => Observation::Beacon {
                t_ms,
                beacon_tx: Dbm(f32_of(o[7])),
                rssi: Dbm(f32_of(o[3])),
            },
            _ => Observation::Missing { t_ms },
        };
        // The power the C side sent at is the controller's.
        assert_eq!(hex(c.tx().0), o[2], "t_ms {t_ms}");
        let want = c.update(&observation);
        let got = (
            d[0],
            d[1],
            num::<u8>(d[2]),
            num::<u16>(d[3]),
            d[4].to_string(),
        );
        assert_eq!(
            got,
            (
                hex(want.tx.0).as_str(),
                hex(want.margin().0).as_str(),
                want.reason.code(),
                want.readings,
                want.reason.as_str().to_string()
            ),
            "t_ms {t_ms}"
        );
    }
    assert!(kinds.iter().all(|&k| k > 0), "every kind fed: {kinds:?}");
}

fn check_replay(out: &str, header: Option<&LogHeader>, records: &[LogRecord], decisions: &Path) {
    let r = settings::for_log(header).unwrap_or_else(|e| panic!("{e}"));
    let mut replay = Replay::<REPLAY_WINDOW>::new(r.config).unwrap_or_else(|e| panic!("{e}"));
    let want = replayed(&mut replay, records);
    same_decisions(decisions, &want);
    let s = replay.summary();
    let counts = counts_of(s);
    assert_eq!(
        lines(out, "counts"),
        vec![counts.split(' ').collect::<Vec<_>>()]
    );
    let logged = format!(
        "{} {} {} {} {}",
        s.logged.lost,
        s.logged.without_readings,
        s.logged.records_with_tx,
        hex64(s.logged.tx_mw_sum),
        hex64(s.logged.chosen_mw_sum)
    );
    assert_eq!(
        lines(out, "logged"),
        vec![logged.split(' ').collect::<Vec<_>>()]
    );
    let used = s.max_tx_dbm_used.map_or(0.0, |d| d.0);
    let sums = format!(
        "{} {} {} {} {}",
        hex64(s.tx_mw_sum),
        hex64(s.max_mw_sum),
        hex(used),
        u8::from(s.max_tx_dbm_used.is_some()),
        hex(s.max_allowed.0)
    );
    assert_eq!(
        lines(out, "sums"),
        vec![sums.split(' ').collect::<Vec<_>>()]
    );
    let ignored: Vec<String> = s.ignored_readings.iter().map(u64::to_string).collect();
    assert_eq!(
        lines(out, "ignored"),
        vec![ignored.iter().map(String::as_str).collect::<Vec<_>>()]
    );
    let report = lines(out, "report");
    assert_eq!(report.len(), 1);
    assert_eq!(report[0][2..], ["0", "0"], "no damage, no other frame");
}

fn check_codec(out: &str) {
    let header = LogHeader {
        device_id: 77,
        max_tx: Some(Dbm(14.0)),
        required_snr: Some(Db(-12.5)),
        ..LogHeader::default()
    };
    let record = LogRecord {
        t_ms: 123_456,
        tx_dbm: Some(14.0),
        rssi_dbm: Some(-91.5),
        noise_dbm: None,
        rate: None,
    };
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut want: Vec<u8> = enc.header(&header, &mut buf).unwrap_or_default().to_vec();
    want.extend_from_slice(enc.record(&record, &mut buf).unwrap_or_default());
    let want: Vec<String> = want.iter().map(|b| format!("{b:02x}")).collect();
    assert_eq!(
        lines(out, "frames"),
        vec![want.iter().map(String::as_str).collect::<Vec<_>>()]
    );
    assert_eq!(lines(out, "damaged").len(), 1);
}

fn check_energy(out: &str) {
    let one = |tag: &str| -> Vec<String> {
        let l = lines(out, tag);
        assert_eq!(l.len(), 1, "{tag}");
        l[0].iter().map(|s| s.to_string()).collect()
    };
    let ok = |r: Result<f32, headroom::Error>| r.unwrap_or_else(|e| panic!("{e}"));
    let fspl = ok(free_space_path_loss(Hertz(868e6), Metres(1000.0)).map(|d| d.0));
    assert_eq!(one("fspl"), [hex(fspl)]);
    let ld = ok(log_distance(Hertz(868e6), Metres(2500.0), Metres(1.0), None, 3.2).map(|d| d.0));
    assert_eq!(one("logdist"), [hex(ld)]);

    let mut link = Link::<2>::new(
        Dbm(14.0),
        Db(128.0),
        NoiseSpec {
            bandwidth: Hertz(125e3),
            noise_figure: Db(6.0),
            antenna_temperature: None,
        },
        Requirement::CarrierToNoise(Db(-12.5)),
        FadeAllowance::Fixed(Db(10.0)),
    );
    assert!(link.push("tx", Side::Transmitter, Db(2.15)).is_ok());
    assert!(link.push("rx", Side::Receiver, Db(5.0)).is_ok());
    let r = link.evaluate().unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(
        one("link"),
        [
            hex(r.eirp.0),
            hex(r.rx_power.0),
            hex(r.noise_power.0),
            hex(r.margin.0)
        ]
    );

    let modem = ChirpModem {
        spreading_factor: 9,
        bandwidth: Hertz(125e3),
        coding_rate: 1,
        preamble_symbols: 8,
        explicit_header: true,
        crc: true,
        low_data_rate: LowDataRate::Auto,
    };
    let airtime = ok(modem.airtime(20).map(|t| t.0));
    assert_eq!(one("airtime"), [hex(airtime)]);

    let table = TxCurrentTable::<16>::from_points(&[(2.0, 20.0), (14.0, 44.0)])
        .unwrap_or_else(|e| panic!("{e}"));
    let prof = EnergyProfile::new(
        Volts(3.3),
        table,
        Milliseconds(airtime),
        Milliseconds(50.0),
        Milliamps(11.0),
        Microcoulombs(2500.0),
        Microamps(2.0),
    )
    .unwrap_or_else(|e| panic!("{e}"))
    .with_battery(Battery::new(MilliampHours(2600.0)).unwrap_or_else(|e| panic!("{e}")));
    let q = ok(prof.charge_per_packet(Dbm(9.5)).map(|q| q.0));
    let ua = ok(prof.mean_current(Dbm(9.5), Seconds(300.0)).map(|i| i.0));
    let days = ok(prof.battery_life(Microamps(ua)).map(|d| d.0));
    assert_eq!(one("energy"), [hex(q), hex(ua), hex(days)]);
}

#[test]
fn c_program_agrees_with_the_rust_api() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("c_api");
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    let (log, header, records) = demo_log(&dir);
    let exe = compile(&dir);
    let decisions = dir.join("decisions.hrlog");
    let _ = std::fs::remove_file(&decisions);
    let (spec, rates_log, rates_header, rates_records) = rates_inputs(&dir);
    let rate_decisions = dir.join("rate-decisions.hrlog");
    let _ = std::fs::remove_file(&rate_decisions);
    let run = Command::new(&exe)
        .arg(&log)
        .arg(&decisions)
        .arg(&spec)
        .arg(&rates_log)
        .arg(&rate_decisions)
        .output()
        .unwrap_or_else(|e| panic!("cannot run {}: {e}", exe.display()));
    let out = String::from_utf8_lossy(&run.stdout).into_owned();
    let fails = lines(&out, "fail");
    assert!(fails.is_empty(), "the C checks failed:\n{out}");
    assert!(run.status.success(), "{}\n{out}", run.status);
    assert_eq!(lines(&out, "failures"), vec![vec!["0"]]);
    // The refusals the C side checked name their settings.
    assert_eq!(lines(&out, "refused").len(), 4);
    check_controller(&out);
    check_replay(&out, header.as_ref(), &records, &decisions);
    check_rates_replay(&out, &rates_header, &rates_records, &rate_decisions);
    check_codec(&out);
    check_energy(&out);
}

/// The rate-bearing log of the C test and what the C program needs to
/// replay it: the engine's demo node (its rate table and energy profile,
/// floats as their bits, in `rates.txt`) and a log of 3 000 records written
/// by the engine's simulator at 14 dBm, cycling sf7, sf9 and sf12 every 50
/// packets. The header does not carry the rates (a C log header has no
/// rate table): the C side sets them with `headroom_settings_set_rates`.
fn rates_inputs(dir: &Path) -> (PathBuf, PathBuf, LogHeader, Vec<LogRecord>) {
    use headroom::energy::demo::{demo_profile, demo_rates};
    use headroom::propagation::PathLossModel;
    use headroom::sim::{
        ChannelConfig, FastFading, NoiseFloor, PowerPattern, RateSchedule, Shadowing, Synth,
        Trajectory,
    };
    use headroom::units::Dbi;
    let rates = demo_rates().unwrap_or_else(|e| panic!("{e}"));
    let prof = demo_profile().unwrap_or_else(|e| panic!("{e}"));
    let mut spec = String::new();
    headroom_c::rates::write_spec(&mut spec, &rates, &prof).unwrap_or_else(|e| panic!("{e}"));
    let spec_path = dir.join("rates.txt");
    std::fs::write(&spec_path, spec).unwrap_or_else(|e| panic!("{e}"));
    // An invented 868 MHz link of our own, 0.3 to 3 km.
    let channel = ChannelConfig {
        frequency: Hertz(868.0e6),
        path_loss: PathLossModel::LogDistance {
            d0: Metres(1.0),
            pl_d0: None,
            exponent: 3.0,
        },
        tx_antenna_gain: Dbi(2.15),
        rx_antenna_gain: Dbi(2.15),
        trajectory: Trajectory {
            start: Metres(300.0),
            speed_m_per_s: 0.5,
            min: Some(Metres(300.0)),
            max: Some(Metres(3000.0)),
        },
        packet_interval_ms: 30_000,
        start_ms: 0,
        shadowing: Some(Shadowing {
            sigma: Db(4.0),
            decorrelation_distance: Metres(50.0),
            time_constant_s: None,
        }),
        fading: FastFading::Rayleigh,
        fading_correlation: 0.2,
        noise: NoiseFloor {
            mean: Dbm(-117.0),
            jitter: Db(0.5),
            bursts: None,
            burst_rise: Db(0.0),
        },
        min_snr: None,
        feedback_dropouts: None,
        report_resolution: Some(Db(1.0)),
        steps: Default::default(),
    };
    let schedule = RateSchedule::new(rates, &[0, 2, 4], 50).unwrap_or_else(|e| panic!("{e}"));
    let mut synth = Synth::<0>::new(channel, PowerPattern::fixed(Dbm(14.0)), &[], 20_261_204)
        .unwrap_or_else(|e| panic!("{e}"))
        .with_rates(schedule);
    let header = LogHeader {
        device_id: 1516,
        min_tx: Some(Dbm(-9.0)),
        max_tx: Some(Dbm(22.0)),
        tx_step: Some(Db(1.0)),
        antenna_gain: Some(Dbi(2.15)),
        eirp_cap: Some(Dbm(16.15)),
        ..LogHeader::default()
    };
    let records: Vec<LogRecord> = (0..3000)
        .map(|_| synth.next_record().unwrap_or_else(|e| panic!("{e}")).1)
        .collect();
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = enc.header(&header, &mut buf).unwrap_or_default().to_vec();
    for r in &records {
        bytes.extend_from_slice(enc.record(r, &mut buf).unwrap_or_default());
    }
    let log = dir.join("rates.hrlog");
    std::fs::write(&log, bytes).unwrap_or_else(|e| panic!("{e}"));
    (spec_path, log, header, records)
}

/// The C replay with rates: every decision (power bits, outcome, reason and
/// rate) and the summary's counts equal the engine's replay with the demo
/// node's rate table and energy profile.
fn check_rates_replay(out: &str, header: &LogHeader, records: &[LogRecord], decisions: &Path) {
    use headroom::energy::demo::{demo_profile, demo_rates};
    let mut flags = Layer::empty();
    flags
        .set(
            Setting::Rates,
            Value::Rates(demo_rates().unwrap_or_else(|e| panic!("{e}"))),
        )
        .unwrap_or_else(|e| panic!("{e}"));
    let r = resolve(
        &flags,
        &Layer::from_header(header),
        &Layer::empty(),
        &Layer::defaults(),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let prof = demo_profile().unwrap_or_else(|e| panic!("{e}"));
    let mut replay =
        Replay::<REPLAY_WINDOW>::with_energy(r.config, &prof).unwrap_or_else(|e| panic!("{e}"));
    let want = replayed(&mut replay, records);
    let got = same_decisions(decisions, &want);
    let changes = got.windows(2).filter(|w| w[0].rate != w[1].rate).count();
    assert!(changes > 0, "the rate never moved: nothing was compared");
    let s = replay.summary();
    let counts = counts_of(s);
    assert_eq!(
        lines(out, "rates-counts"),
        vec![counts.split(' ').collect::<Vec<_>>()]
    );
}

/// The C block of the README's "From C" section compiles against the header.
#[test]
fn readme_snippet_compiles() {
    let readme = crate_dir().join("../../README.md");
    let text = std::fs::read_to_string(&readme).unwrap_or_else(|e| panic!("{e}"));
    let section = text
        .split("\n## From C\n")
        .nth(1)
        .unwrap_or_else(|| panic!("README.md has no section \"From C\""));
    let code = section
        .split("```c\n")
        .nth(1)
        .and_then(|rest| rest.split("\n```").next())
        .unwrap_or_else(|| panic!("the \"From C\" section has no ```c block"));
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("c_api");
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    let src = dir.join("readme_snippet.c");
    std::fs::write(&src, code).unwrap_or_else(|e| panic!("{e}"));
    let cc = std::env::var_os("CC").unwrap_or_else(|| "cc".into());
    let out = Command::new(&cc)
        .args(["-std=c11", "-Wall", "-Wextra", "-Werror", "-pedantic", "-c"])
        .arg("-I")
        .arg(crate_dir().join("include"))
        .arg(&src)
        .arg("-o")
        .arg(dir.join("readme_snippet.o"))
        .output()
        .unwrap_or_else(|e| panic!("cannot run the C compiler {cc:?}: {e}"));
    assert!(
        out.status.success(),
        "the README's C block does not compile:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
