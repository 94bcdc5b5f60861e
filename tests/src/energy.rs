//! f64 reference: charge per packet, mean current, battery life, resends,
//! airtime and duty cycle.
//!
//! Written from the formulas, not from the engine, and in other forms where
//! the engine has a choice:
//!
//! | quantity | engine (f32) | reference (f64, here) |
//! |---|---|---|
//! | current between two table points | `a + (b − a)·(p − p0)/(p1 − p0)` | weighted mean `(a·(p1 − p) + b·(p − p0))/(p1 − p0)`, segment found by a scan from the top |
//! | expected attempts | term-by-term sum | closed form `(1 − p^{R+1})/(1 − p)` |
//! | chirp payload symbols | integer ceiling division | `f64::ceil` of the quotient, as the data sheet writes it |
//! | airtime | quarter-symbols · 2^SF / (4·BW) | `(n_preamble + 4.25 + n_payload) · 2^SF / BW` |

/// Hours in a year of 365.25 days.
pub const HOURS_PER_YEAR: f64 = 365.25 * 24.0;

/// Current at `p` from `(dBm, mA)` points sorted by increasing power;
/// `None` outside the table or for an unsorted table.
pub fn current_ma(table: &[(f64, f64)], p: f64) -> Option<f64> {
    if table.windows(2).any(|w| w[1].0 <= w[0].0) || table.is_empty() || !p.is_finite() {
        return None;
    }
    let (first, last) = (table[0], table[table.len() - 1]);
    if p < first.0 || p > last.0 {
        return None;
    }
    if table.len() == 1 {
        return Some(first.1);
    }
    // Scan from the highest segment down.
    for i in (1..table.len()).rev() {
        let (p0, a) = table[i - 1];
        let (p1, b) = table[i];
        if p >= p0 {
            return Some((a * (p1 - p) + b * (p - p0)) / (p1 - p0));
        }
    }
    None
}

/// The radio part of a packet, µC: `I_tx · airtime + I_rx · rx_window`
/// (mA · ms = µC).
pub fn radio_charge_uc(i_tx_ma: f64, airtime_ms: f64, i_rx_ma: f64, rx_window_ms: f64) -> f64 {
    i_tx_ma * airtime_ms + i_rx_ma * rx_window_ms
}

/// Charge per packet, µC.
pub fn charge_uc(
    i_tx_ma: f64,
    airtime_ms: f64,
    i_rx_ma: f64,
    rx_window_ms: f64,
    per_packet_uc: f64,
) -> f64 {
    radio_charge_uc(i_tx_ma, airtime_ms, i_rx_ma, rx_window_ms) + per_packet_uc
}

/// Mean current, µA: `q / interval + sleep`, or with the sleep current only
/// outside the active time `active_s`.
pub fn mean_current_ua(
    q_uc: f64,
    interval_s: f64,
    sleep_ua: f64,
    sleep_outside_active: Option<f64>,
) -> f64 {
    match sleep_outside_active {
        None => q_uc / interval_s + sleep_ua,
        Some(active_s) => q_uc / interval_s + sleep_ua * (interval_s - active_s) / interval_s,
    }
}

/// Battery life, days: `capacity · usable · 1000 / (mean + self-discharge) / 24`.
pub fn battery_days(
    capacity_mah: f64,
    mean_ua: f64,
    usable: Option<f64>,
    self_discharge_per_year: Option<f64>,
) -> f64 {
    let usable_uah = capacity_mah * 1000.0 * usable.unwrap_or(1.0);
    // Self-discharge as a constant current: capacity · s per year.
    let sd_ua = self_discharge_per_year.map_or(0.0, |s| capacity_mah * 1000.0 * s / HOURS_PER_YEAR);
    usable_uah / (mean_ua + sd_ua) / 24.0
}

/// Expected attempts and delivered fraction with loss `p` per attempt and at
/// most `r` resends (closed forms).
pub fn delivery(p: f64, r: u32) -> (f64, f64) {
    let pr = p.powi(r as i32 + 1);
    let attempts = if p == 0.0 {
        1.0
    } else {
        (1.0 - pr) / (1.0 - p)
    };
    (attempts, 1.0 - pr)
}

/// Charge per delivered packet: `(per_packet + radio · E) / D`.
pub fn charge_per_delivered_uc(radio_uc: f64, per_packet_uc: f64, p: f64, r: u32) -> f64 {
    let (e, d) = delivery(p, r);
    (per_packet_uc + radio_uc * e) / d
}

/// A chirp spread spectrum packet, as the SX1276/77/78/79 data sheet writes
/// its parameters.
#[derive(Debug, Clone, Copy)]
pub struct Chirp {
    /// Spreading factor.
    pub sf: u32,
    /// Bandwidth, Hz.
    pub bw_hz: f64,
    /// Coding rate 1..4 (4/5..4/8).
    pub cr: u32,
    /// Programmed preamble symbols.
    pub n_preamble: u32,
    /// Implicit header (IH = 1).
    pub implicit_header: bool,
    /// Payload CRC (CRC = 1).
    pub crc: bool,
    /// Low-data-rate optimisation (DE = 1); `None`: on above 16 ms symbols.
    pub low_data_rate: Option<bool>,
}

impl Chirp {
    /// Symbol time, s.
    pub fn t_sym(&self) -> f64 {
        2f64.powi(self.sf as i32) / self.bw_hz
    }

    /// DE.
    pub fn de(&self) -> bool {
        self.low_data_rate.unwrap_or(self.t_sym() > 16e-3)
    }

    /// Payload symbols.
    pub fn payload_symbols(&self, pl: u32) -> f64 {
        let num = 8.0 * pl as f64 - 4.0 * self.sf as f64 + 28.0 + 16.0 * b(self.crc)
            - 20.0 * b(self.implicit_header);
        let den = 4.0 * (self.sf as f64 - 2.0 * b(self.de()));
        8.0 + ((num / den).ceil() * (self.cr as f64 + 4.0)).max(0.0)
    }

    /// Time on air, ms.
    pub fn airtime_ms(&self, pl: u32) -> f64 {
        let t_preamble = (self.n_preamble as f64 + 4.25) * self.t_sym();
        (t_preamble + self.payload_symbols(pl) * self.t_sym()) * 1000.0
    }
}

fn b(x: bool) -> f64 {
    if x {
        1.0
    } else {
        0.0
    }
}

/// Time on air of a generic packet, ms: uncoded preamble and sync, then
/// header, payload and CRC coded at rate `k/n`.
#[allow(clippy::too_many_arguments)]
pub fn packet_airtime_ms(
    bit_rate: f64,
    preamble_bits: f64,
    sync_bits: f64,
    header_bits: f64,
    payload_bytes: f64,
    crc_bits: f64,
    k: f64,
    n: f64,
) -> f64 {
    let coded = ((header_bits + 8.0 * payload_bytes + crc_bits) * n / k).ceil();
    (preamble_bits + sync_bits + coded) / bit_rate * 1000.0
}

/// Duty cycle: airtime / interval.
pub fn duty_cycle(airtime_ms: f64, interval_s: f64) -> f64 {
    airtime_ms / 1000.0 / interval_s
}
