//! Energy: what a packet costs the battery, not what it radiates.
//!
//! A node's battery pays in charge. A power amplifier's supply current falls
//! far less than its output power, and the receive window, the wake-up and
//! the sleep current often cost more than the transmission itself. This
//! module turns a radio's [`EnergyProfile`] and a transmit power into charge
//! per packet, mean current and battery life, computes the airtime of a
//! packet from a modem description, and checks it against a duty-cycle limit.
//!
//! | file | what lives there |
//! |---|---|
//! | [`profile`] | the radio energy profile, charge per packet, mean current, battery life, resends |
//! | [`charge`] | the profile's charge per packet in the controller's integers (rate choice) |
//! | [`demo`] | the invented node of the demos (energy profile and rates) |
//! | [`airtime`] | time on air of a generic packet modem and of chirp spread spectrum |
//! | [`duty`] | duty cycle, airtime per hour, EN 300 220 sub-band limits, the sliding airtime budget of one hour |
//! | [`tally`] | linear sums of charge and airtime that add up over records and devices |
//! | [`replay`] | the two tallies of a replay: the controller's packets and the device's |
//!
//! ## The formulas (with the profile's units)
//! - charge per packet (µC) = I_tx(P) (mA) · airtime (ms) + I_rx (mA) · rx
//!   window (ms) + per-packet charge (µC), since mA · ms = µC;
//! - mean current (µA) = charge per packet (µC) / interval (s) + sleep current (µA);
//! - battery life (days) = battery (mAh) · 1000 / mean current (µA) / 24.
//!
//! Refinements are off unless asked for (see [`Refinements`]).
//!
//! Every function checks its inputs and returns a [`Result`](crate::error::Result);
//! nothing here allocates or panics.

pub mod airtime;
pub mod charge;
pub mod demo;
pub mod duty;
pub mod profile;
pub mod replay;
pub mod tally;

pub use airtime::{ChirpModem, CodeRate, LowDataRate, PacketModem};
pub use charge::ChargeTable;
pub use duty::{AirtimeWindow, SubBand, EN_300_220_SUB_BANDS};
pub use profile::{
    Battery, Delivery, EnergyProfile, PacketCost, Refinements, TableError, TxCurrentTable, TxPoint,
    TX_POINTS,
};
pub use replay::ReplayEnergy;
pub use tally::EnergyTally;

pub use crate::units::{
    Days, Microamps, Microcoulombs, Microjoules, MilliampHours, Milliamps, Milliseconds, Seconds,
    Volts,
};

/// Hours in a mean Julian year (365.25 days), for rates given per year.
pub const HOURS_PER_YEAR: f32 = 8766.0;
