//! The per-packet transmit-power controller and the replay semantics.
//!
//! Before each packet a battery-powered node picks the lowest transmit power
//! that keeps the probability of losing the packet at a target, from what it
//! has observed. [`Controller`] does that in O(1) per packet in a fixed-size
//! state; [`Replay`] runs it over a field log to show what it would have
//! chosen and lost.
//!
//! ```
//! use headroom::control::{Controller, ControllerConfig, Observation};
//! use headroom::units::Dbm;
//!
//! let mut c = Controller::<32>::new(ControllerConfig::sub_ghz_node())?;
//! let sent = c.tx();
//! let d = c.update(&Observation::Feedback {
//!     t_ms: 0, tx: sent, rssi: Dbm(-95.0), noise: Dbm(-117.0), snr: None,
//! });
//! assert!(d.tx.0 <= 14.0); // never above min(max_tx, EIRP cap − antenna gain)
//! println!("next packet at {} dBm because {}", d.tx.0, d.reason.as_str());
//! # Ok::<(), headroom::control::ConfigError>(())
//! ```

pub mod baseline;
mod config;
mod controller;
mod fixed;
mod price;
mod rates;
mod reason;
mod replay;
pub mod settings;

pub use config::{
    ConfigError, ControllerConfig, DutyLimit, EirpCap, LevelTable, PowerSteps, MAX_LEVELS,
    MAX_WINDOW, MIN_UNIFORM_STEP_DB, SETTING_LIMIT_DB,
};
pub use controller::{Controller, Decision, Mode, Observation};
pub use reason::Reason;
pub use replay::{
    CheckedRecord, Fleet, LoggedTotals, Outcome, RateTotals, Replay, ReplayStep, Summary,
    REPLAY_WINDOW,
};
