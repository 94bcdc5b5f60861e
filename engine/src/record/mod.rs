//! Field-log records and their framed binary codec.
//!
//! A [`LogRecord`] is one packet as a device logged it: when it was sent, at
//! what power, and what the far end reported. The same type feeds the host
//! replay, the firmware's replay-on-target and the tests.
//!
//! A log may start with a [`LogHeader`] (which device, its radio limits, the
//! time base). A firmware replaying a log on target writes one
//! [`DecisionRecord`] per packet.
//!
//! With the `serde` feature, [`codec`] writes and reads these as framed binary
//! (CRC-32C, COBS, 0x00 delimiter; format 1 a postcard body per record,
//! format 2 blocks of records stored as differences); the byte layout is
//! described in `docs/log-format.md`. [`crc`] holds the checksum, which is
//! always available.

use crate::rate::RateTable;
use crate::units::{Db, Dbi, Dbm};

pub mod crc;

#[cfg(feature = "serde")]
pub mod codec;

/// The noise floor, dBm, of a packet logged with its RSSI and SNR instead:
/// SNR = signal − noise in dB, so noise = RSSI − SNR (common practice). It
/// takes the RSSI as the signal's power; a radio whose RSSI includes the
/// noise reads a noise floor up to 3 dB high at an SNR of 0 dB, more below.
///
/// ```
/// assert_eq!(headroom::record::noise_from_snr(-100.0, 7.5), -107.5);
/// ```
pub fn noise_from_snr(rssi_dbm: f32, snr_db: f32) -> f32 {
    rssi_dbm - snr_db
}

/// One logged packet. `None` is a reading that was not logged (an empty CSV
/// cell): such a record cannot be judged by a replay.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct LogRecord {
    /// Time of the packet in milliseconds on the log's time base.
    pub t_ms: u64,
    /// Transmit power used for this packet, dBm.
    pub tx_dbm: Option<f32>,
    /// Received power of this packet at the far end, dBm.
    pub rssi_dbm: Option<f32>,
    /// Noise floor at the far end when this packet was received, dBm.
    pub noise_dbm: Option<f32>,
    /// Index, in the log header's rate table, of the rate this packet was
    /// sent at; `None` when the log does not say (since format 1.2).
    pub rate: Option<u8>,
}

/// What a log says about the device that wrote it. Every radio field is
/// optional: `None` means the log does not say.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LogHeader {
    /// Identifier of the logging device (its serial number, or 0 if unknown).
    pub device_id: u64,
    /// Unix time in milliseconds of `t_ms = 0` in this log; 0 if unknown.
    pub epoch_ms: u64,
    /// Lowest transmit power the radio can be set to.
    pub min_tx: Option<Dbm>,
    /// Highest transmit power the radio can be set to.
    pub max_tx: Option<Dbm>,
    /// Step between settable transmit powers.
    pub tx_step: Option<Db>,
    /// Gain of the device's antenna.
    pub antenna_gain: Option<Dbi>,
    /// SNR below which the far end loses a packet (its demodulator's
    /// requirement at the rate the device uses); since format 1.1.
    pub required_snr: Option<Db>,
    /// Regulatory EIRP cap the device was installed under; since format 1.1.
    pub eirp_cap: Option<Dbm>,
    /// The radio's data rates (empty when the log does not say); a record's
    /// `rate` indexes it. Since format 1.2.
    pub rates: RateTable,
}

/// One decision of a controller replaying a log on target.
///
/// `outcome` and `reason` are the `u8` codes of the controller's outcome and
/// reason enums (defined in [`crate::control`]); this module stores them
/// without interpreting them, so a log written by a newer controller still
/// decodes.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DecisionRecord {
    /// Time of the packet in milliseconds on the log's time base.
    pub t_ms: u64,
    /// Transmit power chosen for the packet, dBm.
    pub tx_dbm: f32,
    /// Outcome code of the decision.
    pub outcome: u8,
    /// Reason code of the decision.
    pub reason: u8,
    /// Index, in the rate table in force, of the rate chosen for the packet;
    /// `None` without a rate table (since format 1.2).
    pub rate: Option<u8>,
}
