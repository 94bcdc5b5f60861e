//! Okumura-Hata and COST 231-Hata median path loss for macro cells.
//!
//! Hata (1980), "Empirical formula for propagation loss in land mobile radio
//! services", IEEE Trans. Veh. Technol. VT-29(3):
//!
//! `L_urban = 69.55 + 26.16·log f − 13.82·log hb − a(hm) + (44.9 − 6.55·log hb)·log d`
//!
//! with f in MHz, hb and hm in m, d in km, and the mobile-antenna correction
//! - medium/small city: `a(hm) = (1.1·log f − 0.7)·hm − (1.56·log f − 0.8)`
//! - large city: `8.29·(log 1.54hm)² − 1.1` for f ≤ 200 MHz and
//!   `3.2·(log 11.75hm)² − 4.97` for f ≥ 400 MHz. The paper leaves 200–400 MHz
//!   open; this crate switches at 300 MHz (common practice).
//!
//! Suburban: `L_urban − 2·(log(f/28))² − 5.4`; open area:
//! `L_urban − 4.78·(log f)² + 18.33·log f − 40.94`, both from the
//! medium/small city form.
//!
//! COST 231-Hata (COST Action 231 final report, 1999, ch. 4; clause number
//! from memory, §4.4):
//! `L = 46.3 + 33.9·log f − 13.82·log hb − a(hm) + (44.9 − 6.55·log hb)·log d + Cm`,
//! with the medium/small city `a(hm)`, `Cm = 0 dB` for medium cities and
//! suburban centres and `3 dB` for metropolitan centres.
//!
//! Validity (both papers): hb 30–200 m, hm 1–10 m, d 1–20 km; f 150–1500 MHz
//! (Hata), 1500–2000 MHz (COST 231). Outside those ranges the functions
//! return [`Error::OutOfValidity`] unless the caller names an
//! [`Extrapolation`].

use crate::error::{positive, solved, within, Error, Result};
use crate::units::{Db, Hertz, Metres};

/// Hata's environment classes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum HataEnvironment {
    /// Open area (farmland, no tall obstacles along the path).
    Open,
    /// Suburban area.
    Suburban,
    /// Urban, medium or small city.
    MediumCity,
    /// Urban, large city (dense tall buildings).
    LargeCity,
}

/// What to do with inputs outside a model's published validity range.
///
/// Every extrapolation applies the model's equations unchanged beyond the
/// published range, up to a hard limit chosen by this crate (not a
/// published one), stated on each variant. Antenna heights are always held
/// to the published ranges.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum Extrapolation {
    /// Refuse anything outside the published range.
    #[default]
    Refuse,
    /// Distances from the published minimum (1 km) up to 100 km.
    ExtendedDistance,
    /// Frequencies 100–3000 MHz for Hata and 1000–3000 MHz for COST 231.
    ExtendedFrequency,
    /// Both [`Extrapolation::ExtendedDistance`] and
    /// [`Extrapolation::ExtendedFrequency`].
    ExtendedDistanceAndFrequency,
}

impl Extrapolation {
    fn distance(self) -> bool {
        matches!(
            self,
            Self::ExtendedDistance | Self::ExtendedDistanceAndFrequency
        )
    }
    fn frequency(self) -> bool {
        matches!(
            self,
            Self::ExtendedFrequency | Self::ExtendedDistanceAndFrequency
        )
    }
}

/// Published distance range, m.
const D_MIN_M: f32 = 1_000.0;
const D_MAX_M: f32 = 20_000.0;
/// Extended distance limit, m (our own).
const D_MAX_EXTENDED_M: f32 = 100_000.0;
const HB_MIN_M: f32 = 30.0;
const HB_MAX_M: f32 = 200.0;
const HM_MIN_M: f32 = 1.0;
const HM_MAX_M: f32 = 10.0;

/// Which of the two models.
#[derive(Clone, Copy)]
enum Family {
    Hata(HataEnvironment),
    Cost231 { metropolitan: bool },
}

impl Family {
    /// (published, extended) frequency ranges in Hz.
    fn frequency_range(self) -> ((f32, f32), (f32, f32)) {
        match self {
            Family::Hata(_) => ((150e6, 1500e6), (100e6, 3000e6)),
            Family::Cost231 { .. } => ((1500e6, 2000e6), (1000e6, 3000e6)),
        }
    }
}

/// Whether `f` or `d` lies outside the published range of Hata
/// (`cost231 == false`) or COST 231-Hata: an answer there is an
/// extrapolation.
pub(crate) fn outside_published(cost231: bool, f: Hertz, d: Metres) -> bool {
    let family = if cost231 {
        Family::Cost231 {
            metropolitan: false,
        }
    } else {
        Family::Hata(HataEnvironment::Open)
    };
    let ((fmin, fmax), _) = family.frequency_range();
    !((fmin..=fmax).contains(&f.0) && (D_MIN_M..=D_MAX_M).contains(&d.0))
}

/// The model written as `L = a + b·log10(d_km)`.
#[derive(Clone, Copy)]
pub(crate) struct HataLine {
    a: f32,
    b: f32,
    ext: Extrapolation,
}

fn distance_limits(ext: Extrapolation) -> (f32, f32) {
    if ext.distance() {
        (D_MIN_M, D_MAX_EXTENDED_M)
    } else {
        (D_MIN_M, D_MAX_M)
    }
}

fn mobile_correction_medium(log_f: f32, hm: f32) -> f32 {
    (1.1 * log_f - 0.7) * hm - (1.56 * log_f - 0.8)
}

fn mobile_correction_large(f_mhz: f32, hm: f32) -> f32 {
    if f_mhz <= 300.0 {
        let x = libm::log10f(1.54 * hm);
        8.29 * x * x - 1.1
    } else {
        let x = libm::log10f(11.75 * hm);
        3.2 * x * x - 4.97
    }
}

fn line(family: Family, f: Hertz, ht: Metres, hr: Metres, ext: Extrapolation) -> Result<HataLine> {
    let f = positive("frequency_hz", f.0)?;
    let ((fmin, fmax), (fmin_x, fmax_x)) = family.frequency_range();
    if ext.frequency() {
        within("frequency_hz", f, fmin_x, fmax_x)?;
    } else {
        within("frequency_hz", f, fmin, fmax)?;
    }
    let hb = within(
        "tx_height_m",
        positive("tx_height_m", ht.0)?,
        HB_MIN_M,
        HB_MAX_M,
    )?;
    let hm = within(
        "rx_height_m",
        positive("rx_height_m", hr.0)?,
        HM_MIN_M,
        HM_MAX_M,
    )?;
    let f_mhz = f / 1e6;
    let log_f = libm::log10f(f_mhz);
    let log_hb = libm::log10f(hb);
    let b = 44.9 - 6.55 * log_hb;
    let a = match family {
        Family::Hata(env) => {
            let medium =
                69.55 + 26.16 * log_f - 13.82 * log_hb - mobile_correction_medium(log_f, hm);
            match env {
                HataEnvironment::MediumCity => medium,
                HataEnvironment::LargeCity => {
                    69.55 + 26.16 * log_f - 13.82 * log_hb - mobile_correction_large(f_mhz, hm)
                }
                HataEnvironment::Suburban => {
                    let x = libm::log10f(f_mhz / 28.0);
                    medium - 2.0 * x * x - 5.4
                }
                HataEnvironment::Open => medium - 4.78 * log_f * log_f + 18.33 * log_f - 40.94,
            }
        }
        Family::Cost231 { metropolitan } => {
            let cm = if metropolitan { 3.0 } else { 0.0 };
            46.3 + 33.9 * log_f - 13.82 * log_hb - mobile_correction_medium(log_f, hm) + cm
        }
    };
    Ok(HataLine { a, b, ext })
}

impl HataLine {
    fn loss(self, d: Metres) -> Result<Db> {
        let d = positive("distance_m", d.0)?;
        let (dmin, dmax) = distance_limits(self.ext);
        within("distance_m", d, dmin, dmax)?;
        let l = self.a + self.b * libm::log10f(d / 1000.0);
        Ok(Db(solved("path_loss_db", l)?))
    }

    fn range(self, max_loss: Db) -> Result<Metres> {
        let l = crate::error::finite("max_loss_db", max_loss.0)?;
        let d = 1000.0 * libm::exp10f((l - self.a) / self.b);
        let d = solved("range_m", d)?;
        let (dmin, dmax) = distance_limits(self.ext);
        if d < dmin || d > dmax {
            return Err(Error::OutOfValidity {
                param: "distance_m",
                value: d,
                min: dmin,
                max: dmax,
            });
        }
        Ok(Metres(d))
    }
}

/// Okumura-Hata median path loss (Hata 1980) at frequency `f`, distance `d`,
/// base-station height `ht` and mobile height `hr`, in environment `env`.
pub fn okumura_hata(
    f: Hertz,
    d: Metres,
    ht: Metres,
    hr: Metres,
    env: HataEnvironment,
    ext: Extrapolation,
) -> Result<Db> {
    line(Family::Hata(env), f, ht, hr, ext)?.loss(d)
}

/// COST 231-Hata median path loss; `metropolitan` adds the 3 dB correction
/// for metropolitan centres.
pub fn cost231_hata(
    f: Hertz,
    d: Metres,
    ht: Metres,
    hr: Metres,
    metropolitan: bool,
    ext: Extrapolation,
) -> Result<Db> {
    line(Family::Cost231 { metropolitan }, f, ht, hr, ext)?.loss(d)
}

/// Distance at which the Hata loss equals `max_loss` (the loss grows with
/// distance, since `44.9 − 6.55·log hb > 0` for every allowed `hb`).
pub(crate) fn hata_range(
    f: Hertz,
    ht: Metres,
    hr: Metres,
    env: HataEnvironment,
    ext: Extrapolation,
    max_loss: Db,
) -> Result<Metres> {
    line(Family::Hata(env), f, ht, hr, ext)?.range(max_loss)
}

/// Distance at which the COST 231-Hata loss equals `max_loss`.
pub(crate) fn cost231_range(
    f: Hertz,
    ht: Metres,
    hr: Metres,
    metropolitan: bool,
    ext: Extrapolation,
    max_loss: Db,
) -> Result<Metres> {
    line(Family::Cost231 { metropolitan }, f, ht, hr, ext)?.range(max_loss)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn urban_value_and_refusals() {
        // 900 MHz, 5 km, hb 50 m, hm 1.5 m, medium city: the Hata 1980
        // urban formula evaluated in f64 gives a(hm) = 0.01588 dB, L = 146.9428 dB.
        let l = okumura_hata(
            Hertz(900e6),
            Metres(5000.0),
            Metres(50.0),
            Metres(1.5),
            HataEnvironment::MediumCity,
            Extrapolation::Refuse,
        );
        assert!(l.is_ok_and(|l| (l.0 - 146.9428).abs() < 2e-3), "{l:?}");
        let far = okumura_hata(
            Hertz(900e6),
            Metres(40_000.0),
            Metres(50.0),
            Metres(1.5),
            HataEnvironment::MediumCity,
            Extrapolation::Refuse,
        );
        assert!(matches!(
            far,
            Err(Error::OutOfValidity {
                param: "distance_m",
                ..
            })
        ));
        let far_ok = okumura_hata(
            Hertz(900e6),
            Metres(40_000.0),
            Metres(50.0),
            Metres(1.5),
            HataEnvironment::MediumCity,
            Extrapolation::ExtendedDistance,
        );
        assert!(far_ok.is_ok());
    }
}
