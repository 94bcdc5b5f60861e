//! Time on air of one packet.
//!
//! ## Generic packet modem
//! A packet of `preamble`, `sync word`, `header`, `payload` and `CRC` bits
//! at a bit rate `R`, with a forward error correction code of rate `k/n`
//! applied to the header, payload and CRC (the preamble and sync word are
//! sent uncoded; common practice):
//!
//! `T = (preamble + sync + ⌈(header + 8·payload + crc) · n / k⌉) / R`
//!
//! ## Chirp spread spectrum
//! The time-on-air formula of the Semtech SX1276/77/78/79 data sheet
//! (section "LoRa packet structure" / "time on air"), with spreading factor
//! `SF`, bandwidth `BW`, coding rate `CR` (1..4 for 4/5..4/8), `n_preamble`
//! programmed preamble symbols, `IH` = 1 for an implicit header (0 for
//! explicit), `DE` = 1 with low-data-rate optimisation, `CRC` = 1 with a
//! payload CRC, and a payload of `PL` bytes:
//!
//! - `T_sym = 2^SF / BW`
//! - `T_preamble = (n_preamble + 4.25) · T_sym`
//! - `n_payload = 8 + max(⌈(8·PL − 4·SF + 28 + 16·CRC − 20·IH) / (4·(SF − 2·DE))⌉ · (CR + 4), 0)`
//! - `T = T_preamble + n_payload · T_sym`
//!
//! The symbol count is computed in integers (exactly); the time as
//! quarter-symbols · 2^SF / (4·BW). With [`LowDataRate::Auto`] the
//! optimisation is on when a symbol lasts more than 16 ms, as the data sheet
//! requires (from memory: SF11 and SF12 at 125 kHz).

use core::num::NonZeroU64;

use crate::error::{positive, Error, Result};
use crate::units::Hertz;

use super::Milliseconds;

/// A forward error correction code rate `k/n` (k data bits in n coded bits,
/// 1 ≤ k ≤ n ≤ 255); `1/1` for none.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CodeRate {
    /// Data bits.
    pub k: u8,
    /// Coded bits.
    pub n: u8,
}

impl CodeRate {
    /// No coding.
    pub const NONE: CodeRate = CodeRate { k: 1, n: 1 };
}

/// A generic packet modem (FSK, GFSK, O-QPSK, ...).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PacketModem {
    /// Bit rate on air before coding, bit/s.
    pub bit_rate: f32,
    /// Preamble, bits.
    pub preamble_bits: u16,
    /// Sync word (start-of-frame delimiter), bits.
    pub sync_bits: u16,
    /// Header (length field, address), bits.
    pub header_bits: u16,
    /// CRC, bits.
    pub crc_bits: u16,
    /// FEC code rate on header, payload and CRC.
    pub coding: CodeRate,
}

impl PacketModem {
    /// Bits on air for a payload of `payload` bytes (exact, integer).
    pub fn bits(&self, payload: u16) -> Result<u64> {
        let CodeRate { k, n } = self.coding;
        let divisor = NonZeroU64::new(u64::from(k)).ok_or(Error::Unsupported("coding_rate"))?;
        if n < k {
            return Err(Error::Unsupported("coding_rate"));
        }
        let coded_in =
            u64::from(self.header_bits) + 8 * u64::from(payload) + u64::from(self.crc_bits);
        // Ceiling division by a divisor the type keeps non-zero (no panic path).
        let coded = (coded_in * u64::from(n) + u64::from(k) - 1) / divisor;
        Ok(u64::from(self.preamble_bits) + u64::from(self.sync_bits) + coded)
    }

    /// Time on air of a payload of `payload` bytes.
    #[allow(clippy::cast_precision_loss)] // bits below 2^28: rounded once to f32
    pub fn airtime(&self, payload: u16) -> Result<Milliseconds> {
        let rate = positive("bit_rate", self.bit_rate)?;
        let bits = self.bits(payload)?;
        Ok(Milliseconds(bits as f32 * 1000.0 / rate))
    }
}

/// Low-data-rate optimisation of a chirp modem.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LowDataRate {
    /// On when a symbol lasts more than 16 ms.
    Auto,
    /// Always on.
    On,
    /// Always off.
    Off,
}

/// A chirp spread spectrum modem (see the [module](self) for the formula).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChirpModem {
    /// Spreading factor, 6..12.
    pub spreading_factor: u8,
    /// Bandwidth, 7.8 kHz to 500 kHz.
    pub bandwidth: Hertz,
    /// Coding rate 1..4 (4/5..4/8).
    pub coding_rate: u8,
    /// Programmed preamble symbols, 6..65535.
    pub preamble_symbols: u16,
    /// Explicit header (`false`: implicit; the only choice at SF6).
    pub explicit_header: bool,
    /// Payload CRC on.
    pub crc: bool,
    /// Low-data-rate optimisation.
    pub low_data_rate: LowDataRate,
}

/// Symbol length above which [`LowDataRate::Auto`] turns the optimisation on, ms.
pub const LOW_DATA_RATE_SYMBOL_MS: f32 = 16.0;

impl ChirpModem {
    fn check(&self) -> Result<()> {
        let sf = self.spreading_factor;
        if !(6..=12).contains(&sf) {
            return Err(Error::OutOfValidity {
                param: "spreading_factor",
                value: f32::from(sf),
                min: 6.0,
                max: 12.0,
            });
        }
        let bw = positive("bandwidth_hz", self.bandwidth.0)?;
        if !(7.8e3..=500e3).contains(&bw) {
            return Err(Error::OutOfValidity {
                param: "bandwidth_hz",
                value: bw,
                min: 7.8e3,
                max: 500e3,
            });
        }
        if !(1..=4).contains(&self.coding_rate) {
            return Err(Error::OutOfValidity {
                param: "coding_rate",
                value: f32::from(self.coding_rate),
                min: 1.0,
                max: 4.0,
            });
        }
        if self.preamble_symbols < 6 {
            return Err(Error::OutOfValidity {
                param: "preamble_symbols",
                value: f32::from(self.preamble_symbols),
                min: 6.0,
                max: 65535.0,
            });
        }
        if sf == 6 && self.explicit_header {
            return Err(Error::Unsupported("explicit_header"));
        }
        Ok(())
    }

    /// Symbol time `2^SF / BW`.
    pub fn symbol_time(&self) -> Result<Milliseconds> {
        self.check()?;
        let chips = f32::from(1u16 << self.spreading_factor);
        Ok(Milliseconds(chips * 1000.0 / self.bandwidth.0))
    }

    /// Whether the low-data-rate optimisation is on.
    pub fn low_data_rate_on(&self) -> Result<bool> {
        Ok(match self.low_data_rate {
            LowDataRate::On => true,
            LowDataRate::Off => false,
            LowDataRate::Auto => self.symbol_time()?.0 > LOW_DATA_RATE_SYMBOL_MS,
        })
    }

    /// Payload symbols `n_payload` for `payload` bytes (exact, integer).
    pub fn payload_symbols(&self, payload: u8) -> Result<u32> {
        self.check()?;
        let sf = i32::from(self.spreading_factor);
        let de = i32::from(self.low_data_rate_on()?);
        let num = 8 * i32::from(payload) - 4 * sf + 28 + 16 * i32::from(self.crc)
            - 20 * i32::from(!self.explicit_header);
        let den = 4 * (sf - 2 * de);
        let blocks = if num > 0 {
            // den ≥ 4·(6 − 2) after check(); checked_div keeps the panic path out.
            (num + den - 1)
                .checked_div(den)
                .ok_or(Error::NoSolution("payload_symbols"))?
        } else {
            0
        };
        let n = 8 + blocks * (i32::from(self.coding_rate) + 4);
        u32::try_from(n).map_err(|_| Error::NoSolution("payload_symbols"))
    }

    /// Time on air of a payload of `payload` bytes (at most 255).
    #[allow(clippy::cast_precision_loss)] // below 2^24 quarter-symbols: exact
    pub fn airtime(&self, payload: u8) -> Result<Milliseconds> {
        let n = self.payload_symbols(payload)?;
        // Quarter symbols: 4·(n_preamble + 4.25) + 4·n_payload.
        let quarters = 4 * u32::from(self.preamble_symbols) + 17 + 4 * n;
        let chips = f32::from(1u16 << self.spreading_factor);
        Ok(Milliseconds(
            quarters as f32 * chips * 250.0 / self.bandwidth.0,
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chirp(sf: u8, payload_crc: bool) -> ChirpModem {
        ChirpModem {
            spreading_factor: sf,
            bandwidth: Hertz(125e3),
            coding_rate: 1,
            preamble_symbols: 8,
            explicit_header: true,
            crc: payload_crc,
            low_data_rate: LowDataRate::Auto,
        }
    }

    #[test]
    fn chirp_check_values() {
        // SF7, 125 kHz, 4/5, 8 preamble symbols, explicit header, CRC on,
        // 10 bytes: 28 payload symbols, 41.216 ms (hand-evaluated from the
        // data-sheet formula).
        let m = chirp(7, true);
        assert_eq!(m.payload_symbols(10), Ok(28));
        assert_eq!(m.airtime(10), Ok(Milliseconds(41.216)));
        // SF12 (optimisation on by Auto), 51 bytes: 63 symbols, 2465.792 ms.
        let m = chirp(12, true);
        assert_eq!(m.low_data_rate_on(), Ok(true));
        assert_eq!(m.payload_symbols(51), Ok(63));
        assert_eq!(m.airtime(51), Ok(Milliseconds(2465.792)));
        // SF11 at 125 kHz: 16.384 ms symbols, optimisation on; SF10 off.
        assert_eq!(chirp(11, true).low_data_rate_on(), Ok(true));
        assert_eq!(chirp(10, true).low_data_rate_on(), Ok(false));
    }

    #[test]
    fn chirp_refuses_out_of_range() {
        assert!(chirp(13, true).airtime(10).is_err());
        assert!(chirp(5, true).airtime(10).is_err());
        assert_eq!(
            chirp(6, true).airtime(10),
            Err(Error::Unsupported("explicit_header"))
        );
        let mut m = chirp(7, true);
        m.coding_rate = 0;
        assert!(m.airtime(1).is_err());
        m.coding_rate = 1;
        m.bandwidth = Hertz(1e6);
        assert!(m.airtime(1).is_err());
    }

    #[test]
    fn packet_modem_bits() {
        // IEEE 802.15.4 O-QPSK at 2.4 GHz: 250 kbit/s, 4-byte preamble,
        // 1-byte SFD, 1-byte PHR, 127-byte PSDU (125 + 2-byte FCS):
        // 133 bytes, 4.256 ms (from memory).
        let m = PacketModem {
            bit_rate: 250e3,
            preamble_bits: 32,
            sync_bits: 8,
            header_bits: 8,
            crc_bits: 16,
            coding: CodeRate::NONE,
        };
        assert_eq!(m.bits(125), Ok(1064));
        assert_eq!(m.airtime(125), Ok(Milliseconds(4.256)));
        let half = PacketModem {
            coding: CodeRate { k: 1, n: 2 },
            ..m
        };
        // 40 uncoded + 2·1024 coded.
        assert_eq!(half.bits(125), Ok(40 + 2048));
        let bad = PacketModem {
            coding: CodeRate { k: 2, n: 1 },
            ..m
        };
        assert!(bad.bits(1).is_err());
        let zero = PacketModem { bit_rate: 0.0, ..m };
        assert!(zero.airtime(1).is_err());
    }
}
