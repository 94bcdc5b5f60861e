//! The data rates a radio can send at, and what each one costs and needs.
//!
//! Sub-GHz radios trade SNR for airtime: each slower rate (a higher chirp
//! spreading factor, a lower FSK bit rate) closes the link a few dB lower and
//! keeps the transmitter on longer. A [`RateTable`] lists a radio's rates in a
//! fixed capacity ([`MAX_RATES`]), each with the SNR the far end needs to
//! receive it, the packet's airtime at that rate and, optionally, the noise
//! bandwidth of the receiver at that rate (the noise floor scales with it).
//!
//! A table is either empty (the radio's rate is not in play) or validated by
//! [`RateTable::new`]: names unique and non-empty, required SNRs finite,
//! airtimes positive, and either every rate or no rate with a bandwidth (a
//! noise correction between a rate with a bandwidth and one without would be
//! a guess).
//!
//! ```
//! use headroom::rate::{Rate, RateTable};
//! use headroom::units::Db;
//!
//! let t = RateTable::new(&[
//!     Rate::new("sf7", Db(-7.5), 41_216, Some(125e3))?,
//!     Rate::new("sf12", Db(-20.0), 991_232, Some(125e3))?,
//! ])?;
//! assert_eq!(t.index_of("sf12"), Some(1));
//! assert_eq!(t.noise_change_db(1, 0), Some(Db(0.0)));
//! # Ok::<(), headroom::rate::RateError>(())
//! ```

use core::fmt;

use crate::control::SETTING_LIMIT_DB;
use crate::units::Db;

/// Most rates a table holds (a chirp radio's six spreading factors at one
/// bandwidth, plus room for an FSK rate or two).
pub const MAX_RATES: usize = 8;

/// Longest rate name, in bytes of ASCII (eight: a log header with a full
/// table of eight rates still fits one frame of the log codec).
pub const RATE_NAME_LEN: usize = 8;

/// Longest airtime a rate may state: one minute, in microseconds. Longer is
/// a unit mistake (an airtime in microseconds read as milliseconds, say).
pub const MAX_AIRTIME_US: u32 = 60_000_000;

/// A rate's name, stored inline (a table is `Copy` and needs no heap).
#[derive(Clone, Copy, PartialEq, Eq, Default)]
pub struct RateName {
    bytes: [u8; RATE_NAME_LEN],
    len: u8,
}

impl RateName {
    /// A name of 1 to [`RATE_NAME_LEN`] bytes of printable ASCII without
    /// spaces, commas or `=` (it is written into CSV headers and settings).
    pub fn new(name: &str) -> Result<Self, RateError> {
        let raw = name.as_bytes();
        if raw.is_empty() || raw.len() > RATE_NAME_LEN {
            return Err(RateError::BadName);
        }
        if !raw
            .iter()
            .all(|b| b.is_ascii_graphic() && !matches!(b, b',' | b'=' | b'"' | b'#'))
        {
            return Err(RateError::BadName);
        }
        let mut bytes = [0u8; RATE_NAME_LEN];
        for (dst, src) in bytes.iter_mut().zip(raw) {
            *dst = *src;
        }
        Ok(RateName {
            bytes,
            len: u8::try_from(raw.len()).map_err(|_| RateError::BadName)?,
        })
    }

    /// The name.
    pub fn as_str(&self) -> &str {
        let raw = self.bytes.get(..usize::from(self.len)).unwrap_or(&[]);
        // Built from a &str of ASCII only, so always valid.
        core::str::from_utf8(raw).unwrap_or("")
    }
}

impl fmt::Debug for RateName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        fmt::Debug::fmt(self.as_str(), f)
    }
}

impl fmt::Display for RateName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

#[cfg(feature = "defmt")]
impl defmt::Format for RateName {
    fn format(&self, f: defmt::Formatter) {
        defmt::write!(f, "{=str}", self.as_str())
    }
}

/// One data rate of a radio.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rate {
    /// The rate's name as logs and settings spell it (`sf9`, `fsk50k`).
    pub name: RateName,
    /// SNR below which the far end loses a packet sent at this rate.
    pub required_snr: Db,
    /// Airtime of one packet at this rate, microseconds.
    pub airtime_us: u32,
    /// Noise bandwidth of the receiver at this rate, Hz, if the table gives
    /// one: the noise floor at this rate is `10·log10(B / B_ref)` dB above
    /// that at a rate of bandwidth `B_ref`.
    pub noise_bandwidth_hz: Option<f32>,
}

impl Rate {
    /// A rate, its fields checked one by one (the table checks them together).
    pub fn new(
        name: &str,
        required_snr: Db,
        airtime_us: u32,
        noise_bandwidth_hz: Option<f32>,
    ) -> Result<Self, RateError> {
        let rate = Rate {
            name: RateName::new(name)?,
            required_snr,
            airtime_us,
            noise_bandwidth_hz,
        };
        rate.check()?;
        Ok(rate)
    }

    fn check(&self) -> Result<(), RateError> {
        if !self.required_snr.0.is_finite() || self.required_snr.0.abs() > SETTING_LIMIT_DB {
            return Err(RateError::BadRequiredSnr);
        }
        if self.airtime_us == 0 || self.airtime_us > MAX_AIRTIME_US {
            return Err(RateError::BadAirtime);
        }
        if let Some(b) = self.noise_bandwidth_hz {
            // 1 Hz to 1 THz: anything outside is a unit mistake.
            if !b.is_finite() || !(1.0..=1e12).contains(&b) {
                return Err(RateError::BadBandwidth);
            }
        }
        Ok(())
    }

    /// Airtime of one packet at this rate, seconds.
    pub fn airtime_s(&self) -> f32 {
        self.airtime_us as f32 * 1e-6
    }
}

/// A radio's rates, in the order the table gives them. Empty means the rate
/// is not in play (a log or profile that does not say).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RateTable {
    rates: [Rate; MAX_RATES],
    len: u8,
}

impl RateTable {
    /// A table with no rates.
    pub const fn empty() -> Self {
        RateTable {
            rates: [Rate {
                name: RateName {
                    bytes: [0; RATE_NAME_LEN],
                    len: 0,
                },
                required_snr: Db(0.0),
                airtime_us: 0,
                noise_bandwidth_hz: None,
            }; MAX_RATES],
            len: 0,
        }
    }

    /// A validated table of `rates` (at most [`MAX_RATES`]; an empty slice
    /// gives the empty table).
    pub fn new(rates: &[Rate]) -> Result<Self, RateError> {
        if rates.len() > MAX_RATES {
            return Err(RateError::TooMany);
        }
        let with_bandwidth = rates
            .iter()
            .filter(|r| r.noise_bandwidth_hz.is_some())
            .count();
        if with_bandwidth != 0 && with_bandwidth != rates.len() {
            return Err(RateError::MixedBandwidth);
        }
        let mut table = RateTable::empty();
        for (i, r) in rates.iter().enumerate() {
            r.check()?;
            if rates.iter().take(i).any(|q| q.name == r.name) {
                return Err(RateError::DuplicateName);
            }
            if let Some(slot) = table.rates.get_mut(i) {
                *slot = *r;
            }
        }
        table.len = u8::try_from(rates.len()).map_err(|_| RateError::TooMany)?;
        Ok(table)
    }

    /// The rates, in table order.
    pub fn as_slice(&self) -> &[Rate] {
        self.rates.get(..usize::from(self.len)).unwrap_or(&[])
    }

    /// Number of rates.
    pub fn len(&self) -> usize {
        usize::from(self.len)
    }

    /// True when the table has no rates.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The rate at `index`, if there is one.
    pub fn get(&self, index: u8) -> Option<&Rate> {
        self.as_slice().get(usize::from(index))
    }

    /// Index of the rate called `name`.
    pub fn index_of(&self, name: &str) -> Option<u8> {
        self.as_slice()
            .iter()
            .position(|r| r.name.as_str() == name)
            .and_then(|i| u8::try_from(i).ok())
    }

    /// How much higher the noise floor is at rate `to` than at rate `from`:
    /// `10·log10(B_to / B_from)` dB, 0 when the table gives no bandwidths,
    /// `None` when either index is not in the table.
    pub fn noise_change_db(&self, to: u8, from: u8) -> Option<Db> {
        let (a, b) = (self.get(to)?, self.get(from)?);
        match (a.noise_bandwidth_hz, b.noise_bandwidth_hz) {
            (Some(bt), Some(bf)) => Some(Db(10.0 * libm::log10f(bt / bf))),
            _ => Some(Db(0.0)),
        }
    }
}

/// Why a rate or a rate table was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RateError {
    /// A name empty, longer than [`RATE_NAME_LEN`] bytes, or with a space,
    /// comma, `=`, quote, `#` or a non-ASCII character.
    BadName,
    /// A required SNR not finite or beyond ±300 dB.
    BadRequiredSnr,
    /// An airtime of zero or above one minute.
    BadAirtime,
    /// A noise bandwidth not finite or outside 1 Hz to 1 THz.
    BadBandwidth,
    /// More than [`MAX_RATES`] rates.
    TooMany,
    /// Two rates with the same name.
    DuplicateName,
    /// Some rates with a noise bandwidth and some without.
    MixedBandwidth,
}

impl fmt::Display for RateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            RateError::BadName => {
                "a rate name must be 1 to 8 ASCII characters without spaces, commas, '=', quotes or '#'"
            }
            RateError::BadRequiredSnr => "a rate's required SNR must be finite and within ±300 dB",
            RateError::BadAirtime => "a rate's airtime must be above zero and at most one minute",
            RateError::BadBandwidth => {
                "a rate's noise bandwidth must be finite and within 1 Hz to 1 THz"
            }
            RateError::TooMany => "a rate table holds at most 8 rates",
            RateError::DuplicateName => "two rates in the table have the same name",
            RateError::MixedBandwidth => {
                "either every rate in the table gives a noise bandwidth or none does"
            }
        })
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn sf(n: &str, snr: f32, us: u32) -> Rate {
        Rate::new(n, Db(snr), us, Some(125e3)).unwrap()
    }

    #[test]
    fn names_are_checked_and_kept() {
        assert_eq!(RateName::new("sf12").unwrap().as_str(), "sf12");
        assert_eq!(RateName::new("abcdefgh").unwrap().as_str().len(), 8);
        for bad in ["", "abcdefghi", "sf 7", "a,b", "a=b", "é"] {
            assert_eq!(RateName::new(bad), Err(RateError::BadName), "{bad:?}");
        }
    }

    #[test]
    fn a_table_refuses_what_it_cannot_hold_or_trust() {
        let r = sf("sf7", -7.5, 50_000);
        assert_eq!(RateTable::new(&[r; 9]), Err(RateError::TooMany));
        assert_eq!(RateTable::new(&[r, r]), Err(RateError::DuplicateName));
        let bare = Rate::new("sf8", Db(-10.0), 90_000, None).unwrap();
        assert_eq!(RateTable::new(&[r, bare]), Err(RateError::MixedBandwidth));
        assert_eq!(
            Rate::new("x", Db(f32::NAN), 1, None),
            Err(RateError::BadRequiredSnr)
        );
        assert_eq!(Rate::new("x", Db(0.0), 0, None), Err(RateError::BadAirtime));
        assert_eq!(
            Rate::new("x", Db(0.0), 1, Some(0.5)),
            Err(RateError::BadBandwidth)
        );
        assert!(RateTable::new(&[]).unwrap().is_empty());
    }

    #[test]
    fn lookups_and_the_noise_change() {
        let narrow = Rate::new("fsk", Db(8.0), 4_000, Some(12.5e3)).unwrap();
        let t = RateTable::new(&[sf("sf7", -7.5, 50_000), narrow]).unwrap();
        assert_eq!(t.len(), 2);
        assert_eq!(t.index_of("fsk"), Some(1));
        assert_eq!(t.index_of("sf9"), None);
        assert!(t.get(2).is_none());
        // 12.5 kHz against 125 kHz: ten times less bandwidth, 10 dB less noise.
        let d = t.noise_change_db(1, 0).unwrap().0;
        assert!((d + 10.0).abs() < 1e-5, "{d}");
        assert_eq!(t.noise_change_db(0, 5), None);
    }
}
