//! Settings of the transmit-power controller and their validation.

use core::fmt;

use crate::rate::{RateName, RateTable};
use crate::units::{Db, Dbi, Dbm};

/// Largest number of levels a [`LevelTable`] holds.
pub const MAX_LEVELS: usize = 16;

/// Bound on the magnitude of every power, level and range setting, dB or dBm.
/// Readings are stored in 1/32 dB steps in an `i16`, so the controller's
/// internal quantities must stay well inside ±1024 dB; ±300 leaves room for
/// any real radio.
pub const SETTING_LIMIT_DB: f32 = 300.0;

/// Smallest uniform power step accepted, dB. Real radios step their output
/// in 0.1 dB or coarser (common practice); 0.01 dB keeps the number of
/// levels over the widest span (600 dB) at 60 000, far inside the `i32`
/// level index.
pub const MIN_UNIFORM_STEP_DB: f32 = 0.01;

/// Fractional bits of the controller's adaptive margin: it runs in 2⁻⁴⁰ dB
/// in an `i64`, so that its fall per delivered packet, `Δup·p/(1−p)`, keeps
/// at least three significant digits down to the smallest accepted target
/// outage (±300 dB fits with room to spare).
pub(crate) const MARGIN_BITS: u32 = 40;

/// Steps per dB of the controller's adaptive margin.
pub(crate) const MARGIN_STEPS_PER_DB: f32 = (1u64 << MARGIN_BITS) as f32;

/// Largest window the controller accepts (its indices and integer sums are
/// sized for it).
pub const MAX_WINDOW: usize = 4096;

/// A table of up to [`MAX_LEVELS`] transmit powers the radio supports, in
/// strictly ascending order.
///
/// With `serde` it reads and writes as a plain list of numbers (dBm), e.g.
/// `table = [-9, -3, 0, 5, 10, 14]` in TOML.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LevelTable {
    levels: [Dbm; MAX_LEVELS],
    len: u8,
}

impl LevelTable {
    /// A table from a slice of levels (ascending, finite, 1 to 16 of them).
    pub fn new(levels: &[Dbm]) -> Result<Self, ConfigError> {
        if levels.is_empty() || levels.len() > MAX_LEVELS {
            return Err(ConfigError::OutOfRange {
                setting: "steps.table",
                value: levels.len() as f32,
                min: 1.0,
                max: MAX_LEVELS as f32,
            });
        }
        let mut t = LevelTable {
            levels: [Dbm(0.0); MAX_LEVELS],
            len: 0,
        };
        for (slot, l) in t.levels.iter_mut().zip(levels.iter()) {
            *slot = *l;
        }
        t.len = u8::try_from(levels.len()).unwrap_or(0);
        t.check()?;
        Ok(t)
    }

    /// The levels, ascending.
    pub fn levels(&self) -> &[Dbm] {
        self.levels.get(..usize::from(self.len)).unwrap_or(&[])
    }

    fn check(&self) -> Result<(), ConfigError> {
        if self.len == 0 || usize::from(self.len) > MAX_LEVELS {
            return Err(ConfigError::OutOfRange {
                setting: "steps.table",
                value: f32::from(self.len),
                min: 1.0,
                max: MAX_LEVELS as f32,
            });
        }
        let mut prev: Option<f32> = None;
        for l in self.levels() {
            check_level("steps.table", l.0)?;
            if let Some(p) = prev {
                if l.0 <= p {
                    return Err(ConfigError::Inconsistent {
                        setting: "steps.table",
                        why: "levels must be strictly ascending",
                    });
                }
            }
            prev = Some(l.0);
        }
        if self.unit().is_none() {
            return Err(ConfigError::Inconsistent {
                setting: "steps.table",
                why: "levels must all be multiples of 0.01 dB, or all of 1/64 dB",
            });
        }
        Ok(())
    }

    /// Steps per dB in which every level is a whole number (100 or 64), if
    /// any: the controller keeps its levels that way, in 16-bit integers.
    pub(crate) fn unit(&self) -> Option<u8> {
        let whole = |per_db: f32| {
            self.levels()
                .iter()
                .all(|l| libm::roundf(l.0 * per_db) / per_db == l.0)
        };
        if whole(100.0) {
            Some(100)
        } else if whole(64.0) {
            Some(64)
        } else {
            None
        }
    }
}

#[cfg(feature = "serde")]
mod level_serde {
    use super::{Dbm, LevelTable, MAX_LEVELS};
    use core::fmt;
    use serde::de::{Error as _, SeqAccess, Visitor};
    use serde::ser::SerializeSeq;

    impl serde::Serialize for LevelTable {
        fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
            let mut seq = s.serialize_seq(Some(self.levels().len()))?;
            for l in self.levels() {
                seq.serialize_element(&l.0)?;
            }
            seq.end()
        }
    }

    struct LevelsVisitor;

    impl<'de> Visitor<'de> for LevelsVisitor {
        type Value = LevelTable;
        fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
            write!(
                f,
                "a list of 1 to {MAX_LEVELS} ascending transmit powers in dBm"
            )
        }
        fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<LevelTable, A::Error> {
            let mut levels = [Dbm(0.0); MAX_LEVELS];
            let mut n = 0usize;
            while let Some(x) = seq.next_element::<f32>()? {
                match levels.get_mut(n) {
                    Some(slot) => *slot = Dbm(x),
                    None => {
                        return Err(A::Error::custom(format_args!(
                            "steps.table: more than {MAX_LEVELS} levels"
                        )))
                    }
                }
                n += 1;
            }
            LevelTable::new(levels.get(..n).unwrap_or(&[])).map_err(A::Error::custom)
        }
    }

    impl<'de> serde::Deserialize<'de> for LevelTable {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<LevelTable, D::Error> {
            d.deserialize_seq(LevelsVisitor)
        }
    }
}

/// The transmit powers the radio can be set to.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case"))]
pub enum PowerSteps {
    /// Every `min_tx_dbm + k·step` up to `max_tx_dbm` (TOML: `steps = { uniform = 1.0 }`).
    Uniform(Db),
    /// Only the listed levels (TOML: `steps = { table = [-9, 0, 10, 14] }`).
    Table(LevelTable),
}

/// The regulatory cap on EIRP the controller keeps to: a decision the
/// integrator must make, either a level or explicitly none (the radio's own
/// maximum then bounds the power alone).
///
/// With `serde` it reads and writes as a number (dBm) or the string `"none"`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EirpCap {
    /// `tx + antenna_gain ≤` this level.
    AtMost(Dbm),
    /// No cap is configured: only `max_tx_dbm` bounds the power.
    NoCap,
}

impl EirpCap {
    /// The cap's level, if there is one.
    pub const fn level(self) -> Option<Dbm> {
        match self {
            EirpCap::AtMost(l) => Some(l),
            EirpCap::NoCap => None,
        }
    }
}

/// The regional duty-cycle limit the controller keeps to: the largest
/// fraction of any one hour the radio may spend on air. No built-in default:
/// the regional limit must be stated (EN 300 220 sub-bands give 0.1 % to
/// 10 %; check the rules that apply), or explicitly none.
///
/// With `serde` it reads and writes as a number (a fraction) or `"none"`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DutyLimit {
    /// Airtime in any one-hour window at most this fraction of the hour.
    AtMost(f32),
    /// No duty-cycle budget.
    NoLimit,
}

impl DutyLimit {
    /// The limit as a fraction, if there is one.
    pub const fn fraction(self) -> Option<f32> {
        match self {
            DutyLimit::AtMost(f) => Some(f),
            DutyLimit::NoLimit => None,
        }
    }
}

#[cfg(feature = "serde")]
mod duty_serde {
    use super::DutyLimit;
    use core::fmt;
    use serde::de::{Error as _, Visitor};

    impl serde::Serialize for DutyLimit {
        fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
            match self {
                DutyLimit::AtMost(f) => s.serialize_f32(*f),
                DutyLimit::NoLimit => s.serialize_str("none"),
            }
        }
    }

    struct DutyVisitor;

    impl Visitor<'_> for DutyVisitor {
        type Value = DutyLimit;
        fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
            f.write_str("a duty-cycle limit as a fraction, or \"none\"")
        }
        fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<DutyLimit, E> {
            #[allow(clippy::cast_possible_truncation)] // checked by validate
            Ok(DutyLimit::AtMost(v as f32))
        }
        fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<DutyLimit, E> {
            #[allow(clippy::cast_precision_loss)] // checked by validate
            Ok(DutyLimit::AtMost(v as f32))
        }
        fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<DutyLimit, E> {
            #[allow(clippy::cast_precision_loss)] // checked by validate
            Ok(DutyLimit::AtMost(v as f32))
        }
        fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<DutyLimit, E> {
            if v.eq_ignore_ascii_case("none") {
                Ok(DutyLimit::NoLimit)
            } else {
                Err(E::custom(format_args!(
                    "duty_limit: '{v}' is neither a fraction nor \"none\""
                )))
            }
        }
    }

    impl<'de> serde::Deserialize<'de> for DutyLimit {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<DutyLimit, D::Error> {
            d.deserialize_any(DutyVisitor).map_err(D::Error::custom)
        }
    }
}

#[cfg(feature = "serde")]
mod cap_serde {
    use super::{Dbm, EirpCap};
    use core::fmt;
    use serde::de::{Error as _, Visitor};

    impl serde::Serialize for EirpCap {
        fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
            match self {
                EirpCap::AtMost(l) => s.serialize_f32(l.0),
                EirpCap::NoCap => s.serialize_str("none"),
            }
        }
    }

    struct CapVisitor;

    impl Visitor<'_> for CapVisitor {
        type Value = EirpCap;
        fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
            f.write_str("an EIRP cap in dBm, or \"none\"")
        }
        fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<EirpCap, E> {
            #[allow(clippy::cast_possible_truncation)] // checked by validate
            Ok(EirpCap::AtMost(Dbm(v as f32)))
        }
        fn visit_f32<E: serde::de::Error>(self, v: f32) -> Result<EirpCap, E> {
            Ok(EirpCap::AtMost(Dbm(v)))
        }
        fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<EirpCap, E> {
            #[allow(clippy::cast_precision_loss)] // checked by validate
            Ok(EirpCap::AtMost(Dbm(v as f32)))
        }
        fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<EirpCap, E> {
            #[allow(clippy::cast_precision_loss)] // checked by validate
            Ok(EirpCap::AtMost(Dbm(v as f32)))
        }
        fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<EirpCap, E> {
            if v.eq_ignore_ascii_case("none") {
                Ok(EirpCap::NoCap)
            } else {
                Err(E::custom(format_args!(
                    "eirp_cap_dbm: '{v}' is neither a number of dBm nor \"none\""
                )))
            }
        }
    }

    impl<'de> serde::Deserialize<'de> for EirpCap {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<EirpCap, D::Error> {
            d.deserialize_any(CapVisitor).map_err(D::Error::custom)
        }
    }
}

/// Settings of a [`crate::control::Controller`].
///
/// With the `serde` feature the field names below are the keys of the host's
/// controller TOML file; missing keys take the values of
/// [`ControllerConfig::sub_ghz_node`], unknown keys are refused.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(default, deny_unknown_fields))]
pub struct ControllerConfig {
    /// SNR at the far end below which a packet is lost, dB.
    pub required_snr_db: Db,
    /// Wanted probability of losing a packet, strictly between 0 and 1.
    pub target_outage: f32,
    /// Lowest power the radio can transmit.
    pub min_tx_dbm: Dbm,
    /// Highest power the radio can transmit.
    pub max_tx_dbm: Dbm,
    /// Regulatory cap on EIRP: the controller keeps `tx + antenna_gain ≤ cap`
    /// (or, with [`EirpCap::NoCap`], only `tx ≤ max_tx_dbm`).
    pub eirp_cap_dbm: EirpCap,
    /// Gain of this device's antenna (counts against the EIRP cap).
    pub antenna_gain_dbi: Dbi,
    /// Gain of the far end's antenna (only used to report the path loss).
    pub far_antenna_gain_dbi: Dbi,
    /// Power used before enough feedback has arrived.
    pub start_tx_dbm: Dbm,
    /// The powers the radio supports.
    pub steps: PowerSteps,
    /// Largest rise of the power in one update.
    pub max_step_up_db: Db,
    /// Largest fall of the power in one update.
    pub max_step_down_db: Db,
    /// The power falls only when the requirement is this far below a lower
    /// level (hysteresis against dithering between two levels).
    pub deadband_db: Db,
    /// Rise of the adaptive margin after each lost packet (Δup). After each
    /// delivered packet it falls by `Δup·p/(1−p)`, so the loss rate settles
    /// at the target `p`.
    pub margin_step_db: Db,
    /// Lowest value of the adaptive margin. The controller keeps the margin
    /// to 1/8192 dB, inside the bounds; equal bounds (a fixed margin) that are
    /// not a multiple of 1/8192 dB give the nearest one (at most 1/16384 dB
    /// off).
    pub margin_min_db: Db,
    /// Highest value of the adaptive margin.
    pub margin_max_db: Db,
    /// Readings needed in the window before the estimate drives the power.
    pub min_readings: u16,
    /// Number of readings over which the spread of the prediction errors is
    /// averaged (exponentially, after a plain mean over the first ones).
    pub spread_memory: u16,
    /// Consecutive losses after which the power climbs by `max_step_up_db`
    /// per packet until a packet gets through.
    pub climb_after_losses: u16,
    /// A gap longer than this between two readings makes the history stale:
    /// it is dropped and learnt again.
    pub stale_after_ms: u32,
    /// Lowest plausible received power at the far end.
    pub rssi_min_dbm: Dbm,
    /// Highest plausible received power at the far end.
    pub rssi_max_dbm: Dbm,
    /// Received power at and above which the far end's receiver saturates
    /// (its reading is clipped and is not used).
    pub rssi_saturation_dbm: Dbm,
    /// Lowest plausible noise floor at the far end.
    pub noise_min_dbm: Dbm,
    /// Highest plausible noise floor at the far end.
    pub noise_max_dbm: Dbm,
    /// Noise floor assumed at the far end before any has been reported
    /// (open-loop beacons carry none).
    pub default_noise_dbm: Dbm,
    /// The rates the radio may send at (empty: the rate is not in play and
    /// the controller chooses the power only). Read from a radio profile or
    /// a log header, not from a settings file.
    #[cfg_attr(feature = "serde", serde(skip))]
    pub rates: RateTable,
    /// The rate a log's packets were sent at when its records do not say
    /// (no `rate` field): needed to replay a log across rates whose table
    /// gives noise bandwidths. Not read from a settings file.
    #[cfg_attr(feature = "serde", serde(skip))]
    pub logged_rate: Option<RateName>,
    /// Regional duty-cycle limit: the most airtime in any one-hour window,
    /// as a fraction of the hour (no built-in default).
    pub duty_limit: DutyLimit,
    /// A cheaper rate replaces the one in use only when its priced cost
    /// (the charge the choice moves, the fixed per-packet charge left out,
    /// plus the price of its expected loss) is lower by more than this
    /// fraction.
    pub rate_hysteresis: f32,
    /// Packets that must pass after a rate change before the cost alone may
    /// change the rate again (a rate the link can no longer carry, or the
    /// duty budget, changes it at once).
    pub rate_dwell: u16,
    /// With several rates: the highest chance of loss the controller may
    /// plan for one packet when it prices losses across packets (1: no
    /// ceiling, a packet may be given up where delivering it is dearest;
    /// the target then holds on average over the log). At least
    /// `target_outage`.
    pub outage_ceiling: f32,
}

impl Default for ControllerConfig {
    fn default() -> Self {
        Self::sub_ghz_node()
    }
}

impl ControllerConfig {
    /// A typical battery-powered sub-GHz node (an invented but realistic
    /// example, not a product's data sheet): a radio settable from −9 to
    /// +22 dBm in 1 dB steps, a 2.15 dBi dipole, an EIRP cap of 16.15 dBm
    /// (14 dBm ERP, a common sub-GHz short-range limit; check the rules that
    /// apply), 8 dB required SNR, 1 % target loss.
    pub const fn sub_ghz_node() -> Self {
        ControllerConfig {
            required_snr_db: Db(8.0),
            target_outage: 0.01,
            min_tx_dbm: Dbm(-9.0),
            max_tx_dbm: Dbm(22.0),
            eirp_cap_dbm: EirpCap::AtMost(Dbm(16.15)),
            antenna_gain_dbi: Dbi(2.15),
            far_antenna_gain_dbi: Dbi(2.15),
            start_tx_dbm: Dbm(14.0),
            steps: PowerSteps::Uniform(Db(1.0)),
            max_step_up_db: Db(6.0),
            max_step_down_db: Db(2.0),
            deadband_db: Db(1.0),
            margin_step_db: Db(0.5),
            margin_min_db: Db(-20.0),
            margin_max_db: Db(30.0),
            min_readings: 8,
            spread_memory: 512,
            climb_after_losses: 3,
            stale_after_ms: 3_600_000,
            rssi_min_dbm: Dbm(-150.0),
            rssi_max_dbm: Dbm(20.0),
            rssi_saturation_dbm: Dbm(0.0),
            noise_min_dbm: Dbm(-160.0),
            noise_max_dbm: Dbm(-40.0),
            default_noise_dbm: Dbm(-117.0),
            rates: RateTable::empty(),
            logged_rate: None,
            duty_limit: DutyLimit::NoLimit,
            rate_hysteresis: 0.05,
            rate_dwell: 2,
            outage_ceiling: 1.0,
        }
    }

    /// Highest power the controller may use: `min(max_tx, cap − gain)`
    /// (before rounding down to a supported level).
    pub fn tx_ceiling(&self) -> Dbm {
        match self.eirp_cap_dbm {
            EirpCap::AtMost(cap) => {
                let by_cap = cap.0 - self.antenna_gain_dbi.0;
                Dbm(if by_cap < self.max_tx_dbm.0 {
                    by_cap
                } else {
                    self.max_tx_dbm.0
                })
            }
            EirpCap::NoCap => self.max_tx_dbm,
        }
    }

    /// Check the rate settings: a duty limit in (0, 1], a hysteresis in
    /// [0, 1), a logged rate that is in the table.
    fn validate_rates(&self) -> Result<(), ConfigError> {
        if let DutyLimit::AtMost(f) = self.duty_limit {
            if !f.is_finite() {
                return Err(ConfigError::NotFinite {
                    setting: "duty_limit",
                });
            }
            if !(f > 0.0 && f <= 1.0) {
                return Err(ConfigError::OutOfRange {
                    setting: "duty_limit",
                    value: f,
                    min: 0.0,
                    max: 1.0,
                });
            }
        }
        let h = self.rate_hysteresis;
        if !h.is_finite() {
            return Err(ConfigError::NotFinite {
                setting: "rate_hysteresis",
            });
        }
        if !(0.0..1.0).contains(&h) {
            return Err(ConfigError::OutOfRange {
                setting: "rate_hysteresis",
                value: h,
                min: 0.0,
                max: 1.0,
            });
        }
        let c = self.outage_ceiling;
        if !c.is_finite() {
            return Err(ConfigError::NotFinite {
                setting: "outage_ceiling",
            });
        }
        if !(c > 0.0 && c <= 1.0) {
            return Err(ConfigError::OutOfRange {
                setting: "outage_ceiling",
                value: c,
                min: 0.0,
                max: 1.0,
            });
        }
        if c < self.target_outage {
            return Err(ConfigError::Inconsistent {
                setting: "outage_ceiling",
                why: "is below target_outage: the target could not be met where holding the link is cheap",
            });
        }
        if let Some(name) = self.logged_rate {
            if self.rates.index_of(name.as_str()).is_none() {
                return Err(ConfigError::Inconsistent {
                    setting: "logged_rate",
                    why: "names no rate of the rate table",
                });
            }
        }
        Ok(())
    }

    /// Check every setting; the error names the first one that is wrong.
    pub fn validate(&self) -> Result<(), ConfigError> {
        self.validate_inner().map(|_| ())
    }

    /// Validate and derive the lowest and highest usable levels.
    pub(crate) fn validate_inner(&self) -> Result<(f32, f32), ConfigError> {
        let c = self;
        check_level("required_snr_db", c.required_snr_db.0)?;
        if !c.target_outage.is_finite() {
            return Err(ConfigError::NotFinite {
                setting: "target_outage",
            });
        }
        if !(c.target_outage > 0.0 && c.target_outage < 1.0) {
            return Err(ConfigError::OutOfRange {
                setting: "target_outage",
                value: c.target_outage,
                min: 0.0,
                max: 1.0,
            });
        }
        // Below 1e-6 the down-step of the margin (Δup·p/(1−p)) is lost in
        // f32 rounding and the margin could never fall.
        if c.target_outage < 1e-6 || c.target_outage > 0.5 {
            return Err(ConfigError::OutOfRange {
                setting: "target_outage",
                value: c.target_outage,
                min: 1e-6,
                max: 0.5,
            });
        }
        c.validate_rates()?;
        check_level("min_tx_dbm", c.min_tx_dbm.0)?;
        check_level("max_tx_dbm", c.max_tx_dbm.0)?;
        if let EirpCap::AtMost(cap) = c.eirp_cap_dbm {
            check_level("eirp_cap_dbm", cap.0)?;
        }
        check_level("antenna_gain_dbi", c.antenna_gain_dbi.0)?;
        check_level("far_antenna_gain_dbi", c.far_antenna_gain_dbi.0)?;
        check_level("start_tx_dbm", c.start_tx_dbm.0)?;
        if c.min_tx_dbm.0 > c.max_tx_dbm.0 {
            return Err(ConfigError::Inconsistent {
                setting: "min_tx_dbm",
                why: "is above max_tx_dbm",
            });
        }
        if let EirpCap::AtMost(cap) = c.eirp_cap_dbm {
            if c.min_tx_dbm.0 + c.antenna_gain_dbi.0 > cap.0 {
                return Err(ConfigError::Inconsistent {
                    setting: "eirp_cap_dbm",
                    why:
                        "is below the lowest EIRP the radio can produce (min_tx_dbm + antenna_gain_dbi)",
                });
            }
        }
        let ceiling = c.tx_ceiling().0;
        if c.start_tx_dbm.0 < c.min_tx_dbm.0 || c.start_tx_dbm.0 > ceiling {
            // The numbers, so that the refusal says what would be accepted:
            // [min_tx_dbm, min(max_tx_dbm, eirp_cap_dbm − antenna_gain_dbi)].
            return Err(ConfigError::OutOfRange {
                setting: "start_tx_dbm",
                value: c.start_tx_dbm.0,
                min: c.min_tx_dbm.0,
                max: ceiling,
            });
        }
        let up = positive_db("max_step_up_db", c.max_step_up_db.0)?;
        let down = positive_db("max_step_down_db", c.max_step_down_db.0)?;
        check_level("deadband_db", c.deadband_db.0)?;
        if c.deadband_db.0 < 0.0 {
            return Err(ConfigError::Negative {
                setting: "deadband_db",
            });
        }
        let mstep = positive_db("margin_step_db", c.margin_step_db.0)?;
        if mstep > 20.0 {
            return Err(ConfigError::OutOfRange {
                setting: "margin_step_db",
                value: mstep,
                min: 0.0,
                max: 20.0,
            });
        }
        // The controller keeps the margin in 2⁻⁴⁰ dB: its fall per delivered
        // packet, Δup·p/(1−p), must be at least 1000 of those steps, so that
        // rounding it moves the loss rate the margin settles at by less than
        // 0.05 % of the target.
        if mstep * c.target_outage / (1.0 - c.target_outage) * MARGIN_STEPS_PER_DB < 1000.0 {
            return Err(ConfigError::Inconsistent {
                setting: "margin_step_db",
                why: "times target_outage is too small: the margin's fall per delivered packet would be lost in rounding",
            });
        }
        check_level("margin_min_db", c.margin_min_db.0)?;
        check_level("margin_max_db", c.margin_max_db.0)?;
        if c.margin_min_db.0 > c.margin_max_db.0 {
            return Err(ConfigError::Inconsistent {
                setting: "margin_min_db",
                why: "is above margin_max_db",
            });
        }
        if c.min_readings < 2 {
            return Err(ConfigError::OutOfRange {
                setting: "min_readings",
                value: f32::from(c.min_readings),
                min: 2.0,
                max: MAX_WINDOW as f32,
            });
        }
        if c.spread_memory == 0 {
            return Err(ConfigError::NotPositive {
                setting: "spread_memory",
            });
        }
        if c.climb_after_losses == 0 {
            return Err(ConfigError::NotPositive {
                setting: "climb_after_losses",
            });
        }
        if c.stale_after_ms == 0 {
            return Err(ConfigError::NotPositive {
                setting: "stale_after_ms",
            });
        }
        check_level("rssi_min_dbm", c.rssi_min_dbm.0)?;
        check_level("rssi_max_dbm", c.rssi_max_dbm.0)?;
        check_level("rssi_saturation_dbm", c.rssi_saturation_dbm.0)?;
        check_level("noise_min_dbm", c.noise_min_dbm.0)?;
        check_level("noise_max_dbm", c.noise_max_dbm.0)?;
        check_level("default_noise_dbm", c.default_noise_dbm.0)?;
        if c.rssi_min_dbm.0 >= c.rssi_max_dbm.0 {
            return Err(ConfigError::Inconsistent {
                setting: "rssi_min_dbm",
                why: "is not below rssi_max_dbm",
            });
        }
        if c.rssi_saturation_dbm.0 <= c.rssi_min_dbm.0 {
            return Err(ConfigError::Inconsistent {
                setting: "rssi_saturation_dbm",
                why: "is not above rssi_min_dbm",
            });
        }
        if c.noise_min_dbm.0 >= c.noise_max_dbm.0 {
            return Err(ConfigError::Inconsistent {
                setting: "noise_min_dbm",
                why: "is not below noise_max_dbm",
            });
        }
        if c.default_noise_dbm.0 < c.noise_min_dbm.0 || c.default_noise_dbm.0 > c.noise_max_dbm.0 {
            return Err(ConfigError::Inconsistent {
                setting: "default_noise_dbm",
                why: "is outside [noise_min_dbm, noise_max_dbm]",
            });
        }
        // The grid: lowest and highest usable levels, and every gap between
        // neighbours must be reachable in one step either way.
        let (bottom, top, gap) = match c.steps {
            PowerSteps::Uniform(step) => {
                let s = positive_db("steps.uniform", step.0)?;
                if s < MIN_UNIFORM_STEP_DB {
                    return Err(ConfigError::OutOfRange {
                        setting: "steps.uniform",
                        value: s,
                        min: MIN_UNIFORM_STEP_DB,
                        max: SETTING_LIMIT_DB,
                    });
                }
                let span = ceiling - c.min_tx_dbm.0;
                let k = libm::floorf(span / s + GRID_EPS);
                (c.min_tx_dbm.0, c.min_tx_dbm.0 + k * s, s)
            }
            PowerSteps::Table(t) => {
                t.check()?;
                let mut bottom: Option<f32> = None;
                let mut top: Option<f32> = None;
                let mut gap = 0.0f32;
                for l in t.levels() {
                    if l.0 >= c.min_tx_dbm.0 && l.0 <= ceiling {
                        if let Some(prev) = top {
                            let g = l.0 - prev;
                            if g > gap {
                                gap = g;
                            }
                        }
                        if bottom.is_none() {
                            bottom = Some(l.0);
                        }
                        top = Some(l.0);
                    }
                }
                match (bottom, top) {
                    (Some(b), Some(t)) => (b, t, gap),
                    _ => {
                        return Err(ConfigError::Inconsistent {
                            setting: "steps.table",
                            why: "has no level inside [min_tx_dbm, min(max_tx_dbm, eirp_cap_dbm - antenna_gain_dbi)]",
                        })
                    }
                }
            }
        };
        if up < gap {
            return Err(ConfigError::Inconsistent {
                setting: "max_step_up_db",
                why: "is smaller than a step between two supported levels",
            });
        }
        if down < gap {
            return Err(ConfigError::Inconsistent {
                setting: "max_step_down_db",
                why: "is smaller than a step between two supported levels",
            });
        }
        if c.start_tx_dbm.0 > top + GRID_EPS {
            // Start is below the ceiling but above the top level: it is
            // rounded down to the top level; nothing to refuse.
        }
        Ok((bottom, top))
    }
}

/// Tolerance, in grid steps or dB, for rounding to a supported level.
pub(crate) const GRID_EPS: f32 = 1e-4;

fn check_level(setting: &'static str, x: f32) -> Result<f32, ConfigError> {
    if !x.is_finite() {
        return Err(ConfigError::NotFinite { setting });
    }
    if !(-SETTING_LIMIT_DB..=SETTING_LIMIT_DB).contains(&x) {
        return Err(ConfigError::OutOfRange {
            setting,
            value: x,
            min: -SETTING_LIMIT_DB,
            max: SETTING_LIMIT_DB,
        });
    }
    Ok(x)
}

fn positive_db(setting: &'static str, x: f32) -> Result<f32, ConfigError> {
    let x = check_level(setting, x)?;
    if x > 0.0 {
        Ok(x)
    } else {
        Err(ConfigError::NotPositive { setting })
    }
}

/// Why a controller configuration was refused. Each variant names the
/// setting (the TOML key) that is wrong.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// The setting is NaN or infinite.
    NotFinite {
        /// TOML key of the setting.
        setting: &'static str,
    },
    /// The setting must be greater than zero.
    NotPositive {
        /// TOML key of the setting.
        setting: &'static str,
    },
    /// The setting must not be negative.
    Negative {
        /// TOML key of the setting.
        setting: &'static str,
    },
    /// The setting is outside its allowed range.
    OutOfRange {
        /// TOML key of the setting.
        setting: &'static str,
        /// Value given.
        value: f32,
        /// Lowest allowed value.
        min: f32,
        /// Highest allowed value.
        max: f32,
    },
    /// The setting contradicts another one, or would be dangerous.
    Inconsistent {
        /// TOML key of the setting.
        setting: &'static str,
        /// What is wrong with it.
        why: &'static str,
    },
}

impl ConfigError {
    /// The TOML key of the offending setting.
    pub fn setting(&self) -> &'static str {
        match self {
            ConfigError::NotFinite { setting }
            | ConfigError::NotPositive { setting }
            | ConfigError::Negative { setting }
            | ConfigError::OutOfRange { setting, .. }
            | ConfigError::Inconsistent { setting, .. } => setting,
        }
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConfigError::NotFinite { setting } => write!(f, "{setting}: must be a finite number"),
            ConfigError::NotPositive { setting } => {
                write!(f, "{setting}: must be greater than zero")
            }
            ConfigError::Negative { setting } => write!(f, "{setting}: must not be negative"),
            ConfigError::OutOfRange {
                setting,
                value,
                min,
                max,
            } => {
                write!(
                    f,
                    "{setting}: {value} is outside the allowed range {min}..{max}"
                )
            }
            ConfigError::Inconsistent { setting, why } => write!(f, "{setting}: {why}"),
        }
    }
}

impl core::error::Error for ConfigError {}

#[cfg(test)]
#[allow(clippy::panic)]
mod tests {
    use super::*;

    #[test]
    fn no_cap_leaves_the_radio_maximum() {
        let mut c = ControllerConfig::sub_ghz_node();
        assert_eq!(c.tx_ceiling(), Dbm(14.0));
        c.eirp_cap_dbm = EirpCap::NoCap;
        assert_eq!(c.tx_ceiling(), Dbm(22.0));
        c.start_tx_dbm = Dbm(23.0);
        match c.validate() {
            Err(ConfigError::OutOfRange {
                setting, min, max, ..
            }) => assert_eq!((setting, min, max), ("start_tx_dbm", -9.0, 22.0)),
            other => panic!("{other:?}"),
        }
    }
}
