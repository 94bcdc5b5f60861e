//! SysTick as a free-running clock: delays through embedded-hal's
//! [`DelayNs`], and instruction counts under QEMU.
//!
//! The counter runs from the core clock, counts down through 24 bits and
//! wraps; differences are taken modulo 2^24, so one measured span must be
//! shorter than 2^24 ticks (0.67 s at 25 MHz, 1.05 s at 16 MHz).
//!
//! Under `qemu-system-arm -icount shift=0` every instruction advances the
//! virtual clock by exactly 1 ns, so a span of SysTick ticks is a
//! deterministic instruction count: `ticks × 10^9 / SYSTICK_HZ` (40
//! instructions per tick on mps2-an386, 62.5 on the microbit). These are
//! instructions, not cycles: QEMU does not model pipeline timing.

use cortex_m::peripheral::{syst::SystClkSource, SYST};
use embedded_hal::delay::DelayNs;

use crate::board::SYSTICK_HZ;

const MASK: u32 = 0x00ff_ffff;

/// The SysTick counter, free running over its full 24-bit range.
pub struct Clock {
    _syst: SYST,
}

impl Clock {
    /// Take SysTick and start it from the core clock.
    pub fn new(mut syst: SYST) -> Self {
        syst.disable_interrupt();
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(MASK);
        syst.clear_current();
        syst.enable_counter();
        // The first tick loads the reload value; wait for it so that the
        // first reading is already on the running count.
        while SYST::get_current() == 0 {}
        Clock { _syst: syst }
    }

    /// The current count (it counts down).
    #[inline(always)]
    pub fn now(&self) -> u32 {
        SYST::get_current()
    }

    /// Ticks from `earlier` to now (modulo 2^24).
    #[inline(always)]
    pub fn ticks_since(&self, earlier: u32) -> u32 {
        earlier.wrapping_sub(self.now()) & MASK
    }
}

/// Ticks between two readings, `earlier` first (modulo 2^24).
#[inline(always)]
pub fn ticks_between(earlier: u32, later: u32) -> u32 {
    earlier.wrapping_sub(later) & MASK
}

/// Instructions, times 1000, that `ticks` SysTick ticks stand for under
/// `-icount shift=0` (one instruction per ns of virtual time).
pub fn ticks_to_milli_instructions(ticks: u64) -> u64 {
    ticks.saturating_mul(1_000_000_000_000) / u64::from(SYSTICK_HZ)
}

/// A busy-wait delay on the SysTick count.
pub struct Delay<'a> {
    clock: &'a Clock,
}

impl<'a> Delay<'a> {
    /// A delay that reads `clock`.
    pub fn new(clock: &'a Clock) -> Self {
        Delay { clock }
    }

    fn wait_ticks(&mut self, mut ticks: u64) {
        // Wait in chunks well inside the 24-bit range.
        const CHUNK: u64 = 1 << 22;
        while ticks > 0 {
            let step = ticks.min(CHUNK) as u32;
            let start = self.clock.now();
            while self.clock.ticks_since(start) < step {}
            ticks -= u64::from(step);
        }
    }
}

impl DelayNs for Delay<'_> {
    fn delay_ns(&mut self, ns: u32) {
        // Round up: a delay never ends early.
        let ticks = (u64::from(ns) * u64::from(SYSTICK_HZ)).div_ceil(1_000_000_000);
        self.wait_ticks(ticks);
    }

    fn delay_us(&mut self, us: u32) {
        let ticks = (u64::from(us) * u64::from(SYSTICK_HZ)).div_ceil(1_000_000);
        self.wait_ticks(ticks);
    }

    fn delay_ms(&mut self, ms: u32) {
        let ticks = (u64::from(ms) * u64::from(SYSTICK_HZ)).div_ceil(1_000);
        self.wait_ticks(ticks);
    }
}
