//! Time series of a replayed field log: received power (logged and replayed)
//! against the noise floor, with lost packets marked, above the transmit
//! power the controller chose and the margin it kept.
//!
//! Long logs are decimated: the time axis is cut into one bucket per pixel
//! column and each series keeps its smallest and largest value in every
//! bucket, in the order they occurred, so that a single-record spike stays
//! visible while the drawing holds at most two points per column.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{decimals, finite_range, padded, save, signed, DrawResult, Figure, FONT};
use crate::error::{CliError, CliResult};

const WIDTH: u32 = 1200;
const HEIGHT: u32 = 760;
/// Left and right label areas and margins, in pixels: what is left is the
/// width of the plotting area, one decimation bucket per pixel column.
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

/// Per-record columns of a replay, all as long as `t_ms`; a column left
/// empty is not drawn. `None` (or a non-finite value) is a record without
/// that value and leaves a gap in the line.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReplaySeries {
    /// Time of each record, milliseconds since the log's start.
    pub t_ms: Vec<u64>,
    /// Received power as logged, dBm.
    pub logged_rx_dbm: Vec<Option<f32>>,
    /// Received power the replayed transmit power would have given, dBm.
    pub replayed_rx_dbm: Vec<Option<f32>>,
    /// Noise floor at the receiver, dBm.
    pub noise_floor_dbm: Vec<Option<f32>>,
    /// Transmit power the controller chose, dBm.
    pub tx_power_dbm: Vec<Option<f32>>,
    /// Margin over the requirement, dB.
    pub margin_db: Vec<Option<f32>>,
    /// The packet was lost.
    pub lost: Vec<bool>,
    /// Loss threshold: the received power below which the packet is lost
    /// (noise floor + required SNR), dBm.
    pub threshold_dbm: Vec<Option<f32>>,
    /// Lowest and highest level the controller was allowed, dBm.
    pub limits_dbm: Option<(f32, f32)>,
    /// Transmit power at the EIRP cap (cap − antenna gain), dBm, if a cap
    /// is configured.
    pub cap_tx_dbm: Option<f32>,
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

/// A line cut at its gaps: each inner vector is drawn as one polyline.
type Pieces = Vec<Vec<(f64, f64)>>;

/// The time axis shared by every series: where each record falls.
struct Axis {
    t0: u64,
    span_ms: f64,
    unit: TimeUnit,
    /// Number of buckets; 0 means no decimation (few records).
    buckets: usize,
}

impl Axis {
    fn x(&self, t: u64) -> f64 {
        t.saturating_sub(self.t0) as f64 / self.unit.ms
    }

    fn bucket(&self, t: u64) -> usize {
        if self.span_ms <= 0.0 {
            return 0;
        }
        let f = t.saturating_sub(self.t0) as f64 / self.span_ms;
        ((f * self.buckets as f64) as usize).min(self.buckets.saturating_sub(1))
    }

    fn bucket_x(&self, b: usize) -> f64 {
        (b as f64 + 0.5) / self.buckets.max(1) as f64 * self.span_ms / self.unit.ms
    }
}

fn value(v: Option<f32>) -> Option<f64> {
    v.map(f64::from).filter(|x| x.is_finite())
}

/// Median of the positive steps between consecutive records, ms (0 if none).
fn typical_interval(t: &[u64]) -> u64 {
    let mut steps: Vec<u64> = t
        .windows(2)
        .filter_map(|w| match w {
            [a, b] if b > a => Some(b - a),
            _ => None,
        })
        .collect();
    steps.sort_unstable();
    steps.get(steps.len() / 2).copied().unwrap_or(0)
}

/// The polyline pieces of one column: every record when there are few,
/// else min and max per bucket.
fn pieces(axis: &Axis, t: &[u64], ys: &[Option<f32>]) -> Pieces {
    let mut out: Pieces = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    if axis.buckets == 0 {
        // A pause of more than ten typical intervals is a gap in the log.
        let gap = 10 * typical_interval(t).max(1);
        let mut prev: Option<u64> = None;
        for (&ti, &y) in t.iter().zip(ys) {
            let paused = prev.is_some_and(|p| ti.saturating_sub(p) > gap);
            prev = Some(ti);
            if paused && !cur.is_empty() {
                out.push(std::mem::take(&mut cur));
            }
            match value(y) {
                Some(y) => cur.push((axis.x(ti), y)),
                None => {
                    if !cur.is_empty() {
                        out.push(std::mem::take(&mut cur));
                    }
                }
            }
        }
    } else {
        // (min, index of min, max, index of max) per bucket; None when the
        // bucket holds no value of this series.
        let mut acc: Vec<Option<(f64, usize, f64, usize)>> = vec![None; axis.buckets];
        for (k, (&ti, &y)) in t.iter().zip(ys).enumerate() {
            let Some(y) = value(y) else { continue };
            if let Some(slot) = acc.get_mut(axis.bucket(ti)) {
                *slot = Some(match *slot {
                    None => (y, k, y, k),
                    Some((lo, klo, hi, khi)) => {
                        let (lo, klo) = if y < lo { (y, k) } else { (lo, klo) };
                        let (hi, khi) = if y > hi { (y, k) } else { (hi, khi) };
                        (lo, klo, hi, khi)
                    }
                });
            }
        }
        for (b, slot) in acc.iter().enumerate() {
            match *slot {
                // An empty bucket is a gap in the log (or in this series).
                None => {
                    if !cur.is_empty() {
                        out.push(std::mem::take(&mut cur));
                    }
                }
                Some((lo, klo, hi, khi)) => {
                    let x = axis.bucket_x(b);
                    if klo <= khi {
                        cur.push((x, lo));
                        cur.push((x, hi));
                    } else {
                        cur.push((x, hi));
                        cur.push((x, lo));
                    }
                }
            }
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// x positions of lost packets: one per record, or one per bucket.
fn lost_marks(axis: &Axis, t: &[u64], lost: &[bool]) -> Vec<f64> {
    if axis.buckets == 0 {
        return t
            .iter()
            .zip(lost)
            .filter(|(_, &l)| l)
            .map(|(&ti, _)| axis.x(ti))
            .collect();
    }
    let mut hit = vec![false; axis.buckets];
    for (&ti, _) in t.iter().zip(lost).filter(|(_, &l)| l) {
        if let Some(h) = hit.get_mut(axis.bucket(ti)) {
            *h = true;
        }
    }
    hit.iter()
        .enumerate()
        .filter(|(_, &h)| h)
        .map(|(b, _)| axis.bucket_x(b))
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
    records: usize,
    decimated: bool,
    top: Vec<Line>,
    lost: Vec<f64>,
    tx: Option<Line>,
    margin: Option<Line>,
    limits: Option<(f32, f32)>,
    cap: Option<f32>,
}

fn check_len<T>(name: &str, col: &[T], n: usize) -> CliResult {
    if col.is_empty() || col.len() == n {
        Ok(())
    } else {
        Err(CliError::Input(format!(
            "replay plot: column '{name}' has {} values for {n} records",
            col.len()
        )))
    }
}

/// Draw the time series of a replay to `path` (`.svg` or `.png`); refuses to
/// replace an existing file unless `force`.
pub fn replay_plot(path: &Path, force: bool, title: &str, series: &ReplaySeries) -> CliResult {
    super::check_destination(path, force)?;
    let s = series;
    let n = s.t_ms.len();
    if n == 0 {
        return Err(CliError::Input(
            "replay plot: the log has no records".into(),
        ));
    }
    check_len("logged_rx_dbm", &s.logged_rx_dbm, n)?;
    check_len("replayed_rx_dbm", &s.replayed_rx_dbm, n)?;
    check_len("noise_floor_dbm", &s.noise_floor_dbm, n)?;
    check_len("tx_power_dbm", &s.tx_power_dbm, n)?;
    check_len("margin_db", &s.margin_db, n)?;
    check_len("lost", &s.lost, n)?;
    check_len("threshold_dbm", &s.threshold_dbm, n)?;

    let t0 = s.t_ms.iter().copied().min().unwrap_or(0);
    let t1 = s.t_ms.iter().copied().max().unwrap_or(0);
    let span_ms = t1.saturating_sub(t0) as f64;
    let unit = time_unit(span_ms);
    let columns = (WIDTH - LEFT - RIGHT - 2 * MARGIN) as usize;
    let decimated = n > 2 * columns && span_ms > 0.0;
    let axis = Axis {
        t0,
        span_ms,
        unit,
        buckets: if decimated { columns } else { 0 },
    };

    let line = |label, colour, col: &[Option<f32>]| {
        (!col.is_empty()).then(|| Line {
            label,
            colour,
            pieces: pieces(&axis, &s.t_ms, col),
        })
    };
    let top: Vec<Line> = [
        line("noise floor", NOISE, &s.noise_floor_dbm),
        line("received power, logged", LOGGED, &s.logged_rx_dbm),
        line("received power, replayed", REPLAYED, &s.replayed_rx_dbm),
        line(
            "loss threshold (noise + required SNR)",
            LOST,
            &s.threshold_dbm,
        ),
    ]
    .into_iter()
    .flatten()
    .collect();
    let fig = ReplayFigure {
        title: title.to_string(),
        x_max: (span_ms / unit.ms).max(1e-9),
        unit,
        records: n,
        decimated,
        top,
        lost: lost_marks(&axis, &s.t_ms, &s.lost),
        tx: line("transmit power chosen", TX, &s.tx_power_dbm),
        margin: line("margin", MARGIN_C, &s.margin_db),
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
        let note = if self.decimated {
            format!("{} records, min and max per pixel column", self.records)
        } else {
            format!("{} records", self.records)
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

    fn axis(n_buckets: usize, span: u64) -> Axis {
        Axis {
            t0: 0,
            span_ms: span as f64,
            unit: time_unit(span as f64),
            buckets: n_buckets,
        }
    }

    #[test]
    fn decimation_keeps_a_one_record_spike() {
        let n = 100_000u64;
        let t: Vec<u64> = (0..n).map(|k| k * 1000).collect();
        let mut y: Vec<Option<f32>> = (0..n).map(|k| Some(-90.0 + (k % 7) as f32 * 0.1)).collect();
        if let Some(v) = y.get_mut(54_321) {
            *v = Some(-40.0);
        }
        let a = axis(1000, (n - 1) * 1000);
        let p = pieces(&a, &t, &y);
        let pts: Vec<(f64, f64)> = p.into_iter().flatten().collect();
        assert!(pts.len() <= 2000, "{}", pts.len());
        assert!(
            pts.iter().any(|&(_, v)| (v + 40.0).abs() < 1e-6),
            "spike kept"
        );
        let lo = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        assert!((lo + 90.0).abs() < 1e-6);
    }

    #[test]
    fn gaps_cut_the_line() {
        let t = vec![0, 1000, 2000, 3000, 4000];
        let y = vec![Some(1.0), Some(2.0), None, Some(f32::NAN), Some(3.0)];
        let p = pieces(&axis(0, 4000), &t, &y);
        assert_eq!(p, vec![vec![(0.0, 1.0), (1.0, 2.0)], vec![(4.0, 3.0)]]);
        // A pause of more than ten typical intervals cuts the line too.
        let t = vec![0, 1000, 2000, 3000, 60_000, 61_000];
        let y = vec![Some(1.0); 6];
        let p = pieces(&axis(0, 61_000), &t, &y);
        assert_eq!(p.iter().map(Vec::len).collect::<Vec<_>>(), vec![4, 2]);
    }

    #[test]
    fn lost_marks_are_one_per_bucket() {
        let t: Vec<u64> = (0..10_000).collect();
        let lost: Vec<bool> = (0..10_000).map(|k| k % 2 == 0).collect();
        assert_eq!(lost_marks(&axis(100, 9999), &t, &lost).len(), 100);
        assert_eq!(lost_marks(&axis(0, 9999), &t, &lost).len(), 5000);
    }

    #[test]
    fn time_unit_follows_the_span() {
        assert_eq!(time_unit(90e3).name, "s");
        assert_eq!(time_unit(3600e3).name, "min");
        assert_eq!(time_unit(86400e3).name, "h");
        assert_eq!(time_unit(30.0 * 86400e3).name, "days");
    }

    #[test]
    fn mismatched_columns_are_refused() {
        let dir = tempfile::tempdir().expect("temp dir");
        let s = ReplaySeries {
            t_ms: vec![0, 1, 2],
            logged_rx_dbm: vec![Some(1.0)],
            ..Default::default()
        };
        let e = replay_plot(&dir.path().join("r.svg"), false, "t", &s).expect_err("refused");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("logged_rx_dbm"), "{e}");
        let e = replay_plot(
            &dir.path().join("r.svg"),
            false,
            "t",
            &ReplaySeries::default(),
        )
        .expect_err("empty");
        assert!(e.to_string().contains("no records"), "{e}");
    }
}
