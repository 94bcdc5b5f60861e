//! ITU-R P.1238 site-general indoor path loss:
//!
//! `L_total = 20·log10(f) + N·log10(d) + Lf(n) − 28` dB,
//!
//! f in MHz, d in m (d > 1 m), N the distance power loss coefficient and
//! `Lf(n)` the floor penetration loss factor for n floors between the
//! terminals (`Lf(0) = 0`).
//!
//! The published coefficients are in [`indoor_coefficients`]: ITU-R
//! P.1238-7 (02/2012) Table 2 (N) and Table 3 (Lf), **from memory** (the
//! rows below are those recalled with confidence; rows added in later
//! editions, e.g. 2.4 GHz and 5.8 GHz, are not included). The frequency
//! range of the method, 300 MHz–100 GHz, is that of P.1238-8.

use crate::error::{finite, positive, within, Error, Result};
use crate::units::{Db, Hertz, Metres};

/// Building types of P.1238 Tables 2 and 3.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum IndoorEnvironment {
    /// Residential buildings (houses and flats).
    Residential,
    /// Office buildings.
    Office,
    /// Commercial buildings (shops, halls).
    Commercial,
}

/// Floor penetration loss factor `Lf(n)` for `n ≥ 1` floors.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum FloorLoss {
    /// No value published: only paths on the same floor (n = 0).
    SameFloorOnly,
    /// `Lf(n) = first + per_extra_floor·(n − 1)`, any n ≥ 1.
    Linear {
        /// Loss through one floor, dB.
        first: Db,
        /// Loss added by each further floor, dB.
        per_extra_floor: Db,
    },
    /// Values listed for n = 1..=`count` floors (`count` ≤ 3); more floors
    /// are refused.
    Listed {
        /// Loss through 1, 2 and 3 floors; entries past `count` are unused.
        losses: [Db; 3],
        /// How many entries of `losses` are published.
        count: u8,
    },
}

/// Coefficients of the P.1238 site-general model.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct IndoorCoefficients {
    /// Distance power loss coefficient N (P.1238 Table 2), > 0.
    pub distance_power_coefficient_n: f32,
    /// Floor penetration loss factor (P.1238 Table 3).
    pub floor_loss: FloorLoss,
}

impl FloorLoss {
    /// `Lf(n)` in dB, or an error when `n` floors are not covered.
    pub fn loss(&self, floors: u8) -> Result<Db> {
        if floors == 0 {
            return Ok(Db(0.0));
        }
        match *self {
            FloorLoss::SameFloorOnly => Err(Error::OutOfValidity {
                param: "floors",
                value: f32::from(floors),
                min: 0.0,
                max: 0.0,
            }),
            FloorLoss::Linear {
                first,
                per_extra_floor,
            } => {
                let a = finite("floor_loss_db", first.0)?;
                let b = finite("floor_loss_per_extra_floor_db", per_extra_floor.0)?;
                Ok(Db(a + b * f32::from(floors - 1)))
            }
            FloorLoss::Listed { losses, count } => {
                let max = count.min(3);
                if floors > max {
                    return Err(Error::OutOfValidity {
                        param: "floors",
                        value: f32::from(floors),
                        min: 0.0,
                        max: f32::from(max),
                    });
                }
                match losses.get(usize::from(floors - 1)) {
                    Some(l) => Ok(Db(finite("floor_loss_db", l.0)?)),
                    None => Err(Error::Unsupported("floors")),
                }
            }
        }
    }
}

/// Frequency range of the method, Hz (P.1238-8 scope).
const F_MIN_HZ: f32 = 300e6;
const F_MAX_HZ: f32 = 100e9;

/// P.1238 site-general indoor loss at frequency `f` and distance `d` (> 1 m)
/// through `floors` floors.
pub fn itu_indoor(f: Hertz, d: Metres, floors: u8, coeffs: &IndoorCoefficients) -> Result<Db> {
    let (base, n) = indoor_terms(f, floors, coeffs)?;
    let d = positive("distance_m", d.0)?;
    within("distance_m", d, 1.0, f32::INFINITY)?;
    Ok(Db(crate::error::solved(
        "path_loss_db",
        base + n * libm::log10f(d),
    )?))
}

/// `(20·log10 f + Lf(n) − 28, N)` after validation.
fn indoor_terms(f: Hertz, floors: u8, coeffs: &IndoorCoefficients) -> Result<(f32, f32)> {
    let f = positive("frequency_hz", f.0)?;
    within("frequency_hz", f, F_MIN_HZ, F_MAX_HZ)?;
    let n = positive(
        "distance_power_coefficient_n",
        coeffs.distance_power_coefficient_n,
    )?;
    let lf = coeffs.floor_loss.loss(floors)?;
    Ok((20.0 * libm::log10f(f / 1e6) + lf.0 - 28.0, n))
}

/// Distance (≥ 1 m) at which the indoor loss equals `max_loss`.
pub(crate) fn indoor_range(
    f: Hertz,
    floors: u8,
    coeffs: &IndoorCoefficients,
    max_loss: Db,
) -> Result<Metres> {
    let (base, n) = indoor_terms(f, floors, coeffs)?;
    let l = finite("max_loss_db", max_loss.0)?;
    let d = crate::error::solved("range_m", libm::exp10f((l - base) / n))?;
    super::distance_at_least(d, 1.0)?;
    Ok(Metres(d))
}

/// One row of P.1238-7 Tables 2 and 3 (from memory): accepted frequency
/// bracket (Hz), then N and Lf per environment (residential, office,
/// commercial). `None`: no value published.
struct Row {
    f_min: f32,
    f_max: f32,
    n: [Option<f32>; 3],
    lf: [FloorLoss; 3],
}

const NONE_LF: FloorLoss = FloorLoss::SameFloorOnly;

/// The nominal bands of the table (900 MHz, 1.2–1.3 GHz, 1.8–2 GHz, 4 GHz,
/// 5.2 GHz, 60 GHz) are widened to the brackets below so that nearby
/// allocations (e.g. 868 MHz for the 900 MHz row) find a row; the brackets are
/// this crate's choice, not published.
const ROWS: [Row; 6] = [
    // 900 MHz: office N 33, commercial N 20; office Lf 9/19/24 dB for 1/2/3 floors.
    Row {
        f_min: 800e6,
        f_max: 1000e6,
        n: [None, Some(33.0), Some(20.0)],
        lf: [
            NONE_LF,
            FloorLoss::Listed {
                losses: [Db(9.0), Db(19.0), Db(24.0)],
                count: 3,
            },
            NONE_LF,
        ],
    },
    // 1.2–1.3 GHz: office N 32, commercial N 22; no floor values.
    Row {
        f_min: 1.15e9,
        f_max: 1.35e9,
        n: [None, Some(32.0), Some(22.0)],
        lf: [NONE_LF; 3],
    },
    // 1.8–2 GHz: residential N 28, office 30, commercial 22;
    // Lf residential 4n, office 15 + 4(n−1), commercial 6 + 3(n−1).
    Row {
        f_min: 1.7e9,
        f_max: 2.1e9,
        n: [Some(28.0), Some(30.0), Some(22.0)],
        lf: [
            FloorLoss::Linear {
                first: Db(4.0),
                per_extra_floor: Db(4.0),
            },
            FloorLoss::Linear {
                first: Db(15.0),
                per_extra_floor: Db(4.0),
            },
            FloorLoss::Linear {
                first: Db(6.0),
                per_extra_floor: Db(3.0),
            },
        ],
    },
    // 4 GHz: office N 28, commercial N 22; no floor values.
    Row {
        f_min: 3.8e9,
        f_max: 4.2e9,
        n: [None, Some(28.0), Some(22.0)],
        lf: [NONE_LF; 3],
    },
    // 5.2 GHz: office N 31; office Lf 16 dB for one floor.
    Row {
        f_min: 5.0e9,
        f_max: 5.4e9,
        n: [None, Some(31.0), None],
        lf: [
            NONE_LF,
            FloorLoss::Listed {
                losses: [Db(16.0), Db(0.0), Db(0.0)],
                count: 1,
            },
            NONE_LF,
        ],
    },
    // 60 GHz: office N 22, commercial N 17; floors not applicable.
    Row {
        f_min: 57e9,
        f_max: 64e9,
        n: [None, Some(22.0), Some(17.0)],
        lf: [NONE_LF; 3],
    },
];

/// Published coefficients for `environment` at `f`, from ITU-R P.1238-7
/// Tables 2 and 3 (from memory; see the module docs for the rows).
///
/// A frequency outside every row's bracket is [`Error::OutOfValidity`] with
/// the bracket of the nearest row; a building type without a published
/// coefficient at that frequency is [`Error::Unsupported`].
pub fn indoor_coefficients(f: Hertz, environment: IndoorEnvironment) -> Result<IndoorCoefficients> {
    let f = positive("frequency_hz", f.0)?;
    let col = match environment {
        IndoorEnvironment::Residential => 0,
        IndoorEnvironment::Office => 1,
        IndoorEnvironment::Commercial => 2,
    };
    let mut nearest: Option<(&Row, f32)> = None;
    for row in ROWS.iter() {
        if f >= row.f_min && f <= row.f_max {
            let n = row.n.get(col).copied().flatten();
            let lf = row.lf.get(col).copied();
            return match (n, lf) {
                (Some(n), Some(lf)) => Ok(IndoorCoefficients {
                    distance_power_coefficient_n: n,
                    floor_loss: lf,
                }),
                _ => Err(Error::Unsupported("indoor_environment")),
            };
        }
        let gap = if f < row.f_min {
            row.f_min / f
        } else {
            f / row.f_max
        };
        if nearest.is_none_or(|(_, g)| gap < g) {
            nearest = Some((row, gap));
        }
    }
    match nearest {
        Some((row, _)) => Err(Error::OutOfValidity {
            param: "frequency_hz",
            value: f,
            min: row.f_min,
            max: row.f_max,
        }),
        None => Err(Error::Unsupported("frequency_hz")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn office_at_1900_mhz() {
        let c = indoor_coefficients(Hertz(1.9e9), IndoorEnvironment::Office);
        let c = c.unwrap_or(IndoorCoefficients {
            distance_power_coefficient_n: 0.0,
            floor_loss: NONE_LF,
        });
        // 20log10(1900) + 30·log10(20) + (15 + 4) − 28 = 65.575 + 39.031 + 19 − 28.
        let l = itu_indoor(Hertz(1.9e9), Metres(20.0), 2, &c).unwrap_or(Db(0.0));
        assert!((l.0 - 95.606).abs() < 1e-2, "{l:?}");
        assert!(itu_indoor(Hertz(1.9e9), Metres(0.5), 0, &c).is_err());
    }

    #[test]
    fn refusals() {
        assert!(matches!(
            indoor_coefficients(Hertz(2.4e9), IndoorEnvironment::Office),
            Err(Error::OutOfValidity { .. })
        ));
        assert_eq!(
            indoor_coefficients(Hertz(900e6), IndoorEnvironment::Residential),
            Err(Error::Unsupported("indoor_environment"))
        );
        let c = indoor_coefficients(Hertz(5.2e9), IndoorEnvironment::Office);
        assert!(c.is_ok_and(|c| itu_indoor(Hertz(5.2e9), Metres(10.0), 2, &c).is_err()));
    }
}
