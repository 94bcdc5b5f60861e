//! What a replay costs the battery: the controller's choices and the
//! device's own, each as an [`EnergyTally`], judged by the replay's rule.
//!
//! For each record, the replayed packet is costed at the power the
//! controller chose (and the chosen rate's airtime, with a rate table),
//! delivered or lost as the replay judged it (a packet held by the duty
//! budget costs the fixed per-packet charge only and is not delivered); the logged
//! packet at the power the device logged, delivered or lost as the same rule
//! judged it (a record whose readings cannot be judged counts its charge but
//! is neither). A record without a finite logged power is not costed on the
//! logged side (`logged_uncosted`). Time comes from the records' time stamps,
//! or from a fixed interval when one is given (`k · interval` for the k-th
//! record).

use super::{EnergyProfile, EnergyTally, Microcoulombs, Milliseconds, PacketCost};
use crate::control::{Outcome, ReplayStep};
use crate::error::Result;
use crate::record::LogRecord;
use crate::units::{Dbm, Seconds};

/// The two tallies of a replay.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReplayEnergy {
    /// The controller's packets.
    pub replayed: EnergyTally,
    /// The device's packets, as logged.
    pub logged: EnergyTally,
    /// Records without a finite logged transmit power (not costed as logged).
    pub logged_uncosted: u64,
    records: u64,
    interval_ms: Option<u64>,
}

impl ReplayEnergy {
    /// Empty tallies; `interval`: one record every `interval` instead of the
    /// records' time stamps.
    pub fn new(interval: Option<Seconds>) -> Self {
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // checked by the caller
        let interval_ms = interval.map(|s| libm::round(f64::from(s.0) * 1000.0).max(0.0) as u64);
        ReplayEnergy {
            interval_ms,
            ..ReplayEnergy::default()
        }
    }

    /// Cost one replayed record (`rec`, replayed as `step`). An error is a
    /// power outside the profile's transmit current table.
    pub fn add<const N: usize>(
        &mut self,
        profile: &EnergyProfile<N>,
        rec: &LogRecord,
        step: &ReplayStep,
    ) -> Result<()> {
        let t = match self.interval_ms {
            Some(i) => self.records.saturating_mul(i),
            None => rec.t_ms,
        };
        self.records += 1;
        let sleep = profile.sleep_current();
        let judged = match step.outcome {
            Outcome::Delivered => Some(true),
            // A held packet is not delivered.
            Outcome::Lost | Outcome::Held => Some(false),
            Outcome::Unjudged => None,
        };
        let cost = match (step.outcome, step.airtime_us) {
            // Not sent: the wake-up only.
            (Outcome::Held, _) => PacketCost {
                charge: profile.per_packet(),
                radio_charge: Microcoulombs(0.0),
                airtime: Milliseconds(0.0),
            },
            // At the rate's airtime.
            (_, Some(us)) => {
                profile.packet_cost_for(step.chosen, Milliseconds(us as f32 / 1000.0))?
            }
            _ => profile.packet_cost(step.chosen)?,
        };
        self.replayed.add(t, &cost, sleep, judged);
        match rec.tx_dbm.filter(|p| p.is_finite()) {
            Some(p) => {
                let cost = profile.packet_cost(Dbm(p))?;
                self.logged
                    .add(t, &cost, sleep, step.logged_lost.map(|l| !l));
            }
            None => self.logged_uncosted += 1,
        }
        Ok(())
    }

    /// Add another device's tallies (a fleet).
    pub fn merge(&mut self, other: &ReplayEnergy) {
        self.replayed.merge(&other.replayed);
        self.logged.merge(&other.logged);
        self.logged_uncosted += other.logged_uncosted;
        self.records += other.records;
    }
}

#[cfg(test)]
#[allow(clippy::panic)]
mod tests {
    use super::*;
    use crate::control::Reason;
    use crate::energy::{Microamps, Milliamps, TxCurrentTable, Volts};
    use crate::units::Db;

    fn step(chosen: f32, outcome: Outcome, logged_lost: Option<bool>) -> ReplayStep {
        ReplayStep {
            t_ms: 0,
            chosen: Dbm(chosen),
            replayed_snr: None,
            outcome,
            logged_lost,
            at_max: false,
            path_loss_estimate: None,
            margin: Db(0.0),
            reason: Reason::Hold,
            next_tx: Dbm(chosen),
            rate: None,
            next_rate: None,
            next_held: false,
            airtime_us: None,
            charge: None,
        }
    }

    #[test]
    fn both_sides_are_costed_at_their_own_power() {
        let table = match TxCurrentTable::<4>::from_points(&[(0.0, 10.0), (20.0, 30.0)]) {
            Ok(t) => t,
            Err(e) => panic!("{e:?}"),
        };
        let profile = match EnergyProfile::new(
            Volts(3.0),
            table,
            Milliseconds(100.0),
            Milliseconds(0.0),
            Milliamps(0.0),
            Microcoulombs(0.0),
            Microamps(0.0),
        ) {
            Ok(p) => p,
            Err(e) => panic!("{e:?}"),
        };
        let mut e = ReplayEnergy::new(Some(Seconds(60.0)));
        let rec = |tx: Option<f32>| LogRecord {
            t_ms: 5,
            tx_dbm: tx,
            ..LogRecord::default()
        };
        // 10 dBm: 20 mA × 100 ms = 2000 µC; logged 20 dBm: 30 mA × 100 ms.
        let ok = e.add(
            &profile,
            &rec(Some(20.0)),
            &step(10.0, Outcome::Delivered, Some(false)),
        );
        assert!(ok.is_ok());
        let ok = e.add(&profile, &rec(None), &step(10.0, Outcome::Lost, None));
        assert!(ok.is_ok());
        assert!((e.replayed.charge_uc - 4000.0).abs() < 1e-3);
        assert!((e.logged.charge_uc - 3000.0).abs() < 1e-3);
        assert_eq!((e.replayed.delivered, e.replayed.judged), (1, 2));
        assert_eq!(e.logged_uncosted, 1);
        // One packet a minute: the second opens a 60 s span.
        assert_eq!(e.replayed.span_ms, 60_000);
        // A power outside the table is an error, not a guess.
        assert!(e
            .add(
                &profile,
                &rec(Some(20.0)),
                &step(25.0, Outcome::Delivered, None)
            )
            .is_err());
    }
}
