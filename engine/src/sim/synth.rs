//! A channel, a transmit-power pattern and a fault list together: the
//! generator behind `headroom synth`, also usable on a target.

use heapless::Vec;

use crate::error::{finite, Error, Result};
use crate::rate::RateTable;
use crate::record::LogRecord;
use crate::units::Dbm;

use super::channel::{Channel, ChannelConfig, ChannelSample};
use super::fault::{Fault, FaultInjector, MAX_FAULTS};

/// Most levels in a [`PowerPattern`].
pub const MAX_LEVELS: usize = 32;

/// The levels of a [`PowerPattern`] (a fixed-capacity vector).
pub type Levels = Vec<Dbm, MAX_LEVELS>;

/// The transmit power of each packet of a synthetic log: packet `k` uses
/// `levels_dbm[(k / hold_packets) % levels_dbm.len()]`. One level is a fixed
/// power; several cycle (a site survey that tries each level in turn).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct PowerPattern {
    /// Power levels used in turn, at least one, at most [`MAX_LEVELS`].
    pub levels_dbm: Levels,
    /// Packets sent at each level before the next (at least 1; default 1).
    #[cfg_attr(feature = "serde", serde(default = "one"))]
    pub hold_packets: u64,
}

#[cfg(feature = "serde")]
fn one() -> u64 {
    1
}

#[cfg(feature = "defmt")]
impl defmt::Format for PowerPattern {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "PowerPattern {{ levels_dbm: {}, hold_packets: {} }}",
            self.levels_dbm.as_slice(),
            self.hold_packets
        );
    }
}

impl PowerPattern {
    /// A fixed power.
    pub fn fixed(p: Dbm) -> Self {
        let mut levels_dbm = Vec::new();
        // Capacity is at least 1, so the push cannot fail.
        let _ = levels_dbm.push(p);
        PowerPattern {
            levels_dbm,
            hold_packets: 1,
        }
    }

    /// A pattern cycling through `levels`, `hold_packets` packets each;
    /// refuses an empty list, more than [`MAX_LEVELS`] or a non-finite level.
    pub fn cycle(levels: &[Dbm], hold_packets: u64) -> Result<Self> {
        let mut levels_dbm = Vec::new();
        for &p in levels {
            if levels_dbm.push(p).is_err() {
                return Err(Error::OutOfValidity {
                    param: "power.levels_dbm (count)",
                    value: levels.len() as f32,
                    min: 1.0,
                    max: MAX_LEVELS as f32,
                });
            }
        }
        let p = PowerPattern {
            levels_dbm,
            hold_packets,
        };
        p.check()?;
        Ok(p)
    }

    /// Check the pattern: at least one level, all finite, `hold_packets ≥ 1`.
    pub fn check(&self) -> Result<()> {
        if self.levels_dbm.is_empty() {
            return Err(Error::NotPositive("power.levels_dbm (count)"));
        }
        if self.hold_packets == 0 {
            return Err(Error::NotPositive("power.hold_packets"));
        }
        for p in &self.levels_dbm {
            finite("power.levels_dbm", p.0)?;
        }
        Ok(())
    }

    /// The power of packet `k`.
    pub fn level(&self, k: u64) -> Result<Dbm> {
        self.check()?;
        let n = self.levels_dbm.len() as u64;
        let i = (k / self.hold_packets) % n;
        usize::try_from(i)
            .ok()
            .and_then(|i| self.levels_dbm.get(i))
            .copied()
            .ok_or(Error::NotPositive("power.levels_dbm (count)"))
    }
}

/// The rates a synthetic log is written at: rate indices of a table,
/// cycled every `hold_packets` packets (at most [`MAX_LEVELS`] entries).
#[derive(Debug, Clone, PartialEq)]
pub struct RateSchedule {
    /// The rates of the table, in schedule order.
    pub table: RateTable,
    /// Indices into `table`, cycled.
    pub indices: Vec<u8, MAX_LEVELS>,
    /// Packets at each entry before the next.
    pub hold_packets: u64,
}

impl RateSchedule {
    /// A schedule cycling `indices` of `table`, `hold_packets` packets each;
    /// refused when empty, too long, with an index outside the table, or a
    /// hold of zero.
    pub fn new(table: RateTable, indices: &[u8], hold_packets: u64) -> Result<Self> {
        let mut v = Vec::new();
        for &i in indices {
            if usize::from(i) >= table.len() {
                return Err(Error::OutOfValidity {
                    param: "rate schedule (index)",
                    value: f32::from(i),
                    min: 0.0,
                    max: table.len() as f32 - 1.0,
                });
            }
            if v.push(i).is_err() {
                return Err(Error::OutOfValidity {
                    param: "rate schedule (count)",
                    value: indices.len() as f32,
                    min: 1.0,
                    max: MAX_LEVELS as f32,
                });
            }
        }
        if v.is_empty() {
            return Err(Error::NotPositive("rate schedule (count)"));
        }
        if hold_packets == 0 {
            return Err(Error::NotPositive("rate schedule hold_packets"));
        }
        Ok(RateSchedule {
            table,
            indices: v,
            hold_packets,
        })
    }

    /// The rate of packet `k`.
    pub fn rate(&self, k: u64) -> u8 {
        let n = self.indices.len() as u64;
        let i = (k / self.hold_packets.max(1)).checked_rem(n).unwrap_or(0);
        usize::try_from(i)
            .ok()
            .and_then(|i| self.indices.get(i))
            .copied()
            .unwrap_or(0)
    }
}

/// A synthetic field log, record by record: the [`Channel`] simulates each
/// packet at the pattern's power and the [`FaultInjector`] damages the
/// logged record. Deterministic for a given seed.
#[derive(Debug, Clone, PartialEq)]
pub struct Synth<const F: usize = MAX_FAULTS> {
    channel: Channel,
    power: PowerPattern,
    faults: FaultInjector<F>,
    rates: Option<RateSchedule>,
}

impl<const F: usize> Synth<F> {
    /// Check everything and start at packet 0.
    pub fn new(
        channel: ChannelConfig,
        power: PowerPattern,
        faults: &[Fault],
        seed: u64,
    ) -> Result<Self> {
        power.check()?;
        Ok(Synth {
            channel: Channel::new(channel, seed)?,
            power,
            faults: FaultInjector::new(faults)?,
            rates: None,
        })
    }

    /// The same log written at a rate schedule: each record carries its
    /// rate, and its noise floor in that rate's bandwidth
    /// ([`ChannelSample::record_at_rate`]).
    pub fn with_rates(mut self, rates: RateSchedule) -> Self {
        self.rates = Some(rates);
        self
    }

    /// The next packet: the channel's truth and the record as logged (with
    /// faults applied).
    pub fn next_record(&mut self) -> Result<(ChannelSample, LogRecord)> {
        let k = self.channel.next_index();
        let s = self.channel.packet(self.power.level(k)?)?;
        let rec = match &self.rates {
            Some(r) => s
                .record_at_rate(&r.table, r.rate(k))
                .unwrap_or_else(|| s.record()),
            None => s.record(),
        };
        Ok((s, self.faults.apply(rec)))
    }

    /// The channel being simulated.
    pub fn channel(&self) -> &Channel {
        &self.channel
    }

    /// The fault injector (which records are damaged).
    pub fn faults(&self) -> &FaultInjector<F> {
        &self.faults
    }
}

#[cfg(feature = "defmt")]
impl<const F: usize> defmt::Format for Synth<F> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "Synth {{ channel: {}, faults: {} }}",
            self.channel,
            self.faults
        );
    }
}
