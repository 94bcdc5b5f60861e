//! f64 reference: special functions, noise, modulation, fading and coverage.
//!
//! Written from the definitions, not from the engine, and by different
//! methods wherever the engine uses an approximation:
//!
//! | quantity | engine (f32) | reference (f64, here) |
//! |---|---|---|
//! | erfc | libm `erfcf` | Taylor series of erf (x < 2) / Lentz continued fraction |
//! | Q⁻¹ | Acklam + Halley | bisection then Newton on [`q`] |
//! | I0 | A&S 9.8.1/9.8.2 polynomials | power series / Hankel asymptotic series |
//! | Marcum Q1 | Poisson-mixture series | adaptive Simpson integral of the Rice density |
//! | required Eb/N0 | closed form | bisection on the BER formula |
//! | composite outage | fixed Simpson, 256 panels | adaptive Simpson |
//! | Jakes area | closed form | integral over the disc of the local coverage |

use std::f64::consts::{LN_10, LN_2, PI, SQRT_2};

/// Boltzmann constant, J/K (2019 SI, exact).
pub const BOLTZMANN: f64 = 1.380_649e-23;
/// Noise reference temperature, K.
pub const T0: f64 = 290.0;

// ----------------------------------------------------------------------------
// numerical tools

/// Adaptive Simpson quadrature of `f` on [a, b] to a relative tolerance
/// `rel` of the result (estimated first by a 1024-panel Simpson rule).
pub fn integrate<F: Fn(f64) -> f64>(f: &F, a: f64, b: f64, rel: f64) -> f64 {
    fn simpson<F: Fn(f64) -> f64>(f: &F, a: f64, fa: f64, b: f64, fb: f64) -> (f64, f64, f64) {
        let m = 0.5 * (a + b);
        let fm = f(m);
        (m, fm, (b - a) / 6.0 * (fa + 4.0 * fm + fb))
    }
    #[allow(clippy::too_many_arguments)]
    fn rec<F: Fn(f64) -> f64>(
        f: &F,
        a: f64,
        fa: f64,
        b: f64,
        fb: f64,
        m: f64,
        fm: f64,
        whole: f64,
        tol: f64,
        depth: u32,
    ) -> f64 {
        let (lm, flm, left) = simpson(f, a, fa, m, fm);
        let (rm, frm, right) = simpson(f, m, fm, b, fb);
        let delta = left + right - whole;
        if depth == 0 || delta.abs() <= 15.0 * tol {
            left + right + delta / 15.0
        } else {
            rec(f, a, fa, m, fm, lm, flm, left, tol / 2.0, depth - 1)
                + rec(f, m, fm, b, fb, rm, frm, right, tol / 2.0, depth - 1)
        }
    }
    let pieces = 512;
    let h = (b - a) / pieces as f64;
    let nodes: Vec<f64> = (0..=pieces).map(|i| f(a + h * i as f64)).collect();
    let mids: Vec<f64> = (0..pieces).map(|i| f(a + h * (i as f64 + 0.5))).collect();
    let coarse: f64 = (0..pieces)
        .map(|i| h / 6.0 * (nodes[i] + 4.0 * mids[i] + nodes[i + 1]))
        .sum();
    let tol = rel * coarse.abs() + 1e-300;
    (0..pieces)
        .map(|i| {
            let lo = a + h * i as f64;
            let hi = lo + h;
            let whole = h / 6.0 * (nodes[i] + 4.0 * mids[i] + nodes[i + 1]);
            rec(
                f,
                lo,
                nodes[i],
                hi,
                nodes[i + 1],
                0.5 * (lo + hi),
                mids[i],
                whole,
                tol / pieces as f64,
                30,
            )
        })
        .sum()
}

/// Root of a monotone `f` in [lo, hi] by bisection (f(lo) and f(hi) of
/// opposite signs), to an interval width of `tol`.
pub fn bisect<F: Fn(f64) -> f64>(f: F, mut lo: f64, mut hi: f64, tol: f64) -> Option<f64> {
    let (flo, fhi) = (f(lo), f(hi));
    if flo.is_nan() || fhi.is_nan() || flo.signum() == fhi.signum() {
        return None;
    }
    let rising = fhi > flo;
    for _ in 0..200 {
        if hi - lo <= tol {
            break;
        }
        let mid = 0.5 * (lo + hi);
        let fm = f(mid);
        if (fm > 0.0) == rising {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

// ----------------------------------------------------------------------------
// special functions

/// erfc(x): erf Taylor series `2/√π·e^{−x²}·Σ 2ⁿx^{2n+1}/(1·3·…·(2n+1))`
/// for |x| < 2, continued fraction (modified Lentz) for x ≥ 2.
pub fn erfc(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x < 0.0 {
        return 2.0 - erfc(-x);
    }
    if x < 2.0 {
        let mut term = x;
        let mut sum = x;
        let mut n = 0.0;
        while term > 1e-17 * sum {
            n += 1.0;
            term *= 2.0 * x * x / (2.0 * n + 1.0);
            sum += term;
        }
        1.0 - 2.0 / PI.sqrt() * (-x * x).exp() * sum
    } else {
        // erfc(x) = e^{−x²}/√π · 1/(x + (1/2)/(x + 1/(x + (3/2)/(x + …)))).
        let tiny = 1e-300;
        let mut f = x;
        let mut c = x;
        let mut d = 0.0;
        for k in 1..500 {
            let a = k as f64 / 2.0;
            d = x + a * d;
            d = if d.abs() < tiny { tiny } else { d };
            c = x + a / c;
            c = if c.abs() < tiny { tiny } else { c };
            d = 1.0 / d;
            let delta = c * d;
            f *= delta;
            if (delta - 1.0).abs() < 1e-16 {
                break;
            }
        }
        (-x * x).exp() / PI.sqrt() / f
    }
}

/// Q(x) = erfc(x/√2)/2.
pub fn q(x: f64) -> f64 {
    0.5 * erfc(x / SQRT_2)
}

/// Q⁻¹(p), 0 < p < 1: bisection on [−40, 40] then Newton steps on ln Q.
pub fn inverse_q(p: f64) -> Option<f64> {
    if !(p > 0.0 && p < 1.0) {
        return None;
    }
    if p > 0.5 {
        return inverse_q(1.0 - p).map(|x| -x);
    }
    let mut x = bisect(|x| (q(x) / p).ln(), 0.0, 40.0, 1e-6)?;
    for _ in 0..4 {
        let qx = q(x);
        let pdf = (-0.5 * x * x).exp() / (2.0 * PI).sqrt();
        // d ln Q/dx = −φ/Q.
        x += (qx.ln() - p.ln()) * qx / pdf;
    }
    Some(x)
}

/// e^{−|x|}·I0(x): power series Σ (x²/4)ᵏ/(k!)² for |x| ≤ 25, Hankel's
/// asymptotic series 1/√(2πx)·Σ ((2k−1)!!)²/(k!·(8x)ᵏ) above.
pub fn bessel_i0e(x: f64) -> f64 {
    let x = x.abs();
    if x <= 25.0 {
        let y = 0.25 * x * x;
        let mut term = 1.0;
        let mut sum = 1.0;
        let mut k = 0.0;
        while term > 1e-18 * sum {
            k += 1.0;
            term *= y / (k * k);
            sum += term;
        }
        sum * (-x).exp()
    } else {
        let mut term = 1.0;
        let mut sum = 1.0;
        for k in 1..40 {
            let kf = k as f64;
            let next = term * (2.0 * kf - 1.0).powi(2) / (kf * 8.0 * x);
            if next < 1e-17 || next > term {
                break;
            }
            term = next;
            sum += term;
        }
        sum / (2.0 * PI * x).sqrt()
    }
}

/// I0(x).
pub fn bessel_i0(x: f64) -> f64 {
    bessel_i0e(x) * x.abs().exp()
}

/// `(Q1(a, b), 1 − Q1(a, b))` by adaptive Simpson integration of the Rice
/// density `r·exp(−(r − a)²/2)·I0e(a·r)`: 1 − Q1 over [0, b], Q1 over
/// [b, max(a, b) + 40].
pub fn marcum_q1_pair(a: f64, b: f64) -> (f64, f64) {
    let pdf = |r: f64| r * (-0.5 * (r - a) * (r - a)).exp() * bessel_i0e(a * r);
    let below = if b > 0.0 {
        integrate(&pdf, 0.0, b, 1e-10)
    } else {
        0.0
    };
    let top = a.max(b) + 40.0;
    let above = integrate(&pdf, b, top, 1e-10);
    (above, below)
}

/// Q1(a, b).
pub fn marcum_q1(a: f64, b: f64) -> f64 {
    marcum_q1_pair(a, b).0
}

// ----------------------------------------------------------------------------
// noise

/// kTB in dBm.
pub fn thermal_noise_dbm(bandwidth_hz: f64, temperature_k: f64) -> f64 {
    10.0 * (BOLTZMANN * temperature_k * bandwidth_hz / 1e-3).log10()
}

/// kT0B·F in dBm.
pub fn noise_power_dbm(bandwidth_hz: f64, nf_db: f64) -> f64 {
    thermal_noise_dbm(bandwidth_hz, T0) + nf_db
}

/// Te = T0(F − 1).
pub fn noise_temperature(nf_db: f64) -> f64 {
    T0 * (10f64.powf(nf_db / 10.0) - 1.0)
}

/// NF = 10 log10(1 + Te/T0).
pub fn noise_figure(te: f64) -> f64 {
    10.0 * (1.0 + te / T0).log10()
}

/// Friis cascade noise figure in dB of (gain dB, NF dB) stages, in factors.
pub fn cascade_noise_figure(stages: &[(f64, f64)]) -> f64 {
    let mut f = 1.0;
    let mut g = 1.0;
    for (i, &(gain_db, nf_db)) in stages.iter().enumerate() {
        let fi = 10f64.powf(nf_db / 10.0);
        f += if i == 0 { fi - 1.0 } else { (fi - 1.0) / g };
        g *= 10f64.powf(gain_db / 10.0);
    }
    10.0 * f.log10()
}

/// C/N0 in dB-Hz for C in dBm and Tsys in K.
pub fn cn0_dbhz(c_dbm: f64, tsys: f64) -> f64 {
    let c_w = 10f64.powf((c_dbm - 30.0) / 10.0);
    10.0 * (c_w / (BOLTZMANN * tsys)).log10()
}

// ----------------------------------------------------------------------------
// modulation

/// Schemes of the reference, mirroring the engine's without sharing code.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scheme {
    /// BPSK.
    Bpsk,
    /// QPSK.
    Qpsk,
    /// DBPSK.
    Dbpsk,
    /// Coherent BFSK.
    FskCoherent,
    /// Non-coherent BFSK.
    FskNoncoherent,
    /// M-PSK.
    Psk(u32),
    /// Square M-QAM.
    Qam(u32),
}

/// BER at Eb/N0 (linear) `g`.
pub fn ber(s: Scheme, g: f64) -> f64 {
    match s {
        Scheme::Bpsk | Scheme::Qpsk => q((2.0 * g).sqrt()),
        Scheme::Dbpsk => 0.5 * (-g).exp(),
        Scheme::FskCoherent => q(g.sqrt()),
        Scheme::FskNoncoherent => 0.5 * (-g / 2.0).exp(),
        Scheme::Psk(m) if m <= 4 => q((2.0 * g).sqrt()),
        Scheme::Psk(m) => {
            let k = (m as f64).log2();
            2.0 / k * q((2.0 * k * g).sqrt() * (PI / m as f64).sin())
        }
        Scheme::Qam(m) => {
            let mf = m as f64;
            let k = mf.log2();
            4.0 / k * (1.0 - 1.0 / mf.sqrt()) * q((3.0 * k * g / (mf - 1.0)).sqrt())
        }
    }
}

/// Eb/N0 in dB reaching `target` BER, by bisection on [−20, 80] dB.
pub fn required_ebn0_db(s: Scheme, target: f64) -> Option<f64> {
    bisect(
        |db| (ber(s, 10f64.powf(db / 10.0)) / target).ln(),
        -20.0,
        80.0,
        1e-9,
    )
}

/// B·log2(1 + snr).
pub fn shannon_capacity(bandwidth_hz: f64, snr_db: f64) -> f64 {
    bandwidth_hz * (1.0 + 10f64.powf(snr_db / 10.0)).log2()
}

/// (2^η − 1)/η in dB.
pub fn shannon_min_ebn0_db(eta: f64) -> f64 {
    10.0 * ((2f64.powf(eta) - 1.0) / eta).log10()
}

/// 10·log10(ln 2).
pub fn shannon_limit_db() -> f64 {
    10.0 * LN_2.log10()
}

// ----------------------------------------------------------------------------
// fading

/// Fading models of the reference.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Fading {
    /// Rayleigh.
    Rayleigh,
    /// Rician, K in dB.
    Rician(f64),
    /// Log-normal, σ in dB.
    LogNormal(f64),
    /// Log-normal × Rayleigh, σ in dB.
    Composite(f64),
    /// Log-normal × Rician: K in dB, σ in dB.
    RicianLogNormal(f64, f64),
}

fn rayleigh_outage(margin_db: f64) -> f64 {
    -(-(10f64.powf(-margin_db / 10.0))).exp_m1()
}

/// P(received < threshold) at `margin_db` over the mean.
pub fn outage(m: Fading, margin_db: f64) -> f64 {
    match m {
        Fading::Rayleigh => rayleigh_outage(margin_db),
        Fading::Rician(k_db) => {
            let k = 10f64.powf(k_db / 10.0);
            let lin = 10f64.powf(margin_db / 10.0);
            marcum_q1_pair((2.0 * k).sqrt(), (2.0 * (k + 1.0) / lin).sqrt()).1
        }
        Fading::LogNormal(s) => q(margin_db / s),
        Fading::Composite(s) => {
            let f = |z: f64| {
                (-0.5 * z * z).exp() / (2.0 * PI).sqrt() * rayleigh_outage(margin_db + s * z)
            };
            integrate(&f, -12.0, 12.0, 1e-10)
        }
        Fading::RicianLogNormal(k_db, s) => {
            // The Rician outage averaged over a Gaussian local mean in dB:
            // trapezoid rule over ±8σ with 97 nodes (for a smooth integrand
            // under a Gaussian it converges faster than any power of the
            // step; a different rule from the engine's Simpson over ±9σ).
            let n = 96;
            let h = 16.0 / f64::from(n);
            (0..=n)
                .map(|i| {
                    let z = -8.0 + h * f64::from(i);
                    let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                    w * h * (-0.5 * z * z).exp() / (2.0 * PI).sqrt()
                        * outage(Fading::Rician(k_db), margin_db + s * z)
                })
                .sum()
        }
    }
}

/// Margin in dB for outage `p`, by bisection on ln(outage).
pub fn margin_for_outage(m: Fading, p: f64) -> Option<f64> {
    bisect(|x| (outage(m, x) / p).ln(), -60.0, 200.0, 1e-7)
}

/// Jakes' closed form of the covered area fraction.
pub fn area_coverage_closed(edge: f64, sigma_db: f64, n: f64) -> f64 {
    let a = inverse_q(edge).unwrap_or(f64::NAN) / SQRT_2;
    let b = 10.0 * n / (sigma_db * SQRT_2 * LN_10);
    edge + 0.5 * ((1.0 - 2.0 * a * b) / (b * b)).exp() * erfc((1.0 - a * b) / b)
}

/// Covered area fraction by integrating the local coverage probability
/// over the disc: `∫₀¹ 2u·Q(t + 10·n·log10(u)/σ) du`, t = Q⁻¹(edge), where
/// u = r/R and the mean level at r is 10·n·log10(R/r) dB above the edge's.
pub fn area_coverage_integral(edge: f64, sigma_db: f64, n: f64) -> f64 {
    let t = inverse_q(edge).unwrap_or(f64::NAN);
    let f = |u: f64| {
        if u <= 0.0 {
            0.0
        } else {
            2.0 * u * q(t + 10.0 * n * u.log10() / sigma_db)
        }
    };
    integrate(&f, 0.0, 1.0, 1e-10)
}

/// Edge probability for a covered-area fraction, by bisection on the
/// integral form.
pub fn edge_for_area(area: f64, sigma_db: f64, n: f64) -> Option<f64> {
    bisect(
        |p| area_coverage_integral(p, sigma_db, n) - area,
        1e-9,
        1.0 - 1e-9,
        1e-10,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn erfc_both_branches_meet() {
        // Across the switch at x = 2: erfc(2 − h) ≈ erfc(2) + h·(2/√π)·e⁻⁴.
        let h = 1e-7;
        let slope = 2.0 / PI.sqrt() * (-4.0f64).exp();
        assert!((erfc(2.0 - h) - erfc(2.0) - h * slope).abs() < 1e-15);
        // erfc(1) = 0.157299207050285 (A&S Table 7.1).
        assert!((erfc(1.0) - 0.157_299_207_050_285).abs() < 1e-14);
    }

    #[test]
    fn i0_branches_meet() {
        // Across the switch at x = 25: d ln(I0e)/dx = I1/I0 − 1 ≈ −1/(2x) − 1/(8x²).
        let h = 1e-6;
        let lo = bessel_i0e(25.0);
        let hi = bessel_i0e(25.0 + h);
        let slope = -1.0 / 50.0 - 1.0 / (8.0 * 625.0);
        assert!(((hi / lo).ln() - h * slope).abs() < 1e-11);
    }

    #[test]
    fn marcum_rayleigh_limit() {
        let (qv, c) = marcum_q1_pair(0.0, 1.5);
        assert!((qv - (-1.125f64).exp()).abs() < 1e-10);
        assert!((qv + c - 1.0).abs() < 1e-10);
    }

    #[test]
    fn jakes_forms_agree() {
        let a = area_coverage_closed(0.9, 8.0, 4.0);
        let b = area_coverage_integral(0.9, 8.0, 4.0);
        assert!((a - b).abs() < 1e-7, "{a} {b}");
    }
}
