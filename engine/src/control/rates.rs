//! The rate layer of the controller: which rate, at the power the shared
//! estimate says that rate needs, costs the least charge per delivered
//! packet, within the power limits and the duty-cycle budget.
//!
//! All in the update's integers: levels in 1/8192 dB, airtimes in µs,
//! charges in pC ([`ChargeTable`]). One pass over at most [`MAX_RATES`]
//! rates per packet, with no division, logarithm or float.

use super::config::{ConfigError, ControllerConfig};
use super::fixed::to_fine;
use super::price::{self, LossModel, LOG_BITS, PRICE_BITS};
use super::reason::Reason;
use crate::energy::{AirtimeWindow, ChargeTable, TX_POINTS};
use crate::rate::MAX_RATES;

/// Fractional bits of the hysteresis factor.
const KEEP_BITS: u32 = 16;

/// Tolerance of the level comparisons, 1/8192 dB (as the controller's).
const EPS: i32 = 1;

/// The rate table in the units the update uses, derived once.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct RatePlan {
    /// Rates in the table (0: the rate is not in play).
    pub(crate) n: u8,
    /// How much higher the noise floor is at each rate than at rate 0,
    /// `10·log10(B_m / B_0)`, 1/8192 dB (0 without bandwidths).
    pub(crate) norm: [i32; MAX_RATES],
    /// `required + norm`: what the power must exceed the loss to noise at
    /// rate 0's bandwidth by, at each rate.
    pub(crate) offset: [i32; MAX_RATES],
    /// Airtime of each rate, µs.
    pub(crate) airtime_us: [u32; MAX_RATES],
    /// The energy profile (present whenever there is more than one rate).
    pub(crate) charge: Option<ChargeTable>,
    /// `1 − rate_hysteresis`, 2⁻¹⁶.
    pub(crate) keep: u32,
    /// `rate_dwell`.
    pub(crate) dwell: u16,
    /// `log2` of each rate's airtime (µs), 2⁻¹² octave.
    pub(crate) log_air: [i32; MAX_RATES],
    /// The loss price's loop (several rates only): its start, bounds and
    /// steps, `log2` of pC in 2⁻²⁴ octave.
    pub(crate) price: PriceLoop,
    /// `outage_ceiling` as `log2(1/(2q))` (see [`price::ceiling_log`]).
    pub(crate) ceiling: Option<i32>,
    /// `log2` of each segment's slope of the transmit current table (2⁻¹⁶
    /// µA per 1/8192 dB), 2⁻¹² octave; `i32::MIN` where the current does
    /// not rise.
    pub(crate) log_slope: [i32; TX_POINTS],
    /// The segments that hold the levels in use, `seg_lo..=seg_hi`, and
    /// those levels' bounds, 1/8192 dBm.
    pub(crate) seg_lo: u8,
    pub(crate) seg_hi: u8,
    pub(crate) bottom: i32,
    pub(crate) top: i32,
    /// The transmit current at `bottom` (µA) and the fixed charge of a
    /// packet (receive window, wake-up; pC): a packet's cheapest charge at
    /// each rate without a search of the table.
    pub(crate) bottom_ua: u32,
    pub(crate) fixed_pc: u64,
    /// The rates from the most robust (lowest offset) to the least, and
    /// each rate's place in that order.
    pub(crate) by_offset: [u8; MAX_RATES],
    pub(crate) rank: [u8; MAX_RATES],
}

/// The settings of the loss price's loop, `log2` of pC in 2⁻²⁴ octave.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct PriceLoop {
    /// `log2` of the price to start from: the charge of the fastest rate's
    /// packet at the highest power over the target loss.
    pub(crate) start: i32,
    /// Lowest price: the charge of the cheapest packet (a delivered packet
    /// is worth at least one packet).
    pub(crate) min: i32,
    /// Highest price: the dearest packet over the target loss, times 16.
    pub(crate) max: i32,
    /// Rise after a loss: at a 1 % target half the margin step as a power
    /// ratio (`margin_step_db · log2(10)/20` octave: ×1.06 for 0.5 dB),
    /// scaled by `√((1−p)/p ÷ 99)` at other targets (see `PriceLoop::new`).
    pub(crate) up: i32,
    /// Fall after a delivery: `up · p/(1−p)`.
    pub(crate) down: i32,
}

/// The priced choice of one packet (see [`RatePlan::choose_priced`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Priced {
    /// The rate and why it changed.
    pub(crate) choice: Choice,
    /// The power wanted at that rate, 1/8192 dBm (before rounding to a
    /// level), and how far it is above the rate's requirement.
    pub(crate) wanted: i32,
    pub(crate) above: i32,
    /// The plan gives the packet up (sends it below its requirement when
    /// more power was available): a loss then says nothing about the
    /// estimate (no climb).
    pub(crate) risky: bool,
    /// The price does not bind: the power wanted is below the lowest
    /// level (no fall of the price on a delivery: no wind-down).
    pub(crate) slack: bool,
}

/// The rate layer's answer for the next packet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Choice {
    /// Rate of the next packet.
    pub(crate) rate: u8,
    /// Why it changed (`None`: unchanged).
    pub(crate) reason: Option<Reason>,
    /// No rate fits the duty budget: the next packet is held.
    pub(crate) held: bool,
}

impl RatePlan {
    /// No rates (the power only).
    pub(crate) const fn empty() -> Self {
        RatePlan {
            n: 0,
            norm: [0; MAX_RATES],
            offset: [0; MAX_RATES],
            airtime_us: [0; MAX_RATES],
            charge: None,
            keep: 0,
            dwell: 0,
            log_air: [0; MAX_RATES],
            price: PriceLoop {
                start: 0,
                min: 0,
                max: 0,
                up: 0,
                down: 0,
            },
            ceiling: None,
            log_slope: [i32::MIN; TX_POINTS],
            seg_lo: 0,
            seg_hi: 0,
            bottom: 0,
            top: 0,
            bottom_ua: 0,
            fixed_pc: 0,
            by_offset: [0; MAX_RATES],
            rank: [0; MAX_RATES],
        }
    }

    /// The plan of `cfg`'s rate table, with the profile `charge` (needed
    /// when the table has more than one rate) covering `[bottom, top]`
    /// (1/8192 dBm, the controller's lowest and highest levels).
    pub(crate) fn new(
        cfg: &ControllerConfig,
        charge: Option<ChargeTable>,
        bottom: i32,
        top: i32,
    ) -> Result<Self, ConfigError> {
        let t = &cfg.rates;
        if t.len() > 1 && charge.is_none() {
            return Err(ConfigError::Inconsistent {
                setting: "rates",
                why: "choosing among several rates needs an energy profile (the transmit current at each power)",
            });
        }
        if let Some(c) = &charge {
            let (lo, hi) = c.range_fine();
            if lo > bottom.saturating_add(EPS) || hi < top.saturating_sub(EPS) {
                return Err(ConfigError::Inconsistent {
                    setting: "rates",
                    why: "the energy profile's transmit current table does not cover every power the controller may use",
                });
            }
        }
        if t.is_empty() && cfg.duty_limit.fraction().is_some() {
            return Err(ConfigError::Inconsistent {
                setting: "duty_limit",
                why: "needs a rate table (the airtime of a packet)",
            });
        }
        let mut p = RatePlan {
            n: u8::try_from(t.len()).unwrap_or(0),
            charge,
            dwell: cfg.rate_dwell,
            ceiling: price::ceiling_log(cfg.outage_ceiling),
            bottom,
            top,
            ..Self::empty()
        };

        for (i, r) in t.as_slice().iter().enumerate() {
            let idx = u8::try_from(i).unwrap_or(0);
            let norm = t.noise_change_db(idx, 0).map_or(0, |d| to_fine(d.0));
            let req = to_fine(r.required_snr.0);
            if let (Some(b), Some(c), Some(d)) = (
                p.norm.get_mut(i),
                p.offset.get_mut(i),
                p.airtime_us.get_mut(i),
            ) {
                *b = norm;
                *c = req.saturating_add(norm);
                *d = r.airtime_us;
            }
            if let Some(l) = p.log_air.get_mut(i) {
                *l = price::log2_q12(u64::from(r.airtime_us));
            }
        }
        // Insertion sort by offset (at most 8; equal offsets keep table
        // order).
        let n = usize::from(p.n);
        for i in 0..n {
            let m = u8::try_from(i).unwrap_or(0);
            let o = p.offset(m);
            let mut k = i;
            while k > 0 {
                let prev = p.by_offset.get(k - 1).copied().unwrap_or(0);
                if p.offset(prev) <= o {
                    break;
                }
                if let Some(slot) = p.by_offset.get_mut(k) {
                    *slot = prev;
                }
                k -= 1;
            }
            if let Some(slot) = p.by_offset.get_mut(k) {
                *slot = m;
            }
        }
        for k in 0..n {
            let m = usize::from(p.by_offset.get(k).copied().unwrap_or(0));
            if let Some(r) = p.rank.get_mut(m) {
                *r = u8::try_from(k).unwrap_or(0);
            }
        }
        if let Some(c) = &p.charge {
            p.bottom_ua = c.current_ua(bottom);
            p.fixed_pc = c.charge_pc(bottom, 0);
            let mut lo: Option<u8> = None;
            for j in 0..c.points() {
                let Some((_, hi, slope)) = c.segment(j) else {
                    break;
                };
                if let Some(l) = p.log_slope.get_mut(j) {
                    *l = u64::try_from(slope)
                        .ok()
                        .filter(|&s| s > 0)
                        .map_or(i32::MIN, price::log2_q12);
                }
                let j8 = u8::try_from(j).unwrap_or(0);
                let last = j + 2 >= c.points();
                if lo.is_none() && (hi > bottom || last) {
                    lo = Some(j8);
                }
                if lo.is_some() && (hi >= top || last) {
                    p.seg_hi = j8;
                    break;
                }
            }
            p.seg_lo = lo.unwrap_or(0);
        }
        if let (Some(c), true) = (&p.charge, p.n > 1) {
            let air = p.airtime_us.get(..usize::from(p.n)).unwrap_or(&[]);
            p.price = PriceLoop::new(cfg, c, air, bottom, top);
        }
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        {
            // rate_hysteresis in [0, 1): validated.
            p.keep = libm::roundf((1.0 - cfg.rate_hysteresis) * (1u32 << KEEP_BITS) as f32) as u32;
        }
        Ok(p)
    }

    fn at<T: Copy + Default>(a: &[T; MAX_RATES], m: u8) -> T {
        a.get(usize::from(m)).copied().unwrap_or_default()
    }

    /// Offset of rate `m` (see the field).
    pub(crate) fn offset(&self, m: u8) -> i32 {
        Self::at(&self.offset, m)
    }

    /// Noise change of rate `m` against rate 0.
    pub(crate) fn norm(&self, m: u8) -> i32 {
        Self::at(&self.norm, m)
    }

    /// Required SNR of rate `m` (its offset less its noise change).
    pub(crate) fn required(&self, m: u8) -> i32 {
        self.offset(m).wrapping_sub(self.norm(m))
    }

    /// Airtime of rate `m`, µs.
    pub(crate) fn airtime(&self, m: u8) -> u32 {
        Self::at(&self.airtime_us, m)
    }

    fn fits(&self, m: u8, w: Option<&AirtimeWindow>) -> bool {
        w.is_none_or(|w| w.fits(self.airtime(m)))
    }

    /// The reason for a change from `from` to `to`.
    fn direction(&self, from: u8, to: u8) -> Reason {
        if self.airtime(to) < self.airtime(from) {
            Reason::RateFaster
        } else {
            Reason::RateSlower
        }
    }

    /// The choice for the next packet when it is not priced (see
    /// [`Self::choose_priced`]): while the estimate does not drive the power
    /// (warming up, climbing), with one rate, or when no rate fits the duty
    /// budget. Only the budget moves the rate here: the rate in use while it
    /// fits, else the most robust rate that fits (`duty_limited`), else the
    /// packet is held. `may_switch` is false on an update whose reading was
    /// ignored or whose history was flushed: the rate then stays, and the
    /// packet is held if it does not fit (its reason stays the one that
    /// names the reading).
    pub(crate) fn choose(
        &self,
        cur: u8,
        window: Option<&AirtimeWindow>,
        may_switch: bool,
    ) -> Choice {
        let stay = Choice {
            rate: cur,
            reason: None,
            held: false,
        };
        let held = Choice {
            held: true,
            reason: Some(Reason::DutyHeld),
            ..stay
        };
        if self.fits(cur, window) {
            return stay;
        }
        if !may_switch || self.n <= 1 {
            return held;
        }
        // The most robust rate that fits (lowest offset).
        let mut pick: Option<(u8, i32)> = None;
        for m in 0..self.n {
            let o = self.offset(m);
            if self.fits(m, window) && pick.is_none_or(|(_, po)| o < po) {
                pick = Some((m, o));
            }
        }
        match pick {
            Some((m, _)) => Choice {
                rate: m,
                reason: Some(Reason::DutyLimited),
                held: false,
            },
            None => held,
        }
    }

    /// The next more robust rate than `cur` that fits the budget (the
    /// highest offset below `cur`'s): where a run of losses at the highest
    /// power goes next.
    pub(crate) fn more_robust(&self, cur: u8, window: Option<&AirtimeWindow>) -> Option<u8> {
        let oc = self.offset(cur);
        let mut pick: Option<(u8, i32)> = None;
        for m in 0..self.n {
            let o = self.offset(m);
            if o < oc && self.fits(m, window) && pick.is_none_or(|(_, po)| o > po) {
                pick = Some((m, o));
            }
        }
        pick.map(|(m, _)| m)
    }
}

/// `x` within `[lo, hi]` (`lo` wins if they cross: no panic).
fn clamp(x: i32, lo: i32, hi: i32) -> i32 {
    if x > hi {
        hi
    } else if x < lo {
        lo
    } else {
        x
    }
}

impl PriceLoop {
    /// The loop for `cfg` over the charge table `c`, the rates' airtimes
    /// `air` (µs) and the levels `[bottom, top]` (1/8192 dBm).
    #[allow(clippy::cast_precision_loss, clippy::cast_possible_truncation)]
    fn new(cfg: &ControllerConfig, c: &ChargeTable, air: &[u32], bottom: i32, top: i32) -> Self {
        let fast = air.iter().copied().min().unwrap_or(0);
        let slow = air.iter().copied().max().unwrap_or(0);
        let p = cfg.target_outage;
        let q = |x: f32| libm::roundf(x * (1u32 << PRICE_BITS) as f32) as i32;
        let lg = |pc: u64| libm::log2f(pc.max(1) as f32);
        // At a 1 % target, half the margin step's ratio: measured on the
        // rate scenarios (`tests/tests/rate_scenarios.rs`), the full step
        // made the price noisier and the charge higher; a tenth was too
        // slow to reach a 1 % target in 20 days of packets. At other
        // targets the step is scaled by √((1−p)/p ÷ 99): a loss raises
        // log μ by `up`, a delivery lowers it by `up·p/(1−p)`, so the
        // log-price moves by `up·√(p/(1−p))` per packet (its standard
        // deviation at the target), and the scaling keeps that the same at
        // every target. Unscaled, the price wandered over a factor of 30
        // at a 10 % target in correlated fading, where losses come in
        // bursts, and bought slower rates on its peaks (measured: 1.4 %
        // more charge per delivered packet than the hindsight rule at equal
        // loss; scaled, 0.5 % less, and the 1 % rows unchanged).
        let scale = libm::sqrtf((1.0 - p) / p / 99.0);
        let up = q(cfg.margin_step_db.0 * libm::log2f(10.0) / 20.0 * scale).max(1);
        let down = libm::roundf(up as f32 * p / (1.0 - p)).max(1.0) as i32;
        let min = q(lg(c.charge_pc(bottom, fast)));
        let max = q(lg(c.charge_pc(top, slow)) - libm::log2f(p) + 4.0);
        let start = q(lg(c.charge_pc(top, fast)) - libm::log2f(p))
            .min(max)
            .max(min);
        PriceLoop {
            start,
            min,
            max,
            up,
            down,
        }
    }
}

impl RatePlan {
    /// For rate `m` whose requirement is `base` (1/8192 dBm): the power
    /// that balances one more dB's charge against the risk it saves
    /// (`x ≥ 0` above `base`, walking the segments down from the highest
    /// level), raised to the ceiling's `floor_x` and clamped to the levels
    /// in use; with the power wanted before clamping and the segment.
    fn balance(
        &self,
        c: &ChargeTable,
        model: &LossModel,
        base: i32,
        m: u8,
        floor_x: Option<i32>,
    ) -> (i32, i32, usize) {
        // The charge per 1/8192 dB is slope · airtime · 2⁻¹⁶ pC.
        let la = Self::at(&self.log_air, m).saturating_sub(16 << LOG_BITS);
        let (first, last) = (usize::from(self.seg_lo), usize::from(self.seg_hi));
        let mut j = last;
        let mut want = base;
        while let Some((lo, hi, _)) = c.segment(j) {
            let hi = hi.min(self.top);
            let ls = self.log_slope.get(j).copied().unwrap_or(i32::MIN);
            if ls == i32::MIN {
                // Power that costs nothing more: all of the segment.
                want = hi;
                break;
            }
            let p = base.saturating_add(model.balance(ls.saturating_add(la)));
            if p >= lo || j <= first {
                want = p.min(hi);
                break;
            }
            j -= 1;
        }
        let mut want = want.max(base);
        if let Some(f) = floor_x {
            want = want.max(base.saturating_add(f));
        }
        let p = clamp(want, self.bottom, self.top);
        // The segment of p: at or above j.
        while j < last && c.segment(j).is_some_and(|(_, hi, _)| p > hi) {
            j += 1;
        }
        (p, want, j)
    }

    /// Whether the cheapest rate `best` (its cost `J`) replaces the rate in
    /// use `cur` (its cost `cur_j`): at once when `cur` does not fit the
    /// duty budget, else when `may_move` (past the dwell) and it saves more
    /// than the hysteresis.
    fn settle(
        &self,
        cur: u8,
        cur_j: u64,
        best: (u8, u64),
        cur_fits: bool,
        may_move: bool,
    ) -> (u8, Option<Reason>) {
        let (b, bj) = best;
        if b == cur {
            return (cur, None);
        }
        // The hysteresis is on the part of the cost the choice moves: a
        // wake-up or a GPS fix per packet, paid at every rate, must not
        // hide a saving. Charges below 2⁴⁷ pC (140 C): the products cannot
        // saturate.
        let fixed = self.fixed_pc.min(bj).min(cur_j);
        let cheaper = (bj - fixed).saturating_mul(1 << KEEP_BITS)
            < (cur_j - fixed).saturating_mul(u64::from(self.keep));
        if !cur_fits {
            (b, Some(Reason::DutyLimited))
        } else if may_move && cheaper {
            (b, Some(self.direction(cur, b)))
        } else {
            (cur, None)
        }
    }

    /// The priced rate at a given `level` (1/8192 dBm): during the warm-up
    /// the power stays where it starts, but the readings so far already
    /// say which rate that power closes the link at most cheaply. For the
    /// rate in use and every faster rate that fits the duty budget (and
    /// keeps the chance of loss within the outage ceiling), `charge + μ·q`
    /// at `level`, with the prediction `zhat` and spread `b` (see
    /// [`super::price`]); the cheapest replaces the rate in use as in the
    /// tracking choice (the dwell and the hysteresis). `None` without an
    /// energy profile or when no rate qualifies.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn choose_at(
        &self,
        cur: u8,
        level: i32,
        zhat: i32,
        b: u32,
        price_log: i32,
        since_change: u16,
        window: Option<&AirtimeWindow>,
    ) -> Option<Choice> {
        let c = self.charge.as_ref()?;
        let model = LossModel::new(price_log, b);
        let floor_x = self.ceiling.map(|q| model.x_at(q));
        let mut best: Option<(u8, u64)> = None;
        let mut cur_j = u64::MAX;
        let air = self.airtime(cur);
        for m in 0..self.n {
            // Only the rate in use and faster ones: a few readings cannot
            // tell a slower rate's need from their own noise (the warm-up
            // starts at the most robust rate; the tracking choice takes
            // over when it ends).
            if !self.fits(m, window) || (m != cur && self.airtime(m) >= air) {
                continue;
            }
            let x = level.saturating_sub(zhat.saturating_add(self.offset(m)));
            if floor_x.is_some_and(|f| x < f) {
                continue;
            }
            let j = c
                .charge_pc(level, self.airtime(m))
                .saturating_add(model.risk(x));
            if m == cur {
                cur_j = j;
            }
            if best.is_none_or(|(_, bj)| j < bj) {
                best = Some((m, j));
            }
        }
        let (rate, reason) = self.settle(
            cur,
            cur_j,
            best?,
            self.fits(cur, window),
            since_change >= self.dwell,
        );
        Some(Choice {
            rate,
            reason,
            held: false,
        })
    }

    /// The priced choice for the next packet (several rates, an estimate
    /// that drives the power): for the rate in use and a neighbour in
    /// robustness, the more robust and the faster in turn (every rate that
    /// fits when the one in use does not fit the duty budget, or when the
    /// estimate has just started to drive: `fresh`), the power that
    /// minimises `charge + μ·q` (see [`super::price`]) given the prediction
    /// `zhat` (loss to noise at rate 0's bandwidth, 1/8192 dB) and its mean
    /// absolute error `b`; the cheapest rate replaces the one in use when
    /// that one does not fit the budget (at once), or when `fresh` or after
    /// `dwell` packets, when it saves more than the hysteresis. `None` when
    /// no rate fits the budget (the packet is held: see [`Self::choose`]).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn choose_priced(
        &self,
        cur: u8,
        zhat: i32,
        b: u32,
        price_log: i32,
        bottom: i32,
        since_change: u16,
        fresh: bool,
        window: Option<&AirtimeWindow>,
    ) -> Option<Priced> {
        let c = self.charge.as_ref()?;
        let model = LossModel::new(price_log, b);
        let floor_x = self.ceiling.map(|c| model.x_at(c));
        // Half the price: a packet planned below its requirement (x < 0)
        // risks more than this, so a give-up at rate m costs at least its
        // charge at the lowest level plus `μ/2`.
        let half_price = model.risk(0);
        // The rate in use first (the hysteresis needs its cost), then a
        // neighbour in robustness: the rate moves one step per decision
        // (measured on the rate scenarios against the whole table: the same
        // rows won, 1 to 5 % more charge, at a third of the work on the
        // Cortex-M0 with five rates). When the rate in use does not fit the
        // duty budget, every rate.
        let cur_fits = self.fits(cur, window);
        let r = Self::at(&self.rank, cur);
        let mut list = [cur; MAX_RATES];
        let count = if fresh || !cur_fits {
            for (k, slot) in list.iter_mut().enumerate().take(usize::from(self.n)) {
                *slot = u8::try_from(k).unwrap_or(0);
            }
            usize::from(self.n)
        } else if since_change < self.dwell {
            // Within the dwell only the budget may move the rate, and the
            // rate in use fits it: its own price is all the choice needs.
            1
        } else {
            // One neighbour a packet, the more robust one and the faster
            // one in turn (by the parity of the packets since the last
            // change); the other on the next packet.
            let nr = if since_change & 1 == 0 {
                r.wrapping_sub(1)
            } else {
                r.saturating_add(1)
            };
            if nr < self.n {
                if let Some(slot) = list.get_mut(1) {
                    *slot = Self::at(&self.by_offset, nr);
                }
                2
            } else {
                1
            }
        };
        // (cost J, power, power wanted before clamping) of the rate in use
        // and of the best.
        let mut cur_pick = (u64::MAX, 0i32, 0i32);
        let mut best: Option<(u8, (u64, i32, i32))> = None;
        for &m in list.iter().take(count) {
            if !self.fits(m, window) {
                continue;
            }
            let base = zhat.saturating_add(self.offset(m));
            let (a, want, j) = self.balance(c, &model, base, m, floor_x);
            let ja = c
                .charge_in(j, a, self.airtime(m))
                .saturating_add(model.risk(a.saturating_sub(base)));
            // The give-up: as low as the ceiling allows (the lowest level
            // without one), priced only when it could be cheaper.
            let g = clamp(
                floor_x.map_or(bottom, |f| base.saturating_add(f)),
                bottom,
                a,
            );
            let first = usize::from(self.seg_lo);
            // Both factors below 2³²: the product fits.
            let floor = (u64::from(self.bottom_ua) * u64::from(self.airtime(m)))
                .saturating_add(self.fixed_pc);
            let pick = if g < a && ja > floor.saturating_add(half_price) {
                let mut k = first;
                while k < j && c.segment(k).is_some_and(|(_, hi, _)| g > hi) {
                    k += 1;
                }
                let jg = c
                    .charge_in(k, g, self.airtime(m))
                    .saturating_add(model.risk(g.saturating_sub(base)));
                if jg < ja {
                    (jg, g, g)
                } else {
                    (ja, a, want)
                }
            } else {
                (ja, a, want)
            };
            if m == cur {
                cur_pick = pick;
            }
            if best.is_none_or(|(_, bp)| pick.0 < bp.0) {
                best = Some((m, pick));
            }
        }
        // No rate fits the budget: the unpriced choice holds the packet.
        let (bm, bp) = best?;
        let (rate, reason) = self.settle(
            cur,
            cur_pick.0,
            (bm, bp.0),
            cur_fits,
            fresh || since_change >= self.dwell,
        );
        let (_, p, want) = if rate == bm { bp } else { cur_pick };
        let base = zhat.saturating_add(self.offset(rate));
        Some(Priced {
            choice: Choice {
                rate,
                reason,
                held: false,
            },
            wanted: want,
            above: p.saturating_sub(base),
            // Given up: the cheap candidate, below the requirement (a power
            // clamped at the top below it is not a choice: `ClampedMax`).
            risky: want < base,
            slack: want < bottom,
        })
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::panic)]
mod tests {
    use super::super::{Controller, ControllerConfig, Observation, Reason};
    use crate::energy::demo::{demo_profile, demo_rates};
    use crate::energy::ChargeTable;
    use crate::units::{Db, Dbm};

    fn ctl(ceiling: f32) -> Controller<32> {
        let cfg = ControllerConfig {
            rates: demo_rates().unwrap(),
            required_snr_db: Db(-7.5),
            outage_ceiling: ceiling,
            // Any saving moves the rate: the choice itself is under test.
            rate_hysteresis: 0.0,
            ..ControllerConfig::sub_ghz_node()
        };
        let charge = ChargeTable::from_profile(&demo_profile().unwrap()).unwrap();
        Controller::with_charge(cfg, Some(charge)).unwrap()
    }

    /// A delivered packet sent at `tx` that arrived at `rssi` over a
    /// −117 dBm noise floor (at rate `m`'s bandwidth: all 125 kHz here).
    fn heard(t: u64, tx: f32, rssi: f32) -> Observation {
        Observation::Feedback {
            t_ms: t,
            tx: Dbm(tx),
            rssi: Dbm(rssi),
            noise: Dbm(-117.0),
            snr: None,
        }
    }

    /// A link 22 dB of loss to noise away with ±1 dB of jitter: the
    /// fastest rate needs +14.5 dBm, above the +14 dBm the cap allows;
    /// the slowest needs +2 dBm.
    fn deep(c: &mut Controller<32>, from: u64, n: u64) -> crate::control::Decision {
        let mut d = c.update(&heard(from, 14.0, -125.0));
        for i in 1..n {
            let j = if i % 2 == 0 { 1.0 } else { -1.0 };
            d = c.update(&heard(from + i * 60_000, 14.0, -125.0 + j));
        }
        d
    }

    /// A link that costs little (the fastest rate, low power) for long
    /// enough to set the price's floor, then fading 12 dB deeper: no rate
    /// near the one in use can deliver but at the highest power, and that
    /// costs more than the price of the loss.
    #[test]
    fn a_packet_dearer_than_its_loss_is_given_up_and_a_high_price_pays_for_it() {
        let mut c = ctl(1.0);
        let mut t = 0u64;
        for i in 0..300u64 {
            let j = if i % 2 == 0 { 1.0 } else { -1.0 };
            c.update(&heard(t, 14.0, -110.0 + j));
            t += 60_000;
        }
        let d = c.update(&heard(t, 14.0, -110.0));
        assert_eq!(d.rate, Some(0), "{d:?}");
        let mut given_up = None;
        for i in 0..64u64 {
            t += 60_000;
            let j = if i % 2 == 0 { 1.0 } else { -1.0 };
            let d = c.update(&heard(t, 14.0, -137.0 + j));
            if d.reason == Reason::PricedOut {
                given_up = Some(d);
                break;
            }
        }
        let d = given_up.unwrap();
        assert!(d.margin().0 < 0.0, "{d:?}");
        // Wanted at the lowest level (reached within the step limits).
        assert_eq!(d.wanted(), Some(c.limits().0), "{d:?}");
        // At the highest price the plan delivers: a slower rate, no
        // give-up.
        let mut d = d;
        for i in 0..20u64 {
            c.set_price_log(c.price_loop().max);
            t += 60_000;
            let j = if i % 2 == 0 { 1.0 } else { -1.0 };
            d = c.update(&heard(t, 14.0, -137.0 + j));
        }
        assert_ne!(d.reason, Reason::PricedOut, "{d:?}");
        assert!(d.rate.unwrap() >= 2, "{d:?}");
    }

    /// The demo node at the default hysteresis and dwell.
    fn ctl_defaults() -> Controller<32> {
        let cfg = ControllerConfig {
            rates: demo_rates().unwrap(),
            required_snr_db: Db(-7.5),
            ..ControllerConfig::sub_ghz_node()
        };
        let charge = ChargeTable::from_profile(&demo_profile().unwrap()).unwrap();
        Controller::with_charge(cfg, Some(charge)).unwrap()
    }

    /// While warming up the power stays at the start and the rate is priced
    /// there: a strong first reading moves a fresh controller off the most
    /// robust rate at once, to the fastest.
    #[test]
    fn the_warm_up_prices_the_rate_at_the_start_power() {
        let mut c = ctl_defaults();
        assert_eq!(c.rate(), Some(4), "starts at the most robust rate");
        let start = c.tx();
        // 17 dB of SNR at the start power: sf7 needs −7.5 dB.
        let d = c.update(&heard(0, 14.0, -100.0));
        assert_eq!(d.rate, Some(0), "{d:?}");
        assert_eq!(d.reason, Reason::RateFaster, "{d:?}");
        assert_eq!(d.tx, start, "{d:?}");
        assert_eq!(c.mode(), super::super::Mode::WarmUp);
    }

    /// Over a sweep of link levels with readings jittering by ±2 dB, the
    /// warm-up's rate never returns to a rate it has just left (the dwell
    /// and the hysteresis apply to it as to the tracking choice).
    #[test]
    fn the_warm_up_does_not_flap() {
        for level in 0..60 {
            let rssi = -135.0 + level as f32 * 0.5;
            let mut c = ctl_defaults();
            let mut seen = [c.rate().unwrap()].to_vec();
            for i in 0..8u64 {
                let j = if i % 2 == 0 { 2.0 } else { -2.0 };
                let d = c.update(&heard(i * 60_000, 14.0, rssi + j));
                if c.mode() != super::super::Mode::WarmUp {
                    break;
                }
                let r = d.rate.unwrap();
                if Some(&r) != seen.last() {
                    assert!(!seen.contains(&r), "{rssi} dBm: {seen:?} then {r}");
                    seen.push(r);
                }
            }
        }
    }

    /// A link lost for good at the fastest rate: the power climbs, the rate
    /// stays until the run of losses is four times the one that starts the
    /// climb, then moves one rate more robust a packet down to the slowest.
    #[test]
    fn a_long_loss_run_finds_the_most_robust_rate() {
        let mut c = ctl_defaults();
        let mut t = 0u64;
        for i in 0..200u64 {
            let j = if i % 2 == 0 { 1.0 } else { -1.0 };
            c.update(&heard(t, 14.0, -105.0 + j));
            t += 60_000;
        }
        assert_eq!(c.rate(), Some(0));
        let climb = ControllerConfig::sub_ghz_node().climb_after_losses;
        let mut first_change = None;
        for n in 1..=(4 * u64::from(climb) + 8) {
            t += 60_000;
            let d = c.update(&Observation::Lost { t_ms: t });
            if d.rate != Some(0) && first_change.is_none() {
                first_change = Some(n);
                assert_eq!(d.reason, Reason::RateSlower, "{d:?}");
                assert_eq!(d.tx, c.limits().1, "at the highest power: {d:?}");
            }
        }
        assert_eq!(first_change, Some(4 * u64::from(climb)));
        assert_eq!(c.rate(), Some(4), "the most robust rate");
    }

    #[test]
    fn a_ceiling_at_the_target_never_plans_a_give_up() {
        let mut c = ctl(0.01);
        deep(&mut c, 0, 40);
        c.set_price_log(c.price_loop().min);
        let d = deep(&mut c, 40 * 60_000, 20);
        assert_ne!(d.reason, Reason::PricedOut, "{d:?}");
        assert!(d.margin().0 > 0.0, "{d:?}");
    }

    #[test]
    fn the_price_follows_losses_and_a_dead_link_does_not_wind_it_up() {
        let mut c = ctl(1.0);
        deep(&mut c, 0, 100);
        let before = c.price_log();
        // Deliveries lower it.
        deep(&mut c, 100 * 60_000, 50);
        assert!(c.price_log() < before);
        let settled = c.price_log();
        // A dead link: every packet lost for a day. The climb takes over
        // after a few losses and the price stops: a few steps at most.
        for i in 0..1440u64 {
            c.update(&Observation::Lost {
                t_ms: (150 + i) * 60_000,
            });
        }
        let after = c.price_log();
        let up = c.price_loop().up;
        assert!(after <= settled + 8 * up, "{settled} -> {after}");
        assert!(after <= c.price_loop().max);
        // Back on the link: tracking again within a few packets.
        let d = deep(&mut c, 1600 * 60_000, 20);
        assert!(
            matches!(
                d.reason,
                Reason::Hold
                    | Reason::Lower
                    | Reason::Raise
                    | Reason::ClampedMax
                    | Reason::RateFaster
                    | Reason::RateSlower
            ),
            "{d:?}"
        );
    }

    #[test]
    fn the_price_is_bounded() {
        let mut c = ctl(1.0);
        deep(&mut c, 0, 40);
        // Losses the plan did not expect, one after a delivery each: no
        // climb, the price rises to its bound and stops there.
        for i in 0..20_000u64 {
            c.update(&Observation::Lost {
                t_ms: (40 + 2 * i) * 60_000,
            });
            c.update(&heard((41 + 2 * i) * 60_000, 14.0, -125.0));
        }
        assert!(c.price_log() <= c.price_loop().max);
        assert!(c.price_log() >= c.price_loop().min);
    }

    /// The price's step: half the margin step's ratio at a 1 % target, and
    /// at every target the same spread per packet, `up·√(p/(1−p))`; a
    /// delivery undoes `p/(1−p)` of a loss.
    #[test]
    fn the_price_step_keeps_its_noise_per_packet_at_every_target() {
        let at = |p: f32| {
            let cfg = ControllerConfig {
                rates: demo_rates().unwrap(),
                required_snr_db: Db(-7.5),
                target_outage: p,
                ..ControllerConfig::sub_ghz_node()
            };
            let charge = ChargeTable::from_profile(&demo_profile().unwrap()).unwrap();
            Controller::<32>::with_charge(cfg, Some(charge))
                .unwrap()
                .price_loop()
        };
        let octave = |x: i32| f64::from(x) / f64::from(1u32 << super::PRICE_BITS);
        let one = at(0.01);
        let step =
            f64::from(ControllerConfig::sub_ghz_node().margin_step_db.0) * 10f64.log2() / 20.0;
        assert!((octave(one.up) - step).abs() < 1e-6, "{}", octave(one.up));
        let spread = |p: f64, up: i32| octave(up) * (p / (1.0 - p)).sqrt();
        let s1 = spread(0.01, one.up);
        for p in [0.001f32, 0.03, 0.1, 0.3] {
            let l = at(p);
            let s = spread(f64::from(p), l.up);
            assert!((s / s1 - 1.0).abs() < 1e-3, "{p}: {s} against {s1}");
            let back = octave(l.up) * f64::from(p) / (1.0 - f64::from(p));
            assert!((octave(l.down) - back).abs() < 1e-6, "{p}");
        }
    }
}
