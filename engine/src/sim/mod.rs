//! Seeded, deterministic channel simulation.
//!
//! A [`Channel`] turns a transmit power into what the far end sees, packet by
//! packet: a median path loss along a distance that drifts, log-normal
//! shadowing correlated in distance (Gudmundson), Rayleigh or Rician fast
//! fading, a jittering noise floor with interference bursts, feedback
//! dropouts and scheduled path-loss steps. It is `no_std`, allocation-free
//! and uses only `f32` through [`libm`] and an integer generator ([`Pcg32`]),
//! so the same seed gives the same numbers on a host and on a Cortex-M: the
//! firmware demo uses it as its radio, the tests drive the controller with
//! it, and `headroom synth` writes field logs from it.
//!
//! [`FaultInjector`] damages a stream of [`LogRecord`](crate::record::LogRecord)s
//! the way real logs go wrong (stuck or saturated readings, wrong units,
//! NaN, time stamps that repeat or go back), to test what consumes them.
//! [`Synth`] puts a channel, a [`PowerPattern`] and faults together and
//! yields the records of a synthetic field log.
//!
//! ```
//! use headroom::propagation::PathLossModel;
//! use headroom::sim::{Channel, ChannelConfig, FastFading, NoiseFloor, Steps, Trajectory};
//! use headroom::units::{Db, Dbi, Dbm, Hertz, Metres};
//! # fn main() -> Result<(), headroom::Error> {
//! let cfg = ChannelConfig {
//!     frequency: Hertz(868.0e6),
//!     path_loss: PathLossModel::LogDistance { d0: Metres(1.0), pl_d0: None, exponent: 3.0 },
//!     tx_antenna_gain: Dbi(2.0),
//!     rx_antenna_gain: Dbi(5.0),
//!     trajectory: Trajectory { start: Metres(800.0), speed_m_per_s: 0.0, min: None, max: None },
//!     packet_interval_ms: 60_000,
//!     start_ms: 0,
//!     shadowing: None,
//!     fading: FastFading::Rayleigh,
//!     fading_correlation: 0.0,
//!     noise: NoiseFloor { mean: Dbm(-117.0), jitter: Db(0.5), bursts: None, burst_rise: Db(0.0) },
//!     min_snr: Some(Db(-15.0)),
//!     feedback_dropouts: None,
//!     report_resolution: Some(Db(1.0)),
//!     steps: Steps::new(),
//! };
//! let mut ch = Channel::new(cfg.clone(), 42)?;
//! let a = ch.packet(Dbm(14.0))?;
//! let mut again = Channel::new(cfg, 42)?;
//! assert_eq!(again.packet(Dbm(14.0))?, a); // same seed, same packet
//! assert_eq!(a.record().tx_dbm, Some(14.0));
//! # Ok(()) }
//! ```

mod channel;
mod fault;
mod rng;
mod synth;

pub use channel::{
    Channel, ChannelConfig, ChannelSample, Episodes, FastFading, NoiseFloor, PathLossStep,
    Shadowing, Steps, Trajectory, MAX_STEPS,
};
pub use fault::{Fault, FaultInjector, FaultKind, Field, MAX_FAULTS};
pub use rng::{Normal, Pcg32};
pub use synth::{Levels, PowerPattern, RateSchedule, Synth, MAX_LEVELS};
