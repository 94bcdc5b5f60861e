//! The per-packet transmit-power controller.

use super::config::{ConfigError, ControllerConfig, PowerSteps, GRID_EPS, MAX_WINDOW};
use super::reason::Reason;
use crate::units::{Db, Dbm};

/// Steps of the stored readings per dB (readings are kept as `i16` in 1/32 dB).
const Q_PER_DB: f32 = 32.0;

/// Tolerance on the transmit power a feedback says was used, beyond the
/// radio's configured range, dB (a radio's actual output differs from its
/// setting by about this much; common practice).
const TX_TOLERANCE_DB: f32 = 1.0;

/// Plausible range of a beacon's stated transmit power, dBm: wider than any
/// short-range radio class (common practice).
const BEACON_TX_RANGE_DBM: (f32, f32) = (-50.0, 60.0);

/// √(π/2): standard deviation over mean absolute deviation of a normal
/// distribution.
const MAE_TO_SIGMA: f32 = 1.253_314_1;

/// Gains of the two exponential-filter predictors of the loss to noise, as
/// right shifts: 1/8 follows changes over about eight packets, 1/2 over
/// about two.
const FILTER_SHIFTS: [u32; 2] = [3, 1];

/// Extra fractional bits of the filters and prediction errors beyond the
/// readings' 1/32 dB: they run in 1/8192 dB.
const FINE_BITS: u32 = 8;

/// dB per step of the filters (1/8192 dB).
const DB_PER_FINE: f32 = 1.0 / (Q_PER_DB * (1u32 << FINE_BITS) as f32);

/// What the device learnt about the packet it just sent (or the beacon it
/// just heard). One observation per update.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Observation {
    /// The packet was delivered and the far end reported its readings.
    Feedback {
        /// Time of the packet, ms.
        t_ms: u64,
        /// Power the packet was actually sent at.
        tx: Dbm,
        /// Received power at the far end.
        rssi: Dbm,
        /// Noise floor at the far end.
        noise: Dbm,
        /// SNR the far end measured, if it reports one; used instead of
        /// `rssi − noise` when given.
        snr: Option<Db>,
    },
    /// The packet was delivered (acknowledged) but carried no readings.
    Acked {
        /// Time of the packet, ms.
        t_ms: u64,
    },
    /// The packet was lost: no acknowledgement, no readings.
    Lost {
        /// Time of the packet, ms.
        t_ms: u64,
    },
    /// Open loop: the device heard the far end's beacon, sent at a known
    /// power, and assumes the path is reciprocal. Says nothing about the
    /// outcome of the device's own packets.
    Beacon {
        /// Time the beacon was heard, ms.
        t_ms: u64,
        /// Power the far end sent the beacon at.
        beacon_tx: Dbm,
        /// Received power of the beacon here.
        rssi: Dbm,
    },
    /// Nothing is known about the packet (a missing or unjudgeable record).
    Missing {
        /// Time of the packet, ms.
        t_ms: u64,
    },
}

impl Observation {
    /// Time of the observation, ms.
    pub fn t_ms(&self) -> u64 {
        match *self {
            Observation::Feedback { t_ms, .. }
            | Observation::Acked { t_ms }
            | Observation::Lost { t_ms }
            | Observation::Beacon { t_ms, .. }
            | Observation::Missing { t_ms } => t_ms,
        }
    }
}

/// The controller's answer to one observation: the power for the next packet
/// and why, with the estimates behind it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Decision {
    /// Transmit power for the next packet: on the radio's grid, within the
    /// radio's range and the EIRP cap.
    pub tx: Dbm,
    /// Why this power, or why the reading was ignored.
    pub reason: Reason,
    /// What the estimates asked for before rounding, clamping and step
    /// limiting (`None` while warming up or climbing).
    pub wanted: Option<Dbm>,
    /// Predicted path loss (antenna gains included) from the predictor in
    /// use, `None` before the first reading.
    pub path_loss: Option<Db>,
    /// RMS one-step prediction error of the loss to noise (fading and
    /// interference about the predicted level), `None` before two readings.
    pub spread: Option<Db>,
    /// Mean noise floor at the far end over the window, `None` before the
    /// first reading.
    pub noise: Option<Dbm>,
    /// Adaptive margin after this update.
    pub margin: Db,
    /// Readings in the window.
    pub readings: u16,
}

/// What the controller is doing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Mode {
    /// Too few readings: holding the power.
    WarmUp,
    /// The estimates drive the power.
    Track,
    /// A run of losses: climbing.
    Climb,
}

/// The last `W` readings with exact integer running sums.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Window<const W: usize> {
    z: [i16; W],
    noise: [i16; W],
    head: u16,
    n: u16,
    sum_z: i32,
    sum_noise: i32,
}

impl<const W: usize> Window<W> {
    const fn new() -> Self {
        Window {
            z: [0; W],
            noise: [0; W],
            head: 0,
            n: 0,
            sum_z: 0,
            sum_noise: 0,
        }
    }

    fn clear(&mut self) {
        self.head = 0;
        self.n = 0;
        self.sum_z = 0;
        self.sum_noise = 0;
    }

    fn push(&mut self, z: i16, noise: i16) {
        let head = usize::from(self.head);
        let full = usize::from(self.n) >= W;
        if let (Some(zs), Some(ns)) = (self.z.get_mut(head), self.noise.get_mut(head)) {
            if full {
                self.sum_z -= i32::from(*zs);
                self.sum_noise -= i32::from(*ns);
            }
            *zs = z;
            *ns = noise;
            self.sum_z += i32::from(z);
            self.sum_noise += i32::from(noise);
            if !full {
                self.n += 1;
            }
            let next = head + 1;
            self.head = if next >= W {
                0
            } else {
                u16::try_from(next).unwrap_or(0)
            };
        }
    }

    /// 1 / (W · steps per dB): the scale of the sums of a full window.
    const INV_FULL: f32 = 1.0 / (W as f32 * Q_PER_DB);

    /// `W` as an `i32` (`W ≤ MAX_WINDOW = 4096`, checked by `Controller::new`;
    /// the cast cannot truncate).
    #[allow(clippy::cast_possible_truncation, clippy::cast_possible_wrap)]
    const W_I32: i32 = if W > MAX_WINDOW {
        MAX_WINDOW as i32
    } else {
        W as i32
    };

    /// Mean of z in 1/8192 dB, truncated (exact integer arithmetic: the sum
    /// is at most 4096 · 2¹⁵ in magnitude, the remainder below 4096).
    fn mean_z_fine(&self) -> Option<i32> {
        let n = i32::from(self.n);
        if n == 0 {
            return None;
        }
        let (q, r) = if usize::from(self.n) >= W {
            // A full window: a constant divisor (a shift for a power of two).
            let w = Self::W_I32;
            (
                self.sum_z.checked_div(w).unwrap_or(0),
                self.sum_z.checked_rem(w).unwrap_or(0),
            )
        } else {
            (self.sum_z / n, self.sum_z % n)
        };
        // |q| < 2¹⁵ and |r·256/n| < 256: no wrap can occur.
        Some(
            q.wrapping_mul(1 << FINE_BITS)
                .wrapping_add((r << FINE_BITS) / n),
        )
    }

    /// Mean of z and of the noise, dB / dBm.
    fn means(&self) -> Option<(f32, f32)> {
        if self.n == 0 {
            return None;
        }
        let inv = if usize::from(self.n) >= W {
            Self::INV_FULL
        } else {
            1.0 / (f32::from(self.n) * Q_PER_DB)
        };
        Some((self.sum_z as f32 * inv, self.sum_noise as f32 * inv))
    }
}

/// A dB value in the window's fixed-point steps. Values are bounded by the
/// plausibility checks well inside the `i16` range; the cast saturates
/// (and maps NaN to 0) rather than wrapping, so no input can corrupt the sums.
#[allow(clippy::cast_possible_truncation)]
fn to_q(x: f32) -> i16 {
    // Round half away from zero, then a saturating cast.
    let y = x * Q_PER_DB;
    (if y >= 0.0 { y + 0.5 } else { y - 0.5 }) as i16
}

/// The whole part of a level index `k ≥ 0` (truncation; the cast saturates,
/// and `k` is bounded by the number of levels, at most 2·300/step).
#[allow(clippy::cast_possible_truncation)]
fn to_level_index(k: f32) -> i32 {
    k as i32
}

/// The adaptive-margin transmit power controller over a window of `W`
/// readings.
///
/// ## What it estimates
/// Every usable reading gives the *loss to noise* `z = tx − SNR` (dB): the
/// path loss less the antenna gains, plus the far end's noise floor. A
/// packet sent at power `P` arrives with SNR `P − z`, so the next packet's
/// `z` is all the decision needs. The controller keeps the last `W` values of
/// `z` and of the noise floor in a ring, as integers in 1/32 dB, with exact
/// running sums (O(1) per update, no drift, the same bits on every target).
///
/// Three predictors of the next `z` run side by side: the window's mean (best
/// when fading is independent from packet to packet) and two exponential
/// filters with gains 1/8 and 1/2 (best when shadowing or interference is
/// correlated over a few packets). Each keeps the mean absolute value of its
/// own one-step prediction errors, averaged over the last `spread_memory`
/// readings (512 by default: the spread is a property of the link, not of
/// the last few packets); the predictor with the smallest gives the level
/// `ẑ` and the spread `σ = √(π/2)·mean |error|` (exact for normal errors,
/// and robust to the large errors at the edges of an interference burst).
///
/// ## What it chooses
/// `wanted = required SNR + ẑ + k·σ + margin`, where `k = Q⁻¹(p)` is the
/// upper normal quantile of the target outage `p` (computed once in
/// [`Controller::new`]) and `margin` is an adaptive margin: it rises by `Δup`
/// after each lost packet and falls by `Δup·p/(1−p)` after each delivered one
/// (the "jump" or sawtooth outer loop). Whatever the fading distribution, the
/// margin can stay bounded only if losses are a fraction `p` of the judged
/// packets, so the achieved loss rate converges to the target; the `k·σ`
/// term only makes it start close and follow changes of the spread. The
/// margin does not integrate while the power is clamped at the top (a loss
/// there cannot be cured) or at the bottom (no wind-down), nor while warming
/// up.
///
/// `wanted` is rounded *up* to a supported level, clamped to
/// `[min_tx, min(max_tx, eirp_cap − antenna_gain)]`, and limited to
/// `max_step_up_db`/`max_step_down_db` per update. It falls only when
/// `wanted + deadband` is at or below a lower level (hysteresis).
///
/// ## Safe defaults
/// Until `min_readings` readings are in the window the power stays where it
/// is (initially `start_tx_dbm`). After `climb_after_losses` consecutive
/// losses it climbs by `max_step_up_db` per packet; when a packet gets
/// through, tracking resumes from the power that worked and comes down no
/// faster than `max_step_down_db` per packet, as the predictors learn the
/// new level. A gap of more than `stale_after_ms` between readings drops the
/// history.
///
/// ## Cost
/// All state is in this fixed-size struct (no allocation); one
/// [`Controller::update`] per packet, O(1) in `W`, with no logarithm,
/// exponential or square root. The window sums, the two filters (shifts in
/// 1/8192 dB) and the mean-absolute-error trackers (integer sums in
/// 1/32 dB) are integer arithmetic; floats remain in the plausibility
/// checks, the mean and the decision. A few integer divisions per update
/// (none by `W` or `spread_memory` when they are powers of two).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Controller<const W: usize> {
    cfg: ControllerConfig,
    /// Upper normal quantile of the target outage, Q⁻¹(p).
    quantile: f32,
    /// Fall of the margin per delivered packet, Δup·p/(1−p).
    margin_down: f32,
    /// 1 / uniform step (0 for a table).
    inv_step: f32,
    bottom: f32,
    top: f32,
    tx: f32,
    margin: f32,
    loss_run: u16,
    mode: Mode,
    clamped_high: bool,
    clamped_low: bool,
    last_reading_ms: Option<u64>,
    /// Exponential-filter predictors of z, 1/8192 dB.
    filters: [i32; 2],
    /// Absolute one-step prediction errors of the window mean and of the
    /// two filters, 1/32 dB, summed over the errors seen while fewer than
    /// `spread_memory` (the mean absolute error is the sum over their
    /// number), then decaying: `S ← S − S/memory + |e|` (the mean absolute
    /// error is `S/memory`, an exponential average of weight 1/memory).
    mae_sum: [u32; 3],
    /// Prediction errors seen since the history started (saturating).
    errors: u16,
    /// log2(`spread_memory`) when it is a power of two (a shift instead of
    /// a division).
    memory_shift: Option<u32>,
    /// The last mean absolute error (1/8192 dB) turned into a spread, and
    /// the spread, dB.
    spread_cache: (u32, f32),
    window: Window<W>,
}

impl<const W: usize> Controller<W> {
    /// A controller with validated settings, at its start power.
    pub fn new(cfg: ControllerConfig) -> Result<Self, ConfigError> {
        if W == 0 || W > MAX_WINDOW {
            return Err(ConfigError::OutOfRange {
                setting: "window",
                value: W as f32,
                min: 1.0,
                max: MAX_WINDOW as f32,
            });
        }
        let (bottom, top) = cfg.validate_inner()?;
        if usize::from(cfg.min_readings) > W {
            return Err(ConfigError::Inconsistent {
                setting: "min_readings",
                why: "is larger than the controller's window",
            });
        }
        let p = cfg.target_outage;
        let quantile = upper_normal_quantile(p)?;
        let margin_down = cfg.margin_step_db.0 * p / (1.0 - p);
        let inv_step = match cfg.steps {
            PowerSteps::Uniform(s) => 1.0 / s.0,
            PowerSteps::Table(_) => 0.0,
        };
        let mut c = Controller {
            cfg,
            quantile,
            margin_down,
            inv_step,
            bottom,
            top,
            tx: bottom,
            margin: 0.0,
            loss_run: 0,
            mode: Mode::WarmUp,
            clamped_high: false,
            clamped_low: false,
            last_reading_ms: None,
            filters: [0; 2],
            mae_sum: [0; 3],
            errors: 0,
            memory_shift: if cfg.spread_memory.is_power_of_two() {
                Some(cfg.spread_memory.trailing_zeros())
            } else {
                None
            },
            spread_cache: (0, 0.0),
            window: Window::new(),
        };
        let m = c.clamp_margin(0.0);
        c.margin = m;
        c.tx = c.level_at_or_above(cfg.start_tx_dbm.0);
        Ok(c)
    }

    /// The settings.
    pub fn config(&self) -> &ControllerConfig {
        &self.cfg
    }

    /// Power chosen for the next packet.
    pub fn tx(&self) -> Dbm {
        Dbm(self.tx)
    }

    /// The adaptive margin now.
    pub fn margin(&self) -> Db {
        Db(self.margin)
    }

    /// What the controller is doing now.
    pub fn mode(&self) -> Mode {
        self.mode
    }

    /// The lowest and highest levels the controller may choose.
    pub fn limits(&self) -> (Dbm, Dbm) {
        (Dbm(self.bottom), Dbm(self.top))
    }

    /// The quantile factor `k = Q⁻¹(target_outage)` applied to the spread.
    pub fn quantile_factor(&self) -> f32 {
        self.quantile
    }

    /// Forget everything learnt and return to the start power.
    pub fn reset(&mut self) {
        let cfg = self.cfg;
        self.window.clear();
        self.margin = self.clamp_margin(0.0);
        self.loss_run = 0;
        self.mode = Mode::WarmUp;
        self.clamped_high = false;
        self.clamped_low = false;
        self.last_reading_ms = None;
        self.forget();
        self.tx = self.level_at_or_above(cfg.start_tx_dbm.0);
    }

    /// Drop the readings and the predictors' history.
    fn forget(&mut self) {
        self.window.clear();
        self.filters = [0; 2];
        self.mae_sum = [0; 3];
        self.errors = 0;
    }

    /// Score the predictors on a new reading `z` (already quantised), then
    /// take it into the window and the filters. Integer arithmetic only.
    fn learn(&mut self, zq: i16, noiseq: i16) {
        let z = i32::from(zq) << FINE_BITS;
        match self.window.mean_z_fine() {
            Some(mz) => {
                self.errors = self.errors.saturating_add(1);
                let filling = self.errors <= self.cfg.spread_memory;
                let [f0, f1] = self.filters;
                // z, the mean and the filters are within ±2²³: the differences
                // cannot wrap.
                let e = [z.wrapping_sub(mz), z.wrapping_sub(f0), z.wrapping_sub(f1)];
                let (m, k) = (u32::from(self.cfg.spread_memory), self.memory_shift);
                for (s, e) in self.mae_sum.iter_mut().zip(e.iter()) {
                    // |e| in 1/32 dB, rounded.
                    let a = (e.unsigned_abs().saturating_add(1 << (FINE_BITS - 1))) >> FINE_BITS;
                    let kept = if filling {
                        *s
                    } else {
                        s.saturating_sub(over_memory(*s, m, k))
                    };
                    *s = kept.saturating_add(a);
                }
                for (f, g) in self.filters.iter_mut().zip(FILTER_SHIFTS.iter()) {
                    *f = f.wrapping_add(z.wrapping_sub(*f) >> g);
                }
            }
            None => self.filters = [z; 2],
        }
        self.window.push(zq, noiseq);
    }

    /// Predicted z for the next packet and its RMS error, from the predictor
    /// with the smallest mean absolute error; `mz` is the window's mean.
    fn predict(&mut self, mz: Option<f32>) -> Option<(f32, Option<f32>)> {
        let mz = mz?;
        if self.errors == 0 {
            return Some((mz, None));
        }
        let [s0, s1, s2] = self.mae_sum;
        let [f0, f1] = self.filters;
        let (level, sum) = if s0 <= s1 && s0 <= s2 {
            (mz, s0)
        } else if s1 <= s2 {
            (f0 as f32 * DB_PER_FINE, s1)
        } else {
            (f1 as f32 * DB_PER_FINE, s2)
        };
        // Mean absolute error in 1/8192 dB: sum / n with the remainder kept.
        let n = u32::from(if self.errors < self.cfg.spread_memory {
            self.errors
        } else {
            self.cfg.spread_memory
        });
        let fine = match self.memory_shift {
            // A full memory of a power of two: shifts.
            Some(k) if n == u32::from(self.cfg.spread_memory) => {
                let r = sum & n.wrapping_sub(1);
                (sum >> k)
                    .saturating_mul(1 << FINE_BITS)
                    .saturating_add((r << FINE_BITS) >> k)
            }
            _ => {
                let q = sum.checked_div(n).unwrap_or(0);
                let r = sum.checked_rem(n).unwrap_or(0);
                q.saturating_mul(1 << FINE_BITS)
                    .saturating_add((r << FINE_BITS).checked_div(n).unwrap_or(0))
            }
        };
        let sigma = if fine == self.spread_cache.0 {
            self.spread_cache.1
        } else {
            let sg = fine as f32 * (MAE_TO_SIGMA * DB_PER_FINE);
            self.spread_cache = (fine, sg);
            sg
        };
        Some((level, Some(sigma)))
    }

    /// `true` if `p` is one of the levels the controller may choose.
    pub fn is_level(&self, p: Dbm) -> bool {
        let x = p.0;
        if !(x >= self.bottom - GRID_EPS && x <= self.top + GRID_EPS) {
            return false;
        }
        match self.cfg.steps {
            PowerSteps::Uniform(_) => {
                let k = (x - self.cfg.min_tx_dbm.0) * self.inv_step;
                (k - libm::roundf(k)).abs() < 1e-3
            }
            PowerSteps::Table(t) => t.levels().iter().any(|l| (l.0 - x).abs() < GRID_EPS),
        }
    }

    /// Take one observation and choose the power for the next packet.
    ///
    /// Never fails and never panics: a reading that cannot be used is
    /// ignored and the [`Decision::reason`] says why.
    pub fn update(&mut self, obs: &Observation) -> Decision {
        let cfg = &self.cfg;
        let t = obs.t_ms();
        let climb_after = cfg.climb_after_losses;

        // 1. The outcome of the packet: outer loop and loss runs.
        let outcome = match obs {
            Observation::Feedback { .. } | Observation::Acked { .. } => Some(true),
            Observation::Lost { .. } => Some(false),
            Observation::Beacon { .. } | Observation::Missing { .. } => None,
        };
        let mut flushed: Option<Reason> = None;
        match outcome {
            Some(false) => {
                if self.mode != Mode::WarmUp && !self.clamped_high {
                    self.margin = self.clamp_margin(self.margin + cfg.margin_step_db.0);
                }
                self.loss_run = self.loss_run.saturating_add(1);
            }
            Some(true) => {
                if self.mode != Mode::WarmUp && !self.clamped_low {
                    self.margin = self.clamp_margin(self.margin - self.margin_down);
                }
                if self.loss_run >= climb_after {
                    flushed = Some(Reason::Recovered);
                }
                self.loss_run = 0;
            }
            None => {}
        }

        // 2. The reading, if any.
        let reading = match *obs {
            Observation::Feedback {
                tx,
                rssi,
                noise,
                snr,
                ..
            } => Some(self.check_feedback(tx, rssi, noise, snr)),
            Observation::Beacon {
                beacon_tx, rssi, ..
            } => Some(self.check_beacon(beacon_tx, rssi)),
            _ => None,
        };
        let mut ignored: Option<Reason> = None;
        match reading {
            Some(Err(r)) => ignored = Some(r),
            Some(Ok((z, noise))) => {
                let mut fresh = true;
                if let Some(last) = self.last_reading_ms {
                    if t < last {
                        ignored = Some(Reason::IgnoredStale);
                        fresh = false;
                    } else if t - last > u64::from(self.cfg.stale_after_ms) {
                        self.forget();
                        flushed = Some(Reason::HistoryExpired);
                    }
                }
                if fresh {
                    self.learn(to_q(z), to_q(noise));
                    self.last_reading_ms = Some(t);
                }
            }
            None => {}
        }
        if matches!(obs, Observation::Missing { .. }) {
            ignored = Some(Reason::NoInformation);
        }

        // 3. The decision.
        let cur = self.tx;
        let means = self.window.means();
        let prediction = self.predict(means.map(|(mz, _)| mz));
        let spread = prediction.and_then(|(_, s)| s);
        let n = self.window.n;
        let cfg = &self.cfg;
        let mut wanted: Option<f32> = None;
        let (target, mut reason) = if self.loss_run >= climb_after {
            self.mode = Mode::Climb;
            (
                self.level_at_or_below(cur + cfg.max_step_up_db.0),
                Reason::Climb,
            )
        } else if n < cfg.min_readings {
            self.mode = Mode::WarmUp;
            (cur, Reason::WarmUp)
        } else {
            self.mode = Mode::Track;
            let (level, s) = prediction.unwrap_or((0.0, None));
            let w = cfg.required_snr_db.0 + level + self.quantile * s.unwrap_or(0.0) + self.margin;
            wanted = Some(w);
            let up = self.level_at_or_above(w);
            if up > cur + GRID_EPS {
                (up, Reason::Raise)
            } else {
                let down = self.level_at_or_above(w + cfg.deadband_db.0);
                if down < cur - GRID_EPS {
                    (down, Reason::Lower)
                } else {
                    (cur, Reason::Hold)
                }
            }
        };
        self.clamped_high = match (self.mode, wanted) {
            (Mode::Track, Some(w)) => w > self.top + GRID_EPS,
            (Mode::Climb, _) => cur >= self.top - GRID_EPS,
            _ => false,
        };
        self.clamped_low = match wanted {
            Some(w) => w < self.bottom - GRID_EPS,
            None => false,
        };
        if self.clamped_high {
            reason = Reason::ClampedMax;
        } else if self.clamped_low {
            reason = Reason::ClampedMin;
        }
        let (next, limited) = self.limit_step(cur, target);
        if limited {
            reason = Reason::RateLimited;
        }
        if let Some(f) = flushed {
            reason = f;
        }
        if let Some(i) = ignored {
            reason = i;
        }
        self.tx = next;

        let g = self.cfg.antenna_gain_dbi.0 + self.cfg.far_antenna_gain_dbi.0;
        Decision {
            tx: Dbm(next),
            reason,
            wanted: wanted.map(Dbm),
            path_loss: match (prediction, means) {
                (Some((level, _)), Some((_, mn))) => Some(Db(level - mn + g)),
                _ => None,
            },
            spread: spread.map(Db),
            noise: means.map(|(_, mn)| Dbm(mn)),
            margin: Db(self.margin),
            readings: n,
        }
    }

    /// Why a logged record's readings cannot be judged by a replay, if they
    /// cannot: not finite, a logged transmit power outside the radio's range
    /// (`min_tx_dbm..max_tx_dbm` with the same 1 dB tolerance as a live
    /// feedback), a logged RSSI or noise floor outside the configured
    /// plausible ranges, or a logged RSSI at or above `rssi_saturation_dbm`.
    /// The same checks, in the same order, as a live feedback.
    pub(crate) fn check_logged(&self, tx: f32, rssi: f32, noise: f32) -> Option<Reason> {
        self.check_feedback(Dbm(tx), Dbm(rssi), Dbm(noise), None)
            .err()
    }

    /// Loss to noise and noise floor of a feedback, or why it is unusable.
    fn check_feedback(
        &self,
        tx: Dbm,
        rssi: Dbm,
        noise: Dbm,
        snr: Option<Db>,
    ) -> Result<(f32, f32), Reason> {
        let c = &self.cfg;
        if !(tx.0.is_finite() && rssi.0.is_finite() && noise.0.is_finite()) {
            return Err(Reason::IgnoredNotFinite);
        }
        if let Some(s) = snr {
            if !s.0.is_finite() {
                return Err(Reason::IgnoredNotFinite);
            }
        }
        if tx.0 < c.min_tx_dbm.0 - TX_TOLERANCE_DB || tx.0 > c.max_tx_dbm.0 + TX_TOLERANCE_DB {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi.0 < c.rssi_min_dbm.0 || rssi.0 > c.rssi_max_dbm.0 {
            return Err(Reason::IgnoredImplausible);
        }
        if noise.0 < c.noise_min_dbm.0 || noise.0 > c.noise_max_dbm.0 {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi.0 >= c.rssi_saturation_dbm.0 {
            return Err(Reason::IgnoredSaturated);
        }
        let snr = match snr {
            Some(s) => {
                if s.0 < c.rssi_min_dbm.0 - c.noise_max_dbm.0
                    || s.0 > c.rssi_max_dbm.0 - c.noise_min_dbm.0
                {
                    return Err(Reason::IgnoredImplausible);
                }
                s.0
            }
            None => rssi.0 - noise.0,
        };
        Ok((tx.0 - snr, noise.0))
    }

    /// Loss to noise of an open-loop beacon (reciprocal path, noise floor
    /// from the window or the default), or why it is unusable.
    fn check_beacon(&self, beacon_tx: Dbm, rssi: Dbm) -> Result<(f32, f32), Reason> {
        let c = &self.cfg;
        if !(beacon_tx.0.is_finite() && rssi.0.is_finite()) {
            return Err(Reason::IgnoredNotFinite);
        }
        if beacon_tx.0 < BEACON_TX_RANGE_DBM.0 || beacon_tx.0 > BEACON_TX_RANGE_DBM.1 {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi.0 < c.rssi_min_dbm.0 || rssi.0 > c.rssi_max_dbm.0 {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi.0 >= c.rssi_saturation_dbm.0 {
            return Err(Reason::IgnoredSaturated);
        }
        let noise = match self.window.means() {
            Some((_, mn)) => mn,
            None => c.default_noise_dbm.0,
        };
        // SNR of our packet = tx − PL − noise + gains, PL − gains = beacon_tx − rssi.
        Ok((beacon_tx.0 - rssi.0 + noise, noise))
    }

    fn clamp_margin(&self, m: f32) -> f32 {
        let lo = self.cfg.margin_min_db.0;
        let hi = self.cfg.margin_max_db.0;
        if m >= lo {
            if m > hi {
                hi
            } else {
                m
            }
        } else if m < lo {
            lo
        } else if 0.0 > hi {
            // NaN (cannot arise from validated settings): the neutral margin.
            hi
        } else if 0.0 < lo {
            lo
        } else {
            0.0
        }
    }

    /// Lowest level ≥ `x`, within `[bottom, top]` (`top` if none or NaN).
    fn level_at_or_above(&self, x: f32) -> f32 {
        if x >= self.top || x.is_nan() {
            return self.top;
        }
        if x <= self.bottom {
            return self.bottom;
        }
        let v = match self.cfg.steps {
            PowerSteps::Uniform(s) => {
                // bottom = min_tx < x < top, so 0 < k ≤ levels: an integer
                // ceiling without libm.
                let k = (x - self.cfg.min_tx_dbm.0) * self.inv_step - GRID_EPS;
                let ki = to_level_index(k);
                let ki = if (ki as f32) < k {
                    ki.saturating_add(1)
                } else {
                    ki
                };
                self.cfg.min_tx_dbm.0 + ki as f32 * s.0
            }
            PowerSteps::Table(t) => t
                .levels()
                .iter()
                .map(|l| l.0)
                .find(|&l| l >= self.bottom && l >= x - GRID_EPS)
                .unwrap_or(self.top),
        };
        self.clamp_level(v)
    }

    /// Highest level ≤ `x`, within `[bottom, top]` (`top` if NaN).
    fn level_at_or_below(&self, x: f32) -> f32 {
        if x >= self.top || x.is_nan() {
            return self.top;
        }
        if x <= self.bottom {
            return self.bottom;
        }
        let v = match self.cfg.steps {
            PowerSteps::Uniform(s) => {
                let k = (x - self.cfg.min_tx_dbm.0) * self.inv_step + GRID_EPS;
                self.cfg.min_tx_dbm.0 + to_level_index(k) as f32 * s.0
            }
            PowerSteps::Table(t) => t
                .levels()
                .iter()
                .rev()
                .map(|l| l.0)
                .find(|&l| l <= self.top && l <= x + GRID_EPS)
                .unwrap_or(self.bottom),
        };
        self.clamp_level(v)
    }

    fn clamp_level(&self, v: f32) -> f32 {
        if v > self.top {
            self.top
        } else if v < self.bottom {
            self.bottom
        } else {
            v
        }
    }

    /// Move from `cur` toward `target` by at most the step limits, staying on
    /// the grid. Returns the new level and whether it was limited.
    fn limit_step(&self, cur: f32, target: f32) -> (f32, bool) {
        let up = self.cfg.max_step_up_db.0;
        let down = self.cfg.max_step_down_db.0;
        if target > cur + up + GRID_EPS {
            (self.level_at_or_below(cur + up), true)
        } else if target < cur - down - GRID_EPS {
            (self.level_at_or_above(cur - down), true)
        } else {
            (target, false)
        }
    }
}

/// `s / m`, rounded; `k = log2(m)` when `m` is a power of two.
fn over_memory(s: u32, m: u32, k: Option<u32>) -> u32 {
    let half = s.saturating_add(m >> 1);
    match k {
        Some(k) => half >> k,
        None => half.checked_div(m).unwrap_or(0),
    }
}

/// `k` with `Q(k) = p` for the standard normal upper tail, `p` in (0, 0.5].
fn upper_normal_quantile(p: f32) -> Result<f32, ConfigError> {
    crate::special::inverse_q(p).map_err(|_| ConfigError::OutOfRange {
        setting: "target_outage",
        value: p,
        min: 0.0,
        max: 1.0,
    })
}

#[cfg(test)]
#[allow(clippy::panic, clippy::cast_possible_truncation)]
mod tests {
    use super::*;

    fn ctl() -> Controller<32> {
        match Controller::<32>::new(ControllerConfig::sub_ghz_node()) {
            Ok(c) => c,
            Err(e) => panic!("default config refused: {e}"),
        }
    }

    #[test]
    fn state_is_small() {
        // Cost target: the state of a W = 32 controller fits in 256 bytes
        // beside its configuration.
        let total = core::mem::size_of::<Controller<32>>();
        let cfg = core::mem::size_of::<ControllerConfig>();
        assert!(total - cfg <= 256, "state {} bytes", total - cfg);
        println!("Controller<32>: {total} bytes, of which config {cfg}");
    }

    #[test]
    fn starts_at_start_power_on_grid() {
        let c = ctl();
        assert_eq!(c.tx(), Dbm(14.0));
        assert_eq!(c.limits(), (Dbm(-9.0), Dbm(14.0)));
        assert!(c.is_level(Dbm(3.0)));
        assert!(!c.is_level(Dbm(3.5)));
        assert!(!c.is_level(Dbm(15.0)));
    }

    #[test]
    fn window_sums_are_exact_after_wrap() {
        let mut w: Window<4> = Window::new();
        for v in [10i16, -20, 30, 40, 50, 60, -70] {
            w.push(v, 5);
        }
        // Holds 40, 50, 60, -70.
        assert_eq!(w.n, 4);
        assert_eq!(w.sum_z, 80);
        assert_eq!(w.sum_noise, 20);
    }

    #[test]
    fn settles_just_above_the_requirement_on_a_steady_link() {
        // Path loss less gains 100 dB, noise −110 dBm: SNR = tx + 10 dB, so
        // z = −10 dB and with no spread the requirement is 8 − 10 + margin.
        let mut c = ctl();
        let mut last = c.tx();
        for i in 0..300u64 {
            let tx = c.tx();
            let d = c.update(&Observation::Feedback {
                t_ms: i * 1000,
                tx,
                rssi: Dbm(tx.0 - 100.0),
                noise: Dbm(-110.0),
                snr: None,
            });
            assert!(d.tx.0 <= last.0 + 6.0 + 1e-4 && d.tx.0 >= last.0 - 2.0 - 1e-4);
            last = d.tx;
        }
        let d = c.update(&Observation::Acked { t_ms: 300_000 });
        let w = match d.wanted {
            Some(w) => w.0,
            None => panic!("still warming up: {d:?}"),
        };
        assert_eq!(d.spread, Some(Db(0.0)));
        assert!((w - (-2.0 + d.margin.0)).abs() < 1e-4, "{d:?}");
        // On the 1 dB grid, at or above the requirement, within the deadband.
        assert!(d.tx.0 >= w - 1e-4 && d.tx.0 < w + 1.0 + 1.0, "{d:?}");
        // Path loss reported with both 2.15 dBi antennas: 100 + 4.3 dB.
        assert!(
            d.path_loss.is_some_and(|pl| (pl.0 - 104.3).abs() < 0.05),
            "{d:?}"
        );
    }

    #[test]
    fn loss_run_climbs_then_recovers() {
        let mut c = ctl();
        for i in 0..40u64 {
            c.update(&Observation::Feedback {
                t_ms: i,
                tx: c.tx(),
                rssi: Dbm(-90.0 + c.tx().0),
                noise: Dbm(-110.0),
                snr: None,
            });
        }
        let low = c.tx();
        assert!(low.0 < 0.0, "{low:?}");
        let mut last = low;
        let mut climbed = false;
        for i in 0..10u64 {
            let d = c.update(&Observation::Lost { t_ms: 100 + i });
            assert!(d.tx.0 >= last.0);
            if d.reason == Reason::Climb {
                climbed = true;
                assert!(d.tx.0 - last.0 <= 6.0 + 1e-4);
            }
            last = d.tx;
        }
        assert!(climbed);
        assert_eq!(last, Dbm(14.0));
        let d = c.update(&Observation::Feedback {
            t_ms: 200,
            tx: last,
            rssi: Dbm(-80.0),
            noise: Dbm(-110.0),
            snr: None,
        });
        assert_eq!(d.reason, Reason::Recovered);
        // Comes down from the power that worked no faster than the step limit.
        assert!(d.tx.0 >= 14.0 - 2.0 - 1e-4, "{d:?}");
    }

    #[test]
    fn bad_readings_are_named() {
        let mut c = ctl();
        let fb = |rssi: f32, noise: f32| Observation::Feedback {
            t_ms: 10,
            tx: Dbm(14.0),
            rssi: Dbm(rssi),
            noise: Dbm(noise),
            snr: None,
        };
        assert_eq!(
            c.update(&fb(f32::NAN, -110.0)).reason,
            Reason::IgnoredNotFinite
        );
        assert_eq!(
            c.update(&fb(-90.0, f32::INFINITY)).reason,
            Reason::IgnoredNotFinite
        );
        assert_eq!(
            c.update(&fb(-500.0, -110.0)).reason,
            Reason::IgnoredImplausible
        );
        assert_eq!(c.update(&fb(5.0, -110.0)).reason, Reason::IgnoredSaturated);
        assert_eq!(c.update(&fb(-90.0, -110.0)).reason, Reason::WarmUp);
        let old = Observation::Feedback {
            t_ms: 5,
            tx: Dbm(14.0),
            rssi: Dbm(-90.0),
            noise: Dbm(-110.0),
            snr: None,
        };
        assert_eq!(c.update(&old).reason, Reason::IgnoredStale);
        let late = Observation::Feedback {
            t_ms: 10 + 3_600_001,
            tx: Dbm(14.0),
            rssi: Dbm(-90.0),
            noise: Dbm(-110.0),
            snr: None,
        };
        assert_eq!(c.update(&late).reason, Reason::HistoryExpired);
        assert_eq!(
            c.update(&Observation::Missing { t_ms: 4_000_000 }).reason,
            Reason::NoInformation
        );
    }

    #[test]
    fn tiny_uniform_steps_are_refused_by_name() {
        for step in [1.0e-39f32, 1.0e-30, 1.0e-6, 0.009] {
            let mut cfg = ControllerConfig::sub_ghz_node();
            cfg.steps = PowerSteps::Uniform(Db(step));
            match Controller::<32>::new(cfg) {
                Err(e) => assert_eq!(e.setting(), "steps.uniform", "step {step}"),
                Ok(_) => panic!("step {step} accepted"),
            }
        }
        let mut cfg = ControllerConfig::sub_ghz_node();
        cfg.steps = PowerSteps::Uniform(Db(0.01));
        let mut c = match Controller::<32>::new(cfg) {
            Ok(c) => c,
            Err(e) => panic!("0.01 dB step refused: {e}"),
        };
        assert!(c.is_level(c.tx()));
        for i in 0..50u64 {
            let d = c.update(&Observation::Feedback {
                t_ms: i,
                tx: c.tx(),
                rssi: Dbm(c.tx().0 - 100.0),
                noise: Dbm(-110.0),
                snr: None,
            });
            assert!(c.is_level(d.tx), "{d:?}");
        }
    }

    #[test]
    fn level_rounding_saturates_instead_of_overflowing() {
        // Unreachable through validation; the arithmetic itself must not
        // overflow if the index saturates.
        let mut c = ctl();
        c.inv_step = f32::MAX;
        let v = c.level_at_or_above(0.5);
        assert!(v.is_finite());
        let v = c.level_at_or_below(0.5);
        assert!(v.is_finite());
    }

    #[test]
    fn refuses_bad_windows() {
        let cfg = ControllerConfig::sub_ghz_node();
        assert!(Controller::<0>::new(cfg).is_err());
        assert!(matches!(
            Controller::<4>::new(cfg),
            Err(ConfigError::Inconsistent {
                setting: "min_readings",
                ..
            })
        ));
    }
}
