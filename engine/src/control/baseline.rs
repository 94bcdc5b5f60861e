//! The rules the joint (rate, power) controller is compared with, as
//! per-packet rules (the tests and the host only feed them records):
//!
//! - power-only control at one fixed rate: the [`crate::control::Controller`]
//!   itself with a table of that one rate ([`single_rate`]);
//! - [`CommonPracticeRate`]: the rate rule of common practice — the fastest
//!   rate whose best SNR over the last [`COMMON_PRACTICE_HISTORY`] packets
//!   clears a fixed installation margin of [`COMMON_PRACTICE_MARGIN_DB`],
//!   then the power down in 3 dB steps by the excess; after three losses in
//!   a row 3 dB up, or at the highest power one rate slower (common
//!   practice of adaptive-data-rate servers, from memory);
//! - [`FixedMarginRate`]: one rate, the loss to noise through the
//!   exponential filter `F ← F/2 + z/2` plus a fixed margin: with the rate
//!   and the margin chosen in hindsight (a search the caller runs), the
//!   best single rate a person could have picked knowing the whole log.
//!
//! [`Judge`] restates the replay's rule ([`crate::control::Replay`]) in
//! `f32` for them: the replayed SNR at rate `m` is
//! `rssi − tx + chosen − noise − 10·log10(B_m / B_logged)`, lost below rate
//! `m`'s required SNR.

use super::config::{ControllerConfig, PowerSteps};
use crate::rate::{RateTable, MAX_RATES};
use crate::record::LogRecord;

/// Packets over which [`CommonPracticeRate`] takes the best SNR (common
/// practice, from memory).
pub const COMMON_PRACTICE_HISTORY: usize = 20;

/// Installation margin of [`CommonPracticeRate`], dB (common practice, from
/// memory).
pub const COMMON_PRACTICE_MARGIN_DB: f32 = 10.0;

/// Power step of [`CommonPracticeRate`], dB (common practice).
pub const COMMON_PRACTICE_STEP_DB: f32 = 3.0;

/// `cfg` with its rate table reduced to rate `m` (power-only control at
/// that rate; `required_snr_db` set to the rate's), `None` when `m` is not
/// in the table.
pub fn single_rate(cfg: &ControllerConfig, m: u8) -> Option<ControllerConfig> {
    let r = *cfg.rates.get(m)?;
    let mut c = *cfg;
    c.rates = RateTable::new(&[r]).ok()?;
    c.required_snr_db = r.required_snr;
    c.logged_rate = None;
    Some(c)
}

/// A replayed packet as the rule judges it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Judged {
    /// The replayed SNR at the chosen rate met its requirement.
    pub delivered: bool,
    /// Loss to noise at rate 0's bandwidth, `chosen − SNR − noise change`,
    /// dB: what a rule learns from a delivered packet.
    pub z: f32,
}

/// The replay's rule of a configuration, in `f32`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Judge {
    required: [f32; MAX_RATES],
    norm: [f32; MAX_RATES],
    n: u8,
    fallback_required: f32,
    logged_rate: Option<u8>,
    bandwidths: bool,
}

impl Judge {
    /// The rule of `cfg` (its rate table, or its `required_snr_db`).
    pub fn new(cfg: &ControllerConfig) -> Self {
        let t = &cfg.rates;
        let mut j = Judge {
            required: [0.0; MAX_RATES],
            norm: [0.0; MAX_RATES],
            n: u8::try_from(t.len()).unwrap_or(0),
            fallback_required: cfg.required_snr_db.0,
            logged_rate: cfg.logged_rate.and_then(|n| t.index_of(n.as_str())),
            bandwidths: t.get(0).is_some_and(|r| r.noise_bandwidth_hz.is_some()),
        };
        for (i, r) in t.as_slice().iter().enumerate() {
            let idx = u8::try_from(i).unwrap_or(0);
            if let (Some(a), Some(b)) = (j.required.get_mut(i), j.norm.get_mut(i)) {
                *a = r.required_snr.0;
                *b = t.noise_change_db(idx, 0).map_or(0.0, |d| d.0);
            }
        }
        j
    }

    /// Required SNR plus noise change of rate `m` (the offset a power must
    /// exceed the loss to noise at rate 0's bandwidth by), dB.
    pub fn offset(&self, m: u8) -> f32 {
        if self.n == 0 {
            return self.fallback_required;
        }
        let i = usize::from(m);
        self.required.get(i).copied().unwrap_or(0.0) + self.norm.get(i).copied().unwrap_or(0.0)
    }

    /// Record `rec` replayed at `chosen` dBm and rate `m`; `None` when it
    /// cannot be judged (a missing reading or an unknown logged rate).
    pub fn judge(&self, rec: &LogRecord, chosen: f32, m: u8) -> Option<Judged> {
        let (tx, rssi, noise) = (rec.tx_dbm?, rec.rssi_dbm?, rec.noise_dbm?);
        if !(tx.is_finite() && rssi.is_finite() && noise.is_finite()) {
            return None;
        }
        let norm_log = if self.n == 0 {
            0.0
        } else {
            match rec.rate.or(self.logged_rate) {
                Some(l) if l < self.n => self.norm.get(usize::from(l)).copied().unwrap_or(0.0),
                Some(_) => return None,
                None if self.bandwidths => return None,
                None => 0.0,
            }
        };
        // Loss to noise at rate 0's bandwidth.
        let z = tx - (rssi - noise) - norm_log;
        Some(Judged {
            delivered: chosen - z >= self.offset(m),
            z,
        })
    }
}

/// A per-packet baseline rule: what it sends, the rule it is judged by and
/// what it learns from a judged packet. [`step`] is the one way to feed it.
pub trait Rule {
    /// Power (dBm) and rate index for the next packet.
    fn choice(&self) -> (f32, u8);
    /// The judge of this rule's configuration.
    fn judge(&self) -> &Judge;
    /// Take the outcome of the packet just sent (`Some(z)` delivered, with
    /// its loss to noise; `None` lost).
    fn observe(&mut self, delivered: Option<f32>);
}

/// One packet of `rule` on record `rec`: its choice, judged by the rule's
/// judge; the rule learns from a judged packet only (an unjudged one
/// teaches it nothing). Returns the power, the rate and the judgement.
pub fn step<R: Rule + ?Sized>(rule: &mut R, rec: &LogRecord) -> (f32, u8, Option<Judged>) {
    let (tx, m) = rule.choice();
    let judged = rule.judge().judge(rec, tx, m);
    if let Some(j) = judged {
        rule.observe(j.delivered.then_some(j.z));
    }
    (tx, m, judged)
}

/// The lowest level of `cfg`'s grid at or above `p`, within
/// `[min_tx_dbm, tx_ceiling]`.
pub fn level_at_or_above(cfg: &ControllerConfig, p: f32) -> f32 {
    let lo = cfg.min_tx_dbm.0;
    let hi = cfg.tx_ceiling().0;
    let x = match cfg.steps {
        PowerSteps::Uniform(s) => {
            let top = lo + libm::floorf((hi - lo) / s.0 + 1e-4) * s.0;
            let k = libm::ceilf((p - lo) / s.0 - 1e-4);
            let v = lo + k * s.0;
            if v > top {
                top
            } else {
                v
            }
        }
        PowerSteps::Table(t) => {
            let mut best: Option<f32> = None;
            let mut top = lo;
            for l in t
                .levels()
                .iter()
                .map(|l| l.0)
                .filter(|l| *l >= lo && *l <= hi)
            {
                top = l;
                if best.is_none() && l >= p - 1e-4 {
                    best = Some(l);
                }
            }
            best.unwrap_or(top)
        }
    };
    if x < lo {
        lo
    } else {
        x
    }
}

/// The highest level of `cfg`'s grid.
pub fn top_level(cfg: &ControllerConfig) -> f32 {
    level_at_or_above(cfg, f32::MAX)
}

/// The rate rule of common practice (see the module).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CommonPracticeRate {
    judge: Judge,
    cfg: ControllerConfig,
    /// Loss to noise (rate 0's bandwidth) of the last delivered packets.
    z: [f32; COMMON_PRACTICE_HISTORY],
    n: usize,
    head: usize,
    losses: u16,
    tx: f32,
    rate: u8,
    /// Rates from the fastest (least airtime) to the slowest.
    by_speed: [u8; MAX_RATES],
}

impl CommonPracticeRate {
    /// The rule over `cfg`'s rate table, starting at the highest power and
    /// the slowest (most robust) rate.
    pub fn new(cfg: &ControllerConfig) -> Self {
        let judge = Judge::new(cfg);
        let mut by_speed = [0u8; MAX_RATES];
        let n = cfg.rates.len();
        for (i, s) in by_speed.iter_mut().enumerate().take(n) {
            *s = u8::try_from(i).unwrap_or(0);
        }
        // Insertion sort by airtime, fastest first (at most eight).
        for i in 1..n {
            let mut j = i;
            while j > 0 {
                let a = by_speed
                    .get(j - 1)
                    .and_then(|&k| cfg.rates.get(k))
                    .map_or(0, |r| r.airtime_us);
                let b = by_speed
                    .get(j)
                    .and_then(|&k| cfg.rates.get(k))
                    .map_or(0, |r| r.airtime_us);
                if a > b {
                    by_speed.swap(j - 1, j);
                    j -= 1;
                } else {
                    break;
                }
            }
        }
        let slowest = by_speed.get(n.saturating_sub(1)).copied().unwrap_or(0);
        CommonPracticeRate {
            judge,
            cfg: *cfg,
            z: [0.0; COMMON_PRACTICE_HISTORY],
            n: 0,
            head: 0,
            losses: 0,
            tx: top_level(cfg),
            rate: slowest,
            by_speed,
        }
    }
}

impl Rule for CommonPracticeRate {
    fn choice(&self) -> (f32, u8) {
        (self.tx, self.rate)
    }

    fn judge(&self) -> &Judge {
        &self.judge
    }

    fn observe(&mut self, delivered: Option<f32>) {
        let top = top_level(&self.cfg);
        let n_rates = self.cfg.rates.len();
        match delivered {
            None => {
                self.losses = self.losses.saturating_add(1);
                if self.losses >= 3 {
                    self.losses = 0;
                    if self.tx < top - 1e-4 {
                        self.tx = level_at_or_above(&self.cfg, self.tx + COMMON_PRACTICE_STEP_DB);
                    } else {
                        // One rate slower.
                        let pos = self
                            .by_speed
                            .iter()
                            .take(n_rates)
                            .position(|&r| r == self.rate);
                        if let Some(p) = pos.filter(|p| p + 1 < n_rates) {
                            if let Some(&next) = self.by_speed.get(p + 1) {
                                self.rate = next;
                            }
                        }
                    }
                }
            }
            Some(z) => {
                self.losses = 0;
                if let Some(slot) = self.z.get_mut(self.head) {
                    *slot = z;
                }
                self.head = (self.head + 1) % COMMON_PRACTICE_HISTORY;
                self.n = (self.n + 1).min(COMMON_PRACTICE_HISTORY);
                let best = self
                    .z
                    .iter()
                    .take(self.n)
                    .copied()
                    .fold(f32::INFINITY, f32::min);
                // The fastest rate whose best SNR at the highest power clears
                // the margin; else the slowest.
                let mut rate = self
                    .by_speed
                    .get(n_rates.saturating_sub(1))
                    .copied()
                    .unwrap_or(0);
                for &m in self.by_speed.iter().take(n_rates) {
                    if top - best - self.judge.offset(m) >= COMMON_PRACTICE_MARGIN_DB {
                        rate = m;
                        break;
                    }
                }
                self.rate = rate;
                let excess = top - best - self.judge.offset(rate) - COMMON_PRACTICE_MARGIN_DB;
                let steps = libm::floorf(excess / COMMON_PRACTICE_STEP_DB).max(0.0);
                self.tx = level_at_or_above(&self.cfg, top - steps * COMMON_PRACTICE_STEP_DB);
            }
        }
    }
}

/// One rate, a filtered loss to noise and a fixed margin (see the module).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FixedMarginRate {
    cfg: ControllerConfig,
    judge: Judge,
    rate: u8,
    margin: f32,
    filtered: Option<f32>,
    tx: f32,
}

impl FixedMarginRate {
    /// The rule at rate `m` with `margin` dB, starting at the highest power.
    pub fn new(cfg: &ControllerConfig, m: u8, margin: f32) -> Self {
        FixedMarginRate {
            cfg: *cfg,
            judge: Judge::new(cfg),
            rate: m,
            margin,
            filtered: None,
            tx: top_level(cfg),
        }
    }
}

impl Rule for FixedMarginRate {
    fn choice(&self) -> (f32, u8) {
        (self.tx, self.rate)
    }

    fn judge(&self) -> &Judge {
        &self.judge
    }

    fn observe(&mut self, delivered: Option<f32>) {
        if let Some(z) = delivered {
            self.filtered = Some(match self.filtered {
                None => z,
                Some(f) => 0.5 * f + 0.5 * z,
            });
        }
        if let Some(f) = self.filtered {
            self.tx = level_at_or_above(&self.cfg, self.judge.offset(self.rate) + f + self.margin);
        }
    }
}
