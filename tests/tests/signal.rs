//! Special functions, noise, modulation, fading and coverage: the engine
//! (f32) and the independent f64 reference (`headroom_tests::signal`) against
//! SciPy goldens (`tests/golden/gen_special.py`), against each other
//! (proptest), and against published check values.
//!
//! Stated maximum errors (engine vs SciPy) are the constants below; the
//! reference must match SciPy to 1e-9 relative or better.

use headroom::fading::{
    area_coverage, edge_probability_for_area, margin_for_availability, margin_for_outage,
    outage_for_margin, FadingModel,
};
use headroom::modulation::{
    bit_error_rate, required_ebn0, shannon_capacity, shannon_min_ebn0, Modulation, SHANNON_LIMIT_DB,
};
use headroom::noise::{
    carrier_to_noise_density, ebn0_from_cn, ebn0_from_cn0, g_over_t, noise_figure_from_temperature,
    noise_power, noise_temperature_from_figure, system_noise_temperature, thermal_noise, Cascade,
    Stage, T0_K,
};
use headroom::special::{
    bessel_i0, bessel_i0_scaled, erfc, erfcx, inverse_q, marcum_q1, marcum_q1_complement,
    q_function,
};
use headroom::units::{Db, Dbi, Dbm, Hertz, Kelvin};
use headroom::Error;
use headroom_tests::signal as reference;
use proptest::prelude::*;

const SPECIAL: &str = include_str!("../golden/special.csv");
const BER: &str = include_str!("../golden/ber.csv");
const FADING: &str = include_str!("../golden/fading.csv");
const COVERAGE: &str = include_str!("../golden/coverage.csv");

/// Engine erfc / Q: relative error.
const MAX_REL_ERFC: f64 = 5e-7;
/// Engine erfcx: relative error.
const MAX_REL_ERFCX: f64 = 1e-6;
/// Engine Q⁻¹: absolute error (plus the effect of rounding p to f32).
const MAX_ABS_INVERSE_Q: f64 = 5e-6;
/// Engine I0 and I0e: relative error.
const MAX_REL_I0: f64 = 1e-6;
/// Engine Marcum Q1: relative error of the smaller tail (values > 1e-30).
const MAX_REL_MARCUM: f64 = 5e-5;
/// Engine BER: relative error (values > 1e-30).
const MAX_REL_BER: f64 = 1e-4;
/// Engine fading outage: relative error (values > 1e-12).
const MAX_REL_OUTAGE: f64 = 1e-4;
/// Any quantity in dB, engine vs reference or SciPy.
const MAX_DB: f64 = 0.01;
/// Covered area fraction: absolute error.
const MAX_ABS_AREA: f64 = 1e-5;

/// Rows of a golden CSV (header skipped), split on commas.
fn rows(text: &'static str) -> impl Iterator<Item = Vec<&'static str>> {
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| l.split(',').collect())
}

fn num(s: &str) -> f64 {
    match s.trim().parse::<f64>() {
        Ok(x) => x,
        Err(e) => panic!("golden value {s:?}: {e}"),
    }
}

fn rel(got: f64, want: f64) -> f64 {
    if want == 0.0 {
        got.abs()
    } else {
        ((got - want) / want).abs()
    }
}

fn ok<T: std::fmt::Debug>(r: Result<T, Error>, what: &str) -> T {
    match r {
        Ok(v) => v,
        Err(e) => panic!("{what}: unexpected error {e}"),
    }
}

// ---------------------------------------------------------------------------
// goldens: special functions

#[test]
fn special_functions_match_scipy() {
    let mut worst = std::collections::BTreeMap::<&str, f64>::new();
    let mut note = |k: &'static str, e: f64| {
        let w = worst.entry(k).or_insert(0.0);
        *w = w.max(e);
    };
    let mut count = 0;
    for r in rows(SPECIAL) {
        let (f, x, y, want) = (r[0], num(r[1]), num(r[2]), num(r[3]));
        count += 1;
        match f {
            "erfc" => {
                let e = rel(f64::from(erfc(x as f32)), want);
                assert!(e <= MAX_REL_ERFC, "erfc({x}) rel err {e}");
                let er = rel(reference::erfc(x), want);
                assert!(er <= 1e-12, "reference erfc({x}) rel err {er}");
                note("erfc", e);
            }
            "erfcx" => {
                let e = rel(f64::from(erfcx(x as f32)), want);
                assert!(e <= MAX_REL_ERFCX, "erfcx({x}) rel err {e}");
                note("erfcx", e);
            }
            "q" => {
                if want > 1e-37 {
                    let e = rel(f64::from(q_function(x as f32)), want);
                    assert!(e <= MAX_REL_ERFC, "Q({x}) rel err {e}");
                    note("q", e);
                }
                let er = rel(reference::q(x), want);
                assert!(er <= 1e-12, "reference Q({x}) rel err {er}");
            }
            "inverse_q" => {
                let p32 = x as f32;
                let got = f64::from(ok(inverse_q(p32), "inverse_q"));
                // Rounding p to f32 moves the answer by Δp/φ(x).
                let pdf = (-0.5 * want * want).exp() / (2.0 * std::f64::consts::PI).sqrt();
                let tol = MAX_ABS_INVERSE_Q + (f64::from(p32) - x).abs() / pdf;
                let e = (got - want).abs();
                assert!(e <= tol, "inverse_q({x}) = {got}, scipy {want}");
                note(
                    "inverse_q (beyond f32 rounding of p)",
                    (e - (tol - MAX_ABS_INVERSE_Q)).max(0.0),
                );
                let r = reference::inverse_q(x).unwrap_or(f64::NAN);
                assert!(
                    (r - want).abs() <= 1e-9,
                    "reference inverse_q({x}) = {r}, scipy {want}"
                );
            }
            "i0" => {
                let e = rel(f64::from(bessel_i0(x as f32)), want);
                assert!(e <= MAX_REL_I0, "I0({x}) rel err {e}");
                assert!(
                    rel(reference::bessel_i0(x), want) <= 1e-12,
                    "reference I0({x})"
                );
                note("i0", e);
            }
            "i0e" => {
                let e = rel(f64::from(bessel_i0_scaled(x as f32)), want);
                assert!(e <= MAX_REL_I0, "I0e({x}) rel err {e}");
                assert!(
                    rel(reference::bessel_i0e(x), want) <= 1e-12,
                    "reference I0e({x})"
                );
                note("i0e", e);
            }
            "marcum_q1" | "marcum_q1_complement" => {
                let (a, b) = (x as f32, y as f32);
                let got = if f == "marcum_q1" {
                    ok(marcum_q1(a, b), "marcum_q1")
                } else {
                    ok(marcum_q1_complement(a, b), "marcum_q1_complement")
                };
                let got = f64::from(got);
                if want < 0.5 {
                    if want > 1e-30 {
                        let e = rel(got, want);
                        assert!(e <= MAX_REL_MARCUM, "{f}({a}, {b}) = {got}, scipy {want}");
                        note("marcum (smaller tail, rel)", e);
                    } else {
                        assert!(got <= 1e-29, "{f}({a}, {b}) = {got}, scipy {want}");
                    }
                } else {
                    let e = (got - want).abs();
                    assert!(e <= 2e-6, "{f}({a}, {b}) = {got}, scipy {want}");
                    note("marcum (larger tail, abs)", e);
                }
                let (rq, rc) = reference::marcum_q1_pair(x, y);
                let r = if f == "marcum_q1" { rq } else { rc };
                if want > 1e-300 {
                    assert!(
                        rel(r, want) <= 1e-9,
                        "reference {f}({x}, {y}) = {r}, scipy {want}"
                    );
                }
            }
            other => panic!("unknown golden function {other}"),
        }
    }
    assert!(count > 400, "special.csv has only {count} rows");
    println!("worst engine errors vs scipy: {worst:?}");
}

// ---------------------------------------------------------------------------
// goldens: modulation

fn scheme(name: &str, order: u32) -> (Modulation, reference::Scheme) {
    match name {
        "bpsk" => (Modulation::Bpsk, reference::Scheme::Bpsk),
        "dbpsk" => (Modulation::Dbpsk, reference::Scheme::Dbpsk),
        "fsk_coherent" => (Modulation::FskCoherent, reference::Scheme::FskCoherent),
        "fsk_noncoherent" => (
            Modulation::FskNoncoherent,
            reference::Scheme::FskNoncoherent,
        ),
        "psk" => (Modulation::Psk { order }, reference::Scheme::Psk(order)),
        "qam" => (Modulation::Qam { order }, reference::Scheme::Qam(order)),
        other => panic!("unknown scheme {other}"),
    }
}

#[test]
fn ber_matches_scipy_and_inverts() {
    let mut n = 0;
    for r in rows(BER) {
        let order: u32 = r[1].parse().unwrap_or(0);
        let (m, s) = scheme(r[0], order);
        let (db, want) = (num(r[2]), num(r[3]));
        let got = f64::from(ok(bit_error_rate(m, Db(db as f32)), "bit_error_rate"));
        assert!(
            rel(got, want) <= MAX_REL_BER,
            "{m:?} at {db} dB: {got} vs scipy {want}"
        );
        let g = 10f64.powf(db / 10.0);
        assert!(
            rel(reference::ber(s, g), want) <= 1e-9,
            "reference {s:?} at {db} dB"
        );
        // The inverse returns the Eb/N0 of the golden row.
        if want > 1e-30 && want < 0.1 {
            let e = ok(required_ebn0(m, want as f32), "required_ebn0");
            assert!(
                (f64::from(e.0) - db).abs() <= 0.001,
                "{m:?} BER {want}: {e:?} vs {db} dB"
            );
            let rdb = reference::required_ebn0_db(s, want).unwrap_or(f64::NAN);
            assert!(
                (rdb - db).abs() <= 1e-6,
                "reference {s:?} BER {want}: {rdb} vs {db}"
            );
        }
        n += 1;
    }
    assert!(n > 200);
}

// ---------------------------------------------------------------------------
// goldens: fading

fn model(name: &str, p: f64) -> (FadingModel, reference::Fading) {
    let d = Db(p as f32);
    match name {
        "rayleigh" => (FadingModel::Rayleigh, reference::Fading::Rayleigh),
        "rician" => (
            FadingModel::Rician { k_factor: d },
            reference::Fading::Rician(p),
        ),
        "lognormal" => (
            FadingModel::LogNormal { sigma: d },
            reference::Fading::LogNormal(p),
        ),
        "composite" => (
            FadingModel::Composite { sigma: d },
            reference::Fading::Composite(p),
        ),
        other => panic!("unknown model {other}"),
    }
}

#[test]
fn fading_matches_scipy_and_inverts() {
    let mut worst_rel = 0.0_f64;
    let mut worst_db = 0.0_f64;
    let mut n = 0;
    for r in rows(FADING) {
        let (m, rm) = model(r[0], num(r[1]));
        let (margin, want) = (num(r[2]), num(r[3]));
        n += 1;
        if want < 1e-12 {
            continue;
        }
        let got = f64::from(ok(
            outage_for_margin(m, Db(margin as f32)),
            "outage_for_margin",
        ));
        if want < 0.9 {
            let e = rel(got, want);
            assert!(
                e <= MAX_REL_OUTAGE,
                "{m:?} at {margin} dB: {got} vs scipy {want}"
            );
            worst_rel = worst_rel.max(e);
        } else {
            assert!(
                (got - want).abs() <= 1e-5,
                "{m:?} at {margin} dB: {got} vs scipy {want}"
            );
        }
        let ro = reference::outage(rm, margin);
        assert!(
            rel(ro, want) <= 1e-8,
            "reference {rm:?} at {margin} dB: {ro} vs {want}"
        );
        // Inverse: the margin of the golden row, where the outage is not
        // so close to 1 that f32 cannot tell margins apart.
        if want < 0.9 {
            let back = ok(margin_for_outage(m, want as f32), "margin_for_outage");
            let e = (f64::from(back.0) - margin).abs();
            assert!(e <= MAX_DB, "{m:?} outage {want}: {back:?} vs {margin} dB");
            worst_db = worst_db.max(e);
        }
    }
    assert!(n > 150);
    println!("fading: worst outage rel err {worst_rel:e}, worst margin err {worst_db:e} dB");
}

#[test]
fn coverage_matches_scipy_and_the_disc_integral() {
    let mut n = 0;
    for r in rows(COVERAGE) {
        let (sigma, exp, edge, want) = (num(r[0]), num(r[1]), num(r[2]), num(r[3]));
        let got = ok(
            area_coverage(edge as f32, Db(sigma as f32), exp as f32),
            "area_coverage",
        );
        assert!(
            (f64::from(got) - want).abs() <= MAX_ABS_AREA,
            "σ {sigma} n {exp} edge {edge}: {got} vs scipy {want}"
        );
        let closed = reference::area_coverage_closed(edge, sigma, exp);
        let integral = reference::area_coverage_integral(edge, sigma, exp);
        assert!(
            (closed - want).abs() <= 1e-9,
            "reference closed form {closed} vs {want}"
        );
        assert!(
            (integral - want).abs() <= 1e-7,
            "reference disc integral {integral} vs {want}"
        );
        if want < 0.999 {
            let back = ok(
                edge_probability_for_area(want as f32, Db(sigma as f32), exp as f32),
                "edge_probability_for_area",
            );
            assert!(
                (f64::from(back) - edge).abs() <= 1e-4,
                "area {want}: edge {back} vs {edge}"
            );
        }
        n += 1;
    }
    assert!(n > 40);
}

// ---------------------------------------------------------------------------
// published check values

#[test]
fn published_check_values() {
    // kT0 = −173.98 dBm/Hz (common practice; from k = 1.380649e-23 J/K, T0 = 290 K).
    let n = ok(thermal_noise(Hertz(1.0), Kelvin(T0_K)), "kTB");
    assert!((n.0 + 173.98).abs() < 0.01, "{n:?}");
    // Noise figure 3.01 dB ↔ 290 K (F = 2, definition of noise factor).
    let t = ok(noise_temperature_from_figure(Db(3.0103)), "Te");
    assert!((t.0 - 290.0).abs() < 0.1);
    // BPSK at BER 1e-5 needs 9.59 dB Eb/N0 (common practice, textbook tables).
    let e = ok(required_ebn0(Modulation::Bpsk, 1e-5), "bpsk");
    assert!((e.0 - 9.59).abs() < 0.01, "{e:?}");
    // QPSK (Gray) has the BPSK bit error rate (common practice).
    assert_eq!(required_ebn0(Modulation::Qpsk, 1e-5), Ok(e));
    // 16-QAM at BER 1e-5 needs about 13.4 dB (common practice, textbook tables).
    let e16 = ok(required_ebn0(Modulation::Qam { order: 16 }, 1e-5), "16qam");
    assert!((e16.0 - 13.43).abs() < 0.02, "{e16:?}");
    // Non-coherent FSK: BER = ½·exp(−Eb/2N0); at 10 dB, ½e⁻⁵ = 3.369e-3.
    let b = ok(
        bit_error_rate(Modulation::FskNoncoherent, Db(10.0)),
        "ncfsk",
    );
    assert!((b - 3.369e-3).abs() < 1e-6, "{b}");
    // Shannon limit −1.59 dB (Shannon 1948; 10·log10(ln 2)).
    assert!((SHANNON_LIMIT_DB + 1.59).abs() < 0.005);
    let lim = ok(shannon_min_ebn0(1e-4), "shannon");
    assert!((lim.0 + 1.59).abs() < 0.01, "{lim:?}");
    // Rayleigh fading, 99 % availability: −1/ln 0.99 → 19.98 dB (closed form).
    let m = ok(
        margin_for_availability(FadingModel::Rayleigh, 0.99),
        "rayleigh",
    );
    assert!((m.0 - 19.98).abs() < 0.01, "{m:?}");
    // Jakes: σ/n = 2 with 90 % at the edge covers about 97 % of the area
    // (Jakes 1974, fig. 2.5-1; from memory).
    let f = ok(area_coverage(0.9, Db(8.0), 4.0), "jakes");
    assert!((f - 0.97).abs() < 0.005, "{f}");
    // Log-normal: 90 % needs 1.28·σ (normal tables, common practice).
    let l = ok(
        margin_for_availability(FadingModel::LogNormal { sigma: Db(8.0) }, 0.9),
        "ln",
    );
    assert!((l.0 - 1.2816 * 8.0).abs() < 0.01);
}

#[test]
fn refusals() {
    use FadingModel::*;
    assert_eq!(
        inverse_q(0.0),
        Err(Error::ProbabilityOutOfRange("probability"))
    );
    assert_eq!(
        inverse_q(1.0),
        Err(Error::ProbabilityOutOfRange("probability"))
    );
    assert!(inverse_q(f32::NAN).is_err());
    assert_eq!(
        margin_for_availability(Rayleigh, 1.0),
        Err(Error::ProbabilityOutOfRange("availability"))
    );
    assert_eq!(
        margin_for_availability(Rayleigh, 0.0),
        Err(Error::ProbabilityOutOfRange("availability"))
    );
    assert!(margin_for_availability(
        Rician {
            k_factor: Db(f32::NAN)
        },
        0.9
    )
    .is_err());
    assert!(margin_for_availability(Composite { sigma: Db(0.0) }, 0.9).is_err());
    assert_eq!(
        required_ebn0(Modulation::Qam { order: 8 }, 1e-3),
        Err(Error::Unsupported("qam_order"))
    );
    assert_eq!(
        required_ebn0(Modulation::Psk { order: 12 }, 1e-3),
        Err(Error::Unsupported("psk_order"))
    );
    assert_eq!(
        required_ebn0(Modulation::Bpsk, f32::NAN),
        Err(Error::NotFinite("ber"))
    );
    assert_eq!(
        required_ebn0(Modulation::Bpsk, 0.7),
        Err(Error::NoSolution("ber"))
    );
    assert!(thermal_noise(Hertz(0.0), Kelvin(290.0)).is_err());
    assert!(thermal_noise(Hertz(-5.0), Kelvin(290.0)).is_err());
    assert!(noise_power(Hertz(f32::INFINITY), Db(3.0)).is_err());
    assert!(noise_figure_from_temperature(Kelvin(-1.0)).is_err());
    assert!(shannon_capacity(Hertz(0.0), Db(10.0)).is_err());
    assert!(area_coverage(0.0, Db(8.0), 4.0).is_err());
    assert!(area_coverage(0.9, Db(8.0), -1.0).is_err());
    assert!(edge_probability_for_area(1.0, Db(8.0), 4.0).is_err());
    assert!(marcum_q1(f32::INFINITY, 1.0).is_err());
}

/// No input makes any of these functions panic, and every Ok is a number.
#[test]
fn hostile_inputs_never_panic() {
    let values = [
        f32::NAN,
        f32::INFINITY,
        f32::NEG_INFINITY,
        f32::MAX,
        -f32::MAX,
        f32::MIN_POSITIVE,
        1e-45,
        -1e-45,
        0.0,
        -0.0,
        1.0,
        -1.0,
        0.5,
        1e30,
        -1e30,
        1e-30,
    ];
    let finite_or_err = |what: &str, x: f32, r: Result<f32, Error>| {
        if let Ok(v) = r {
            assert!(!v.is_nan(), "{what} at {x:e} gave NaN");
        }
    };
    for &x in &values {
        let _ = erfc(x);
        let _ = erfcx(x);
        let _ = q_function(x);
        let _ = bessel_i0(x);
        let _ = bessel_i0_scaled(x);
        finite_or_err("inverse_q(x)", x, inverse_q(x));
        for &y in &values {
            finite_or_err("marcum_q1(x, y)", x, marcum_q1(x, y));
            finite_or_err(
                "area_coverage(x, Db(y), 4.0)",
                x,
                area_coverage(x, Db(y), 4.0),
            );
            finite_or_err(
                "area_coverage(0.9, Db(x), y)",
                x,
                area_coverage(0.9, Db(x), y),
            );
            finite_or_err(
                "edge_probability_for_area(x, Db(y), 3.0)",
                x,
                edge_probability_for_area(x, Db(y), 3.0),
            );
            finite_or_err(
                "shannon_capacity(Hertz(x), Db(y))",
                x,
                shannon_capacity(Hertz(x), Db(y)),
            );
            finite_or_err(
                "ebn0_from_cn(Db(x), Hertz(y), 1000.0).map(|d| d.0)",
                x,
                ebn0_from_cn(Db(x), Hertz(y), 1000.0).map(|d| d.0),
            );
            finite_or_err(
                "thermal_noise(Hertz(x), Kelvin(y)).map(|d| d.0)",
                x,
                thermal_noise(Hertz(x), Kelvin(y)).map(|d| d.0),
            );
        }
        for m in [
            FadingModel::Rayleigh,
            FadingModel::Rician { k_factor: Db(x) },
            FadingModel::Rician { k_factor: Db(10.0) },
            FadingModel::LogNormal { sigma: Db(x) },
            FadingModel::Composite { sigma: Db(x) },
            FadingModel::Composite { sigma: Db(8.0) },
        ] {
            finite_or_err(
                "outage_for_margin(m, Db(x))",
                x,
                outage_for_margin(m, Db(x)),
            );
            finite_or_err(
                "margin_for_availability(m, x).map(|d| d.0)",
                x,
                margin_for_availability(m, x).map(|d| d.0),
            );
        }
        for m in [
            Modulation::Bpsk,
            Modulation::Dbpsk,
            Modulation::FskNoncoherent,
            Modulation::Psk { order: 0 },
            Modulation::Psk { order: u32::MAX },
            Modulation::Psk { order: 1 << 31 },
            Modulation::Qam { order: 0 },
            Modulation::Qam { order: 1 << 30 },
            Modulation::Qam { order: 4096 },
        ] {
            finite_or_err("bit_error_rate(m, Db(x))", x, bit_error_rate(m, Db(x)));
            finite_or_err(
                "required_ebn0(m, x).map(|d| d.0)",
                x,
                required_ebn0(m, x).map(|d| d.0),
            );
        }
        finite_or_err(
            "shannon_min_ebn0(x).map(|d| d.0)",
            x,
            shannon_min_ebn0(x).map(|d| d.0),
        );
        finite_or_err(
            "noise_temperature_from_figure(Db(x)).map(|t| t.0)",
            x,
            noise_temperature_from_figure(Db(x)).map(|t| t.0),
        );
        finite_or_err(
            "noise_figure_from_temperature(Kelvin(x)).map(|d| d.0)",
            x,
            noise_figure_from_temperature(Kelvin(x)).map(|d| d.0),
        );
        finite_or_err(
            "g_over_t(Dbi(x), Kelvin(x)).map(|d| d.0)",
            x,
            g_over_t(Dbi(x), Kelvin(x)).map(|d| d.0),
        );
        finite_or_err(
            "carrier_to_noise_density(Dbm(x), Kelvin(290.0)).map(|d| d.0)",
            x,
            carrier_to_noise_density(Dbm(x), Kelvin(290.0)).map(|d| d.0),
        );
        finite_or_err(
            "ebn0_from_cn0(Db(50.0), x).map(|d| d.0)",
            x,
            ebn0_from_cn0(Db(50.0), x).map(|d| d.0),
        );
        finite_or_err(
            "system_noise_temperature(Kelvin(x), Db(x)).map(|t| t.0)",
            x,
            system_noise_temperature(Kelvin(x), Db(x)).map(|t| t.0),
        );
        let mut c: Cascade<2> = Cascade::new();
        let _ = c.push(Stage {
            gain: Db(x),
            noise_figure: Db(x),
        });
        let _ = c.push(Stage {
            gain: Db(x),
            noise_figure: Db(1.0),
        });
        finite_or_err(
            "c.noise_figure().map(|d| d.0)",
            x,
            c.noise_figure().map(|d| d.0),
        );
    }
}

// ---------------------------------------------------------------------------
// engine vs reference (proptest)

fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo.log10()..hi.log10()).prop_map(|e| 10f64.powf(e))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 128, .. ProptestConfig::default() })]

    #[test]
    fn noise_matches_reference(b in log_uniform(1.0, 1e10), t in 1.0f64..1e4, nf in 0.0f64..20.0) {
        let e = ok(thermal_noise(Hertz(b as f32), Kelvin(t as f32)), "ktb");
        prop_assert!((f64::from(e.0) - reference::thermal_noise_dbm(b, t)).abs() <= 0.001);
        let e = ok(noise_power(Hertz(b as f32), Db(nf as f32)), "ktbf");
        prop_assert!((f64::from(e.0) - reference::noise_power_dbm(b, nf)).abs() <= 0.001);
        let te = ok(noise_temperature_from_figure(Db(nf as f32)), "te");
        prop_assert!(rel(f64::from(te.0), reference::noise_temperature(nf)) <= 1e-4);
        let f = ok(noise_figure_from_temperature(Kelvin(t as f32)), "nf");
        prop_assert!((f64::from(f.0) - reference::noise_figure(t)).abs() <= 0.001);
        let c = ok(carrier_to_noise_density(Dbm(-100.0), Kelvin(t as f32)), "cn0");
        prop_assert!((f64::from(c.0) - reference::cn0_dbhz(-100.0, t)).abs() <= 0.001);
    }

    #[test]
    fn cascade_matches_reference(stages in proptest::collection::vec((-20.0f64..40.0, 0.0f64..15.0), 1..5)) {
        let mut c: Cascade<4> = Cascade::new();
        for &(g, nf) in &stages {
            let pushed = c.push(Stage { gain: Db(g as f32), noise_figure: Db(nf as f32) });
            prop_assert!(pushed.is_ok());
        }
        let f = ok(c.noise_figure(), "cascade");
        let want = reference::cascade_noise_figure(&stages);
        prop_assert!((f64::from(f.0) - want).abs() <= MAX_DB, "{f:?} vs {want}");
    }

    #[test]
    fn required_ebn0_matches_reference(which in 0usize..9, ber in log_uniform(1e-12, 0.05)) {
        let cases = [
            (Modulation::Bpsk, reference::Scheme::Bpsk),
            (Modulation::Qpsk, reference::Scheme::Qpsk),
            (Modulation::Dbpsk, reference::Scheme::Dbpsk),
            (Modulation::FskCoherent, reference::Scheme::FskCoherent),
            (Modulation::FskNoncoherent, reference::Scheme::FskNoncoherent),
            (Modulation::Psk { order: 8 }, reference::Scheme::Psk(8)),
            (Modulation::Psk { order: 16 }, reference::Scheme::Psk(16)),
            (Modulation::Qam { order: 64 }, reference::Scheme::Qam(64)),
            (Modulation::Qam { order: 256 }, reference::Scheme::Qam(256)),
        ];
        let (m, s) = cases[which];
        let e = ok(required_ebn0(m, ber as f32), "required_ebn0");
        let want = reference::required_ebn0_db(s, f64::from(ber as f32)).unwrap_or(f64::NAN);
        prop_assert!((f64::from(e.0) - want).abs() <= MAX_DB, "{m:?} {ber}: {e:?} vs {want}");
    }

    #[test]
    fn shannon_matches_reference(b in log_uniform(1.0, 1e9), snr in -30.0f64..40.0, eta in log_uniform(1e-3, 20.0)) {
        let c = ok(shannon_capacity(Hertz(b as f32), Db(snr as f32)), "capacity");
        prop_assert!(rel(f64::from(c), reference::shannon_capacity(b, snr)) <= 1e-4);
        let e = ok(shannon_min_ebn0(eta as f32), "min ebn0");
        prop_assert!((f64::from(e.0) - reference::shannon_min_ebn0_db(eta)).abs() <= 0.001);
    }
}

proptest! {
    // The reference integrates numerically inside a bisection: fewer cases.
    #![proptest_config(ProptestConfig { cases: 24, .. ProptestConfig::default() })]

    #[test]
    fn fade_margin_matches_reference(which in 0usize..4, p in 0.0f64..20.0, outage in log_uniform(1e-6, 0.5)) {
        let (m, rm) = match which {
            0 => (FadingModel::Rayleigh, reference::Fading::Rayleigh),
            1 => (FadingModel::Rician { k_factor: Db(p as f32) }, reference::Fading::Rician(f64::from(p as f32))),
            2 => {
                let s = 1.0 + p * 0.6;
                (FadingModel::LogNormal { sigma: Db(s as f32) }, reference::Fading::LogNormal(f64::from(s as f32)))
            }
            _ => {
                let s = 1.0 + p * 0.6;
                (FadingModel::Composite { sigma: Db(s as f32) }, reference::Fading::Composite(f64::from(s as f32)))
            }
        };
        let got = ok(margin_for_outage(m, outage as f32), "margin_for_outage");
        let want = reference::margin_for_outage(rm, f64::from(outage as f32)).unwrap_or(f64::NAN);
        prop_assert!((f64::from(got.0) - want).abs() <= MAX_DB, "{m:?} {outage}: {got:?} vs {want}");
    }

    #[test]
    fn edge_for_area_matches_reference(sigma in 2.0f64..14.0, n in 2.0f64..5.0, area in 0.3f64..0.995) {
        let got = ok(edge_probability_for_area(area as f32, Db(sigma as f32), n as f32), "edge");
        let want = reference::edge_for_area(f64::from(area as f32), f64::from(sigma as f32), f64::from(n as f32))
            .unwrap_or(f64::NAN);
        prop_assert!((f64::from(got) - want).abs() <= 1e-4, "{got} vs {want}");
    }
}

// ---------------------------------------------------------------------------
// Rician under log-normal shadowing

/// The engine's Simpson rule (f32) against the reference's adaptive
/// quadrature of the Rician outage over the log-normal mean (f64), at
/// margins that give outages from about 0.3 down to 1e-4.
#[test]
fn rician_lognormal_outage_matches_reference() {
    for (k, s) in [
        (-5.0, 2.0),
        (0.0, 6.0),
        (6.0, 4.0),
        (12.0, 2.0),
        (15.0, 8.0),
    ] {
        for margin in [0.0, 3.0, 12.0, 25.0] {
            let m = FadingModel::RicianLogNormal {
                k_factor: Db(k as f32),
                sigma: Db(s as f32),
            };
            let want = reference::outage(reference::Fading::RicianLogNormal(k, s), margin);
            if want < 1e-5 {
                continue;
            }
            let got = f64::from(ok(outage_for_margin(m, Db(margin as f32)), "outage"));
            // As for the other fading models: relative error of the outage.
            assert!(
                rel(got, want) <= MAX_REL_OUTAGE,
                "{m:?} at {margin} dB: {got} vs {want}"
            );
        }
    }
}

#[test]
fn rician_lognormal_meets_its_limits() {
    // With little shadowing it is the Rician margin; with a weak line of
    // sight (K = −30 dB) the Suzuki (Rayleigh × log-normal) one.
    let rician = ok(
        margin_for_availability(FadingModel::Rician { k_factor: Db(6.0) }, 0.99),
        "rician",
    );
    let thin = ok(
        margin_for_availability(
            FadingModel::RicianLogNormal {
                k_factor: Db(6.0),
                sigma: Db(0.1),
            },
            0.99,
        ),
        "rician-lognormal",
    );
    assert!((thin.0 - rician.0).abs() < 0.05, "{thin:?} vs {rician:?}");
    let suzuki = ok(
        margin_for_availability(FadingModel::Composite { sigma: Db(4.0) }, 0.99),
        "composite",
    );
    let weak = ok(
        margin_for_availability(
            FadingModel::RicianLogNormal {
                k_factor: Db(-30.0),
                sigma: Db(4.0),
            },
            0.99,
        ),
        "rician-lognormal",
    );
    assert!((weak.0 - suzuki.0).abs() < 0.05, "{weak:?} vs {suzuki:?}");
    // Shadowing costs margin on top of the Rician fading.
    let shadowed = ok(
        margin_for_availability(
            FadingModel::RicianLogNormal {
                k_factor: Db(6.0),
                sigma: Db(4.0),
            },
            0.99,
        ),
        "rician-lognormal",
    );
    assert!(shadowed.0 > rician.0 + 1.0, "{shadowed:?} vs {rician:?}");
}
