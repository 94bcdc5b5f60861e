//! Propagation: path loss models, apertures and rain attenuation.
//!
//! | model | function | source | validity |
//! |---|---|---|---|
//! | free space | [`free_space_path_loss`] | ITU-R P.525-4 eq. (4) | f, d > 0 (far field) |
//! | flux density, apertures | [`power_flux_density`], [`gain_from_aperture`] | `S = EIRP/4πd²`, `G = η4πA/λ²` | positive inputs |
//! | log-distance | [`log_distance`] | `L(d0) + 10n·log10(d/d0)` | d ≥ d0 |
//! | two-ray | [`two_ray`] | direct + ground-reflected ray, flat ground | heights > 0 |
//! | Okumura-Hata | [`okumura_hata`] | Hata 1980 | 150–1500 MHz, 1–20 km, hb 30–200 m, hm 1–10 m |
//! | COST 231-Hata | [`cost231_hata`] | COST 231 final report (1999) ch. 4 | 1500–2000 MHz, 1–20 km, hb 30–200 m, hm 1–10 m |
//! | indoor | [`itu_indoor`] | ITU-R P.1238-7 site-general model, Tables 2–3 (from memory) | 300 MHz–100 GHz, d > 1 m |
//! | rain, specific | [`rain_specific_attenuation`] | ITU-R P.838-3 | 1–1000 GHz |
//! | rain, slant path | [`rain_attenuation_exceeded`] | ITU-R P.618-13 §2.2.1.1 | 1–55 GHz, 0.001–5 % |
//!
//! Out-of-range inputs are [`crate::Error::OutOfValidity`]; the Hata models
//! accept a named [`Extrapolation`] instead. [`PathLossModel`] gathers the
//! distance-dependent models for the link budget and the range solver.

mod free_space;
mod hata;
mod indoor;
mod log_distance;
mod rain;
mod two_ray;

pub use free_space::{
    aperture_from_gain, far_field_distance, free_space_path_loss, gain_from_aperture,
    gain_from_dish, power_flux_density, received_power_from_pfd,
};
pub use hata::{cost231_hata, okumura_hata, Extrapolation, HataEnvironment};
pub use indoor::{
    indoor_coefficients, itu_indoor, FloorLoss, IndoorCoefficients, IndoorEnvironment,
};
pub use log_distance::{log_distance, EXPONENT_RANGE};
pub use rain::{
    rain_attenuation_exceeded, rain_coefficients, rain_specific_attenuation, Polarisation,
    SlantPath,
};
pub use two_ray::{two_ray, two_ray_crossover, TwoRayForm};

use crate::error::{finite, solved, Error, Result};
use crate::units::{Db, Hertz, Metres};

/// `d` when it is at least `min` (the model's shortest valid distance),
/// else [`Error::OutOfValidity`] naming `distance_m`.
pub(crate) fn distance_at_least(d: f32, min: f32) -> Result<f32> {
    if d < min {
        Err(Error::OutOfValidity {
            param: "distance_m",
            value: d,
            min,
            max: f32::INFINITY,
        })
    } else {
        Ok(d)
    }
}

/// A distance-dependent path-loss model with its fixed parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum PathLossModel {
    /// Free space, [`free_space_path_loss`].
    FreeSpace,
    /// Log-distance, [`log_distance`].
    LogDistance {
        /// Reference distance d0.
        d0: Metres,
        /// Loss at d0; `None`: free space at d0.
        pl_d0: Option<Db>,
        /// Path-loss exponent n.
        exponent: f32,
    },
    /// Two-ray ground reflection, [`two_ray`].
    TwoRay {
        /// Transmitter height above ground.
        ht: Metres,
        /// Receiver height above ground.
        hr: Metres,
        /// Exact or asymptotic formula.
        form: TwoRayForm,
    },
    /// Okumura-Hata, [`okumura_hata`].
    Hata {
        /// Base-station antenna height.
        ht: Metres,
        /// Mobile antenna height.
        hr: Metres,
        /// Environment class.
        env: HataEnvironment,
        /// Out-of-range policy.
        ext: Extrapolation,
    },
    /// COST 231-Hata, [`cost231_hata`].
    Cost231 {
        /// Base-station antenna height.
        ht: Metres,
        /// Mobile antenna height.
        hr: Metres,
        /// Metropolitan centre (+3 dB).
        metropolitan: bool,
        /// Out-of-range policy.
        ext: Extrapolation,
    },
    /// ITU-R P.1238 indoor, [`itu_indoor`].
    Indoor {
        /// Floors between the terminals.
        floors: u8,
        /// Model coefficients (see [`indoor_coefficients`]).
        coeffs: IndoorCoefficients,
    },
}

impl PathLossModel {
    /// Path loss at frequency `f` and distance `d`.
    pub fn path_loss(&self, f: Hertz, d: Metres) -> Result<Db> {
        match *self {
            PathLossModel::FreeSpace => free_space_path_loss(f, d),
            PathLossModel::LogDistance {
                d0,
                pl_d0,
                exponent,
            } => log_distance(f, d, d0, pl_d0, exponent),
            PathLossModel::TwoRay { ht, hr, form } => two_ray(f, d, ht, hr, form),
            PathLossModel::Hata { ht, hr, env, ext } => okumura_hata(f, d, ht, hr, env, ext),
            PathLossModel::Cost231 {
                ht,
                hr,
                metropolitan,
                ext,
            } => cost231_hata(f, d, ht, hr, metropolitan, ext),
            PathLossModel::Indoor { floors, coeffs } => itu_indoor(f, d, floors, &coeffs),
        }
    }

    /// Why an answer of [`PathLossModel::path_loss`] at `f` and `d` is only
    /// degraded, when it is: a Hata model applied beyond its published range
    /// under an [`Extrapolation`]. `None` when nothing weakens it.
    pub fn degraded(&self, f: Hertz, d: Metres) -> Option<&'static str> {
        match *self {
            PathLossModel::Hata { ext, .. } if ext != Extrapolation::Refuse => {
                hata::outside_published(false, f, d).then_some(
                    "Okumura-Hata extrapolated beyond its published range (150-1500 MHz, 1-20 km)",
                )
            }
            PathLossModel::Cost231 { ext, .. } if ext != Extrapolation::Refuse => {
                hata::outside_published(true, f, d).then_some(
                    "COST 231-Hata extrapolated beyond its published range (1500-2000 MHz, 1-20 km)",
                )
            }
            _ => None,
        }
    }

    /// Largest distance at which the loss does not exceed `max_loss` (the
    /// range solver).
    ///
    /// Every model but the exact two-ray one is monotone in distance and is
    /// inverted in closed form; the result is then checked against the
    /// model's validity range ([`Error::OutOfValidity`] naming `distance_m`
    /// when the range would fall outside it, e.g. below `d0` for
    /// log-distance, outside 1–20 km for Hata unless its [`Extrapolation`]
    /// allows more, below 1 m for indoor).
    ///
    /// The exact two-ray form returns the farthest distance meeting the loss.
    /// Beyond the last lobe peak (path difference λ/2) the loss grows
    /// monotonically for Γ ≤ 0, and the answer is found there by bisection
    /// (about 200 evaluations). When the allowed loss is below the loss at
    /// that peak, the lobe boundaries (path difference m·λ/2) are walked
    /// inwards, one evaluation each (at most 10⁵), and the farthest boundary
    /// meeting the loss brackets the answer. The boundaries stand in for the
    /// lobe extremes, which lie slightly inside them, so a loss met only in
    /// the sliver between a boundary and the true peak is missed and the next
    /// closer answer is returned. [`Error::NoSolution`] when nothing up to
    /// 10⁸ m meets the loss.
    pub fn range_for_loss(&self, f: Hertz, max_loss: Db) -> Result<Metres> {
        let lmax = finite("max_loss_db", max_loss.0)?;
        match *self {
            PathLossModel::FreeSpace => {
                let f = crate::error::positive("frequency_hz", f.0)?;
                let log_d = (lmax - free_space::FSPL_CONSTANT_DB - free_space::db20(f)) / 20.0;
                let d = solved("range_m", libm::exp10f(log_d))?;
                let lambda = crate::units::SPEED_OF_LIGHT_M_PER_S / f;
                distance_at_least(d, lambda)?;
                Ok(Metres(d))
            }
            PathLossModel::LogDistance {
                d0,
                pl_d0,
                exponent,
            } => {
                let n = crate::error::positive("exponent", exponent)?;
                let l0 = log_distance::reference_loss(f, d0, pl_d0)?;
                let d = solved("range_m", d0.0 * libm::exp10f((lmax - l0.0) / (10.0 * n)))?;
                distance_at_least(d, d0.0)?;
                Ok(Metres(d))
            }
            PathLossModel::TwoRay { ht, hr, form } => {
                two_ray::two_ray_range(f, ht, hr, form, max_loss)
            }
            PathLossModel::Hata { ht, hr, env, ext } => {
                hata::hata_range(f, ht, hr, env, ext, max_loss)
            }
            PathLossModel::Cost231 {
                ht,
                hr,
                metropolitan,
                ext,
            } => hata::cost231_range(f, ht, hr, metropolitan, ext, max_loss),
            PathLossModel::Indoor { floors, coeffs } => {
                indoor::indoor_range(f, floors, &coeffs, max_loss)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn range_inverts_each_monotone_model() {
        let f = Hertz(868e6);
        let models = [
            PathLossModel::FreeSpace,
            PathLossModel::LogDistance {
                d0: Metres(1.0),
                pl_d0: None,
                exponent: 2.8,
            },
            PathLossModel::TwoRay {
                ht: Metres(8.0),
                hr: Metres(1.5),
                form: TwoRayForm::Asymptotic,
            },
            PathLossModel::Hata {
                ht: Metres(40.0),
                hr: Metres(1.5),
                env: HataEnvironment::Suburban,
                ext: Extrapolation::Refuse,
            },
            PathLossModel::Indoor {
                floors: 1,
                coeffs: IndoorCoefficients {
                    distance_power_coefficient_n: 33.0,
                    floor_loss: FloorLoss::Listed {
                        losses: [Db(9.0), Db(19.0), Db(24.0)],
                        count: 3,
                    },
                },
            },
        ];
        for m in models {
            let d = m.range_for_loss(f, Db(125.0));
            let l = d.and_then(|d| m.path_loss(f, d));
            assert!(l.is_ok_and(|l| (l.0 - 125.0).abs() < 0.01), "{m:?}: {l:?}");
        }
    }

    #[test]
    fn range_outside_validity_is_an_error() {
        let m = PathLossModel::Hata {
            ht: Metres(40.0),
            hr: Metres(1.5),
            env: HataEnvironment::Open,
            ext: Extrapolation::Refuse,
        };
        let r = m.range_for_loss(Hertz(868e6), Db(200.0));
        assert!(
            matches!(
                r,
                Err(Error::OutOfValidity {
                    param: "distance_m",
                    ..
                })
            ),
            "{r:?}"
        );
        assert!(m.range_for_loss(Hertz(868e6), Db(f32::NAN)).is_err());
    }
}
