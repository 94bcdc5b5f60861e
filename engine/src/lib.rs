//! # headroom engine
//!
//! A `no_std`, allocation-free link-budget and adaptive transmit-power engine.
//! Every computation is `f32` through [`libm`], every capacity is a const
//! generic, and every public function returns a `Result` instead of panicking.
//!
//! The modules follow the chain from transmitter to decision:
//!
//! | module | what lives there |
//! |---|---|
//! | [`units`] | dB, dBm, dBW, dBi, Hz, m, K, W newtypes and their conversions |
//! | [`propagation`] | free space, apertures, log-distance, two-ray, Hata, COST-231, ITU-R P.1238, rain (P.838, P.618) |
//! | [`noise`] | kTB, noise figure and temperature, Friis cascade, G/T, C/N, C/N0, Eb/N0 |
//! | [`modulation`] | BER and required Eb/N0, the Shannon bound |
//! | [`fading`] | fade margin and availability (Rayleigh, Rician, log-normal, composite), cell coverage |
//! | [`budget`] | line-item link budget and inverse solving |
//! | [`control`] | the per-packet transmit-power controller and replay semantics |
//! | [`rate`] | a radio's data rates: required SNR, airtime and noise bandwidth of each |
//! | [`energy`] | charge per packet, airtime, duty cycle, mean current and battery life |
//! | [`record`] | field-log records and their framed binary codec |
//! | [`sim`] | seeded channel simulation: drift, correlated shadowing, Rayleigh/Rician fading, bursts |
//! | [`special`] | special functions (erfc, inverse normal, Bessel I0, Marcum Q) |
//!
//! ## Features
//! - `defmt`: derives `defmt::Format` on public types so a firmware can log
//!   decisions and errors cheaply. Off by default.
//! - `serde`: derives serde traits on log records and configurations and
//!   enables the postcard frame codec in [`record`]. Off by default; a
//!   Cortex-M0 build that never writes logs can leave it off.
//! - `fast-crc`: 8 KiB of CRC tables instead of 1 KiB, several times faster
//!   log checksums; for hosts, not for small flash.
//!
//! ## Cost of floats
//! All arithmetic is `f32`. On a Cortex-M4F it runs on the FPU; on a
//! Cortex-M0/M3 (no FPU) every operation is a soft-float call, so the
//! controller keeps its per-packet work to a few dozen float operations.
//!
//! ## Units do not mix by accident
//! ```compile_fail
//! use headroom::units::Dbm;
//! let _ = Dbm(10.0) + Dbm(3.0); // adding two absolute powers is meaningless
//! ```
//! ```
//! use headroom::units::{Db, Dbm};
//! let p = Dbm(10.0) + Db(3.0);
//! assert_eq!(p, Dbm(13.0));
//! assert_eq!(Dbm(10.0) - Dbm(4.0), Db(6.0));
//! ```
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod budget;
pub mod control;
pub mod energy;
pub mod error;
pub mod fading;
pub mod modulation;
pub mod noise;
pub mod propagation;
pub mod rate;
pub mod record;
pub mod sim;
pub mod special;
pub mod units;

pub use error::Error;
