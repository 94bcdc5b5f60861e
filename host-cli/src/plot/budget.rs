//! The level diagram of a link budget: the power after each stage of the
//! chain as a stepped line, against the noise floor, the sensitivity and the
//! sensitivity plus the fade allowance, with the margin marked at the
//! receiver input.

use std::path::Path;

use headroom::budget::{BudgetResult, Link, Side, Stage};
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::{finite_range, padded, save, signed, DrawResult, Figure, FONT};
use crate::error::CliResult;

const TX_BAND: RGBColor = RGBColor(222, 235, 247);
const PATH_BAND: RGBColor = RGBColor(254, 243, 214);
const RX_BAND: RGBColor = RGBColor(226, 243, 226);
const LEVEL: RGBColor = RGBColor(31, 90, 160);
const NOISE: RGBColor = RGBColor(120, 120, 120);
const SENS: RGBColor = RGBColor(214, 120, 20);
const FADE: RGBColor = RGBColor(200, 30, 30);
const GOOD: RGBColor = RGBColor(20, 130, 60);

/// `c` at 70 % over white, as the bands are drawn (an opaque equivalent).
fn mixed(c: RGBColor) -> RGBColor {
    let m = |x: u8| ((f64::from(x) * 0.7 + 255.0 * 0.3).round()).clamp(0.0, 255.0) as u8;
    RGBColor(m(c.0), m(c.1), m(c.2))
}

/// One column of the diagram.
struct Column {
    name: String,
    /// The stage's own gain in dB, shown under its name (items and path loss).
    gain_db: Option<f64>,
    band: Band,
    level_dbm: f64,
}

#[derive(Clone, Copy, PartialEq)]
enum Band {
    Tx,
    Path,
    Rx,
}

struct LevelDiagram {
    title: String,
    columns: Vec<Column>,
    noise_dbm: f64,
    sensitivity_dbm: f64,
    fade_db: f64,
    margin_db: f64,
    rx_dbm: f64,
}

/// Draw the level diagram of `link` to `path` (`.svg` or `.png`).
pub fn budget_plot<const N: usize>(
    path: &Path,
    force: bool,
    title: &str,
    link: &Link<N>,
    r: &BudgetResult,
) -> CliResult {
    super::check_destination(path, force)?;
    let band_of = |side| match side {
        Side::Transmitter => Band::Tx,
        Side::Path => Band::Path,
        Side::Receiver => Band::Rx,
    };
    let mut columns = Vec::new();
    for lv in link.levels()? {
        let band = match lv.stage {
            Stage::TransmitterOutput | Stage::Eirp => Band::Tx,
            Stage::PathLoss => Band::Path,
            Stage::Item(side) => band_of(side),
            Stage::ReceiverInput => Band::Rx,
        };
        let gain_db = lv.gain.map(|g| f64::from(g.0));
        columns.push(Column {
            name: crate::error::printable(lv.name),
            gain_db,
            band,
            level_dbm: f64::from(lv.level.0),
        });
    }
    let fig = LevelDiagram {
        title: crate::error::printable(title),
        columns,
        noise_dbm: f64::from(r.noise_power.0),
        sensitivity_dbm: f64::from(r.sensitivity.0),
        fade_db: f64::from(r.fade_margin.0),
        margin_db: f64::from(r.margin.0),
        rx_dbm: f64::from(r.rx_power.0),
    };
    save(path, force, &fig)
}

/// Break `text` into lines of at most `width` characters at spaces.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        if !cur.is_empty() && cur.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

impl Figure for LevelDiagram {
    fn size(&self) -> (u32, u32) {
        (1100, 680)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let n = self.columns.len();
        let nf = n as f64;
        let fade_line = self.sensitivity_dbm + self.fade_db;
        let (lo, hi) = finite_range(self.columns.iter().map(|c| c.level_dbm).chain([
            self.noise_dbm,
            self.sensitivity_dbm,
            fade_line,
        ]))
        .unwrap_or((-150.0, 30.0));
        let y = padded(lo, hi, 0.08, 3.0);
        let (y0, y1) = (y.start, y.end);

        let mut chart = ChartBuilder::on(root)
            .caption(&self.title, (FONT, 24))
            .margin(16)
            .margin_right(84)
            .x_label_area_size(92)
            .y_label_area_size(72)
            .build_cartesian_2d(-0.5..(nf - 0.5), y.clone())?;
        // Shaded bands for the transmitter, the path and the receiver.
        let mut captions = Vec::new();
        for (band, colour, caption) in [
            (Band::Tx, TX_BAND, "transmitter"),
            (Band::Path, PATH_BAND, "path"),
            (Band::Rx, RX_BAND, "receiver"),
        ] {
            let idx: Vec<f64> = self
                .columns
                .iter()
                .enumerate()
                .filter(|(_, c)| c.band == band)
                .map(|(k, _)| k as f64)
                .collect();
            let (Some(first), Some(last)) = (idx.first(), idx.last()) else {
                continue;
            };
            let (a, b) = (first - 0.5, last + 0.5);
            chart.draw_series(std::iter::once(Rectangle::new(
                [(a, y0), (b, y1)],
                colour.mix(0.7).filled(),
            )))?;
            captions.push((
                caption,
                chart.backend_coord(&((a + b) / 2.0, y1)),
                mixed(colour),
            ));
        }
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(0)
            .y_labels(12)
            .y_label_formatter(&|v| signed(*v, 0))
            .y_desc("power (dBm)")
            .x_desc("stage along the chain (gain or loss of the stage under its name)")
            .axis_desc_style((FONT, 16))
            .label_style((FONT, 14))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()?;

        // The reference levels, across the whole width.
        let across = |v: f64| vec![(-0.5, v), (nf - 0.5, v)];
        chart
            .draw_series(DashedLineSeries::new(
                across(self.noise_dbm),
                8,
                5,
                NOISE.stroke_width(2),
            ))?
            .label(format!("noise floor {} dBm", signed(self.noise_dbm, 1)))
            .legend(|(x, y)| {
                DashedPathElement::new(vec![(x, y), (x + 24, y)], 6, 3, NOISE.stroke_width(2))
            });
        chart
            .draw_series(LineSeries::new(
                across(self.sensitivity_dbm),
                SENS.stroke_width(2),
            ))?
            .label(format!(
                "sensitivity (noise + required C/N) {} dBm",
                signed(self.sensitivity_dbm, 1)
            ))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], SENS.stroke_width(2)));
        chart
            .draw_series(DashedLineSeries::new(
                across(fade_line),
                12,
                5,
                FADE.stroke_width(2),
            ))?
            .label(format!(
                "sensitivity + fade allowance {} dB: {} dBm",
                signed(self.fade_db, 1),
                signed(fade_line, 1)
            ))
            .legend(|(x, y)| {
                DashedPathElement::new(vec![(x, y), (x + 24, y)], 8, 3, FADE.stroke_width(2))
            });

        // The stepped level line: a flat bar per stage, joined by slopes.
        let half = 0.3;
        let steps: Vec<(f64, f64)> = self
            .columns
            .iter()
            .enumerate()
            .flat_map(|(k, c)| {
                [
                    (k as f64 - half, c.level_dbm),
                    (k as f64 + half, c.level_dbm),
                ]
            })
            .collect();
        chart
            .draw_series(LineSeries::new(steps, LEVEL.stroke_width(3)))?
            .label("power along the chain")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], LEVEL.stroke_width(3)));
        chart.draw_series(
            self.columns
                .iter()
                .enumerate()
                .map(|(k, c)| Circle::new((k as f64, c.level_dbm), 4, LEVEL.filled())),
        )?;

        let label = (FONT, 14).into_font().color(&BLACK);
        let small = (FONT, 13).into_font().color(&RGBColor(70, 70, 70));
        let (_, bottom) = chart.backend_coord(&(0.0, y0));
        let refs_px: Vec<i32> = [self.noise_dbm, self.sensitivity_dbm, fade_line]
            .iter()
            .map(|&v| chart.backend_coord(&(0.0, v)).1)
            .collect();
        for (k, c) in self.columns.iter().enumerate() {
            let (px, py) = chart.backend_coord(&(k as f64, c.level_dbm));
            // Above the bar, unless a reference line runs there and not
            // below; on a light patch so that a line behind stays readable.
            let crossed = |a: i32, b: i32| refs_px.iter().any(|&r| r > a && r < b);
            let below = crossed(py - 26, py - 2) && !crossed(py + 2, py + 26);
            let text = format!("{} dBm", signed(c.level_dbm, 1));
            let (w, h) = root.estimate_text_size(&text, &label)?;
            let (w, h) = (i32::try_from(w).unwrap_or(0), i32::try_from(h).unwrap_or(0));
            let (top, vpos, ty) = if below {
                (py + 8, VPos::Top, py + 8)
            } else {
                (py - 8 - h, VPos::Bottom, py - 8)
            };
            root.draw(&Rectangle::new(
                [(px - w / 2 - 2, top - 1), (px + w / 2 + 2, top + h + 1)],
                WHITE.mix(0.75).filled(),
            ))?;
            root.draw(&Text::new(
                text,
                (px, ty),
                label.pos(Pos::new(HPos::Center, vpos)),
            ))?;
            // The stage name under the axis, wrapped to the column, then its gain.
            let width = ((1000.0 / nf.max(1.0)) / 8.0).clamp(8.0, 24.0) as usize;
            let mut lines = wrap(&c.name, width);
            lines.truncate(3);
            let mut line_y = bottom + 8;
            for l in &lines {
                root.draw(&Text::new(
                    l.clone(),
                    (px, line_y),
                    label.pos(Pos::new(HPos::Center, VPos::Top)),
                ))?;
                line_y += 16;
            }
            if let Some(g) = c.gain_db {
                let text = if g >= 0.0 {
                    format!("+{g:.1} dB")
                } else {
                    format!("{} dB", signed(g, 1))
                };
                root.draw(&Text::new(
                    text,
                    (px, line_y),
                    small.pos(Pos::new(HPos::Center, VPos::Top)),
                ))?;
            }
        }

        // The margin, between the fade line and the received power, at the
        // right edge of the plot; its value outside, in the right margin.
        let xm = nf - 0.5 - 0.08;
        let colour = if self.margin_db >= 0.0 { GOOD } else { FADE };
        chart.draw_series(LineSeries::new(
            vec![(xm, fade_line), (xm, self.rx_dbm)],
            colour.stroke_width(3),
        ))?;
        for v in [fade_line, self.rx_dbm] {
            chart.draw_series(LineSeries::new(
                vec![(xm - 0.05, v), (xm + 0.05, v)],
                colour.stroke_width(3),
            ))?;
        }
        let (right, _) = chart.backend_coord(&(nf - 0.5, y0));
        let (_, py) = chart.backend_coord(&(xm, (fade_line + self.rx_dbm) / 2.0));
        let font = (FONT, 15).into_font().color(&colour);
        let word = if self.margin_db >= 0.0 {
            "margin"
        } else {
            "short by"
        };
        let value = if self.margin_db >= 0.0 {
            format!("{} dB", signed(self.margin_db, 1))
        } else {
            format!("{} dB", signed(-self.margin_db, 1))
        };
        root.draw(&Text::new(
            word,
            (right + 8, py - 1),
            font.pos(Pos::new(HPos::Left, VPos::Bottom)),
        ))?;
        root.draw(&Text::new(
            value,
            (right + 8, py + 1),
            font.pos(Pos::new(HPos::Left, VPos::Top)),
        ))?;

        // Band captions last, on an opaque patch so that grid lines do not
        // cross them.
        for (caption, (px, py), colour) in captions {
            let style = (FONT, 15).into_font().color(&RGBColor(80, 80, 80));
            let (w, h) = root.estimate_text_size(caption, &style)?;
            let (w, h) = (i32::try_from(w).unwrap_or(0), i32::try_from(h).unwrap_or(0));
            root.draw(&Rectangle::new(
                [(px - w / 2 - 4, py + 3), (px + w / 2 + 4, py + h + 9)],
                colour.filled(),
            ))?;
            root.draw(&Text::new(
                caption,
                (px, py + 6),
                style.pos(Pos::new(HPos::Center, VPos::Top)),
            ))?;
        }

        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::MiddleRight)
            .margin(20)
            .label_font((FONT, 14))
            .background_style(WHITE.mix(0.9))
            .border_style(RGBColor(160, 160, 160))
            .draw()?;
        Ok(())
    }
}

/// A coverage curve: the margin against distance or frequency, with the
/// target margin and the point where the curve meets it marked.
pub struct CoverageCurve {
    /// Title.
    pub title: String,
    /// Axis label of x (`distance (m)`, `frequency (MHz)`).
    pub x_label: String,
    /// x values, in the axis unit, increasing.
    pub x: Vec<f64>,
    /// Margin at each x, dB.
    pub margin_db: Vec<f64>,
    /// Target margin, dB.
    pub target_db: f64,
    /// Where the margin meets the target, in the axis unit, with its label.
    pub marker: Option<(f64, String)>,
    /// Logarithmic x axis.
    pub log_x: bool,
}

impl Figure for CoverageCurve {
    fn size(&self) -> (u32, u32) {
        (900, 560)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let (x0, x1) = finite_range(self.x.iter().copied()).unwrap_or((1.0, 10.0));
        let (lo, hi) = finite_range(self.margin_db.iter().copied().chain([self.target_db]))
            .unwrap_or((-10.0, 10.0));
        let y = padded(lo, hi, 0.08, 2.0);
        let points: Vec<(f64, f64)> = self
            .x
            .iter()
            .copied()
            .zip(self.margin_db.iter().copied())
            .collect();
        let mut builder = ChartBuilder::on(root);
        builder
            .caption(&self.title, (FONT, 22))
            .margin(16)
            .x_label_area_size(52)
            .y_label_area_size(64);
        let target = self.target_db;
        let marker = self.marker.clone();
        macro_rules! body {
            ($chart:ident) => {{
                $chart
                    .configure_mesh()
                    .x_desc(self.x_label.as_str())
                    .y_desc("margin (dB)")
                    .y_label_formatter(&|v| signed(*v, 0))
                    .axis_desc_style((FONT, 16))
                    .label_style((FONT, 14))
                    .light_line_style(RGBColor(235, 235, 235))
                    .draw()?;
                $chart.draw_series(LineSeries::new(points.clone(), LEVEL.stroke_width(2)))?;
                $chart.draw_series(std::iter::once(DashedPathElement::new(
                    vec![(x0, target), (x1, target)],
                    6,
                    4,
                    SENS.stroke_width(2),
                )))?;
                if let Some((xm, label)) = &marker {
                    $chart.draw_series(std::iter::once(PathElement::new(
                        vec![(*xm, y.start), (*xm, y.end)],
                        GOOD.stroke_width(2),
                    )))?;
                    $chart.draw_series(std::iter::once(Text::new(
                        label.clone(),
                        (*xm, y.end),
                        (FONT, 15)
                            .into_font()
                            .color(&GOOD)
                            .pos(Pos::new(HPos::Left, VPos::Top)),
                    )))?;
                }
            }};
        }
        if self.log_x {
            let mut chart = builder.build_cartesian_2d((x0..x1).log_scale(), y.clone())?;
            body!(chart);
        } else {
            let mut chart = builder.build_cartesian_2d(x0..x1, y.clone())?;
            body!(chart);
        }
        Ok(())
    }
}

/// Draw a coverage curve to `path` (`.svg` or `.png`).
pub fn coverage_plot(path: &Path, force: bool, curve: &CoverageCurve) -> CliResult {
    save(path, force, curve)
}

#[cfg(test)]
mod tests {
    use super::*;

    use headroom::budget::{FadeAllowance, NoiseSpec, Requirement};
    use headroom::units::{Db, Dbm, Hertz};

    #[test]
    fn a_short_link_without_items_is_drawn_and_escaped() {
        // 0 dBm over 140 dB against kT0·B·F of a 125 kHz, 6 dB receiver
        // (about −117 dBm): −140 dBm misses −127 dBm + 5 dB by 18 dB.
        let link: Link<4> = Link::new(
            Dbm(0.0),
            Db(140.0),
            NoiseSpec {
                bandwidth: Hertz(125e3),
                noise_figure: Db(6.0),
                antenna_temperature: None,
            },
            Requirement::CarrierToNoise(Db(-10.0)),
            FadeAllowance::Fixed(Db(5.0)),
        );
        let r = link.evaluate().expect("evaluates");
        assert!(r.margin.0 < 0.0, "{}", r.margin.0);
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("short.svg");
        budget_plot(&p, false, "cellar <probe> & gateway", &link, &r).expect("drawn");
        let text = std::fs::read_to_string(&p).expect("written");
        let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
        let texts: Vec<&str> = doc
            .descendants()
            .filter_map(|n| n.text())
            .map(str::trim)
            .collect();
        assert!(
            texts.contains(&"cellar <probe> & gateway"),
            "title escaped and kept: {texts:?}"
        );
        assert!(texts.contains(&"short by"));
        assert!(texts.contains(&format!("{} dB", signed(f64::from(-r.margin.0), 1)).as_str()));
        assert!(texts.contains(&"\u{2212}140.0 dBm"), "{texts:?}");
    }

    #[test]
    fn wraps_at_spaces() {
        assert_eq!(
            wrap("gateway feeder, 10 m", 12),
            vec!["gateway", "feeder, 10 m"]
        );
        assert_eq!(wrap("EIRP", 12), vec!["EIRP"]);
        assert_eq!(
            wrap("canopy (summer foliage)", 14),
            vec!["canopy (summer", "foliage)"]
        );
    }
}
