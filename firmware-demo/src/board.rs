//! What differs between the two QEMU boards. The build script sets
//! `cfg(board = ...)` from the target.

/// Name of the QEMU machine.
#[cfg(board = "microbit")]
pub const BOARD: &str = "microbit";
/// Name of the QEMU machine.
#[cfg(not(board = "microbit"))]
pub const BOARD: &str = "mps2-an386";

/// Core of the board.
#[cfg(board = "microbit")]
pub const CORE: &str = "Cortex-M0 (nRF51822, no FPU)";
/// Core of the board.
#[cfg(not(board = "microbit"))]
pub const CORE: &str = "Cortex-M4F";

/// Rate at which SysTick counts from the core clock, Hz. QEMU's mps2 boards
/// run it at 25 MHz, its microbit at 16 MHz (the nRF51's HFCLK), as measured
/// against `-icount shift=0` (1 ns per instruction).
#[cfg(board = "microbit")]
pub const SYSTICK_HZ: u32 = 16_000_000;
/// Rate at which SysTick counts from the core clock, Hz.
#[cfg(not(board = "microbit"))]
pub const SYSTICK_HZ: u32 = 25_000_000;
