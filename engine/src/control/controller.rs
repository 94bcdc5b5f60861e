//! The per-packet transmit-power controller.

use super::config::{ConfigError, ControllerConfig, PowerSteps, GRID_EPS, MAX_LEVELS, MAX_WINDOW};
use super::fixed::*;
use super::price;
use super::rates::RatePlan;
use super::reason::Reason;
use crate::energy::{AirtimeWindow, ChargeTable};
use crate::units::{Db, Dbm};

/// Tolerance on the transmit power a feedback says was used, beyond the
/// radio's configured range, dB (a radio's actual output differs from its
/// setting by about this much; common practice).
const TX_TOLERANCE_DB: f32 = 1.0;

/// Plausible range of a beacon's stated transmit power, −50 to +60 dBm (in
/// 1/8192 dB): wider than any short-range radio class (common practice).
const BEACON_TX_RANGE_FINE: (i32, i32) = (-50 << FINE_PER_DB_BITS, 60 << FINE_PER_DB_BITS);

/// √(π/2): standard deviation over mean absolute deviation of a normal
/// distribution.
const MAE_TO_SIGMA: f32 = 1.253_314_1;

/// Gains of the two exponential-filter predictors of the loss to noise, as
/// right shifts: 1/8 follows changes over about eight packets, 1/2 over
/// about two.
const FILTER_SHIFTS: [u32; 2] = [3, 1];

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
///
/// The estimates are kept as the controller computed them (integers in
/// 1/8192 dB) and converted to dB only when asked for: a device that only
/// needs the power pays nothing for them.
#[derive(Clone, Copy, PartialEq)]
pub struct Decision {
    /// Transmit power for the next packet: on the radio's grid, within the
    /// radio's range and the EIRP cap.
    pub tx: Dbm,
    /// Why this power, or why the reading was ignored.
    pub reason: Reason,
    /// Rate for the next packet: an index into the configuration's rate
    /// table (`None` when the table is empty: the rate is not in play).
    pub rate: Option<u8>,
    /// No rate fits the duty-cycle budget: the next packet must not be
    /// sent (tell the controller with [`Controller::held`]).
    pub held: bool,
    /// Readings in the window.
    pub readings: u16,
    /// The estimates in 1/8192 dB, [`NONE_FINE`] when absent (none can
    /// reach it: all are sums of a few values within ±300 dB).
    wanted: i32,
    path_loss: i32,
    /// Mean absolute prediction error, 1/8192 dB.
    mae: Option<u32>,
    noise: i32,
    margin: i32,
}

/// "No value" of an estimate kept in a [`Decision`].
const NONE_FINE: i32 = i32::MIN;

/// An estimate kept in a [`Decision`], `None` when absent.
fn some_fine(x: i32) -> Option<i32> {
    if x == NONE_FINE {
        None
    } else {
        Some(x)
    }
}

impl Decision {
    /// What the estimates asked for before rounding, clamping and step
    /// limiting (`None` while warming up or climbing).
    pub fn wanted(&self) -> Option<Dbm> {
        some_fine(self.wanted).map(|w| Dbm(from_fine(w)))
    }

    /// Predicted path loss (antenna gains included) from the predictor in
    /// use, `None` before the first reading.
    pub fn path_loss(&self) -> Option<Db> {
        some_fine(self.path_loss).map(|p| Db(from_fine(p)))
    }

    /// RMS one-step prediction error of the loss to noise (fading and
    /// interference about the predicted level; `√(π/2)` times the mean
    /// absolute error), `None` before two readings.
    pub fn spread(&self) -> Option<Db> {
        self.mae.map(|m| Db(from_fine_u32(m) * MAE_TO_SIGMA))
    }

    /// Noise floor at the far end, filtered over the readings (gain 1/16),
    /// `None` before the first reading.
    pub fn noise(&self) -> Option<Dbm> {
        some_fine(self.noise).map(|n| Dbm(from_fine(n)))
    }

    /// Adaptive margin after this update (to 1/8192 dB, rounded toward −∞).
    /// With several rates and an estimate, where losses are priced across
    /// packets: how far the planned power is above the chosen rate's
    /// requirement at the predicted loss to noise (negative for a packet
    /// given up, [`Reason::PricedOut`]).
    pub fn margin(&self) -> Db {
        Db(from_fine(self.margin))
    }
}

impl core::fmt::Debug for Decision {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.debug_struct("Decision")
            .field("tx", &self.tx)
            .field("reason", &self.reason)
            .field("rate", &self.rate)
            .field("held", &self.held)
            .field("wanted", &self.wanted())
            .field("path_loss", &self.path_loss())
            .field("spread", &self.spread())
            .field("noise", &self.noise())
            .field("margin", &self.margin())
            .field("readings", &self.readings)
            .finish()
    }
}

#[cfg(feature = "defmt")]
impl defmt::Format for Decision {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "Decision {{ tx: {}, reason: {}, rate: {}, held: {}, wanted: {}, path_loss: {}, spread: {}, noise: {}, margin: {}, readings: {} }}",
            self.tx,
            self.reason,
            self.rate,
            self.held,
            self.wanted(),
            self.path_loss(),
            self.spread(),
            self.noise(),
            self.margin(),
            self.readings
        );
    }
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

/// The last `W` values of the loss to noise, with an exact integer running
/// sum.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Window<const W: usize> {
    z: [i16; W],
    head: u16,
    n: u16,
    sum_z: i32,
    /// Mean of z in 1/8192 dB after the last push (0 when empty).
    mean: i32,
}

impl<const W: usize> Window<W> {
    const fn new() -> Self {
        Window {
            z: [0; W],
            head: 0,
            n: 0,
            sum_z: 0,
            mean: 0,
        }
    }

    fn clear(&mut self) {
        self.head = 0;
        self.n = 0;
        self.sum_z = 0;
        self.mean = 0;
    }

    fn push(&mut self, z: i16) {
        let head = usize::from(self.head);
        let full = usize::from(self.n) >= W;
        if let Some(zs) = self.z.get_mut(head) {
            if full {
                self.sum_z -= i32::from(*zs);
            }
            *zs = z;
            self.sum_z += i32::from(z);
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
        self.mean = self.compute_mean();
    }

    /// `W` as an `i32` (`W ≤ MAX_WINDOW = 4096`, checked by `Controller::new`;
    /// the cast cannot truncate).
    #[allow(clippy::cast_possible_truncation, clippy::cast_possible_wrap)]
    const W_I32: i32 = if W > MAX_WINDOW {
        MAX_WINDOW as i32
    } else {
        W as i32
    };

    /// `true` when `W · 2¹⁵ · 2⁸` fits an `i32`: the sum in 1/8192 dB
    /// cannot overflow, so the mean is one division (a shift when the window
    /// is full and `W` a power of two).
    const SMALL: bool = W < 256;

    /// Mean of z in 1/8192 dB, truncated toward zero (exact integer
    /// arithmetic), `None` when empty: computed once per push.
    fn mean_z_fine(&self) -> Option<i32> {
        if self.n == 0 {
            None
        } else {
            Some(self.mean)
        }
    }

    /// The mean of [`Window::mean_z_fine`] from the sum (0 when empty).
    fn compute_mean(&self) -> i32 {
        let n = i32::from(self.n);
        if n == 0 {
            return 0;
        }
        let full = usize::from(self.n) >= W;
        if Self::SMALL {
            // |sum| < 255 · 2¹⁵, times 2⁸ below 2³¹.
            let x = self.sum_z << FINE_BITS;
            return if full {
                x.checked_div(Self::W_I32).unwrap_or(0)
            } else {
                x.checked_div(n).unwrap_or(0)
            };
        }
        // The sum is at most 4096 · 2¹⁵ in magnitude, the remainder below
        // 4096: quotient and remainder apart.
        let (q, r) = if full {
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
        q.wrapping_mul(1 << FINE_BITS)
            .wrapping_add((r << FINE_BITS) / n)
    }
}

/// The prediction of the next packet's loss to noise, as the last reading
/// left it: computed once per reading (the decision of every update, and of
/// every rate, only reads it).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Estimate {
    /// Predicted z, 1/8192 dB.
    level: i32,
    /// Mean absolute error of its predictor, 1/8192 dB (`None` before the
    /// first prediction error).
    mae: Option<u32>,
    /// `level + k·σ`, 1/8192 dB, saturating: the decision's estimate before
    /// the required SNR and the margin.
    need: i32,
}

/// Memory of the averages behind the loss price's floor, as a right
/// shift: 1/64, about 64 packets.
const PAID_SHIFT: u32 = 6;

/// A climb moves to a more robust rate once its run of losses is this many
/// times `climb_after_losses` (see the climb in [`Controller::apply`]).
const RATE_CLIMB_RUNS: u16 = 4;

/// The least spread the warm-up's rate choice assumes, 1/8192 dB: the mean
/// absolute deviation of Rayleigh fading in dB, 4.3 dB (10·log10 of an
/// exponential variable: mean absolute deviation 4.27 dB, standard
/// deviation 5.57 dB; computed from the distribution, common practice).
/// A few readings cannot show the fading they have not yet met.
const RAYLEIGH_MAD_FINE: u32 = 35_226;

/// Gain of the exponential filter of the far end's noise floor, as a right
/// shift: 1/16, a memory of about sixteen readings.
const NOISE_SHIFT: u32 = 4;

/// Tolerance of the level comparisons, 1/8192 dB (about `GRID_EPS`).
const EPS_FINE: i32 = 1;

/// The levels the radio supports, from the lowest usable one (index 0) to
/// the highest (`kmax`).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
enum Grid {
    /// `min + k·step` dBm. The update compares levels in 1/8192 dB as
    /// `min_fine + k·step_fine` (the step rounded to 1/8192 dB: over the
    /// 2 300 levels of a 0.01 dB grid spanning 23 dB the thresholds move by
    /// at most 0.03 dB, 0.08/8192 dB per level; over a 1 dB grid not at
    /// all), so finding a level is an integer division.
    Uniform {
        min: f32,
        step: f32,
        inv_step: f32,
        min_fine: i32,
        step_fine: i32,
        /// log2(`step_fine`) when it is a power of two (a 1 dB step is
        /// 2¹³): finding a level is then a shift.
        step_shift: Option<u8>,
    },
    /// The usable levels of a table, in 1/`per_db` dB (exact: a table's
    /// levels are validated to be all multiples of 0.01 dB or all of 1/64 dB,
    /// within ±300 dB). Kept as they are, not in 1/8192 dB: that would
    /// double the table's 32 bytes for a division saved only when the power
    /// changes.
    Table {
        levels: [i16; MAX_LEVELS],
        per_db: u8,
    },
}

/// The settings the update uses, in the units it computes in (1/8192 dB
/// unless said otherwise), derived once by [`Controller::new`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Settings {
    required: i32,
    deadband: i32,
    /// `Q⁻¹(p)·√(π/2)` in 2⁻¹⁶: the spread term is `k·σ = mae · factor`.
    sigma_factor: u32,
    /// Fall of the margin per delivery, 2⁻⁴⁰ dB.
    margin_down: i64,
    /// Rise of the margin per loss, 2⁻²⁴ dB (at most 20 dB).
    margin_up: i32,
    /// Bounds of the margin, 1/8192 dB, rounded inward.
    margin_min: i32,
    margin_max: i32,
    step_up: i32,
    step_down: i32,
    /// Plausibility bounds of the readings and the default noise floor,
    /// rounded to the window's 1/32 dB (sanity bounds: 0.03 dB does not
    /// matter) and kept in 1/8192 dB, the readings' unit.
    tx_lo: i32,
    tx_hi: i32,
    rssi_lo: i32,
    rssi_hi: i32,
    rssi_saturation: i32,
    noise_lo: i32,
    noise_hi: i32,
    default_noise: i32,
    /// Both antenna gains (to report the path loss).
    gains: i32,
    /// Lowest and highest usable level (`fine_at(0)`, `fine_at(kmax)`, kept
    /// for the clamp tests of every update).
    bottom: i32,
    top: i32,
    stale_after_ms: u32,
    min_readings: u16,
    spread_memory: u16,
    climb_after: u16,
    /// log2(`spread_memory`) when it is a power of two (a shift instead of
    /// a division).
    memory_shift: Option<u8>,
    /// Index of the start level and of the highest level.
    start: u16,
    kmax: u16,
    grid: Grid,
}

/// A logged record's readings in 1/8192 dB, checked: what a replay needs to
/// judge the packet at any power and to feed the controller.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct LoggedReading {
    /// Loss to noise, `tx − (rssi − noise)`.
    pub(crate) z: i32,
    /// Noise floor.
    pub(crate) noise: i32,
    /// `rssi − tx`: the received power at a level is this plus the level.
    pub(crate) rssi_less_tx: i32,
    /// SNR the packet had as logged, at its own power: `rssi − noise`.
    pub(crate) logged_snr: i32,
}

/// The adaptive-margin transmit power controller over a window of `W`
/// readings.
///
/// ## What it estimates
/// Every usable reading gives the *loss to noise* `z = tx − SNR` (dB): the
/// path loss less the antenna gains, plus the far end's noise floor. A
/// packet sent at power `P` arrives with SNR `P − z`, so the next packet's
/// `z` is all the decision needs. The controller keeps the last `W` values of
/// `z` in a ring, as integers in 1/32 dB, with an exact running sum (O(1)
/// per update, no drift, the same bits on every target), and the far end's
/// noise floor in an exponential filter of gain 1/16 (it is only reported,
/// and used for open-loop beacons, which carry none).
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
/// ## Rates
/// With a rate table ([`ControllerConfig::rates`]) and an energy profile
/// ([`Controller::with_charge`]) the controller also chooses the rate of the
/// next packet ([`Decision::rate`]), and the target loss is then met *on
/// average*, not packet by packet: each packet gets the rate and power that
/// minimise `charge + μ·q`, its charge plus a price `μ` times its chance of
/// loss `q` (a Laplace model of the estimate's error, scale = the mean
/// absolute error; see the `price` module). The outer loop moves `log2 μ`
/// as the margin above moves (up after a loss, down by `p/(1−p)` of that
/// after a delivery, while tracking), and `μ` never falls below the recent
/// charge per delivered packet (a delivered packet is worth what one
/// costs). Where delivering is cheap the price buys a low loss; where it is
/// dear (a deep fade that only the slowest rate at full power would cross)
/// the packet may be given up: sent as cheaply as `outage_ceiling` allows,
/// with [`Reason::PricedOut`]. The rate moves one step of robustness per
/// decision (the rate in use against one of its neighbours in the table
/// ordered by required SNR plus noise change, each in turn), with a hysteresis on the charge the
/// choice moves and a dwell, and within the duty-cycle budget (`duty_limit`:
/// when the rate in use does not fit, every rate is priced; the next packet
/// is held, [`Decision::held`], when none fits). One estimate serves all
/// rates: readings are kept at rate 0's noise bandwidth. With no table, or
/// one rate, the decisions are the power-only ones, bit for bit.
///
/// ## Cost
/// All state is in this fixed-size struct (no allocation, 952 bytes for
/// `W = 32`, of which the power controller is 296 and the rest the rate
/// table, the energy profile, the loss price and the duty budget's slots):
/// the settings are kept only in the form the update uses. The priced rate
/// choice prices at most two rates per update (all of them when the duty
/// budget rules the rate in use out), in integers: logarithms and powers of
/// two from tables, one 32-bit division per update.
/// Without rates, one [`Controller::update`] per packet is O(1) in `W`,
/// with no logarithm, exponential, square root or division by a variable
/// once the window is full (when `W` and `spread_memory` are powers of two). The prediction
/// (the chosen predictor, its spread and `ẑ + k·σ`) is made once per
/// reading and only read by the decisions; on a uniform grid a new level is
/// found in O(1) (one division, a shift for a power-of-two step such as
/// 1 dB), in a table by a short walk. Everything between
/// the readings and the decision is integer arithmetic: readings, levels and
/// estimates in 1/8192 dB, the margin in 2⁻⁴⁰ dB. Floats are used only to
/// quantise the readings, to report the decision, and for the power (dBm) of
/// a new level when the power changes; holding the power compares two
/// integers with the level in use and the one below it. The plausibility
/// bounds are kept to 1/32 dB (in the readings' 1/8192 dB).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Controller<const W: usize> {
    s: Settings,
    /// Adaptive margin, 2⁻⁴⁰ dB.
    margin: i64,
    /// Time of the last reading (meaningful when `have_reading`).
    last_reading_ms: u64,
    /// Level in use: its index, its power (dBm) and its value in 1/8192 dB,
    /// with the value of the level below (`i32::MIN` at the bottom).
    k: u16,
    tx: f32,
    level: i32,
    below: i32,
    /// Exponential-filter predictors of z, 1/8192 dB.
    filters: [i32; 2],
    /// Absolute one-step prediction errors of the window mean and of the
    /// two filters, 1/32 dB, summed over the errors seen while fewer than
    /// `spread_memory` (the mean absolute error is the sum over their
    /// number), then decaying: `S ← S − S/memory + |e|` (the mean absolute
    /// error is `S/memory`, an exponential average of weight 1/memory).
    mae_sum: [u32; 3],
    /// Filtered noise floor at the far end, 1/8192 dB (meaningful when
    /// `have_noise`).
    noise: i32,
    /// Prediction errors seen since the history started (saturating).
    errors: u16,
    /// The prediction from the readings so far (`None` before the first).
    est: Option<Estimate>,
    loss_run: u16,
    mode: Mode,
    clamped_high: bool,
    clamped_low: bool,
    have_reading: bool,
    have_noise: bool,
    window: Window<W>,
    /// The rate table in the update's units.
    plan: RatePlan,
    /// Rate in use (0 when the table is empty) and its offset (required
    /// SNR plus noise change, 1/8192 dB; the required SNR without a table).
    rate: u8,
    required_now: i32,
    /// Packets since the last rate change (saturating).
    since_change: u16,
    /// The duty-cycle budget, with a limit.
    duty: Option<AirtimeWindow>,
    /// The last decision held the next packet.
    held: bool,
    /// With several rates: `log2` of the loss price (pC), 2⁻²⁴ octave,
    /// and what the plan of the packet in flight says about it (see
    /// [`super::rates::Priced`]).
    price: i32,
    risky: bool,
    slack: bool,
    /// The charge per packet (pC) and the delivered fraction (2⁻¹⁶),
    /// averaged over about 64 packets whose fate is known: their ratio,
    /// the charge per delivered packet, is the least a loss may be priced
    /// at (a delivered packet is worth what one costs on average).
    paid: u64,
    got: u32,
}

impl<const W: usize> Controller<W> {
    /// A controller with validated settings, at its start power. A rate
    /// table of more than one rate needs an energy profile: see
    /// [`Controller::with_charge`].
    pub fn new(cfg: ControllerConfig) -> Result<Self, ConfigError> {
        Self::with_charge(cfg, None)
    }

    /// A controller that chooses the rate with the power, costing each rate
    /// by `charge` (the energy profile, [`ChargeTable::from_profile`]),
    /// which must cover every power the controller may use.
    pub fn with_charge(
        cfg: ControllerConfig,
        charge: Option<ChargeTable>,
    ) -> Result<Self, ConfigError> {
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
        let (grid, kmax) = match cfg.steps {
            PowerSteps::Uniform(s) => {
                let inv_step = 1.0 / s.0;
                let k = libm::roundf((top - bottom) * inv_step);
                let step_fine = to_fine(s.0);
                (
                    Grid::Uniform {
                        min: cfg.min_tx_dbm.0,
                        step: s.0,
                        inv_step,
                        min_fine: to_fine(cfg.min_tx_dbm.0),
                        step_fine,
                        step_shift: pow2_shift(step_fine),
                    },
                    level_count_index(k),
                )
            }
            PowerSteps::Table(t) => {
                let per_db = t.unit().unwrap_or(100);
                let mut levels = [0i16; MAX_LEVELS];
                let mut n = 0usize;
                for l in t.levels().iter().filter(|l| l.0 >= bottom && l.0 <= top) {
                    if let Some(slot) = levels.get_mut(n) {
                        *slot = to_table_units(l.0, per_db);
                        n += 1;
                    }
                }
                (
                    Grid::Table { levels, per_db },
                    u16::try_from(n.saturating_sub(1)).unwrap_or(0),
                )
            }
        };
        let margin_down = to_margin(cfg.margin_step_db.0 * p / (1.0 - p));
        // The margin's bounds in 1/8192 dB, rounded inward so the margin
        // never leaves them; when no multiple of 1/8192 dB lies between
        // them (a fixed margin, `margin_min_db == margin_max_db`, off that
        // grid), both are the multiple nearest their middle.
        let (margin_min, margin_max) = {
            let (lo, hi) = (
                fine_ceil(cfg.margin_min_db.0),
                fine_floor(cfg.margin_max_db.0),
            );
            if lo > hi {
                let mid = to_fine(0.5 * (cfg.margin_min_db.0 + cfg.margin_max_db.0));
                (mid, mid)
            } else {
                (lo, hi)
            }
        };
        let memory_shift = if cfg.spread_memory.is_power_of_two() {
            u8::try_from(cfg.spread_memory.trailing_zeros()).ok()
        } else {
            None
        };
        let mut c = Controller {
            s: Settings {
                required: to_fine(cfg.required_snr_db.0),
                deadband: to_fine(cfg.deadband_db.0),
                sigma_factor: to_sigma_factor(quantile * MAE_TO_SIGMA),
                margin_up: to_margin_up(cfg.margin_step_db.0),
                margin_down,
                margin_min,
                margin_max,
                step_up: to_fine(cfg.max_step_up_db.0),
                step_down: to_fine(cfg.max_step_down_db.0),
                tx_lo: q_fine(to_q(cfg.min_tx_dbm.0 - TX_TOLERANCE_DB)),
                tx_hi: q_fine(to_q(cfg.max_tx_dbm.0 + TX_TOLERANCE_DB)),
                rssi_lo: q_fine(to_q(cfg.rssi_min_dbm.0)),
                rssi_hi: q_fine(to_q(cfg.rssi_max_dbm.0)),
                rssi_saturation: q_fine(to_q(cfg.rssi_saturation_dbm.0)),
                noise_lo: q_fine(to_q(cfg.noise_min_dbm.0)),
                noise_hi: q_fine(to_q(cfg.noise_max_dbm.0)),
                default_noise: q_fine(to_q(cfg.default_noise_dbm.0)),
                gains: to_fine(cfg.antenna_gain_dbi.0 + cfg.far_antenna_gain_dbi.0),
                bottom: 0,
                top: 0,
                stale_after_ms: cfg.stale_after_ms,
                min_readings: cfg.min_readings,
                spread_memory: cfg.spread_memory,
                climb_after: cfg.climb_after_losses,
                memory_shift,
                start: 0,
                kmax,
                grid,
            },
            margin: 0,
            last_reading_ms: 0,
            k: 0,
            tx: bottom,
            level: 0,
            below: i32::MIN,
            filters: [0; 2],
            mae_sum: [0; 3],
            noise: 0,
            errors: 0,
            est: None,
            loss_run: 0,
            mode: Mode::WarmUp,
            clamped_high: false,
            clamped_low: false,
            have_reading: false,
            have_noise: false,
            window: Window::new(),
            plan: RatePlan::empty(),
            rate: 0,
            required_now: 0,
            since_change: 0,
            duty: None,
            held: false,
            price: 0,
            risky: false,
            slack: false,
            paid: 0,
            got: 1 << 16,
        };
        c.s.bottom = c.fine_at(0);
        c.s.top = c.fine_at(kmax);
        c.plan = RatePlan::new(&cfg, charge, c.s.bottom, c.s.top)?;
        if let Some(f) = cfg.duty_limit.fraction() {
            c.duty = Some(AirtimeWindow::new(f).map_err(|_| ConfigError::OutOfRange {
                setting: "duty_limit",
                value: f,
                min: 0.0,
                max: 1.0,
            })?);
        }
        let start = to_fine(cfg.start_tx_dbm.0).saturating_sub(EPS_FINE);
        c.s.start = c.level_at_or_above(start, 0);
        c.reset();
        Ok(c)
    }

    /// Power chosen for the next packet.
    pub fn tx(&self) -> Dbm {
        Dbm(self.tx)
    }

    /// Rate chosen for the next packet (an index into the rate table),
    /// `None` when the table is empty.
    pub fn rate(&self) -> Option<u8> {
        if self.plan.n == 0 {
            None
        } else {
            Some(self.rate)
        }
    }

    /// Whether the next packet is held by the duty-cycle budget.
    pub fn is_held(&self) -> bool {
        self.held
    }

    /// The duty-cycle budget, when a limit is set.
    pub fn duty_window(&self) -> Option<&AirtimeWindow> {
        self.duty.as_ref()
    }

    /// The packet at `t_ms` was held (not sent, as the last decision
    /// said): nothing to learn; the budget moves on and the rate and power
    /// are chosen again.
    pub fn held(&mut self, t_ms: u64) -> Decision {
        self.apply(t_ms, None, None, None, false)
    }

    fn set_rate(&mut self, m: u8) {
        self.rate = m;
        self.required_now = if self.plan.n == 0 {
            self.s.required
        } else {
            self.plan.offset(m)
        };
    }

    /// The adaptive margin now, to 1/8192 dB (rounded toward −∞; the bounds
    /// are whole 1/8192 dB, so the margin reported never leaves them).
    pub fn margin(&self) -> Db {
        Db(from_fine(margin_fine(self.margin)))
    }

    /// `log2` of the loss price (pC), 2⁻²⁴ octave (several rates only).
    #[cfg(test)]
    pub(crate) fn price_log(&self) -> i32 {
        self.price
    }

    /// The loss price's loop settings (tests of the priced choice).
    #[cfg(test)]
    pub(crate) fn price_loop(&self) -> super::rates::PriceLoop {
        self.plan.price
    }

    /// Set the loss price (tests of the priced choice).
    #[cfg(test)]
    pub(crate) fn set_price_log(&mut self, p: i32) {
        self.price = p;
    }

    /// The loss price's outer loop, on the fate of the packet in flight
    /// (several rates only; out of line, so that the power-only update
    /// pays one branch for it).
    #[inline(never)]
    fn price_outcome(&mut self, delivered: bool) {
        let tracking = self.mode == Mode::Track;
        if let (true, Some(c)) = (tracking, self.plan.charge.as_ref()) {
            // The packet whose fate this is went at the level and rate in
            // use: its charge, and the averages of the price's floor (while
            // tracking only: a dead link, climbing, must not make a
            // delivered packet look priceless).
            let pc = c.charge_pc(self.level, self.plan.airtime(self.rate));
            self.paid = if self.paid == 0 {
                pc
            } else {
                // Never above the larger of the two: no overflow.
                (self.paid - (self.paid >> PAID_SHIFT)).saturating_add(pc >> PAID_SHIFT)
            };
            let g = if delivered { 1u32 << 16 } else { 0 };
            self.got = (self.got - (self.got >> PAID_SHIFT)).saturating_add(g >> PAID_SHIFT);
        }
        let p = &self.plan.price;
        if delivered {
            if self.mode != Mode::WarmUp && !self.slack {
                self.price = self.price.saturating_sub(p.down).max(p.min);
            }
        } else if tracking {
            // Every loss counts, even one at the most robust rate and the
            // highest power: the target is an average, so a loss that
            // cannot be cured here is made up where it is cheap.
            self.price = self.price.saturating_add(p.up).min(p.max);
        }
        self.price = self.price.max(self.price_floor());
    }

    /// The least the loss price may be, `log2` pC in 2⁻²⁴ octave: the
    /// recent charge per delivered packet (`paid / got`), within the loop's
    /// bounds.
    fn price_floor(&self) -> i32 {
        let p = &self.plan.price;
        if self.paid == 0 {
            return p.min;
        }
        let l = price::log2_q12(self.paid)
            .saturating_sub(price::log2_q12(u64::from(self.got.max(1))))
            .saturating_add(16 << price::LOG_BITS);
        l.saturating_mul(1 << (price::PRICE_BITS - price::LOG_BITS))
            .max(p.min)
            .min(p.max)
    }

    /// What the controller is doing now.
    pub fn mode(&self) -> Mode {
        self.mode
    }

    /// The lowest and highest levels the controller may choose.
    pub fn limits(&self) -> (Dbm, Dbm) {
        (Dbm(self.power_at(0)), Dbm(self.power_at(self.s.kmax)))
    }

    /// Forget everything learnt and return to the start power and the
    /// start rate: the most robust rate of the table (the lowest required
    /// SNR plus noise change; the first of equals). The duty budget is not
    /// forgotten: the airtime already spent stays spent.
    pub fn reset(&mut self) {
        self.held = false;
        // No change to settle from: the first reading may move the rate.
        self.since_change = self.plan.dwell;
        let mut start = 0u8;
        for m in 1..self.plan.n {
            if self.plan.offset(m) < self.plan.offset(start) {
                start = m;
            }
        }
        self.set_rate(start);
        self.margin = self.clamp_margin(0);
        self.price = self.plan.price.start;
        self.risky = false;
        self.slack = false;
        self.paid = 0;
        self.got = 1 << 16;
        self.loss_run = 0;
        self.mode = Mode::WarmUp;
        self.clamped_high = false;
        self.clamped_low = false;
        self.have_reading = false;
        self.forget();
        self.set_level(self.s.start);
    }

    /// Drop the readings and the predictors' history.
    fn forget(&mut self) {
        self.window.clear();
        self.filters = [0; 2];
        self.mae_sum = [0; 3];
        self.errors = 0;
        self.est = None;
        self.have_noise = false;
    }

    /// Power of level `k`, dBm.
    fn power_at(&self, k: u16) -> f32 {
        match self.s.grid {
            Grid::Uniform { min, step, .. } => min + f32::from(k) * step,
            Grid::Table { levels, per_db } => {
                // Exact: the level is a whole number of 1/per_db dB.
                f32::from(levels.get(usize::from(k)).copied().unwrap_or(0)) / f32::from(per_db)
            }
        }
    }

    /// Level `k` in 1/8192 dB.
    #[inline(always)]
    fn fine_at(&self, k: u16) -> i32 {
        match self.s.grid {
            // k·step_fine is within the validated span (±600 dB, 2²³ steps)
            // plus k/2 of rounding: no wrap.
            Grid::Uniform {
                min_fine,
                step_fine,
                ..
            } => min_fine.wrapping_add(i32::from(k).wrapping_mul(step_fine)),
            Grid::Table { levels, per_db } => {
                table_fine(levels.get(usize::from(k)).copied().unwrap_or(0), per_db)
            }
        }
    }

    /// Lowest level at or above `need` (1/8192 dB), the highest if none.
    /// On a uniform grid the levels are `min_fine + k·step_fine` exactly, so
    /// this is `⌈(need − min_fine) / step_fine⌉` within `0..=kmax` (a shift
    /// for a power-of-two step); a table is searched from level `from`.
    fn level_at_or_above(&self, need: i32, from: u16) -> u16 {
        match self.s.grid {
            Grid::Uniform {
                min_fine,
                step_fine,
                step_shift,
                ..
            } => {
                let d = need.saturating_sub(min_fine);
                let k = match step_shift {
                    Some(b) => d.saturating_add(step_fine - 1) >> b,
                    // d ≤ 0 is at or below level 0.
                    None if d <= 0 => 0,
                    None => (d - 1).checked_div(step_fine).unwrap_or(0) + 1,
                };
                self.clamp_level(k)
            }
            Grid::Table { .. } => self.walk_above(from, need),
        }
    }

    /// Highest level at or below `limit` (1/8192 dB), the lowest if none:
    /// `⌊(limit − min_fine) / step_fine⌋` within `0..=kmax` on a uniform
    /// grid; a table is searched from level `from`.
    fn level_at_or_below(&self, limit: i32, from: u16) -> u16 {
        match self.s.grid {
            Grid::Uniform {
                min_fine,
                step_fine,
                step_shift,
                ..
            } => {
                let d = limit.saturating_sub(min_fine);
                let k = match step_shift {
                    Some(b) => d >> b,
                    // Below level 0: the lowest.
                    None if d < 0 => 0,
                    None => d.checked_div(step_fine).unwrap_or(0),
                };
                self.clamp_level(k)
            }
            Grid::Table { .. } => self.walk_below(from, limit),
        }
    }

    /// A level index within `0..=kmax`.
    #[inline(always)]
    fn clamp_level(&self, k: i32) -> u16 {
        if k <= 0 {
            0
        } else if k >= i32::from(self.s.kmax) {
            self.s.kmax
        } else {
            u16::try_from(k).unwrap_or(self.s.kmax)
        }
    }

    /// Lowest level of a table at or above `need` (1/8192 dB), the highest
    /// if none, searching from level `k`.
    fn walk_above(&self, k: u16, need: i32) -> u16 {
        let kmax = self.s.kmax;
        let mut k = if k > kmax { kmax } else { k };
        if self.fine_at(k) >= need {
            while k > 0 && self.fine_at(k - 1) >= need {
                k -= 1;
            }
        } else {
            while k < kmax {
                k += 1;
                if self.fine_at(k) >= need {
                    break;
                }
            }
        }
        k
    }

    /// Highest level of a table at or below `limit` (1/8192 dB), the lowest
    /// if none, searching from level `k`.
    fn walk_below(&self, k: u16, limit: i32) -> u16 {
        let kmax = self.s.kmax;
        let mut k = if k > kmax { kmax } else { k };
        if self.fine_at(k) <= limit {
            while k < kmax && self.fine_at(k + 1) <= limit {
                k += 1;
            }
        } else {
            while k > 0 {
                k -= 1;
                if self.fine_at(k) <= limit {
                    break;
                }
            }
        }
        k
    }

    fn set_level(&mut self, k: u16) {
        self.k = k;
        self.tx = self.power_at(k);
        self.level = self.fine_at(k);
        self.below = if k == 0 {
            i32::MIN
        } else {
            self.fine_at(k - 1)
        };
    }

    /// Score the predictors on a new reading (z already quantised), then
    /// take it into the window, the filters and the noise floor, and make
    /// the prediction for the next packet. Integer arithmetic only.
    fn learn(&mut self, zq: i16, noise: i32) {
        let z = i32::from(zq) << FINE_BITS;
        if let Some(mz) = self.window.mean_z_fine() {
            self.errors = self.errors.saturating_add(1);
            let [f0, f1] = self.filters;
            // z, the mean and the filters are within ±2²³: the differences
            // cannot wrap.
            let (e0, e1, e2) = (z.wrapping_sub(mz), z.wrapping_sub(f0), z.wrapping_sub(f1));
            let a = [abs_q(e0), abs_q(e1), abs_q(e2)];
            let [s0, s1, s2] = self.mae_sum;
            // While the memory fills the sums add up; then each decays by
            // its share 1/memory (a shift for a power of two). No sum can
            // wrap: |e| < 2²⁴ makes each |e| in 1/32 dB at most 2¹⁶, so a
            // sum stays at or below memory·2¹⁶ < 2³² − 2¹⁶ (filling: at most
            // memory terms; decaying: s − ⌊(s + m/2)/m⌋ + 2¹⁶ ≤ m·2¹⁶ when
            // s ≤ m·2¹⁶), and s + m/2 below 2³².
            let m = self.s.spread_memory;
            self.mae_sum = if self.errors <= m {
                [s0, s1, s2]
            } else if let Some(k) = self.s.memory_shift {
                decayed([s0, s1, s2], |s| over_memory_shift(s, m, k))
            } else {
                decayed([s0, s1, s2], |s| over_memory(s, u32::from(m)))
            };
            self.mae_sum = [
                self.mae_sum[0].wrapping_add(a[0]),
                self.mae_sum[1].wrapping_add(a[1]),
                self.mae_sum[2].wrapping_add(a[2]),
            ];
            // The two filters with their gains as constant shifts.
            self.filters = [
                f0.wrapping_add(e1 >> FILTER_SHIFTS[0]),
                f1.wrapping_add(e2 >> FILTER_SHIFTS[1]),
            ];
        } else {
            self.filters = [z; 2];
        }
        self.noise = if self.have_noise {
            // Both within ±2²³: no wrap.
            self.noise
                .wrapping_add(noise.wrapping_sub(self.noise) >> NOISE_SHIFT)
        } else {
            noise
        };
        self.have_noise = true;
        self.window.push(zq);
        self.est = self.estimate();
    }

    /// Predicted z for the next packet (1/8192 dB) and the mean absolute
    /// error of its predictor (1/8192 dB), as the last reading left them.
    fn predict(&self) -> Option<(i32, Option<u32>)> {
        self.est.map(|e| (e.level, e.mae))
    }

    /// The prediction from the window, the filters and their scores: the
    /// predictor with the smallest mean absolute error.
    fn estimate(&self) -> Option<Estimate> {
        let mz = self.window.mean_z_fine()?;
        if self.errors == 0 {
            return Some(Estimate {
                level: mz,
                mae: None,
                need: mz,
            });
        }
        let [s0, s1, s2] = self.mae_sum;
        let [f0, f1] = self.filters;
        let (level, sum) = if s0 <= s1 && s0 <= s2 {
            (mz, s0)
        } else if s1 <= s2 {
            (f0, s1)
        } else {
            (f1, s2)
        };
        // Mean absolute error in 1/8192 dB: sum / n with the remainder kept.
        let memory = self.s.spread_memory;
        let fine = match self.s.memory_shift {
            // The steady state: a full memory of a power of two and sum·2⁸
            // within 32 bits, a shift (the same value as the division).
            Some(k) if self.errors >= memory && sum < 1 << (32 - FINE_BITS) => {
                (sum << FINE_BITS) >> k
            }
            _ => mean_of_sum(sum, u32::from(self.errors.min(memory))),
        };
        Some(Estimate {
            level,
            mae: Some(fine),
            need: level.saturating_add(spread_term(fine, self.s.sigma_factor)),
        })
    }

    /// `true` if `p` is one of the levels the controller may choose.
    pub fn is_level(&self, p: Dbm) -> bool {
        let x = p.0;
        let (bottom, top) = self.limits();
        if !(x >= bottom.0 - GRID_EPS && x <= top.0 + GRID_EPS) {
            return false;
        }
        match self.s.grid {
            Grid::Uniform { min, inv_step, .. } => {
                let k = (x - min) * inv_step;
                (k - libm::roundf(k)).abs() < 1e-3
            }
            Grid::Table { .. } => {
                (0..=self.s.kmax).any(|k| (self.power_at(k) - x).abs() < GRID_EPS)
            }
        }
    }

    /// Take one observation and choose the power for the next packet.
    ///
    /// Never fails and never panics: a reading that cannot be used is
    /// ignored and the [`Decision::reason`] says why.
    pub fn update(&mut self, obs: &Observation) -> Decision {
        // 1. What the observation says: the outcome of the packet (for the
        //    outer loop and the loss runs) and the reading, if any.
        let mut ignored: Option<Reason> = None;
        let sent = !matches!(obs, Observation::Beacon { .. });
        let (t, outcome, reading) = match *obs {
            Observation::Feedback {
                t_ms,
                tx,
                rssi,
                noise,
                snr,
            } => (
                t_ms,
                Some(true),
                Some(self.check_feedback(tx.0, rssi.0, noise.0, snr.map(|s| s.0))),
            ),
            Observation::Acked { t_ms } => (t_ms, Some(true), None),
            Observation::Lost { t_ms } => (t_ms, Some(false), None),
            Observation::Beacon {
                t_ms,
                beacon_tx,
                rssi,
            } => (t_ms, None, Some(self.check_beacon(beacon_tx.0, rssi.0))),
            Observation::Missing { t_ms } => {
                ignored = Some(Reason::NoInformation);
                (t_ms, None, None)
            }
        };
        self.apply(t, outcome, reading, ignored, sent)
    }

    /// The update proper, from an observation already checked: `outcome`
    /// is `Some(delivered)` when the packet's fate is known, `reading` the
    /// loss to noise and noise floor (1/8192 dB) or why the reading is
    /// unusable, `ignored` a reason that overrides the decision's own,
    /// `sent` whether the device sent a packet (at the rate in use) at `t`.
    #[inline(always)]
    fn apply(
        &mut self,
        t: u64,
        outcome: Option<bool>,
        reading: Option<Result<(i32, i32), Reason>>,
        mut ignored: Option<Reason>,
        sent: bool,
    ) -> Decision {
        let climb_after = self.s.climb_after;
        // 0. The duty budget: the packet just sent, at the rate in use.
        if let Some(w) = &mut self.duty {
            w.advance(t);
            if sent {
                w.add(self.plan.airtime(self.rate));
            }
        }
        self.since_change = self.since_change.saturating_add(1);
        // A reading arrives at the bandwidth of the rate in use: the shared
        // estimate keeps the loss to noise at rate 0's bandwidth.
        let norm = self.plan.norm(self.rate);
        let reading = match reading {
            Some(Ok((z, noise))) if norm != 0 => {
                Some(Ok((z.saturating_sub(norm), noise.saturating_sub(norm))))
            }
            r => r,
        };
        let mut flushed: Option<Reason> = None;
        let priced = self.plan.n > 1;
        if priced {
            if let Some(d) = outcome {
                self.price_outcome(d);
            }
        }
        match outcome {
            Some(false) => {
                if !priced && self.mode != Mode::WarmUp && !self.clamped_high {
                    // The margin is within its bounds (±300 dB, below 2⁴⁹
                    // steps) and a rise at most 20 dB: no overflow, and
                    // only the upper bound can be crossed.
                    let up = i64::from(self.s.margin_up) << (MARGIN_BITS - MARGIN_UP_BITS);
                    let hi = margin_steps(self.s.margin_max);
                    self.margin = (self.margin + up).min(hi);
                }
                // A loss the plan expected (a packet priced out) says
                // nothing about the estimate: no climb.
                if !(priced && self.risky) {
                    self.loss_run = self.loss_run.saturating_add(1);
                }
            }
            Some(true) => {
                if !priced && self.mode != Mode::WarmUp && !self.clamped_low {
                    // As above: a fall of less than one margin step per
                    // delivery can cross only the lower bound.
                    let lo = margin_steps(self.s.margin_min);
                    self.margin = (self.margin - self.s.margin_down).max(lo);
                }
                if self.loss_run >= climb_after {
                    flushed = Some(Reason::Recovered);
                }
                self.loss_run = 0;
            }
            None => {}
        }

        // 2. The reading, if any.
        match reading {
            Some(Err(r)) => ignored = Some(r),
            Some(Ok((z, noise))) => {
                let mut fresh = true;
                if self.have_reading {
                    let last = self.last_reading_ms;
                    if t < last {
                        ignored = Some(Reason::IgnoredStale);
                        fresh = false;
                    } else if t - last > u64::from(self.s.stale_after_ms) {
                        self.forget();
                        flushed = Some(Reason::HistoryExpired);
                    }
                }
                if fresh {
                    self.learn(fine_to_q(z), noise);
                    self.last_reading_ms = t;
                    self.have_reading = true;
                }
            }
            None => {}
        }

        // 3. The decision, in 1/8192 dB.
        let cur = self.k;
        let prediction = self.predict();
        let n = self.window.n;
        let margin = margin_fine(self.margin);

        // 3a. The rate (when a rate table is in play): which rate, at the
        //     power the shared estimate says it needs, costs the least.
        let mut rate_reason: Option<Reason> = None;
        let mut jump = false;
        // With several rates and an estimate: the priced plan (its power
        // and how far above the rate's requirement it is).
        let mut plan: Option<(i32, i32)> = None;
        let (mut risky, mut slack) = (false, false);
        if self.plan.n > 0 {
            let climbing = self.loss_run >= climb_after;
            // The estimate drives the power (not warming up, not climbing).
            let drives = !climbing && n >= self.s.min_readings;
            let may_switch = flushed.is_none() && ignored.is_none();
            let planned = match self.est {
                Some(e) if drives && may_switch && priced => self.plan.choose_priced(
                    self.rate,
                    e.level,
                    e.mae.unwrap_or(0),
                    self.price,
                    self.s.bottom,
                    self.since_change,
                    self.mode != Mode::Track,
                    self.duty.as_ref(),
                ),
                _ => None,
            };
            // Warming up with several rates: the power stays at the start,
            // the rate is priced there from the readings so far, with a
            // spread of at least Rayleigh fading's.
            let warm = match self.est {
                Some(e) if priced && may_switch && !climbing && !drives => self.plan.choose_at(
                    self.rate,
                    self.level,
                    e.level,
                    warm_spread(e.mae.unwrap_or(0), n),
                    self.price,
                    self.since_change,
                    self.duty.as_ref(),
                ),
                _ => None,
            };
            let mut choice = match (planned, warm) {
                (Some(p), _) => {
                    plan = Some((p.wanted, p.above));
                    (risky, slack) = (p.risky, p.slack);
                    p.choice
                }
                (None, Some(w)) => w,
                (None, None) => self.plan.choose(self.rate, self.duty.as_ref(), may_switch),
            };
            // A long run of losses at the highest power: one rate more
            // robust a packet (the loss at this rate says the same of the
            // shared estimate at all). Not at the climb's start: a fade
            // that correlated packets share passes within a few packets,
            // and slower rates bought blind in it cost more than the
            // packets they save (measured on the rate scenarios: stepping
            // at the climb's start cost 6 % more charge per delivered
            // packet in correlated fading at a 10 % target, and nothing
            // was gained at 1 %); a link that is gone for good is still
            // found again at the most robust rate.
            if climbing
                && self.loss_run >= climb_after.saturating_mul(RATE_CLIMB_RUNS)
                && may_switch
                && !choice.held
                && choice.reason.is_none()
                && cur >= self.s.kmax
            {
                if let Some(m) = self.plan.more_robust(self.rate, self.duty.as_ref()) {
                    choice.rate = m;
                    choice.reason = Some(Reason::RateSlower);
                }
            }
            self.held = choice.held;
            if choice.rate != self.rate {
                self.set_rate(choice.rate);
                self.since_change = 0;
                jump = drives;
            }
            rate_reason = choice.reason;
        }

        let s = &self.s;
        let required = self.required_now;
        let mut wanted: Option<i32> = None;
        let (target, mut reason) = if self.loss_run >= climb_after {
            self.mode = Mode::Climb;
            let limit = self
                .level
                .saturating_add(s.step_up)
                .saturating_add(EPS_FINE);
            (self.level_at_or_below(limit, cur), Reason::Climb)
        } else if n < s.min_readings {
            self.mode = Mode::WarmUp;
            (cur, Reason::WarmUp)
        } else {
            self.mode = Mode::Track;
            let w = match plan {
                Some((w, _)) => w,
                None => required
                    .saturating_add(self.est.map_or(0, |e| e.need))
                    .saturating_add(margin),
            };
            wanted = Some(w);
            // A level is "at or above" x when it is above x less EPS_FINE.
            let need = w.saturating_sub(EPS_FINE);
            let need_down = need.saturating_add(s.deadband);
            if jump {
                // A new rate: straight to the power it needs.
                (self.level_at_or_above(need, cur), Reason::Hold)
            } else if self.level < need && cur < s.kmax {
                let up = self.level_at_or_above(need, cur);
                if up > cur {
                    (up, Reason::Raise)
                } else {
                    (cur, Reason::Hold)
                }
            } else if self.below >= need_down {
                let down = self.level_at_or_above(need_down, cur);
                if down < cur {
                    (down, Reason::Lower)
                } else {
                    (cur, Reason::Hold)
                }
            } else {
                (cur, Reason::Hold)
            }
        };
        self.clamped_high = match (self.mode, wanted) {
            (Mode::Track, Some(w)) => w > self.s.top.saturating_add(EPS_FINE),
            (Mode::Climb, _) => cur >= self.s.kmax,
            _ => false,
        };
        self.clamped_low = match wanted {
            Some(w) => w < self.s.bottom.saturating_sub(EPS_FINE),
            None => false,
        };
        if self.clamped_high {
            reason = Reason::ClampedMax;
        } else if self.clamped_low {
            reason = Reason::ClampedMin;
        }
        if target != cur {
            let (next, limited) = if jump {
                (target, false)
            } else {
                self.limit_step(cur, target)
            };
            if limited {
                reason = Reason::RateLimited;
            }
            if next != cur {
                self.set_level(next);
            }
        }
        self.risky = risky;
        self.slack = slack;
        if risky && self.mode == Mode::Track {
            reason = Reason::PricedOut;
        }
        if let Some(r) = rate_reason {
            reason = r;
        }
        if let Some(f) = flushed {
            reason = f;
        }
        if let Some(i) = ignored {
            reason = i;
        }

        let noise = if self.have_noise {
            self.noise
        } else {
            NONE_FINE
        };
        let (path_loss, mae) = match prediction {
            Some((level, mae)) if self.have_noise => (
                level
                    .saturating_sub(self.noise)
                    .saturating_add(self.s.gains),
                mae,
            ),
            Some((_, mae)) => (NONE_FINE, mae),
            None => (NONE_FINE, None),
        };
        Decision {
            tx: Dbm(self.tx),
            reason,
            rate: self.rate(),
            held: self.held,
            readings: n,
            wanted: wanted.unwrap_or(NONE_FINE),
            path_loss,
            mae,
            noise,
            margin: plan.map_or(margin, |(_, above)| above),
        }
    }

    /// A logged record's readings, checked once, or why a replay cannot
    /// judge them: not finite, a logged transmit power outside the radio's
    /// range (`min_tx_dbm..max_tx_dbm` with the same 1 dB tolerance as a live
    /// feedback), a logged RSSI or noise floor outside the configured
    /// plausible ranges, or a logged RSSI at or above `rssi_saturation_dbm`.
    /// The same checks, in the same order, as a live feedback.
    pub(crate) fn check_logged(
        &self,
        tx: f32,
        rssi: f32,
        noise: f32,
    ) -> Result<LoggedReading, Reason> {
        let (z, noise) = self.check_feedback(tx, rssi, noise, None)?;
        // Finite and within ±300 dB: checked above. The conversion is the
        // one the check inlines, so it is computed once; and z = tx − rssi
        // + noise exactly (no sum of readings within ±300 dB can wrap), so
        // rssi − tx = noise − z without converting tx again (measured: 60
        // x86 instructions a replayed record).
        let rssi = fine_of(rssi).unwrap_or(0);
        Ok(LoggedReading {
            z,
            noise,
            rssi_less_tx: noise.saturating_sub(z),
            logged_snr: rssi.saturating_sub(noise),
        })
    }

    /// Whether `other` checks logged readings exactly as this controller
    /// does ([`Controller::check_logged`]): the same plausibility bounds and
    /// saturation level, the only settings the check reads. Controllers
    /// that differ only in how they move can then share one check of each
    /// record.
    pub(crate) fn checks_like(&self, other: &Self) -> bool {
        let (a, b) = (&self.s, &other.s);
        (
            a.tx_lo,
            a.tx_hi,
            a.rssi_lo,
            a.rssi_hi,
            a.noise_lo,
            a.noise_hi,
            a.rssi_saturation,
        ) == (
            b.tx_lo,
            b.tx_hi,
            b.rssi_lo,
            b.rssi_hi,
            b.noise_lo,
            b.noise_hi,
            b.rssi_saturation,
        )
    }

    /// The SNR, 1/8192 dB, a packet with the logged channel `r` has at the
    /// level in use: `level − z` (z = tx − SNR does not depend on the power).
    pub(crate) fn snr_at_level(&self, r: &LoggedReading) -> i32 {
        self.level.saturating_sub(r.z)
    }

    /// Required SNR, 1/8192 dB: of rate `m` with a rate table, else the
    /// `required_snr_db` setting.
    pub(crate) fn required_fine(&self, m: u8) -> i32 {
        if self.plan.n == 0 {
            self.s.required
        } else {
            self.plan.required(m)
        }
    }

    /// Noise change of rate `m` against rate 0, 1/8192 dB.
    pub(crate) fn norm_fine(&self, m: u8) -> i32 {
        self.plan.norm(m)
    }

    /// Rates in the table.
    pub(crate) fn rate_count(&self) -> u8 {
        self.plan.n
    }

    /// The energy profile in integers, when the controller has one.
    pub(crate) fn charge_table(&self) -> Option<&ChargeTable> {
        self.plan.charge.as_ref()
    }

    /// Level in use, 1/8192 dBm.
    pub(crate) fn level_fine(&self) -> i32 {
        self.level
    }

    /// Airtime of rate `m`, µs (`None` outside the table).
    pub(crate) fn airtime_us(&self, m: u8) -> Option<u32> {
        if m < self.plan.n {
            Some(self.plan.airtime(m))
        } else {
            None
        }
    }

    /// Whether the received power of `r` at the level in use reaches the far
    /// end's saturation level (its report would be clipped).
    pub(crate) fn saturates_at_level(&self, r: &LoggedReading) -> bool {
        r.rssi_less_tx.saturating_add(self.level) >= self.s.rssi_saturation
    }

    /// A value in 1/8192 dB as dB.
    pub(crate) fn db_of_fine(x: i32) -> f32 {
        from_fine(x)
    }

    /// Whether the level in use is the highest allowed one.
    pub fn at_top(&self) -> bool {
        self.k >= self.s.kmax
    }

    /// Take the outcome of a replayed packet: `delivered` with its reading
    /// (or why the far end's report of it is unusable), or lost.
    pub(crate) fn apply_replayed(
        &mut self,
        t: u64,
        delivered: bool,
        reading: Option<Result<(i32, i32), Reason>>,
    ) -> Decision {
        self.apply(t, Some(delivered), reading, None, true)
    }

    /// Take a record that says nothing usable, for `why`.
    pub(crate) fn apply_nothing(&mut self, t: u64, why: Reason) -> Decision {
        self.apply(t, None, None, Some(why), true)
    }

    /// Loss to noise and noise floor of a feedback (1/8192 dB), or why it is
    /// unusable (it reads only the settings [`Controller::checks_like`]
    /// compares; a new one read here belongs there too). Inlined into the update (measured: 25 instructions less
    /// per update on the Cortex-M0, 2.5 on the Cortex-M4F).
    #[inline(always)]
    fn check_feedback(
        &self,
        tx: f32,
        rssi: f32,
        noise: f32,
        snr: Option<f32>,
    ) -> Result<(i32, i32), Reason> {
        let s = &self.s;
        let (Some(tx), Some(rssi), Some(noise)) = (fine_of(tx), fine_of(rssi), fine_of(noise))
        else {
            return Err(Reason::IgnoredNotFinite);
        };
        let snr = match snr {
            Some(x) => Some(fine_of(x).ok_or(Reason::IgnoredNotFinite)?),
            None => None,
        };
        if tx < s.tx_lo || tx > s.tx_hi {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi < s.rssi_lo || rssi > s.rssi_hi {
            return Err(Reason::IgnoredImplausible);
        }
        if noise < s.noise_lo || noise > s.noise_hi {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi >= s.rssi_saturation {
            return Err(Reason::IgnoredSaturated);
        }
        // All within ±300 dB (±2²² steps): no sum below can wrap.
        let snr = match snr {
            Some(x) => {
                if x < s.rssi_lo - s.noise_hi || x > s.rssi_hi - s.noise_lo {
                    return Err(Reason::IgnoredImplausible);
                }
                x
            }
            None => rssi - noise,
        };
        Ok((tx - snr, noise))
    }

    /// Loss to noise of an open-loop beacon (reciprocal path, noise floor
    /// from the filter or the default), or why it is unusable.
    fn check_beacon(&self, beacon_tx: f32, rssi: f32) -> Result<(i32, i32), Reason> {
        let s = &self.s;
        let (Some(beacon_tx), Some(rssi)) = (fine_of(beacon_tx), fine_of(rssi)) else {
            return Err(Reason::IgnoredNotFinite);
        };
        if beacon_tx < BEACON_TX_RANGE_FINE.0 || beacon_tx > BEACON_TX_RANGE_FINE.1 {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi < s.rssi_lo || rssi > s.rssi_hi {
            return Err(Reason::IgnoredImplausible);
        }
        if rssi >= s.rssi_saturation {
            return Err(Reason::IgnoredSaturated);
        }
        let noise = if self.have_noise {
            self.noise
        } else {
            s.default_noise
        };
        // SNR of our packet = tx − PL − noise + gains, PL − gains = beacon_tx − rssi.
        // All within ±300 dB: no wrap.
        Ok((beacon_tx - rssi + noise, noise))
    }

    /// `m` within the margin's bounds (not `i64::clamp`, which panics if the
    /// bounds, rounded inward, ever crossed).
    fn clamp_margin(&self, m: i64) -> i64 {
        let (lo, hi) = (
            margin_steps(self.s.margin_min),
            margin_steps(self.s.margin_max),
        );
        if m > hi {
            hi
        } else if m < lo {
            lo
        } else {
            m
        }
    }

    /// Move from level `cur` toward level `target` by at most the step
    /// limits. Returns the new level and whether it was limited.
    fn limit_step(&self, cur: u16, target: u16) -> (u16, bool) {
        if target == cur {
            return (cur, false);
        }
        let s = &self.s;
        let t = self.fine_at(target);
        let up = self.level.saturating_add(s.step_up);
        let down = self.level.saturating_sub(s.step_down);
        if t > up.saturating_add(EPS_FINE) {
            let limit = up.saturating_add(EPS_FINE);
            (self.level_at_or_below(limit, cur), true)
        } else if t < down.saturating_sub(EPS_FINE) {
            let need = down.saturating_sub(EPS_FINE);
            (self.level_at_or_above(need, cur), true)
        } else {
            (target, false)
        }
    }
}

/// `sum / n` in 1/8192 dB for a sum in 1/32 dB, truncated, saturating
/// (`n` > 0; 0 for `n` = 0).
fn mean_of_sum(sum: u32, n: u32) -> u32 {
    if sum < 1 << (32 - FINE_BITS) {
        // sum·2⁸ fits: one division.
        (sum << FINE_BITS).checked_div(n).unwrap_or(0)
    } else {
        let q = sum.checked_div(n).unwrap_or(0);
        let r = sum.checked_rem(n).unwrap_or(0);
        q.saturating_mul(1 << FINE_BITS)
            .saturating_add((r << FINE_BITS).checked_div(n).unwrap_or(0))
    }
}

/// log2(`x`) when `x` is a positive power of two.
fn pow2_shift(x: i32) -> Option<u8> {
    if x > 0 && x.count_ones() == 1 {
        u8::try_from(x.trailing_zeros()).ok()
    } else {
        None
    }
}

/// A table level `u` in 1/`per_db` dB as 1/8192 dB, rounded half away from
/// zero (|level| ≤ 300 dB: ≤ 30 000 units, times 8192 fits).
fn table_fine(u: i16, per_db: u8) -> i32 {
    let d = i32::from(per_db);
    let x = i32::from(u) * (1 << FINE_PER_DB_BITS);
    let half = if x >= 0 { d / 2 } else { -(d / 2) };
    x.wrapping_add(half).checked_div(d).unwrap_or(0)
}

/// The spread the warm-up's rate choice assumes after `n` readings
/// (1/8192 dB): the mean absolute error so far, at least
/// [`RAYLEIGH_MAD_FINE`], widened by `(2n + 1)/(2n)` for the error of the
/// level itself (a new reading's error about the mean of `n` has the
/// spread `√(1 + 1/n)` times a reading's; `1 + 1/(2n)` is its first-order
/// value, above it).
fn warm_spread(mae: u32, n: u16) -> u32 {
    let b = u64::from(mae.max(RAYLEIGH_MAD_FINE));
    let n = u64::from(n.max(1));
    u32::try_from(b * (2 * n + 1) / (2 * n)).unwrap_or(u32::MAX)
}

/// `k·σ` in 1/8192 dB from the mean absolute error (1/8192 dB) and the
/// factor `Q⁻¹(p)·√(π/2)` (2⁻¹⁶), saturating.
fn spread_term(mae: u32, factor: u32) -> i32 {
    let x = (u64::from(mae) * u64::from(factor)) >> SIGMA_FACTOR_BITS;
    i32::try_from(x).unwrap_or(i32::MAX)
}

/// The index of the highest level of a uniform grid, `k` levels above the
/// lowest (validated: at most 60 000).
#[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
fn level_count_index(k: f32) -> u16 {
    if k <= 0.0 {
        0
    } else {
        k as u16
    }
}

/// A prediction error `e` (1/8192 dB) as its magnitude in 1/32 dB, rounded
/// (|e| < 2²⁴: no wrap).
#[inline(always)]
fn abs_q(e: i32) -> u32 {
    e.unsigned_abs().wrapping_add(1 << (FINE_BITS - 1)) >> FINE_BITS
}

/// The three sums of absolute errors less their share `part(s) ≤ s`.
#[inline(always)]
fn decayed(s: [u32; 3], part: impl Fn(u32) -> u32) -> [u32; 3] {
    let [s0, s1, s2] = s;
    // part(s) ≤ s: no wrap.
    [
        s0.wrapping_sub(part(s0)),
        s1.wrapping_sub(part(s1)),
        s2.wrapping_sub(part(s2)),
    ]
}

/// `s / m`, rounded (`s + m/2` below 2³²: see `learn`).
#[inline(always)]
fn over_memory(s: u32, m: u32) -> u32 {
    s.wrapping_add(m >> 1).checked_div(m).unwrap_or(0)
}

/// `s / m`, rounded, for `m = 2^k` (`s + m/2` below 2³²: see `learn`).
#[inline(always)]
fn over_memory_shift(s: u32, m: u16, k: u8) -> u32 {
    s.wrapping_add(u32::from(m >> 1)) >> k
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
        // Cost target: the whole state of a W = 32 controller, settings,
        // rate table, energy profile and the hour of duty-cycle slots
        // included, fits in 1 KiB (256 bytes of it the power controller).
        let total = core::mem::size_of::<Controller<32>>();
        assert!(total <= 1024, "state {total} bytes");
        println!("Controller<32>: {total} bytes");
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
            w.push(v);
        }
        // Holds 40, 50, 60, -70.
        assert_eq!(w.n, 4);
        assert_eq!(w.sum_z, 80);
        assert_eq!(w.mean_z_fine(), Some(20 << FINE_BITS));
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
        let w = match d.wanted() {
            Some(w) => w.0,
            None => panic!("still warming up: {d:?}"),
        };
        assert_eq!(d.spread(), Some(Db(0.0)));
        assert!((w - (-2.0 + d.margin().0)).abs() < 1e-4, "{d:?}");
        // On the 1 dB grid, at or above the requirement, within the deadband.
        assert!(d.tx.0 >= w - 1e-4 && d.tx.0 < w + 1.0 + 1.0, "{d:?}");
        // Path loss reported with both 2.15 dBi antennas: 100 + 4.3 dB.
        assert!(
            d.path_loss().is_some_and(|pl| (pl.0 - 104.3).abs() < 0.05),
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
    fn level_search_and_conversions_saturate() {
        // Unreachable through validation; the arithmetic itself must not
        // overflow if the index saturates.
        let mut c = ctl();
        c.s.grid = Grid::Uniform {
            min: -9.0,
            step: 1.0,
            inv_step: f32::MAX,
            min_fine: to_fine(-9.0),
            step_fine: 1,
            step_shift: None,
        };
        assert_eq!(c.level_at_or_below(to_fine(0.5), 0), c.s.kmax);
        assert_eq!(c.level_at_or_above(to_fine(0.5), 0), c.s.kmax);
        assert_eq!(c.level_at_or_above(to_fine(-10.0), 5), 0);
        assert_eq!(c.level_at_or_below(to_fine(-10.0), 5), 0);
        assert_eq!(c.level_at_or_above(i32::MAX, 0), c.s.kmax);
        assert_eq!(c.level_at_or_below(i32::MIN, 3), 0);
        assert_eq!(to_fine(f32::MAX), i32::MAX);
        assert_eq!(to_fine(f32::MIN), -i32::MAX);
        assert_eq!(fine_to_q(i32::MAX), i16::MAX);
        assert_eq!(fine_to_q(i32::MIN), i16::MIN);
    }

    /// The level lookups of a uniform grid (a division or a shift) against
    /// a plain scan of the levels, on grids of several steps, at and around
    /// every level and beyond both ends.
    #[test]
    fn uniform_level_lookups_match_a_scan() {
        for step in [0.01f32, 0.1, 0.25, 0.5, 1.0, 2.0] {
            let mut cfg = ControllerConfig::sub_ghz_node();
            cfg.steps = PowerSteps::Uniform(Db(step));
            let c = match Controller::<32>::new(cfg) {
                Ok(c) => c,
                Err(e) => panic!("step {step}: {e}"),
            };
            let kmax = c.s.kmax;
            let above = |x: i32| (0..=kmax).find(|&k| c.fine_at(k) >= x).unwrap_or(kmax);
            let below = |x: i32| (0..=kmax).rev().find(|&k| c.fine_at(k) <= x).unwrap_or(0);
            let mut xs = vec![
                i32::MIN,
                i32::MAX,
                c.fine_at(0) - 100_000,
                c.fine_at(kmax) + 100_000,
            ];
            for k in 0..=kmax {
                for d in [-2, -1, 0, 1, 2, 4095, 4096, 4097] {
                    xs.push(c.fine_at(k) + d);
                }
            }
            for x in xs {
                assert_eq!(c.level_at_or_above(x, 0), above(x), "step {step}, {x}");
                assert_eq!(c.level_at_or_below(x, kmax), below(x), "step {step}, {x}");
            }
        }
    }

    /// `fine_of` against an independent f64 computation (x·8192 is exact in
    /// f64; `f64::round` rounds half away from zero), over a sweep of bit
    /// patterns that covers every exponent, both signs, subnormals, the
    /// halfway cases and the saturation edge.
    #[test]
    #[allow(clippy::cast_possible_wrap)]
    fn fine_of_is_exact_rounding() {
        fn reference(x: f32) -> Option<i32> {
            if !x.is_finite() {
                return None;
            }
            let y = (f64::from(x) * 8192.0).round();
            Some(y.clamp(-f64::from(i32::MAX), f64::from(i32::MAX)) as i32)
        }
        let mut bits = 0u32;
        let mut checked = 0u32;
        loop {
            let x = f32::from_bits(bits);
            assert_eq!(fine_of(x), reference(x), "{x:e} ({bits:#010x})");
            checked += 1;
            match bits.checked_add(65_521) {
                Some(b) => bits = b,
                None => break,
            }
        }
        assert!(checked > 65_000);
        // Halfway cases and their neighbours, both signs.
        for k in [0i32, 1, 2, 3, 1000, -1, -2, -1001, 1 << 20] {
            for d in [-1e-3f64, 0.0, 1e-3] {
                let x = ((f64::from(k) + 0.5 + d) / 8192.0) as f32;
                assert_eq!(fine_of(x), reference(x), "{x:e}");
            }
        }
        for x in [
            0.0f32,
            -0.0,
            1.0 / 16384.0,
            -1.0 / 16384.0,
            262_143.99,
            262_144.0,
            -262_144.0,
        ] {
            assert_eq!(fine_of(x), reference(x), "{x:e}");
        }
        assert_eq!(fine_of(f32::NAN), None);
        assert_eq!(fine_of(f32::INFINITY), None);
        assert_eq!(fine_of(f32::NEG_INFINITY), None);
    }

    #[test]
    fn a_fixed_margin_off_the_grid_is_the_nearest_step() {
        // 0.3 dB is not a multiple of 1/8192 dB: bounds rounded inward
        // would cross (2458 > 2457 steps); the margin is the nearest step,
        // whatever happens.
        let mut cfg = ControllerConfig::sub_ghz_node();
        cfg.margin_min_db = Db(0.3);
        cfg.margin_max_db = Db(0.3);
        let mut c = match Controller::<32>::new(cfg) {
            Ok(c) => c,
            Err(e) => panic!("{e}"),
        };
        for i in 0..200u64 {
            let d = if i % 3 == 0 {
                c.update(&Observation::Lost { t_ms: i })
            } else {
                c.update(&Observation::Feedback {
                    t_ms: i,
                    tx: c.tx(),
                    rssi: Dbm(c.tx().0 - 100.0),
                    noise: Dbm(-110.0),
                    snr: None,
                })
            };
            assert!((d.margin().0 - 0.3).abs() <= 0.5 / 8192.0, "{d:?}");
        }
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
