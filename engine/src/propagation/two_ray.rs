//! Two-ray (direct plus ground-reflected) path loss over flat ground.
//!
//! With isotropic antennas at heights `ht`, `hr` a horizontal distance `d`
//! apart, the direct ray travels `d1 = √(d² + (ht−hr)²)` and the reflected
//! ray `d2 = √(d² + (ht+hr)²)`. The received field is the phasor sum
//!
//! `E ∝ (λ/4π)·|e^{-jk·d1}/d1 + Γ·e^{-jk·d2}/d2|`, with `k = 2π/λ`,
//!
//! so the basic transmission loss is `L = 20·log10(4π/λ) − 10·log10(S)` with
//! `S = |1/d1 + Γ·e^{-jφ}/d2|²` and `φ = k·(d2 − d1)`.
//!
//! For f32 accuracy the path difference is computed as
//! `Δ = d2 − d1 = 4·ht·hr / (d1 + d2)` (no cancellation), and `S` as
//! `[(Δ + (1+Γ)·d1)² − 4Γ·d1·d2·sin²(φ/2)] / (d1·d2)²`, which is the same
//! quantity rearranged so that nothing cancels when `Γ = −1`.
//!
//! Far beyond the crossover distance `dc = 4π·ht·hr/λ` and with `Γ = −1` the
//! loss tends to `40·log10(d) − 20·log10(ht) − 20·log10(hr)`
//! ([`TwoRayForm::Asymptotic`]), independent of frequency.

use crate::error::{positive, solved, within, Error, Result};
use crate::units::{Db, Hertz, Metres, SPEED_OF_LIGHT_M_PER_S};

use super::free_space::{db20, FSPL_CONSTANT_DB};

/// Which two-ray formula to evaluate.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
pub enum TwoRayForm {
    /// The phasor sum of the direct and reflected rays, with a real ground
    /// reflection coefficient in [−1, 1] (−1: perfectly conducting ground at
    /// grazing incidence, the usual choice; common practice).
    Exact {
        /// Ground reflection coefficient Γ, real, −1 ≤ Γ ≤ 1.
        reflection: f32,
    },
    /// The `d⁴` law `40·log10(d) − 20·log10(ht) − 20·log10(hr)`, meant for
    /// distances beyond [`two_ray_crossover`]. Refused at shorter distances,
    /// where it falls below free space and underestimates the loss.
    Asymptotic,
}

impl TwoRayForm {
    /// The exact form with Γ = −1.
    pub const EXACT_GROUND: TwoRayForm = TwoRayForm::Exact { reflection: -1.0 };
}

/// Validated heights and frequency.
#[derive(Clone, Copy)]
struct Geometry {
    f: f32,
    ht: f32,
    hr: f32,
}

fn geometry(f: Hertz, ht: Metres, hr: Metres) -> Result<Geometry> {
    Ok(Geometry {
        f: positive("frequency_hz", f.0)?,
        ht: positive("tx_height_m", ht.0)?,
        hr: positive("rx_height_m", hr.0)?,
    })
}

fn reflection_coefficient(g: f32) -> Result<f32> {
    within("reflection", g, -1.0, 1.0)
}

/// Exact two-ray loss for validated inputs.
fn exact(g: Geometry, d: f32, gamma: f32) -> Result<f32> {
    let dh = g.ht - g.hr;
    let sh = g.ht + g.hr;
    let d1 = libm::sqrtf(d * d + dh * dh);
    let d2 = libm::sqrtf(d * d + sh * sh);
    let delta = 4.0 * g.ht * g.hr / (d1 + d2);
    let half_phase = core::f32::consts::PI * delta * g.f / SPEED_OF_LIGHT_M_PER_S;
    let s = libm::sinf(half_phase);
    let a = delta + (1.0 + gamma) * d1;
    let num = a * a - 4.0 * gamma * d1 * d2 * s * s;
    if num.is_nan() || num <= 0.0 {
        return Err(Error::NoSolution("path_loss_db"));
    }
    // L = 20log10(4πf/c) + 20log10(d1) + 20log10(d2) − 10log10(num).
    let l = db20(g.f) + FSPL_CONSTANT_DB + db20(d1) + db20(d2) - 10.0 * libm::log10f(num);
    solved("path_loss_db", l)
}

fn asymptotic(g: Geometry, d: f32) -> Result<f32> {
    solved("path_loss_db", 2.0 * db20(d) - db20(g.ht) - db20(g.hr))
}

/// Two-ray ground-reflection path loss (isotropic antennas) at horizontal
/// distance `d` between antennas at heights `ht` and `hr` above flat ground.
pub fn two_ray(f: Hertz, d: Metres, ht: Metres, hr: Metres, form: TwoRayForm) -> Result<Db> {
    let g = geometry(f, ht, hr)?;
    let d = positive("distance_m", d.0)?;
    let l = match form {
        TwoRayForm::Exact { reflection } => exact(g, d, reflection_coefficient(reflection)?)?,
        TwoRayForm::Asymptotic => {
            let dc = crossover(g)?;
            super::distance_at_least(d, dc)?;
            asymptotic(g, d)?
        }
    };
    Ok(Db(l))
}

/// Crossover distance `dc = 4π·ht·hr/λ`, where the free-space and `d⁴`
/// asymptotes meet.
pub fn two_ray_crossover(f: Hertz, ht: Metres, hr: Metres) -> Result<Metres> {
    Ok(Metres(crossover(geometry(f, ht, hr)?)?))
}

fn crossover(g: Geometry) -> Result<f32> {
    let dc = 4.0 * core::f32::consts::PI * g.ht * g.hr * g.f / SPEED_OF_LIGHT_M_PER_S;
    solved("crossover_m", dc)
}

/// Largest horizontal distance at which the two-ray loss does not exceed
/// `max_loss`.
///
/// - Asymptotic form: solved in closed form.
/// - Exact form: beyond the last lobe peak (phase `φ = π`) the loss grows
///   monotonically with distance (for Γ ≤ 0) and the answer is found there by
///   bisection. When the allowed loss is below the loss at that peak, the
///   lobe boundaries (`φ = mπ`, m = 2, 3, ...) are walked inwards and the
///   farthest boundary that meets the loss brackets the answer, refined by
///   bisection. The boundaries stand in for the lobe extremes, which lie a
///   little inside them; a loss that is met only in the few hundredths of a dB
///   between a boundary and the true lobe peak is missed, and the next closer
///   lobe is reported. [`Error::NoSolution`] when no distance up to
///   `MAX_RANGE_M` (10⁸ m) and no lobe meets the loss.
///
/// Cost: about 200 loss evaluations when the answer lies beyond the last
/// peak; walking the lobes adds one per lobe (`≈ 4·min(ht,hr)/λ` of them, at
/// most 10⁵), so this is a planning-time call, not a per-packet one.
pub(crate) fn two_ray_range(
    f: Hertz,
    ht: Metres,
    hr: Metres,
    form: TwoRayForm,
    max_loss: Db,
) -> Result<Metres> {
    let g = geometry(f, ht, hr)?;
    let lmax = crate::error::finite("max_loss_db", max_loss.0)?;
    match form {
        TwoRayForm::Asymptotic => {
            let log_d = (lmax + db20(g.ht) + db20(g.hr)) / 40.0;
            let d = solved("range_m", libm::exp10f(log_d))?;
            let dc = crossover(g)?;
            super::distance_at_least(d, dc)?;
            Ok(Metres(d))
        }
        TwoRayForm::Exact { reflection } => {
            let gamma = reflection_coefficient(reflection)?;
            exact_range(g, gamma, lmax)
        }
    }
}

/// Farthest distance the range solver looks at, m.
const MAX_RANGE_M: f32 = 1e8;
/// Shortest distance the range solver looks at, m.
const MIN_RANGE_M: f32 = 1e-3;
/// At most this many lobe boundaries are walked.
const MAX_LOBE_BOUNDARIES: u32 = 100_000;

/// Distance at which the path difference equals `delta`, if any.
fn distance_for_path_difference(g: Geometry, delta: f32) -> Option<f32> {
    let t = g.ht - g.hr;
    let q = (4.0 * g.ht * g.hr - delta * delta) / (2.0 * delta);
    let d2 = q * q - t * t;
    if q > 0.0 && d2 > 0.0 && d2.is_finite() {
        Some(libm::sqrtf(d2))
    } else {
        None
    }
}

fn exact_range(g: Geometry, gamma: f32, lmax: f32) -> Result<Metres> {
    let lambda = SPEED_OF_LIGHT_M_PER_S / g.f;
    let loss = |d: f32| exact(g, d, gamma);
    let fits = |d: f32| loss(d).map(|l| l <= lmax);
    // Beyond the last peak: monotone.
    let far_lo = distance_for_path_difference(g, lambda / 2.0).unwrap_or(MIN_RANGE_M);
    if fits(far_lo)? {
        if fits(MAX_RANGE_M)? {
            return Err(Error::NoSolution("max_loss_db"));
        }
        return bisect(&fits, far_lo, MAX_RANGE_M);
    }
    // Walk the lobe boundaries inwards.
    let mut outer = far_lo;
    let mut m: u32 = 2;
    while m <= MAX_LOBE_BOUNDARIES {
        let delta = m as f32 * lambda / 2.0;
        let Some(d) = distance_for_path_difference(g, delta) else {
            break;
        };
        if d >= outer {
            break; // f32 resolution exhausted.
        }
        if fits(d)? {
            return bisect(&fits, d, outer);
        }
        outer = d;
        m += 1;
    }
    if outer > MIN_RANGE_M && fits(MIN_RANGE_M)? {
        return bisect(&fits, MIN_RANGE_M, outer);
    }
    Err(Error::NoSolution("max_loss_db"))
}

/// Geometric bisection: `fits(lo)` holds, `fits(hi)` does not; returns the
/// boundary to f32 resolution.
pub(crate) fn bisect(fits: &dyn Fn(f32) -> Result<bool>, lo: f32, hi: f32) -> Result<Metres> {
    let (mut lo, mut hi) = (lo, hi);
    for _ in 0..200 {
        let mid = libm::sqrtf(lo) * libm::sqrtf(hi);
        if !(mid > lo && mid < hi) {
            break;
        }
        if fits(mid)? {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(Metres(lo))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn far_field_tends_to_d4() {
        let f = Hertz(915e6);
        let (ht, hr) = (Metres(10.0), Metres(2.0));
        let d = Metres(50_000.0);
        let e = two_ray(f, d, ht, hr, TwoRayForm::EXACT_GROUND).unwrap_or(Db(0.0));
        let a = two_ray(f, d, ht, hr, TwoRayForm::Asymptotic).unwrap_or(Db(0.0));
        assert!((e.0 - a.0).abs() < 0.05, "{e:?} {a:?}");
        // 40log10(5e4) − 20log10(10) − 20log10(2) = 187.959 − 20 − 6.021.
        assert!((a.0 - 161.938).abs() < 1e-2, "{a:?}");
    }

    #[test]
    fn range_inverts_loss() {
        let f = Hertz(915e6);
        let (ht, hr) = (Metres(10.0), Metres(2.0));
        for lmax in [100.0, 120.0, 140.0, 160.0] {
            let d = two_ray_range(f, ht, hr, TwoRayForm::EXACT_GROUND, Db(lmax));
            let d = d.unwrap_or(Metres(0.0));
            let l = two_ray(f, d, ht, hr, TwoRayForm::EXACT_GROUND).unwrap_or(Db(0.0));
            assert!((l.0 - lmax).abs() < 0.01, "{lmax} {d:?} {l:?}");
        }
    }

    #[test]
    fn refuses_bad_inputs() {
        let f = Hertz(915e6);
        assert!(two_ray(
            f,
            Metres(1.0),
            Metres(0.0),
            Metres(1.0),
            TwoRayForm::Asymptotic
        )
        .is_err());
        // Below the crossover (about 763 m here) the asymptote is refused.
        let below = two_ray(
            f,
            Metres(100.0),
            Metres(10.0),
            Metres(2.0),
            TwoRayForm::Asymptotic,
        );
        assert!(
            matches!(
                below,
                Err(Error::OutOfValidity {
                    param: "distance_m",
                    ..
                })
            ),
            "{below:?}"
        );
        let g = TwoRayForm::Exact { reflection: -1.5 };
        assert!(two_ray(f, Metres(1.0), Metres(1.0), Metres(1.0), g).is_err());
    }
}
