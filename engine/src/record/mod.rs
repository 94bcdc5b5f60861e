//! Field-log records and their framed binary codec.
//!
//! A [`LogRecord`] is one packet as a device logged it: when it was sent, at
//! what power, and what the far end reported. The same type feeds the host
//! replay, the firmware's replay-on-target and the tests.

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
}
