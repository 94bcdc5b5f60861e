//! The budget and energy functions a firmware calls: path loss, link
//! margin, time on air, charge per packet, mean current and battery life.
//! Each builds the engine's types from a C struct and calls the engine; an
//! input the engine refuses gives its status code.

use headroom::budget::{FadeAllowance, Link, NoiseSpec, Requirement, Side};
use headroom::energy::{
    Battery, ChirpModem, CodeRate, EnergyProfile, LowDataRate, Microamps, Microcoulombs,
    MilliampHours, Milliamps, Milliseconds, PacketModem, Seconds, TxCurrentTable, Volts, TX_POINTS,
};
use headroom::propagation::{free_space_path_loss, log_distance};
use headroom::units::{Db, Dbm, Hertz, Metres};

use crate::headroom_status;
use crate::state::{call, input, required_output};

/// Free-space path loss between isotropic antennas, dB (ITU-R P.525), to
/// `loss_db`. A distance below one wavelength is refused.
///
/// # Safety
/// `loss_db` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_free_space_path_loss(
    frequency_hz: f32,
    distance_m: f32,
    loss_db: *mut f32,
) -> headroom_status {
    call(|| {
        let l = free_space_path_loss(Hertz(frequency_hz), Metres(distance_m))?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(loss_db, l.0) }
    })
}

/// Log-distance path loss, dB, to `loss_db`: the loss at `reference_m`
/// (`reference_loss_db` when `has_reference_loss` is non-zero, else free
/// space there) plus `10·exponent·log10(d / reference)`; `distance_m` must
/// be at least `reference_m` and the exponent within the engine's range.
///
/// # Safety
/// `loss_db` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_log_distance_path_loss(
    frequency_hz: f32,
    distance_m: f32,
    reference_m: f32,
    reference_loss_db: f32,
    has_reference_loss: u8,
    exponent: f32,
    loss_db: *mut f32,
) -> headroom_status {
    call(|| {
        let l = log_distance(
            Hertz(frequency_hz),
            Metres(distance_m),
            Metres(reference_m),
            (has_reference_loss != 0).then_some(Db(reference_loss_db)),
            exponent,
        )?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(loss_db, l.0) }
    })
}

/// A point-to-point link: powers and gains in, the margin out.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_link {
    /// Power at the transmitter output, dBm.
    pub tx_power_dbm: f32,
    /// Transmit antenna gain less cable losses, dB.
    pub tx_gain_db: f32,
    /// Path loss, dB (positive).
    pub path_loss_db: f32,
    /// Receive antenna gain, dB.
    pub rx_gain_db: f32,
    /// Noise bandwidth, Hz.
    pub bandwidth_hz: f32,
    /// Receiver noise figure, dB.
    pub noise_figure_db: f32,
    /// SNR (carrier-to-noise) the receiver needs, dB.
    pub required_snr_db: f32,
    /// Fade allowance on top of it, dB (0: none).
    pub fade_margin_db: f32,
}

/// What a link gives (the engine's `budget::Link::evaluate`; the antenna
/// sees 290 K).
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_link_result {
    /// EIRP, dBm.
    pub eirp_dbm: f32,
    /// Power at the receiver input, dBm.
    pub rx_power_dbm: f32,
    /// Noise power in the bandwidth, dBm.
    pub noise_power_dbm: f32,
    /// Sensitivity: noise power + required SNR, dBm.
    pub sensitivity_dbm: f32,
    /// SNR at the receiver, dB.
    pub snr_db: f32,
    /// What is left: SNR − required SNR − fade allowance, dB.
    pub margin_db: f32,
}

/// Evaluate `link`; the figures to `result`.
///
/// # Safety
/// `link` points to a `headroom_link`; `result` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_link_margin(
    link: *const headroom_link,
    result: *mut headroom_link_result,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let l = unsafe { input(link) }?;
        let mut budget = Link::<2>::new(
            Dbm(l.tx_power_dbm),
            Db(l.path_loss_db),
            NoiseSpec {
                bandwidth: Hertz(l.bandwidth_hz),
                noise_figure: Db(l.noise_figure_db),
                antenna_temperature: None,
            },
            Requirement::CarrierToNoise(Db(l.required_snr_db)),
            FadeAllowance::Fixed(Db(l.fade_margin_db)),
        );
        let invalid = |_| headroom_status::HEADROOM_ERR_INVALID_INPUT;
        budget
            .push("tx antenna", Side::Transmitter, Db(l.tx_gain_db))
            .map_err(invalid)?;
        budget
            .push("rx antenna", Side::Receiver, Db(l.rx_gain_db))
            .map_err(invalid)?;
        let r = budget.evaluate()?;
        let out = headroom_link_result {
            eirp_dbm: r.eirp.0,
            rx_power_dbm: r.rx_power.0,
            noise_power_dbm: r.noise_power.0,
            sensitivity_dbm: r.sensitivity.0,
            snr_db: r.cn.0,
            margin_db: r.margin.0,
        };
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(result, out) }
    })
}

/// `headroom_chirp_modem.low_data_rate`: on when a symbol lasts more than 16 ms.
pub const HEADROOM_LOW_DATA_RATE_AUTO: u8 = 0;
/// `headroom_chirp_modem.low_data_rate`: always on.
pub const HEADROOM_LOW_DATA_RATE_ON: u8 = 1;
/// `headroom_chirp_modem.low_data_rate`: always off.
pub const HEADROOM_LOW_DATA_RATE_OFF: u8 = 2;

/// A chirp spread spectrum modem.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_chirp_modem {
    /// Bandwidth, Hz.
    pub bandwidth_hz: f32,
    /// Programmed preamble symbols.
    pub preamble_symbols: u16,
    /// Spreading factor, 6..12.
    pub spreading_factor: u8,
    /// Coding rate 1..4 (4/5..4/8).
    pub coding_rate: u8,
    /// Non-zero: explicit header.
    pub explicit_header: u8,
    /// Non-zero: payload CRC on.
    pub crc: u8,
    /// One of `HEADROOM_LOW_DATA_RATE_*`.
    pub low_data_rate: u8,
}

/// Time on air of a payload of `payload_bytes` with a chirp modem, ms, to
/// `airtime_ms`.
///
/// # Safety
/// `modem` points to a `headroom_chirp_modem`; `airtime_ms` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_airtime_chirp(
    modem: *const headroom_chirp_modem,
    payload_bytes: u8,
    airtime_ms: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let m = unsafe { input(modem) }?;
        let low_data_rate = match m.low_data_rate {
            HEADROOM_LOW_DATA_RATE_AUTO => LowDataRate::Auto,
            HEADROOM_LOW_DATA_RATE_ON => LowDataRate::On,
            HEADROOM_LOW_DATA_RATE_OFF => LowDataRate::Off,
            _ => return Err(headroom_status::HEADROOM_ERR_UNSUPPORTED),
        };
        let modem = ChirpModem {
            spreading_factor: m.spreading_factor,
            bandwidth: Hertz(m.bandwidth_hz),
            coding_rate: m.coding_rate,
            preamble_symbols: m.preamble_symbols,
            explicit_header: m.explicit_header != 0,
            crc: m.crc != 0,
            low_data_rate,
        };
        let t = modem.airtime(payload_bytes)?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(airtime_ms, t.0) }
    })
}

/// A generic packet modem (FSK, GFSK, O-QPSK, ...).
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_packet_modem {
    /// Bit rate on air before coding, bit/s.
    pub bit_rate: f32,
    /// Preamble, bits.
    pub preamble_bits: u16,
    /// Sync word, bits.
    pub sync_bits: u16,
    /// Header, bits.
    pub header_bits: u16,
    /// CRC, bits.
    pub crc_bits: u16,
    /// FEC code rate k/n on header, payload and CRC (1/1: none).
    pub coding_k: u8,
    /// FEC code rate k/n on header, payload and CRC (1/1: none).
    pub coding_n: u8,
}

/// Time on air of a payload of `payload_bytes` with a packet modem, ms, to
/// `airtime_ms`.
///
/// # Safety
/// `modem` points to a `headroom_packet_modem`; `airtime_ms` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_airtime_packet(
    modem: *const headroom_packet_modem,
    payload_bytes: u16,
    airtime_ms: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let m = unsafe { input(modem) }?;
        let modem = PacketModem {
            bit_rate: m.bit_rate,
            preamble_bits: m.preamble_bits,
            sync_bits: m.sync_bits,
            header_bits: m.header_bits,
            crc_bits: m.crc_bits,
            coding: CodeRate {
                k: m.coding_k,
                n: m.coding_n,
            },
        };
        let t = modem.airtime(payload_bytes)?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(airtime_ms, t.0) }
    })
}

/// Most points of a transmit current table.
pub const HEADROOM_TX_POINTS: usize = 16;

const _: () = assert!(HEADROOM_TX_POINTS == TX_POINTS);

/// One point of the transmit current table.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_tx_point {
    /// Output power, dBm.
    pub power_dbm: f32,
    /// Supply current at that power, mA.
    pub current_ma: f32,
}

/// A radio's energy profile: what each packet costs, and the battery.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_energy_profile {
    /// Transmit current against output power, strictly increasing in power;
    /// between points linear in mA against dBm, outside them refused.
    pub tx_points: [headroom_tx_point; HEADROOM_TX_POINTS],
    /// Points used in `tx_points`.
    pub tx_point_count: u32,
    /// Supply voltage, V.
    pub supply_v: f32,
    /// Time on air of one packet, ms.
    pub airtime_ms: f32,
    /// Receive window after each packet, ms.
    pub rx_window_ms: f32,
    /// Receive current, mA.
    pub rx_current_ma: f32,
    /// Fixed charge per packet (wake-up, sensor, processor), µC.
    pub per_packet_uc: f32,
    /// Sleep current, µA.
    pub sleep_current_ua: f32,
    /// Nominal battery capacity, mAh (`has_battery`).
    pub battery_mah: f32,
    /// Non-zero: the profile has a battery.
    pub has_battery: u8,
}

pub(crate) fn profile(p: &headroom_energy_profile) -> Result<EnergyProfile, headroom_status> {
    let n = usize::try_from(p.tx_point_count).unwrap_or(usize::MAX);
    if n > HEADROOM_TX_POINTS {
        return Err(headroom_status::HEADROOM_ERR_TABLE_FULL);
    }
    let mut table = TxCurrentTable::new();
    for pt in p.tx_points.iter().take(n) {
        table.push(Dbm(pt.power_dbm), Milliamps(pt.current_ma))?;
    }
    if table.points().is_empty() {
        return Err(headroom_status::HEADROOM_ERR_TABLE_EMPTY);
    }
    let prof = EnergyProfile::new(
        Volts(p.supply_v),
        table,
        Milliseconds(p.airtime_ms),
        Milliseconds(p.rx_window_ms),
        Milliamps(p.rx_current_ma),
        Microcoulombs(p.per_packet_uc),
        Microamps(p.sleep_current_ua),
    )?;
    Ok(if p.has_battery != 0 {
        prof.with_battery(Battery::new(MilliampHours(p.battery_mah))?)
    } else {
        prof
    })
}

/// Charge of one packet sent at `tx_dbm`, µC, to `charge_uc`:
/// transmission, receive window and the fixed charge per packet.
///
/// # Safety
/// `p` points to a `headroom_energy_profile`; `charge_uc` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_charge_per_packet(
    p: *const headroom_energy_profile,
    tx_dbm: f32,
    charge_uc: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let prof = profile(unsafe { input(p) }?)?;
        let q = prof.charge_per_packet(Dbm(tx_dbm))?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(charge_uc, q.0) }
    })
}

/// Mean supply current sending one packet at `tx_dbm` every `interval_s`
/// seconds, µA, to `current_ua`.
///
/// # Safety
/// `p` points to a `headroom_energy_profile`; `current_ua` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_mean_current(
    p: *const headroom_energy_profile,
    tx_dbm: f32,
    interval_s: f32,
    current_ua: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let prof = profile(unsafe { input(p) }?)?;
        let i = prof.mean_current(Dbm(tx_dbm), Seconds(interval_s))?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(current_ua, i.0) }
    })
}

/// Days until the profile's battery is spent at a mean current of
/// `mean_current_ua`, to `days` (`HEADROOM_ERR_NO_SOLUTION` without a battery).
///
/// # Safety
/// `p` points to a `headroom_energy_profile`; `days` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_battery_life(
    p: *const headroom_energy_profile,
    mean_current_ua: f32,
    days: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let prof = profile(unsafe { input(p) }?)?;
        let d = prof.battery_life(Microamps(mean_current_ua))?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(days, d.0) }
    })
}
