//! The energy profile in the controller's integer units, for choosing a
//! rate per packet: the charge of one packet at a power level and an
//! airtime, with no float on the way.
//!
//! The charge of a packet sent at power `P` for `t` µs is
//! `I_tx(P) · t + I_rx · rx_window + per_packet` — [`EnergyProfile::packet_cost_for`]
//! with the rate's airtime, the one formula of the profile ([`super::profile`]),
//! kept here as integers: powers in 1/8192 dB, currents in µA, charges in
//! pC (µA · µs). Between two points of the transmit current table the
//! current is interpolated linearly, as the profile does, with the slope of
//! each segment precomputed in 2⁻¹⁶ µA per 1/8192 dB: a lookup is a walk
//! over at most [`TX_POINTS`] points and one multiplication, no division.

use super::profile::{EnergyProfile, TX_POINTS};
use crate::error::{Error, Result};

/// Fractional bits of a segment's slope (2⁻¹⁶ µA per 1/8192 dB: at most
/// 0.13 µA off per dB of a segment; an `i32` holds slopes up to 268 A per
/// dB, saturating beyond).
const SLOPE_BITS: u32 = 16;

/// Steps per dB of a power level (1/8192 dB, the controller's scale).
const FINE_PER_DB: f32 = 8192.0;

/// A profile's charge per packet in integers (see the module).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChargeTable {
    /// Powers of the points, 1/8192 dBm, increasing.
    level: [i32; TX_POINTS],
    /// Currents of the points, µA.
    current: [u32; TX_POINTS],
    /// Slope from point `i` to point `i + 1`, 2⁻¹⁶ µA per 1/8192 dB.
    slope: [i32; TX_POINTS],
    len: u8,
    /// Receive window and per-packet charge, pC.
    fixed_pc: u64,
    /// The per-packet charge alone (wake-up, sensor), pC.
    per_packet_pc: u64,
    /// The profile's own airtime, µs.
    airtime_us: u32,
}

#[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
fn round_u64(x: f64) -> u64 {
    if x.is_finite() && x > 0.0 {
        libm::round(x) as u64
    } else {
        0
    }
}

#[allow(clippy::cast_possible_truncation)]
fn fine(db: f32) -> i32 {
    // Powers of a validated table are finite: far inside ±2¹⁸ dB.
    libm::roundf(db * FINE_PER_DB) as i32
}

impl ChargeTable {
    /// The profile's charge per packet in integers. Refused for a profile
    /// with more than [`TX_POINTS`] points.
    pub fn from_profile<const N: usize>(p: &EnergyProfile<N>) -> Result<Self> {
        let pts = p.tx_current().points();
        if pts.len() > TX_POINTS || pts.is_empty() {
            return Err(Error::NoSolution("tx_current_ma"));
        }
        let mut t = ChargeTable {
            level: [0; TX_POINTS],
            current: [0; TX_POINTS],
            slope: [0; TX_POINTS],
            len: 0,
            fixed_pc: round_u64(
                (f64::from(p.rx_current().0) * f64::from(p.rx_window().0)
                    + f64::from(p.per_packet().0))
                    * 1e6,
            ),
            per_packet_pc: round_u64(f64::from(p.per_packet().0) * 1e6),
            airtime_us: {
                #[allow(clippy::cast_possible_truncation)] // validated positive, below an hour
                {
                    round_u64(f64::from(p.airtime().0) * 1e3).min(u64::from(u32::MAX)) as u32
                }
            },
        };
        for (i, pt) in pts.iter().enumerate() {
            if let (Some(l), Some(c)) = (t.level.get_mut(i), t.current.get_mut(i)) {
                *l = fine(pt.power.0);
                #[allow(clippy::cast_possible_truncation)] // µA of a radio: far below 2³²
                {
                    *c = round_u64(f64::from(pt.current.0) * 1e3).min(u64::from(u32::MAX)) as u32;
                }
            }
        }
        for i in 1..pts.len() {
            let (Some(&l0), Some(&l1), Some(&c0), Some(&c1)) = (
                t.level.get(i - 1),
                t.level.get(i),
                t.current.get(i - 1),
                t.current.get(i),
            ) else {
                continue;
            };
            let dl = i64::from(l1) - i64::from(l0);
            let dc = i64::from(c1) - i64::from(c0);
            if let Some(s) = t.slope.get_mut(i - 1) {
                let x = (dc << SLOPE_BITS).checked_div(dl).unwrap_or(0);
                *s = i32::try_from(x).unwrap_or(if x < 0 { i32::MIN } else { i32::MAX });
            }
        }
        t.len = u8::try_from(pts.len()).unwrap_or(0);
        Ok(t)
    }

    /// Lowest and highest power of the table, 1/8192 dBm.
    pub fn range_fine(&self) -> (i32, i32) {
        let n = usize::from(self.len);
        (
            self.level.first().copied().unwrap_or(0),
            self.level.get(n.saturating_sub(1)).copied().unwrap_or(0),
        )
    }

    /// Supply current at the level `x` (1/8192 dBm), µA, interpolated
    /// linearly; the nearest end of the table outside it (the controller
    /// checks at construction that its levels are inside).
    #[inline]
    pub fn current_ua(&self, x: i32) -> u32 {
        let n = usize::from(self.len);
        let mut i = 0usize;
        // The segment whose upper point is at or above x.
        while i + 1 < n {
            match self.level.get(i + 1) {
                Some(&l) if x > l => i += 1,
                _ => break,
            }
        }
        let (Some(&l0), Some(&c0), Some(&s)) =
            (self.level.get(i), self.current.get(i), self.slope.get(i))
        else {
            return 0;
        };
        if x <= l0 || i + 1 >= n {
            return if x <= l0 || n == 1 {
                c0
            } else {
                self.current.get(n - 1).copied().unwrap_or(c0)
            };
        }
        let d = i64::from(x) - i64::from(l0);
        let c = i64::from(c0) + ((d * i64::from(s)) >> SLOPE_BITS);
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        if c <= 0 {
            0
        } else {
            c.min(i64::from(u32::MAX)) as u32
        }
    }

    /// Number of points of the transmit current table.
    pub(crate) fn points(&self) -> usize {
        usize::from(self.len)
    }

    /// Segment `i` of the table (from point `i` to point `i + 1`): its
    /// lower and upper power (1/8192 dBm) and its slope (2⁻¹⁶ µA per
    /// 1/8192 dB); `None` past the last segment.
    pub(crate) fn segment(&self, i: usize) -> Option<(i32, i32, i32)> {
        if i + 1 >= usize::from(self.len) {
            return None;
        }
        Some((
            *self.level.get(i)?,
            *self.level.get(i + 1)?,
            *self.slope.get(i)?,
        ))
    }

    /// Charge of one packet at level `x` known to lie in segment `j` (see
    /// [`Self::segment`]; no search), pC: the same value as
    /// [`Self::charge_pc`] for an `x` inside that segment.
    pub(crate) fn charge_in(&self, j: usize, x: i32, airtime_us: u32) -> u64 {
        let (Some(&l0), Some(&c0), Some(&s)) =
            (self.level.get(j), self.current.get(j), self.slope.get(j))
        else {
            return self.charge_pc(x, airtime_us);
        };
        let d = i64::from(x) - i64::from(l0);
        let c = i64::from(c0) + ((d * i64::from(s)) >> SLOPE_BITS);
        let c = u64::try_from(c.max(0))
            .unwrap_or(0)
            .min(u64::from(u32::MAX));
        // Both factors below 2³²: the product fits (a saturating multiply
        // of two u64 is a 128-bit check on a 32-bit core).
        (c * u64::from(airtime_us)).saturating_add(self.fixed_pc)
    }

    /// The profile's own airtime (a packet without a rate table), µs.
    pub fn profile_airtime_us(&self) -> u32 {
        self.airtime_us
    }

    /// The fixed per-packet charge alone (wake-up, sensor), pC: what a
    /// packet held by the duty budget costs.
    pub fn per_packet_pc(&self) -> u64 {
        self.per_packet_pc
    }

    /// Charge of one packet at level `x` (1/8192 dBm) and `airtime_us`, pC.
    #[inline]
    pub fn charge_pc(&self, x: i32, airtime_us: u32) -> u64 {
        // Both factors below 2³²: the product fits.
        (u64::from(self.current_ua(x)) * u64::from(airtime_us)).saturating_add(self.fixed_pc)
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::energy::{Microamps, Microcoulombs, Milliamps, Milliseconds, TxCurrentTable, Volts};
    use crate::units::Dbm;

    fn profile() -> EnergyProfile {
        let t =
            TxCurrentTable::from_points(&[(-9.0, 20.0), (0.0, 30.0), (14.0, 45.0), (22.0, 120.0)])
                .unwrap();
        EnergyProfile::new(
            Volts(3.3),
            t,
            Milliseconds(100.0),
            Milliseconds(20.0),
            Milliamps(10.0),
            Microcoulombs(50.0),
            Microamps(2.0),
        )
        .unwrap()
    }

    #[test]
    fn integer_charge_agrees_with_the_profile() {
        let p = profile();
        let c = ChargeTable::from_profile(&p).unwrap();
        for dbm in [-9.0f32, -3.0, 0.0, 7.5, 14.0, 18.0, 22.0] {
            for air_ms in [1.0f32, 41.216, 100.0, 991.232] {
                let want = p
                    .packet_cost_for(Dbm(dbm), Milliseconds(air_ms))
                    .unwrap()
                    .charge
                    .0;
                #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
                let us = (air_ms * 1000.0).round() as u32;
                let got = c.charge_pc(fine(dbm), us) as f64 * 1e-6;
                let rel = (got - f64::from(want)).abs() / f64::from(want);
                assert!(rel < 1e-4, "{dbm} dBm {air_ms} ms: {got} µC against {want}");
            }
        }
        assert_eq!(c.range_fine(), (fine(-9.0), fine(22.0)));
    }
}
