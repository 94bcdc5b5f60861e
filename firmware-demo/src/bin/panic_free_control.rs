//! Panic-freedom, part 1: the controller update, the replay step and the
//! energy arithmetic (current table, charge, mean current, battery life,
//! resends, airtime, duty cycle, the energy tally).
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

use headroom::control::{
    settings, Controller, ControllerConfig, DutyLimit, Fleet, Observation, Replay,
};
use headroom::energy::airtime::{ChirpModem, CodeRate, LowDataRate, PacketModem};
use headroom::energy::duty::{duty_cycle, en_300_220_sub_bands, min_interval};
use headroom::energy::{demo, AirtimeWindow, ChargeTable};
use headroom::energy::{
    Battery, Delivery, EnergyProfile, EnergyTally, Refinements, TxCurrentTable,
};
use headroom::record::{LogHeader, LogRecord};
use headroom::units::{
    Db, Dbi, Dbm, Hertz, Microamps, Microcoulombs, MilliampHours, Milliamps, Milliseconds, Seconds,
    Volts,
};
use headroom_firmware_demo::{host, probe_f32};

/// The replay window, the engine's one value.
use headroom::control::REPLAY_WINDOW as WINDOW;

#[entry]
fn main() -> ! {
    // One after the other, not nested: each pass's frame has the
    // microbit's 16 KiB to itself.
    host::exit(run() && rates() && energy())
}

#[inline(never)]
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
            rate: None,
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

/// The joint choice of rate and power: a controller and a replay with the
/// demo node's rates, its energy profile and a duty budget, fed values no
/// compiler can predict (held packets, rate indices outside the table).
#[inline(never)]
fn rates() -> bool {
    let (Ok(table), Ok(profile)) = (demo::demo_rates(), demo::demo_profile()) else {
        return false;
    };
    let Ok(charge) = ChargeTable::from_profile(black_box(&profile)) else {
        return false;
    };
    let mut cfg = black_box(ControllerConfig::sub_ghz_node());
    cfg.rates = black_box(table);
    cfg.duty_limit = DutyLimit::AtMost(probe_f32(3, 9).abs().min(1.0).max(1e-3));
    cfg.rate_hysteresis = black_box(0.1);
    let (Ok(mut ctrl), Ok(mut replay)) = (
        Controller::<WINDOW>::with_charge(cfg, Some(charge)),
        Replay::<WINDOW>::with_energy(cfg, black_box(&profile)),
    ) else {
        return false;
    };
    for k in 0..black_box(256u32) {
        let t_ms = black_box(u64::from(k) * 30_000);
        let (a, b, c) = (probe_f32(k, 1), probe_f32(k, 2), probe_f32(k, 3));
        if ctrl.is_held() {
            black_box(ctrl.held(t_ms));
        } else {
            black_box(ctrl.update(black_box(&Observation::Feedback {
                t_ms,
                tx: Dbm(a),
                rssi: Dbm(b),
                noise: Dbm(c),
                snr: None,
            })));
        }
        let rec = LogRecord {
            t_ms,
            tx_dbm: Some(a),
            rssi_dbm: Some(b),
            noise_dbm: Some(c),
            rate: Some(black_box((k % 7) as u8)),
        };
        black_box(replay.step(black_box(&rec)));
    }
    let s = replay.summary();
    black_box((
        s.charge_per_delivered_uc(),
        s.delivered_fraction(),
        s.rate_share(black_box(2)),
    ));
    let mut w = match AirtimeWindow::new(probe_f32(5, 5)) {
        Ok(w) => w,
        Err(_) => return true,
    };
    for k in 0..black_box(128u32) {
        w.advance(black_box(u64::from(k) * 7_000));
        if w.fits(black_box(k * 1000)) {
            w.add(black_box(k * 1000));
        }
    }
    black_box(w.used_us());
    true
}

/// The energy functions on arbitrary inputs (any f32 bits, any integer).
#[inline(never)]
fn energy() -> bool {
    let mut tally = EnergyTally::new();
    for k in 0..black_box(256u32) {
        let (a, b, c) = (probe_f32(k, 4), probe_f32(k, 5), probe_f32(k, 6));
        let mut table = TxCurrentTable::<4>::new();
        for lane in 0..black_box(5u32) {
            black_box(
                table
                    .push(Dbm(probe_f32(k, lane)), Milliamps(probe_f32(k, lane + 7)))
                    .ok(),
            );
        }
        let profile = EnergyProfile::new(
            Volts(a),
            table,
            Milliseconds(b),
            Milliseconds(c),
            Milliamps(a),
            Microcoulombs(b),
            Microamps(c),
        )
        .and_then(|p| {
            p.with_refinements(Refinements {
                usable_fraction: Some(a),
                self_discharge_per_year: Some(b),
                sleep_outside_active: k % 2 == 0,
            })
        })
        .map(|p| match Battery::new(MilliampHours(c)) {
            Ok(bat) => p.with_battery(bat),
            Err(_) => p,
        });
        let p = Dbm(probe_f32(k, 8));
        let loss = probe_f32(k, 9);
        let retries = black_box((k % 256) as u8);
        if let Ok(profile) = black_box(profile) {
            if let Ok(cost) = profile.packet_cost(p) {
                tally.add(
                    u64::from(k) * 1000,
                    &cost,
                    profile.sleep_current(),
                    Some(k % 3 == 0),
                );
            }
            black_box(profile.charge_per_delivered(p, loss, retries).ok());
            let mean = profile.mean_current_with_resends(p, Seconds(a), loss, retries);
            black_box(mean.and_then(|i| profile.battery_life(i)).ok());
        }
        black_box(Delivery::new(loss, retries).ok());
        let chirp = ChirpModem {
            spreading_factor: black_box((k % 16) as u8),
            bandwidth: Hertz(a),
            coding_rate: black_box((k % 6) as u8),
            preamble_symbols: black_box((k * 7) as u16),
            explicit_header: k % 2 == 0,
            crc: k % 3 == 0,
            low_data_rate: [LowDataRate::Auto, LowDataRate::On, LowDataRate::Off]
                .get((k % 3) as usize)
                .copied()
                .unwrap_or(LowDataRate::Auto),
        };
        black_box(chirp.airtime(black_box((k * 13) as u8)).ok());
        let packet = PacketModem {
            bit_rate: b,
            preamble_bits: black_box((k * 31) as u16),
            sync_bits: black_box((k * 5) as u16),
            header_bits: black_box((k * 3) as u16),
            crc_bits: black_box((k * 11) as u16),
            coding: CodeRate {
                k: black_box((k % 5) as u8),
                n: black_box((k % 9) as u8),
            },
        };
        black_box(packet.airtime(black_box((k * 977) as u16)).ok());
        black_box(duty_cycle(Milliseconds(a), Seconds(b)).ok());
        black_box(min_interval(Milliseconds(a), c).ok());
        black_box(en_300_220_sub_bands(Hertz(a), Hertz(b)).count());
    }
    let mut merged = EnergyTally::new();
    merged.merge(black_box(&tally));
    black_box((
        merged.charge_per_packet(),
        merged.charge_per_delivered(),
        merged.mean_current(),
    ));
    true
}
