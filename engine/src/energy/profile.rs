//! The radio energy profile: what each packet costs, and how long a battery lasts.
//!
//! ## Transmit current table
//! The transmit supply current is a table of (output dBm, mA) points,
//! strictly increasing in power, of at most `N` points (a const generic,
//! [`TX_POINTS`] by default). Between two points the current is interpolated
//! linearly in mA against dBm. A power outside the table's first..last point
//! is **refused** ([`Error::OutOfValidity`] naming `tx_dbm` and the table's
//! range), never extrapolated: a profile must cover every power the radio
//! may use. A one-point table is valid at that one power only.
//!
//! ## Resends
//! With a loss probability `p` per attempt (independent attempts) and at
//! most `R` resends (`max_retries`), a reading is sent up to `R + 1` times
//! and stops at the first delivery:
//! - expected attempts `E = Σ_{k=0..R} p^k = (1 − p^{R+1}) / (1 − p)`;
//! - delivered fraction `D = 1 − p^{R+1}`;
//! - charge per reading = per-packet charge + radio charge · `E` (a resend
//!   repeats the transmission and the receive window, not the wake-up and
//!   sensor work, which happen once per reading);
//! - charge per delivered packet = charge per reading / `D`.
//!
//! With `R = 0` this is `Q / (1 − p)`: a lost packet costs its charge and
//! delivers nothing.

use core::fmt;

use super::{
    Days, Microamps, Microcoulombs, MilliampHours, Milliamps, Milliseconds, Seconds, Volts,
    HOURS_PER_YEAR,
};
use crate::error::{finite, non_negative, positive, within, Error, Result};
use crate::units::Dbm;

/// Default capacity of a transmit current table.
pub const TX_POINTS: usize = 16;

/// One point of the transmit current table.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TxPoint {
    /// Output power.
    pub power: Dbm,
    /// Supply current at that output power.
    pub current: Milliamps,
}

/// Why a transmit current table refused a point.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum TableError {
    /// The table has no point.
    Empty,
    /// The table already holds its capacity of points.
    Full {
        /// The capacity.
        capacity: usize,
    },
    /// Point `index` (from 0) is not above the previous point's power.
    NotIncreasing {
        /// Index of the offending point.
        index: usize,
    },
    /// Point `index` has a bad value (a power that is not finite, a current
    /// that is not a positive finite number).
    BadPoint {
        /// Index of the offending point.
        index: usize,
        /// What is wrong with it.
        error: Error,
    },
}

impl fmt::Display for TableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TableError::Empty => write!(f, "the transmit current table has no point"),
            TableError::Full { capacity } => write!(
                f,
                "the transmit current table holds at most {capacity} points"
            ),
            TableError::NotIncreasing { index } => write!(
                f,
                "point {} is not above the previous point's power: the table must be sorted by strictly increasing dBm",
                index + 1
            ),
            TableError::BadPoint { index, error } => write!(f, "point {}: {error}", index + 1),
        }
    }
}

impl core::error::Error for TableError {}

/// Transmit supply current against output power: at most `N` points,
/// strictly increasing in power (see the [module](self) for the rules).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TxCurrentTable<const N: usize = TX_POINTS> {
    points: [TxPoint; N],
    len: usize,
}

impl<const N: usize> Default for TxCurrentTable<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> TxCurrentTable<N> {
    /// An empty table (not usable until a point is pushed).
    pub const fn new() -> Self {
        TxCurrentTable {
            points: [TxPoint {
                power: Dbm(0.0),
                current: Milliamps(0.0),
            }; N],
            len: 0,
        }
    }

    /// A table of `(dBm, mA)` points, in order.
    pub fn from_points(points: &[(f32, f32)]) -> core::result::Result<Self, TableError> {
        let mut t = Self::new();
        for &(p, i) in points {
            t.push(Dbm(p), Milliamps(i))?;
        }
        if t.len == 0 {
            return Err(TableError::Empty);
        }
        Ok(t)
    }

    /// Append a point; refused if the table is full, the power is not above
    /// the last point's, or a value is bad.
    pub fn push(&mut self, power: Dbm, current: Milliamps) -> core::result::Result<(), TableError> {
        let index = self.len;
        let bad = |error| TableError::BadPoint { index, error };
        finite("tx_dbm", power.0).map_err(bad)?;
        positive("tx_current_ma", current.0).map_err(bad)?;
        if let Some(last) = self.points().last() {
            if power.0 <= last.power.0 {
                return Err(TableError::NotIncreasing { index });
            }
        }
        let slot = self
            .points
            .get_mut(index)
            .ok_or(TableError::Full { capacity: N })?;
        *slot = TxPoint { power, current };
        self.len += 1;
        Ok(())
    }

    /// The points, in increasing power.
    pub fn points(&self) -> &[TxPoint] {
        self.points.get(..self.len).unwrap_or(&[])
    }

    /// Lowest and highest power of the table (`None` when empty).
    pub fn range(&self) -> Option<(Dbm, Dbm)> {
        match (self.points().first(), self.points().last()) {
            (Some(a), Some(b)) => Some((a.power, b.power)),
            _ => None,
        }
    }

    /// Supply current at output power `p`, interpolated linearly in mA
    /// between the two points around it; refused outside the table.
    pub fn current_at(&self, p: Dbm) -> Result<Milliamps> {
        let p = finite("tx_dbm", p.0)?;
        let (lo, hi) = self.range().ok_or(Error::NoSolution("tx_current_ma"))?;
        if p < lo.0 || p > hi.0 {
            return Err(Error::OutOfValidity {
                param: "tx_dbm",
                value: p,
                min: lo.0,
                max: hi.0,
            });
        }
        let pts = self.points();
        for (a, b) in pts.iter().zip(pts.iter().skip(1)) {
            if p <= b.power.0 {
                if p == b.power.0 {
                    return Ok(b.current);
                }
                let frac = (p - a.power.0) / (b.power.0 - a.power.0);
                return Ok(Milliamps(a.current.0 + (b.current.0 - a.current.0) * frac));
            }
        }
        // A one-point table, at its one power.
        Ok(pts.first().map(|a| a.current).unwrap_or(Milliamps(0.0)))
    }
}

/// Refinements of the battery-life arithmetic, all off by default.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Refinements {
    /// Fraction of the nominal capacity that can be drawn before the node
    /// browns out (cut-off voltage, cold, ageing), in (0, 1]; `None`: all of it.
    pub usable_fraction: Option<f32>,
    /// Self-discharge as a fraction of the nominal capacity per year, in
    /// [0, 1]; modelled as a constant extra drain of
    /// `capacity · fraction / 8766 h` (linear, common practice for small
    /// yearly rates); `None`: no self-discharge.
    pub self_discharge_per_year: Option<f32>,
    /// Count the sleep current only outside the active time (airtime plus
    /// receive window) instead of all the time.
    pub sleep_outside_active: bool,
}

/// A battery: nominal capacity and the refinements that apply to it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Battery {
    capacity: MilliampHours,
}

impl Battery {
    /// A battery of nominal capacity `capacity` (> 0).
    pub fn new(capacity: MilliampHours) -> Result<Self> {
        positive("battery_mah", capacity.0)?;
        Ok(Battery { capacity })
    }

    /// Nominal capacity.
    pub fn capacity(&self) -> MilliampHours {
        self.capacity
    }

    /// Days until the battery is spent at a mean current `mean`:
    /// `capacity · 1000 / mean / 24`, with the usable fraction and the
    /// self-discharge of `r` when they are set.
    pub fn life(&self, mean: Microamps, r: &Refinements) -> Result<Days> {
        let mean = positive("mean_current_ua", mean.0)?;
        let mut usable_uah = self.capacity.0 * 1000.0;
        if let Some(u) = r.usable_fraction {
            usable_uah *= check_usable(u)?;
        }
        let mut drain = mean;
        if let Some(s) = r.self_discharge_per_year {
            drain += self.capacity.0 * 1000.0 * check_self_discharge(s)? / HOURS_PER_YEAR;
        }
        Ok(Days(usable_uah / drain / 24.0))
    }
}

fn check_usable(u: f32) -> Result<f32> {
    within("usable_fraction", positive("usable_fraction", u)?, 0.0, 1.0)
}

fn check_self_discharge(s: f32) -> Result<f32> {
    within("self_discharge_per_year", s, 0.0, 1.0)
}

/// Expected attempts and delivered fraction of a reading under resends
/// (see the [module](self) for the formulas).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Delivery {
    /// Expected number of transmissions per reading, in [1, R + 1].
    pub expected_attempts: f32,
    /// Fraction of readings delivered, `1 − p^{R+1}`.
    pub delivered_fraction: f32,
}

impl Delivery {
    /// Resends of a reading with loss probability `loss` per attempt, in
    /// [0, 1), and at most `max_retries` resends.
    #[allow(clippy::cast_possible_truncation)] // values in [0, 256]
    pub fn new(loss: f32, max_retries: u8) -> Result<Self> {
        let p = finite("loss_fraction", loss)?;
        if !(0.0..1.0).contains(&p) {
            return Err(Error::OutOfValidity {
                param: "loss_fraction",
                value: p,
                min: 0.0,
                max: 1.0,
            });
        }
        // Summed term by term in f64 (no 1 − p cancellation).
        let p = f64::from(p);
        let (mut attempts, mut pk) = (0.0f64, 1.0f64);
        for _ in 0..=max_retries {
            attempts += pk;
            pk *= p;
        }
        Ok(Delivery {
            expected_attempts: attempts as f32,
            delivered_fraction: (1.0 - pk) as f32,
        })
    }
}

/// What one transmission costs.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PacketCost {
    /// Charge of the whole packet: transmission, receive window, per-packet charge.
    pub charge: Microcoulombs,
    /// Of which the radio (transmission and receive window): what a resend repeats.
    pub radio_charge: Microcoulombs,
    /// Time on air.
    pub airtime: Milliseconds,
}

/// A radio's energy profile (see the [module](super) for the formulas).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EnergyProfile<const N: usize = TX_POINTS> {
    supply: Volts,
    tx_current: TxCurrentTable<N>,
    airtime: Milliseconds,
    rx_window: Milliseconds,
    rx_current: Milliamps,
    per_packet: Microcoulombs,
    sleep_current: Microamps,
    battery: Option<Battery>,
    refinements: Refinements,
}

impl<const N: usize> EnergyProfile<N> {
    /// A profile; every value is checked: the supply and the airtime must
    /// be positive, the other values not negative, and the table not empty.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        supply: Volts,
        tx_current: TxCurrentTable<N>,
        airtime: Milliseconds,
        rx_window: Milliseconds,
        rx_current: Milliamps,
        per_packet: Microcoulombs,
        sleep_current: Microamps,
    ) -> Result<Self> {
        positive("supply_v", supply.0)?;
        if tx_current.points().is_empty() {
            return Err(Error::NoSolution("tx_current_ma"));
        }
        positive("airtime_ms", airtime.0)?;
        non_negative("rx_window_ms", rx_window.0)?;
        non_negative("rx_current_ma", rx_current.0)?;
        non_negative("per_packet_uc", per_packet.0)?;
        non_negative("sleep_current_ua", sleep_current.0)?;
        Ok(EnergyProfile {
            supply,
            tx_current,
            airtime,
            rx_window,
            rx_current,
            per_packet,
            sleep_current,
            battery: None,
            refinements: Refinements::default(),
        })
    }

    /// The profile with a battery.
    pub fn with_battery(mut self, battery: Battery) -> Self {
        self.battery = Some(battery);
        self
    }

    /// The profile with refinements (checked here).
    pub fn with_refinements(mut self, r: Refinements) -> Result<Self> {
        if let Some(u) = r.usable_fraction {
            check_usable(u)?;
        }
        if let Some(s) = r.self_discharge_per_year {
            check_self_discharge(s)?;
        }
        self.refinements = r;
        Ok(self)
    }

    /// Supply voltage.
    pub fn supply(&self) -> Volts {
        self.supply
    }
    /// Transmit current table.
    pub fn tx_current(&self) -> &TxCurrentTable<N> {
        &self.tx_current
    }
    /// Airtime of one packet.
    pub fn airtime(&self) -> Milliseconds {
        self.airtime
    }
    /// Receive window after each packet.
    pub fn rx_window(&self) -> Milliseconds {
        self.rx_window
    }
    /// Receive current.
    pub fn rx_current(&self) -> Milliamps {
        self.rx_current
    }
    /// Fixed charge per reading (wake-up, sensor, processor).
    pub fn per_packet(&self) -> Microcoulombs {
        self.per_packet
    }
    /// Sleep current.
    pub fn sleep_current(&self) -> Microamps {
        self.sleep_current
    }
    /// The battery, if the profile has one.
    pub fn battery(&self) -> Option<&Battery> {
        self.battery.as_ref()
    }
    /// The refinements in force.
    pub fn refinements(&self) -> &Refinements {
        &self.refinements
    }

    /// What one packet sent at `p` costs:
    /// `I_tx(p) · airtime + I_rx · rx_window + per_packet`.
    pub fn packet_cost(&self, p: Dbm) -> Result<PacketCost> {
        self.packet_cost_for(p, self.airtime)
    }

    /// What one packet sent at `p` for `airtime` costs (a packet at a rate
    /// of a rate table: the profile's costing with that rate's airtime):
    /// `I_tx(p) · airtime + I_rx · rx_window + per_packet`.
    pub fn packet_cost_for(&self, p: Dbm, airtime: Milliseconds) -> Result<PacketCost> {
        let tx = self.tx_current.current_at(p)?;
        let radio = tx.0 * airtime.0 + self.rx_current.0 * self.rx_window.0;
        Ok(PacketCost {
            charge: Microcoulombs(radio + self.per_packet.0),
            radio_charge: Microcoulombs(radio),
            airtime,
        })
    }

    /// Charge of one packet sent at `p`, µC.
    pub fn charge_per_packet(&self, p: Dbm) -> Result<Microcoulombs> {
        Ok(self.packet_cost(p)?.charge)
    }

    /// Charge of one reading at `p` with loss probability `loss` per attempt
    /// and at most `max_retries` resends (a resend repeats the radio charge only).
    pub fn charge_per_reading(&self, p: Dbm, loss: f32, max_retries: u8) -> Result<Microcoulombs> {
        let c = self.packet_cost(p)?;
        let d = Delivery::new(loss, max_retries)?;
        Ok(Microcoulombs(
            self.per_packet.0 + c.radio_charge.0 * d.expected_attempts,
        ))
    }

    /// Charge per delivered packet: charge per reading / delivered fraction.
    pub fn charge_per_delivered(
        &self,
        p: Dbm,
        loss: f32,
        max_retries: u8,
    ) -> Result<Microcoulombs> {
        let q = self.charge_per_reading(p, loss, max_retries)?;
        let d = Delivery::new(loss, max_retries)?;
        Ok(Microcoulombs(q.0 / d.delivered_fraction))
    }

    /// Mean current for one reading of charge `q` every `interval`:
    /// `q / interval + sleep` (or, with `sleep_outside_active`,
    /// `q / interval + sleep · (1 − active / interval)`). An interval
    /// shorter than the active time (airtime · attempts + receive window ·
    /// attempts) is refused, and so are `attempts` outside 1..=256.
    pub fn mean_current_for(
        &self,
        q: Microcoulombs,
        attempts: f32,
        interval: Seconds,
    ) -> Result<Microamps> {
        let t = positive("interval_s", interval.0)?;
        let q = non_negative("charge_uc", q.0)?;
        // At most R + 1 = 256 attempts (max_retries is a u8).
        let attempts = within("expected_attempts", attempts, 1.0, 256.0)?;
        let active_s = (self.airtime.0 + self.rx_window.0) * attempts / 1000.0;
        if t < active_s {
            return Err(Error::OutOfValidity {
                param: "interval_s",
                value: t,
                min: active_s,
                max: f32::MAX,
            });
        }
        let sleep = if self.refinements.sleep_outside_active {
            self.sleep_current.0 * (1.0 - active_s / t)
        } else {
            self.sleep_current.0
        };
        Ok(Microamps(q / t + sleep))
    }

    /// Mean current sending one packet at `p` every `interval`.
    pub fn mean_current(&self, p: Dbm, interval: Seconds) -> Result<Microamps> {
        self.mean_current_for(self.charge_per_packet(p)?, 1.0, interval)
    }

    /// Mean current with resends (loss `loss` per attempt, at most `max_retries`).
    pub fn mean_current_with_resends(
        &self,
        p: Dbm,
        interval: Seconds,
        loss: f32,
        max_retries: u8,
    ) -> Result<Microamps> {
        let d = Delivery::new(loss, max_retries)?;
        let q = self.charge_per_reading(p, loss, max_retries)?;
        self.mean_current_for(q, d.expected_attempts, interval)
    }

    /// Battery life at a mean current (needs a battery in the profile).
    pub fn battery_life(&self, mean: Microamps) -> Result<Days> {
        self.battery
            .ok_or(Error::NoSolution("battery_mah"))?
            .life(mean, &self.refinements)
    }
}

#[cfg(test)]
#[allow(clippy::panic)]
mod tests {
    use super::*;

    fn table() -> TxCurrentTable {
        TxCurrentTable::from_points(&[(0.0, 20.0), (10.0, 30.0), (14.0, 44.0)]).unwrap_or_default()
    }

    #[test]
    fn interpolates_and_refuses_outside() {
        let t = table();
        assert_eq!(t.current_at(Dbm(0.0)), Ok(Milliamps(20.0)));
        assert_eq!(t.current_at(Dbm(5.0)), Ok(Milliamps(25.0)));
        assert_eq!(t.current_at(Dbm(12.0)), Ok(Milliamps(37.0)));
        assert_eq!(t.current_at(Dbm(14.0)), Ok(Milliamps(44.0)));
        assert!(matches!(
            t.current_at(Dbm(14.5)),
            Err(Error::OutOfValidity {
                param: "tx_dbm",
                ..
            })
        ));
        assert!(t.current_at(Dbm(-0.1)).is_err());
        assert!(t.current_at(Dbm(f32::NAN)).is_err());
    }

    #[test]
    fn one_point_table_is_valid_at_its_power_only() {
        let t: TxCurrentTable<4> = TxCurrentTable::from_points(&[(14.0, 44.0)]).unwrap_or_default();
        assert_eq!(t.current_at(Dbm(14.0)), Ok(Milliamps(44.0)));
        assert!(t.current_at(Dbm(13.0)).is_err());
    }

    #[test]
    fn refuses_unsorted_full_and_bad_tables() {
        assert_eq!(
            TxCurrentTable::<4>::from_points(&[(0.0, 1.0), (0.0, 2.0)]),
            Err(TableError::NotIncreasing { index: 1 })
        );
        assert_eq!(
            TxCurrentTable::<4>::from_points(&[(5.0, 1.0), (2.0, 2.0)]),
            Err(TableError::NotIncreasing { index: 1 })
        );
        assert_eq!(
            TxCurrentTable::<2>::from_points(&[(0.0, 1.0), (1.0, 2.0), (2.0, 3.0)]),
            Err(TableError::Full { capacity: 2 })
        );
        assert_eq!(
            TxCurrentTable::<2>::from_points(&[]),
            Err(TableError::Empty)
        );
        assert!(matches!(
            TxCurrentTable::<2>::from_points(&[(0.0, -1.0)]),
            Err(TableError::BadPoint { index: 0, .. })
        ));
    }

    #[test]
    fn charge_mean_current_and_life() {
        let prof = EnergyProfile::new(
            Volts(3.3),
            table(),
            Milliseconds(100.0),
            Milliseconds(50.0),
            Milliamps(10.0),
            Microcoulombs(500.0),
            Microamps(2.0),
        )
        .and_then(|p| Ok(p.with_battery(Battery::new(MilliampHours(1000.0))?)));
        let Ok(prof) = prof else {
            panic!("profile refused: {prof:?}")
        };
        // 44 mA · 100 ms + 10 mA · 50 ms + 500 µC = 4400 + 500 + 500.
        assert_eq!(prof.charge_per_packet(Dbm(14.0)), Ok(Microcoulombs(5400.0)));
        // 5400 µC / 60 s + 2 µA = 92 µA.
        let i = prof
            .mean_current(Dbm(14.0), Seconds(60.0))
            .unwrap_or_default();
        assert!((i.0 - 92.0).abs() < 1e-4, "{i:?}");
        // 1000 mAh · 1000 / 92 µA / 24 = 452.898... days.
        let d = prof.battery_life(i).unwrap_or_default();
        assert!((d.0 - 452.898_55).abs() < 1e-3, "{d:?}");
        assert!(prof.mean_current(Dbm(14.0), Seconds(0.1)).is_err());
        assert!(prof
            .mean_current_for(Microcoulombs(1.0), 0.5, Seconds(60.0))
            .is_err());
    }

    #[test]
    fn resends() {
        let d = Delivery::new(0.5, 2).unwrap_or(Delivery {
            expected_attempts: 0.0,
            delivered_fraction: 0.0,
        });
        assert_eq!(d.expected_attempts, 1.75);
        assert_eq!(d.delivered_fraction, 0.875);
        assert!(Delivery::new(1.0, 3).is_err());
        assert!(Delivery::new(-0.1, 3).is_err());
    }
}
