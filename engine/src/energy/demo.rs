//! An invented sub-GHz node for the demos: the firmware's live demo and the
//! replay on target of a log with rates use it, and the host-side check of
//! that replay (`cargo xtask firmware`) uses the same one. **Invented**, not
//! a product's data sheet.

use super::airtime::{ChirpModem, LowDataRate};
use super::{
    EnergyProfile, Microamps, Microcoulombs, Milliamps, Milliseconds, TxCurrentTable, Volts,
};
use crate::error::{Error, Result};
use crate::rate::{Rate, RateError, RateTable};
use crate::units::{Db, Hertz};

/// Points of the demo's transmit current table.
pub const DEMO_TX_POINTS: usize = 8;

/// The demo node's energy profile (invented): transmit current from 17 mA
/// at −9 dBm to 120 mA at +22 dBm, a 20-byte packet at spreading factor 9
/// and 125 kHz, a 160 ms receive window at 11.5 mA, 900 µC of wake-up and
/// sensor work per packet, 1.8 µA asleep.
pub fn demo_profile() -> Result<EnergyProfile<DEMO_TX_POINTS>> {
    let table = TxCurrentTable::from_points(&[
        (-9.0, 17.0),
        (0.0, 19.5),
        (5.0, 24.5),
        (10.0, 30.0),
        (14.0, 44.0),
        (17.0, 75.0),
        (20.0, 100.0),
        (22.0, 120.0),
    ])
    .map_err(|_| Error::NoSolution("tx_current_ma"))?;
    EnergyProfile::new(
        Volts(3.3),
        table,
        chirp(9).airtime(20)?,
        Milliseconds(160.0),
        Milliamps(11.5),
        Microcoulombs(900.0),
        Microamps(1.8),
    )
}

fn chirp(sf: u8) -> ChirpModem {
    ChirpModem {
        spreading_factor: sf,
        bandwidth: Hertz(125e3),
        coding_rate: 1,
        preamble_symbols: 8,
        explicit_header: true,
        crc: true,
        low_data_rate: LowDataRate::Auto,
    }
}

/// The demo node's rates: chirp spread spectrum at 125 kHz, spreading
/// factors 7, 8, 9, 10 and 12, a 20-byte payload (airtime by
/// [`ChirpModem::airtime`]), demodulator SNR limits −7.5, −10, −12.5, −15
/// and −20 dB (common practice, from memory).
pub fn demo_rates() -> core::result::Result<RateTable, RateError> {
    let mut v = [Rate::default(); 5];
    for (slot, (name, sf, snr)) in v.iter_mut().zip([
        ("sf7", 7u8, -7.5f32),
        ("sf8", 8, -10.0),
        ("sf9", 9, -12.5),
        ("sf10", 10, -15.0),
        ("sf12", 12, -20.0),
    ]) {
        let air = chirp(sf).airtime(20).map_err(|_| RateError::BadAirtime)?;
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        // At most a few seconds: far inside u32 µs.
        let us = libm::roundf(air.0 * 1000.0) as u32;
        *slot = Rate::new(name, Db(snr), us, Some(125e3))?;
    }
    RateTable::new(&v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_demo_node_is_valid() {
        let t = demo_rates().unwrap_or_default();
        assert_eq!(t.len(), 5);
        // Spreading factor 12 takes longer on air than 7.
        let air = |i| t.get(i).map_or(0, |r| r.airtime_us);
        assert!(air(4) > 10 * air(0));
        assert!(demo_profile().is_ok());
    }
}
