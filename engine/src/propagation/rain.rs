//! Rain: specific attenuation (ITU-R P.838-3) and the slant-path
//! attenuation exceeded for a percentage of an average year (ITU-R P.618-13,
//! §2.2.1.1).
//!
//! P.838-3 (03/2005): `γR = k·R^α` dB/km, with R the rain rate in mm/h and
//! `k`, `α` from the regressions of eqs. (2) and (3),
//!
//! `log10 k = Σj aj·exp(−((log10 f − bj)/cj)²) + mk·log10 f + ck`
//! `α = Σj aj·exp(−((log10 f − bj)/cj)²) + mα·log10 f + cα`
//!
//! (f in GHz, 1–1000 GHz) with the coefficients of Tables 1–4 (kH, kV, αH,
//! αV; values written from memory and checked against the itur 0.4 oracle,
//! tests/golden/rain.csv), combined for path elevation θ and polarisation
//! tilt τ by eqs. (4) and (5):
//!
//! `k = [kH + kV + (kH − kV)·cos²θ·cos 2τ] / 2`
//! `α = [kH·αH + kV·αV + (kH·αH − kV·αV)·cos²θ·cos 2τ] / (2k)`.

use crate::error::{finite, non_negative, positive, within, Error, Result};
use crate::units::{Db, Hertz};

/// Polarisation of the wave, as a tilt angle relative to the horizontal.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Polarisation {
    /// τ = 0°.
    Horizontal,
    /// τ = 90°.
    Vertical,
    /// τ = 45° (P.838-3 uses 45° for circular polarisation).
    Circular,
    /// Linear polarisation tilted by the given angle, degrees.
    Tilt(f32),
}

impl Polarisation {
    /// The tilt angle τ in degrees.
    pub fn tilt_deg(self) -> f32 {
        match self {
            Polarisation::Horizontal => 0.0,
            Polarisation::Vertical => 90.0,
            Polarisation::Circular => 45.0,
            Polarisation::Tilt(t) => t,
        }
    }
}

/// One Gaussian term `(a, b, c)` of the P.838-3 regressions.
type Term = [f32; 3];

/// P.838-3 Table 1, kH: terms j = 1..4, then mk, ck.
const K_H: ([Term; 4], f32, f32) = (
    [
        [-5.339_80, -0.100_08, 1.130_98],
        [-0.353_51, 1.269_70, 0.454_00],
        [-0.237_89, 0.860_36, 0.153_54],
        [-0.941_58, 0.645_52, 0.168_17],
    ],
    -0.189_61,
    0.711_47,
);
/// P.838-3 Table 2, kV.
const K_V: ([Term; 4], f32, f32) = (
    [
        [-3.805_95, 0.569_34, 0.810_61],
        [-3.449_65, -0.229_11, 0.510_59],
        [-0.399_02, 0.730_42, 0.118_99],
        [0.501_67, 1.073_19, 0.271_95],
    ],
    -0.163_98,
    0.632_97,
);
/// P.838-3 Table 3, αH: terms j = 1..5, then mα, cα.
const ALPHA_H: ([Term; 5], f32, f32) = (
    [
        [-0.143_18, 1.824_42, -0.551_87],
        [0.295_91, 0.775_64, 0.198_22],
        [0.321_77, 0.637_73, 0.131_64],
        [-5.376_10, -0.962_30, 1.478_28],
        [16.172_1, -3.299_80, 3.439_90],
    ],
    0.678_49,
    -1.955_37,
);
/// P.838-3 Table 4, αV.
const ALPHA_V: ([Term; 5], f32, f32) = (
    [
        [-0.077_71, 2.338_40, -0.762_84],
        [0.567_27, 0.955_45, 0.540_39],
        [-0.202_38, 1.145_20, 0.268_09],
        [-48.299_1, 0.791_669, 0.116_226],
        [48.583_3, 0.791_459, 0.116_479],
    ],
    -0.053_739,
    0.834_33,
);

fn regression(terms: &[Term], m: f32, c: f32, x: f32) -> f32 {
    let sum: f32 = terms
        .iter()
        .map(|&[a, b, cj]| {
            let u = (x - b) / cj;
            a * libm::expf(-u * u)
        })
        .sum();
    sum + m * x + c
}

/// Frequency range of P.838-3, Hz.
const P838_F_MIN_HZ: f32 = 1e9;
const P838_F_MAX_HZ: f32 = 1000e9;

fn tilt(tilt_deg: f32) -> Result<f32> {
    within("tilt_deg", tilt_deg, -180.0, 180.0)
}

fn elevation(elevation_deg: f32) -> Result<f32> {
    within("elevation_deg", elevation_deg, 0.0, 90.0)
}

/// P.838-3 coefficients `(k, α)` at frequency `f` (1–1000 GHz), polarisation
/// tilt `tilt_deg` (τ, −180..180°) and path elevation `elevation_deg`
/// (θ, 0..90°), eqs. (2)–(5).
pub fn rain_coefficients(f: Hertz, tilt_deg: f32, elevation_deg: f32) -> Result<(f32, f32)> {
    let f = positive("frequency_hz", f.0)?;
    within("frequency_hz", f, P838_F_MIN_HZ, P838_F_MAX_HZ)?;
    let tau = tilt(tilt_deg)?.to_radians();
    let theta = elevation(elevation_deg)?.to_radians();
    let x = libm::log10f(f / 1e9);
    let kh = libm::exp10f(regression(&K_H.0, K_H.1, K_H.2, x));
    let kv = libm::exp10f(regression(&K_V.0, K_V.1, K_V.2, x));
    let ah = regression(&ALPHA_H.0, ALPHA_H.1, ALPHA_H.2, x);
    let av = regression(&ALPHA_V.0, ALPHA_V.1, ALPHA_V.2, x);
    let cos_t = libm::cosf(theta);
    let w = cos_t * cos_t * libm::cosf(2.0 * tau);
    let k = (kh + kv + (kh - kv) * w) / 2.0;
    let alpha = (kh * ah + kv * av + (kh * ah - kv * av) * w) / (2.0 * k);
    Ok((
        crate::error::solved("k", k)?,
        crate::error::solved("alpha", alpha)?,
    ))
}

/// Specific attenuation `γR = k·R^α` (dB/km) for rain rate `rain_rate_mm_h`
/// (≥ 0), P.838-3 eq. (1).
pub fn rain_specific_attenuation(
    f: Hertz,
    rain_rate_mm_h: f32,
    tilt_deg: f32,
    elevation_deg: f32,
) -> Result<f32> {
    let r = non_negative("rain_rate_mm_h", rain_rate_mm_h)?;
    let (k, alpha) = rain_coefficients(f, tilt_deg, elevation_deg)?;
    crate::error::solved("specific_attenuation_db_per_km", k * libm::powf(r, alpha))
}

/// An Earth-space path for the P.618 rain method.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct SlantPath {
    /// Point rain rate exceeded for 0.01 % of an average year, mm/h (P.837).
    pub rain_rate_001: f32,
    /// Rain height above mean sea level, km (P.839: 0 °C isotherm + 0.36 km).
    pub rain_height_km: f32,
    /// Earth-station height above mean sea level, km.
    pub station_height_km: f32,
    /// Earth-station latitude, degrees (−90..90).
    pub latitude_deg: f32,
    /// Path elevation angle, degrees (0 < θ ≤ 90).
    pub elevation_deg: f32,
    /// Frequency (1–55 GHz for this method).
    pub frequency: Hertz,
    /// Polarisation tilt τ, degrees (45° for circular).
    pub tilt_deg: f32,
}

/// Effective Earth radius of P.618 step 2, km.
const EARTH_RADIUS_KM: f32 = 8500.0;
/// Frequency range of the P.618-13 §2.2.1.1 method (up to 55 GHz; the lower
/// limit is that of P.838-3), Hz.
const P618_F_MIN_HZ: f32 = 1e9;
const P618_F_MAX_HZ: f32 = 55e9;

/// Rain attenuation (dB) exceeded for `percent` % of an average year
/// (0.001–5 %) on `path`: ITU-R P.618-13 §2.2.1.1 steps 1–10, with the rain
/// height (step 1) and the rain rate (step 4) supplied by the caller.
///
/// Returns 0 dB when the station is at or above the rain height or the rain
/// rate is 0 (the recommendation's "A = 0" cases).
pub fn rain_attenuation_exceeded(path: &SlantPath, percent: f32) -> Result<Db> {
    let p = within("exceeded_percent", percent, 0.001, 5.0)?;
    let f = positive("frequency_hz", path.frequency.0)?;
    within("frequency_hz", f, P618_F_MIN_HZ, P618_F_MAX_HZ)?;
    let r001 = non_negative("rain_rate_mm_h", path.rain_rate_001)?;
    let hr = finite("rain_height_km", path.rain_height_km)?;
    let hs = finite("station_height_km", path.station_height_km)?;
    let lat = within("latitude_deg", path.latitude_deg, -90.0, 90.0)?;
    let el_deg = positive("elevation_deg", path.elevation_deg)?;
    let el_deg = within("elevation_deg", el_deg, 0.0, 90.0)?;
    tilt(path.tilt_deg)?;
    let dh = hr - hs;
    if dh <= 0.0 || r001 == 0.0 {
        return Ok(Db(0.0));
    }
    let el = el_deg.to_radians();
    let sin_el = libm::sinf(el);
    // cos θ as sin(90° − θ): 90° − θ is exact in f32, so near the zenith,
    // where cos θ is tiny, it keeps its relative precision (cos of the
    // rounded radians would lose it: at θ = 89.9997° by about 1 %).
    let cos_el = libm::sinf((90.0 - el_deg).to_radians());
    let f_ghz = f / 1e9;
    // Step 2: slant-path length below the rain height, km.
    let ls = if el_deg >= 5.0 {
        dh / sin_el
    } else {
        2.0 * dh / (libm::sqrtf(sin_el * sin_el + 2.0 * dh / EARTH_RADIUS_KM) + sin_el)
    };
    // Step 3: horizontal projection.
    let lg = ls * cos_el;
    // Step 5: specific attenuation.
    let gamma = rain_specific_attenuation(path.frequency, r001, path.tilt_deg, el_deg)?;
    // Step 6: horizontal reduction factor.
    let r =
        1.0 / (1.0 + 0.78 * libm::sqrtf(lg * gamma / f_ghz) - 0.38 * (1.0 - libm::expf(-2.0 * lg)));
    // Step 7: vertical adjustment factor.
    // ζ = atan(Δh / (LG·r)) > θ, compared as tan ζ > tan θ, i.e.
    // Δh·cos θ > LG·r·sin θ (all terms positive): the same test, but
    // resolvable in f32 near the zenith, where ζ and θ differ by less than
    // the spacing of f32 degrees at 90°.
    let lr = if dh * cos_el > lg * r * sin_el {
        lg * r / cos_el
    } else {
        dh / sin_el
    };
    let chi = if lat.abs() < 36.0 {
        36.0 - lat.abs()
    } else {
        0.0
    };
    let v = 1.0
        / (1.0
            + libm::sqrtf(sin_el)
                * (31.0 * (1.0 - libm::expf(-(el_deg / (1.0 + chi)))) * libm::sqrtf(lr * gamma)
                    / (f_ghz * f_ghz)
                    - 0.45));
    // Step 8: effective path length; step 9: A0.01.
    let le = lr * v;
    let a001 = gamma * le;
    if !a001.is_finite() || a001 <= 0.0 {
        return Err(Error::NoSolution("attenuation_db"));
    }
    // Step 10: other percentages.
    let beta = if p >= 1.0 || lat.abs() >= 36.0 {
        0.0
    } else if el_deg >= 25.0 {
        -0.005 * (lat.abs() - 36.0)
    } else {
        -0.005 * (lat.abs() - 36.0) + 1.8 - 4.25 * sin_el
    };
    let exponent =
        0.655 + 0.033 * libm::logf(p) - 0.045 * libm::logf(a001) - beta * (1.0 - p) * sin_el;
    let a = a001 * libm::powf(p / 0.01, -exponent);
    Ok(Db(crate::error::solved("attenuation_db", a)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coefficients_at_ten_ghz() {
        // P.838-3 regression at 10 GHz, horizontal, 0° elevation: kH ≈ 0.01217,
        // αH ≈ 1.2571 (from memory of the recommendation's tabulated values).
        let (k, a) = rain_coefficients(Hertz(10e9), 0.0, 0.0).unwrap_or((0.0, 0.0));
        assert!((k - 0.01217).abs() < 2e-5, "{k}");
        assert!((a - 1.2571).abs() < 1e-3, "{a}");
    }

    #[test]
    fn zero_cases_and_refusals() {
        let path = SlantPath {
            rain_rate_001: 40.0,
            rain_height_km: 3.0,
            station_height_km: 3.5,
            latitude_deg: 45.0,
            elevation_deg: 30.0,
            frequency: Hertz(20e9),
            tilt_deg: 45.0,
        };
        assert_eq!(rain_attenuation_exceeded(&path, 0.01), Ok(Db(0.0)));
        assert!(rain_attenuation_exceeded(&path, 10.0).is_err());
        let hi = SlantPath {
            frequency: Hertz(80e9),
            ..path
        };
        assert!(rain_attenuation_exceeded(&hi, 0.01).is_err());
        assert!(rain_specific_attenuation(Hertz(0.5e9), 10.0, 0.0, 0.0).is_err());
        assert!(rain_specific_attenuation(Hertz(10e9), -1.0, 0.0, 0.0).is_err());
    }
}
