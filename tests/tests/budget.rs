//! The engine's link budget against the independent f64 reference in
//! `tests/src/budget.rs`, and against check values of the trade.

use headroom::budget::{
    free_space_frequency_scaling, AntennaScaling, BudgetError, FadeAllowance, ItemNoise, Link,
    NoiseSpec, Requirement, Side,
};
use headroom::units::{Db, Dbm, Hertz, Kelvin};
use headroom_tests::budget::{evaluate, system_temperature_k, RefLink, RefStage};
use proptest::prelude::*;

/// Largest difference allowed between engine (f32) and reference (f64) on a
/// dB quantity of a budget.
const MAX_ERROR_DB: f64 = 0.01;

#[allow(clippy::too_many_arguments)]
fn both(
    tx: f32,
    tx_gains: &[f32],
    pl: f32,
    path_gains: &[f32],
    rx_gains: &[f32],
    bw: f32,
    nf: f32,
    ta: Option<f32>,
    req: f32,
    fade: f32,
) -> (
    headroom::budget::BudgetResult,
    headroom_tests::budget::RefBudget,
) {
    let mut l: Link<16> = Link::new(
        Dbm(tx),
        Db(pl),
        NoiseSpec {
            bandwidth: Hertz(bw),
            noise_figure: Db(nf),
            antenna_temperature: ta.map(Kelvin),
        },
        Requirement::CarrierToNoise(Db(req)),
        FadeAllowance::Fixed(Db(fade)),
    );
    for (side, gains) in [
        (Side::Transmitter, tx_gains),
        (Side::Path, path_gains),
        (Side::Receiver, rx_gains),
    ] {
        for g in gains {
            assert_eq!(l.push("item", side, Db(*g)), Ok(()));
        }
    }
    let e = l.evaluate().expect("valid budget");
    let r = evaluate(&RefLink {
        tx_dbm: tx.into(),
        tx_gains_db: tx_gains.iter().map(|&g| g.into()).collect(),
        path_loss_db: pl.into(),
        path_gains_db: path_gains.iter().map(|&g| g.into()).collect(),
        rx_gains_db: rx_gains.iter().map(|&g| g.into()).collect(),
        bandwidth_hz: bw.into(),
        noise_figure_db: nf.into(),
        antenna_k: ta.map(f64::from),
        required_cn_db: req.into(),
        fade_db: fade.into(),
    });
    (e, r)
}

proptest! {
    #[test]
    fn engine_matches_reference(
        tx in -30.0f32..36.0,
        tx_gains in proptest::collection::vec(-10.0f32..25.0, 0..4),
        pl in 30.0f32..220.0,
        path_gains in proptest::collection::vec(-30.0f32..0.0, 0..3),
        rx_gains in proptest::collection::vec(-10.0f32..40.0, 0..4),
        bw in 100.0f32..40e6,
        nf in 0.0f32..20.0,
        ta in proptest::option::of(5.0f32..3000.0),
        req in -25.0f32..30.0,
        fade in 0.0f32..40.0,
    ) {
        let (e, r) = both(tx, &tx_gains, pl, &path_gains, &rx_gains, bw, nf, ta, req, fade);
        prop_assert!((f64::from(e.eirp.0) - r.eirp_dbm).abs() < MAX_ERROR_DB);
        prop_assert!((f64::from(e.rx_power.0) - r.rx_dbm).abs() < MAX_ERROR_DB);
        prop_assert!((f64::from(e.noise_power.0) - r.noise_dbm).abs() < MAX_ERROR_DB);
        prop_assert!((f64::from(e.cn.0) - r.cn_db).abs() < MAX_ERROR_DB);
        prop_assert!((f64::from(e.margin.0) - r.margin_db).abs() < MAX_ERROR_DB);
    }

    #[test]
    fn solving_for_tx_power_gives_the_target_margin(
        tx in -20.0f32..30.0, pl in 60.0f32..180.0, target in -10.0f32..20.0,
    ) {
        let mut l: Link<4> = Link::new(
            Dbm(tx), Db(pl),
            NoiseSpec { bandwidth: Hertz(125e3), noise_figure: Db(6.0), antenna_temperature: None },
            Requirement::CarrierToNoise(Db(-7.5)), FadeAllowance::Fixed(Db(10.0)));
        let p = l.tx_power_for_margin(Db(target)).expect("solvable");
        l.tx_power = p;
        let m = l.evaluate().expect("valid").margin.0;
        prop_assert!((m - target).abs() < 1e-3);
    }
}

#[test]
fn noise_floor_of_a_125_khz_receiver() {
    // kT0 = −173.98 dBm/Hz at T0 = 290 K (common practice, from k = 1.380649e−23 J/K);
    // + 10·log10(125 kHz) = 50.97 dB, + NF 6 dB: −117.01 dBm.
    let (e, _) = both(14.0, &[], 120.0, &[], &[], 125e3, 6.0, None, 0.0, 0.0);
    assert!(
        (e.noise_power.0 + 117.01).abs() < 0.01,
        "{:?}",
        e.noise_power
    );
    // Sensitivity is the noise floor plus the required C/N (definition).
    assert!((e.sensitivity.0 - e.noise_power.0).abs() < 1e-4);
}

#[test]
fn cold_sky_antenna_lowers_the_noise() {
    // Ta = 50 K, NF 1 dB (Te = 75.09 K): Tsys = 125.09 K, N = 10·log10(k·Tsys·B)
    // = −177.62 dBm/Hz (from the definition; common practice).
    let (e, r) = both(0.0, &[], 100.0, &[], &[], 1.0, 1.0, Some(50.0), 0.0, 0.0);
    assert!((e.system_temperature.0 - 125.09).abs() < 0.05);
    assert!((f64::from(e.noise_power.0) - r.noise_dbm).abs() < MAX_ERROR_DB);
    assert!(
        (e.noise_power.0 + 177.62).abs() < 0.01,
        "{:?}",
        e.noise_power
    );
}

#[test]
fn eb_n0_and_required_cn_from_a_bit_rate() {
    // Eb/N0 = C/N + 10·log10(B/Rb) (definition). With B = Rb the two agree.
    let l: Link<2> = Link::new(
        Dbm(-100.0),
        Db(0.0),
        NoiseSpec {
            bandwidth: Hertz(9600.0),
            noise_figure: Db(3.0),
            antenna_temperature: None,
        },
        Requirement::EbN0 {
            ebn0: Db(10.0),
            bit_rate_bps: 9600.0,
        },
        FadeAllowance::None,
    );
    let r = l.evaluate().expect("valid");
    let ebn0 = r.ebn0.expect("bit rate given").0;
    assert!((ebn0 - r.cn.0).abs() < 1e-3);
    assert!((r.required_cn.0 - 10.0).abs() < 1e-4);
}

#[test]
fn bad_inputs_are_refused() {
    let base = || -> Link<2> {
        Link::new(
            Dbm(0.0),
            Db(100.0),
            NoiseSpec {
                bandwidth: Hertz(1e3),
                noise_figure: Db(3.0),
                antenna_temperature: None,
            },
            Requirement::CarrierToNoise(Db(10.0)),
            FadeAllowance::None,
        )
    };
    let mut l = base();
    l.tx_power = Dbm(f32::NAN);
    assert!(l.evaluate().is_err());
    let mut l = base();
    l.noise.bandwidth = Hertz(-1.0);
    assert!(l.evaluate().is_err());
    let mut l = base();
    l.fade = FadeAllowance::Fixed(Db(-3.0));
    assert!(l.evaluate().is_err());
    let mut l = base();
    l.requirement = Requirement::EbN0 {
        ebn0: Db(10.0),
        bit_rate_bps: 0.0,
    };
    assert!(l.evaluate().is_err());
    let mut l = base();
    l.path_loss = Db(f32::INFINITY);
    assert!(l.tx_power_for_margin(Db(0.0)).is_err());
}

#[test]
fn range_scales_inversely_with_frequency_when_gains_are_fixed() {
    // Friis: Pr ∝ Gt·Gr·λ²; with G = 4πA/λ² for a fixed aperture (common practice).
    let fixed_gains =
        free_space_frequency_scaling(Hertz(868e6), Hertz(2.44e9), AntennaScaling::FixedGains)
            .expect("valid");
    assert!((fixed_gains.0 + 8.977).abs() < 0.01, "{fixed_gains:?}");
    let apertures =
        free_space_frequency_scaling(Hertz(868e6), Hertz(2.44e9), AntennaScaling::FixedApertures)
            .expect("valid");
    assert!((apertures.0 - 8.977).abs() < 0.01, "{apertures:?}");
}

// --- the receive chain's noise ------------------------------------------------

fn chain_link(ta: f32, nf: f32) -> Link<16> {
    Link::new(
        Dbm(0.0),
        Db(100.0),
        NoiseSpec {
            bandwidth: Hertz(10e3),
            noise_figure: Db(nf),
            antenna_temperature: Some(Kelvin(ta)),
        },
        Requirement::CarrierToNoise(Db(10.0)),
        FadeAllowance::None,
    )
}

#[test]
fn feeder_before_the_receiver_gives_the_textbook_system_temperature() {
    // A low-noise ground station: Ta = 50 K, a 1 dB feeder at 290 K, then a
    // receiver of 0.5 dB noise figure. Textbook result at the receiver input
    // (common practice; e.g. Pozar, Microwave Engineering, §10.1):
    // T_sys = Ta/L + Tp·(1 − 1/L) + Trx
    //       = 39.716 + 59.645 + 35.385 = 134.746 K,
    // computed here in f64 and by the independent reference in
    // tests/src/budget.rs (output-referred walk of the chain).
    let mut l = chain_link(50.0, 0.5);
    l.push("yagi", Side::Receiver, Db(14.0)).expect("antenna");
    l.push_item(
        "feeder",
        Side::Receiver,
        Db(-1.0),
        ItemNoise::Passive {
            temperature: Kelvin(290.0),
        },
    )
    .expect("feeder");
    let r = l.evaluate().expect("budget");
    let big_l = 10f64.powf(0.1);
    let trx = 290.0 * (10f64.powf(0.05) - 1.0);
    let textbook = 50.0 / big_l + 290.0 * (1.0 - 1.0 / big_l) + trx;
    assert!((textbook - 134.746).abs() < 0.001, "{textbook}");
    let reference = system_temperature_k(
        50.0,
        &[RefStage::Passive {
            loss_db: 1.0,
            temperature_k: 290.0,
        }],
        0.5,
    );
    assert!((reference - textbook).abs() < 1e-9);
    assert!(
        (f64::from(r.system_temperature.0) - textbook).abs() / textbook < 1e-5,
        "{r:?}"
    );
    // Counting the feeder as signal loss only would leave T = Ta + Trx =
    // 85.4 K at the same point: C/N 1.98 dB too optimistic.
    let optimistic = 10.0 * (textbook / (50.0 + trx)).log10();
    assert!((optimistic - 1.98).abs() < 0.01, "{optimistic}");
    // G/T at the antenna terminals: 14 dBi − 10·log10(T_sys·L).
    let gt = 14.0 - 10.0 * (textbook * big_l).log10();
    assert!((f64::from(r.g_over_t.0) - gt).abs() < MAX_ERROR_DB, "{r:?}");
}

#[test]
fn an_antenna_gain_after_the_chain_is_refused() {
    let mut l = chain_link(290.0, 3.0);
    l.push_item(
        "lna",
        Side::Receiver,
        Db(20.0),
        ItemNoise::Amplifier {
            noise_figure: Db(1.0),
        },
    )
    .expect("lna");
    assert_eq!(
        l.push("yagi", Side::Receiver, Db(14.0)),
        Err(BudgetError::AntennaAfterChain)
    );
    assert_eq!(
        l.push_item(
            "pa",
            Side::Transmitter,
            Db(20.0),
            ItemNoise::Amplifier {
                noise_figure: Db(1.0)
            }
        ),
        Err(BudgetError::NoiseOffReceiveSide)
    );
}

fn stage() -> impl Strategy<Value = RefStage> {
    prop_oneof![
        (0.1f64..6.0, 20.0f64..400.0).prop_map(|(loss_db, temperature_k)| RefStage::Passive {
            loss_db,
            temperature_k
        }),
        (5.0f64..35.0, 0.3f64..8.0).prop_map(|(gain_db, noise_figure_db)| {
            RefStage::Amplifier {
                gain_db,
                noise_figure_db,
            }
        }),
    ]
}

proptest! {
    /// Any chain of passive losses and amplifiers: the engine's Friis cascade
    /// (input-referred, f32) against the reference's output-referred walk (f64).
    #[test]
    fn receive_chain_matches_reference(
        ta in 5.0f64..3000.0,
        nf in 0.3f64..12.0,
        chain in proptest::collection::vec(stage(), 0..5),
    ) {
        let mut l = chain_link(ta as f32, nf as f32);
        l.push("antenna", Side::Receiver, Db(10.0)).expect("antenna");
        for s in &chain {
            let (gain, noise) = match *s {
                RefStage::Passive { loss_db, temperature_k } => (
                    -loss_db,
                    ItemNoise::Passive { temperature: Kelvin(temperature_k as f32) },
                ),
                RefStage::Amplifier { gain_db, noise_figure_db } => (
                    gain_db,
                    ItemNoise::Amplifier { noise_figure: Db(noise_figure_db as f32) },
                ),
            };
            l.push_item("stage", Side::Receiver, Db(gain as f32), noise).expect("stage");
        }
        let r = l.evaluate().expect("budget");
        let t = system_temperature_k(f64::from(ta as f32), &chain_f32(&chain), f64::from(nf as f32));
        let err_db = 10.0 * (f64::from(r.system_temperature.0) / t).log10();
        prop_assert!(err_db.abs() < MAX_ERROR_DB, "{} K vs {t} K", r.system_temperature.0);
    }
}

/// The chain with each number rounded to f32, as the engine receives it.
fn chain_f32(chain: &[RefStage]) -> Vec<RefStage> {
    let r = |x: f64| f64::from(x as f32);
    chain
        .iter()
        .map(|s| match *s {
            RefStage::Passive {
                loss_db,
                temperature_k,
            } => RefStage::Passive {
                loss_db: r(loss_db),
                temperature_k: r(temperature_k),
            },
            RefStage::Amplifier {
                gain_db,
                noise_figure_db,
            } => RefStage::Amplifier {
                gain_db: r(gain_db),
                noise_figure_db: r(noise_figure_db),
            },
        })
        .collect()
}
