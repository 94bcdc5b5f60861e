//! Live demo: a packet loop over the simulated orchard link. Before each
//! packet the engine's controller chooses the rate and the power within a
//! duty-cycle budget; the simulated radio honours the rate (its airtime and
//! its required SNR). Every decision is logged with defmt (decode with
//! `defmt-print -e ELF`), every rate change on a line of its own, and a
//! summary ends the run.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use defmt_semihosting as _;
use embedded_hal::delay::DelayNs;

use headroom::control::{Controller, Observation, Outcome, Reason, ReplayStep, Summary};
use headroom::energy::{ChargeTable, EnergyTally, Microcoulombs, Milliseconds, PacketCost};
use headroom::record::LogRecord;
use headroom::units::Seconds;
use headroom_firmware_demo::clock::{Clock, Delay};
use headroom_firmware_demo::radio::{Radio, SimRadio};
use headroom_firmware_demo::{board, host, scenario};

/// Readings in the controller's window.
const WINDOW: usize = 32;

/// Real time between packets in the demo, ms (the simulated link's own
/// time base runs at its packet interval; this only paces the loop).
const PACKET_GAP_MS: u32 = 1;

#[entry]
fn main() -> ! {
    headroom_firmware_demo::stack::paint();
    let ok = run();
    host::exit(ok)
}

fn run() -> bool {
    let Some(p) = cortex_m::Peripherals::take() else {
        defmt::error!("peripherals already taken");
        return false;
    };
    let clock = Clock::new(p.SYST);
    let mut delay = Delay::new(&clock);

    let rates = match scenario::rates() {
        Ok(r) => r,
        Err(e) => {
            defmt::error!("rate table refused: {}", e);
            return false;
        }
    };
    let mut radio = match SimRadio::new(scenario::rate_channel(), scenario::SEED, scenario::RADIO) {
        Ok(r) => r.with_rates(rates),
        Err(e) => {
            defmt::error!("channel refused: {}", e);
            return false;
        }
    };
    let energy = match scenario::energy_profile() {
        Ok(e) => e,
        Err(e) => {
            defmt::error!("energy profile refused: {}", e);
            return false;
        }
    };
    let charge = match ChargeTable::from_profile(&energy) {
        Ok(c) => c,
        Err(e) => {
            defmt::error!("energy profile refused: {}", e);
            return false;
        }
    };
    let caps = radio.capabilities();
    let cfg = scenario::controller_config_with_rates(&caps, rates);
    let mut ctrl = match Controller::<WINDOW>::with_charge(cfg, Some(charge)) {
        Ok(c) => c,
        Err(e) => {
            defmt::error!("controller settings refused: {}", e);
            return false;
        }
    };
    let (bottom, top) = ctrl.limits();
    defmt::info!(
        "live demo on {=str}: {=u32} packets, levels {=f32}..{=f32} dBm, window {=usize}, {=usize} rates, duty limit 10 %",
        board::BOARD,
        scenario::PACKETS,
        bottom.0,
        top.0,
        WINDOW,
        rates.len()
    );
    let name = |m: Option<u8>| {
        m.and_then(|m| rates.get(m))
            .map_or("-", |r| r.name.as_str())
    };

    // The engine's replay totals count packets, losses, power, rates and
    // charge the same way for the live loop as for a replayed log; its
    // energy tally adds up the charge of each packet at the power and the
    // rate it was sent.
    let mut summary = Summary::new(top);
    let mut tally = EnergyTally::new();
    for k in 0..scenario::PACKETS {
        let chosen = ctrl.tx();
        let rate = ctrl.rate();
        let at_max = ctrl.at_top();
        if ctrl.is_held() {
            // No rate fits the duty budget: the slot passes unsent.
            let t = match radio.skip() {
                Ok(t) => t,
                Err(e) => {
                    defmt::error!("packet {=u32}: the link failed: {}", k, e);
                    return false;
                }
            };
            let d = ctrl.held(t);
            let wake = PacketCost {
                charge: energy.per_packet(),
                radio_charge: Microcoulombs(0.0),
                airtime: Milliseconds(0.0),
            };
            tally.add(t, &wake, energy.sleep_current(), Some(false));
            summary.add(
                &LogRecord {
                    t_ms: t,
                    ..LogRecord::default()
                },
                &ReplayStep {
                    t_ms: t,
                    chosen,
                    replayed_snr: None,
                    outcome: Outcome::Held,
                    logged_lost: None,
                    at_max,
                    path_loss_estimate: d.path_loss(),
                    margin: d.margin(),
                    reason: d.reason,
                    next_tx: d.tx,
                    rate,
                    next_rate: d.rate,
                    next_held: d.held,
                    airtime_us: Some(0),
                    charge: Some(energy.per_packet()),
                },
            );
            defmt::info!(
                "pkt {=u32} t={=u64}ms held by the duty budget -> {=f32}dBm {=str} {}",
                k,
                t,
                d.tx.0,
                name(d.rate),
                d.reason
            );
            continue;
        }
        if let Err(e) = radio.set_tx_power(chosen) {
            defmt::error!(
                "packet {=u32}: radio refused {=f32} dBm: {}",
                k,
                chosen.0,
                e
            );
            return false;
        }
        let airtime_us = match radio.set_rate(rate.unwrap_or(0)) {
            Ok(a) => a,
            Err(e) => {
                defmt::error!("packet {=u32}: radio refused the rate: {}", k, e);
                return false;
            }
        };
        if let Err(e) = radio.send(&k.to_le_bytes()) {
            defmt::error!("packet {=u32}: send failed: {}", k, e);
            return false;
        }
        delay.delay_ms(PACKET_GAP_MS);
        let obs = match radio.feedback() {
            Ok(o) => o,
            Err(e) => {
                defmt::error!("packet {=u32}: no feedback: {}", k, e);
                return false;
            }
        };
        let d = ctrl.update(&obs);
        let (outcome, snr) = match obs {
            Observation::Feedback {
                rssi, noise, snr, ..
            } => (Outcome::Delivered, Some(snr.unwrap_or(rssi - noise))),
            Observation::Acked { .. } => (Outcome::Delivered, None),
            Observation::Lost { .. } => (Outcome::Lost, None),
            Observation::Beacon { .. } | Observation::Missing { .. } => (Outcome::Unjudged, None),
        };
        let air = Milliseconds(airtime_us as f32 / 1000.0);
        let cost = match energy.packet_cost_for(chosen, air) {
            Ok(cost) => cost,
            Err(e) => {
                defmt::error!("packet {=u32}: no charge at {=f32} dBm: {}", k, chosen.0, e);
                return false;
            }
        };
        tally.add(
            obs.t_ms(),
            &cost,
            energy.sleep_current(),
            match outcome {
                Outcome::Delivered => Some(true),
                Outcome::Lost => Some(false),
                Outcome::Unjudged | Outcome::Held => None,
            },
        );
        // The packet as this device would log it: sent at `chosen`.
        let sent = LogRecord {
            t_ms: obs.t_ms(),
            tx_dbm: Some(chosen.0),
            rate,
            ..LogRecord::default()
        };
        summary.add(
            &sent,
            &ReplayStep {
                t_ms: obs.t_ms(),
                chosen,
                replayed_snr: snr,
                outcome,
                logged_lost: None,
                at_max,
                path_loss_estimate: d.path_loss(),
                margin: d.margin(),
                reason: d.reason,
                next_tx: d.tx,
                rate,
                next_rate: d.rate,
                next_held: d.held,
                airtime_us: Some(airtime_us),
                charge: Some(cost.charge),
            },
        );
        defmt::info!(
            "pkt {=u32} t={=u64}ms tx={=f32}dBm {=str} {} snr={} -> {=f32}dBm {} margin={=f32}dB",
            k,
            obs.t_ms(),
            chosen.0,
            name(rate),
            outcome,
            snr.map(|s| s.0),
            d.tx.0,
            d.reason,
            d.margin().0
        );
        if d.rate != rate {
            let r: Reason = d.reason;
            defmt::info!("rate {=str} -> {=str}: {}", name(rate), name(d.rate), r);
        }
    }

    let loss = summary.outage_fraction().unwrap_or(0.0);
    let mean = summary.mean_tx_dbm().map_or(f32::NAN, |m| m.0);
    let saved_db = summary.saving_vs_max_db().map_or(0.0, |s| s.0);
    // Fraction of the always-at-maximum radiated energy that was not spent.
    let saved_fraction = 1.0 - libm::exp10f(-saved_db / 10.0);
    defmt::info!(
        "summary: {=u64} packets, {=u64} lost ({=f32} %), mean power {=f32} dBm, \
         always-max {=f32} dBm, energy saved {=f32} dB ({=f32} % of always-max), {=u64} power changes",
        summary.records,
        summary.lost,
        loss * 100.0,
        mean,
        top.0,
        saved_db,
        saved_fraction * 100.0,
        summary.power_changes
    );
    let share = |m: u8| summary.rate_share(m).unwrap_or(0.0) * 100.0;
    defmt::info!(
        "rates: {=u64} changes, shares sf7 {=f32} %, sf8 {=f32} %, sf9 {=f32} %, sf10 {=f32} %, sf12 {=f32} %; {=u64} held by the duty budget, {=u64} duty-shaped decisions, {=f32} uC per delivered packet",
        summary.rate_changes,
        share(0),
        share(1),
        share(2),
        share(3),
        share(4),
        summary.held,
        summary.duty_limited,
        summary.charge_per_delivered_uc().map_or(f32::NAN, |c| c as f32)
    );
    // Charge and projected battery life of the controller against always
    // sending at the highest allowed power, at the demo's packet interval.
    let per_packet = tally.charge_per_packet().map_or(f32::NAN, |q| q.0);
    let per_delivered = tally.charge_per_delivered().map_or(f32::NAN, |q| q.0);
    let mean = tally.mean_current();
    let life = mean.and_then(|i| energy.battery_life(i).ok());
    let interval = Seconds(scenario::channel().packet_interval_ms as f32 / 1000.0);
    let max_mean = energy.mean_current(top, interval).ok();
    let max_life = max_mean.and_then(|i| energy.battery_life(i).ok());
    defmt::info!(
        "energy: {=f32} uC per packet, {=f32} uC per delivered packet, mean current {=f32} uA, \
         battery life {=f32} days (always-max: {=f32} uA, {=f32} days)",
        per_packet,
        per_delivered,
        mean.map_or(f32::NAN, |i| i.0),
        life.map_or(f32::NAN, |d| d.0),
        max_mean.map_or(f32::NAN, |i| i.0),
        max_life.map_or(f32::NAN, |d| d.0)
    );
    defmt::info!(
        "stack (differs by board): {=usize} of {=usize} bytes used",
        headroom_firmware_demo::stack::peak(),
        headroom_firmware_demo::stack::available()
    );
    true
}
