//! Free-space loss, power flux density and antenna apertures.
//!
//! All of these follow from spreading a radiated power over a sphere:
//! free-space basic transmission loss `L = 20·log10(4πd/λ)` (ITU-R P.525-4,
//! eq. (4) with isotropic antennas; equation number from memory), power flux density `S = EIRP / (4πd²)`,
//! and the effective aperture of an antenna `A_e = G·λ² / (4π)`.
//!
//! To keep the f32 error small the logarithms are split: `20·log10(d) +
//! 20·log10(f) + 20·log10(4π/c)`, with the constant computed once in f64.

use crate::error::{non_negative, positive, solved, within, Result};
use crate::units::{Db, Dbi, Dbw, Hertz, Metres, Watts};

/// `20·log10(4π/c)` in dB, c = 299 792 458 m/s (computed in f64).
pub(crate) const FSPL_CONSTANT_DB: f32 = -147.552_22;
/// `10·log10(4π/c²)` in dB: the constant of `G = η·4πA·f²/c²`.
const APERTURE_CONSTANT_DB: f32 = -158.544_32;
/// `10·log10(4π)` in dB.
const FOUR_PI_DB: f32 = 10.992_099;

/// `20·log10(x)` for a validated positive `x`.
#[inline]
pub(crate) fn db20(x: f32) -> f32 {
    20.0 * libm::log10f(x)
}

/// Free-space basic transmission loss between isotropic antennas,
/// `20·log10(4πd/λ)` (ITU-R P.525-4, eq. (4)).
///
/// `f` and `d` must be finite and strictly positive. The formula holds in the
/// far field only: a distance below one wavelength (where it would give a
/// loss below about 22 dB, and a negative one below λ/4π) is refused with
/// [`crate::Error::OutOfValidity`]. The far field of an antenna of largest
/// dimension D begins at 2D²/λ (Fraunhofer distance; common practice): see
/// [`far_field_distance`].
pub fn free_space_path_loss(f: Hertz, d: Metres) -> Result<Db> {
    let f = positive("frequency_hz", f.0)?;
    let d = positive("distance_m", d.0)?;
    let lambda = crate::units::SPEED_OF_LIGHT_M_PER_S / f;
    super::distance_at_least(d, lambda)?;
    Ok(Db(solved(
        "path_loss_db",
        db20(d) + db20(f) + FSPL_CONSTANT_DB,
    )?))
}

/// Far-field (Fraunhofer) distance `2D²/λ` of an antenna whose largest
/// dimension is `aperture`, but at least one wavelength (common practice).
pub fn far_field_distance(f: Hertz, aperture: Metres) -> Result<Metres> {
    let f = positive("frequency_hz", f.0)?;
    let dim = non_negative("aperture_m", aperture.0)?;
    let lambda = crate::units::SPEED_OF_LIGHT_M_PER_S / f;
    Ok(Metres(solved(
        "far_field_m",
        (2.0 * dim * dim / lambda).max(lambda),
    )?))
}

/// Power flux density at distance `d` from a source of the given EIRP,
/// `S = EIRP / (4πd²)`.
///
/// Returns `(S in W/m², S in dB(W/m²))`. The dB value is carried in a [`Db`]
/// because the crate has no dedicated dB(W/m²) type; it is an absolute level
/// referred to 1 W/m². The linear value may underflow to 0 for very weak
/// fields; the dB value does not.
pub fn power_flux_density(eirp: Dbw, d: Metres) -> Result<(f32, Db)> {
    let p = crate::error::finite("eirp_dbw", eirp.0)?;
    let d = positive("distance_m", d.0)?;
    let s_db = solved("pfd_db_w_per_m2", p - FOUR_PI_DB - db20(d))?;
    let s_lin = solved("pfd_w_per_m2", libm::exp10f(s_db / 10.0))?;
    Ok((s_lin, Db(s_db)))
}

/// Power collected by an effective aperture `aperture_m2` (m²) in a field of
/// power flux density `pfd_w_m2` (W/m²): `P = S·A_e`.
pub fn received_power_from_pfd(pfd_w_m2: f32, aperture_m2: f32) -> Result<Watts> {
    let s = non_negative("pfd_w_per_m2", pfd_w_m2)?;
    let a = positive("aperture_m2", aperture_m2)?;
    Ok(Watts(solved("received_power_w", s * a)?))
}

/// Antenna gain from its physical area and aperture efficiency,
/// `G = η·4πA/λ²`.
///
/// `efficiency` must lie in (0, 1]; `area_m2` and `f` must be positive.
pub fn gain_from_aperture(area_m2: f32, efficiency: f32, f: Hertz) -> Result<Dbi> {
    let a = positive("area_m2", area_m2)?;
    let eta = aperture_efficiency(efficiency)?;
    let f = positive("frequency_hz", f.0)?;
    let g = 10.0 * libm::log10f(eta) + 10.0 * libm::log10f(a) + db20(f) + APERTURE_CONSTANT_DB;
    Ok(Dbi(solved("gain_dbi", g)?))
}

/// Gain of a circular dish of diameter `diameter` and aperture efficiency
/// `efficiency`: `G = η·(πD/λ)²`, [`gain_from_aperture`] with `A = πD²/4`.
/// At η = 1 this is the most any antenna of that aperture can give.
pub fn gain_from_dish(diameter: Metres, efficiency: f32, f: Hertz) -> Result<Dbi> {
    let d = positive("dish_diameter_m", diameter.0)?;
    gain_from_aperture(core::f32::consts::PI * d * d / 4.0, efficiency, f)
}

/// Physical area (m²) of an antenna of gain `g` and aperture efficiency
/// `efficiency`: `A = G·λ²/(4π·η)`. The inverse of [`gain_from_aperture`].
pub fn aperture_from_gain(g: Dbi, efficiency: f32, f: Hertz) -> Result<f32> {
    let g = crate::error::finite("gain_dbi", g.0)?;
    let eta = aperture_efficiency(efficiency)?;
    let f = positive("frequency_hz", f.0)?;
    let area_db = g - 10.0 * libm::log10f(eta) - db20(f) - APERTURE_CONSTANT_DB;
    solved("area_m2", libm::exp10f(area_db / 10.0))
}

fn aperture_efficiency(eta: f32) -> Result<f32> {
    let eta = positive("efficiency", eta)?;
    within("efficiency", eta, 0.0, 1.0)
}

#[cfg(test)]
mod dish_tests {
    use super::*;

    #[test]
    fn dish_gain_check_value() {
        // G = η(πD/λ)²: a 1.2 m dish at 11.7 GHz, η = 0.6 (λ = 25.623 mm):
        // (π·1.2/0.025623)² = 21 647, ×0.6 = 12 988 → 41.14 dBi
        // (common practice; computed here in f64 by hand).
        let g = gain_from_dish(Metres(1.2), 0.6, Hertz(11.7e9)).unwrap_or(Dbi(f32::NAN));
        assert!((g.0 - 41.136).abs() < 0.01, "{g:?}");
        assert!(gain_from_dish(Metres(0.0), 0.6, Hertz(1e9)).is_err());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn free_space_at_one_km_one_ghz() {
        // 20·log10(4π·1000·1e9/c) = 92.4478 dB (P.525-4 eq. (4), evaluated in f64).
        let l = free_space_path_loss(Hertz(1e9), Metres(1000.0)).unwrap_or(Db(0.0));
        assert!((l.0 - 92.4478).abs() < 1e-3, "{l:?}");
        assert!(free_space_path_loss(Hertz(1e9), Metres(f32::NAN)).is_err());
        assert!(free_space_path_loss(Hertz(0.0), Metres(1.0)).is_err());
    }

    #[test]
    fn aperture_round_trip() {
        let g = gain_from_aperture(1.0, 0.55, Hertz(10e9)).unwrap_or(Dbi(0.0));
        let a = aperture_from_gain(g, 0.55, Hertz(10e9)).unwrap_or(0.0);
        assert!((a - 1.0).abs() < 1e-4, "{a}");
        assert!(gain_from_aperture(1.0, 1.5, Hertz(10e9)).is_err());
        assert!(gain_from_aperture(1.0, 0.0, Hertz(10e9)).is_err());
    }

    #[test]
    fn pfd_and_received_power() {
        // 0 dBW at 1 m: 1/(4π) W/m² = -10.99 dB(W/m²).
        let (s, s_db) = power_flux_density(Dbw(0.0), Metres(1.0)).unwrap_or((0.0, Db(0.0)));
        assert!((s - 1.0 / (4.0 * core::f32::consts::PI)).abs() < 1e-6);
        assert!((s_db.0 + 10.9921).abs() < 1e-3);
        let p = received_power_from_pfd(2.0, 0.5).unwrap_or(Watts(0.0));
        assert!((p.0 - 1.0).abs() < 1e-6);
        assert!(received_power_from_pfd(-1.0, 0.5).is_err());
    }
}
