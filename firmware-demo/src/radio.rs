//! The radio as the firmware sees it, and a simulated one.
//!
//! [`Radio`] is what the packet loop needs from a transceiver: what powers it
//! supports, setting the power, sending, and the far end's feedback on the
//! last packet. A driver for a real transceiver implements the same trait;
//! [`SimRadio`] implements it with the engine's seeded channel simulator, so
//! the demo runs unchanged under QEMU.

use headroom::control::{Observation, PowerSteps};
use headroom::rate::RateTable;
use headroom::sim::{Channel, ChannelConfig, ChannelSample};
use headroom::units::Dbm;

/// The transmit powers a radio supports.
#[derive(Debug, Clone, Copy, PartialEq, defmt::Format)]
pub struct PowerCapabilities {
    /// Lowest settable power.
    pub min: Dbm,
    /// Highest settable power.
    pub max: Dbm,
    /// Which powers in between can be set.
    pub steps: PowerSteps,
}

/// A transceiver that sends packets and hears back how they arrived.
pub trait Radio {
    /// Why a radio operation failed.
    type Error: defmt::Format;

    /// The powers this radio can transmit at.
    fn capabilities(&self) -> PowerCapabilities;

    /// Set the power of the following packets; returns the power actually set.
    fn set_tx_power(&mut self, power: Dbm) -> Result<Dbm, Self::Error>;

    /// Send one packet at the current power.
    fn send(&mut self, payload: &[u8]) -> Result<(), Self::Error>;

    /// Choose the data rate of the next packets (an index into the radio's
    /// rate table); returns the rate's airtime, µs.
    fn set_rate(&mut self, rate: u8) -> Result<u32, Self::Error>;

    /// Let one packet slot pass without sending (a packet held by the duty
    /// budget); returns the slot's time, ms.
    fn skip(&mut self) -> Result<u64, Self::Error>;

    /// What came back about the last packet sent: the far end's readings, a
    /// bare acknowledgement, or nothing (lost).
    fn feedback(&mut self) -> Result<Observation, Self::Error>;
}

/// Why the simulated radio refused an operation.
#[derive(Debug, Clone, Copy, PartialEq, defmt::Format)]
pub enum SimRadioError {
    /// The power is outside the radio's range or not one of its levels.
    PowerNotSupported(Dbm),
    /// A rate index outside the radio's rate table.
    RateNotSupported(u8),
    /// Feedback was asked for before any packet was sent.
    NothingSent,
    /// The channel simulator refused (see the engine error).
    Channel(headroom::Error),
}

/// A radio whose packets cross a simulated channel ([`headroom::sim::Channel`]).
pub struct SimRadio {
    channel: Channel,
    caps: PowerCapabilities,
    tx: Dbm,
    last: Option<ChannelSample>,
    /// The rates the radio can send at (empty: the channel's own reception
    /// threshold decides), and the one in use.
    rates: RateTable,
    rate: u8,
}

/// Tolerance when matching a requested power to a level, dB.
const LEVEL_TOLERANCE_DB: f32 = 1e-3;

impl SimRadio {
    /// A radio with the given power levels over the channel `cfg`, seeded.
    pub fn new(
        cfg: ChannelConfig,
        seed: u64,
        caps: PowerCapabilities,
    ) -> Result<Self, SimRadioError> {
        let channel = Channel::new(cfg, seed).map_err(SimRadioError::Channel)?;
        Ok(SimRadio {
            channel,
            caps,
            tx: caps.max,
            last: None,
            rates: RateTable::empty(),
            rate: 0,
        })
    }

    /// The same radio with a rate table: a packet at rate `m` is received
    /// when its SNR, measured in that rate's noise bandwidth (the channel's
    /// noise floor is rate 0's), reaches the rate's required SNR, and the far
    /// end reports the noise floor in that bandwidth.
    pub fn with_rates(mut self, rates: RateTable) -> Self {
        self.rates = rates;
        self
    }

    /// The truth behind the last packet (what the simulator knows and the
    /// device does not), for the demo's statistics.
    pub fn last_sample(&self) -> Option<&ChannelSample> {
        self.last.as_ref()
    }

    fn is_level(&self, p: f32) -> bool {
        let c = &self.caps;
        if !(p >= c.min.0 - LEVEL_TOLERANCE_DB && p <= c.max.0 + LEVEL_TOLERANCE_DB) {
            return false;
        }
        match c.steps {
            PowerSteps::Uniform(step) => {
                let k = (p - c.min.0) / step.0;
                (k - libm::roundf(k)).abs() * step.0 < LEVEL_TOLERANCE_DB
            }
            PowerSteps::Table(t) => t
                .levels()
                .iter()
                .any(|l| (l.0 - p).abs() < LEVEL_TOLERANCE_DB),
        }
    }
}

impl Radio for SimRadio {
    type Error = SimRadioError;

    fn capabilities(&self) -> PowerCapabilities {
        self.caps
    }

    fn set_tx_power(&mut self, power: Dbm) -> Result<Dbm, SimRadioError> {
        if !power.is_finite() || !self.is_level(power.0) {
            return Err(SimRadioError::PowerNotSupported(power));
        }
        self.tx = power;
        Ok(power)
    }

    fn send(&mut self, _payload: &[u8]) -> Result<(), SimRadioError> {
        let mut s = self
            .channel
            .packet(self.tx)
            .map_err(SimRadioError::Channel)?;
        if let Some(r) = self.rates.get(self.rate) {
            let shift = self
                .rates
                .noise_change_db(self.rate, 0)
                .map_or(0.0, |d| d.0);
            let received = s.snr.0 - shift >= r.required_snr.0;
            s.received = received;
            if !received || s.feedback_lost {
                s.reported_rssi = None;
                s.reported_noise = None;
            } else {
                s.reported_noise = s.reported_noise.map(|n| Dbm(n.0 + shift));
            }
        }
        self.last = Some(s);
        Ok(())
    }

    fn set_rate(&mut self, rate: u8) -> Result<u32, SimRadioError> {
        let r = self
            .rates
            .get(rate)
            .ok_or(SimRadioError::RateNotSupported(rate))?;
        self.rate = rate;
        Ok(r.airtime_us)
    }

    fn skip(&mut self) -> Result<u64, SimRadioError> {
        let s = self
            .channel
            .packet(self.tx)
            .map_err(SimRadioError::Channel)?;
        self.last = None;
        Ok(s.t_ms)
    }

    fn feedback(&mut self) -> Result<Observation, SimRadioError> {
        let s = self.last.as_ref().ok_or(SimRadioError::NothingSent)?;
        Ok(match (s.reported_rssi, s.reported_noise) {
            (Some(rssi), Some(noise)) => Observation::Feedback {
                t_ms: s.t_ms,
                tx: s.tx,
                rssi,
                noise,
                snr: None,
            },
            // A report without readings is a bare acknowledgement.
            _ if s.received && !s.feedback_lost => Observation::Acked { t_ms: s.t_ms },
            // Not received, or the acknowledgement did not come back: to
            // the device both look the same.
            _ => Observation::Lost { t_ms: s.t_ms },
        })
    }
}
