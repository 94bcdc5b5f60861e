//! The demo's invented link and radio: a soil-moisture node on a cart that
//! goes up and down the rows of an orchard, 150 to 700 m from its
//! gateway, at 868 MHz. All numbers are made up for the demo; they are
//! plausible for a sub-GHz node, not any product's data.

use headroom::control::{ControllerConfig, DutyLimit, PowerSteps};
use headroom::energy::{Battery, EnergyProfile, TableError};
use headroom::propagation::PathLossModel;
use headroom::rate::{RateError, RateTable};
use headroom::sim::{
    ChannelConfig, Episodes, FastFading, NoiseFloor, PathLossStep, Shadowing, Trajectory,
};
use headroom::units::{Db, Dbi, Dbm, Hertz, Metres, MilliampHours};

use crate::radio::PowerCapabilities;

/// Seed of the demo's channel: the same seed gives the same run on every
/// target and on the host.
pub const SEED: u64 = 0x6f72_6368_6172_6431;

/// Packets the live demo sends.
pub const PACKETS: u32 = 600;

/// The node's radio: −9 to +22 dBm in 1 dB steps.
pub const RADIO: PowerCapabilities = PowerCapabilities {
    min: Dbm(-9.0),
    max: Dbm(22.0),
    steps: PowerSteps::Uniform(Db(1.0)),
};

/// Gain of the gateway's antenna (a collinear on the barn roof).
pub const GATEWAY_ANTENNA: Dbi = Dbi(5.0);

/// The controller: the engine's sub-GHz node settings with this radio's
/// range and steps and the gateway's antenna.
pub fn controller_config(radio: &PowerCapabilities) -> ControllerConfig {
    let mut cfg = ControllerConfig::sub_ghz_node();
    cfg.min_tx_dbm = radio.min;
    cfg.max_tx_dbm = radio.max;
    cfg.steps = radio.steps;
    cfg.far_antenna_gain_dbi = GATEWAY_ANTENNA;
    cfg
}

/// The live demo's link with rates in play: the same trees and trailer,
/// farther out (2 km, driving away at 1.5 m/s, 1.2 to 4 km), where the
/// rate matters; reception is the radio's, by the rate's required SNR.
pub fn rate_channel() -> ChannelConfig {
    let mut c = channel();
    c.trajectory = Trajectory {
        start: Metres(2000.0),
        speed_m_per_s: 1.5,
        min: Some(Metres(1200.0)),
        max: Some(Metres(4000.0)),
    };
    c.min_snr = None;
    c
}

/// The rates of the live demo's radio: the engine's invented demo node
/// ([`headroom::energy::demo::demo_rates`]: chirp spread spectrum at
/// 125 kHz, spreading factors 7, 8, 9, 10 and 12).
pub fn rates() -> Result<RateTable, EnergySetupError> {
    headroom::energy::demo::demo_rates().map_err(EnergySetupError::Rate)
}

/// The live demo's controller with its rates: the required SNR is each
/// rate's, and the airtime budget is 10 % of any hour (the EN 300 220
/// sub-band at 869.40–869.65 MHz, from memory: check the rules that
/// apply).
pub fn controller_config_with_rates(
    radio: &PowerCapabilities,
    rates: RateTable,
) -> ControllerConfig {
    let mut cfg = controller_config(radio);
    if let Some(first) = rates.get(0) {
        cfg.required_snr_db = first.required_snr;
    }
    cfg.rates = rates;
    cfg.duty_limit = DutyLimit::AtMost(0.1);
    cfg
}

/// The orchard link.
pub fn channel() -> ChannelConfig {
    let mut steps = heapless::Vec::new();
    // A loaded trailer parks between cart and gateway for a while.
    let _ = steps.push(PathLossStep {
        at_packet: 300,
        change: Db(10.0),
    });
    let _ = steps.push(PathLossStep {
        at_packet: 360,
        change: Db(-10.0),
    });
    ChannelConfig {
        frequency: Hertz(868.0e6),
        // Free space to 1 m, then exponent 3.2 through the trees.
        path_loss: PathLossModel::LogDistance {
            d0: Metres(1.0),
            pl_d0: None,
            exponent: 3.2,
        },
        tx_antenna_gain: Dbi(2.15),
        rx_antenna_gain: GATEWAY_ANTENNA,
        trajectory: Trajectory {
            start: Metres(300.0),
            speed_m_per_s: 1.5,
            min: Some(Metres(150.0)),
            max: Some(Metres(700.0)),
        },
        packet_interval_ms: 2_000,
        start_ms: 0,
        shadowing: Some(Shadowing {
            sigma: Db(3.0),
            decorrelation_distance: Metres(40.0),
            time_constant_s: None,
        }),
        fading: FastFading::Rician { k_db: 9.0 },
        fading_correlation: 0.3,
        noise: NoiseFloor {
            mean: Dbm(-117.0),
            jitter: Db(0.5),
            bursts: Some(Episodes {
                rate_per_hour: 4.0,
                mean_duration_s: 30.0,
            }),
            burst_rise: Db(8.0),
        },
        min_snr: Some(Db(8.0)),
        feedback_dropouts: Some(Episodes {
            rate_per_hour: 3.0,
            mean_duration_s: 10.0,
        }),
        report_resolution: Some(Db(1.0)),
        steps,
    }
}

/// Points of the demo radio's transmit current table.
pub const TX_POINTS: usize = headroom::energy::demo::DEMO_TX_POINTS;

/// The demo radio's energy profile, invented for the demo (plausible for a
/// sub-GHz node with a +22 dBm amplifier, not any product's data): supply
/// current against output power over the radio's whole range, a chirp
/// spread spectrum packet of 20 bytes at SF9 / 125 kHz, a 160 ms receive
/// window, 900 µC of wake-up and sensor work per packet, 1.8 µA asleep, and
/// a 3000 mAh battery.
pub fn energy_profile() -> Result<EnergyProfile<TX_POINTS>, EnergySetupError> {
    let profile = headroom::energy::demo::demo_profile().map_err(EnergySetupError::Engine)?;
    let battery = Battery::new(MilliampHours(3000.0)).map_err(EnergySetupError::Engine)?;
    Ok(profile.with_battery(battery))
}

/// Why the demo's energy profile was refused.
#[derive(Debug, Clone, Copy, PartialEq, defmt::Format)]
pub enum EnergySetupError {
    /// The transmit current table.
    Table(TableError),
    /// A value of the profile or the modem.
    Engine(headroom::Error),
    /// A rate of the demo's table.
    Rate(RateError),
}
