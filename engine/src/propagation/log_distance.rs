//! Log-distance path loss: `L(d) = L(d0) + 10·n·log10(d/d0)` for `d ≥ d0`.
//!
//! The reference loss `L(d0)` is either measured (given by the caller) or
//! the free-space loss at `d0` (ITU-R P.525-4, eq. (4)). The exponent `n` is
//! 2 in free space and typically 2.7–5 in cluttered sites (common practice).

use crate::error::{finite, positive, within, Result};

/// Plausible path-loss exponents: 1.5 (guided propagation in corridors and
/// street canyons) to 6 (obstructed paths inside buildings). Common practice:
/// published measurement campaigns fall in this span (from memory).
pub const EXPONENT_RANGE: (f32, f32) = (1.5, 6.0);
use crate::units::{Db, Hertz, Metres};

use super::free_space::free_space_path_loss;

/// Loss at `d0`: the given one, or free space.
pub(crate) fn reference_loss(f: Hertz, d0: Metres, pl_d0: Option<Db>) -> Result<Db> {
    positive("frequency_hz", f.0)?;
    positive("reference_distance_m", d0.0)?;
    match pl_d0 {
        Some(l) => Ok(Db(finite("reference_loss_db", l.0)?)),
        None => free_space_path_loss(f, d0),
    }
}

/// Log-distance path loss at `d` (m) with reference distance `d0`, reference
/// loss `pl_d0` (`None`: free space at `d0`) and path-loss exponent
/// `exponent` in [`EXPONENT_RANGE`] (outside it the formula is refused:
/// an exponent of 30 is a typing slip, not a channel).
///
/// The model describes the loss beyond its reference distance: `d < d0`
/// is refused with [`crate::Error::OutOfValidity`].
pub fn log_distance(
    f: Hertz,
    d: Metres,
    d0: Metres,
    pl_d0: Option<Db>,
    exponent: f32,
) -> Result<Db> {
    let n = within(
        "exponent",
        finite("exponent", exponent)?,
        EXPONENT_RANGE.0,
        EXPONENT_RANGE.1,
    )?;
    let l0 = reference_loss(f, d0, pl_d0)?;
    let d = positive("distance_m", d.0)?;
    super::distance_at_least(d, d0.0)?;
    let l = l0.0 + 10.0 * n * (libm::log10f(d) - libm::log10f(d0.0));
    Ok(Db(crate::error::solved("path_loss_db", l)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decade_adds_ten_n() {
        let a = log_distance(Hertz(868e6), Metres(10.0), Metres(1.0), Some(Db(40.0)), 3.0);
        assert_eq!(a.map(|l| (l.0 * 1e3).round() / 1e3), Ok(70.0));
        assert!(log_distance(Hertz(868e6), Metres(0.5), Metres(1.0), None, 3.0).is_err());
        assert!(log_distance(Hertz(868e6), Metres(5.0), Metres(1.0), None, 0.0).is_err());
        assert!(log_distance(Hertz(868e6), Metres(5.0), Metres(1.0), None, 30.0).is_err());
        assert!(log_distance(Hertz(868e6), Metres(5.0), Metres(1.0), None, 1.4).is_err());
        assert!(log_distance(Hertz(868e6), Metres(5.0), Metres(1.0), None, 6.0).is_ok());
    }
}
