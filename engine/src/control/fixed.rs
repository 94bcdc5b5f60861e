//! The controller's fixed-point scales, in one place: each scale with its
//! type and bits, and each conversion with its rounding in its name or doc.
//!
//! | quantity | type | unit | where |
//! |---|---|---|---|
//! | readings in the window (`q`) | `i16` | 1/32 dB ([`Q_PER_DB`]) | the ring of loss-to-noise readings, plausibility bounds |
//! | levels, estimates, filters (`fine`) | `i32` | 1/8192 dB (2⁻¹³ dB, [`FINE_PER_DB_BITS`]) | power levels, predictions, noise floor, required SNR |
//! | adaptive margin | `i64` | 2⁻⁴⁰ dB ([`MARGIN_BITS`]) | the outer loop's margin |
//! | margin rise per loss | `i32` | 2⁻²⁴ dB ([`MARGIN_UP_BITS`]) | the setting `margin_step_db` |
//! | spread factor `Q⁻¹(p)·√(π/2)` | `u32` | 2⁻¹⁶ ([`SIGMA_FACTOR_BITS`]) | the spread term |
//! | level tables | `i16` | 1/100 or 1/64 dB | `steps = { table = [...] }` |
//!
//! Conversions from `f32` round half away from zero unless their name says
//! `ceil` or `floor`; conversions into a narrower integer saturate.

pub(crate) use super::config::MARGIN_BITS;
use super::config::MARGIN_STEPS_PER_DB;

/// Steps of the stored readings per dB (readings are kept as `i16` in 1/32 dB).
pub(crate) const Q_PER_DB: f32 = 32.0;

/// Extra fractional bits of the filters and prediction errors beyond the
/// readings' 1/32 dB: they run in 1/8192 dB.
pub(crate) const FINE_BITS: u32 = 8;

/// Fractional bits of the fine steps per dB (1/8192 dB = 2⁻¹³ dB).
pub(crate) const FINE_PER_DB_BITS: u32 = FINE_BITS + 5;

/// Fine steps per dB.
pub(crate) const FINE_PER_DB: f32 = (1u32 << FINE_PER_DB_BITS) as f32;

/// dB per step of the filters (1/8192 dB).
pub(crate) const DB_PER_FINE: f32 = 1.0 / (Q_PER_DB * (1u32 << FINE_BITS) as f32);

/// Fractional bits of the factor `Q⁻¹(p)·√(π/2)` applied to the mean
/// absolute error.
pub(crate) const SIGMA_FACTOR_BITS: u32 = 16;

/// A dB value in 1/8192 dB, rounded half away from zero, or `None` if it is
/// not finite; beyond ±2¹⁸ dB the value saturates at ±(2³¹ − 1).
///
/// Computed from the bits of the `f32` (sign, exponent, significand), so it
/// is exact (no double rounding), identical on every target, and costs a few
/// integer instructions on a core without an FPU, where a float multiply,
/// add and conversion are library calls. It also is the finiteness check.
#[allow(clippy::cast_possible_wrap)]
#[inline(always)]
pub(crate) fn fine_of(x: f32) -> Option<i32> {
    let bits = x.to_bits();
    let exp = (bits >> 23) & 0xff;
    if exp == 0xff {
        return None;
    }
    // |x| = sig · 2^(e − 150) for a normal number, so |x|·2¹³ =
    // sig · 2^(e − 137). Below e = 113 (subnormals included) |x|·2¹³ is
    // under ½ and rounds to 0.
    let sig = (bits & 0x007f_ffff) | 0x0080_0000;
    // `down − 1` for a right shift by `down` in 1..=24 (the common case:
    // readings of a few to a few hundred dB).
    let d1 = 136u32.wrapping_sub(exp);
    let mag = if d1 <= 23 {
        // (sig + 2^(down−1)) >> down, as ((sig >> (down−1)) + 1) >> 1.
        ((sig >> d1) + 1) >> 1
    } else if exp >= 137 {
        // sig < 2²⁴: up to 7 left shifts stay below 2³¹.
        let up = exp - 137;
        if up > 7 {
            i32::MAX as u32
        } else {
            sig << up
        }
    } else {
        0
    };
    // Negate when the sign bit is set: (mag ^ s) − s with s = 0 or −1.
    let s = (bits as i32) >> 31;
    Some((mag as i32 ^ s).wrapping_sub(s))
}

/// A dB value in 1/8192 dB, rounded half away from zero (NaN gives 0).
pub(crate) fn to_fine(x: f32) -> i32 {
    fine_of(x).unwrap_or(0)
}

/// A dB value in 1/8192 dB as `f32` (exact below 2²⁴ steps, 2048 dB).
#[allow(clippy::cast_precision_loss)]
pub(crate) fn from_fine(x: i32) -> f32 {
    x as f32 * DB_PER_FINE
}

/// A reading in 1/8192 dB stored in the window's 1/32 dB steps, rounded
/// (half up); saturating, although the plausibility checks keep readings
/// well inside ±1024 dB.
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn fine_to_q(x: i32) -> i16 {
    let q = x.saturating_add(1 << (FINE_BITS - 1)) >> FINE_BITS;
    if q > i32::from(i16::MAX) {
        i16::MAX
    } else if q < i32::from(i16::MIN) {
        i16::MIN
    } else {
        q as i16
    }
}

/// A dB value in the margin's 2⁻⁴⁰ dB (validated settings are within
/// ±300 dB: no saturation of the `i64`).
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn to_margin(x: f32) -> i64 {
    (x * MARGIN_STEPS_PER_DB) as i64
}

/// Fractional bits of the margin's rise per loss (`margin_step_db`).
pub(crate) const MARGIN_UP_BITS: u32 = 24;

/// `margin_step_db` in 2⁻²⁴ dB (validated: at most 20 dB).
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn to_margin_up(x: f32) -> i32 {
    libm::roundf(x * (1u32 << MARGIN_UP_BITS) as f32) as i32
}

/// A dB value in 1/8192 dB rounded up / down (settings within ±300 dB).
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn fine_ceil(x: f32) -> i32 {
    libm::ceilf(x * FINE_PER_DB) as i32
}

#[allow(clippy::cast_possible_truncation)]
pub(crate) fn fine_floor(x: f32) -> i32 {
    libm::floorf(x * FINE_PER_DB) as i32
}

/// A setting in 1/32 dB, rounded (settings within ±300 dB).
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn to_q(x: f32) -> i16 {
    libm::roundf(x * Q_PER_DB) as i16
}

/// A value in 1/32 dB in 1/8192 dB.
pub(crate) fn q_fine(x: i16) -> i32 {
    i32::from(x) << FINE_BITS
}

/// A margin bound in 1/8192 dB in the margin's 2⁻⁴⁰ dB steps.
pub(crate) fn margin_steps(x: i32) -> i64 {
    i64::from(x) << (MARGIN_BITS - FINE_PER_DB_BITS)
}

/// The margin in 1/8192 dB (rounded toward −∞).
#[allow(clippy::cast_possible_truncation)] // ±300 dB is ±2²² steps
pub(crate) fn margin_fine(m: i64) -> i32 {
    (m >> (MARGIN_BITS - FINE_PER_DB_BITS)) as i32
}

/// A non-negative value in 1/8192 dB as `f32`.
#[allow(clippy::cast_precision_loss)]
pub(crate) fn from_fine_u32(x: u32) -> f32 {
    x as f32 * DB_PER_FINE
}

/// The factor `Q⁻¹(p)·√(π/2)` in 2⁻¹⁶ (at most 6 for `p ≥ 10⁻⁶`).
#[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
pub(crate) fn to_sigma_factor(x: f32) -> u32 {
    libm::roundf(x * (1u32 << SIGMA_FACTOR_BITS) as f32) as u32
}

/// A table level in 1/`per_db` dB (validated: a multiple of it within
/// ±300 dB).
#[allow(clippy::cast_possible_truncation)]
pub(crate) fn to_table_units(x: f32, per_db: u8) -> i16 {
    libm::roundf(x * f32::from(per_db)) as i16
}
