//! The headroom engine behind a C ABI: `libheadroom_c.a` and `headroom.h`.
//!
//! A thin layer: every formula, every rule and every setting's check lives
//! in the engine (crate `headroom`); this crate converts C structs to the
//! engine's types and back, and turns the engine's error values into
//! [`headroom_status`] codes. Nothing here allocates: every state a C caller
//! keeps (settings, controller, replay, encoder, decoder) lives in memory the
//! caller provides, of a size and alignment the header states
//! (`HEADROOM_CONTROLLER_SIZE`, `HEADROOM_STATE_ALIGN`, ...). The sizes of
//! the settings, the controller and the replay leave room beyond today's
//! engine types (a compile-time assertion beside each checks that the type
//! fits), so that settings the engine adds later change neither the ABI nor
//! this crate.
//!
//! What it covers, module by module:
//! - [`settings`]: settings by their keys (`"required_snr_db"`, ...), resolved
//!   and validated by the engine's `control::settings::resolve`, so that a
//!   setting the engine adds is reachable here without a new line;
//! - [`controller`]: the per-packet transmit-power controller;
//! - [`replay`]: the replay of a field log, record by record, and the
//!   summary's linear sums;
//! - [`codec`]: the framed binary log encoder and the streaming decoder;
//! - [`energy`]: path loss, link margin, airtime, charge per packet, mean
//!   current and battery life;
//! - [`rates`]: a rate table as a setting, and the controller and the replay
//!   with an energy profile (the joint choice of rate and power).
//!
//! Unsafe code is confined to the FFI boundary: dereferencing the caller's
//! pointers, each after a null check, with a `SAFETY` comment on every block.
//!
//! On bare-metal targets the crate is `no_std` and its panic handler never
//! runs: the engine is panic-free. With the feature `panic-free-check` the
//! handler refers to a symbol defined nowhere, so a program linked against
//! the library proves at link time that no panic path survived.
#![cfg_attr(target_os = "none", no_std)]
#![warn(missing_docs)]
// The C names of the types are the Rust names.
#![allow(non_camel_case_types)]

pub mod codec;
pub mod controller;
pub mod energy;
pub mod rates;
pub mod replay;
pub mod settings;
mod state;
mod status;
mod text;

pub use status::{headroom_status, headroom_status_message};
pub use text::{headroom_outcome_name, headroom_reason_name};

/// Alignment, in bytes, of every caller-allocated state of the library
/// (`headroom_settings`, `headroom_controller`, `headroom_replay`,
/// `headroom_encoder`, `headroom_decoder`).
pub const HEADROOM_STATE_ALIGN: usize = 8;

/// Window, in readings, of the controller and the replay behind this
/// library: the engine's `control::REPLAY_WINDOW`, the value `headroom
/// replay` and the firmware use, so that they all agree bit for bit.
pub const HEADROOM_WINDOW: usize = 32;

const _: () = assert!(HEADROOM_WINDOW == headroom::control::REPLAY_WINDOW);

/// The engine's controller and replay at the library's window.
type WindowController = headroom::control::Controller<HEADROOM_WINDOW>;
type WindowReplay = headroom::control::Replay<HEADROOM_WINDOW>;

#[cfg(all(target_os = "none", not(feature = "panic-free-check")))]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    // Never reached: the engine and this layer are panic-free (checked at
    // link time by `cargo xtask c-demo` with the feature below).
    loop {
        core::hint::spin_loop();
    }
}

#[cfg(all(target_os = "none", feature = "panic-free-check"))]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    extern "C" {
        /// Defined nowhere: linking fails if any call to the panic handler
        /// survived optimisation.
        fn headroom_error_a_panic_path_survived_optimisation() -> !;
    }
    // SAFETY: the symbol does not exist; a program that still calls this
    // handler does not link, so this call never runs.
    unsafe { headroom_error_a_panic_path_survived_optimisation() }
}
