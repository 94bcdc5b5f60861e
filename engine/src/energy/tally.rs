//! Linear sums of charge and airtime over a stream of packets, that add up
//! exactly over records and devices (for a replay's summary and a fleet's).
//!
//! Every field is a sum, so [`EnergyTally::merge`] of two tallies is the
//! tally of both streams. Sums are `f64` (as the replay's mW sums): 10⁶
//! packets of 5000 µC lose nothing.
//!
//! ## Time span and mean current
//! The span of a stream runs from its first packet to its last. The charge
//! "in the span" counts every packet but the first of each stream (the first
//! opens the span), so that a stream of packets of charge `Q` every `T`
//! seconds gives `Q / T` exactly; the sleep charge is `I_sleep · Δt` over
//! each gap. Mean current = (charge in span + sleep charge) / span.

use super::{Microamps, Microcoulombs, PacketCost};

/// Running energy totals of a stream (or, merged, of several).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EnergyTally {
    /// Packets counted.
    pub packets: u64,
    /// Packets judged (delivered or lost).
    pub judged: u64,
    /// Packets delivered.
    pub delivered: u64,
    /// Σ charge of all packets, µC.
    pub charge_uc: f64,
    /// Σ charge of the judged packets, µC.
    pub judged_charge_uc: f64,
    /// Σ airtime, ms.
    pub airtime_ms: f64,
    /// Σ of the streams' spans (first to last packet), ms.
    pub span_ms: u64,
    /// Σ charge of the packets inside the spans (all but each stream's first), µC.
    pub span_charge_uc: f64,
    /// Σ sleep current × gap, µC.
    pub sleep_charge_uc: f64,
    /// Time of the last packet of the open stream (`None` after a merge).
    last_t_ms: Option<u64>,
}

impl EnergyTally {
    /// Empty totals.
    pub const fn new() -> Self {
        EnergyTally {
            packets: 0,
            judged: 0,
            delivered: 0,
            charge_uc: 0.0,
            judged_charge_uc: 0.0,
            airtime_ms: 0.0,
            span_ms: 0,
            span_charge_uc: 0.0,
            sleep_charge_uc: 0.0,
            last_t_ms: None,
        }
    }

    /// Count one packet sent at time `t_ms` costing `cost`, with the node
    /// sleeping at `sleep` since the previous packet; `delivered` is
    /// `Some(true)`/`Some(false)` when the packet was judged, `None` when not.
    /// A time stamp earlier than the previous one adds no span.
    pub fn add(&mut self, t_ms: u64, cost: &PacketCost, sleep: Microamps, delivered: Option<bool>) {
        let q = f64::from(cost.charge.0);
        self.packets += 1;
        self.charge_uc += q;
        self.airtime_ms += f64::from(cost.airtime.0);
        if let Some(ok) = delivered {
            self.judged += 1;
            self.judged_charge_uc += q;
            if ok {
                self.delivered += 1;
            }
        }
        match self.last_t_ms {
            Some(last) => {
                let gap = t_ms.saturating_sub(last);
                self.span_ms += gap;
                self.span_charge_uc += q;
                self.sleep_charge_uc += f64::from(sleep.0) * gap as f64 / 1000.0;
                self.last_t_ms = Some(last.max(t_ms));
            }
            None => self.last_t_ms = Some(t_ms),
        }
    }

    /// Add the totals of another stream (another device): every sum adds.
    /// The merged tally has no open stream: a packet added after a merge
    /// opens a new span.
    pub fn merge(&mut self, other: &EnergyTally) {
        self.packets += other.packets;
        self.judged += other.judged;
        self.delivered += other.delivered;
        self.charge_uc += other.charge_uc;
        self.judged_charge_uc += other.judged_charge_uc;
        self.airtime_ms += other.airtime_ms;
        self.span_ms += other.span_ms;
        self.span_charge_uc += other.span_charge_uc;
        self.sleep_charge_uc += other.sleep_charge_uc;
        self.last_t_ms = None;
    }

    /// Mean charge per packet (`None` before a packet).
    #[allow(clippy::cast_possible_truncation)] // a charge well inside f32
    pub fn charge_per_packet(&self) -> Option<Microcoulombs> {
        (self.packets > 0).then(|| Microcoulombs((self.charge_uc / self.packets as f64) as f32))
    }

    /// Charge of the judged packets per delivered packet (`None` before a
    /// delivery): a lost packet costs its charge and delivers nothing.
    #[allow(clippy::cast_possible_truncation)] // a charge well inside f32
    pub fn charge_per_delivered(&self) -> Option<Microcoulombs> {
        (self.delivered > 0)
            .then(|| Microcoulombs((self.judged_charge_uc / self.delivered as f64) as f32))
    }

    /// Mean current over the spans (`None` before a span).
    #[allow(clippy::cast_possible_truncation)] // a current well inside f32
    pub fn mean_current(&self) -> Option<Microamps> {
        (self.span_ms > 0).then(|| {
            let s = self.span_ms as f64 / 1000.0;
            Microamps(((self.span_charge_uc + self.sleep_charge_uc) / s) as f32)
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::energy::Milliseconds;

    fn cost(q: f32) -> PacketCost {
        PacketCost {
            charge: Microcoulombs(q),
            radio_charge: Microcoulombs(q),
            airtime: Milliseconds(40.0),
        }
    }

    #[test]
    fn constant_stream_gives_the_formula() {
        let mut t = EnergyTally::new();
        for k in 0..100u64 {
            t.add(k * 60_000, &cost(5400.0), Microamps(2.0), Some(k % 10 != 0));
        }
        // 5400 µC / 60 s + 2 µA = 92 µA.
        let i = t.mean_current().unwrap_or_default();
        assert!((i.0 - 92.0).abs() < 1e-4, "{i:?}");
        assert_eq!(t.delivered, 90);
        // 100 packets' charge over 90 delivered.
        let c = t.charge_per_delivered().unwrap_or_default();
        assert!((c.0 - 6000.0).abs() < 1e-3, "{c:?}");
        assert_eq!(t.airtime_ms, 4000.0);
    }

    #[test]
    fn merge_adds_streams() {
        let (mut a, mut b, mut both) = (EnergyTally::new(), EnergyTally::new(), EnergyTally::new());
        for k in 0..10u64 {
            a.add(k * 1000, &cost(100.0), Microamps(1.0), Some(true));
            b.add(5 + k * 2000, &cost(300.0), Microamps(3.0), None);
        }
        both.merge(&a);
        both.merge(&b);
        assert_eq!(both.packets, 20);
        assert_eq!(both.span_ms, 9000 + 18000);
        assert_eq!(both.charge_uc, 4000.0);
        assert_eq!(both.judged, 10);
        assert!(EnergyTally::new().mean_current().is_none());
        assert!(EnergyTally::new().charge_per_delivered().is_none());
    }
}
