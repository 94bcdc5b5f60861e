//! The headroom engine on Cortex-M under QEMU.
//!
//! Shared by the binaries in `src/bin/`:
//! - `live`: a packet loop over a simulated radio, the engine's controller
//!   choosing the power, every decision logged with defmt;
//! - `replay`: reads a binary field log from the host, replays it through the
//!   engine's replay semantics and writes the decisions back as frames;
//! - `cost`: instructions per controller update, measured with SysTick
//!   under `qemu -icount shift=0`;
//! - `panic_free`: links only if the controller update, the energy arithmetic and the frame
//!   encoder have no panic path left (feature `panic-free-check`).
//!
//! The firmware only feeds data to the engine and reports what it says; the
//! controller, replay rules, simulator and codec all live in `headroom`.
#![no_std]

pub mod board;
pub mod clock;
pub mod host;
pub mod radio;
pub mod scenario;
pub mod stack;

/// Print `n` in decimal through `out` without `core::fmt` (keeps the panic
/// handler and the small binaries small).
pub fn write_u32(mut n: u32, out: &mut dyn FnMut(&str)) {
    let mut digits = [0u8; 10];
    let mut i = digits.len();
    loop {
        i -= 1;
        if let Some(d) = digits.get_mut(i) {
            *d = b'0' + (n % 10) as u8;
        }
        n /= 10;
        if n == 0 || i == 0 {
            break;
        }
    }
    if let Some(Ok(s)) = digits.get(i..).map(core::str::from_utf8) {
        out(s);
    }
}

#[cfg(all(target_os = "none", not(feature = "panic-free-check")))]
#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    // Location only: formatting the message would pull in core::fmt.
    host::eprint("firmware panicked");
    if let Some(loc) = info.location() {
        host::eprint(" at ");
        host::eprint(loc.file());
        host::eprint(":");
        write_u32(loc.line(), &mut |s| host::eprint(s));
    }
    host::eprint("\n");
    host::exit(false)
}

#[cfg(all(target_os = "none", feature = "panic-free-check"))]
#[panic_handler]
fn panic(_info: &core::panic::PanicInfo) -> ! {
    extern "C" {
        // Defined nowhere, on purpose: if any panic path is still reachable
        // after optimisation, the link fails with this name in the error.
        fn headroom_error_a_panic_path_survived_optimisation() -> !;
    }
    // SAFETY: never runs; the binary does not link if this is reachable.
    unsafe { headroom_error_a_panic_path_survived_optimisation() }
}

/// Test input for the panic-freedom binaries: any `f32` bit pattern (NaN,
/// infinities and subnormals included), hidden from the optimiser.
#[inline(never)]
pub fn probe_f32(k: u32, lane: u32) -> f32 {
    let bits = k
        .wrapping_mul(0x9e37_79b9)
        .wrapping_add(lane.wrapping_mul(0x85eb_ca6b));
    // Mostly plausible levels around −100 dBm, every 8th one raw bits.
    if k % 8 == lane % 8 {
        f32::from_bits(core::hint::black_box(bits))
    } else {
        core::hint::black_box(-150.0 + (bits >> 16) as f32 * (170.0 / 65536.0))
    }
}
