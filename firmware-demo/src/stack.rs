//! Peak stack use, measured by painting: fill the free RAM below the stack
//! with a pattern at start-up, and later find the lowest word that was
//! overwritten. Deterministic for a given run; it misses only a region the
//! program wrote with exactly the pattern.

use core::ptr::{addr_of, read_volatile, write_volatile};

const PAINT: u32 = 0x5afe_c0de;

/// Bytes left unpainted just below the stack pointer at the time of
/// [`paint`] (the frames of `paint` itself and its caller).
const GUARD: usize = 64;

extern "C" {
    // From cortex-m-rt's link.x: end of the static RAM (start of the heap
    // area, unused here) and the initial stack pointer (end of RAM).
    static __sheap: u32;
    static _stack_start: u32;
}

fn bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken, never their values.
    (addr_of!(__sheap) as usize, addr_of!(_stack_start) as usize)
}

/// Paint the free RAM between the static data and the current stack.
/// Call once, first thing in `main`.
pub fn paint() {
    let (bottom, _) = bounds();
    let sp = cortex_m::register::msp::read() as usize;
    let top = sp.saturating_sub(GUARD) & !3;
    let mut p = (bottom + 3) & !3;
    while p < top {
        // SAFETY: [bottom, sp - GUARD) is RAM that nothing uses yet: above
        // the statics, below every live stack frame.
        unsafe { write_volatile(p as *mut u32, PAINT) };
        p += 4;
    }
}

/// Peak stack use so far, bytes (from the top of RAM down to the lowest
/// word no longer holding the paint).
pub fn peak() -> usize {
    let (bottom, top) = bounds();
    let mut p = (bottom + 3) & !3;
    while p < top {
        // SAFETY: p is inside RAM, word aligned.
        if unsafe { read_volatile(p as *const u32) } != PAINT {
            break;
        }
        p += 4;
    }
    top - p
}

/// Bytes of RAM between the static data and the top of RAM (the most the
/// stack may use).
pub fn available() -> usize {
    let (bottom, top) = bounds();
    top - bottom
}
