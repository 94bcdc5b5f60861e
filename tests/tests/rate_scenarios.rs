//! The joint (rate, power) controller on seeded synthetic links, against the
//! baselines of `headroom::control::baseline`, and the duty-cycle guarantee
//! checked by an exact sliding window.
//!
//! Each scenario is a log written by the engine's channel simulator at
//! 14 dBm on a rate schedule (`headroom::sim::RateSchedule`), every packet
//! reported; every policy replays the same log by the replay's rule (the
//! packet is lost when `rssi − tx + chosen − noise − 10·log10(B_m/B_logged)`
//! is below rate m's required SNR), so all see the same channel.
//!
//! Policies:
//! - the joint controller (`Replay::with_energy` over the whole table);
//! - (a) power-only control at each fixed rate (the same controller with a
//!   table of that one rate);
//! - (b) the rate rule of common practice (`CommonPracticeRate`: best SNR of
//!   the last 20 packets, 10 dB installation margin, 3 dB power steps);
//! - (c) the best single rate with hindsight: for each rate the fixed
//!   margin whose loss over the whole log is at most the target for the
//!   least charge per delivered packet (`baseline::hindsight_margin`: the
//!   smallest such margin by bisection to 0.01 dB, then 0.5 dB steps up
//!   while a cheaper one turns up), then the rate with the least charge per
//!   delivered packet.
//!
//! The table the README shows:
//! `cargo test --release -p headroom-tests --test rate_scenarios -- --nocapture rate_comparison_table`

use headroom::control::baseline::{self, single_rate, CommonPracticeRate, FixedMarginRate, Rule};
use headroom::control::{ControllerConfig, DutyLimit, Outcome, Replay, Summary};
use headroom::energy::{
    ChirpModem, EnergyProfile, LowDataRate, Microamps, Microcoulombs, Milliamps, Milliseconds,
    TxCurrentTable, Volts,
};
use headroom::propagation::PathLossModel;
use headroom::rate::{Rate, RateTable};
use headroom::record::LogRecord;
use headroom::sim::{
    ChannelConfig, FastFading, NoiseFloor, PowerPattern, RateSchedule, Shadowing, Synth, Trajectory,
};
use headroom::units::{Db, Dbi, Dbm, Hertz, Metres};

/// Window of the controller (the replay's).
const W: usize = headroom::control::REPLAY_WINDOW;
/// Power the logs are written at.
const LOG_TX: f32 = 14.0;
/// Payload of every packet, bytes.
const PAYLOAD: u8 = 20;

/// Chirp spread spectrum at 125 kHz, spreading factors 7..12: demodulator
/// SNR limits −7.5 ... −20 dB in 2.5 dB steps (common practice, from
/// memory); airtime of a 20-byte payload, coding rate 4/5, 8 preamble
/// symbols, explicit header, CRC, low data rate optimisation automatic,
/// computed by the engine's `ChirpModem::airtime` (checked against its
/// published formula in `tests/tests/energy.rs`).
fn rates() -> RateTable {
    let names = ["sf7", "sf8", "sf9", "sf10", "sf11", "sf12"];
    let mut v = Vec::new();
    for (i, name) in names.iter().enumerate() {
        let sf = 7 + i as u8;
        let m = ChirpModem {
            spreading_factor: sf,
            bandwidth: Hertz(125e3),
            coding_rate: 1,
            preamble_symbols: 8,
            explicit_header: true,
            crc: true,
            low_data_rate: LowDataRate::Auto,
        };
        let air = m.airtime(PAYLOAD).expect("airtime");
        let us = (air.0 * 1000.0).round() as u32;
        v.push(Rate::new(name, Db(-7.5 - 2.5 * i as f32), us, Some(125e3)).expect("rate"));
    }
    RateTable::new(&v).expect("table")
}

/// An invented sub-GHz node's energy profile (invented for the test, not a
/// product's data sheet): transmit current from 18 mA at −9 dBm to 125 mA
/// at +22 dBm, a 30 ms receive window at 11 mA, 40 µC of wake-up and sensor
/// work per packet, 2 µA asleep.
fn profile() -> EnergyProfile {
    let t = TxCurrentTable::from_points(&[
        (-9.0, 18.0),
        (0.0, 22.0),
        (5.0, 27.0),
        (10.0, 34.0),
        (14.0, 44.0),
        (17.0, 90.0),
        (20.0, 110.0),
        (22.0, 125.0),
    ])
    .expect("table");
    EnergyProfile::new(
        Volts(3.3),
        t,
        Milliseconds(50.0),
        Milliseconds(30.0),
        Milliamps(11.0),
        Microcoulombs(40.0),
        Microamps(2.0),
    )
    .expect("profile")
}

fn config(target: f32, duty: DutyLimit) -> ControllerConfig {
    let t = rates();
    ControllerConfig {
        target_outage: target,
        required_snr_db: t.get(0).map(|r| r.required_snr).expect("rate 0"),
        rates: t,
        duty_limit: duty,
        ..ControllerConfig::sub_ghz_node()
    }
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Scenario {
    /// A fixed node at a moderate distance, Rayleigh fading.
    Static,
    /// A node moving between 300 m and 1 km and back at 0.2 m/s,
    /// shadowing 6 dB, Rician K = 6 dB.
    Mobile,
    /// A fixed node deep in clutter: Rayleigh fading correlated from packet
    /// to packet, shadowing 8 dB that changes over minutes.
    Fading,
}

const SCENARIOS: [Scenario; 3] = [Scenario::Static, Scenario::Mobile, Scenario::Fading];

/// Packets per scenario: one a minute for 20 days.
const PACKETS: u64 = 28_800;

impl Scenario {
    fn name(self) -> &'static str {
        match self {
            Scenario::Static => "static, Rayleigh",
            Scenario::Mobile => "mobile 0.3-1 km, shadowing 6 dB, Rician K=6 dB",
            Scenario::Fading => "static, correlated Rayleigh, shadowing 8 dB",
        }
    }

    /// Invented 868 MHz links: log-distance path loss, exponent 3.5, with
    /// the loss at 1 m set so that the mean SNR at 14 dBm lies between the
    /// fastest and the slowest rate's requirement.
    fn channel(self) -> ChannelConfig {
        let (start, speed, min, max, shadowing, fading, corr, pl_d0) = match self {
            Scenario::Static => (
                1500.0,
                0.0,
                None,
                None,
                None,
                FastFading::Rayleigh,
                0.0,
                16.0,
            ),
            Scenario::Mobile => (
                300.0,
                0.2,
                Some(Metres(300.0)),
                Some(Metres(1000.0)),
                Some(Shadowing {
                    sigma: Db(6.0),
                    decorrelation_distance: Metres(100.0),
                    time_constant_s: None,
                }),
                FastFading::Rician { k_db: 6.0 },
                0.0,
                27.0,
            ),
            Scenario::Fading => (
                1200.0,
                0.0,
                None,
                None,
                Some(Shadowing {
                    sigma: Db(8.0),
                    decorrelation_distance: Metres(100.0),
                    time_constant_s: Some(600.0),
                }),
                FastFading::Rayleigh,
                0.5,
                19.5,
            ),
        };
        ChannelConfig {
            frequency: Hertz(868.0e6),
            path_loss: PathLossModel::LogDistance {
                d0: Metres(1.0),
                pl_d0: Some(Db(pl_d0)),
                exponent: 3.5,
            },
            tx_antenna_gain: Dbi(2.15),
            rx_antenna_gain: Dbi(2.15),
            trajectory: Trajectory {
                start: Metres(start),
                speed_m_per_s: speed,
                min,
                max,
            },
            packet_interval_ms: 60_000,
            start_ms: 0,
            shadowing,
            fading,
            fading_correlation: corr,
            noise: NoiseFloor {
                mean: Dbm(-117.0),
                jitter: Db(1.0),
                bursts: None,
                burst_rise: Db(0.0),
            },
            min_snr: None,
            feedback_dropouts: None,
            report_resolution: Some(Db(0.25)),
            steps: Default::default(),
        }
    }

    /// The log, written at 14 dBm cycling sf7, sf9 and sf12 every 100
    /// packets (the rate schedule only labels the records: every rate has
    /// the same bandwidth here).
    fn log(self, seed: u64) -> Vec<LogRecord> {
        let schedule = RateSchedule::new(rates(), &[0, 2, 5], 100).expect("schedule");
        let mut s = Synth::<0>::new(self.channel(), PowerPattern::fixed(Dbm(LOG_TX)), &[], seed)
            .expect("synth")
            .with_rates(schedule);
        (0..PACKETS)
            .map(|_| s.next_record().expect("record").1)
            .collect()
    }
}

/// Loss and charge per delivered packet of one policy over one log.
#[derive(Clone, Copy, Debug)]
struct Run {
    loss: f64,
    charge_per_delivered: f64,
    /// Share of packets at each rate.
    shares: [f64; 6],
}

fn run_of(s: &Summary) -> Run {
    let mut shares = [0.0; 6];
    for (m, x) in shares.iter_mut().enumerate() {
        *x = f64::from(s.rate_share(m as u8).unwrap_or(0.0));
    }
    Run {
        loss: 1.0 - f64::from(s.delivered_fraction().expect("judged")),
        charge_per_delivered: s.charge_per_delivered_uc().expect("charge"),
        shares,
    }
}

/// The joint controller (or, with a one-rate configuration, power-only
/// control at that rate), with the sent packets for the duty checker. A
/// one-rate table has the rate at index 0: the records' rate indices point
/// into the whole table, so they are rewritten to 0 (every rate here has
/// the same bandwidth: the replayed SNR does not change).
fn run_controller(log: &[LogRecord], cfg: ControllerConfig) -> (Run, Vec<(u64, u32)>) {
    let mut r = Replay::<W>::with_energy(cfg, &profile()).expect("valid config");
    let one = cfg.rates.len() == 1;
    let mut sent = Vec::new();
    for rec in log {
        let mut rec = *rec;
        if one {
            rec.rate = rec.rate.map(|_| 0);
        }
        let s = r.step(&rec);
        if s.outcome != Outcome::Held {
            sent.push((s.t_ms, s.airtime_us.unwrap_or(0)));
        }
    }
    (run_of(r.summary()), sent)
}

/// A baseline rule fed record by record (the engine's `baseline::step`),
/// costed by the profile.
fn run_rule(log: &[LogRecord], rule: &mut impl Rule) -> Run {
    let p = profile();
    let t = rates();
    let (mut judged, mut delivered, mut charge) = (0u64, 0u64, 0.0f64);
    let mut at = [0u64; 6];
    for rec in log {
        let (tx, m, j) = baseline::step(rule, rec);
        let air = t.get(m).expect("rate").airtime_us as f32 / 1000.0;
        charge += f64::from(
            p.packet_cost_for(Dbm(tx), Milliseconds(air))
                .expect("cost")
                .charge
                .0,
        );
        at[usize::from(m)] += 1;
        let Some(j) = j else {
            continue;
        };
        judged += 1;
        delivered += u64::from(j.delivered);
    }
    let n = log.len() as f64;
    Run {
        loss: 1.0 - delivered as f64 / judged as f64,
        charge_per_delivered: charge / delivered as f64,
        shares: at.map(|c| c as f64 / n),
    }
}

fn run_common_practice(log: &[LogRecord], cfg: &ControllerConfig) -> Run {
    run_rule(log, &mut CommonPracticeRate::new(cfg))
}

fn run_fixed_margin(log: &[LogRecord], cfg: &ControllerConfig, m: u8, margin: f32) -> Run {
    run_rule(log, &mut FixedMarginRate::new(cfg, m, margin))
}

/// Baseline (c): per rate the margin that meets the target over the whole
/// log for the least charge per delivered packet (the engine's
/// `baseline::hindsight_margin`, the search `replay --baselines` uses),
/// then the cheapest rate. `None` if no rate meets it at any margin.
fn run_hindsight(log: &[LogRecord], cfg: &ControllerConfig) -> Option<(Run, u8, f32)> {
    let target = f64::from(cfg.target_outage);
    let mut best: Option<(Run, u8, f32)> = None;
    for m in 0..cfg.rates.len() as u8 {
        let found = baseline::hindsight_margin(target, |margin| {
            let r = run_fixed_margin(log, cfg, m, margin);
            Ok::<_, ()>(baseline::MarginRun {
                loss: r.loss,
                charge_per_delivered: r.charge_per_delivered,
            })
        });
        let Ok(Some((margin, _))) = found else {
            continue;
        };
        let run = run_fixed_margin(log, cfg, m, margin);
        if best.is_none_or(|(b, _, _)| run.charge_per_delivered < b.charge_per_delivered) {
            best = Some((run, m, margin));
        }
    }
    best
}

/// Exact sliding-window check: the most airtime inside any one-hour window
/// `[a, a + 1 h)`, packets counted by their overlap with it. The overlap is
/// piecewise linear in `a`, so its maximum is at a window that starts at a
/// packet's start or ends at a packet's end: every such window is checked.
fn max_airtime_in_any_hour_us(sent: &[(u64, u32)]) -> u64 {
    const HOUR_US: u64 = 3_600_000_000;
    let iv: Vec<(u64, u64)> = sent
        .iter()
        .map(|&(t_ms, a)| (t_ms * 1000, t_ms * 1000 + u64::from(a)))
        .collect();
    let mut best = 0u64;
    let mut candidates: Vec<u64> = iv.iter().map(|&(s, _)| s).collect();
    candidates.extend(iv.iter().map(|&(_, e)| e.saturating_sub(HOUR_US)));
    for a in candidates {
        let b = a + HOUR_US;
        let first = iv.partition_point(|&(_, e)| e <= a);
        let mut sum = 0u64;
        for &(s, e) in iv.iter().skip(first) {
            if s >= b {
                break;
            }
            sum += e.min(b) - s.max(a);
        }
        best = best.max(sum);
    }
    best
}

struct Row {
    scenario: Scenario,
    target: f32,
    joint: Run,
    fixed: Vec<Run>,
    common: Run,
    hindsight: Option<(Run, u8, f32)>,
    /// The hindsight rule allowed the joint controller's own loss when that
    /// is above the target (the same as `hindsight` otherwise): the
    /// comparison at equal loss.
    same_loss: Option<(Run, u8, f32)>,
}

impl Row {
    /// The joint controller meets the target (within ±30 %) and spends less
    /// per delivered packet than the best single rate chosen with hindsight
    /// at the same loss or less (none meets it: nothing to beat).
    fn wins(&self) -> bool {
        let t = f64::from(self.target);
        let meets = (self.joint.loss - t).abs() <= 0.3 * t;
        meets
            && self
                .same_loss
                .is_none_or(|(h, _, _)| self.joint.charge_per_delivered < h.charge_per_delivered)
    }
}

fn evaluate(s: Scenario, seed: u64, target: f32) -> Row {
    let log = s.log(seed);
    let cfg = config(target, DutyLimit::NoLimit);
    let (joint, _) = run_controller(&log, cfg);
    let fixed = (0..cfg.rates.len() as u8)
        .map(|m| run_controller(&log, single_rate(&cfg, m).expect("rate")).0)
        .collect();
    let hindsight = run_hindsight(&log, &cfg);
    let same_loss = if joint.loss > f64::from(target) {
        run_hindsight(&log, &config(joint.loss as f32, DutyLimit::NoLimit))
    } else {
        hindsight
    };
    Row {
        scenario: s,
        target,
        joint,
        fixed,
        common: run_common_practice(&log, &cfg),
        hindsight,
        same_loss,
    }
}

fn pct(x: f64) -> String {
    format!("{:.2} %", x * 100.0)
}

/// The rows where the joint controller does **not** beat the best single
/// rate chosen with hindsight at the same loss (measured, seeds 500..502;
/// see the README's table): none. Correlated fading at a 10 % target was
/// one until the loss price's step was scaled with the target (its noise
/// had bought slower rates on its peaks: 1.4 % dearer at equal loss, now
/// 0.5 % cheaper). Kept exact: a row listed here that starts winning fails
/// the test until it is removed, and a row not listed that stops winning
/// fails it too.
const KNOWN_SHORTFALLS: [(Scenario, f32); 0] = [];

/// On every other row the joint controller meets the loss target (within
/// ±30 %, as the power controller's own scenarios) with less charge per
/// delivered packet than the best single rate chosen with hindsight with a
/// hindsight-tuned margin, that rule allowed the joint controller's own loss
/// when it is above the target (equal loss); it always beats the
/// common-practice rule's loss and is never above the target by more than
/// 60 %.
#[test]
fn rate_comparison_table() {
    println!();
    println!("| scenario | target | joint: loss, µC/delivered, shares sf7..sf12 | best fixed rate, power-only control: loss, µC/delivered | common practice: loss, µC/delivered | hindsight single rate: rate, margin, loss, µC/delivered | hindsight at the joint's loss: loss, µC/delivered |");
    println!("|---|---|---|---|---|---|---|");
    let mut failures = Vec::new();
    for (i, s) in SCENARIOS.iter().enumerate() {
        for target in [0.01f32, 0.10] {
            let r = evaluate(*s, 500 + i as u64, target);
            let t = f64::from(r.target);
            let (best_fixed_m, best_fixed) = r
                .fixed
                .iter()
                .enumerate()
                .filter(|(_, f)| f.loss <= 1.3 * t)
                .min_by(|a, b| {
                    a.1.charge_per_delivered
                        .total_cmp(&b.1.charge_per_delivered)
                })
                .map_or((None, None), |(m, f)| (Some(m), Some(*f)));
            let shares: Vec<String> = r
                .joint
                .shares
                .iter()
                .map(|x| format!("{:.0}", x * 100.0))
                .collect();
            println!(
                "| {} | {:.0} % | {}, {:.1}, [{}] % | {} | {}, {:.1} | {} | {} |",
                r.scenario.name(),
                t * 100.0,
                pct(r.joint.loss),
                r.joint.charge_per_delivered,
                shares.join(" "),
                match (best_fixed_m, best_fixed) {
                    (Some(m), Some(f)) => format!(
                        "sf{}: {}, {:.1}",
                        7 + m,
                        pct(f.loss),
                        f.charge_per_delivered
                    ),
                    _ => "none meets the target".into(),
                },
                pct(r.common.loss),
                r.common.charge_per_delivered,
                match r.hindsight {
                    Some((h, m, margin)) => format!(
                        "sf{}, {:+.2} dB, {}, {:.1}",
                        7 + m,
                        margin,
                        pct(h.loss),
                        h.charge_per_delivered
                    ),
                    None => "none meets the target".into(),
                },
                match (r.joint.loss > t, r.same_loss) {
                    (false, _) => "(joint at or below the target)".into(),
                    (true, Some((h, _, _))) =>
                        format!("{}, {:.1}", pct(h.loss), h.charge_per_delivered),
                    (true, None) => "none meets it".into(),
                },
            );
            let known = KNOWN_SHORTFALLS.contains(&(r.scenario, r.target));
            if r.joint.loss > 1.6 * t {
                failures.push(format!(
                    "{:?} {t}: joint loss {:.4}",
                    r.scenario, r.joint.loss
                ));
            }
            if r.joint.loss >= r.common.loss {
                failures.push(format!(
                    "{:?} {t}: no better than common practice",
                    r.scenario
                ));
            }
            match (known, r.wins()) {
                (false, false) => failures.push(format!(
                    "{:?} {t}: joint loss {:.4}, {:.1} µC/delivered against hindsight {:?}",
                    r.scenario,
                    r.joint.loss,
                    r.joint.charge_per_delivered,
                    r.hindsight.map(|h| h.0)
                )),
                (true, true) => failures.push(format!(
                    "{:?} {t}: now wins: remove it from KNOWN_SHORTFALLS",
                    r.scenario
                )),
                _ => {}
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}

/// With a duty-cycle limit, no replay ever has more airtime in any one-hour
/// window than the limit, by the exact sliding-window check; the budget
/// shapes the decisions (some are duty-limited) and held packets count as
/// not delivered.
#[test]
fn no_replay_exceeds_the_duty_cycle_limit() {
    for (i, s) in SCENARIOS.iter().enumerate() {
        let log = s.log(900 + i as u64);
        for limit in [0.001f32, 0.01, 0.1] {
            let cfg = config(0.01, DutyLimit::AtMost(limit));
            let mut r = Replay::<W>::with_energy(cfg, &profile()).expect("valid");
            let mut sent = Vec::new();
            for rec in &log {
                let st = r.step(rec);
                if st.outcome != Outcome::Held {
                    sent.push((st.t_ms, st.airtime_us.expect("a rate table")));
                }
                // Every rate change has a reason that says so.
                if st.next_rate != st.rate {
                    assert!(st.reason.is_rate_change(), "{s:?} {limit}: {st:?}");
                }
            }
            let worst = max_airtime_in_any_hour_us(&sent);
            let allowed = (f64::from(limit) * 3.6e9).floor() as u64;
            let sum = r.summary();
            println!(
                "{:?} limit {limit}: worst hour {worst} µs of {allowed}, {} held, {} duty-shaped decisions",
                s, sum.held, sum.duty_limited
            );
            assert!(worst <= allowed, "{s:?} {limit}: {worst} µs in one hour");
            if limit <= 0.001 {
                assert!(sum.duty_limited > 0, "{s:?}: the tight budget never bit");
            }
            let df = sum.delivered_fraction().expect("judged");
            let judged_delivered = (sum.judged - sum.lost) as f32 / (sum.judged + sum.held) as f32;
            assert_eq!(df, judged_delivered);
        }
    }
}

/// The checker itself: a window that straddles two packets counts only
/// their overlap, and the worst window is found.
#[test]
fn the_sliding_window_checker_is_exact() {
    // Two 10 s packets 3599 s apart: a window can hold all of the first
    // and 1 s of the second... or the other way round: 11 s at most.
    let sent = [(0u64, 10_000_000u32), (3_599_000, 10_000_000)];
    assert_eq!(max_airtime_in_any_hour_us(&sent), 11_000_000);
    let sent = [(0u64, 10_000_000u32), (3_600_000, 10_000_000)];
    assert_eq!(max_airtime_in_any_hour_us(&sent), 10_000_000);
    assert_eq!(max_airtime_in_any_hour_us(&[]), 0);
}

/// The table's rows on six more seeds (600..605), against the same
/// hindsight rule: how far the README's table generalises (the rows:
/// `cargo test --release -p headroom-tests --test rate_scenarios -- --nocapture other_seeds`).
#[test]
fn other_seeds() {
    let (mut wins, mut rows) = (0, 0);
    for seed in 600..606u64 {
        for s in SCENARIOS {
            for target in [0.01f32, 0.10] {
                let r = evaluate(s, seed, target);
                let t = f64::from(target);
                let ratio = r
                    .same_loss
                    .map(|(h, _, _)| r.joint.charge_per_delivered / h.charge_per_delivered);
                let win = r.wins();
                rows += 1;
                wins += u32::from(win);
                println!(
                    "seed {seed} | {} | {:.0} % | joint {}, {:.1} µC/delivered | against hindsight at equal loss {} | {}",
                    s.name(),
                    t * 100.0,
                    pct(r.joint.loss),
                    r.joint.charge_per_delivered,
                    ratio.map_or("(none meets the target)".into(), |x| format!("{:+.1} %", (x - 1.0) * 100.0)),
                    if win { "wins" } else { "does not win" }
                );
            }
        }
    }
    println!("{wins} of {rows} rows win");
    // Not an acceptance bar (that is the table's): a guard that the table's
    // seeds are not a lucky draw.
    assert!(wins * 10 >= rows * 8, "{wins} of {rows}");
}
