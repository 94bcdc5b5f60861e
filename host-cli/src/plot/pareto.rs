//! Mean transmit power against packet loss for a set of controller settings,
//! with the target loss, the settings that meet it, and the Pareto front
//! (the settings no other one beats on both power and loss).

use std::path::Path;

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::{finite_range, padded, save, signed, DrawResult, Figure, FONT};
use crate::error::{printable, CliError, CliResult};

const MEETS: RGBColor = RGBColor(20, 130, 60);
const MISSES: RGBColor = RGBColor(150, 150, 150);
const FRONT: RGBColor = RGBColor(31, 90, 160);
const TARGET: RGBColor = RGBColor(200, 30, 30);

struct Point {
    tx_dbm: f64,
    loss_pct: f64,
    label: String,
    meets: bool,
}

struct ParetoFigure {
    title: String,
    x_label: String,
    points: Vec<Point>,
    /// Indices into `points` of the front, by rising transmit power.
    front: Vec<usize>,
    /// The setting chosen as best.
    best: Option<usize>,
    /// The default setting.
    default: Option<usize>,
    target_pct: f64,
}

/// What the caller computed about the points (`headroom tune`'s front and
/// choice, computed once, in one place): indices into the points.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FrontMarks {
    /// The Pareto front, by rising transmit power.
    pub front: Vec<usize>,
    /// The setting chosen as best.
    pub best: Option<usize>,
    /// The default setting.
    pub default: Option<usize>,
    /// What the x axis measures (`None`: mean transmit power in dBm).
    pub x_label: Option<String>,
}

/// Draw `points` = (mean transmit power in dBm, packet loss rate as a
/// fraction in [0, 1], label, meets the target) to `path` (`.svg` or `.png`),
/// with a line at `target_outage` (a fraction), the front, the best and the
/// default marked as `marks` says. Refuses to replace an existing file
/// unless `force`. Control characters of the title and the labels are
/// escaped.
pub fn pareto_plot<L: AsRef<str>>(
    path: &Path,
    force: bool,
    title: &str,
    points: &[(f32, f32, L, bool)],
    marks: &FrontMarks,
    target_outage: f32,
) -> CliResult {
    super::check_destination(path, force)?;
    if points.is_empty() {
        return Err(CliError::Input("pareto plot: no settings to plot".into()));
    }
    if !(0.0..=1.0).contains(&target_outage) {
        return Err(CliError::Input(format!(
            "pareto plot: target outage {target_outage} is not a fraction in [0, 1]"
        )));
    }
    let mut pts = Vec::with_capacity(points.len());
    for (tx, loss, label, meets) in points {
        let label = label.as_ref();
        if !tx.is_finite() {
            return Err(CliError::Input(format!(
                "pareto plot: '{}': mean transmit power is {tx}",
                printable(label)
            )));
        }
        if !(0.0..=1.0).contains(loss) {
            return Err(CliError::Input(format!(
                "pareto plot: '{}': loss rate {loss} is not a fraction in [0, 1]",
                printable(label)
            )));
        }
        pts.push(Point {
            tx_dbm: f64::from(*tx),
            loss_pct: 100.0 * f64::from(*loss),
            label: printable(label),
            meets: *meets,
        });
    }
    let fig = ParetoFigure {
        title: printable(title),
        x_label: marks
            .x_label
            .clone()
            .unwrap_or_else(|| "mean transmit power (dBm)".to_string()),
        front: marks.front.clone(),
        points: pts,
        best: marks.best,
        default: marks.default,
        target_pct: 100.0 * f64::from(target_outage),
    };
    save(path, force, &fig)
}

/// log10 for choosing label precision (printing only).
fn libm_free_log10(x: f64) -> f64 {
    if x > 0.0 {
        x.log10()
    } else {
        0.0
    }
}

impl Figure for ParetoFigure {
    fn size(&self) -> (u32, u32) {
        (1000, 640)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let (x0, x1) = finite_range(self.points.iter().map(|p| p.tx_dbm)).unwrap_or((0.0, 20.0));
        let (y0, y1) = finite_range(
            self.points
                .iter()
                .map(|p| p.loss_pct)
                .chain([self.target_pct]),
        )
        .unwrap_or((0.0, 10.0));
        let x = padded(x0, x1, 0.08, 0.5);
        // Zoom on the points (and the target line) rather than starting at 0 %:
        // settings of one sweep often differ by hundredths of a percent.
        let span = (y1 - y0).max(0.02 * y1.max(0.1));
        let y = (y0 - 0.25 * span).max(0.0)..(y1 + 0.25 * span);
        // Enough decimals to tell the grid lines apart.
        let y_decimals = (1.0 - libm_free_log10(span / 10.0).floor()).clamp(1.0, 4.0) as usize;
        let mut chart = ChartBuilder::on(root)
            .caption(&self.title, (FONT, 22))
            .margin(16)
            .margin_right(28)
            .x_label_area_size(52)
            .y_label_area_size(72)
            .build_cartesian_2d(x.clone(), y.clone())?;
        chart
            .configure_mesh()
            .x_desc(self.x_label.as_str())
            .y_desc("packets lost (%)")
            .x_label_formatter(&|v| signed(*v, 1))
            .y_label_formatter(&|v| format!("{v:.*}", y_decimals))
            .axis_desc_style((FONT, 16))
            .label_style((FONT, 14))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()?;

        chart
            .draw_series(DashedLineSeries::new(
                vec![(x.start, self.target_pct), (x.end, self.target_pct)],
                10,
                5,
                TARGET.stroke_width(2),
            ))?
            .label(format!("target: {:.2} % lost", self.target_pct))
            .legend(|(x, y)| {
                DashedPathElement::new(vec![(x, y), (x + 24, y)], 7, 3, TARGET.stroke_width(2))
            });

        // The front as a staircase: from each setting along at its loss to
        // the next one's power, then down to its loss.
        let stairs: Vec<(f64, f64)> =
            self.front
                .iter()
                .filter_map(|&k| self.points.get(k))
                .fold(Vec::new(), |mut acc, p| {
                    if let Some(&(_, prev_loss)) = acc.last() {
                        acc.push((p.tx_dbm, prev_loss));
                    }
                    acc.push((p.tx_dbm, p.loss_pct));
                    acc
                });
        chart
            .draw_series(LineSeries::new(stairs, FRONT.stroke_width(2)))?
            .label("Pareto front: no setting is better on both")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], FRONT.stroke_width(2)));

        chart
            .draw_series(
                self.points
                    .iter()
                    .filter(|p| p.meets)
                    .map(|p| Circle::new((p.tx_dbm, p.loss_pct), 6, MEETS.filled())),
            )?
            .label("meets the target")
            .legend(|(x, y)| Circle::new((x + 12, y), 6, MEETS.filled()));
        chart
            .draw_series(
                self.points
                    .iter()
                    .filter(|p| !p.meets)
                    .map(|p| Circle::new((p.tx_dbm, p.loss_pct), 6, MISSES.stroke_width(2))),
            )?
            .label("misses the target")
            .legend(|(x, y)| Circle::new((x + 12, y), 6, MISSES.stroke_width(2)));
        if let Some(b) = self.best.and_then(|k| self.points.get(k)) {
            chart
                .draw_series(std::iter::once(Circle::new(
                    (b.tx_dbm, b.loss_pct),
                    11,
                    MEETS.stroke_width(2),
                )))?
                .label("lowest power that meets the target")
                .legend(|(x, y)| Circle::new((x + 12, y), 8, MEETS.stroke_width(2)));
        }

        if let Some(d) = self.default.and_then(|k| self.points.get(k)) {
            chart.draw_series(std::iter::once(Rectangle::new(
                [(d.tx_dbm, d.loss_pct), (d.tx_dbm, d.loss_pct)],
                TARGET.stroke_width(2),
            )))?;
            let (px, py) = chart.backend_coord(&(d.tx_dbm, d.loss_pct));
            root.draw(&Rectangle::new(
                [(px - 9, py - 9), (px + 9, py + 9)],
                TARGET.stroke_width(2),
            ))?;
        }

        // Labels: all of them when few, else those on the front, the best
        // and the default.
        let few = self.points.len() <= 12;
        let label = (FONT, 13).into_font().color(&BLACK);
        for (k, p) in self.points.iter().enumerate() {
            if !(few || self.front.contains(&k) || self.best == Some(k) || self.default == Some(k))
            {
                continue;
            }
            let (px, py) = chart.backend_coord(&(p.tx_dbm, p.loss_pct));
            root.draw(&Text::new(
                p.label.clone(),
                (px + 10, py - 8),
                label.pos(Pos::new(HPos::Left, VPos::Bottom)),
            ))?;
        }

        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .label_font((FONT, 14))
            .background_style(WHITE.mix(0.9))
            .border_style(RGBColor(160, 160, 160))
            .draw()?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_points_are_refused() {
        let dir = tempfile::tempdir().expect("temp dir");
        let f = dir.path().join("p.svg");
        let m = FrontMarks::default();
        let e =
            pareto_plot(&f, false, "t", &[(10.0, 1.5, "a", false)], &m, 0.01).expect_err("refused");
        assert!(e.to_string().contains("'a'"), "{e}");
        let e = pareto_plot(&f, false, "t", &[(f32::NAN, 0.1, "b", false)], &m, 0.01)
            .expect_err("refused");
        assert!(e.to_string().contains("'b'"), "{e}");
        let none: &[(f32, f32, &str, bool)] = &[];
        assert!(pareto_plot(&f, false, "t", none, &m, 0.01).is_err());
        assert!(pareto_plot(&f, false, "t", &[(1.0, 0.1, "c", true)], &m, 2.0).is_err());
        assert!(!f.exists());
    }
}
