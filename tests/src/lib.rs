//! An independent `f64` reference implementation of every formula of the
//! headroom engine, written from the published methods, sharing no code with
//! the engine. The integration tests in `tests/` compare the two.
#![forbid(unsafe_code)]

pub mod budget;
pub mod energy;
pub mod propagation;
pub mod signal;
