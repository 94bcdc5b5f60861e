//! Fault injection on a stream of logged records.
//!
//! Field logs go wrong in known ways: the report link drops out, an RSSI
//! register sticks, a receiver saturates near the gateway, a forklift
//! raises the noise floor, a door shuts, a logger writes milliwatts into a
//! dBm column, a clock is set back, a NaN slips through. [`FaultInjector`]
//! applies such [`Fault`]s to a [`LogRecord`] stream, one record at a time,
//! without allocation, so the same damaged streams can be made on a host,
//! in tests and on a target.

use heapless::Vec;

use crate::error::{finite, Error, Result};
use crate::record::LogRecord;
use crate::units::{Db, Dbm};

/// Most faults one [`FaultInjector`] holds.
pub const MAX_FAULTS: usize = 16;

/// A numeric column of a [`LogRecord`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(rename_all = "snake_case", deny_unknown_fields)
)]
pub enum Field {
    /// `tx_dbm`.
    Tx,
    /// `rssi_dbm`.
    Rssi,
    /// `noise_dbm`.
    Noise,
}

/// What goes wrong while a [`Fault`] is active.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(rename_all = "snake_case", deny_unknown_fields)
)]
pub enum FaultKind {
    /// No report came back: RSSI and noise are missing.
    FeedbackDropout,
    /// The RSSI repeats the last value logged before the fault (a stuck
    /// register). Records without an RSSI stay without one.
    StuckRssi,
    /// The receiver is saturated: every logged RSSI reads its ceiling
    /// `level`, whatever the true power.
    Saturation {
        /// The reading of a saturated receiver, dBm.
        level: Dbm,
    },
    /// Interference raises the logged noise floor by `rise`.
    NoiseBurst {
        /// Rise of the noise floor.
        rise: Db,
    },
    /// The path loss changes by `change` (positive = more loss) for the
    /// length of the fault, then returns: the logged RSSI drops by `change`.
    PathLossStep {
        /// Change of path loss, dB.
        change: Db,
    },
    /// The time stamp repeats the previous record's.
    DuplicateTimestamp,
    /// The time stamp lies `by_ms` before the previous record's (a clock set
    /// back; saturates at 0).
    BackwardsTimestamp {
        /// How far before the previous record.
        by_ms: u64,
    },
    /// The column holds milliwatts instead of dBm (`10^(x/10)`).
    Milliwatts {
        /// Column written in the wrong unit.
        field: Field,
    },
    /// The column holds NaN.
    NotANumber {
        /// Column affected.
        field: Field,
    },
    /// The column holds an infinity.
    Infinite {
        /// Column affected.
        field: Field,
        /// `true` for −∞, `false` for +∞.
        negative: bool,
    },
}

/// One fault: its kind, the index of the first record it damages (from 0)
/// and how many records it lasts.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
pub struct Fault {
    /// What goes wrong.
    pub kind: FaultKind,
    /// Index of the first damaged record.
    pub start: u64,
    /// Number of damaged records (at least 1).
    pub length: u64,
}

impl Fault {
    /// Whether record `index` falls inside this fault.
    #[inline]
    pub fn covers(&self, index: u64) -> bool {
        index >= self.start && index - self.start < self.length
    }

    /// Index of the first record after the fault.
    #[inline]
    pub fn end(&self) -> u64 {
        self.start.saturating_add(self.length)
    }

    fn check(&self) -> Result<()> {
        if self.length == 0 {
            return Err(Error::NotPositive("fault.length"));
        }
        match self.kind {
            FaultKind::Saturation { level } => {
                finite("fault.level", level.0)?;
            }
            FaultKind::NoiseBurst { rise } => {
                finite("fault.rise", rise.0)?;
            }
            FaultKind::PathLossStep { change } => {
                finite("fault.change", change.0)?;
            }
            _ => {}
        }
        Ok(())
    }
}

/// Applies up to `N` [`Fault`]s to a record stream, in the order given
/// (faults may overlap). Feed it every record of the stream in order.
#[derive(Debug, Clone, PartialEq)]
pub struct FaultInjector<const N: usize = MAX_FAULTS> {
    faults: Vec<Fault, N>,
    index: u64,
    last_rssi: Option<f32>,
    stuck: [Option<f32>; N],
    prev_t: Option<u64>,
}

#[cfg(feature = "defmt")]
impl<const N: usize> defmt::Format for FaultInjector<N> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "FaultInjector {{ record: {}, faults: {} }}",
            self.index,
            self.faults.as_slice()
        );
    }
}

impl<const N: usize> FaultInjector<N> {
    /// An injector for `faults`; refuses more than `N` or a fault of length 0
    /// or with a non-finite value.
    pub fn new(faults: &[Fault]) -> Result<Self> {
        let mut v = Vec::new();
        for f in faults {
            f.check()?;
            if v.push(*f).is_err() {
                return Err(Error::OutOfValidity {
                    param: "faults",
                    value: faults.len() as f32,
                    min: 0.0,
                    max: N as f32,
                });
            }
        }
        Ok(FaultInjector {
            faults: v,
            index: 0,
            last_rssi: None,
            stuck: [None; N],
            prev_t: None,
        })
    }

    /// The faults, in order.
    pub fn faults(&self) -> &[Fault] {
        &self.faults
    }

    /// Whether any fault covers record `index`.
    pub fn is_faulty(&self, index: u64) -> bool {
        self.faults.iter().any(|f| f.covers(index))
    }

    /// Index of the next record to be fed.
    pub fn next_index(&self) -> u64 {
        self.index
    }

    /// Damage the next record of the stream as the faults say.
    pub fn apply(&mut self, rec: LogRecord) -> LogRecord {
        let i = self.index;
        self.index = i.saturating_add(1);
        let clean_rssi = rec.rssi_dbm;
        let mut out = rec;
        for (f, stuck) in self.faults.iter().zip(self.stuck.iter_mut()) {
            if !f.covers(i) {
                continue;
            }
            match f.kind {
                FaultKind::FeedbackDropout => {
                    out.rssi_dbm = None;
                    out.noise_dbm = None;
                }
                FaultKind::StuckRssi => {
                    if i == f.start {
                        *stuck = self.last_rssi.or(out.rssi_dbm);
                    }
                    if out.rssi_dbm.is_some() {
                        out.rssi_dbm = *stuck;
                    }
                }
                FaultKind::Saturation { level } => {
                    if out.rssi_dbm.is_some() {
                        out.rssi_dbm = Some(level.0);
                    }
                }
                FaultKind::NoiseBurst { rise } => {
                    out.noise_dbm = out.noise_dbm.map(|n| n + rise.0);
                }
                FaultKind::PathLossStep { change } => {
                    out.rssi_dbm = out.rssi_dbm.map(|r| r - change.0);
                }
                FaultKind::DuplicateTimestamp => {
                    if let Some(p) = self.prev_t {
                        out.t_ms = p;
                    }
                }
                FaultKind::BackwardsTimestamp { by_ms } => {
                    if let Some(p) = self.prev_t {
                        out.t_ms = p.saturating_sub(by_ms);
                    }
                }
                FaultKind::Milliwatts { field } => {
                    let v = column(&mut out, field);
                    *v = v.map(|x| Dbm(x).to_milliwatts().0);
                }
                FaultKind::NotANumber { field } => {
                    let v = column(&mut out, field);
                    *v = v.map(|_| f32::NAN);
                }
                FaultKind::Infinite { field, negative } => {
                    let v = column(&mut out, field);
                    let inf = if negative {
                        f32::NEG_INFINITY
                    } else {
                        f32::INFINITY
                    };
                    *v = v.map(|_| inf);
                }
            }
        }
        if clean_rssi.is_some() && !self.is_faulty(i) {
            self.last_rssi = clean_rssi;
        }
        self.prev_t = Some(out.t_ms);
        out
    }
}

fn column(r: &mut LogRecord, field: Field) -> &mut Option<f32> {
    match field {
        Field::Tx => &mut r.tx_dbm,
        Field::Rssi => &mut r.rssi_dbm,
        Field::Noise => &mut r.noise_dbm,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(i: u64) -> LogRecord {
        LogRecord {
            t_ms: 1000 * i,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-80.0 - i as f32),
            noise_dbm: Some(-110.0),
            rate: None,
        }
    }

    fn run(faults: &[Fault], n: u64) -> std::vec::Vec<LogRecord> {
        match FaultInjector::<4>::new(faults) {
            Ok(mut inj) => (0..n).map(|i| inj.apply(rec(i))).collect(),
            Err(_) => std::vec::Vec::new(),
        }
    }

    #[test]
    fn faults_act_only_inside_their_window() {
        let f = [Fault {
            kind: FaultKind::PathLossStep { change: Db(20.0) },
            start: 2,
            length: 3,
        }];
        let out = run(&f, 7);
        assert_eq!(out.len(), 7);
        for (i, r) in out.iter().enumerate() {
            let clean = rec(i as u64).rssi_dbm.unwrap_or(0.0);
            let want = if (2..5).contains(&i) {
                clean - 20.0
            } else {
                clean
            };
            assert_eq!(r.rssi_dbm, Some(want), "record {i}");
        }
    }

    #[test]
    fn stuck_rssi_repeats_the_last_clean_value() {
        let f = [Fault {
            kind: FaultKind::StuckRssi,
            start: 3,
            length: 4,
        }];
        let out = run(&f, 9);
        assert_eq!(out.len(), 9);
        for r in out.get(3..7).unwrap_or(&[]) {
            assert_eq!(r.rssi_dbm, Some(-82.0));
        }
        assert_eq!(out.get(7).and_then(|r| r.rssi_dbm), Some(-87.0));
    }

    #[test]
    fn time_stamps_repeat_and_go_back() {
        let f = [
            Fault {
                kind: FaultKind::DuplicateTimestamp,
                start: 1,
                length: 1,
            },
            Fault {
                kind: FaultKind::BackwardsTimestamp { by_ms: 5000 },
                start: 4,
                length: 1,
            },
        ];
        let out = run(&f, 6);
        let t: std::vec::Vec<u64> = out.iter().map(|r| r.t_ms).collect();
        assert_eq!(t, [0, 0, 2000, 3000, 0, 5000]);
    }

    #[test]
    fn wrong_units_and_non_finite_values() {
        let f = [
            Fault {
                kind: FaultKind::Milliwatts { field: Field::Tx },
                start: 0,
                length: 1,
            },
            Fault {
                kind: FaultKind::NotANumber { field: Field::Rssi },
                start: 1,
                length: 1,
            },
            Fault {
                kind: FaultKind::Infinite {
                    field: Field::Noise,
                    negative: true,
                },
                start: 2,
                length: 1,
            },
            Fault {
                kind: FaultKind::Saturation { level: Dbm(-25.0) },
                start: 3,
                length: 1,
            },
        ];
        let out = run(&f, 4);
        // 10 dBm is 10 mW (definition of dBm).
        let tx = out.first().and_then(|r| r.tx_dbm).unwrap_or(0.0);
        assert!((tx - 10.0).abs() < 1e-4);
        assert!(out.get(1).and_then(|r| r.rssi_dbm).is_some_and(f32::is_nan));
        assert_eq!(
            out.get(2).and_then(|r| r.noise_dbm),
            Some(f32::NEG_INFINITY)
        );
        assert_eq!(out.get(3).and_then(|r| r.rssi_dbm), Some(-25.0));
    }

    #[test]
    fn refuses_bad_fault_lists() {
        let f = Fault {
            kind: FaultKind::FeedbackDropout,
            start: 0,
            length: 1,
        };
        assert!(FaultInjector::<2>::new(&[f, f, f]).is_err());
        let zero = Fault { length: 0, ..f };
        assert_eq!(
            FaultInjector::<2>::new(&[zero]),
            Err(Error::NotPositive("fault.length"))
        );
        let nan = Fault {
            kind: FaultKind::NoiseBurst { rise: Db(f32::NAN) },
            ..f
        };
        assert!(FaultInjector::<2>::new(&[nan]).is_err());
    }
}
