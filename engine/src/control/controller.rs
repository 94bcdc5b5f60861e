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

/// Gains of the two exponential-filter predictors of the loss to noise: one
/// follows changes over about eight packets, one over about two.
const FILTER_GAINS: [f32; 2] = [0.125, 0.5];

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
        Window { z: [0; W], noise: [0; W], head: 0, n: 0, sum_z: 0, sum_noise: 0 }
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
            self.head = if next >= W { 0 } else { u16::try_from(next).unwrap_or(0) };
        }
    }

    /// 1 / (W · steps per dB): the scale of the sums of a full window.
    const INV_FULL: f32 = 1.0 / (W as f32 * Q_PER_DB);

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
/// [`Controller::update`] per packet, O(1) in `W`, with no logarithm or
/// exponential; divisions only while the window and the error averages
/// fill up.
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
    /// Exponential-filter predictors of z, dB.
    filters: [f32; 2],
    /// Mean absolute one-step prediction error of the window mean and of
    /// the two filters, dB.
    mae: [f32; 3],
    /// Prediction errors seen since the history started (saturating).
    errors: u16,
    /// 1 / `spread_memory`, the weight of a new error once `errors` reaches it.
    inv_memory: f32,
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
            filters: [0.0; 2],
            mae: [0.0; 3],
            errors: 0,
            inv_memory: 1.0 / f32::from(cfg.spread_memory),
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
        self.filters = [0.0; 2];
        self.mae = [0.0; 3];
        self.errors = 0;
    }

    /// Score the predictors on a new reading `z` (already quantised), then
    /// take it into the window and the filters.
    fn learn(&mut self, zq: i16, noiseq: i16) {
        let z = f32::from(zq) * (1.0 / Q_PER_DB);
        match self.window.means() {
            Some((mz, _)) => {
                self.errors = self.errors.saturating_add(1);
                let w = if self.errors < self.cfg.spread_memory {
                    1.0 / f32::from(self.errors)
                } else {
                    self.inv_memory
                };
                let [f0, f1] = self.filters;
                let e = [z - mz, z - f0, z - f1];
                for (m, e) in self.mae.iter_mut().zip(e.iter()) {
                    *m += w * (e.abs() - *m);
                }
                for (f, g) in self.filters.iter_mut().zip(FILTER_GAINS.iter()) {
                    *f += g * (z - *f);
                }
            }
            None => self.filters = [z; 2],
        }
        self.window.push(zq, noiseq);
    }

    /// Predicted z for the next packet and its RMS error, from the predictor
    /// with the smallest mean square error.
    fn predict(&self) -> Option<(f32, Option<f32>)> {
        let (mz, _) = self.window.means()?;
        if self.errors == 0 {
            return Some((mz, None));
        }
        let [m0, m1, m2] = self.mae;
        let [f0, f1] = self.filters;
        let (level, mae) = if m0 <= m1 && m0 <= m2 {
            (mz, m0)
        } else if m1 <= m2 {
            (f0, m1)
        } else {
            (f1, m2)
        };
        Some((level, Some(MAE_TO_SIGMA * mae)))
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
            Observation::Feedback { tx, rssi, noise, snr, .. } => {
                Some(self.check_feedback(tx, rssi, noise, snr))
            }
            Observation::Beacon { beacon_tx, rssi, .. } => Some(self.check_beacon(beacon_tx, rssi)),
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
        let prediction = self.predict();
        let spread = prediction.and_then(|(_, s)| s);
        let n = self.window.n;
        let cfg = &self.cfg;
        let mut wanted: Option<f32> = None;
        let (target, mut reason) = if self.loss_run >= climb_after {
            self.mode = Mode::Climb;
            (self.level_at_or_below(cur + cfg.max_step_up_db.0), Reason::Climb)
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
    /// cannot: not finite, or outside the configured plausible ranges (the
    /// logged transmit power only has to be finite and within ±300 dBm).
    pub(crate) fn check_logged(&self, tx: f32, rssi: f32, noise: f32) -> Option<Reason> {
        let c = &self.cfg;
        if !(tx.is_finite() && rssi.is_finite() && noise.is_finite()) {
            return Some(Reason::IgnoredNotFinite);
        }
        let lim = super::config::SETTING_LIMIT_DB;
        if !(-lim..=lim).contains(&tx)
            || !(c.rssi_min_dbm.0..=c.rssi_max_dbm.0).contains(&rssi)
            || !(c.noise_min_dbm.0..=c.noise_max_dbm.0).contains(&noise)
        {
            return Some(Reason::IgnoredImplausible);
        }
        None
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
                if s.0 < c.rssi_min_dbm.0 - c.noise_max_dbm.0 || s.0 > c.rssi_max_dbm.0 - c.noise_min_dbm.0 {
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
                let ki = if (ki as f32) < k { ki + 1 } else { ki };
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
        assert!(d.path_loss.is_some_and(|pl| (pl.0 - 104.3).abs() < 0.05), "{d:?}");
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
        assert_eq!(c.update(&fb(f32::NAN, -110.0)).reason, Reason::IgnoredNotFinite);
        assert_eq!(c.update(&fb(-90.0, f32::INFINITY)).reason, Reason::IgnoredNotFinite);
        assert_eq!(c.update(&fb(-500.0, -110.0)).reason, Reason::IgnoredImplausible);
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
        assert_eq!(c.update(&Observation::Missing { t_ms: 4_000_000 }).reason, Reason::NoInformation);
    }

    #[test]
    fn refuses_bad_windows() {
        let cfg = ControllerConfig::sub_ghz_node();
        assert!(Controller::<0>::new(cfg).is_err());
        assert!(matches!(
            Controller::<4>::new(cfg),
            Err(ConfigError::Inconsistent { setting: "min_readings", .. })
        ));
    }
}
