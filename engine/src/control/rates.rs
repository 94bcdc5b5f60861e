//! The rate layer of the controller: which rate, at the power the shared
//! estimate says that rate needs, costs the least charge per delivered
//! packet, within the power limits and the duty-cycle budget.
//!
//! All in the update's integers: levels in 1/8192 dB, airtimes in µs,
//! charges in pC ([`ChargeTable`]). One pass over at most [`MAX_RATES`]
//! rates per packet, with no division, logarithm or float.

use super::config::{ConfigError, ControllerConfig};
use super::fixed::to_fine;
use super::reason::Reason;
use crate::energy::{AirtimeWindow, ChargeTable};
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
            norm: [0; MAX_RATES],
            offset: [0; MAX_RATES],
            airtime_us: [0; MAX_RATES],
            charge,
            keep: 0,
            dwell: cfg.rate_dwell,
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

    /// The choice for the next packet.
    #[allow(clippy::too_many_arguments)]
    ///
    /// `base` is the shared estimate's requirement less the required SNR
    /// (`ẑ + k·σ + margin`, at rate 0's bandwidth), `None` while the
    /// estimate does not drive the power (warming up, climbing); `may_switch`
    /// is false on an update whose reading was ignored or whose history was
    /// flushed (the rate then stays, and the packet is held if it does not
    /// fit the budget: its reason stays the one that names the reading).
    ///
    /// With an estimate: each rate `m` needs `base + offset_m`; it is
    /// feasible when that is at or below `top`, and costs
    /// `I_tx(max(need, bottom)) · airtime_m + fixed` (charge per packet; the
    /// expected delivery of every feasible pair is the same `1 − p`, held by
    /// the power, so the charge per delivered packet orders them alike). The
    /// cheapest feasible rate that fits the budget replaces the rate in use
    /// when that one is infeasible or does not fit (at once), or after
    /// `dwell` packets when it saves more than the hysteresis. With no
    /// feasible rate that fits, the rate with the most headroom that fits.
    /// Without an estimate, only the budget moves the rate: the most robust
    /// rate that fits. No rate fits: held.
    pub(crate) fn choose(
        &self,
        cur: u8,
        base: Option<i32>,
        bottom: i32,
        top: i32,
        since_change: u16,
        window: Option<&AirtimeWindow>,
        may_switch: bool,
    ) -> Choice {
        let stay = Choice {
            rate: cur,
            reason: None,
            held: false,
        };
        let cur_fits = self.fits(cur, window);
        if !may_switch || self.n <= 1 {
            return Choice {
                held: !cur_fits,
                reason: if cur_fits {
                    None
                } else {
                    Some(Reason::DutyHeld)
                },
                ..stay
            };
        }
        let Some(base) = base else {
            if cur_fits {
                return stay;
            }
            // The most robust rate that fits (lowest offset).
            let mut pick: Option<(u8, i32)> = None;
            for m in 0..self.n {
                let o = self.offset(m);
                if self.fits(m, window) && pick.is_none_or(|(_, po)| o < po) {
                    pick = Some((m, o));
                }
            }
            return match pick {
                Some((m, _)) => Choice {
                    rate: m,
                    reason: Some(Reason::DutyLimited),
                    held: false,
                },
                None => Choice {
                    held: true,
                    reason: Some(Reason::DutyHeld),
                    ..stay
                },
            };
        };
        let Some(charge) = &self.charge else {
            return stay;
        };
        let limit = top.saturating_add(EPS);
        let mut best: Option<(u8, u64)> = None;
        let mut robust: Option<(u8, i32)> = None;
        let mut cur_cost = u64::MAX;
        let mut cur_feasible = false;
        for m in 0..self.n {
            let need = base.saturating_add(self.offset(m));
            let fits = self.fits(m, window);
            if fits && robust.is_none_or(|(_, rn)| need < rn) {
                robust = Some((m, need));
            }
            if need > limit {
                continue;
            }
            let level = if need < bottom { bottom } else { need };
            let cost = charge.charge_pc(level, self.airtime(m));
            if m == cur {
                cur_cost = cost;
                cur_feasible = true;
            }
            if fits && best.is_none_or(|(_, bc)| cost < bc) {
                best = Some((m, cost));
            }
        }
        let forced = !cur_feasible || !cur_fits;
        let why = |to: u8| {
            if !cur_fits {
                Reason::DutyLimited
            } else {
                self.direction(cur, to)
            }
        };
        match (best, robust) {
            (Some((b, _)), _) if b == cur => stay,
            (Some((b, cost)), _) => {
                // Charges below 2⁴⁷ pC (140 C): the products cannot saturate.
                let cheaper = cost.saturating_mul(1 << KEEP_BITS)
                    < cur_cost.saturating_mul(u64::from(self.keep));
                if forced || (since_change >= self.dwell && cheaper) {
                    Choice {
                        rate: b,
                        reason: Some(why(b)),
                        held: false,
                    }
                } else {
                    stay
                }
            }
            (None, Some((r, _))) if r == cur => stay,
            (None, Some((r, _))) => Choice {
                rate: r,
                reason: Some(why(r)),
                held: false,
            },
            (None, None) => Choice {
                held: true,
                reason: Some(Reason::DutyHeld),
                ..stay
            },
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
