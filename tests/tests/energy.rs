//! Energy arithmetic: the engine (f32) against the independent f64 reference
//! (`headroom_tests::energy`) and against published check values.
//!
//! Stated maximum error, engine vs reference: [`MAX_REL`] relative, on every
//! quantity (current, charge, mean current, battery life, resends, airtime,
//! duty cycle, tally sums).

use headroom::energy::airtime::{ChirpModem, CodeRate, LowDataRate, PacketModem};
use headroom::energy::duty::{airtime_per_hour, duty_cycle, en_300_220_sub_bands, min_interval};
use headroom::energy::{
    Battery, Delivery, EnergyProfile, EnergyTally, Refinements, TableError, TxCurrentTable,
};
use headroom::units::{
    Dbm, Hertz, Microamps, Microcoulombs, MilliampHours, Milliamps, Milliseconds, Seconds, Volts,
};
use headroom::Error;
use headroom_tests::energy as reference;
use proptest::prelude::*;

/// Engine vs f64 reference: relative error.
const MAX_REL: f64 = 1e-6;

fn close(engine: f32, reference: f64, what: &str) -> Result<(), TestCaseError> {
    let e = f64::from(engine);
    let rel = ((e - reference) / reference).abs();
    prop_assert!(
        rel <= MAX_REL || (e - reference).abs() < 1e-30,
        "{what}: engine {e} reference {reference} relative {rel:e}"
    );
    Ok(())
}

fn chirp(sf: u8, bw: f32, cr: u8, preamble: u16, explicit: bool, crc: bool) -> ChirpModem {
    ChirpModem {
        spreading_factor: sf,
        bandwidth: Hertz(bw),
        coding_rate: cr,
        preamble_symbols: preamble,
        explicit_header: explicit,
        crc,
        low_data_rate: LowDataRate::Auto,
    }
}

fn ms(r: Result<Milliseconds, Error>) -> f64 {
    f64::from(r.map(|m| m.0).unwrap_or(f32::NAN))
}

// ---------------------------------------------------------------------------
// Published check values.

/// Chirp spread spectrum time on air, from the SX1276/77/78/79 data-sheet
/// formula. The airtimes below are the ones commonly quoted for these
/// settings (from memory: 41.2 ms for 10 bytes at SF7/125 kHz, about
/// 2.47 s for 51 bytes at SF12/125 kHz); the exact figures are the formula
/// evaluated by hand, and the reference evaluates it independently.
#[test]
fn chirp_airtime_check_values() {
    // SF7, 125 kHz, 4/5, 8 preamble symbols, explicit header, CRC:
    // T_sym 1.024 ms; 12.25 + 28 symbols = 41.216 ms.
    let m = chirp(7, 125e3, 1, 8, true, true);
    assert_eq!(m.airtime(10), Ok(Milliseconds(41.216)));
    // SF12 (low-data-rate optimisation on: 32.768 ms symbols), 51 bytes:
    // 12.25 + 63 symbols = 2465.792 ms.
    let m = chirp(12, 125e3, 1, 8, true, true);
    assert_eq!(m.airtime(51), Ok(Milliseconds(2465.792)));
    // SF12 with the optimisation forced off: ⌈404/48⌉ = 9 blocks, 53 symbols,
    // (12.25 + 53) · 32.768 = 2138.112 ms.
    let off = ChirpModem {
        low_data_rate: LowDataRate::Off,
        ..m
    };
    assert_eq!(off.airtime(51), Ok(Milliseconds(2138.112)));
    // The independent reference agrees (the check values are exact in f32
    // up to its rounding).
    for (sf, pl, want) in [(7u32, 10u32, 41.216f64), (12, 51, 2465.792)] {
        let r = reference::Chirp {
            sf,
            bw_hz: 125e3,
            cr: 1,
            n_preamble: 8,
            implicit_header: false,
            crc: true,
            low_data_rate: None,
        };
        assert!((r.airtime_ms(pl) - want).abs() < 1e-9 * want, "SF{sf}");
    }
}

/// Generic packet modem: IEEE 802.15.4 O-QPSK at 2.4 GHz, 250 kbit/s: a
/// 127-byte PSDU with preamble, SFD and PHR is 133 bytes, 4.256 ms; and
/// Bluetooth LE 1M: a 31-byte advertising payload (1 + 4 + 39 + 3 bytes)
/// is 376 µs (both from memory).
#[test]
fn packet_airtime_check_values() {
    let oqpsk = PacketModem {
        bit_rate: 250e3,
        preamble_bits: 32,
        sync_bits: 8,
        header_bits: 8,
        crc_bits: 16,
        coding: CodeRate::NONE,
    };
    assert_eq!(oqpsk.airtime(125), Ok(Milliseconds(4.256)));
    let ble = PacketModem {
        bit_rate: 1e6,
        preamble_bits: 8,
        sync_bits: 32,
        header_bits: 16,
        crc_bits: 24,
        coding: CodeRate::NONE,
    };
    // PDU payload: 6-byte advertiser address + 31 bytes of data.
    assert_eq!(ble.airtime(37), Ok(Milliseconds(0.376)));
    let r = reference::packet_airtime_ms(1e6, 8.0, 32.0, 16.0, 37.0, 24.0, 1.0, 1.0);
    assert!((r - 0.376).abs() < 1e-12);
}

/// The three formulas on a worked example (hand-evaluated):
/// 44 mA for 100 ms + 10 mA for 50 ms + 500 µC = 5400 µC; every 60 s with
/// 2 µA of sleep: 92 µA; 1000 mAh: 1 000 000 / 92 / 24 = 452.8986 days.
#[test]
fn worked_example() {
    let table = TxCurrentTable::<16>::from_points(&[(0.0, 20.0), (14.0, 44.0)]);
    let prof = table
        .map_err(|_| Error::NoSolution("table"))
        .and_then(|t| {
            EnergyProfile::new(
                Volts(3.3),
                t,
                Milliseconds(100.0),
                Milliseconds(50.0),
                Milliamps(10.0),
                Microcoulombs(500.0),
                Microamps(2.0),
            )
        })
        .and_then(|p| Ok(p.with_battery(Battery::new(MilliampHours(1000.0))?)));
    let prof = match prof {
        Ok(p) => p,
        Err(e) => panic!("{e}"),
    };
    assert_eq!(prof.charge_per_packet(Dbm(14.0)), Ok(Microcoulombs(5400.0)));
    let i = prof
        .mean_current(Dbm(14.0), Seconds(60.0))
        .unwrap_or_default();
    assert!((i.0 - 92.0).abs() < 1e-4);
    let d = prof.battery_life(i).unwrap_or_default();
    assert!((f64::from(d.0) - 1e6 / 92.0 / 24.0).abs() < 1e-3);
    // Energy at 3.3 V: 5400 µC · 3.3 V = 17 820 µJ.
    assert!((Microcoulombs(5400.0).at_supply(Volts(3.3)).0 - 17820.0).abs() < 1e-2);
    // A quarter of the packets lost, no resend: 5400 / 0.75 = 7200 µC per delivered.
    let c = prof
        .charge_per_delivered(Dbm(14.0), 0.25, 0)
        .unwrap_or_default();
    assert!((c.0 - 7200.0).abs() < 1e-3);
    // Three resends at 25 % loss: attempts 1 + 1/4 + 1/16 + 1/64 = 1.328125,
    // delivered 1 − 1/256; per reading 500 + 4900 · 1.328125 µC.
    let c = prof
        .charge_per_delivered(Dbm(14.0), 0.25, 3)
        .unwrap_or_default();
    let want = (500.0 + 4900.0 * 1.328_125) / (1.0 - 1.0 / 256.0);
    assert!((f64::from(c.0) - want).abs() < 1e-6 * want);
    // Outside the table: refused, not extrapolated.
    assert!(matches!(
        prof.charge_per_packet(Dbm(15.0)),
        Err(Error::OutOfValidity {
            param: "tx_dbm",
            ..
        })
    ));
}

/// EN 300 220 sub-bands (from memory): 868.0-868.6 MHz, 1 %, 25 mW ERP;
/// 869.4-869.65 MHz, 10 %, 500 mW ERP.
#[test]
fn en_300_220_check_values() {
    let g1: Vec<_> = en_300_220_sub_bands(Hertz(868.1e6), Hertz(125e3)).collect();
    assert_eq!(g1.len(), 1);
    assert_eq!((g1[0].duty_limit, g1[0].max_erp.0), (0.01, 25.0));
    let g3: Vec<_> = en_300_220_sub_bands(Hertz(869.525e6), Hertz(125e3)).collect();
    assert_eq!((g3[0].duty_limit, g3[0].max_erp.0), (0.1, 500.0));
    // 1 % of 2465.792 ms packets: one every 246.5792 s at the most.
    let t = min_interval(Milliseconds(2465.792), 0.01).unwrap_or_default();
    assert!((t.0 - 246.5792).abs() < 1e-3);
}

// ---------------------------------------------------------------------------
// Engine against the reference.

/// A sorted table of 1..=16 points with currents that rise with power (a
/// power amplifier's supply current), from -20 to 30 dBm.
fn table_points() -> impl Strategy<Value = Vec<(f32, f32)>> {
    prop::collection::vec((0.1f32..4.0, 0.0f32..8.0), 1..=16).prop_map(|steps| {
        let (mut p, mut i) = (-20.0f32, 2.0f32);
        steps
            .into_iter()
            .map(|(dp, di)| {
                p += dp;
                i += di;
                (p, i)
            })
            .collect()
    })
}

fn to_f64(points: &[(f32, f32)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .map(|&(p, i)| (f64::from(p), f64::from(i)))
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    #[test]
    fn current_matches_reference(points in table_points(), u in 0.0f64..=1.0) {
        let t = TxCurrentTable::<16>::from_points(&points);
        prop_assert!(t.is_ok(), "{t:?}");
        let t = t.unwrap_or_default();
        let (lo, hi) = (points[0].0, points[points.len() - 1].0);
        let p = (f64::from(lo) + u * f64::from(hi - lo)) as f32;
        let p = p.clamp(lo, hi);
        let r = reference::current_ma(&to_f64(&points), f64::from(p));
        prop_assert!(r.is_some());
        close(t.current_at(Dbm(p)).map(|m| m.0).unwrap_or(f32::NAN), r.unwrap_or(0.0), "current")?;
        // Outside: refused by both.
        prop_assert!(t.current_at(Dbm(hi + 0.5)).is_err());
        prop_assert!(reference::current_ma(&to_f64(&points), f64::from(hi + 0.5)).is_none());
    }

    #[test]
    fn unsorted_tables_refused(points in prop::collection::vec((-10i8..10, 1u8..50), 1..=16)) {
        let pts: Vec<(f32, f32)> = points.iter().map(|&(p, i)| (f32::from(p), f32::from(i))).collect();
        let sorted = pts.windows(2).all(|w| w[1].0 > w[0].0);
        let t = TxCurrentTable::<16>::from_points(&pts);
        prop_assert_eq!(t.is_ok(), sorted);
        if let Err(e) = t {
            let not_increasing = matches!(e, TableError::NotIncreasing { .. });
            prop_assert!(not_increasing, "{}", e);
        }
        prop_assert_eq!(reference::current_ma(&to_f64(&pts), f64::from(pts[0].0)).is_some(), sorted);
    }

    #[test]
    fn energy_matches_reference(
        points in table_points(),
        u in 0.0f64..=1.0,
        airtime in 0.1f32..3000.0,
        rx_window in 0.0f32..2000.0,
        rx_current in 0.0f32..20.0,
        per_packet in 0.0f32..20_000.0,
        sleep in 0.0f32..50.0,
        interval_factor in 1.5f32..10_000.0,
        capacity in 10.0f32..20_000.0,
        usable in prop::option::of(0.05f32..=1.0),
        self_discharge in prop::option::of(0.0f32..0.3),
        outside in any::<bool>(),
        loss in 0.0f32..0.95,
        retries in 0u8..8,
    ) {
        let table = TxCurrentTable::<16>::from_points(&points).unwrap_or_default();
        let (lo, hi) = (points[0].0, points[points.len() - 1].0);
        let p = ((f64::from(lo) + u * f64::from(hi - lo)) as f32).clamp(lo, hi);
        let refinements = Refinements {
            usable_fraction: usable,
            self_discharge_per_year: self_discharge,
            sleep_outside_active: outside,
        };
        let prof = EnergyProfile::new(
            Volts(3.0),
            table,
            Milliseconds(airtime),
            Milliseconds(rx_window),
            Milliamps(rx_current),
            Microcoulombs(per_packet),
            Microamps(sleep),
        )
        .and_then(|p| p.with_refinements(refinements))
        .and_then(|p| Ok(p.with_battery(Battery::new(MilliampHours(capacity))?)));
        prop_assert!(prof.is_ok(), "{prof:?}");
        let Ok(prof) = prof else { return Ok(()) };
        // An interval comfortably longer than the active time of all attempts.
        let active_ms = (airtime + rx_window) * (f32::from(retries) + 1.0);
        let interval = active_ms / 1000.0 * interval_factor;

        let i_tx = reference::current_ma(&to_f64(&points), f64::from(p)).unwrap_or(f64::NAN);
        let (a, w, irx, pp, sl) = (
            f64::from(airtime), f64::from(rx_window), f64::from(rx_current),
            f64::from(per_packet), f64::from(sleep),
        );
        let q = reference::charge_uc(i_tx, a, irx, w, pp);
        let cost = prof.packet_cost(Dbm(p));
        prop_assert!(cost.is_ok());
        let cost = cost.unwrap_or(headroom::energy::PacketCost {
            charge: Microcoulombs(0.0), radio_charge: Microcoulombs(0.0), airtime: Milliseconds(0.0),
        });
        close(cost.charge.0, q, "charge per packet")?;

        let t = f64::from(interval);
        let active1 = outside.then_some((a + w) / 1000.0);
        let i_mean = reference::mean_current_ua(q, t, sl, active1);
        let engine_mean = prof.mean_current(Dbm(p), Seconds(interval)).map(|m| m.0).unwrap_or(f32::NAN);
        close(engine_mean, i_mean, "mean current")?;

        let life = reference::battery_days(
            f64::from(capacity), f64::from(engine_mean),
            usable.map(f64::from), self_discharge.map(f64::from),
        );
        let engine_life = prof.battery_life(Microamps(engine_mean)).map(|d| d.0).unwrap_or(f32::NAN);
        close(engine_life, life, "battery life")?;

        // Resends.
        let (e, d) = reference::delivery(f64::from(loss), u32::from(retries));
        let engine_d = Delivery::new(loss, retries);
        prop_assert!(engine_d.is_ok());
        let engine_d = engine_d.unwrap_or(Delivery { expected_attempts: 0.0, delivered_fraction: 0.0 });
        close(engine_d.expected_attempts, e, "expected attempts")?;
        close(engine_d.delivered_fraction, d, "delivered fraction")?;
        let radio = reference::radio_charge_uc(i_tx, a, irx, w);
        let per_delivered = reference::charge_per_delivered_uc(radio, pp, f64::from(loss), u32::from(retries));
        let engine_pd = prof.charge_per_delivered(Dbm(p), loss, retries).map(|c| c.0).unwrap_or(f32::NAN);
        close(engine_pd, per_delivered, "charge per delivered")?;
        let active_r = outside.then_some((a + w) * e / 1000.0);
        let mean_r = reference::mean_current_ua(pp + radio * e, t, sl, active_r);
        let engine_mr = prof
            .mean_current_with_resends(Dbm(p), Seconds(interval), loss, retries)
            .map(|m| m.0)
            .unwrap_or(f32::NAN);
        close(engine_mr, mean_r, "mean current with resends")?;

        // Duty cycle.
        let dc = duty_cycle(Milliseconds(airtime), Seconds(interval)).unwrap_or(f32::NAN);
        close(dc, reference::duty_cycle(a, t), "duty cycle")?;
        let ph = airtime_per_hour(Milliseconds(airtime), Seconds(interval)).map(|m| m.0).unwrap_or(f32::NAN);
        close(ph, reference::duty_cycle(a, t) * 3_600_000.0, "airtime per hour")?;
    }

    #[test]
    fn chirp_airtime_matches_reference(
        sf in 6u8..=12,
        bw_index in 0usize..10,
        cr in 1u8..=4,
        preamble in 6u16..100,
        explicit in any::<bool>(),
        crc in any::<bool>(),
        ldro in 0u8..3,
        pl in 0u8..=255,
    ) {
        const BW: [f32; 10] = [7.8e3, 10.4e3, 15.6e3, 20.8e3, 31.25e3, 41.7e3, 62.5e3, 125e3, 250e3, 500e3];
        let explicit = explicit && sf > 6;
        let low = [LowDataRate::Auto, LowDataRate::On, LowDataRate::Off][usize::from(ldro)];
        let m = ChirpModem { low_data_rate: low, ..chirp(sf, BW[bw_index], cr, preamble, explicit, crc) };
        let r = reference::Chirp {
            sf: u32::from(sf),
            bw_hz: f64::from(BW[bw_index]),
            cr: u32::from(cr),
            n_preamble: u32::from(preamble),
            implicit_header: !explicit,
            crc,
            low_data_rate: [None, Some(true), Some(false)][usize::from(ldro)],
        };
        prop_assert_eq!(m.low_data_rate_on(), Ok(r.de()));
        prop_assert_eq!(m.payload_symbols(pl).map(f64::from), Ok(r.payload_symbols(u32::from(pl))));
        close(ms(m.airtime(pl)) as f32, r.airtime_ms(u32::from(pl)), "chirp airtime")?;
    }

    #[test]
    fn packet_airtime_matches_reference(
        rate in 1e3f32..2e6,
        preamble in 0u16..200,
        sync in 0u16..64,
        header in 0u16..64,
        crc in 0u16..33,
        k in 1u8..=8,
        extra in 0u8..8,
        pl in 0u16..2048,
    ) {
        let n = k + extra;
        let m = PacketModem {
            bit_rate: rate, preamble_bits: preamble, sync_bits: sync, header_bits: header,
            crc_bits: crc, coding: CodeRate { k, n },
        };
        let r = reference::packet_airtime_ms(
            f64::from(rate), f64::from(preamble), f64::from(sync), f64::from(header),
            f64::from(pl), f64::from(crc), f64::from(k), f64::from(n),
        );
        close(ms(m.airtime(pl)) as f32, r, "packet airtime")?;
    }

    #[test]
    fn tally_sums_match_reference(
        charges in prop::collection::vec((1.0f32..10_000.0, 1u32..600_000, prop::option::of(any::<bool>())), 2..200),
        split in 1usize..200,
        sleep in 0.0f32..20.0,
    ) {
        let cost = |q: f32| headroom::energy::PacketCost {
            charge: Microcoulombs(q), radio_charge: Microcoulombs(q), airtime: Milliseconds(10.0),
        };
        // Two devices: the first `split` packets and the rest, merged.
        let split = split.min(charges.len() - 1);
        let (mut a, mut b) = (EnergyTally::new(), EnergyTally::new());
        let (mut t, mut want_span_q, mut want_sleep, mut want_span) = (0u64, 0.0f64, 0.0f64, 0u64);
        for (k, &(q, gap, ok)) in charges.iter().enumerate() {
            let first_of_stream = k == 0 || k == split;
            if k == split {
                t = 0;
            } else if k > 0 {
                t += u64::from(gap);
                want_span += u64::from(gap);
                want_sleep += f64::from(sleep) * f64::from(gap) / 1000.0;
            }
            if !first_of_stream {
                want_span_q += f64::from(q);
            }
            let tally = if k < split { &mut a } else { &mut b };
            tally.add(t, &cost(q), Microamps(sleep), ok);
        }
        let mut both = a;
        both.merge(&b);
        prop_assert_eq!(both.packets, charges.len() as u64);
        prop_assert_eq!(both.span_ms, want_span);
        let total: f64 = charges.iter().map(|c| f64::from(c.0)).sum();
        prop_assert!((both.charge_uc - total).abs() <= 1e-9 * total);
        prop_assert!((both.span_charge_uc - want_span_q).abs() <= 1e-9 * total);
        if want_span > 0 {
            let want = (want_span_q + want_sleep) / (want_span as f64 / 1000.0);
            close(both.mean_current().map(|m| m.0).unwrap_or(f32::NAN), want, "tally mean current")?;
        }
        let delivered = charges.iter().filter(|c| c.2 == Some(true)).count() as u64;
        prop_assert_eq!(both.delivered, delivered);
        if delivered > 0 {
            let judged_q: f64 = charges.iter().filter(|c| c.2.is_some()).map(|c| f64::from(c.0)).sum();
            close(
                both.charge_per_delivered().map(|c| c.0).unwrap_or(f32::NAN),
                judged_q / delivered as f64,
                "tally charge per delivered",
            )?;
        }
    }
}
