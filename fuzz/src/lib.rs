//! The checks behind headroom's fuzz targets, one function per target.
//!
//! [`checks`] needs only the engine; `tests/tests/fuzz_regressions.rs`
//! compiles the same file so that every kept corpus file and crash input is
//! run again by `cargo test` on stable.
//!
//! [`cli`] drives the host's CSV log reader and link-file parser through
//! the `headroom_cli` library (the same code the `headroom` binary runs).

#![allow(dead_code, unused_imports)]

pub mod checks;
pub mod cli;

pub use headroom_cli::{atomic, error, link, logio, quantity};
