//! Time series of a replayed field log: received power (logged and replayed)
//! against the noise floor, with lost packets marked, above the transmit
//! power the controller chose and the margin it kept.
//!
//! The series is decimated while it is streamed, in constant memory: records
//! fall into time buckets of 2^k ms (k = 0 at first, every record its own
//! point); when more than [`MAX_BUCKETS`] buckets hold records, the width
//! doubles and neighbouring buckets merge pairwise. Each bucket keeps, per
//! line, its smallest and largest value with their times, and the time of
//! its first lost packet: a single-record spike and every lost packet stay
//! visible, while the drawing holds at most two points per bucket and line.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use std::collections::BTreeMap;

use super::{decimals, finite_range, padded, save, signed, DrawResult, Figure, FONT};
use crate::error::{printable, CliError, CliResult};

const WIDTH: u32 = 1200;
const HEIGHT: u32 = 760;
/// Left and right label areas and margins, in pixels.
const LEFT: u32 = 80;
const RIGHT: u32 = 80;
const MARGIN: u32 = 14;

const LOGGED: RGBColor = RGBColor(31, 90, 160);
const REPLAYED: RGBColor = RGBColor(230, 120, 20);
const NOISE: RGBColor = RGBColor(120, 120, 120);
const LOST: RGBColor = RGBColor(200, 30, 30);
const TX: RGBColor = RGBColor(20, 130, 60);
const MARGIN_C: RGBColor = RGBColor(120, 60, 170);
const GRID_C: RGBColor = RGBColor(110, 110, 110);

/// Buckets a series keeps at most (about two per pixel column of the
/// plotting area, which is 1 012 pixels wide).
pub const MAX_BUCKETS: usize = 2048;

/// The lines of the plot, in the order of [`ReplayPoint::values`].
const LINES: usize = 6;
const NOISE_LINE: usize = 0;
const LOGGED_LINE: usize = 1;
const REPLAYED_LINE: usize = 2;
const TX_LINE: usize = 3;
const MARGIN_LINE: usize = 4;
const THRESHOLD_LINE: usize = 5;

/// One record of a replay, as [`ReplaySeries::push`] takes it. `None` (or a
/// non-finite value) is a record without that value: it leaves a gap in the
/// line; a line without any value is not drawn.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct ReplayPoint {
    /// Time of the record, milliseconds since the log's start.
    pub t_ms: u64,
    /// Received power as logged, dBm.
    pub logged_rx_dbm: Option<f32>,
    /// Received power the replayed transmit power would have given, dBm.
    pub replayed_rx_dbm: Option<f32>,
    /// Noise floor at the receiver, dBm.
    pub noise_floor_dbm: Option<f32>,
    /// Transmit power the controller chose, dBm.
    pub tx_power_dbm: Option<f32>,
    /// Margin over the requirement, dB.
    pub margin_db: Option<f32>,
    /// The packet was lost.
    pub lost: bool,
    /// Loss threshold: the received power below which the packet is lost
    /// (noise floor + required SNR), dBm.
    pub threshold_dbm: Option<f32>,
    /// The controller sent this packet at another rate than the one before.
    pub rate_changed: bool,
}

impl ReplayPoint {
    fn values(&self) -> [Option<f32>; LINES] {
        [
            self.noise_floor_dbm,
            self.logged_rx_dbm,
            self.replayed_rx_dbm,
            self.tx_power_dbm,
            self.margin_db,
            self.threshold_dbm,
        ]
    }
}

/// Smallest and largest value of one line in one bucket, each with its time.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Extremes {
    lo: (u64, f32),
    hi: (u64, f32),
}

impl Extremes {
    fn absorb(&mut self, o: Extremes) {
        if o.lo.1 < self.lo.1 || (o.lo.1 == self.lo.1 && o.lo.0 < self.lo.0) {
            self.lo = o.lo;
        }
        if o.hi.1 > self.hi.1 || (o.hi.1 == self.hi.1 && o.hi.0 < self.hi.0) {
            self.hi = o.hi;
        }
    }
}

/// What one time bucket keeps of its records.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Bucket {
    records: u64,
    lines: [Option<Extremes>; LINES],
    /// Time of the first lost packet.
    lost: Option<u64>,
    /// Time of the first rate change.
    rate_change: Option<u64>,
}

impl Bucket {
    fn absorb(&mut self, o: &Bucket) {
        self.records += o.records;
        for (mine, theirs) in self.lines.iter_mut().zip(o.lines) {
            match (mine.as_mut(), theirs) {
                (Some(m), Some(t)) => m.absorb(t),
                (None, t) => *mine = t,
                (Some(_), None) => {}
            }
        }
        let first = |a: Option<u64>, b: Option<u64>| match (a, b) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        self.lost = first(self.lost, o.lost);
        self.rate_change = first(self.rate_change, o.rate_change);
    }

    fn of(p: &ReplayPoint) -> Bucket {
        let mut b = Bucket {
            records: 1,
            lost: p.lost.then_some(p.t_ms),
            rate_change: p.rate_changed.then_some(p.t_ms),
            ..Bucket::default()
        };
        for (slot, v) in b.lines.iter_mut().zip(p.values()) {
            *slot = v.filter(|x| x.is_finite()).map(|y| Extremes {
                lo: (p.t_ms, y),
                hi: (p.t_ms, y),
            });
        }
        b
    }
}

/// The records of a replay, decimated as they are pushed: memory is bounded
/// by [`MAX_BUCKETS`] buckets of 280 bytes whatever the length of the log
/// (under 1 MB with the map that holds them).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReplaySeries {
    /// Buckets by index (time >> `shift`).
    buckets: BTreeMap<u64, Bucket>,
    /// Bucket width is 2^shift ms.
    shift: u32,
    records: u64,
    t_min: u64,
    t_max: u64,
    /// Lowest and highest level the controller was allowed, dBm.
    pub limits_dbm: Option<(f32, f32)>,
    /// Transmit power at the EIRP cap (cap − antenna gain), dBm, if a cap
    /// is configured.
    pub cap_tx_dbm: Option<f32>,
}

impl ReplaySeries {
    /// An empty series.
    pub fn new() -> Self {
        Self::default()
    }

    /// Add one record (in any time order).
    pub fn push(&mut self, p: ReplayPoint) {
        if self.records == 0 {
            (self.t_min, self.t_max) = (p.t_ms, p.t_ms);
        } else {
            self.t_min = self.t_min.min(p.t_ms);
            self.t_max = self.t_max.max(p.t_ms);
        }
        self.records += 1;
        let b = Bucket::of(&p);
        self.buckets
            .entry(p.t_ms.checked_shr(self.shift).unwrap_or(0))
            .or_default()
            .absorb(&b);
        while self.buckets.len() > MAX_BUCKETS {
            self.coarsen();
        }
    }

    /// Double the bucket width, merging neighbours pairwise.
    fn coarsen(&mut self) {
        self.shift += 1;
        let old = std::mem::take(&mut self.buckets);
        for (i, b) in old {
            self.buckets.entry(i >> 1).or_default().absorb(&b);
        }
    }

    /// Number of records pushed.
    pub fn len(&self) -> u64 {
        self.records
    }

    /// No record was pushed.
    pub fn is_empty(&self) -> bool {
        self.records == 0
    }

    /// More than one record shares a bucket: the drawing is decimated.
    fn decimated(&self) -> bool {
        self.records > self.buckets.len() as u64
    }

    /// Median of the index steps between consecutive buckets (at least 1):
    /// the typical interval between records, in buckets.
    fn typical_step(&self) -> u64 {
        let mut steps: Vec<u64> = self
            .buckets
            .keys()
            .zip(self.buckets.keys().skip(1))
            .map(|(a, b)| b - a)
            .collect();
        steps.sort_unstable();
        steps.get(steps.len() / 2).copied().unwrap_or(1).max(1)
    }
}

/// The unit of the time axis, chosen from the span of the log.
#[derive(Debug, Clone, Copy, PartialEq)]
struct TimeUnit {
    name: &'static str,
    ms: f64,
}

fn time_unit(span_ms: f64) -> TimeUnit {
    const S: f64 = 1e3;
    if span_ms <= 180.0 * S {
        TimeUnit { name: "s", ms: S }
    } else if span_ms <= 180.0 * 60.0 * S {
        TimeUnit {
            name: "min",
            ms: 60.0 * S,
        }
    } else if span_ms <= 72.0 * 3600.0 * S {
        TimeUnit {
            name: "h",
            ms: 3600.0 * S,
        }
    } else {
        TimeUnit {
            name: "days",
            ms: 86400.0 * S,
        }
    }
}

/// A bucket's width as people read it (`4.1 min`).
fn duration(ms: u64) -> String {
    let ms = ms as f64;
    if ms < 1e3 {
        format!("{ms:.0} ms")
    } else if ms < 120e3 {
        format!("{:.1} s", ms / 1e3)
    } else if ms < 120.0 * 60e3 {
        format!("{:.1} min", ms / 60e3)
    } else if ms < 48.0 * 3600e3 {
        format!("{:.1} h", ms / 3600e3)
    } else {
        format!("{:.1} days", ms / 86400e3)
    }
}

/// A line cut at its gaps: each inner vector is drawn as one polyline.
type Pieces = Vec<Vec<(f64, f64)>>;

/// x of time `t`: in `unit`s since `t0`.
fn x_of(t: u64, t0: u64, unit: TimeUnit) -> f64 {
    t.saturating_sub(t0) as f64 / unit.ms
}

/// The polyline pieces of line `line`: per bucket its smallest and largest
/// value in time order; a bucket without a value of the line, or a pause of
/// more than ten typical intervals, cuts it.
fn pieces(s: &ReplaySeries, line: usize, unit: TimeUnit) -> Pieces {
    let gap = 10 * s.typical_step();
    let mut out: Pieces = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    let mut prev: Option<u64> = None;
    for (&i, b) in &s.buckets {
        let paused = prev.is_some_and(|p| i - p > gap);
        prev = Some(i);
        let value = b.lines.get(line).copied().flatten();
        if (paused || value.is_none()) && !cur.is_empty() {
            out.push(std::mem::take(&mut cur));
        }
        if let Some(e) = value {
            let (a, z) = if e.hi.0 < e.lo.0 {
                (e.hi, e.lo)
            } else {
                (e.lo, e.hi)
            };
            cur.push((x_of(a.0, s.t_min, unit), f64::from(a.1)));
            if a != z {
                cur.push((x_of(z.0, s.t_min, unit), f64::from(z.1)));
            }
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// x positions of lost packets: the first of each bucket.
fn lost_marks(s: &ReplaySeries, unit: TimeUnit) -> Vec<f64> {
    s.buckets
        .values()
        .filter_map(|b| b.lost)
        .map(|t| x_of(t, s.t_min, unit))
        .collect()
}

/// x positions of rate changes: the first of each bucket.
fn rate_marks(s: &ReplaySeries, unit: TimeUnit) -> Vec<f64> {
    s.buckets
        .values()
        .filter_map(|b| b.rate_change)
        .map(|t| x_of(t, s.t_min, unit))
        .collect()
}

struct Line {
    label: &'static str,
    colour: RGBColor,
    pieces: Pieces,
}

struct ReplayFigure {
    title: String,
    x_max: f64,
    unit: TimeUnit,
    records: u64,
    /// Width of a bucket when decimated, ms.
    bucket_ms: Option<u64>,
    top: Vec<Line>,
    lost: Vec<f64>,
    rate_changes: Vec<f64>,
    tx: Option<Line>,
    margin: Option<Line>,
    limits: Option<(f32, f32)>,
    cap: Option<f32>,
}

/// Draw the time series of a replay to `path` (`.svg` or `.png`); refuses to
/// replace an existing file unless `force`. Control characters of `title`
/// (a log's name) are escaped.
pub fn replay_plot(path: &Path, force: bool, title: &str, series: &ReplaySeries) -> CliResult {
    super::check_destination(path, force)?;
    let s = series;
    if s.is_empty() {
        return Err(CliError::Input(
            "replay plot: the log has no records".into(),
        ));
    }
    let span_ms = s.t_max.saturating_sub(s.t_min) as f64;
    let unit = time_unit(span_ms);
    let line = |label, colour, k: usize| {
        let pieces = pieces(s, k, unit);
        (!pieces.is_empty()).then_some(Line {
            label,
            colour,
            pieces,
        })
    };
    let top: Vec<Line> = [
        line("noise floor", NOISE, NOISE_LINE),
        line("received power, logged", LOGGED, LOGGED_LINE),
        line("received power, replayed", REPLAYED, REPLAYED_LINE),
        line(
            "loss threshold (noise + required SNR)",
            LOST,
            THRESHOLD_LINE,
        ),
    ]
    .into_iter()
    .flatten()
    .collect();
    let fig = ReplayFigure {
        title: printable(title),
        x_max: (span_ms / unit.ms).max(1e-9),
        unit,
        records: s.records,
        bucket_ms: s
            .decimated()
            .then(|| 1u64.checked_shl(s.shift).unwrap_or(u64::MAX)),
        top,
        lost: lost_marks(s, unit),
        rate_changes: rate_marks(s, unit),
        tx: line("transmit power chosen", TX, TX_LINE),
        margin: line("margin", MARGIN_C, MARGIN_LINE),
        limits: s.limits_dbm,
        cap: s.cap_tx_dbm,
    };
    save(path, force, &fig)
}

fn range_of<'a>(lines: impl IntoIterator<Item = &'a Line>) -> Option<(f64, f64)> {
    finite_range(
        lines
            .into_iter()
            .flat_map(|l| l.pieces.iter().flatten().map(|p| p.1)),
    )
}

fn draw_line<DB: DrawingBackend, CT: CoordTranslate<From = (f64, f64)>>(
    chart: &mut ChartContext<'_, DB, CT>,
    line: &Line,
) -> DrawResult<DB> {
    let style = line
        .colour
        .stroke_width(if line.label == "noise floor" { 2 } else { 1 });
    let mut first = true;
    for piece in &line.pieces {
        // A single point would not show as a line: draw it as a dot.
        if piece.len() == 1 {
            chart.draw_series(
                piece
                    .iter()
                    .map(|&p| Circle::new(p, 2, line.colour.filled())),
            )?;
        }
        let drawn = chart.draw_series(LineSeries::new(piece.iter().copied(), style))?;
        if first {
            let c = line.colour;
            drawn.label(line.label).legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], c.stroke_width(2))
            });
            first = false;
        }
    }
    Ok(())
}

impl Figure for ReplayFigure {
    fn size(&self) -> (u32, u32) {
        (WIDTH, HEIGHT)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let note = match self.bucket_ms {
            Some(w) => format!(
                "{} records, min and max per {} of time",
                self.records,
                duration(w)
            ),
            None => format!("{} records", self.records),
        };
        let root = root.titled(&format!("{}  ({note})", self.title), (FONT, 22))?;
        let (upper, lower) = root.split_vertically(HEIGHT * 55 / 100);
        let x_desc = format!("time since the first record ({})", self.unit.name);
        let x = 0.0..self.x_max;

        // Upper panel: levels in dBm.
        let (lo, hi) = range_of(&self.top).unwrap_or((-130.0, -60.0));
        let y = padded(lo, hi, 0.06, 2.0);
        let band = (y.end - y.start) * 0.04;
        // Room below for the loss marks, above for the legend.
        let y = (y.start - 2.0 * band)..(y.end + 0.3 * (y.end - y.start));
        let y_dec = decimals(y.end - y.start);
        let mut chart = ChartBuilder::on(&upper)
            .margin(MARGIN)
            .x_label_area_size(36)
            .y_label_area_size(LEFT)
            .right_y_label_area_size(RIGHT)
            .build_cartesian_2d(x.clone(), y.clone())?;
        chart
            .configure_mesh()
            .x_desc(&x_desc)
            .y_desc("power (dBm)")
            .y_label_formatter(&|v| signed(*v, y_dec))
            .axis_desc_style((FONT, 15))
            .label_style((FONT, 13))
            .light_line_style(RGBColor(238, 238, 238))
            .draw()?;
        for l in &self.top {
            draw_line(&mut chart, l)?;
        }
        if !self.lost.is_empty() {
            let (a, b) = (y.start + 0.3 * band, y.start + 1.7 * band);
            let mut first = true;
            for chunk in self.lost.chunks(4096) {
                let drawn = chart.draw_series(
                    chunk
                        .iter()
                        .map(|&t| PathElement::new(vec![(t, a), (t, b)], LOST.stroke_width(2))),
                )?;
                if first {
                    drawn.label("packet lost").legend(|(x, y)| {
                        PathElement::new(
                            vec![(x + 12, y - 6), (x + 12, y + 6)],
                            LOST.stroke_width(2),
                        )
                    });
                    first = false;
                }
            }
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .label_font((FONT, 13))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(160, 160, 160))
            .draw()?;

        // Lower panel: chosen transmit power (dBm, left) and margin (dB, right).
        let tx_range = self
            .tx
            .as_ref()
            .and_then(|l| range_of([l]))
            .unwrap_or((0.0, 20.0));
        // The limits in force stay in view.
        let tx_range = [self.limits.map(|l| l.0), self.limits.map(|l| l.1), self.cap]
            .into_iter()
            .flatten()
            .map(f64::from)
            .filter(|v| v.is_finite())
            .fold(tx_range, |(a, b), v| (a.min(v), b.max(v)));
        let m_range = self
            .margin
            .as_ref()
            .and_then(|l| range_of([l]))
            .unwrap_or((-10.0, 20.0));
        // Room above for the legend.
        let headroom = |r: std::ops::Range<f64>| r.start..(r.end + 0.3 * (r.end - r.start));
        let y_tx = headroom(padded(tx_range.0, tx_range.1, 0.08, 1.0));
        let y_m = headroom(padded(m_range.0, m_range.1, 0.08, 1.0));
        let (tx_dec, m_dec) = (
            decimals(y_tx.end - y_tx.start),
            decimals(y_m.end - y_m.start),
        );
        let mut chart = ChartBuilder::on(&lower)
            .margin(MARGIN)
            .x_label_area_size(46)
            .y_label_area_size(LEFT)
            .right_y_label_area_size(RIGHT)
            .build_cartesian_2d(x.clone(), y_tx)?
            .set_secondary_coord(x, y_m);
        chart
            .configure_mesh()
            .x_desc(&x_desc)
            .y_desc("transmit power (dBm)")
            .y_label_formatter(&|v| signed(*v, tx_dec))
            .axis_desc_style((FONT, 15))
            .label_style((FONT, 13))
            .light_line_style(RGBColor(238, 238, 238))
            .draw()?;
        chart
            .configure_secondary_axes()
            .y_desc("margin (dB)")
            .y_label_formatter(&|v| signed(*v, m_dec))
            .axis_desc_style((FONT, 15))
            .label_style((FONT, 13))
            .draw()?;
        if let Some(l) = &self.tx {
            draw_line(&mut chart, l)?;
        }
        // Rate changes: short ticks along the bottom of the power panel.
        if !self.rate_changes.is_empty() {
            let (lo, hi) = (tx_range.0, tx_range.1);
            let band = (hi - lo).abs().max(1.0) * 0.05;
            let (a, b) = (lo - band, lo);
            let mut first = true;
            for chunk in self.rate_changes.chunks(4096) {
                let drawn =
                    chart.draw_series(chunk.iter().map(|&t| {
                        PathElement::new(vec![(t, a), (t, b)], GRID_C.stroke_width(2))
                    }))?;
                if first {
                    drawn.label("rate changed").legend(|(x, y)| {
                        PathElement::new(
                            vec![(x + 12, y - 6), (x + 12, y + 6)],
                            GRID_C.stroke_width(2),
                        )
                    });
                    first = false;
                }
            }
        }
        // The limits in force, dashed: the radio's range and the EIRP cap.
        let marks = [
            self.limits
                .map(|l| (f64::from(l.0), "lowest allowed", GRID_C)),
            self.limits
                .map(|l| (f64::from(l.1), "highest allowed", GRID_C)),
            self.cap
                .map(|c| (f64::from(c), "EIRP cap - antenna gain", LOST)),
        ];
        for (level, label, colour) in marks.into_iter().flatten() {
            let x_end = self.x_max;
            let dashes = (0..40).map(move |k| {
                let a = x_end * f64::from(k) / 40.0;
                PathElement::new(
                    vec![(a, level), (a + x_end / 80.0, level)],
                    colour.stroke_width(1),
                )
            });
            chart
                .draw_series(dashes)?
                .label(label)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 10, y)], colour.stroke_width(1))
                });
        }
        if let Some(l) = &self.margin {
            let mut first = true;
            for piece in &l.pieces {
                let drawn = chart
                    .draw_secondary_series(LineSeries::new(piece.iter().copied(), l.colour))?;
                if first {
                    let c = l.colour;
                    drawn.label("margin (right axis)").legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 24, y)], c.stroke_width(2))
                    });
                    first = false;
                }
            }
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .label_font((FONT, 13))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(160, 160, 160))
            .draw()?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(t_ms: u64, y: Option<f32>) -> ReplayPoint {
        ReplayPoint {
            t_ms,
            logged_rx_dbm: y,
            ..ReplayPoint::default()
        }
    }

    fn series(points: impl IntoIterator<Item = ReplayPoint>) -> ReplaySeries {
        let mut s = ReplaySeries::new();
        for p in points {
            s.push(p);
        }
        s
    }

    const SECONDS: TimeUnit = TimeUnit { name: "s", ms: 1e3 };

    #[test]
    fn decimation_keeps_a_one_record_spike_in_bounded_memory() {
        let n = 1_000_000u64;
        let s = series((0..n).map(|k| {
            let y = if k == 654_321 {
                -40.0
            } else {
                -90.0 + (k % 7) as f32 * 0.1
            };
            point(k * 1000, Some(y))
        }));
        assert_eq!(s.len(), n);
        assert!(s.buckets.len() <= MAX_BUCKETS, "{}", s.buckets.len());
        assert!(s.buckets.len() > MAX_BUCKETS / 2, "{}", s.buckets.len());
        assert!(s.decimated());
        let pts: Vec<(f64, f64)> = pieces(&s, LOGGED_LINE, SECONDS)
            .into_iter()
            .flatten()
            .collect();
        assert!(pts.len() <= 2 * MAX_BUCKETS, "{}", pts.len());
        // The spike, at its own time.
        assert!(
            pts.iter()
                .any(|&(x, v)| (v + 40.0).abs() < 1e-6 && (x - 654_321.0).abs() < 1e-6),
            "spike kept"
        );
        let lo = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        assert!((lo + 90.0).abs() < 1e-6);
        // Lines without values are empty.
        assert!(pieces(&s, TX_LINE, SECONDS).is_empty());
    }

    #[test]
    fn memory_does_not_grow_with_the_log_or_its_disorder() {
        // Times jumping back and forth over a wide range, a few equal.
        let mut s = ReplaySeries::new();
        let mut x: u64 = 12345;
        for _ in 0..300_000 {
            // A 64-bit LCG (Knuth's MMIX constants, from memory).
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            s.push(point(x >> 20, Some((x % 1000) as f32)));
        }
        assert!(s.buckets.len() <= MAX_BUCKETS);
        assert_eq!(s.len(), 300_000);
        // The size the README states.
        assert!(std::mem::size_of::<Bucket>() <= 280);
        // Every bucket's values lie within the data.
        for b in s.buckets.values() {
            let e = b.lines[LOGGED_LINE].expect("value");
            assert!(e.lo.1 <= e.hi.1 && e.lo.1 >= 0.0 && e.hi.1 < 1000.0);
        }
    }

    #[test]
    fn few_records_are_drawn_each_at_its_time() {
        let s = series([
            point(0, Some(1.0)),
            point(1000, Some(2.0)),
            point(2000, None),
            point(3000, Some(f32::NAN)),
            point(4000, Some(3.0)),
        ]);
        assert!(!s.decimated());
        let p = pieces(&s, LOGGED_LINE, SECONDS);
        assert_eq!(p, vec![vec![(0.0, 1.0), (1.0, 2.0)], vec![(4.0, 3.0)]]);
        // A pause of more than ten typical intervals cuts the line too.
        let s = series([0, 1000, 2000, 3000, 60_000, 61_000].map(|t| point(t, Some(1.0))));
        let p = pieces(&s, LOGGED_LINE, SECONDS);
        assert_eq!(p.iter().map(Vec::len).collect::<Vec<_>>(), vec![4, 2]);
    }

    #[test]
    fn every_lost_packet_stays_visible() {
        // One lost packet among a million: still marked, at its time.
        let s = series((0..1_000_000u64).map(|k| ReplayPoint {
            lost: k == 777_777,
            ..point(k * 10, Some(-90.0))
        }));
        assert!(s.decimated());
        assert_eq!(lost_marks(&s, SECONDS), vec![7_777.77]);
        // Many: at most one mark per bucket, one per record when few.
        let s = series((0..2_000u64).map(|k| ReplayPoint {
            lost: k % 2 == 0,
            ..point(k, None)
        }));
        assert_eq!(lost_marks(&s, SECONDS).len(), 1000);
        let s = series((0..1_000_000u64).map(|k| ReplayPoint {
            lost: k % 2 == 0,
            ..point(k, None)
        }));
        let marks = lost_marks(&s, SECONDS).len();
        assert!(marks <= MAX_BUCKETS && marks > MAX_BUCKETS / 2, "{marks}");
    }

    #[test]
    fn rate_changes_stay_visible() {
        let s = series((0..1_000_000u64).map(|k| ReplayPoint {
            rate_changed: k == 123_456 || k == 900_000,
            ..point(k * 10, Some(-90.0))
        }));
        assert_eq!(rate_marks(&s, SECONDS), vec![1_234.56, 9_000.0]);
    }

    #[test]
    fn time_unit_follows_the_span() {
        assert_eq!(time_unit(90e3).name, "s");
        assert_eq!(time_unit(3600e3).name, "min");
        assert_eq!(time_unit(86400e3).name, "h");
        assert_eq!(time_unit(30.0 * 86400e3).name, "days");
        assert_eq!(duration(512), "512 ms");
        assert_eq!(duration(262_144), "4.4 min");
    }

    #[test]
    fn an_empty_series_is_refused() {
        let dir = tempfile::tempdir().expect("temp dir");
        let e = replay_plot(&dir.path().join("r.svg"), false, "t", &ReplaySeries::new())
            .expect_err("empty");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("no records"), "{e}");
    }
}
