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

/// Lowest fixed margin the hindsight search tries, dB.
pub const HINDSIGHT_MIN_MARGIN_DB: f32 = -20.0;
/// Highest fixed margin the hindsight search tries, dB.
pub const HINDSIGHT_MAX_MARGIN_DB: f32 = 60.0;
/// Resolution of the hindsight search's boundary, dB.
pub const HINDSIGHT_RESOLUTION_DB: f32 = 0.01;
/// Step of the hindsight search above the boundary, dB.
pub const HINDSIGHT_STEP_DB: f32 = 0.5;
/// Steps above the boundary without a cheaper margin that end the search.
pub const HINDSIGHT_PATIENCE: u8 = 4;

/// One replay of a log by [`FixedMarginRate`] at one margin, as the
/// hindsight search needs it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MarginRun {
    /// Fraction of the packets lost (NaN when none was judged).
    pub loss: f64,
    /// Charge per delivered packet, any unit (NaN when none was delivered).
    pub charge_per_delivered: f64,
}

/// The hindsight search of one rate: the fixed margin within
/// [`HINDSIGHT_MIN_MARGIN_DB`, `HINDSIGHT_MAX_MARGIN_DB`] whose loss over
/// the whole log is at most `target` for the least charge per delivered
/// packet. `run(margin)` is the caller's replay of the log through
/// [`FixedMarginRate`] at that margin (the engine holds no log); its error
/// ends the search. `Ok(None)` when even the highest margin misses the
/// target. Both the host's `replay --baselines` and the tests use it.
///
/// First the smallest margin that meets the target, to
/// [`HINDSIGHT_RESOLUTION_DB`], by bisection (a larger margin never sends
/// at less power, so the loss does not grow with it). That is the cheapest
/// when the charge is mostly the transmitter's; when a large part is paid
/// per packet (a GPS fix), a higher margin that delivers more can cost less
/// per delivered packet, so the search then steps up by
/// [`HINDSIGHT_STEP_DB`] while a cheaper margin turns up within
/// [`HINDSIGHT_PATIENCE`] steps.
pub fn hindsight_margin<E>(
    target: f64,
    mut run: impl FnMut(f32) -> Result<MarginRun, E>,
) -> Result<Option<(f32, MarginRun)>, E> {
    let (mut lo, mut hi) = (HINDSIGHT_MIN_MARGIN_DB, HINDSIGHT_MAX_MARGIN_DB);
    // NaN (nothing judged) never meets the target.
    let meets = |r: &MarginRun| r.loss <= target;
    let mut at_hi = run(hi)?;
    if !meets(&at_hi) {
        return Ok(None);
    }
    let at_lo = run(lo)?;
    if meets(&at_lo) {
        hi = lo;
        at_hi = at_lo;
    } else {
        // At most 13 halvings of the 80 dB range to 0.01 dB.
        while hi - lo > HINDSIGHT_RESOLUTION_DB {
            let mid = 0.5 * (lo + hi);
            let r = run(mid)?;
            if meets(&r) {
                (hi, at_hi) = (mid, r);
            } else {
                lo = mid;
            }
        }
    }
    let mut best = (hi, at_hi);
    let mut misses = 0u8;
    let mut k = 1u16;
    while misses < HINDSIGHT_PATIENCE {
        let m = hi + f32::from(k) * HINDSIGHT_STEP_DB;
        if m > HINDSIGHT_MAX_MARGIN_DB {
            break;
        }
        k += 1;
        let r = run(m)?;
        // NaN compares false: never cheaper.
        if meets(&r) && r.charge_per_delivered < best.1.charge_per_delivered {
            best = (m, r);
            misses = 0;
        } else {
            misses += 1;
        }
    }
    Ok(Some(best))
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

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn run(loss: f64, cost: f64) -> Result<MarginRun, ()> {
        Ok(MarginRun {
            loss,
            charge_per_delivered: cost,
        })
    }

    #[test]
    fn the_hindsight_search_finds_the_smallest_margin_that_meets_the_target() {
        // Loss falls linearly from 50 % at 0 dB to 0 at 20 dB: 10 % at 16
        // dB; the charge per delivered packet rises with the margin.
        let f = |m: f32| {
            run(
                f64::from((0.5 - m / 40.0).clamp(0.0, 1.0)),
                f64::from(m) + 100.0,
            )
        };
        let (m, r) = hindsight_margin(0.1, f).unwrap().unwrap();
        assert!((m - 16.0).abs() <= HINDSIGHT_RESOLUTION_DB, "{m}");
        assert!(r.loss <= 0.1);
        // Never met: none; always met: the lowest margin.
        assert_eq!(hindsight_margin(0.1, |_| run(0.2, 1.0)), Ok(None));
        let (m, _) = hindsight_margin(0.1, |m| run(0.0, f64::from(m) + 100.0))
            .unwrap()
            .unwrap();
        assert_eq!(m, HINDSIGHT_MIN_MARGIN_DB);
        // Nothing judged (NaN) never meets it; an error ends the search.
        assert_eq!(hindsight_margin(0.1, |_| run(f64::NAN, 1.0)), Ok(None));
        assert_eq!(hindsight_margin(0.1, |_| Err::<MarginRun, u8>(7)), Err(7));
    }

    /// A charge per delivered packet that falls above the boundary (a large
    /// per-packet charge: more deliveries cost less each) down to 20 dB:
    /// the search steps up to it.
    #[test]
    fn the_hindsight_search_steps_up_to_a_cheaper_margin() {
        let f = |m: f32| {
            run(
                f64::from((0.5 - m / 40.0).clamp(0.0, 1.0)),
                f64::from((m - 20.0).abs()) + 100.0,
            )
        };
        let (m, r) = hindsight_margin(0.1, f).unwrap().unwrap();
        assert!((m - 20.0).abs() <= HINDSIGHT_STEP_DB, "{m}");
        assert!(r.charge_per_delivered < 101.0, "{r:?}");
    }
}
