//! The simulated channel: configuration, per-packet state and samples.

use heapless::Vec;

use crate::error::{finite, non_negative, positive, within, Error, Result};
use crate::rate::RateTable;
use crate::record::LogRecord;
use crate::units::{Db, Dbi, Dbm, Hertz, Metres};

use super::rng::{Normal, Pcg32};
use crate::propagation::PathLossModel;

/// Most scheduled path-loss steps a [`ChannelConfig`] holds.
pub const MAX_STEPS: usize = 16;

/// The scheduled path-loss steps of a [`ChannelConfig`] (a fixed-capacity
/// vector: `Steps::new()`, `push` hands the step back when full).
pub type Steps = Vec<PathLossStep, MAX_STEPS>;

/// Stream numbers of the independent PCG32 generators: each random process
/// has its own, so switching one process on or off leaves the numbers of
/// the others unchanged.
const STREAM_SHADOWING: u64 = 1;
const STREAM_FADING: u64 = 2;
const STREAM_NOISE: u64 = 3;
const STREAM_BURSTS: u64 = 4;
const STREAM_DROPOUTS: u64 = 5;

/// Lowest fading power gain kept, 1e-12 (−120 dB), so that a deep fade is a
/// very small number and never `-inf` in dB.
const MIN_FADING_POWER: f32 = 1.0e-12;

/// How the distance between the two ends changes with time.
///
/// The distance moves at `speed_m_per_s` (positive = away from the far end)
/// and is reflected at `min_distance` and `max_distance`, so a long run stays
/// inside the range, going back and forth.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct Trajectory {
    /// Distance at the first packet.
    pub start: Metres,
    /// Radial speed, m/s; positive moves away. 0 for a static node.
    #[cfg_attr(feature = "serde", serde(default))]
    pub speed_m_per_s: f32,
    /// Closest distance; the motion turns back here. Defaults to `start`.
    #[cfg_attr(feature = "serde", serde(default))]
    pub min: Option<Metres>,
    /// Farthest distance; the motion turns back here. Defaults to `start`.
    #[cfg_attr(feature = "serde", serde(default))]
    pub max: Option<Metres>,
}

/// Log-normal shadowing, correlated in distance after Gudmundson
/// (M. Gudmundson, "Correlation model for shadow fading in mobile radio
/// systems", Electronics Letters 27(23), 1991): the shadowing in dB is a
/// first-order autoregressive (Gauss-Markov) process whose correlation
/// between two points `Δd` apart is `exp(−Δd / decorrelation_distance)`.
///
/// A static node never decorrelates in distance; `time_constant_s` adds an
/// optional slow change in time (foliage, people, parked vehicles), with
/// correlation `exp(−Δt / time_constant_s)` per packet. The two factors
/// multiply.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct Shadowing {
    /// Standard deviation of the shadowing, dB (0 switches it off).
    pub sigma: Db,
    /// Distance over which the correlation falls to 1/e.
    pub decorrelation_distance: Metres,
    /// Time over which the correlation falls to 1/e for a node that does not
    /// move, seconds; `None` for no change in time.
    #[cfg_attr(feature = "serde", serde(default))]
    pub time_constant_s: Option<f32>,
}

/// Small-scale (fast) fading of the packet's received power.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(rename_all = "snake_case", deny_unknown_fields)
)]
pub enum FastFading {
    /// No fast fading: the gain is 0 dB.
    None,
    /// Rayleigh: a zero-mean complex Gaussian gain, mean power 1 (0 dB).
    Rayleigh,
    /// Rician: a fixed line-of-sight part plus a scattered complex Gaussian
    /// part, power ratio `k_db` between them, mean power 1 (0 dB).
    Rician {
        /// Rician K factor (line of sight over scattered power), dB.
        k_db: f32,
    },
}

/// Episodes that start at random and last a random time: the start is a
/// Poisson process of `rate_per_hour` while no episode runs, the duration is
/// exponential with mean `mean_duration_s`. Per packet interval `Δt` this
/// is a two-state Markov chain with start probability `1 − exp(−rate·Δt)`
/// and end probability `1 − exp(−Δt / mean_duration)`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct Episodes {
    /// Mean number of episode starts per hour of episode-free time.
    pub rate_per_hour: f32,
    /// Mean duration of one episode, seconds.
    pub mean_duration_s: f32,
}

/// Noise floor at the receiver.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct NoiseFloor {
    /// Mean noise floor outside bursts.
    pub mean: Dbm,
    /// Standard deviation of the packet-to-packet jitter, dB (independent
    /// normal draws).
    #[cfg_attr(feature = "serde", serde(default))]
    pub jitter: Db,
    /// Interference bursts that raise the floor, if any.
    #[cfg_attr(feature = "serde", serde(default))]
    pub bursts: Option<Episodes>,
    /// Rise of the floor during a burst.
    #[cfg_attr(feature = "serde", serde(default))]
    pub burst_rise: Db,
}

/// A change of path loss from packet `at_packet` (counted from 0) onward:
/// a door shut (+dB) or opened (−dB), a vehicle parked in the path.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct PathLossStep {
    /// Index of the first packet with the new loss.
    pub at_packet: u64,
    /// Change of path loss, dB (positive = more loss).
    pub change: Db,
}

/// Everything that defines a simulated link. With feature `serde` it reads
/// from TOML; all quantities are plain numbers in the unit the field names
/// (Hz, m, dB, dBm, dBi, s, ms).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct ChannelConfig {
    /// Carrier frequency.
    pub frequency: Hertz,
    /// Median path loss against distance.
    pub path_loss: PathLossModel,
    /// Gain of the transmitting antenna.
    #[cfg_attr(feature = "serde", serde(default))]
    pub tx_antenna_gain: Dbi,
    /// Gain of the receiving antenna.
    #[cfg_attr(feature = "serde", serde(default))]
    pub rx_antenna_gain: Dbi,
    /// Distance against time.
    pub trajectory: Trajectory,
    /// Time between packets, ms (at least 1).
    pub packet_interval_ms: u32,
    /// Time stamp of the first packet, ms.
    #[cfg_attr(feature = "serde", serde(default))]
    pub start_ms: u64,
    /// Log-normal shadowing, if any.
    #[cfg_attr(feature = "serde", serde(default))]
    pub shadowing: Option<Shadowing>,
    /// Fast fading.
    pub fading: FastFading,
    /// Correlation of the scattered fading component between consecutive
    /// packets, in `[0, 1)`: 0 draws every packet independently; above 0
    /// the scattered part is a complex first-order autoregressive process
    /// `g_k = ρ g_{k−1} + sqrt(1−ρ²) w_k`, a Gauss-Markov stand-in for the
    /// Doppler correlation of a slowly moving node (common practice). For a
    /// Clarke/Jakes spectrum, `ρ ≈ J0(2π f_D T)` with Doppler `f_D` and
    /// packet interval `T`.
    #[cfg_attr(feature = "serde", serde(default))]
    pub fading_correlation: f32,
    /// Noise floor.
    pub noise: NoiseFloor,
    /// SNR below which the far end does not receive the packet (so reports
    /// nothing); `None` receives every packet.
    #[cfg_attr(feature = "serde", serde(default))]
    pub min_snr: Option<Db>,
    /// Episodes during which the report of a received packet does not come
    /// back (acknowledgement lost).
    #[cfg_attr(feature = "serde", serde(default))]
    pub feedback_dropouts: Option<Episodes>,
    /// Step of the reported RSSI and noise readings, dB (1 for a radio that
    /// reports whole dBm); `None` reports them unrounded.
    #[cfg_attr(feature = "serde", serde(default))]
    pub report_resolution: Option<Db>,
    /// Scheduled path-loss steps, at most [`MAX_STEPS`].
    #[cfg_attr(feature = "serde", serde(default))]
    pub steps: Steps,
}

#[cfg(feature = "defmt")]
impl defmt::Format for ChannelConfig {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "ChannelConfig {{ frequency: {}, path_loss: {}, trajectory: {}, interval_ms: {}, \
             shadowing: {}, fading: {}, noise: {}, steps: {} }}",
            self.frequency,
            self.path_loss,
            self.trajectory,
            self.packet_interval_ms,
            self.shadowing,
            self.fading,
            self.noise,
            self.steps.as_slice()
        );
    }
}

/// One simulated packet: the truth behind it and what the far end reports.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct ChannelSample {
    /// Packet index, from 0.
    pub index: u64,
    /// Time stamp, ms.
    pub t_ms: u64,
    /// Transmit power of the packet (at the transmitter's antenna port).
    pub tx: Dbm,
    /// Distance between the ends at this packet.
    pub distance: Metres,
    /// Median path loss of the model at this distance.
    pub model_loss: Db,
    /// Sum of the scheduled steps in force.
    pub step_loss: Db,
    /// Shadowing loss at this packet (positive = more loss).
    pub shadowing: Db,
    /// Large-scale loss between the antennas: model + steps + shadowing.
    pub true_path_loss: Db,
    /// Fast-fading power gain of this packet (negative in a fade).
    pub fading: Db,
    /// True received power: tx + antenna gains − true path loss + fading.
    pub rssi: Dbm,
    /// True noise floor at the receiver for this packet.
    pub noise: Dbm,
    /// `rssi − noise`.
    pub snr: Db,
    /// A noise burst is in progress.
    pub in_noise_burst: bool,
    /// The far end received the packet (SNR at least `min_snr`).
    pub received: bool,
    /// The packet was received but its report did not come back.
    pub feedback_lost: bool,
    /// RSSI as the far end reports it (rounded to the report resolution),
    /// `None` when there is no report.
    pub reported_rssi: Option<Dbm>,
    /// Noise floor as reported, `None` when there is no report.
    pub reported_noise: Option<Dbm>,
}

impl ChannelSample {
    /// The packet as a device would log it: its time and power, and the
    /// report when one came back.
    pub fn record(&self) -> LogRecord {
        LogRecord {
            t_ms: self.t_ms,
            tx_dbm: Some(self.tx.0),
            rssi_dbm: self.reported_rssi.map(|p| p.0),
            noise_dbm: self.reported_noise.map(|p| p.0),
            rate: None,
        }
    }

    /// The packet as a device would log it when sent at rate `rate` of
    /// `table`: the record of [`ChannelSample::record`] with its `rate`, and
    /// the reported noise floor measured in that rate's noise bandwidth
    /// (the channel's noise floor is rate 0's: `+ 10·log10(B_rate / B_0)`,
    /// nothing without bandwidths). `None` when `rate` is not in the table.
    pub fn record_at_rate(&self, table: &RateTable, rate: u8) -> Option<LogRecord> {
        let shift = table.noise_change_db(rate, 0)?;
        let mut r = self.record();
        r.rate = Some(rate);
        r.noise_dbm = r.noise_dbm.map(|n| n + shift.0);
        Some(r)
    }
}

/// Per-packet probabilities of a two-state episode chain.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Chain {
    p_start: f32,
    p_end: f32,
    on: bool,
}

impl Chain {
    fn new(name: &'static str, e: Option<Episodes>, dt_s: f32) -> Result<Option<Chain>> {
        let Some(e) = e else { return Ok(None) };
        let rate = non_negative(name, e.rate_per_hour)? / 3600.0;
        let dur = positive(name, e.mean_duration_s)?;
        Ok(Some(Chain {
            p_start: -libm::expm1f(-rate * dt_s),
            p_end: -libm::expm1f(-dt_s / dur),
            on: false,
        }))
    }

    fn advance(&mut self, rng: &mut Pcg32) -> bool {
        let u = rng.uniform();
        self.on = if self.on {
            u >= self.p_end
        } else {
            u < self.p_start
        };
        self.on
    }

    /// Long-run fraction of packets inside an episode: the stationary
    /// probability `p_start / (p_start + p_end)` of the two-state chain.
    fn duty(&self) -> f32 {
        let s = self.p_start + self.p_end;
        if s > 0.0 {
            self.p_start / s
        } else {
            0.0
        }
    }
}

/// A seeded simulated channel. The same configuration and seed give the
/// same samples, bit for bit, on every target.
#[derive(Debug, Clone, PartialEq)]
pub struct Channel {
    cfg: ChannelConfig,
    index: u64,
    dt_s: f32,
    distance: f32,
    phase: f32,
    speed: f32,
    d_min: f32,
    d_max: f32,
    shadow_z: f32,
    shadow_sigma: f32,
    shadow_dcorr: f32,
    shadow_time_rho: f32,
    los: f32,
    scatter_scale: f32,
    fading_rho: f32,
    scatter: (f32, f32),
    bursts: Option<Chain>,
    dropouts: Option<Chain>,
    rng_shadowing: Normal,
    rng_fading: Normal,
    rng_noise: Normal,
    rng_bursts: Pcg32,
    rng_dropouts: Pcg32,
}

#[cfg(feature = "defmt")]
impl defmt::Format for Channel {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "Channel {{ packet: {}, distance_m: {} }}",
            self.index,
            self.distance
        );
    }
}

impl Channel {
    /// Check `cfg` and start a channel whose random processes are seeded
    /// from `seed`.
    ///
    /// The path-loss model is evaluated at both ends of the trajectory here,
    /// so a model whose validity range (in distance) does not cover the whole
    /// trajectory is refused now rather than at some later packet.
    pub fn new(cfg: ChannelConfig, seed: u64) -> Result<Self> {
        positive("frequency", cfg.frequency.0)?;
        finite("tx_antenna_gain", cfg.tx_antenna_gain.0)?;
        finite("rx_antenna_gain", cfg.rx_antenna_gain.0)?;
        if cfg.packet_interval_ms == 0 {
            return Err(Error::NotPositive("packet_interval_ms"));
        }
        let dt_s = cfg.packet_interval_ms as f32 / 1000.0;

        let t = cfg.trajectory;
        let start = positive("trajectory.start", t.start.0)?;
        let speed = finite("trajectory.speed_m_per_s", t.speed_m_per_s)?;
        let d_min = positive("trajectory.min", t.min.unwrap_or(t.start).0)?;
        let d_max = positive("trajectory.max", t.max.unwrap_or(t.start).0)?;
        within("trajectory.start", start, d_min, d_max)?;
        cfg.path_loss.path_loss(cfg.frequency, Metres(d_min))?;
        cfg.path_loss.path_loss(cfg.frequency, Metres(d_max))?;

        let (shadow_sigma, shadow_dcorr, shadow_time_rho) = match cfg.shadowing {
            None => (0.0, 1.0, 1.0),
            Some(s) => {
                let sigma = within("shadowing.sigma", s.sigma.0, 0.0, 30.0)?;
                let dcorr = positive(
                    "shadowing.decorrelation_distance",
                    s.decorrelation_distance.0,
                )?;
                let rho_t = match s.time_constant_s {
                    None => 1.0,
                    Some(tau) => libm::expf(-dt_s / positive("shadowing.time_constant_s", tau)?),
                };
                (sigma, dcorr, rho_t)
            }
        };

        let (los, scatter_scale) = match cfg.fading {
            FastFading::None => (1.0, 0.0),
            FastFading::Rayleigh => (0.0, 1.0),
            FastFading::Rician { k_db } => {
                let k = Db(within("fading.k_db", k_db, -30.0, 40.0)?).to_ratio();
                (libm::sqrtf(k / (k + 1.0)), libm::sqrtf(1.0 / (k + 1.0)))
            }
        };
        let fading_rho = finite("fading_correlation", cfg.fading_correlation)?;
        if !(0.0..1.0).contains(&fading_rho) {
            return Err(Error::OutOfValidity {
                param: "fading_correlation",
                value: fading_rho,
                min: 0.0,
                max: 1.0,
            });
        }

        finite("noise.mean", cfg.noise.mean.0)?;
        within("noise.jitter", cfg.noise.jitter.0, 0.0, 20.0)?;
        finite("noise.burst_rise", cfg.noise.burst_rise.0)?;
        let bursts = Chain::new("noise.bursts", cfg.noise.bursts, dt_s)?;
        let dropouts = Chain::new("feedback_dropouts", cfg.feedback_dropouts, dt_s)?;
        if let Some(m) = cfg.min_snr {
            finite("min_snr", m.0)?;
        }
        if let Some(r) = cfg.report_resolution {
            positive("report_resolution", r.0)?;
        }
        for s in &cfg.steps {
            finite("steps.change", s.change.0)?;
        }

        Ok(Channel {
            index: 0,
            dt_s,
            distance: start,
            phase: if speed >= 0.0 {
                start - d_min
            } else {
                2.0 * (d_max - d_min) - (start - d_min)
            },
            speed,
            d_min,
            d_max,
            shadow_z: 0.0,
            shadow_sigma,
            shadow_dcorr,
            shadow_time_rho,
            los,
            scatter_scale,
            fading_rho,
            scatter: (0.0, 0.0),
            bursts,
            dropouts,
            rng_shadowing: Normal::new(seed, STREAM_SHADOWING),
            rng_fading: Normal::new(seed, STREAM_FADING),
            rng_noise: Normal::new(seed, STREAM_NOISE),
            rng_bursts: Pcg32::new(seed, STREAM_BURSTS),
            rng_dropouts: Pcg32::new(seed, STREAM_DROPOUTS),
            cfg,
        })
    }

    /// The configuration this channel runs.
    pub fn config(&self) -> &ChannelConfig {
        &self.cfg
    }

    /// Index of the next packet.
    pub fn next_index(&self) -> u64 {
        self.index
    }

    /// Long-run fraction of packets inside a noise burst (0 without bursts).
    pub fn noise_burst_duty(&self) -> f32 {
        self.bursts.map_or(0.0, |c| c.duty())
    }

    /// Long-run fraction of packets inside a feedback dropout (0 without).
    pub fn dropout_duty(&self) -> f32 {
        self.dropouts.map_or(0.0, |c| c.duty())
    }

    /// Move the node by one packet interval, reflecting at the ends of the
    /// range; returns the distance travelled.
    ///
    /// The motion is tracked as a phase on a loop of length `2·span`: the
    /// first half goes outwards, the second half comes back.
    fn travel(&mut self) -> f32 {
        let span = self.d_max - self.d_min;
        let step = libm::fabsf(self.speed * self.dt_s);
        if span <= 0.0 || step == 0.0 {
            return 0.0;
        }
        let period = 2.0 * span;
        let y = self.phase + step;
        self.phase = (y - period * libm::floorf(y / period)).clamp(0.0, period);
        let offset = if self.phase <= span {
            self.phase
        } else {
            period - self.phase
        };
        self.distance = (self.d_min + offset).clamp(self.d_min, self.d_max);
        step
    }

    /// Simulate the next packet sent at `tx`.
    pub fn packet(&mut self, tx: Dbm) -> Result<ChannelSample> {
        finite("tx", tx.0)?;
        let k = self.index;
        let first = k == 0;
        let travelled = if first { 0.0 } else { self.travel() };

        // Shadowing: AR(1) in distance (Gudmundson 1991) times AR(1) in time.
        let z = self.rng_shadowing.sample();
        self.shadow_z = if first {
            z
        } else {
            let rho = libm::expf(-travelled / self.shadow_dcorr) * self.shadow_time_rho;
            rho * self.shadow_z + libm::sqrtf(1.0 - rho * rho) * z
        };
        let shadowing = self.shadow_sigma * self.shadow_z;

        // Fast fading: h = los + scale·g, g complex Gaussian of unit power.
        let (a, b) = self.rng_fading.pair();
        let w = (
            a * core::f32::consts::FRAC_1_SQRT_2,
            b * core::f32::consts::FRAC_1_SQRT_2,
        );
        self.scatter = if first || self.fading_rho == 0.0 {
            w
        } else {
            let r = self.fading_rho;
            let c = libm::sqrtf(1.0 - r * r);
            (r * self.scatter.0 + c * w.0, r * self.scatter.1 + c * w.1)
        };
        let re = self.los + self.scatter_scale * self.scatter.0;
        let im = self.scatter_scale * self.scatter.1;
        let fading_power = (re * re + im * im).max(MIN_FADING_POWER);
        let fading = Db(10.0 * libm::log10f(fading_power));

        let model_loss = self
            .cfg
            .path_loss
            .path_loss(self.cfg.frequency, Metres(self.distance))?;
        let step_loss = Db(self
            .cfg
            .steps
            .iter()
            .filter(|s| s.at_packet <= k)
            .map(|s| s.change.0)
            .sum());
        let true_path_loss = model_loss + step_loss + Db(shadowing);
        let rssi =
            tx + self.cfg.tx_antenna_gain + self.cfg.rx_antenna_gain - true_path_loss + fading;

        let jitter = self.rng_noise.sample() * self.cfg.noise.jitter.0;
        let in_noise_burst = match self.bursts.as_mut() {
            Some(c) => c.advance(&mut self.rng_bursts),
            None => false,
        };
        let rise = if in_noise_burst {
            self.cfg.noise.burst_rise.0
        } else {
            0.0
        };
        let noise = Dbm(self.cfg.noise.mean.0 + jitter + rise);
        let snr = rssi - noise;
        let received = match self.cfg.min_snr {
            Some(m) => snr.0 >= m.0,
            None => true,
        };
        let dropout = match self.dropouts.as_mut() {
            Some(c) => c.advance(&mut self.rng_dropouts),
            None => false,
        };
        let feedback_lost = received && dropout;
        let report = received && !feedback_lost;
        let round = |p: Dbm| match self.cfg.report_resolution {
            Some(r) => Dbm(libm::roundf(p.0 / r.0) * r.0),
            None => p,
        };

        let interval = u64::from(self.cfg.packet_interval_ms);
        let t_ms = self.cfg.start_ms.saturating_add(k.saturating_mul(interval));
        self.index = k.saturating_add(1);
        let sample = ChannelSample {
            index: k,
            t_ms,
            tx,
            distance: Metres(self.distance),
            model_loss,
            step_loss,
            shadowing: Db(shadowing),
            true_path_loss,
            fading,
            rssi,
            noise,
            snr,
            in_noise_burst,
            received,
            feedback_lost,
            reported_rssi: if report { Some(round(rssi)) } else { None },
            reported_noise: if report { Some(round(noise)) } else { None },
        };
        if !(sample.rssi.is_finite() && sample.noise.is_finite()) {
            return Err(Error::NoSolution("channel sample"));
        }
        Ok(sample)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cfg() -> ChannelConfig {
        ChannelConfig {
            frequency: Hertz(915.0e6),
            path_loss: PathLossModel::LogDistance {
                d0: Metres(1.0),
                pl_d0: Some(Db(40.0)),
                exponent: 2.0,
            },
            tx_antenna_gain: Dbi(0.0),
            rx_antenna_gain: Dbi(0.0),
            trajectory: Trajectory {
                start: Metres(100.0),
                speed_m_per_s: 0.0,
                min: None,
                max: None,
            },
            packet_interval_ms: 1000,
            start_ms: 5000,
            shadowing: None,
            fading: FastFading::None,
            fading_correlation: 0.0,
            noise: NoiseFloor {
                mean: Dbm(-100.0),
                jitter: Db(0.0),
                bursts: None,
                burst_rise: Db(0.0),
            },
            min_snr: None,
            feedback_dropouts: None,
            report_resolution: None,
            steps: Steps::new(),
        }
    }

    #[test]
    fn quiet_channel_is_the_link_budget() -> Result<()> {
        // 40 dB at 1 m, n = 2: 80 dB at 100 m; 10 dBm in, −70 dBm out.
        let mut ch = Channel::new(cfg(), 1)?;
        let s = ch.packet(Dbm(10.0))?;
        assert_eq!(s.t_ms, 5000);
        assert!((s.rssi.0 + 70.0).abs() < 1e-4);
        assert!((s.snr.0 - 30.0).abs() < 1e-4);
        assert_eq!(ch.packet(Dbm(10.0))?.t_ms, 6000);
        Ok(())
    }

    #[test]
    fn reflection_keeps_the_distance_in_range() -> Result<()> {
        let c = ChannelConfig {
            trajectory: Trajectory {
                start: Metres(100.0),
                speed_m_per_s: 30.0,
                min: Some(Metres(50.0)),
                max: Some(Metres(120.0)),
            },
            ..cfg()
        };
        let mut ch = Channel::new(c, 1)?;
        let d: [f32; 5] = [0; 5].map(|_| ch.packet(Dbm(0.0)).map_or(f32::NAN, |s| s.distance.0));
        // 100 → 120 (turn, 10 m back) 110 → 80 → 50 (turn) → 80.
        for (got, want) in d.iter().zip([100.0, 110.0, 80.0, 50.0, 80.0]) {
            assert!((got - want).abs() < 1e-3, "{d:?}");
        }
        Ok(())
    }

    #[test]
    fn episode_chain_duty_is_its_stationary_probability() -> Result<()> {
        let c = Chain::new(
            "x",
            Some(Episodes {
                rate_per_hour: 36.0,
                mean_duration_s: 10.0,
            }),
            1.0,
        )?;
        let c = c.ok_or(Error::NoSolution("chain"))?;
        // p_start = 1 − e^−0.01, p_end = 1 − e^−0.1.
        let ps = 1.0 - libm::expf(-0.01);
        let pe = 1.0 - libm::expf(-0.1);
        assert!((c.duty() - ps / (ps + pe)).abs() < 1e-5);
        Ok(())
    }
}
