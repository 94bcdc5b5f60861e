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
