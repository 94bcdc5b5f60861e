//! Criterion benches of the engine's hot paths: the controller update
//! (32-reading window), every path-loss and fade-margin function, the frame
//! decoder on an in-memory log and the replay step.
//!
//! `cargo bench -p headroom-tests --bench engine` (release profile, LTO).
//! Throughputs are reported per element (update, call, record). The
//! inputs are invented but realistic: a sub-GHz node's link, an indoor
//! office, a Ku-band slant path.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use headroom::control::Replay;
use headroom::fading::{self, FadingModel};
use headroom::propagation::{
    self as prop, Extrapolation, HataEnvironment, IndoorEnvironment, SlantPath, TwoRayForm,
};
use headroom::record::codec::{Encoder, Event, FrameDecoder, MAX_FRAME};
use headroom::record::{LogHeader, LogRecord};
use headroom::units::{Db, Hertz, Metres};

#[allow(dead_code)] // each bench uses part of the shared helpers
mod common;

fn controller(c: &mut Criterion) {
    let mix = common::observation_mix(common::MIX_LEN);
    let fresh = common::controller();
    let mut g = c.benchmark_group("controller");
    g.throughput(Throughput::Elements(mix.len() as u64));
    g.bench_function("update_w32_mix", |b| {
        b.iter(|| {
            let mut ctl = fresh;
            for obs in &mix {
                black_box(ctl.update(black_box(obs)));
            }
            ctl.tx()
        })
    });
    g.finish();
    println!(
        "controller state: size_of::<Controller<{}>>() = {} bytes",
        common::W,
        core::mem::size_of::<headroom::control::Controller<{ common::W }>>()
    );
}

/// Benches a call that must succeed on these inputs (a failure is a bug in
/// the bench inputs, reported loudly rather than timed).
macro_rules! call {
    ($g:expr, $name:literal, $e:expr) => {
        if let Err(err) = $e {
            panic!("{}: bench input refused: {err}", $name);
        }
        $g.bench_function($name, |b| b.iter(|| black_box($e)));
    };
}

fn propagation(c: &mut Criterion) {
    let f = black_box(Hertz(868e6));
    let d = black_box(Metres(2_500.0));
    let ht = black_box(Metres(30.0));
    let hr = black_box(Metres(1.5));
    let office = match prop::indoor_coefficients(Hertz(1.9e9), IndoorEnvironment::Office) {
        Ok(c) => c,
        Err(e) => panic!("indoor coefficients: {e}"),
    };
    let path = SlantPath {
        rain_rate_001: 42.0,
        rain_height_km: 4.1,
        station_height_km: 0.2,
        latitude_deg: 47.0,
        elevation_deg: 33.0,
        frequency: Hertz(12e9),
        tilt_deg: 45.0,
    };
    let mut g = c.benchmark_group("propagation");
    g.throughput(Throughput::Elements(1));
    call!(g, "free_space_path_loss", prop::free_space_path_loss(f, d));
    call!(
        g,
        "log_distance",
        prop::log_distance(f, d, Metres(1.0), None, black_box(2.9))
    );
    call!(
        g,
        "okumura_hata",
        prop::okumura_hata(
            f,
            d,
            ht,
            hr,
            HataEnvironment::Suburban,
            Extrapolation::Refuse
        )
    );
    call!(
        g,
        "cost231_hata",
        prop::cost231_hata(
            black_box(Hertz(1.8e9)),
            d,
            ht,
            hr,
            false,
            Extrapolation::Refuse
        )
    );
    call!(
        g,
        "two_ray_exact",
        prop::two_ray(f, d, ht, hr, TwoRayForm::Exact { reflection: -1.0 })
    );
    call!(
        g,
        "two_ray_asymptotic",
        prop::two_ray(f, d, ht, hr, TwoRayForm::Asymptotic)
    );
    call!(g, "two_ray_crossover", prop::two_ray_crossover(f, ht, hr));
    call!(
        g,
        "indoor_coefficients",
        prop::indoor_coefficients(black_box(Hertz(1.9e9)), IndoorEnvironment::Office)
    );
    call!(
        g,
        "itu_indoor",
        prop::itu_indoor(black_box(Hertz(1.9e9)), black_box(Metres(35.0)), 2, &office)
    );
    call!(
        g,
        "rain_coefficients",
        prop::rain_coefficients(black_box(Hertz(12e9)), 45.0, 33.0)
    );
    call!(
        g,
        "rain_specific_attenuation",
        prop::rain_specific_attenuation(black_box(Hertz(12e9)), black_box(25.0), 45.0, 33.0)
    );
    call!(
        g,
        "rain_attenuation_exceeded",
        prop::rain_attenuation_exceeded(black_box(&path), black_box(0.01))
    );
    g.finish();
}

fn fading_fns(c: &mut Criterion) {
    let models = [
        ("rayleigh", FadingModel::Rayleigh),
        ("rician_k6", FadingModel::Rician { k_factor: Db(6.0) }),
        ("lognormal_s8", FadingModel::LogNormal { sigma: Db(8.0) }),
        ("composite_s8", FadingModel::Composite { sigma: Db(8.0) }),
    ];
    let mut g = c.benchmark_group("fading");
    g.throughput(Throughput::Elements(1));
    for (name, m) in models {
        let m = black_box(m);
        g.bench_function(format!("outage_for_margin/{name}"), |b| {
            b.iter(|| black_box(fading::outage_for_margin(m, black_box(Db(15.0)))))
        });
        g.bench_function(format!("availability_for_margin/{name}"), |b| {
            b.iter(|| black_box(fading::availability_for_margin(m, black_box(Db(15.0)))))
        });
        g.bench_function(format!("margin_for_availability/{name}"), |b| {
            b.iter(|| black_box(fading::margin_for_availability(m, black_box(0.99))))
        });
        g.bench_function(format!("margin_for_outage/{name}"), |b| {
            b.iter(|| black_box(fading::margin_for_outage(m, black_box(0.01))))
        });
        for (what, r) in [
            (
                "outage_for_margin",
                fading::outage_for_margin(m, Db(15.0)).map(|_| ()),
            ),
            (
                "margin_for_availability",
                fading::margin_for_availability(m, 0.99).map(|_| ()),
            ),
        ] {
            if let Err(e) = r {
                panic!("{what}/{name}: bench input refused: {e}");
            }
        }
    }
    call!(
        g,
        "area_coverage",
        fading::area_coverage(black_box(0.9), Db(8.0), 3.5)
    );
    call!(
        g,
        "edge_probability_for_area",
        fading::edge_probability_for_area(black_box(0.95), Db(8.0), 3.5)
    );
    g.finish();
}

/// Records of an invented log: the bench mix's packets as a device logs them.
fn records(n: usize) -> Vec<LogRecord> {
    use headroom::control::Observation;
    common::observation_mix(n)
        .iter()
        .map(|o| match *o {
            Observation::Feedback {
                t_ms,
                tx,
                rssi,
                noise,
                ..
            } => LogRecord {
                t_ms,
                tx_dbm: Some(tx.0),
                rssi_dbm: Some(rssi.0),
                noise_dbm: Some(noise.0),
                rate: None,
            },
            other => LogRecord {
                t_ms: other.t_ms(),
                tx_dbm: Some(14.0),
                ..Default::default()
            },
        })
        .collect()
}

/// The framed binary bytes of a header and `recs`.
fn encode_log(recs: &[LogRecord]) -> Vec<u8> {
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME + 8];
    let mut out = Vec::new();
    match enc.header(&LogHeader::default(), &mut buf) {
        Ok(b) => out.extend_from_slice(b),
        Err(e) => panic!("encode header: {e}"),
    }
    for r in recs {
        match enc.record(r, &mut buf) {
            Ok(b) => out.extend_from_slice(b),
            Err(e) => panic!("encode record: {e}"),
        }
    }
    out
}

fn codec_and_replay(c: &mut Criterion) {
    let recs = records(common::MIX_LEN);
    let bytes = encode_log(&recs);
    let mut g = c.benchmark_group("log");
    g.throughput(Throughput::Elements(recs.len() as u64));
    g.bench_function("decode_frames", |b| {
        b.iter(|| {
            let mut dec = FrameDecoder::<MAX_FRAME>::new();
            let mut input: &[u8] = black_box(&bytes);
            let mut n = 0u32;
            while let Some(ev) = dec.feed(&mut input) {
                if matches!(ev, Event::Frame { .. }) {
                    n += 1;
                }
            }
            assert_eq!(n as usize, recs.len() + 1, "the decoder lost frames");
            n
        })
    });
    let fresh = match Replay::<{ common::W }>::new(common::config()) {
        Ok(r) => r,
        Err(e) => panic!("replay settings: {e}"),
    };
    g.bench_function("replay_step", |b| {
        b.iter_batched_ref(
            || fresh,
            |rp| {
                for r in &recs {
                    black_box(rp.step(black_box(r)));
                }
            },
            BatchSize::SmallInput,
        )
    });
    g.bench_function("decode_and_replay", |b| {
        b.iter(|| {
            let mut rp = fresh;
            let mut dec = FrameDecoder::<MAX_FRAME>::new();
            let mut input: &[u8] = black_box(&bytes);
            while let Some(ev) = dec.feed(&mut input) {
                if let Event::Frame {
                    frame: headroom::record::codec::Frame::Record(r),
                    ..
                } = ev
                {
                    black_box(rp.step(&r));
                }
            }
            rp.summary().records
        })
    });
    g.finish();
}

criterion_group!(
    benches,
    controller,
    propagation,
    fading_fns,
    codec_and_replay
);
criterion_main!(benches);
