//! Duty cycle: the fraction of time a transmitter is on the air.
//!
//! One packet of airtime `T_air` every interval `T` occupies the channel
//! for `T_air / T` of the time, `3600 s · T_air / T` per hour. A duty-cycle
//! limit `d` needs `T ≥ T_air / d`.
//!
//! [`EN_300_220_SUB_BANDS`] lists the sub-band limits of EN 300 220 for
//! non-specific short-range devices (as carried by ERC Recommendation 70-03,
//! Annex 1). **The whole table is from memory**: check the current edition
//! of the standard and the national rules that apply before relying on it.

use crate::error::{positive, within, Result};
use crate::units::{Hertz, Milliwatts};

use super::{Milliseconds, Seconds};

/// Fraction of the time on air with one packet of `airtime` every `interval`.
pub fn duty_cycle(airtime: Milliseconds, interval: Seconds) -> Result<f32> {
    let a = positive("airtime_ms", airtime.0)?;
    let t = positive("interval_s", interval.0)?;
    Ok(a / (t * 1000.0))
}

/// Airtime per hour with one packet of `airtime` every `interval`.
pub fn airtime_per_hour(airtime: Milliseconds, interval: Seconds) -> Result<Milliseconds> {
    let a = positive("airtime_ms", airtime.0)?;
    let t = positive("interval_s", interval.0)?;
    Ok(Milliseconds(a * 3600.0 / t))
}

/// Shortest packet interval that keeps within a duty-cycle `limit` (a
/// fraction in (0, 1]).
pub fn min_interval(airtime: Milliseconds, limit: f32) -> Result<Seconds> {
    let a = positive("airtime_ms", airtime.0)?;
    let d = within(
        "duty_cycle_limit",
        positive("duty_cycle_limit", limit)?,
        0.0,
        1.0,
    )?;
    Ok(Seconds(a / 1000.0 / d))
}

/// One sub-band of a duty-cycle table.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SubBand {
    /// Lower edge.
    pub low: Hertz,
    /// Upper edge.
    pub high: Hertz,
    /// Highest duty cycle, as a fraction (1.0: no limit).
    pub duty_limit: f32,
    /// Highest effective radiated power (ERP, over a half-wave dipole).
    pub max_erp: Milliwatts,
}

impl SubBand {
    /// Whether a channel of `bandwidth` centred on `centre` lies inside the
    /// sub-band (edges included).
    pub fn contains(&self, centre: Hertz, bandwidth: Hertz) -> bool {
        let half = bandwidth.0 / 2.0;
        centre.0 - half >= self.low.0 && centre.0 + half <= self.high.0
    }
}

const fn band(low_mhz: f32, high_mhz: f32, duty: f32, erp_mw: f32) -> SubBand {
    SubBand {
        low: Hertz(low_mhz * 1e6),
        high: Hertz(high_mhz * 1e6),
        duty_limit: duty,
        max_erp: Milliwatts(erp_mw),
    }
}

/// EN 300 220 sub-bands for non-specific short-range devices: edges, duty
/// cycle, ERP (all from memory; see the [module](self)). Sub-bands for
/// alarms, social alarms and other specific uses are left out. The
/// 869.7-870 MHz band appears twice: 5 mW without a duty-cycle limit, or
/// 25 mW at 1 %.
pub const EN_300_220_SUB_BANDS: [SubBand; 8] = [
    band(433.05, 434.79, 0.10, 10.0),
    band(863.0, 865.0, 0.001, 25.0),
    band(865.0, 868.0, 0.01, 25.0),
    band(868.0, 868.6, 0.01, 25.0),
    band(868.7, 869.2, 0.001, 25.0),
    band(869.4, 869.65, 0.10, 500.0),
    band(869.7, 870.0, 1.0, 5.0),
    band(869.7, 870.0, 0.01, 25.0),
];

/// The EN 300 220 sub-bands that hold a whole channel of `bandwidth`
/// centred on `centre` (none when it straddles an edge or lies outside).
pub fn en_300_220_sub_bands(
    centre: Hertz,
    bandwidth: Hertz,
) -> impl Iterator<Item = &'static SubBand> {
    EN_300_220_SUB_BANDS
        .iter()
        .filter(move |b| b.contains(centre, bandwidth))
}

/// Length of one slot of an [`AirtimeWindow`], ms (two minutes).
pub const SLOT_MS: u64 = 120_000;

/// Slots of an [`AirtimeWindow`]: one hour and one minute (the hour, and
/// the packets that started up to one minute, the longest airtime of a
/// rate, before it and still overlap it) touch at most 32 slots of two
/// minutes.
pub const WINDOW_SLOTS: usize = 32;

/// One hour, ms.
const HOUR_MS: f32 = 3_600_000.0;

/// A duty-cycle budget that is a guarantee: the airtime of the last hour
/// in a fixed ring of two-minute slots, O(1) per packet, no allocation.
///
/// ## The rule and why it holds
/// Each packet's airtime goes into the slot of its start time. A packet may
/// be sent only when the sum over the whole ring (its own slot and the 31
/// before it) plus its airtime stays within the limit
/// ([`AirtimeWindow::fits`]).
///
/// Take any window of one hour `[a, a + 1 h)`. A packet that overlaps it
/// started in `[a − 1 min, a + 1 h)` (no airtime exceeds one minute), an
/// interval of 61 minutes, which touches at most 32 consecutive slots of
/// two minutes. Let `p` be the last packet that started there: when it was
/// sent the ring held exactly the 32 slots ending at `p`'s slot, which
/// include every packet that overlaps the window, and their sum with `p`
/// was within the limit. So the airtime inside any one-hour window,
/// however it is placed, is at most the limit. The price: the ring
/// remembers up to 64 minutes, so up to four minutes of history count that
/// an exact window would already have forgotten.
///
/// Time stamps are taken as non-decreasing: a packet stamped before the
/// current slot counts in the current slot. A gap of more than 32 slots
/// clears the ring at once.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AirtimeWindow {
    /// Airtime started in each slot, µs.
    slots: [u32; WINDOW_SLOTS],
    /// Sum over the ring, µs (at most the limit plus one airtime).
    sum: u32,
    /// Most airtime in any hour, µs.
    limit_us: u32,
    /// Start of the current slot, ms (meaningful once `started`).
    slot_start_ms: u64,
    /// Index of the current slot.
    head: u8,
    started: bool,
}

impl AirtimeWindow {
    /// An empty window for a limit of `fraction` of each hour, in (0, 1].
    pub fn new(fraction: f32) -> Result<Self> {
        let f = within("duty_limit", positive("duty_limit", fraction)?, 0.0, 1.0)?;
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        // At most 3.6·10⁹ µs: fits a u32. Rounded down: never above the limit.
        let limit_us = libm::floor(f64::from(f) * f64::from(HOUR_MS) * 1000.0) as u32;
        Ok(AirtimeWindow {
            slots: [0; WINDOW_SLOTS],
            sum: 0,
            limit_us,
            slot_start_ms: 0,
            head: 0,
            started: false,
        })
    }

    /// The limit, µs of airtime in any hour.
    pub fn limit_us(&self) -> u32 {
        self.limit_us
    }

    /// Airtime in the ring now, µs.
    pub fn used_us(&self) -> u32 {
        self.sum
    }

    /// Airtime a packet may still take now, µs.
    pub fn remaining_us(&self) -> u32 {
        self.limit_us.saturating_sub(self.sum)
    }

    /// Move the ring to time `t_ms`: the slots that left it are dropped.
    /// O(1): at most [`WINDOW_SLOTS`] slots are cleared.
    pub fn advance(&mut self, t_ms: u64) {
        if !self.started {
            self.started = true;
            self.slot_start_ms = t_ms;
            return;
        }
        let mut moved = 0usize;
        while t_ms.saturating_sub(self.slot_start_ms) >= SLOT_MS {
            if moved >= WINDOW_SLOTS {
                // Everything has left the ring: start afresh at t.
                self.slots = [0; WINDOW_SLOTS];
                self.sum = 0;
                self.slot_start_ms = t_ms;
                return;
            }
            let next = usize::from(self.head) + 1;
            let next = if next >= WINDOW_SLOTS { 0 } else { next };
            self.head = u8::try_from(next).unwrap_or(0);
            if let Some(s) = self.slots.get_mut(next) {
                self.sum = self.sum.saturating_sub(*s);
                *s = 0;
            }
            self.slot_start_ms = self.slot_start_ms.saturating_add(SLOT_MS);
            moved += 1;
        }
    }

    /// Whether a packet of `airtime_us` fits the budget now.
    pub fn fits(&self, airtime_us: u32) -> bool {
        u64::from(self.sum) + u64::from(airtime_us) <= u64::from(self.limit_us)
    }

    /// Count a packet of `airtime_us` sent now (after [`AirtimeWindow::advance`]).
    pub fn add(&mut self, airtime_us: u32) {
        if let Some(s) = self.slots.get_mut(usize::from(self.head)) {
            *s = s.saturating_add(airtime_us);
        }
        self.sum = self.sum.saturating_add(airtime_us);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn duty_arithmetic() {
        // 41.216 ms every 60 s: 0.0687 %, 2473 ms per hour.
        let d = duty_cycle(Milliseconds(41.216), Seconds(60.0)).unwrap_or(0.0);
        assert!((d - 41.216e-3 / 60.0).abs() < 1e-9);
        let h = airtime_per_hour(Milliseconds(41.216), Seconds(60.0)).unwrap_or_default();
        assert!((h.0 - 2472.96).abs() < 1e-3);
        // 1 % of the time with 41.216 ms packets: one every 4.1216 s.
        let t = min_interval(Milliseconds(41.216), 0.01).unwrap_or_default();
        assert!((t.0 - 4.1216).abs() < 1e-5);
        assert!(min_interval(Milliseconds(41.216), 1.5).is_err());
        assert!(duty_cycle(Milliseconds(1.0), Seconds(0.0)).is_err());
    }

    #[test]
    fn the_window_forgets_after_32_slots_and_refuses_beyond_the_limit() {
        // 1 % of an hour: 36 s of airtime, less the f32's representation
        // of 0.01 (0.0099999998), rounded down: 35 999 999 µs.
        let mut w = AirtimeWindow::new(0.01).unwrap_or_else(|_| unreachable!());
        assert_eq!(w.limit_us(), 35_999_999);
        w.advance(0);
        assert!(w.fits(35_999_999));
        assert!(!w.fits(36_000_000));
        w.add(30_000_000);
        w.advance(31 * SLOT_MS);
        assert!(!w.fits(6_000_000));
        // The slot of t = 0 leaves the ring at 32 slots.
        w.advance(32 * SLOT_MS);
        assert_eq!(w.used_us(), 0);
        assert!(w.fits(35_999_999));
        w.add(1);
        w.advance(10_000 * SLOT_MS);
        assert_eq!(w.used_us(), 0);
        assert!(AirtimeWindow::new(0.0).is_err());
        assert!(AirtimeWindow::new(1.5).is_err());
    }

    #[test]
    fn sub_band_lookup() {
        let mut g = en_300_220_sub_bands(Hertz(868.1e6), Hertz(125e3));
        assert_eq!(g.next().map(|b| b.duty_limit), Some(0.01));
        assert_eq!(g.next(), None);
        // Straddling the 868.6 MHz edge: no sub-band.
        assert_eq!(
            en_300_220_sub_bands(Hertz(868.55e6), Hertz(125e3)).count(),
            0
        );
        assert_eq!(
            en_300_220_sub_bands(Hertz(869.85e6), Hertz(125e3)).count(),
            2
        );
        assert_eq!(en_300_220_sub_bands(Hertz(915e6), Hertz(0.0)).count(), 0);
        // The table is sorted and each band is non-empty.
        for b in EN_300_220_SUB_BANDS {
            assert!(b.low.0 < b.high.0 && b.duty_limit > 0.0 && b.duty_limit <= 1.0);
        }
    }
}
