//! Panic-freedom, part 1: the controller update and the replay step.
//!
//! Built with `--features panic-free-check` this links only if no panic
//! path is left after optimisation (see the crate's panic handler). Inputs
//! come through `black_box` and cover every observation kind and any f32
//! bits (NaN, infinities), so nothing is constant-folded away. Without the
//! feature it runs and exits 0.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m_rt::entry;

use headroom::control::{settings, Controller, ControllerConfig, Fleet, Observation, Replay};
use headroom::record::{LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};
use headroom_firmware_demo::{host, probe_f32};

/// The replay window, the engine's one value.
use headroom::control::REPLAY_WINDOW as WINDOW;

#[entry]
fn main() -> ! {
    host::exit(run())
}

fn run() -> bool {
    let cfg = black_box(ControllerConfig::sub_ghz_node());
    let (Ok(mut ctrl), Ok(mut replay)) =
        (Controller::<WINDOW>::new(cfg), Replay::<WINDOW>::new(cfg))
    else {
        return false;
    };
    for k in 0..black_box(256u32) {
        let t_ms = black_box(u64::from(k) * 1000);
        let (a, b, c) = (probe_f32(k, 1), probe_f32(k, 2), probe_f32(k, 3));
        let obs = match black_box(k % 5) {
            0 => Observation::Lost { t_ms },
            1 => Observation::Acked { t_ms },
            2 => Observation::Beacon {
                t_ms,
                beacon_tx: Dbm(a),
                rssi: Dbm(b),
            },
            3 => Observation::Missing { t_ms },
            _ => Observation::Feedback {
                t_ms,
                tx: Dbm(a),
                rssi: Dbm(b),
                noise: Dbm(c),
                snr: Some(Db(a - c)),
            },
        };
        black_box(ctrl.update(black_box(&obs)));
        let rec = LogRecord {
            t_ms,
            tx_dbm: Some(a),
            rssi_dbm: Some(b),
            noise_dbm: Some(c),
        };
        black_box(replay.step(black_box(&rec)));
    }
    let s = replay.summary();
    black_box((
        s.outage_fraction(),
        s.outage_below_max(),
        s.mean_tx_dbm(),
        s.saving_vs_max_db(),
        s.saving_vs_logged_db(),
        s.logged.outage_fraction(),
    ));
    let mut fleet = Fleet::new();
    fleet.add(s, black_box(0.01));
    fleet.add(s, black_box(0.02));
    black_box(&fleet);
    // The settings resolution the replay on target runs, from a header of
    // arbitrary values.
    let header = LogHeader {
        min_tx: Some(Dbm(probe_f32(7, 1))),
        max_tx: Some(Dbm(probe_f32(7, 2))),
        tx_step: Some(Db(probe_f32(7, 3))),
        antenna_gain: Some(Dbi(probe_f32(7, 4))),
        required_snr: Some(Db(probe_f32(7, 5))),
        eirp_cap: Some(Dbm(probe_f32(7, 6))),
        ..LogHeader::default()
    };
    black_box(settings::for_log(black_box(Some(&header))).is_ok());
    true
}
