//! Replay of a field log through the controller: what would it have chosen,
//! and how many packets would it have lost?
//!
//! This is the one implementation of the replay semantics; the host's
//! `headroom replay`, the firmware's replay on target and the tests all call
//! it, so they agree bit for bit. [`Replay`] states the semantics.

use super::config::{ConfigError, ControllerConfig};
use super::controller::{Controller, LoggedReading};
use super::reason::Reason;
use crate::energy::{ChargeTable, EnergyProfile, Microcoulombs};
use crate::rate::MAX_RATES;
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
    /// The duty-cycle budget held the packet: not sent, not delivered.
    Held = 3,
}

impl Outcome {
    /// Stable lower-case name for CSV and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            Outcome::Delivered => "delivered",
            Outcome::Lost => "lost",
            Outcome::Unjudged => "unjudged",
            Outcome::Held => "held",
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
            3 => Some(Outcome::Held),
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
    /// Whether the packet was lost as logged, at the logged power, by the
    /// same rule (`None` if not judgeable).
    pub logged_lost: Option<bool>,
    /// Whether `chosen` was the highest level the controller is allowed.
    pub at_max: bool,
    /// The controller's slow path-loss estimate after this record.
    pub path_loss_estimate: Option<Db>,
    /// The adaptive margin after this record.
    pub margin: Db,
    /// Why the controller moved (or ignored the reading) after this record.
    pub reason: Reason,
    /// Power chosen for the next record.
    pub next_tx: Dbm,
    /// Rate the controller chose for this record (an index into the rate
    /// table; `None` when the table is empty).
    pub rate: Option<u8>,
    /// Rate chosen for the next record.
    pub next_rate: Option<u8>,
    /// Whether the duty-cycle budget holds the next record.
    pub next_held: bool,
    /// Airtime of this record's packet at its rate, µs (`None` without a
    /// rate table; 0 when held).
    pub airtime_us: Option<u32>,
    /// Charge of this record's packet at its power and rate (`None`
    /// without an energy profile; a held packet costs the profile's fixed
    /// per-packet charge only: the device woke up, and did not transmit).
    pub charge: Option<Microcoulombs>,
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

/// Window, in readings, of the controller that replays logs on the host
/// and on target: the one value `headroom replay`, `headroom tune`, the
/// firmware's replay and the tests use, so that they agree bit for bit.
pub const REPLAY_WINDOW: usize = 32;

/// What the device itself did, judged by the same rule as the replay.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct LoggedTotals {
    /// Records whose logged readings could be judged.
    pub judged: u64,
    /// Of those, the packets whose logged SNR was below the requirement.
    pub lost: u64,
    /// Records sent (a logged transmit power) whose far-end readings never
    /// came back: the packet, or its report, was lost in the field.
    pub without_readings: u64,
    /// Records with a finite logged transmit power.
    pub records_with_tx: u64,
    /// Σ logged transmit power over those records, mW.
    pub tx_mw_sum: f64,
    /// Σ replayed (chosen) power over the same records, mW: the fair
    /// reference for [`Summary::saving_vs_logged_db`].
    pub chosen_mw_sum: f64,
}

impl LoggedTotals {
    /// Lost / judged of the logged policy (`None` before a judged record).
    #[allow(clippy::cast_possible_truncation)] // a fraction in [0, 1]
    pub fn outage_fraction(&self) -> Option<f32> {
        ratio(self.lost, self.judged)
    }

    /// Mean logged transmit power, dBm, over the records that logged one.
    pub fn mean_tx_dbm(&self) -> Option<Dbm> {
        mean_dbm(self.tx_mw_sum, self.records_with_tx)
    }

    fn merge(&mut self, o: &LoggedTotals) {
        self.judged += o.judged;
        self.lost += o.lost;
        self.without_readings += o.without_readings;
        self.records_with_tx += o.records_with_tx;
        self.tx_mw_sum += o.tx_mw_sum;
        self.chosen_mw_sum += o.chosen_mw_sum;
    }
}

#[allow(clippy::cast_possible_truncation)] // a fraction in [0, 1]
fn ratio(a: u64, b: u64) -> Option<f32> {
    if b == 0 {
        None
    } else {
        Some((a as f64 / b as f64) as f32)
    }
}

#[allow(clippy::cast_possible_truncation)] // a level within ±300 dBm
fn mean_dbm(sum_mw: f64, n: u64) -> Option<Dbm> {
    if n == 0 || sum_mw <= 0.0 || sum_mw.is_nan() {
        None
    } else {
        Some(Dbm(libm::log10(sum_mw / n as f64) as f32 * 10.0))
    }
}

/// `10·log10(a / b)`, dB, for two positive linear sums.
#[allow(clippy::cast_possible_truncation)] // a ratio within ±600 dB
fn ratio_db(a: f64, b: f64) -> Option<Db> {
    if a > 0.0 && b > 0.0 && a.is_finite() && b.is_finite() {
        Some(Db(libm::log10(a / b) as f32 * 10.0))
    } else {
        None
    }
}

/// mW of a level, dBm.
fn mw(p: f32) -> f64 {
    f64::from(libm::exp10f(p / 10.0))
}

/// A replay's totals at one rate of the table.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RateTotals {
    /// Records sent at this rate (held ones are not sent).
    pub packets: u64,
    /// Of those, the delivered ones.
    pub delivered: u64,
    /// Of those, the lost ones.
    pub lost: u64,
    /// Σ airtime, µs.
    pub airtime_us: u64,
    /// Σ charge, µC (with an energy profile).
    pub charge_uc: f64,
}

impl RateTotals {
    fn merge(&mut self, o: &RateTotals) {
        self.packets += o.packets;
        self.delivered += o.delivered;
        self.lost += o.lost;
        self.airtime_us += o.airtime_us;
        self.charge_uc += o.charge_uc;
    }
}

/// Running totals of a replay: of one log, or of a fleet of logs added up
/// with [`Summary::merge`]. Every total is a count or a linear sum, public,
/// so that totals computed anywhere (threads, machines) add up exactly.
/// With `serde` it serialises whole (postcard keeps every bit), so totals
/// computed on other machines merge as if computed here.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Summary {
    /// Logs added up in these totals (1 for one log).
    pub logs: u64,
    /// Records replayed.
    pub records: u64,
    /// Records that could be judged (delivered + lost).
    pub judged: u64,
    /// Judged records that were lost.
    pub lost: u64,
    /// Records that could not be judged.
    pub unjudged: u64,
    /// Judged records sent at the highest allowed level.
    pub judged_at_max: u64,
    /// Of those, the lost ones: the link was out of the controller's reach.
    pub lost_at_max: u64,
    /// Records whose power differs from the previous record's.
    pub power_changes: u64,
    /// Highest power chosen (`None` before the first record).
    pub max_tx_dbm_used: Option<Dbm>,
    /// Readings the controller could not use, indexed by [`Reason::index`]
    /// (only the `Ignored*` reasons are counted): logged readings that
    /// cannot be judged, and replayed readings the far end would have
    /// clipped at its saturation level.
    pub ignored_readings: [u64; Reason::COUNT],
    /// Σ of the chosen powers over the records, mW.
    pub tx_mw_sum: f64,
    /// Σ over the records of the highest allowed level, mW: the reference
    /// of [`Summary::saving_vs_max_db`].
    pub max_mw_sum: f64,
    /// What the device did, judged by the same rule.
    pub logged: LoggedTotals,
    /// Highest level the controller was allowed (of one log; the largest
    /// over merged logs).
    pub max_allowed: Dbm,
    /// Records held by the duty-cycle budget (not sent; counted apart from
    /// `judged`, and as not delivered: see [`Summary::delivered_fraction`]).
    pub held: u64,
    /// Decisions the duty-cycle budget shaped (reasons `duty_limited` and
    /// `duty_held`).
    pub duty_limited: u64,
    /// Records whose rate differs from the previous record's.
    pub rate_changes: u64,
    /// Totals per rate of the table, in table order (all zero without one).
    pub per_rate: [RateTotals; MAX_RATES],
    /// Σ airtime of the packets sent, µs (with a rate table).
    pub airtime_us: u64,
    /// Σ charge of the records, µC (with an energy profile): the packets
    /// sent, and the fixed per-packet charge of the held ones.
    pub charge_uc: f64,
    /// Records costed in `charge_uc`.
    pub charged: u64,
    /// Σ charge of the judged and the held records, µC: what the delivered
    /// packets cost, losses and held packets included (an unjudged record's
    /// fate is unknown, so it is in `charge_uc` only). The numerator of
    /// [`Summary::charge_per_delivered_uc`], as of
    /// [`EnergyTally::charge_per_delivered`](crate::energy::EnergyTally::charge_per_delivered).
    pub judged_charge_uc: f64,
    last_chosen: Option<f32>,
    last_rate: Option<u8>,
    last_mw: f64,
    last_logged: Option<f32>,
    last_logged_mw: f64,
    max_mw: f64,
}

impl Summary {
    /// Empty totals of one log, for a controller whose highest allowed level
    /// is `max_allowed`.
    pub fn new(max_allowed: Dbm) -> Self {
        Summary {
            logs: 1,
            records: 0,
            judged: 0,
            lost: 0,
            unjudged: 0,
            judged_at_max: 0,
            lost_at_max: 0,
            power_changes: 0,
            max_tx_dbm_used: None,
            ignored_readings: [0; Reason::COUNT],
            tx_mw_sum: 0.0,
            max_mw_sum: 0.0,
            logged: LoggedTotals::default(),
            max_allowed,
            held: 0,
            duty_limited: 0,
            rate_changes: 0,
            per_rate: [RateTotals::default(); MAX_RATES],
            airtime_us: 0,
            charge_uc: 0.0,
            charged: 0,
            judged_charge_uc: 0.0,
            last_chosen: None,
            last_rate: None,
            last_mw: 0.0,
            last_logged: None,
            last_logged_mw: 0.0,
            max_mw: mw(max_allowed.0),
        }
    }

    /// Empty totals of no log, to [`Summary::merge`] logs into.
    pub fn empty() -> Self {
        let mut s = Summary::new(Dbm(-SETTING_FLOOR_DBM));
        s.logs = 0;
        s
    }

    /// Count one replayed record; `rec` is the record `s` replayed.
    pub fn add(&mut self, rec: &LogRecord, s: &ReplayStep) {
        self.records += 1;
        match s.outcome {
            Outcome::Delivered => self.judged += 1,
            Outcome::Lost => {
                self.judged += 1;
                self.lost += 1;
            }
            Outcome::Unjudged => self.unjudged += 1,
            Outcome::Held => self.held += 1,
        }
        if matches!(s.reason, Reason::DutyLimited | Reason::DutyHeld) {
            self.duty_limited += 1;
        }
        if let Some(m) = s.rate {
            if self.last_rate.is_some_and(|l| l != m) {
                self.rate_changes += 1;
            }
            self.last_rate = Some(m);
            if s.outcome != Outcome::Held {
                let air = u64::from(s.airtime_us.unwrap_or(0));
                self.airtime_us += air;
                if let Some(t) = self.per_rate.get_mut(usize::from(m)) {
                    t.packets += 1;
                    t.airtime_us += air;
                    t.charge_uc += s.charge.map_or(0.0, |c| f64::from(c.0));
                    match s.outcome {
                        Outcome::Delivered => t.delivered += 1,
                        Outcome::Lost => t.lost += 1,
                        _ => {}
                    }
                }
            }
        }
        if let Some(c) = s.charge {
            self.charge_uc += f64::from(c.0);
            self.charged += 1;
            if s.outcome != Outcome::Unjudged {
                self.judged_charge_uc += f64::from(c.0);
            }
        }
        if s.at_max && s.outcome != Outcome::Unjudged {
            self.judged_at_max += 1;
            if s.outcome == Outcome::Lost {
                self.lost_at_max += 1;
            }
        }
        let p = s.chosen.0;
        // The power changes once in several records: reuse its mW otherwise
        // (the same exp10f of the same value, so the sum is unchanged), and
        // the highest power so far, which already holds it.
        let chosen_mw = match self.last_chosen {
            Some(last) if last == p => self.last_mw,
            last => {
                if last.is_some() {
                    self.power_changes += 1;
                }
                self.last_chosen = Some(p);
                self.last_mw = mw(p);
                self.max_tx_dbm_used = Some(match self.max_tx_dbm_used {
                    Some(m) if m.0 >= p => m,
                    _ => s.chosen,
                });
                self.last_mw
            }
        };
        // Linear mW summed in f64: 10⁶ records of 25 mW lose nothing.
        self.tx_mw_sum += chosen_mw;
        self.max_mw_sum += self.max_mw;
        if let Some(lost) = s.logged_lost {
            self.logged.judged += 1;
            if lost {
                self.logged.lost += 1;
            }
        }
        if rec.tx_dbm.is_some() && (rec.rssi_dbm.is_none() || rec.noise_dbm.is_none()) {
            self.logged.without_readings += 1;
        }
        if let Some(tx) = rec.tx_dbm.filter(|t| t.is_finite()) {
            let logged_mw = match self.last_logged {
                Some(last) if last == tx => self.last_logged_mw,
                _ => mw(tx),
            };
            self.last_logged = Some(tx);
            self.last_logged_mw = logged_mw;
            self.logged.records_with_tx += 1;
            self.logged.tx_mw_sum += logged_mw;
            self.logged.chosen_mw_sum += chosen_mw;
        }
        if s.reason.is_ignored_reading() {
            if let Some(c) = self.ignored_readings.get_mut(s.reason.index()) {
                *c += 1;
            }
        }
    }

    /// Add the totals of another replay (another device of a fleet): counts
    /// and linear sums add; [`Summary::max_tx_dbm_used`] and
    /// [`Summary::max_allowed`] become the larger of the two.
    pub fn merge(&mut self, other: &Summary) {
        self.logs += other.logs;
        self.records += other.records;
        self.judged += other.judged;
        self.lost += other.lost;
        self.unjudged += other.unjudged;
        self.judged_at_max += other.judged_at_max;
        self.lost_at_max += other.lost_at_max;
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
        self.tx_mw_sum += other.tx_mw_sum;
        self.max_mw_sum += other.max_mw_sum;
        self.logged.merge(&other.logged);
        self.held += other.held;
        self.duty_limited += other.duty_limited;
        self.rate_changes += other.rate_changes;
        for (a, b) in self.per_rate.iter_mut().zip(other.per_rate.iter()) {
            a.merge(b);
        }
        self.airtime_us += other.airtime_us;
        self.charge_uc += other.charge_uc;
        self.charged += other.charged;
        self.judged_charge_uc += other.judged_charge_uc;
    }

    /// Delivered / (judged + held): held packets count as not delivered
    /// (`None` before a judged or held record).
    pub fn delivered_fraction(&self) -> Option<f32> {
        ratio(self.judged - self.lost, self.judged + self.held)
    }

    /// Charge of the judged and held packets per delivered packet, µC
    /// (`None` without an energy profile or before a delivered packet): a
    /// lost or held packet costs its charge and delivers nothing; an
    /// unjudged record, whose fate is unknown, is left out of both sides.
    /// The same rule as the energy tally's
    /// [`charge_per_delivered`](crate::energy::EnergyTally::charge_per_delivered).
    pub fn charge_per_delivered_uc(&self) -> Option<f64> {
        let delivered = self.judged - self.lost;
        if self.charged == 0 || delivered == 0 {
            None
        } else {
            #[allow(clippy::cast_precision_loss)] // a count far below 2⁵³
            Some(self.judged_charge_uc / delivered as f64)
        }
    }

    /// Share of the records sent at rate `m` among all records sent at a
    /// rate (`None` before one).
    pub fn rate_share(&self, m: u8) -> Option<f32> {
        let total: u64 = self.per_rate.iter().map(|t| t.packets).sum();
        let at = self.per_rate.get(usize::from(m))?.packets;
        ratio(at, total)
    }

    /// Lost / judged (`None` before a judged record).
    pub fn outage_fraction(&self) -> Option<f32> {
        ratio(self.lost, self.judged)
    }

    /// Loss rate of the judged packets *not* sent at the highest allowed
    /// level: what the controller's choices cost, apart from the packets
    /// that no allowed power could have saved.
    pub fn outage_below_max(&self) -> Option<f32> {
        ratio(
            self.lost - self.lost_at_max,
            self.judged - self.judged_at_max,
        )
    }

    /// `10·log10` of the mean chosen power in mW (`None` before a record).
    pub fn mean_tx_dbm(&self) -> Option<Dbm> {
        mean_dbm(self.tx_mw_sum, self.records)
    }

    /// How much less power, dB, the controller spent than the device did as
    /// logged, over the records that logged a transmit power (positive: the
    /// controller spends less).
    pub fn saving_vs_logged_db(&self) -> Option<Db> {
        ratio_db(self.logged.tx_mw_sum, self.logged.chosen_mw_sum)
    }

    /// How much lower the mean power is than always sending at the highest
    /// allowed level (each log's own, for merged totals), dB.
    pub fn saving_vs_max_db(&self) -> Option<Db> {
        ratio_db(self.max_mw_sum, self.tx_mw_sum)
    }

    /// Readings ignored for reason `r`.
    pub fn ignored(&self, r: Reason) -> u64 {
        self.ignored_readings.get(r.index()).copied().unwrap_or(0)
    }
}

/// Lowest level an empty [`Summary`] starts from, dBm (below every valid
/// setting).
const SETTING_FLOOR_DBM: f32 = 1000.0;

/// A fleet's totals: the [`Summary`] of every log added up, and the devices
/// that miss their own target.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Fleet {
    /// The logs' totals added up (loss and power are never averaged per
    /// device: Σ lost / Σ judged, Σ mW / Σ records).
    pub total: Summary,
    /// Logs whose loss rate is above their own target outage.
    pub missing_target: u64,
    /// Logs with no judged record.
    pub without_judged: u64,
    /// The highest loss rate of a log and the log's position (0-based, in
    /// the order added); the first such log on ties.
    pub worst: Option<(f32, u64)>,
}

impl Default for Fleet {
    fn default() -> Self {
        Fleet::new()
    }
}

impl Fleet {
    /// No log yet.
    pub fn new() -> Self {
        Fleet {
            total: Summary::empty(),
            missing_target: 0,
            without_judged: 0,
            worst: None,
        }
    }

    /// Add one log's totals, judged against that log's `target_outage`.
    pub fn add(&mut self, s: &Summary, target_outage: f32) {
        let position = self.total.logs;
        match s.outage_fraction() {
            Some(f) => {
                if f > target_outage {
                    self.missing_target += 1;
                }
                if self.worst.is_none_or(|(w, _)| f > w) {
                    self.worst = Some((f, position));
                }
            }
            None => self.without_judged += 1,
        }
        self.total.merge(s);
    }
}

/// A record's logged readings as a replay checks them (item 5 of
/// [`Replay`]'s semantics), from [`Replay::check`]: what the record says,
/// apart from what the controller does with it. The check reads only
/// settings that do not move, so it can run ahead of the replay (on
/// another thread) or once for several replays that check alike
/// ([`Replay::checks_like`]); [`Replay::step_checked`] takes it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CheckedRecord {
    /// `None`: a reading is missing; else the checked readings or why
    /// they cannot be judged.
    readings: Option<Result<LoggedReading, Reason>>,
}

/// A controller replaying a log, with its running [`Summary`].
///
/// ## Semantics
/// Records are taken one at a time, in order. For record `k`:
/// 1. the controller's power `chosen` (and rate `m`, with a rate table)
///    for record `k` is the one it decided from the observations of records
///    before `k`;
/// 2. the channel of record `k` is the logged one. The controller's loss to
///    noise `z = tx − (rssi − noise)` does not depend on the power sent, so
///    the replayed SNR is `chosen − z` (= `rssi − tx + chosen − noise`), and
///    the replayed received power `rssi − tx + chosen`; both are computed
///    in the controller's own fixed point (1/8192 dB), once. Across rates
///    the noise floor scales with the rate's noise bandwidth: the replayed
///    SNR at rate `m` is `rssi − tx + chosen − noise − 10·log10(B_m /
///    B_logged)`, where `B_logged` is the bandwidth of the rate the record
///    was sent at: its `rate` field, else the `logged_rate` setting; when
///    the table gives bandwidths and neither says, the record is not judged
///    (reason `ignored_rate_unknown`: the rate is never guessed). A table
///    without bandwidths has no noise change;
/// 3. the packet is lost when the replayed SNR is below the required SNR
///    (of rate `m`, with a rate table); the same rule judges the logged
///    packet (`rssi − noise` at the logged power, against the logged rate's
///    required SNR), for [`Summary::logged`] (not judged when the logged
///    rate is unknown);
/// 4. a lost packet gives the controller a loss and no readings. A
///    delivered one gives it the far end's report of the replayed packet:
///    its loss to noise and noise floor (at rate `m`'s bandwidth), unless
///    the replayed received power is at or above `rssi_saturation_dbm`: the
///    far end's reading would then be clipped, so the controller ignores
///    it, as it would live (reason `ignored_saturated`). Saturation clips
///    the report, not the packet: the packet is delivered;
/// 5. a record with a missing reading, or whose *logged* readings would be
///    refused as a live feedback (NaN or infinite; a transmit power outside
///    the radio's `min_tx_dbm..max_tx_dbm` by more than 1 dB; an RSSI or
///    noise floor outside `rssi_min_dbm..rssi_max_dbm`,
///    `noise_min_dbm..noise_max_dbm`; an RSSI at or above
///    `rssi_saturation_dbm`), cannot be judged: it is counted apart
///    (the reason in [`Summary::ignored_readings`] for the bad ones) and
///    the controller learns nothing from it. Its packet was sent: its
///    airtime and charge count;
/// 6. when the controller's decision held record `k` (no rate fits the
///    duty-cycle budget), the packet is not sent: outcome
///    [`Outcome::Held`], counted in [`Summary::held`] apart from the judged
///    ones and as not delivered ([`Summary::delivered_fraction`]); it takes
///    no airtime, costs only the profile's fixed per-packet charge (the
///    device woke up), and the controller learns nothing but the time.
///
/// With an empty rate table, or a table of one rate whose required SNR is
/// `required_snr_db`, and no duty limit, every decision and every total is
/// the power-only controller's, bit for bit.
///
/// Each logged reading is checked once, by the controller's own feedback
/// check. A logged reading clipped by a receiver just below its saturation
/// level gives a replayed received power that is only a lower bound, so the
/// replay is pessimistic for it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Replay<const W: usize> {
    controller: Controller<W>,
    summary: Summary,
    /// Index of the `logged_rate` setting in the table.
    logged_rate: Option<u8>,
    /// Whether the rate table gives noise bandwidths.
    bandwidths: bool,
}

impl<const W: usize> Replay<W> {
    /// A replay with a fresh controller (a table of more than one rate
    /// needs an energy profile: [`Replay::with_energy`]).
    pub fn new(cfg: ControllerConfig) -> Result<Self, ConfigError> {
        Self::build(cfg, None)
    }

    /// A replay that costs every packet with `profile` (charge per packet
    /// at the chosen power and the chosen rate's airtime) and lets the
    /// controller choose among the rates by that cost.
    pub fn with_energy<const N: usize>(
        cfg: ControllerConfig,
        profile: &EnergyProfile<N>,
    ) -> Result<Self, ConfigError> {
        let charge = ChargeTable::from_profile(profile).map_err(|_| ConfigError::Inconsistent {
            setting: "rates",
            why: "the energy profile's transmit current table has too many points",
        })?;
        Self::with_charge(cfg, charge)
    }

    /// [`Replay::with_energy`] from the profile's charge table
    /// ([`ChargeTable::from_profile`]) already made: a caller with little
    /// stack (the C library on a Cortex-M0) makes it in a frame of its own.
    pub fn with_charge(cfg: ControllerConfig, charge: ChargeTable) -> Result<Self, ConfigError> {
        Self::build(cfg, Some(charge))
    }

    fn build(cfg: ControllerConfig, charge: Option<ChargeTable>) -> Result<Self, ConfigError> {
        let controller = Controller::<W>::with_charge(cfg, charge)?;
        let summary = Summary::new(controller.limits().1);
        Ok(Replay {
            controller,
            summary,
            logged_rate: cfg.logged_rate.and_then(|n| cfg.rates.index_of(n.as_str())),
            bandwidths: cfg
                .rates
                .get(0)
                .is_some_and(|r| r.noise_bandwidth_hz.is_some()),
        })
    }

    /// The rate record `rec` was sent at: `Ok(Some(index))`, `Ok(None)`
    /// when it does not matter (no table, or no bandwidths and no rate
    /// said), `Err` when it is needed and unknown.
    fn logged_rate_of(&self, rec: &LogRecord) -> Result<Option<u8>, Reason> {
        let n = self.controller.rate_count();
        if n == 0 {
            return Ok(None);
        }
        match rec.rate.or(self.logged_rate) {
            Some(i) if i < n => Ok(Some(i)),
            Some(_) => Err(Reason::IgnoredRateUnknown),
            None if self.bandwidths => Err(Reason::IgnoredRateUnknown),
            None => Ok(None),
        }
    }

    /// Airtime of the packet sent at `level` (1/8192 dBm) and rate `rate`,
    /// and its charge by the profile (in its integer form,
    /// [`ChargeTable`]: within 10⁻⁴ of the float costing).
    fn cost(
        &self,
        level: i32,
        rate: Option<u8>,
        held: bool,
    ) -> (Option<u32>, Option<Microcoulombs>) {
        let air = rate.and_then(|m| self.controller.airtime_us(m));
        let charge = self.controller.charge_table().map(|t| {
            let pc = if held {
                t.per_packet_pc()
            } else {
                t.charge_pc(level, air.unwrap_or_else(|| t.profile_airtime_us()))
            };
            #[allow(clippy::cast_precision_loss, clippy::cast_possible_truncation)]
            // µC of one packet: far inside f32's range.
            Microcoulombs((pc as f64 * 1e-6) as f32)
        });
        (if held { air.map(|_| 0) } else { air }, charge)
    }

    /// Replay one record (see [`Replay`] for the semantics).
    pub fn step(&mut self, rec: &LogRecord) -> ReplayStep {
        let checked = self.check(rec);
        self.step_checked(rec, &checked)
    }

    /// Check the logged readings of `rec` (item 5 of the semantics): the
    /// part of [`Replay::step`] that depends on the record and the settings
    /// only, never on what the replay has seen.
    pub fn check(&self, rec: &LogRecord) -> CheckedRecord {
        CheckedRecord {
            readings: match (rec.tx_dbm, rec.rssi_dbm, rec.noise_dbm) {
                (Some(tx), Some(rssi), Some(noise)) => {
                    Some(self.controller.check_logged(tx, rssi, noise))
                }
                _ => None,
            },
        }
    }

    /// Whether `other` checks records exactly as this replay does (the same
    /// plausibility bounds and saturation level): a [`CheckedRecord`] of
    /// either serves both.
    pub fn checks_like(&self, other: &Self) -> bool {
        self.controller.checks_like(&other.controller)
    }

    /// [`Replay::step`] with the record's check done already: `checked` is
    /// `check(rec)` of this replay or of one that [`checks_like`] it (any
    /// other gives the replay of other readings). `step(rec)` is
    /// `step_checked(rec, &check(rec))`, bit for bit.
    ///
    /// [`checks_like`]: Replay::checks_like
    pub fn step_checked(&mut self, rec: &LogRecord, checked: &CheckedRecord) -> ReplayStep {
        let logged_rate = self.logged_rate_of(rec);
        let c = &mut self.controller;
        let chosen = c.tx();
        let level = c.level_fine();
        let rate = c.rate();
        let held = c.is_held();
        let at_max = c.at_top();
        let t_ms = rec.t_ms;
        let m = rate.unwrap_or(0);
        let (outcome, snr, logged_lost, d) = match checked.readings {
            Some(readings) => {
                match (readings, logged_rate) {
                    (Err(why), _) | (Ok(_), Err(why)) => {
                        if held {
                            (Outcome::Held, None, None, c.held(t_ms))
                        } else {
                            (Outcome::Unjudged, None, None, c.apply_nothing(t_ms, why))
                        }
                    }
                    (Ok(r), Ok(logged)) => {
                        let norm_log = logged.map_or(0, |l| c.norm_fine(l));
                        let logged_lost = match logged {
                            Some(l) => Some(r.logged_snr < c.required_fine(l)),
                            None if c.rate_count() == 0 => Some(r.logged_snr < c.required_fine(0)),
                            None => None,
                        };
                        if held {
                            (Outcome::Held, None, logged_lost, c.held(t_ms))
                        } else {
                            // The noise change from the logged rate to rate m.
                            let shift = c.norm_fine(m).saturating_sub(norm_log);
                            let required = c.required_fine(m);
                            let snr = c.snr_at_level(&r).saturating_sub(shift);
                            if snr < required {
                                let d = c.apply_replayed(t_ms, false, None);
                                (Outcome::Lost, Some(snr), logged_lost, d)
                            } else {
                                let reading = if c.saturates_at_level(&r) {
                                    Err(Reason::IgnoredSaturated)
                                } else {
                                    Ok((r.z.saturating_add(shift), r.noise.saturating_add(shift)))
                                };
                                let d = c.apply_replayed(t_ms, true, Some(reading));
                                (Outcome::Delivered, Some(snr), logged_lost, d)
                            }
                        }
                    }
                }
            }
            _ => {
                if held {
                    (Outcome::Held, None, None, c.held(t_ms))
                } else {
                    (
                        Outcome::Unjudged,
                        None,
                        None,
                        c.apply_nothing(t_ms, Reason::NoInformation),
                    )
                }
            }
        };
        let (airtime_us, charge) = self.cost(level, rate, held);
        let step = ReplayStep {
            t_ms,
            chosen,
            replayed_snr: snr.map(|x| Db(Controller::<W>::db_of_fine(x))),
            outcome,
            logged_lost,
            at_max,
            path_loss_estimate: d.path_loss(),
            margin: d.margin(),
            reason: d.reason,
            next_tx: d.tx,
            rate,
            next_rate: d.rate,
            next_held: d.held,
            airtime_us,
            charge,
        };
        self.summary.add(rec, &step);
        step
    }

    /// The received power below which the packet of `rec` is lost at the
    /// rate the controller chose for it: its logged noise floor plus the
    /// required SNR (`None` without a noise floor).
    pub fn loss_threshold(&self, rec: &LogRecord) -> Option<Dbm> {
        let noise = rec.noise_dbm.filter(|n| n.is_finite())?;
        let m = self.controller.rate().unwrap_or(0);
        Some(Dbm(noise
            + Controller::<W>::db_of_fine(
                self.controller.required_fine(m),
            )))
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
            rate: None,
        }
    }

    fn replay() -> Replay<32> {
        match Replay::<32>::new(ControllerConfig::sub_ghz_node()) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        }
    }

    fn step_at(p: f32, outcome: Outcome) -> ReplayStep {
        ReplayStep {
            t_ms: 0,
            chosen: Dbm(p),
            replayed_snr: None,
            outcome,
            logged_lost: None,
            at_max: false,
            path_loss_estimate: None,
            margin: Db(0.0),
            reason: Reason::Hold,
            next_tx: Dbm(p),
            rate: None,
            next_rate: None,
            next_held: false,
            airtime_us: None,
            charge: None,
        }
    }

    #[test]
    fn judges_by_replayed_snr() {
        let mut r = replay();
        // Start power 14 dBm. Logged at 10 dBm, −105 dBm received, −110
        // noise: replayed rx = −105 − 10 + 14 = −101, SNR 9 dB ≥ 8: delivered.
        let s = r.step(&rec(0, 10.0, -105.0, -110.0));
        assert_eq!(s.chosen, Dbm(14.0));
        assert_eq!(s.outcome, Outcome::Delivered);
        assert_eq!(s.replayed_snr, Some(Db(9.0)));
        // As logged: SNR 5 dB < 8, lost.
        assert_eq!(s.logged_lost, Some(true));
        assert!(s.at_max);
        // −108 at 10 dBm: replayed SNR 6 dB < 8: lost.
        let s = r.step(&rec(1, 10.0, -108.0, -110.0));
        assert_eq!(s.outcome, Outcome::Lost);
        let s = r.step(&LogRecord {
            t_ms: 2,
            tx_dbm: Some(10.0),
            rssi_dbm: None,
            noise_dbm: Some(-110.0),
            rate: None,
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
        assert_eq!((sum.judged_at_max, sum.lost_at_max), (2, 1));
        assert_eq!(sum.outage_below_max(), None);
        assert_eq!((sum.logged.judged, sum.logged.lost), (2, 2));
        assert_eq!(sum.ignored(Reason::IgnoredNotFinite), 1);
        assert_eq!(sum.max_tx_dbm_used, Some(Dbm(14.0)));
        // Always at the highest allowed level: no saving against it.
        assert!(sum.saving_vs_max_db().is_some_and(|e| e.0.abs() < 1e-4));
        // 14 dBm replayed against 10 dBm logged: 4 dB more.
        assert!(sum
            .saving_vs_logged_db()
            .is_some_and(|e| (e.0 + 4.0).abs() < 1e-4));
        assert_eq!(sum.power_changes, 0);
    }

    #[test]
    fn a_shared_check_replays_as_the_replay_own() {
        // Records of every kind: judged, lost, missing a reading, not
        // finite, implausible, saturated.
        let recs: [LogRecord; 8] = [
            rec(0, 10.0, -105.0, -110.0),
            rec(1, 10.0, -108.0, -110.0),
            LogRecord {
                t_ms: 2,
                tx_dbm: Some(10.0),
                rssi_dbm: None,
                noise_dbm: Some(-110.0),
                rate: None,
            },
            rec(3, 10.0, f32::NAN, -110.0),
            rec(4, 25.1, -100.0, -110.0),
            rec(5, 10.0, 0.0, -110.0),
            rec(6, -9.0, -5.0, -110.0),
            rec(7, 12.0, -96.5, -111.25),
        ];
        let mut moves = ControllerConfig::sub_ghz_node();
        moves.margin_step_db = Db(1.5);
        moves.max_step_down_db = Db(4.0);
        let mut own = match Replay::<32>::new(moves) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        let mut shared = own;
        let checker = replay();
        assert!(checker.checks_like(&own));
        for _ in 0..20 {
            for r in &recs {
                let a = own.step(r);
                let b = shared.step_checked(r, &checker.check(r));
                assert_eq!(a, b, "{r:?}");
            }
        }
        assert_eq!(own.summary(), shared.summary());
        // Other plausibility bounds check otherwise.
        let mut narrow = ControllerConfig::sub_ghz_node();
        narrow.rssi_max_dbm = Dbm(-100.0);
        let other = match Replay::<32>::new(narrow) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert!(!other.checks_like(&own));
        let loud = rec(8, -9.0, -5.0, -110.0);
        assert_ne!(other.check(&loud), own.check(&loud));
    }

    #[test]
    fn summary_means_in_milliwatts() {
        let mut s = Summary::new(Dbm(10.0));
        for p in [10.0f32, 0.0] {
            s.add(&LogRecord::default(), &step_at(p, Outcome::Unjudged));
        }
        // (10 mW + 1 mW) / 2 = 5.5 mW = 7.4036 dBm.
        let m = s.mean_tx_dbm().map_or(f32::NAN, |d| d.0);
        assert!((m - 7.403_627).abs() < 1e-4, "{m}");
        assert_eq!(s.power_changes, 1);
        assert_eq!(s.outage_fraction(), None);
        assert_eq!(s.saving_vs_logged_db(), None);
    }

    #[test]
    fn merged_summaries_add_linear_power() {
        let logged_at = |tx: f32| LogRecord {
            tx_dbm: Some(tx),
            ..LogRecord::default()
        };
        let mut a = Summary::new(Dbm(10.0));
        a.add(&logged_at(10.0), &step_at(10.0, Outcome::Lost));
        let mut b = Summary::new(Dbm(14.0));
        b.add(&logged_at(14.0), &step_at(0.0, Outcome::Delivered));
        b.add(&logged_at(14.0), &step_at(0.0, Outcome::Delivered));
        let mut f = Fleet::new();
        f.add(&a, 0.01);
        f.add(&b, 0.01);
        let t = &f.total;
        assert_eq!((t.logs, t.records, t.judged, t.lost), (2, 3, 3, 1));
        assert_eq!(t.max_tx_dbm_used, Some(Dbm(10.0)));
        assert_eq!(t.max_allowed, Dbm(14.0));
        assert_eq!((f.missing_target, f.worst), (1, Some((1.0, 0))));
        // (10 + 1 + 1) mW / 3 = 4 mW = 6.0206 dBm.
        let m = t.mean_tx_dbm().map_or(f32::NAN, |d| d.0);
        assert!((m - 6.020_6).abs() < 1e-3, "{m}");
        assert!(t
            .outage_fraction()
            .is_some_and(|f| (f - 1.0 / 3.0).abs() < 1e-6));
        // Reference: (1 × 10 mW + 2 × 25.119 mW) / 3 = 20.079 mW = 13.027 dBm,
        // less the mean 6.0206 dBm.
        let e = t.saving_vs_max_db().map_or(f32::NAN, |d| d.0);
        assert!((e - (13.027_4 - 6.020_6)).abs() < 1e-3, "{e}");
        // Logged: (10 + 25.119 + 25.119) mW against 12 mW replayed.
        let e = t.saving_vs_logged_db().map_or(f32::NAN, |d| d.0);
        let want = 10.0 * (60.237_6f64 / 12.0).log10();
        assert!((f64::from(e) - want).abs() < 1e-3, "{e} {want}");
    }

    #[test]
    fn replayed_rx_is_the_logged_channel_at_the_chosen_power() {
        let mut r = replay();
        let rec0 = rec(0, 10.0, -105.0, -110.0);
        let s = r.step(&rec0);
        // −105 − 10 + 14 = −101 dBm.
        assert_eq!(s.replayed_rx(&rec0), Some(Dbm(-101.0)));
        let gap = LogRecord {
            t_ms: 1,
            tx_dbm: Some(10.0),
            rssi_dbm: None,
            noise_dbm: Some(-110.0),
            rate: None,
        };
        let s = r.step(&gap);
        assert_eq!(s.replayed_rx(&gap), None);
    }

    #[test]
    fn a_replayed_reading_above_saturation_is_delivered_and_not_learnt() {
        let mut r = replay();
        // Logged at −9 dBm, −5 dBm received (clean, below the 0 dBm
        // saturation); replayed at 14 dBm it would arrive at +18 dBm.
        let s = r.step(&rec(0, -9.0, -5.0, -110.0));
        assert_eq!(s.outcome, Outcome::Delivered);
        assert_eq!(s.reason, Reason::IgnoredSaturated);
        assert_eq!(r.summary().ignored(Reason::IgnoredSaturated), 1);
        assert_eq!(r.summary().unjudged, 0);
    }

    #[test]
    fn logged_readings_the_radio_cannot_produce_are_not_judged() {
        let mut r = replay();
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
