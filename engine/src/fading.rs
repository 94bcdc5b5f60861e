//! Fade margin and availability under Rayleigh, Rician, log-normal and
//! composite (Suzuki) fading, and the fraction of a cell's area that is
//! covered (Jakes).
//!
//! **Margin** `M` is the ratio, in dB, of the mean received power (the local
//! mean for the small-scale models, the area mean for the models with
//! shadowing) to the receiver's threshold. **Outage** is
//! `P(received power < threshold)`, **availability** is `1 − outage`.
//!
//! | model | outage at margin M (linear m = 10^(M/10)) |
//! |---|---|
//! | Rayleigh | `1 − exp(−1/m)` (exponential power) |
//! | Rician, K | `1 − Q1(√(2K), √(2(K+1)/m))` (first-order Marcum Q) |
//! | log-normal, σ | `Q(M/σ)` (Gaussian received level in dB) |
//! | composite, σ | `E_z[1 − exp(−10^{−(M + σz)/10})]`, z ~ N(0, 1): Rayleigh around a log-normal local mean (Suzuki 1977) |
//!
//! The composite expectation is integrated by the composite Simpson rule
//! with [`COMPOSITE_PANELS`] panels over z ∈ [−9, 9] (the Gaussian mass
//! outside is 2·10⁻¹⁹).
//!
//! Outages smaller than about 10⁻⁷ are not distinguishable from zero in an
//! `f32` availability (1 − 10⁻⁸ rounds to 1), so [`margin_for_outage`] and
//! [`outage_for_margin`] take and give the outage itself; the availability
//! forms are thin wrappers.
//!
//! Inverses: closed form for Rayleigh and log-normal; bisection on the margin
//! (to 10⁻⁴ dB) for Rician and composite, whose outage falls monotonically
//! with the margin.
//!
//! Cost: Rayleigh and log-normal take a handful of `libm` calls. One
//! composite outage is 257 integrand evaluations (three `libm` calls each)
//! and one Rician outage a Marcum series of some tens to a few hundred
//! terms; their inverses repeat that about 22 times (bisection over a
//! 200 dB bracket to 10⁻⁴ dB). That suits planning and configuration, not a
//! per-packet loop on a Cortex-M0 without FPU: compute the margin once and
//! keep it.

use core::f32::consts::{FRAC_1_SQRT_2, LN_10};

use crate::error::{finite, positive, probability, within, Error, Result};
use crate::special::{erfc, erfcx, inverse_q, marcum_q1_complement, q_function};
use crate::units::Db;

/// Highest Rician K factor accepted, dB (K = 398; the Marcum Q series is
/// valid up to K = 450).
pub const RICIAN_K_MAX_DB: f32 = 26.0;
/// Lowest Rician K factor accepted, dB (below it the channel is Rayleigh
/// to within 0.01 dB).
pub const RICIAN_K_MIN_DB: f32 = -30.0;
/// Largest shadowing standard deviation accepted, dB.
pub const SIGMA_MAX_DB: f32 = 20.0;
/// Smallest shadowing standard deviation accepted by the coverage
/// functions, dB (the closed form needs σ > 0; below 0.1 dB the cell is
/// covered wherever the mean level is).
pub const JAKES_SIGMA_MIN_DB: f32 = 0.1;
/// Number of Simpson panels of the composite-fading integral.
pub const COMPOSITE_PANELS: u32 = 256;

/// A fading model for the received power around its mean.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FadingModel {
    /// Rayleigh: no line of sight, exponentially distributed power.
    Rayleigh,
    /// Rician with the given K factor (power of the line-of-sight component
    /// over the scattered power), in [`RICIAN_K_MIN_DB`]..=[`RICIAN_K_MAX_DB`].
    Rician {
        /// K factor, dB.
        k_factor: Db,
    },
    /// Log-normal shadowing: the received level in dB is Gaussian with
    /// standard deviation `sigma` (0 < σ ≤ [`SIGMA_MAX_DB`]).
    LogNormal {
        /// Standard deviation of the level, dB.
        sigma: Db,
    },
    /// Log-normal shadowing of the local mean times Rayleigh fading around
    /// it (Suzuki), 0 < σ ≤ [`SIGMA_MAX_DB`].
    Composite {
        /// Standard deviation of the local mean, dB.
        sigma: Db,
    },
    /// Log-normal shadowing of the local mean times Rician fading around it
    /// (the Suzuki composite with a line of sight): the Rician outage
    /// averaged over the log-normal mean, as [`FadingModel::Composite`]
    /// averages the Rayleigh one. K as for [`FadingModel::Rician`], σ as for
    /// [`FadingModel::Composite`].
    RicianLogNormal {
        /// K factor of the Rician part, dB.
        k_factor: Db,
        /// Standard deviation of the local mean, dB.
        sigma: Db,
    },
}

/// A validated model, with the derived numbers each formula needs.
enum Checked {
    Rayleigh,
    Rician { k: f32 },
    LogNormal { sigma: f32 },
    Composite { sigma: f32 },
    RicianLogNormal { k: f32, sigma: f32 },
}

fn check(m: FadingModel) -> Result<Checked> {
    Ok(match m {
        FadingModel::Rayleigh => Checked::Rayleigh,
        FadingModel::Rician { k_factor } => {
            let k_db = within("k_factor", k_factor.0, RICIAN_K_MIN_DB, RICIAN_K_MAX_DB)?;
            Checked::Rician {
                k: libm::exp10f(k_db / 10.0),
            }
        }
        FadingModel::LogNormal { sigma } => Checked::LogNormal {
            sigma: check_sigma(sigma)?,
        },
        FadingModel::Composite { sigma } => Checked::Composite {
            sigma: check_sigma(sigma)?,
        },
        FadingModel::RicianLogNormal { k_factor, sigma } => {
            let k_db = within("k_factor", k_factor.0, RICIAN_K_MIN_DB, RICIAN_K_MAX_DB)?;
            Checked::RicianLogNormal {
                k: libm::exp10f(k_db / 10.0),
                sigma: check_sigma(sigma)?,
            }
        }
    })
}

fn check_sigma(sigma: Db) -> Result<f32> {
    let s = positive("sigma", sigma.0)?;
    within("sigma", s, 0.0, SIGMA_MAX_DB)
}

/// Probability that the received power falls below the threshold when the
/// mean is `margin` above it.
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite margin; [`Error::OutOfValidity`] /
/// [`Error::NotPositive`] for a K factor or σ outside the accepted ranges.
pub fn outage_for_margin(m: FadingModel, margin: Db) -> Result<f32> {
    let margin = finite("margin", margin.0)?;
    let model = check(m)?;
    outage(&model, margin)
}

/// Availability `1 − outage` at `margin`; see [`outage_for_margin`].
///
/// # Errors
/// As [`outage_for_margin`].
pub fn availability_for_margin(m: FadingModel, margin: Db) -> Result<f32> {
    Ok(1.0 - outage_for_margin(m, margin)?)
}

/// Margin over the mean power so that `P(received ≥ threshold) =
/// availability`.
///
/// # Errors
/// [`Error::ProbabilityOutOfRange`] unless 0 < availability < 1; as
/// [`margin_for_outage`] otherwise.
pub fn margin_for_availability(m: FadingModel, availability: f32) -> Result<Db> {
    let a = probability("availability", availability)?;
    // 1 − a is exact for a ≥ 0.5 (Sterbenz); below, the rounding is far
    // smaller than any margin resolution that matters.
    margin_for_outage(m, 1.0 - a)
}

/// Margin over the mean power so that `P(received < threshold) = outage`.
///
/// # Errors
/// [`Error::ProbabilityOutOfRange`] unless 0 < outage < 1;
/// [`Error::NoSolution`] if no margin within the search bracket (about
/// −50..+150 dB, widened by 10·σ for the composite model) reaches it;
/// model parameter errors as [`outage_for_margin`].
pub fn margin_for_outage(m: FadingModel, outage_target: f32) -> Result<Db> {
    let p = probability("outage", outage_target)?;
    let model = check(m)?;
    match model {
        Checked::Rayleigh => {
            // 1 − exp(−1/m) = p  ⇒  m = −1/ln(1 − p).
            let inv_m = -libm::log1pf(-p);
            Ok(Db(-10.0 * libm::log10f(inv_m)))
        }
        Checked::LogNormal { sigma } => Ok(Db(sigma * inverse_q(p)?)),
        Checked::Rician { .. } => bisect_margin(&model, p, -50.0, 150.0),
        Checked::Composite { sigma } | Checked::RicianLogNormal { sigma, .. } => {
            bisect_margin(&model, p, -50.0 - 10.0 * sigma, 150.0 + 10.0 * sigma)
        }
    }
}

fn outage(model: &Checked, margin_db: f32) -> Result<f32> {
    Ok(match *model {
        Checked::Rayleigh => rayleigh_outage(margin_db),
        Checked::Rician { k } => rician_outage(k, margin_db)?,
        Checked::LogNormal { sigma } => q_function(margin_db / sigma),
        Checked::Composite { sigma } => {
            composite_outage(margin_db, sigma, |m| Ok(rayleigh_outage(m)))?
        }
        Checked::RicianLogNormal { k, sigma } => {
            composite_outage(margin_db, sigma, |m| rician_outage(k, m))?
        }
    })
}

/// Rician outage `1 − Q1(√(2K), √(2(K+1)/m))` with m = 10^(M/10).
fn rician_outage(k: f32, margin_db: f32) -> Result<f32> {
    let m = libm::exp10f(margin_db / 10.0);
    let b = libm::sqrtf(2.0 * (k + 1.0) / m);
    if b.is_finite() {
        marcum_q1_complement(libm::sqrtf(2.0 * k), b)
    } else {
        Ok(1.0)
    }
}

/// 1 − exp(−1/m) with m = 10^(M/10), computed as −expm1(−10^(−M/10)).
fn rayleigh_outage(margin_db: f32) -> f32 {
    -libm::expm1f(-libm::exp10f(-margin_db / 10.0))
}

/// Composite Simpson over z ∈ [−9, 9] of φ(z)·inner(M + σz), `inner` the
/// outage of the fast fading around a local mean M + σz dB above threshold.
fn composite_outage(margin_db: f32, sigma: f32, inner: impl Fn(f32) -> Result<f32>) -> Result<f32> {
    const Z_MAX: f32 = 9.0;
    const INV_SQRT_2PI: f32 = 0.398_942_3;
    let n = COMPOSITE_PANELS;
    let h = 2.0 * Z_MAX / n as f32;
    let mut sum = 0.0_f32;
    for i in 0..=n {
        let z = -Z_MAX + h * i as f32;
        let w = if i == 0 || i == n {
            1.0
        } else if i % 2 == 1 {
            4.0
        } else {
            2.0
        };
        let phi = INV_SQRT_2PI * libm::expf(-0.5 * z * z);
        sum += w * phi * inner(margin_db + sigma * z)?;
    }
    Ok((sum * h / 3.0).clamp(0.0, 1.0))
}

/// Finds the margin where the (decreasing) outage equals `target`.
fn bisect_margin(model: &Checked, target: f32, lo: f32, hi: f32) -> Result<Db> {
    let (mut lo, mut hi) = (lo, hi);
    if outage(model, lo)? < target || outage(model, hi)? > target {
        return Err(Error::NoSolution("margin"));
    }
    for _ in 0..64 {
        if hi - lo <= 1e-4 {
            break;
        }
        let mid = 0.5 * (lo + hi);
        if outage(model, mid)? > target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(Db(0.5 * (lo + hi)))
}

/// Jakes' fraction of a circular cell's area where the received level
/// exceeds the threshold, for log-normal shadowing of standard deviation
/// `sigma` and a path-loss exponent `n`, given the probability
/// `edge_probability` of coverage at the cell edge:
///
/// `F = P_edge + ½·exp((1 − 2ab)/b²)·erfc((1 − ab)/b)`, with
/// `a = Q⁻¹(P_edge)/√2` and `b = 10·n·log10(e)/(σ√2)`
/// (W. C. Jakes, *Microwave Mobile Communications*, 1974, §2.5).
///
/// The product `exp(·)·erfc(·)` is evaluated as `exp(−a²)·erfcx((1 − ab)/b)`
/// when its erfc argument is large, so it neither overflows nor underflows.
///
/// # Errors
/// [`Error::ProbabilityOutOfRange`] unless 0 < edge_probability < 1;
/// [`Error::NotPositive`] for σ not positive; [`Error::OutOfValidity`]
/// for σ outside [`JAKES_SIGMA_MIN_DB`]..=[`SIGMA_MAX_DB`] or a path-loss
/// exponent outside 1..=10.
pub fn area_coverage(edge_probability: f32, sigma: Db, path_loss_exponent: f32) -> Result<f32> {
    let p = probability("edge_probability", edge_probability)?;
    let b = jakes_b(sigma, path_loss_exponent)?;
    let a = inverse_q(p)? * FRAC_1_SQRT_2;
    Ok(jakes_area(p, a, b).clamp(p, 1.0))
}

/// Inverse of [`area_coverage`]: the edge probability that gives the
/// requested fraction of covered area (bisection on Q⁻¹ of the edge
/// probability, to 10⁻⁶).
///
/// # Errors
/// [`Error::ProbabilityOutOfRange`] unless 0 < area_coverage < 1;
/// [`Error::NoSolution`] if the required edge probability is not
/// representable strictly inside (0, 1) in `f32`; σ and n as
/// [`area_coverage`].
pub fn edge_probability_for_area(
    area_coverage: f32,
    sigma: Db,
    path_loss_exponent: f32,
) -> Result<f32> {
    let target = probability("area_coverage", area_coverage)?;
    let b = jakes_b(sigma, path_loss_exponent)?;
    let area_at = |a: f32| jakes_area(0.5 * erfc(a), a, b);
    // Area falls as a = Q⁻¹(P_edge)/√2 grows.
    let (mut lo, mut hi) = (-8.0_f32, 8.0_f32);
    if area_at(lo) < target || area_at(hi) > target {
        return Err(Error::NoSolution("edge_probability"));
    }
    for _ in 0..64 {
        if hi - lo <= 1e-6 {
            break;
        }
        let mid = 0.5 * (lo + hi);
        if area_at(mid) > target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let p = 0.5 * erfc(0.5 * (lo + hi));
    if p > 0.0 && p < 1.0 {
        Ok(p)
    } else {
        Err(Error::NoSolution("edge_probability"))
    }
}

fn jakes_b(sigma: Db, n: f32) -> Result<f32> {
    let s = within(
        "sigma",
        positive("sigma", sigma.0)?,
        JAKES_SIGMA_MIN_DB,
        SIGMA_MAX_DB,
    )?;
    let n = within("path_loss_exponent", n, 1.0, 10.0)?;
    // 10·n·log10(e)/(σ√2) = 10·n/(σ·√2·ln 10).
    Ok(10.0 * n * FRAC_1_SQRT_2 / (s * LN_10))
}

fn jakes_area(p_edge: f32, a: f32, b: f32) -> f32 {
    let y = (1.0 - a * b) / b;
    let tail = if y < 8.0 {
        libm::expf((1.0 - 2.0 * a * b) / (b * b)) * erfc(y)
    } else {
        // (1 − 2ab)/b² = y² − a².
        libm::expf(-a * a) * erfcx(y)
    };
    p_edge + 0.5 * tail
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rayleigh_99_percent() {
        // −1/ln(0.99) = 99.5 → 19.98 dB (closed form of the exponential law).
        let m = margin_for_availability(FadingModel::Rayleigh, 0.99).unwrap_or(Db(0.0));
        assert!((m.0 - 19.978).abs() < 0.01, "{m:?}");
        let a = availability_for_margin(FadingModel::Rayleigh, m).unwrap_or(0.0);
        assert!((a - 0.99).abs() < 1e-5);
    }

    #[test]
    fn rician_between_rayleigh_and_none() {
        let ray = margin_for_outage(FadingModel::Rayleigh, 1e-3).unwrap_or(Db(0.0));
        let low_k = margin_for_outage(
            FadingModel::Rician {
                k_factor: Db(-30.0),
            },
            1e-3,
        )
        .unwrap_or(Db(0.0));
        assert!((ray.0 - low_k.0).abs() < 0.01, "{ray:?} {low_k:?}");
        let k10 =
            margin_for_outage(FadingModel::Rician { k_factor: Db(10.0) }, 1e-3).unwrap_or(Db(99.0));
        assert!(k10.0 < ray.0 && k10.0 > 0.0);
        let back =
            outage_for_margin(FadingModel::Rician { k_factor: Db(10.0) }, k10).unwrap_or(0.0);
        assert!((back - 1e-3).abs() < 1e-6);
    }

    #[test]
    fn lognormal_and_composite() {
        // Q⁻¹(0.1) = 1.2816: 8 dB shadowing needs 10.25 dB for 90 %.
        let m = margin_for_availability(FadingModel::LogNormal { sigma: Db(8.0) }, 0.9)
            .unwrap_or(Db(0.0));
        assert!((m.0 - 10.252).abs() < 0.01);
        // Composite needs more than either part alone.
        let c =
            margin_for_outage(FadingModel::Composite { sigma: Db(6.0) }, 0.01).unwrap_or(Db(0.0));
        let r = margin_for_outage(FadingModel::Rayleigh, 0.01).unwrap_or(Db(0.0));
        assert!(c.0 > r.0, "{c:?} {r:?}");
        let back = outage_for_margin(FadingModel::Composite { sigma: Db(6.0) }, c).unwrap_or(0.0);
        assert!((back - 0.01).abs() < 1e-5);
    }

    #[test]
    fn jakes_area() {
        // σ/n = 2, 90 % at the edge → about 97 % of the area (Jakes 1974,
        // fig. 2.5-1, read from memory).
        let f = area_coverage(0.9, Db(8.0), 4.0).unwrap_or(0.0);
        assert!((f - 0.9687).abs() < 1e-3, "{f}");
        let p = edge_probability_for_area(f, Db(8.0), 4.0).unwrap_or(0.0);
        assert!((p - 0.9).abs() < 1e-4, "{p}");
        assert!(area_coverage(1.0, Db(8.0), 4.0).is_err());
        assert!(area_coverage(0.9, Db(0.0), 4.0).is_err());
    }

    #[test]
    fn refusals() {
        assert!(margin_for_availability(FadingModel::Rayleigh, 1.0).is_err());
        assert!(margin_for_availability(FadingModel::Rayleigh, 0.0).is_err());
        assert!(margin_for_availability(FadingModel::Rayleigh, f32::NAN).is_err());
        assert!(outage_for_margin(FadingModel::Rician { k_factor: Db(40.0) }, Db(10.0)).is_err());
        assert!(outage_for_margin(FadingModel::LogNormal { sigma: Db(-1.0) }, Db(10.0)).is_err());
        assert!(outage_for_margin(FadingModel::Rayleigh, Db(f32::INFINITY)).is_err());
    }
}
