//! f64 reference: path loss, apertures and rain.
//!
//! Written directly from the published equations, in the most literal form
//! (no rearrangement for precision: f64 has room to spare). Units as in the
//! documents: f in Hz unless a name says MHz/GHz, distances in m unless a name
//! says km.

use std::f64::consts::PI;

/// Speed of light, m/s (SI definition).
pub const C: f64 = 299_792_458.0;

/// Free-space basic transmission loss `20·log10(4πd/λ)`, ITU-R P.525-4 eq. (4).
pub fn free_space_loss_db(f_hz: f64, d_m: f64) -> f64 {
    let lambda = C / f_hz;
    20.0 * (4.0 * PI * d_m / lambda).log10()
}

/// Power flux density `EIRP/(4πd²)` in W/m², EIRP in W.
pub fn pfd_w_m2(eirp_w: f64, d_m: f64) -> f64 {
    eirp_w / (4.0 * PI * d_m * d_m)
}

/// Antenna gain (linear) `η·4πA/λ²`.
pub fn gain_from_area(area_m2: f64, efficiency: f64, f_hz: f64) -> f64 {
    let lambda = C / f_hz;
    efficiency * 4.0 * PI * area_m2 / (lambda * lambda)
}

/// Log-distance loss `L0 + 10·n·log10(d/d0)`; `l0_db = None`: free space at d0.
pub fn log_distance_db(f_hz: f64, d_m: f64, d0_m: f64, l0_db: Option<f64>, n: f64) -> f64 {
    let l0 = l0_db.unwrap_or_else(|| free_space_loss_db(f_hz, d0_m));
    l0 + 10.0 * n * (d_m / d0_m).log10()
}

/// Two-ray loss from the complex phasor sum
/// `(λ/4π)·|e^{-jk d1}/d1 + Γ e^{-jk d2}/d2|`, computed with explicit real and
/// imaginary parts.
pub fn two_ray_exact_db(f_hz: f64, d_m: f64, ht: f64, hr: f64, gamma: f64) -> f64 {
    let lambda = C / f_hz;
    let k = 2.0 * PI / lambda;
    let d1 = (d_m * d_m + (ht - hr) * (ht - hr)).sqrt();
    let d2 = (d_m * d_m + (ht + hr) * (ht + hr)).sqrt();
    let re = (k * d1).cos() / d1 + gamma * (k * d2).cos() / d2;
    let im = -(k * d1).sin() / d1 - gamma * (k * d2).sin() / d2;
    let amplitude = lambda / (4.0 * PI) * (re * re + im * im).sqrt();
    -20.0 * amplitude.log10()
}

/// Two-ray asymptote `L = 10·log10(d⁴/(ht²hr²))`.
pub fn two_ray_d4_db(d_m: f64, ht: f64, hr: f64) -> f64 {
    10.0 * (d_m.powi(4) / (ht * ht * hr * hr)).log10()
}

/// Crossover distance `4π·ht·hr/λ`.
pub fn crossover_m(f_hz: f64, ht: f64, hr: f64) -> f64 {
    4.0 * PI * ht * hr / (C / f_hz)
}

/// Hata environment, mirrored for the reference.
#[derive(Clone, Copy, Debug)]
pub enum HataEnv {
    /// Open area.
    Open,
    /// Suburban.
    Suburban,
    /// Medium/small city.
    Medium,
    /// Large city.
    Large,
}

fn a_hm_medium(f_mhz: f64, hm: f64) -> f64 {
    (1.1 * f_mhz.log10() - 0.7) * hm - (1.56 * f_mhz.log10() - 0.8)
}

fn a_hm_large(f_mhz: f64, hm: f64) -> f64 {
    // Hata 1980: the f ≤ 200 MHz form and the f ≥ 400 MHz form; split at
    // 300 MHz (common practice).
    if f_mhz <= 300.0 {
        8.29 * (1.54 * hm).log10().powi(2) - 1.1
    } else {
        3.2 * (11.75 * hm).log10().powi(2) - 4.97
    }
}

/// Okumura-Hata (Hata 1980): f in MHz, heights in m, d in km.
pub fn hata_db(f_mhz: f64, d_km: f64, hb: f64, hm: f64, env: HataEnv) -> f64 {
    let urban = |a: f64| {
        69.55 + 26.16 * f_mhz.log10() - 13.82 * hb.log10() - a
            + (44.9 - 6.55 * hb.log10()) * d_km.log10()
    };
    let medium = urban(a_hm_medium(f_mhz, hm));
    match env {
        HataEnv::Medium => medium,
        HataEnv::Large => urban(a_hm_large(f_mhz, hm)),
        HataEnv::Suburban => medium - 2.0 * (f_mhz / 28.0).log10().powi(2) - 5.4,
        HataEnv::Open => medium - 4.78 * f_mhz.log10().powi(2) + 18.33 * f_mhz.log10() - 40.94,
    }
}

/// COST 231-Hata: f in MHz, heights in m, d in km; `Cm` 3 dB if metropolitan.
pub fn cost231_db(f_mhz: f64, d_km: f64, hb: f64, hm: f64, metropolitan: bool) -> f64 {
    46.3 + 33.9 * f_mhz.log10() - 13.82 * hb.log10() - a_hm_medium(f_mhz, hm)
        + (44.9 - 6.55 * hb.log10()) * d_km.log10()
        + if metropolitan { 3.0 } else { 0.0 }
}

/// ITU-R P.1238 site-general model: f in MHz, d in m, `lf` the floor loss.
pub fn p1238_db(f_mhz: f64, d_m: f64, n: f64, lf: f64) -> f64 {
    20.0 * f_mhz.log10() + n * d_m.log10() + lf - 28.0
}

/// ITU-R P.838-3 regression coefficients, one set per table.
struct Regression {
    a: &'static [f64],
    b: &'static [f64],
    c: &'static [f64],
    m: f64,
    c0: f64,
}

// P.838-3 Tables 1-4 (kH, kV, αH, αV), typed from the recommendation's
// layout: columns a_j, b_j, c_j, then m and c.
const KH: Regression = Regression {
    a: &[-5.33980, -0.35351, -0.23789, -0.94158],
    b: &[-0.10008, 1.26970, 0.86036, 0.64552],
    c: &[1.13098, 0.45400, 0.15354, 0.16817],
    m: -0.18961,
    c0: 0.71147,
};
const KV: Regression = Regression {
    a: &[-3.80595, -3.44965, -0.39902, 0.50167],
    b: &[0.56934, -0.22911, 0.73042, 1.07319],
    c: &[0.81061, 0.51059, 0.11899, 0.27195],
    m: -0.16398,
    c0: 0.63297,
};
const AH: Regression = Regression {
    a: &[-0.14318, 0.29591, 0.32177, -5.37610, 16.1721],
    b: &[1.82442, 0.77564, 0.63773, -0.96230, -3.29980],
    c: &[-0.55187, 0.19822, 0.13164, 1.47828, 3.43990],
    m: 0.67849,
    c0: -1.95537,
};
const AV: Regression = Regression {
    a: &[-0.07771, 0.56727, -0.20238, -48.2991, 48.5833],
    b: &[2.33840, 0.95545, 1.14520, 0.791669, 0.791459],
    c: &[-0.76284, 0.54039, 0.26809, 0.116226, 0.116479],
    m: -0.053739,
    c0: 0.83433,
};

impl Regression {
    fn eval(&self, f_ghz: f64) -> f64 {
        let x = f_ghz.log10();
        let mut s = self.m * x + self.c0;
        for j in 0..self.a.len() {
            s += self.a[j] * (-((x - self.b[j]) / self.c[j]).powi(2)).exp();
        }
        s
    }
}

/// P.838-3 `(k, α)` for f in GHz, tilt τ and elevation θ in degrees.
pub fn p838_k_alpha(f_ghz: f64, tau_deg: f64, theta_deg: f64) -> (f64, f64) {
    let kh = 10f64.powf(KH.eval(f_ghz));
    let kv = 10f64.powf(KV.eval(f_ghz));
    let ah = AH.eval(f_ghz);
    let av = AV.eval(f_ghz);
    let w = theta_deg.to_radians().cos().powi(2) * (2.0 * tau_deg.to_radians()).cos();
    let k = (kh + kv + (kh - kv) * w) / 2.0;
    let alpha = (kh * ah + kv * av + (kh * ah - kv * av) * w) / (2.0 * k);
    (k, alpha)
}

/// P.838-3 specific attenuation, dB/km.
pub fn p838_gamma(f_ghz: f64, r_mm_h: f64, tau_deg: f64, theta_deg: f64) -> f64 {
    let (k, alpha) = p838_k_alpha(f_ghz, tau_deg, theta_deg);
    k * r_mm_h.powf(alpha)
}

/// ITU-R P.618-13 §2.2.1.1: attenuation exceeded for `p` % of an average
/// year. Heights in km, angles in degrees, f in GHz.
#[allow(clippy::too_many_arguments)]
pub fn p618_rain_db(
    f_ghz: f64,
    r001: f64,
    hr: f64,
    hs: f64,
    lat: f64,
    el: f64,
    tau: f64,
    p: f64,
) -> f64 {
    if hr - hs <= 0.0 || r001 == 0.0 {
        return 0.0;
    }
    let th = el.to_radians();
    let re = 8500.0;
    let ls = if el >= 5.0 {
        (hr - hs) / th.sin()
    } else {
        2.0 * (hr - hs) / ((th.sin().powi(2) + 2.0 * (hr - hs) / re).sqrt() + th.sin())
    };
    let lg = ls * th.cos();
    let gamma = p838_gamma(f_ghz, r001, tau, el);
    let r = 1.0 / (1.0 + 0.78 * (lg * gamma / f_ghz).sqrt() - 0.38 * (1.0 - (-2.0 * lg).exp()));
    let zeta = ((hr - hs) / (lg * r)).atan().to_degrees();
    let lr = if zeta > el {
        lg * r / th.cos()
    } else {
        (hr - hs) / th.sin()
    };
    let chi = if lat.abs() < 36.0 {
        36.0 - lat.abs()
    } else {
        0.0
    };
    let v = 1.0
        / (1.0
            + th.sin().sqrt()
                * (31.0 * (1.0 - (-(el / (1.0 + chi))).exp()) * (lr * gamma).sqrt()
                    / f_ghz.powi(2)
                    - 0.45));
    let a001 = gamma * lr * v;
    let beta = if p >= 1.0 || lat.abs() >= 36.0 {
        0.0
    } else if el >= 25.0 {
        -0.005 * (lat.abs() - 36.0)
    } else {
        -0.005 * (lat.abs() - 36.0) + 1.8 - 4.25 * th.sin()
    };
    a001 * (p / 0.01)
        .powf(-(0.655 + 0.033 * p.ln() - 0.045 * a001.ln() - beta * (1.0 - p) * th.sin()))
}
