//! The checks behind headroom's fuzz targets, one function per target.
//!
//! [`checks`] needs only the engine; `tests/tests/fuzz_regressions.rs`
//! compiles the same file so that every kept corpus file and crash input is
//! run again by `cargo test` on stable.
//!
//! [`cli`] drives the host's CSV log reader and link-file parser. `host-cli`
//! is a binary crate, so its source files are compiled here as they are
//! (`#[path]` modules below) until it offers a library target; the code
//! under test is the same.

#![allow(dead_code, unused_imports)]

pub mod checks;
pub mod cli;

#[path = "../../host-cli/src/atomic.rs"]
mod atomic;
#[path = "../../host-cli/src/error.rs"]
mod error;
#[path = "../../host-cli/src/link.rs"]
mod link;
#[path = "../../host-cli/src/logio/mod.rs"]
mod logio;
#[path = "../../host-cli/src/quantity.rs"]
mod quantity;
