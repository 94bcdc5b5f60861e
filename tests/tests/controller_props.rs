//! Property tests of the controller: whatever it is fed (NaN, ±inf, huge
//! values, long loss runs, beacons, missing records, time going back), the
//! power it chooses is finite, inside the radio's range, within the EIRP
//! cap, on the supported grid, and moves at most the step limit per update.

use headroom::control::REPLAY_WINDOW;
use headroom::control::{
    Controller, ControllerConfig, EirpCap, LevelTable, Observation, Outcome, PowerSteps, Replay,
};
use headroom::record::LogRecord;
use headroom::units::{Db, Dbi, Dbm};
use proptest::prelude::*;

/// Tolerance of the float comparisons, dB.
const EPS: f32 = 1e-3;

/// A number as a broken radio or log might give it.
fn wild() -> impl Strategy<Value = f32> {
    prop_oneof![
        6 => -160.0f32..40.0,
        1 => Just(f32::NAN),
        1 => Just(f32::INFINITY),
        1 => Just(f32::NEG_INFINITY),
        1 => any::<f32>(),
        1 => prop::sample::select(vec![1e30f32, -1e30, f32::MAX, f32::MIN, 0.0, -0.0, 1e-40]),
    ]
}

/// One stimulus; `Feedback` with `rssi: None` is a sane reading derived
/// from the power the controller chose and a path loss.
#[derive(Debug, Clone)]
enum Stim {
    Feedback {
        pl: f32,
        noise: f32,
        wild_rssi: Option<f32>,
        wild_tx: Option<f32>,
        snr: Option<f32>,
    },
    Acked,
    Lost(u16),
    Beacon {
        tx: f32,
        rssi: f32,
    },
    Missing,
}

fn stim() -> impl Strategy<Value = Stim> {
    prop_oneof![
        8 => (
            40.0f32..170.0,
            prop_oneof![4 => -125.0f32..-90.0, 1 => wild()],
            prop::option::weighted(0.15, wild()),
            prop::option::weighted(0.1, wild()),
            prop::option::weighted(0.15, wild()),
        )
            .prop_map(|(pl, noise, wild_rssi, wild_tx, snr)| Stim::Feedback {
                pl,
                noise,
                wild_rssi,
                wild_tx,
                snr
            }),
        2 => Just(Stim::Acked),
        2 => prop_oneof![4 => 1u16..4, 1 => 4u16..120].prop_map(Stim::Lost),
        1 => (wild(), wild()).prop_map(|(tx, rssi)| Stim::Beacon { tx, rssi }),
        1 => Just(Stim::Missing),
    ]
}

/// Time step before a stimulus: usually forward, sometimes a long gap,
/// sometimes backwards.
fn dt() -> impl Strategy<Value = i64> {
    prop_oneof![
        8 => 0i64..20_000,
        1 => 3_000_000i64..10_000_000,
        1 => -50_000i64..0,
    ]
}

/// A controller configuration, valid or not (invalid ones are skipped).
fn config() -> impl Strategy<Value = ControllerConfig> {
    (
        (
            -20.0f32..10.0,
            0.0f32..30.0,
            -2.0f32..40.0,
            -3.0f32..10.0,
            0.0f32..1.0,
        ),
        (0.25f32..4.0, 1.0f32..4.0, 1.0f32..4.0, 0.0f32..3.0),
        (0.001f32..0.3, 0.05f32..2.0, 2u16..16, 1u16..6, 1u16..600),
        prop::option::weighted(0.3, prop::collection::vec(-25.0f32..35.0, 1..16)),
    )
        .prop_map(|(radio, steps, ctl, table)| {
            let (min, span, cap_extra, gain, start_frac) = radio;
            let (step, up_mult, down_mult, deadband) = steps;
            let (target, mstep, min_readings, climb, memory) = ctl;
            let max = min + span;
            let cap = min + gain + cap_extra;
            let ceiling = max.min(cap - gain);
            let start = min + start_frac * (ceiling - min).max(0.0);
            let (steps, gap) = match table {
                Some(mut levels) => {
                    levels.sort_by(|a, b| a.total_cmp(b));
                    levels.dedup_by(|a, b| (*a - *b).abs() < 0.01);
                    let gap = levels
                        .windows(2)
                        .map(|w| w[1] - w[0])
                        .fold(0.0f32, f32::max);
                    let l: Vec<Dbm> = levels.into_iter().map(Dbm).collect();
                    match LevelTable::new(&l) {
                        Ok(t) => (PowerSteps::Table(t), gap),
                        Err(_) => (PowerSteps::Uniform(Db(step)), step),
                    }
                }
                None => (PowerSteps::Uniform(Db(step)), step),
            };
            ControllerConfig {
                target_outage: target,
                min_tx_dbm: Dbm(min),
                max_tx_dbm: Dbm(max),
                eirp_cap_dbm: EirpCap::AtMost(Dbm(cap)),
                antenna_gain_dbi: Dbi(gain),
                start_tx_dbm: Dbm(start),
                steps,
                max_step_up_db: Db(gap.max(0.1) * up_mult),
                max_step_down_db: Db(gap.max(0.1) * down_mult),
                deadband_db: Db(deadband),
                margin_step_db: Db(mstep),
                min_readings,
                climb_after_losses: climb,
                spread_memory: memory,
                ..ControllerConfig::sub_ghz_node()
            }
        })
}

/// `p` is a level of the configuration's grid (checked from the config, not
/// with the controller's own test).
fn on_grid(cfg: &ControllerConfig, p: f32) -> bool {
    match cfg.steps {
        PowerSteps::Uniform(s) => {
            let k = (p - cfg.min_tx_dbm.0) / s.0;
            (k - k.round()).abs() * s.0 < EPS
        }
        PowerSteps::Table(t) => t.levels().iter().any(|l| (l.0 - p).abs() < EPS),
    }
}

/// The invariants of one chosen power, after `prev`.
fn check(cfg: &ControllerConfig, prev: f32, p: f32) -> Result<(), TestCaseError> {
    prop_assert!(p.is_finite(), "power {p} not finite");
    prop_assert!(
        p >= cfg.min_tx_dbm.0 - EPS,
        "power {p} below min {}",
        cfg.min_tx_dbm.0
    );
    prop_assert!(
        p <= cfg.max_tx_dbm.0 + EPS,
        "power {p} above max {}",
        cfg.max_tx_dbm.0
    );
    prop_assert!(
        p + cfg.antenna_gain_dbi.0 <= cfg.eirp_cap_dbm.level().map_or(f32::INFINITY, |c| c.0) + EPS,
        "EIRP {} above cap {}",
        p + cfg.antenna_gain_dbi.0,
        cfg.eirp_cap_dbm.level().map_or(f32::INFINITY, |c| c.0)
    );
    prop_assert!(on_grid(cfg, p), "power {p} not on the grid {:?}", cfg.steps);
    prop_assert!(p - prev <= cfg.max_step_up_db.0 + EPS, "rise {prev} -> {p}");
    prop_assert!(
        prev - p <= cfg.max_step_down_db.0 + EPS,
        "fall {prev} -> {p}"
    );
    Ok(())
}

fn drive<const W: usize>(
    cfg: ControllerConfig,
    script: &[(i64, Stim)],
) -> Result<(), TestCaseError> {
    let Ok(mut c) = Controller::<W>::new(cfg) else {
        return Ok(());
    };
    let mut prev = c.tx().0;
    check(&cfg, prev, prev)?;
    let mut t: u64 = 1_000_000_000;
    let feed =
        |c: &mut Controller<W>, obs: Observation, prev: &mut f32| -> Result<(), TestCaseError> {
            let d = c.update(&obs);
            check(&cfg, *prev, d.tx.0)?;
            prop_assert_eq!(d.tx, c.tx());
            prop_assert!(d.margin().0.is_finite());
            prop_assert!(
                d.margin().0 >= cfg.margin_min_db.0 - EPS
                    && d.margin().0 <= cfg.margin_max_db.0 + EPS
            );
            *prev = d.tx.0;
            Ok(())
        };
    for (dt, s) in script {
        t = t.saturating_add_signed(*dt);
        match *s {
            Stim::Feedback {
                pl,
                noise,
                wild_rssi,
                wild_tx,
                snr,
            } => {
                let tx = wild_tx.unwrap_or(c.tx().0);
                let rssi = wild_rssi.unwrap_or(c.tx().0 + 4.3 - pl);
                let obs = Observation::Feedback {
                    t_ms: t,
                    tx: Dbm(tx),
                    rssi: Dbm(rssi),
                    noise: Dbm(noise),
                    snr: snr.map(Db),
                };
                feed(&mut c, obs, &mut prev)?;
            }
            Stim::Acked => feed(&mut c, Observation::Acked { t_ms: t }, &mut prev)?,
            Stim::Lost(n) => {
                for i in 0..u64::from(n) {
                    feed(&mut c, Observation::Lost { t_ms: t + i }, &mut prev)?;
                }
            }
            Stim::Beacon { tx, rssi } => {
                let obs = Observation::Beacon {
                    t_ms: t,
                    beacon_tx: Dbm(tx),
                    rssi: Dbm(rssi),
                };
                feed(&mut c, obs, &mut prev)?;
            }
            Stim::Missing => feed(&mut c, Observation::Missing { t_ms: t }, &mut prev)?,
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn chosen_power_is_always_legal(
        cfg in config(),
        script in prop::collection::vec((dt(), stim()), 0..300),
    ) {
        prop_assume!(cfg.validate().is_ok());
        drive::<32>(cfg, &script)?;
        drive::<16>(cfg, &script)?;
    }

    /// The same through the replay, on arbitrary (often broken) records; the
    /// summary's counts add up.
    #[test]
    fn replay_keeps_power_legal_and_counts_add_up(
        cfg in config(),
        recs in prop::collection::vec(
            (dt(), prop::option::weighted(0.9, wild()), prop::option::weighted(0.9, -160.0f32..0.0),
             prop::option::weighted(0.9, prop_oneof![4 => -125.0f32..-95.0, 1 => wild()]),
             prop::option::weighted(0.1, wild())),
            0..400,
        ),
    ) {
        prop_assume!(cfg.validate().is_ok());
        let Ok(mut r) = Replay::<REPLAY_WINDOW>::new(cfg) else { return Ok(()) };
        let mut prev = r.controller().tx().0;
        let mut t: u64 = 0;
        let (mut lost, mut unjudged) = (0u64, 0u64);
        for (dt, tx, rssi, noise, wild_rssi) in &recs {
            t = t.saturating_add_signed(*dt);
            let rec = LogRecord { t_ms: t, tx_dbm: *tx, rssi_dbm: wild_rssi.or(*rssi), noise_dbm: *noise, rate: None };
            let s = r.step(&rec);
            prop_assert_eq!(s.chosen.0, prev);
            check(&cfg, prev, s.next_tx.0)?;
            match s.outcome {
                Outcome::Lost => lost += 1,
                Outcome::Unjudged => unjudged += 1,
                Outcome::Delivered => {}
                Outcome::Held => prop_assert!(false, "held without a duty limit"),
            }
            if let Some(snr) = s.replayed_snr {
                prop_assert!(snr.0.is_finite());
                prop_assert_eq!(s.outcome == Outcome::Lost, snr.0 < cfg.required_snr_db.0);
            }
            prev = s.next_tx.0;
        }
        let sum = r.summary();
        prop_assert_eq!(sum.records, recs.len() as u64);
        prop_assert_eq!(sum.judged + sum.unjudged, sum.records);
        prop_assert_eq!(sum.lost, lost);
        prop_assert_eq!(sum.unjudged, unjudged);
        if let Some(m) = sum.mean_tx_dbm() {
            prop_assert!(m.0 >= cfg.min_tx_dbm.0 - EPS && m.0 <= cfg.tx_ceiling().0 + EPS);
        }
    }
}

/// The settings the issue names as contradictory or dangerous are refused,
/// with the setting named.
#[test]
fn contradictory_settings_are_refused_by_name() {
    let base = ControllerConfig::sub_ghz_node();
    let cases: Vec<(ControllerConfig, &str)> = vec![
        (
            ControllerConfig {
                min_tx_dbm: Dbm(23.0),
                ..base
            },
            "min_tx_dbm",
        ),
        (
            ControllerConfig {
                eirp_cap_dbm: EirpCap::AtMost(Dbm(-10.0)),
                ..base
            },
            "eirp_cap_dbm",
        ),
        (
            ControllerConfig {
                target_outage: 0.0,
                ..base
            },
            "target_outage",
        ),
        (
            ControllerConfig {
                target_outage: 1.0,
                ..base
            },
            "target_outage",
        ),
        (
            ControllerConfig {
                target_outage: f32::NAN,
                ..base
            },
            "target_outage",
        ),
        (
            ControllerConfig {
                required_snr_db: Db(f32::NAN),
                ..base
            },
            "required_snr_db",
        ),
        (
            ControllerConfig {
                antenna_gain_dbi: Dbi(f32::INFINITY),
                ..base
            },
            "antenna_gain_dbi",
        ),
        (
            ControllerConfig {
                steps: PowerSteps::Uniform(Db(0.0)),
                ..base
            },
            "steps.uniform",
        ),
        (
            ControllerConfig {
                steps: PowerSteps::Uniform(Db(-1.0)),
                ..base
            },
            "steps.uniform",
        ),
        (
            ControllerConfig {
                max_step_up_db: Db(0.0),
                ..base
            },
            "max_step_up_db",
        ),
        (
            ControllerConfig {
                max_step_down_db: Db(0.5),
                ..base
            },
            "max_step_down_db",
        ),
        (
            ControllerConfig {
                start_tx_dbm: Dbm(20.0),
                ..base
            },
            "start_tx_dbm",
        ),
        (
            ControllerConfig {
                margin_min_db: Db(5.0),
                margin_max_db: Db(1.0),
                ..base
            },
            "margin_min_db",
        ),
        (
            ControllerConfig {
                min_readings: 0,
                ..base
            },
            "min_readings",
        ),
        (
            ControllerConfig {
                spread_memory: 0,
                ..base
            },
            "spread_memory",
        ),
        (
            ControllerConfig {
                stale_after_ms: 0,
                ..base
            },
            "stale_after_ms",
        ),
        (
            ControllerConfig {
                rssi_min_dbm: Dbm(30.0),
                ..base
            },
            "rssi_min_dbm",
        ),
    ];
    for (cfg, name) in cases {
        match cfg.validate() {
            Err(e) => {
                assert_eq!(e.setting(), name, "{e}");
                assert!(e.to_string().starts_with(name), "{e}");
                assert!(Controller::<32>::new(cfg).is_err());
            }
            Ok(()) => panic!("{name}: accepted {cfg:?}"),
        }
    }
    assert!(
        Controller::<0>::new(base).is_err(),
        "a window of zero is refused"
    );
    let table = LevelTable::new(&[Dbm(0.0), Dbm(-3.0)]);
    assert!(table.is_err(), "descending table refused");
    assert!(LevelTable::new(&[]).is_err());
    assert!(base.validate().is_ok());
}

/// State size: the whole controller, settings, rate table, energy profile
/// and the hour of duty-cycle slots included, fits in 1 KiB for W = 32
/// (cost target; the power controller alone was 256 bytes).
#[test]
fn state_fits_1_kib() {
    let state = core::mem::size_of::<Controller<32>>();
    assert!(state <= 1024, "{state} bytes");
}
