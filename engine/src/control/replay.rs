//! Replay of a field log through the controller: what would it have chosen,
//! and how many packets would it have lost?
//!
//! This is the one implementation of the replay semantics; the host's
//! `headroom replay`, the firmware's replay on target and the tests all call
//! it, so they agree bit for bit. [`Replay`] states the semantics.

use super::config::{ConfigError, ControllerConfig};
use super::controller::{Controller, Observation};
use super::reason::Reason;
use crate::record::LogRecord;
use crate::units::{Db, Dbm};

/// What happened to a replayed packet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Outcome {
    /// The replayed SNR met the requirement.
    Delivered = 0,
    /// The replayed SNR fell short.
    Lost = 1,
    /// The record lacks a reading: it cannot be judged.
    Unjudged = 2,
}

impl Outcome {
    /// Stable lower-case name for CSV and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            Outcome::Delivered => "delivered",
            Outcome::Lost => "lost",
            Outcome::Unjudged => "unjudged",
        }
    }

    /// Stable one-byte code (for binary decision logs).
    pub const fn code(self) -> u8 {
        self as u8
    }

    /// The outcome with this code, if any.
    pub fn from_code(code: u8) -> Option<Outcome> {
        match code {
            0 => Some(Outcome::Delivered),
            1 => Some(Outcome::Lost),
            2 => Some(Outcome::Unjudged),
            _ => None,
        }
    }
}

/// One replayed record.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReplayStep {
    /// Time of the record, ms.
    pub t_ms: u64,
    /// Power the controller chose for this record.
    pub chosen: Dbm,
    /// SNR the packet would have had at the chosen power (`None` if unjudged).
    pub replayed_snr: Option<Db>,
    /// Delivered, lost, or not judgeable.
    pub outcome: Outcome,
    /// The controller's slow path-loss estimate after this record.
    pub path_loss_estimate: Option<Db>,
    /// The adaptive margin after this record.
    pub margin: Db,
    /// Why the controller moved (or ignored the reading) after this record.
    pub reason: Reason,
    /// Power chosen for the next record.
    pub next_tx: Dbm,
}

impl ReplayStep {
    /// Received power the packet would have had at the chosen power,
    /// `rssi − tx + chosen` of `rec`, the record this step replayed (the same
    /// computation as [`Replay::step`]); `None` when the step was not judged.
    pub fn replayed_rx(&self, rec: &LogRecord) -> Option<Dbm> {
        match (self.outcome, rec.tx_dbm, rec.rssi_dbm) {
            (Outcome::Unjudged, _, _) => None,
            (_, Some(tx), Some(rssi)) => Some(Dbm(rssi - tx + self.chosen.0)),
            _ => None,
        }
    }
}

/// Running totals of a replay.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Summary {
    /// Records replayed.
    pub records: u64,
    /// Records that could be judged (delivered + lost).
    pub judged: u64,
    /// Judged records that were lost.
    pub lost: u64,
    /// Records that could not be judged.
    pub unjudged: u64,
    /// Records whose power differs from the previous record's.
    pub power_changes: u64,
    /// Highest power chosen (`None` before the first record).
    pub max_tx_dbm_used: Option<Dbm>,
    /// Readings ignored, indexed by [`Reason::index`] (only the
    /// `Ignored*` reasons are counted).
    pub ignored_readings: [u64; Reason::COUNT],
    /// Highest power the controller was allowed (radio maximum and EIRP cap,
    /// on the grid): the reference of [`Summary::energy_saving_db`].
    pub max_allowed: Dbm,
    sum_mw: f64,
    last_chosen: Option<f32>,
    /// `last_chosen` in mW.
    last_mw: f64,
    /// Σ over merged replays of records × highest allowed level, mW (`None`
    /// until [`Summary::merge`]).
    allowed_mw: Option<f64>,
}

impl Summary {
    /// Empty totals for a controller whose highest allowed level is `max_allowed`.
    pub fn new(max_allowed: Dbm) -> Self {
        Summary {
            records: 0,
            judged: 0,
            lost: 0,
            unjudged: 0,
            power_changes: 0,
            max_tx_dbm_used: None,
            ignored_readings: [0; Reason::COUNT],
            max_allowed,
            sum_mw: 0.0,
            last_chosen: None,
            last_mw: 0.0,
            allowed_mw: None,
        }
    }

    /// Count one replayed record.
    pub fn add(&mut self, s: &ReplayStep) {
        self.records += 1;
        match s.outcome {
            Outcome::Delivered => self.judged += 1,
            Outcome::Lost => {
                self.judged += 1;
                self.lost += 1;
            }
            Outcome::Unjudged => self.unjudged += 1,
        }
        let p = s.chosen.0;
        // The power changes once in several records: reuse its mW otherwise
        // (the same exp10f of the same value, so the sum is unchanged).
        let mw = match self.last_chosen {
            Some(last) if last == p => self.last_mw,
            Some(_) => {
                self.power_changes += 1;
                f64::from(libm::exp10f(p / 10.0))
            }
            None => f64::from(libm::exp10f(p / 10.0)),
        };
        self.last_chosen = Some(p);
        self.last_mw = mw;
        self.max_tx_dbm_used = Some(match self.max_tx_dbm_used {
            Some(m) if m.0 >= p => m,
            _ => s.chosen,
        });
        // Linear mW summed in f64: 10⁶ records of 25 mW lose nothing.
        self.sum_mw += mw;
        if s.reason.is_ignored_reading() {
            if let Some(c) = self.ignored_readings.get_mut(s.reason.index()) {
                *c += 1;
            }
        }
    }

    /// Σ of the chosen powers over the records, in mW: the linear sum behind
    /// [`Summary::mean_tx_dbm`], for adding replays up elsewhere.
    pub fn tx_mw_sum(&self) -> f64 {
        self.sum_mw
    }

    /// Records × highest allowed level in mW: the linear sum behind the
    /// reference of [`Summary::energy_saving_db`].
    fn allowed_sum_mw(&self) -> f64 {
        self.allowed_mw.unwrap_or_else(|| {
            self.records as f64 * f64::from(libm::exp10f(self.max_allowed.0 / 10.0))
        })
    }

    /// Add the totals of another replay (another device of a fleet): counts
    /// and linear power sums add; [`Summary::max_tx_dbm_used`] and
    /// [`Summary::max_allowed`] become the larger of the two; and
    /// [`Summary::energy_saving_db`] of the merged totals compares the mean
    /// power with the mean, in mW over all records, of each device's own
    /// highest allowed level.
    pub fn merge(&mut self, other: &Summary) {
        self.allowed_mw = Some(self.allowed_sum_mw() + other.allowed_sum_mw());
        self.records += other.records;
        self.judged += other.judged;
        self.lost += other.lost;
        self.unjudged += other.unjudged;
        self.power_changes += other.power_changes;
        self.max_tx_dbm_used = match (self.max_tx_dbm_used, other.max_tx_dbm_used) {
            (Some(a), Some(b)) => Some(if b.0 > a.0 { b } else { a }),
            (a, b) => a.or(b),
        };
        for (a, b) in self
            .ignored_readings
            .iter_mut()
            .zip(other.ignored_readings.iter())
        {
            *a += *b;
        }
        if other.max_allowed.0 > self.max_allowed.0 {
            self.max_allowed = other.max_allowed;
        }
        self.sum_mw += other.sum_mw;
    }

    /// Lost / judged (`None` before a judged record).
    #[allow(clippy::cast_possible_truncation)] // a fraction in [0, 1]
    pub fn outage_fraction(&self) -> Option<f32> {
        if self.judged == 0 {
            None
        } else {
            Some((self.lost as f64 / self.judged as f64) as f32)
        }
    }

    /// `10·log10` of the mean chosen power in mW (`None` before a record).
    #[allow(clippy::cast_possible_truncation)] // a level within ±300 dBm
    pub fn mean_tx_dbm(&self) -> Option<Dbm> {
        if self.records == 0 || self.sum_mw <= 0.0 || self.sum_mw.is_nan() {
            None
        } else {
            Some(Dbm(
                libm::log10(self.sum_mw / self.records as f64) as f32 * 10.0
            ))
        }
    }

    /// How much lower the mean power is than always sending at
    /// [`Summary::max_allowed`], dB (for merged totals, at each device's own
    /// highest allowed level: see [`Summary::merge`]).
    #[allow(clippy::cast_possible_truncation)] // a level within ±300 dBm
    pub fn energy_saving_db(&self) -> Option<Db> {
        let mean = self.mean_tx_dbm()?;
        match self.allowed_mw {
            None => Some(self.max_allowed - mean),
            Some(a) if a > 0.0 && self.records > 0 => {
                Some(Dbm(libm::log10(a / self.records as f64) as f32 * 10.0) - mean)
            }
            Some(_) => None,
        }
    }

    /// Readings ignored for reason `r`.
    pub fn ignored(&self, r: Reason) -> u64 {
        self.ignored_readings.get(r.index()).copied().unwrap_or(0)
    }
}

/// A controller replaying a log, with its running [`Summary`].
///
/// ## Semantics
/// Records are taken one at a time, in order. For record `k`:
/// 1. the controller's power `chosen` for record `k` is the one it decided
///    from the observations of records before `k`;
/// 2. the channel of record `k` is the logged one: the replayed received
///    power is `rssi − tx + chosen`, the replayed SNR that less `noise`;
/// 3. the packet is lost when the replayed SNR is below the required SNR;
/// 4. a delivered packet gives the controller the replayed feedback
///    (sent at `chosen`, received at the replayed power, the logged noise);
///    a lost one gives it a loss and no readings;
/// 5. a record with a missing reading, or whose *logged* readings would be
///    refused as a live feedback (NaN or infinite; a transmit power outside
///    the radio's `min_tx_dbm..max_tx_dbm` by more than 1 dB; an RSSI or
///    noise floor outside `rssi_min_dbm..rssi_max_dbm`,
///    `noise_min_dbm..noise_max_dbm`; an RSSI at or above
///    `rssi_saturation_dbm`), cannot be judged: it is counted apart
///    (the reason in [`Summary::ignored_readings`] for the bad ones) and
///    passed to the controller as an observation of nothing
///    ([`Observation::Missing`]).
///
/// A logged reading clipped by a receiver just below its saturation level
/// gives a replayed received power that is only a lower bound, so the
/// replay is pessimistic for it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Replay<const W: usize> {
    controller: Controller<W>,
    summary: Summary,
    /// The required SNR, dB, as configured.
    required_snr: f32,
}

impl<const W: usize> Replay<W> {
    /// A replay with a fresh controller.
    pub fn new(cfg: ControllerConfig) -> Result<Self, ConfigError> {
        let controller = Controller::<W>::new(cfg)?;
        let summary = Summary::new(controller.limits().1);
        Ok(Replay {
            controller,
            summary,
            required_snr: cfg.required_snr_db.0,
        })
    }

    /// Replay one record (see [`Replay`] for the semantics).
    pub fn step(&mut self, rec: &LogRecord) -> ReplayStep {
        let chosen = self.controller.tx();
        let required = Db(self.required_snr);
        let t_ms = rec.t_ms;
        let mut own_reason: Option<Reason> = None;
        let (outcome, snr, obs) = match (rec.tx_dbm, rec.rssi_dbm, rec.noise_dbm) {
            (Some(tx), Some(rssi), Some(noise)) => {
                let rx = rssi - tx + chosen.0;
                let snr = rx - noise;
                let unusable = match self.controller.check_logged(tx, rssi, noise) {
                    Some(r) => Some(r),
                    None if !snr.is_finite() => Some(Reason::IgnoredNotFinite),
                    None => None,
                };
                if let Some(r) = unusable {
                    own_reason = Some(r);
                    (Outcome::Unjudged, None, Observation::Missing { t_ms })
                } else if snr < required.0 {
                    (Outcome::Lost, Some(Db(snr)), Observation::Lost { t_ms })
                } else {
                    let obs = Observation::Feedback {
                        t_ms,
                        tx: chosen,
                        rssi: Dbm(rx),
                        noise: Dbm(noise),
                        snr: None,
                    };
                    (Outcome::Delivered, Some(Db(snr)), obs)
                }
            }
            _ => (Outcome::Unjudged, None, Observation::Missing { t_ms }),
        };
        let d = self.controller.update(&obs);
        let step = ReplayStep {
            t_ms,
            chosen,
            replayed_snr: snr,
            outcome,
            path_loss_estimate: d.path_loss(),
            margin: d.margin(),
            reason: own_reason.unwrap_or(d.reason),
            next_tx: d.tx,
        };
        self.summary.add(&step);
        step
    }

    /// The totals so far.
    pub fn summary(&self) -> &Summary {
        &self.summary
    }

    /// The controller being replayed.
    pub fn controller(&self) -> &Controller<W> {
        &self.controller
    }
}

#[cfg(test)]
#[allow(clippy::panic, clippy::cast_possible_truncation)]
mod tests {
    use super::*;

    fn rec(t_ms: u64, tx: f32, rssi: f32, noise: f32) -> LogRecord {
        LogRecord {
            t_ms,
            tx_dbm: Some(tx),
            rssi_dbm: Some(rssi),
            noise_dbm: Some(noise),
        }
    }

    #[test]
    fn judges_by_replayed_snr() {
        let mut r = match Replay::<32>::new(ControllerConfig::sub_ghz_node()) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        // Start power 14 dBm. Logged at 10 dBm, −105 dBm received, −110
        // noise: replayed rx = −105 − 10 + 14 = −101, SNR 9 dB ≥ 8: delivered.
        let s = r.step(&rec(0, 10.0, -105.0, -110.0));
        assert_eq!(s.chosen, Dbm(14.0));
        assert_eq!(s.outcome, Outcome::Delivered);
        assert_eq!(s.replayed_snr, Some(Db(9.0)));
        // −108 at 10 dBm: replayed SNR 6 dB < 8: lost.
        let s = r.step(&rec(1, 10.0, -108.0, -110.0));
        assert_eq!(s.outcome, Outcome::Lost);
        let s = r.step(&LogRecord {
            t_ms: 2,
            tx_dbm: Some(10.0),
            rssi_dbm: None,
            noise_dbm: Some(-110.0),
        });
        assert_eq!(s.outcome, Outcome::Unjudged);
        assert_eq!(s.reason, Reason::NoInformation);
        let s = r.step(&rec(3, 10.0, f32::NAN, -110.0));
        assert_eq!(s.outcome, Outcome::Unjudged);
        assert_eq!(s.reason, Reason::IgnoredNotFinite);
        let sum = r.summary();
        assert_eq!(
            (sum.records, sum.judged, sum.lost, sum.unjudged),
            (4, 2, 1, 2)
        );
        assert_eq!(sum.outage_fraction(), Some(0.5));
        assert_eq!(sum.ignored(Reason::IgnoredNotFinite), 1);
        assert_eq!(sum.max_tx_dbm_used, Some(Dbm(14.0)));
        // Always at the highest allowed level: no saving.
        assert!(sum.energy_saving_db().is_some_and(|e| e.0.abs() < 1e-4));
        assert_eq!(sum.power_changes, 0);
    }

    #[test]
    fn summary_means_in_milliwatts() {
        let mut s = Summary::new(Dbm(10.0));
        for p in [10.0f32, 0.0] {
            s.add(&ReplayStep {
                t_ms: 0,
                chosen: Dbm(p),
                replayed_snr: None,
                outcome: Outcome::Unjudged,
                path_loss_estimate: None,
                margin: Db(0.0),
                reason: Reason::Hold,
                next_tx: Dbm(p),
            });
        }
        // (10 mW + 1 mW) / 2 = 5.5 mW = 7.4036 dBm.
        let m = s.mean_tx_dbm().map_or(f32::NAN, |d| d.0);
        assert!((m - 7.403_627).abs() < 1e-4, "{m}");
        assert_eq!(s.power_changes, 1);
        assert_eq!(s.outage_fraction(), None);
    }

    #[test]
    fn merged_summaries_add_linear_power() {
        let step = |p: f32, outcome| ReplayStep {
            t_ms: 0,
            chosen: Dbm(p),
            replayed_snr: None,
            outcome,
            path_loss_estimate: None,
            margin: Db(0.0),
            reason: Reason::Hold,
            next_tx: Dbm(p),
        };
        let mut a = Summary::new(Dbm(10.0));
        a.add(&step(10.0, Outcome::Lost));
        let mut b = Summary::new(Dbm(14.0));
        b.add(&step(0.0, Outcome::Delivered));
        b.add(&step(0.0, Outcome::Delivered));
        a.merge(&b);
        assert_eq!((a.records, a.judged, a.lost, a.power_changes), (3, 3, 1, 0));
        assert_eq!(a.max_tx_dbm_used, Some(Dbm(10.0)));
        assert_eq!(a.max_allowed, Dbm(14.0));
        // (10 + 1 + 1) mW / 3 = 4 mW = 6.0206 dBm.
        let m = a.mean_tx_dbm().map_or(f32::NAN, |d| d.0);
        assert!((m - 6.020_6).abs() < 1e-3, "{m}");
        assert!(a
            .outage_fraction()
            .is_some_and(|f| (f - 1.0 / 3.0).abs() < 1e-6));
        // Reference: (1 × 10 mW + 2 × 25.119 mW) / 3 = 20.079 mW = 13.027 dBm,
        // less the mean 6.0206 dBm.
        let e = a.energy_saving_db().map_or(f32::NAN, |d| d.0);
        assert!((e - (13.027_4 - 6.020_6)).abs() < 1e-3, "{e}");
    }

    #[test]
    fn replayed_rx_is_the_logged_channel_at_the_chosen_power() {
        let mut r = match Replay::<32>::new(ControllerConfig::sub_ghz_node()) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        let rec0 = rec(0, 10.0, -105.0, -110.0);
        let s = r.step(&rec0);
        // −105 − 10 + 14 = −101 dBm.
        assert_eq!(s.replayed_rx(&rec0), Some(Dbm(-101.0)));
        let gap = LogRecord {
            t_ms: 1,
            tx_dbm: Some(10.0),
            rssi_dbm: None,
            noise_dbm: Some(-110.0),
        };
        let s = r.step(&gap);
        assert_eq!(s.replayed_rx(&gap), None);
    }

    #[test]
    fn logged_readings_the_radio_cannot_produce_are_not_judged() {
        let mut r = match Replay::<32>::new(ControllerConfig::sub_ghz_node()) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        // sub_ghz_node: tx −9..22 dBm (±1 dB), RSSI saturates at 0 dBm.
        let cases = [
            (rec(0, 10.0, 0.0, -110.0), Reason::IgnoredSaturated), // at the ceiling
            (rec(1, 10.0, 3.2e-11, -110.0), Reason::IgnoredSaturated), // RSSI in mW
            (rec(2, 25.1, -100.0, -110.0), Reason::IgnoredImplausible), // tx in mW
            (rec(3, -10.5, -100.0, -110.0), Reason::IgnoredImplausible), // below min_tx
        ];
        for (rec, why) in cases {
            let s = r.step(&rec);
            assert_eq!((s.outcome, s.reason), (Outcome::Unjudged, why), "{rec:?}");
        }
        // Within the tolerance: judged.
        let s = r.step(&rec(4, 23.0, -100.0, -110.0));
        assert_ne!(s.outcome, Outcome::Unjudged, "{s:?}");
        assert_eq!(r.summary().ignored(Reason::IgnoredSaturated), 2);
        assert_eq!(r.summary().ignored(Reason::IgnoredImplausible), 2);
    }
}
