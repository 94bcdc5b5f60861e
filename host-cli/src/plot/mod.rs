//! Plots written as SVG or PNG (chosen by the file extension) with plotters.
//!
//! - [`budget_plot`]: the level diagram of a link budget (`headroom budget --plot`).
//! - [`replay_plot`]: per-record time series of a replayed field log
//!   (`headroom replay --plot`), decimated to min/max per pixel column.
//! - [`pareto_plot`]: mean transmit power against packet loss for a set of
//!   controller settings (`headroom tune --plot`).
//!
//! Every number drawn comes from the engine or from the records; this module
//! only places them. Files are written through [`crate::atomic`]: a temporary
//! file renamed into place, an existing file kept unless `force`.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::atomic;
use crate::error::{CliError, CliResult};

mod budget;
mod pareto;
mod replay;

pub use budget::{budget_plot, coverage_plot, CoverageCurve};
pub use pareto::{pareto_plot, FrontMarks};
pub use replay::{replay_plot, ReplayPoint, ReplaySeries};

/// The file types a plot can be written as.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotFormat {
    /// Scalable vector graphics, `.svg`.
    Svg,
    /// Portable network graphics, `.png`.
    Png,
}

impl PlotFormat {
    /// The format named by `path`'s extension (case-insensitive).
    pub fn from_path(path: &Path) -> CliResult<Self> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("svg") => Ok(PlotFormat::Svg),
            Some("png") => Ok(PlotFormat::Png),
            Some(other) => Err(CliError::arg(
                "--plot",
                format!(
                    "{}: unknown plot type '.{other}' (use .svg or .png)",
                    path.display()
                ),
            )),
            None => Err(CliError::arg(
                "--plot",
                format!("{}: no file extension (use .svg or .png)", path.display()),
            )),
        }
    }
}

/// Check a plot destination before any work: a known extension, and not an
/// existing file unless `force`.
pub fn check_destination(path: &Path, force: bool) -> CliResult<PlotFormat> {
    let f = PlotFormat::from_path(path)?;
    atomic::check_new(path, force)?;
    Ok(f)
}

/// Error type of the drawing calls of one backend.
type DrawResult<DB> = Result<(), DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// A plot that can draw itself on any plotters backend.
trait Figure {
    /// Width and height in pixels.
    fn size(&self) -> (u32, u32);
    /// Draw on the whole of `root`.
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB>;
}

fn draw_error(path: &Path, e: impl std::fmt::Display) -> CliError {
    CliError::Io(format!("{}: cannot draw the plot: {e}", path.display()))
}

/// Render `fig` in the format named by `path` and write it atomically.
fn save(path: &Path, force: bool, fig: &impl Figure) -> CliResult {
    let format = check_destination(path, force)?;
    let (w, h) = fig.size();
    let bytes = match format {
        PlotFormat::Svg => {
            let mut text = String::new();
            {
                let root = SVGBackend::with_string(&mut text, (w, h)).into_drawing_area();
                root.fill(&WHITE).map_err(|e| draw_error(path, e))?;
                fig.draw(&root).map_err(|e| draw_error(path, e))?;
                root.present().map_err(|e| draw_error(path, e))?;
            }
            svg_safe(text).into_bytes()
        }
        PlotFormat::Png => {
            let len = usize::try_from(u64::from(w) * u64::from(h) * 3)
                .map_err(|_| draw_error(path, "image too large"))?;
            let mut rgb = vec![0u8; len];
            {
                let root = BitMapBackend::with_buffer(&mut rgb, (w, h)).into_drawing_area();
                root.fill(&WHITE).map_err(|e| draw_error(path, e))?;
                fig.draw(&root).map_err(|e| draw_error(path, e))?;
                root.present().map_err(|e| draw_error(path, e))?;
            }
            encode_png(w, h, &rgb).map_err(|e| draw_error(path, e))?
        }
    };
    atomic::write(path, force, &bytes)
}

/// SVG text with every unprintable character escaped as
/// [`printable`](crate::error::printable) does, except the newlines between
/// elements: well-formed XML (which allows no C0 control but tab and
/// newline) without a raw control character, whatever a name held. The
/// figures escape their texts already; this is the last guard.
fn svg_safe(text: String) -> String {
    use crate::error::{is_unprintable, printable};
    if !text.chars().any(|c| c != '\n' && is_unprintable(c)) {
        return text;
    }
    text.split('\n')
        .map(printable)
        .collect::<Vec<_>>()
        .join("\n")
}

fn encode_png(w: u32, h: u32, rgb: &[u8]) -> Result<Vec<u8>, png::EncodingError> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut writer = enc.write_header()?;
        writer.write_image_data(rgb)?;
        writer.finish()?;
    }
    Ok(out)
}

/// Smallest and largest finite value of `values`, or `None`.
fn finite_range(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// `lo..hi` widened by `frac` of its span on each side (at least `min_pad`).
fn padded(lo: f64, hi: f64, frac: f64, min_pad: f64) -> std::ops::Range<f64> {
    let pad = ((hi - lo) * frac).max(min_pad);
    (lo - pad)..(hi + pad)
}

/// Minus sign for negative numbers in labels (U+2212 reads better than '-').
fn signed(x: f64, decimals: usize) -> String {
    let s = format!("{x:.decimals$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().any(|c| c != '0' && c != '.') => format!("\u{2212}{rest}"),
        Some(rest) => rest.to_string(),
        None => s,
    }
}

/// Decimals for axis labels over a range of `span`, so that ticks differ.
fn decimals(span: f64) -> usize {
    if span <= 1.0 {
        2
    } else if span <= 12.0 {
        1
    } else {
        0
    }
}

const FONT: &str = "sans-serif";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats_by_extension() {
        assert_eq!(
            PlotFormat::from_path(Path::new("a/b.svg")).ok(),
            Some(PlotFormat::Svg)
        );
        assert_eq!(
            PlotFormat::from_path(Path::new("b.PNG")).ok(),
            Some(PlotFormat::Png)
        );
        let e = PlotFormat::from_path(Path::new("b.jpg")).expect_err("refused");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains(".jpg"), "{e}");
        assert!(PlotFormat::from_path(Path::new("plot")).is_err());
    }

    /// A replay of `n` records with a slow fade, one deep spike, a gap and
    /// losses below the noise floor (an invented trace).
    pub(crate) fn sample_replay(n: u64) -> ReplaySeries {
        let mut s = ReplaySeries::default();
        for k in 0..n {
            let t = k * 30_000 + if k > n / 2 { 3_600_000 } else { 0 };
            let phase = k as f32 / n as f32 * 12.0;
            let fade = 6.0 * phase.sin() + if k % 97 == 0 { -22.0 } else { 0.0 };
            let tx = if fade < -3.0 { 14.0 } else { 8.0 };
            let rx = -104.0 + fade + tx - 8.0;
            s.push(ReplayPoint {
                t_ms: t,
                logged_rx_dbm: (rx > -121.0).then_some(rx),
                replayed_rx_dbm: Some(rx + 8.0 - tx + 10.0),
                noise_floor_dbm: Some(-117.0),
                tx_power_dbm: Some(tx),
                margin_db: Some(rx + 117.0 + 10.0 - 11.5),
                lost: rx <= -121.0,
                threshold_dbm: Some(-117.0 + 8.0),
                rate_changed: false,
            });
        }
        s
    }

    pub(crate) fn sample_pareto() -> Vec<(f32, f32, String, bool)> {
        (0..9)
            .map(|k| {
                let margin = k as f32 * 1.5;
                let tx = 2.0 + margin + if k % 3 == 1 { 1.5 } else { 0.0 };
                let loss = 0.08 * (-(margin) / 4.0).exp() + if k % 3 == 1 { 0.01 } else { 0.0 };
                (tx, loss, format!("target {margin:.1} dB"), loss <= 0.01)
            })
            .collect()
    }

    fn svg_texts(path: &Path) -> String {
        let text = std::fs::read_to_string(path).expect("svg written");
        let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        doc.descendants()
            .filter_map(|n| n.text())
            .collect::<Vec<_>>()
            .join("\n")
    }

    fn png_size(path: &Path) -> (u32, u32) {
        let f = std::fs::File::open(path).expect("png written");
        let reader = png::Decoder::new(f).read_info().expect("a PNG");
        let info = reader.info();
        (info.width, info.height)
    }

    #[test]
    fn replay_plot_renders_svg_and_png() {
        let dir = tempfile::tempdir().expect("temp dir");
        let s = sample_replay(1_000_000);
        let svg = dir.path().join("r.svg");
        replay_plot(&svg, false, "Orchard node 7 replay", &s).expect("svg");
        let texts = svg_texts(&svg);
        for needle in [
            "power (dBm)",
            "transmit power (dBm)",
            "margin (dB)",
            "time since the first record (days)",
            "packet lost",
            "1000000 records",
        ] {
            assert!(texts.contains(needle), "no '{needle}' in the SVG");
        }
        // Decimated: five series of at most two points per column stay small.
        let bytes = std::fs::metadata(&svg).expect("meta").len();
        assert!(bytes < 1_500_000, "{bytes} bytes");
        let png = dir.path().join("r.png");
        replay_plot(&png, false, "Orchard node 7 replay", &s).expect("png");
        assert_eq!(png_size(&png), (1200, 760));
        let e = replay_plot(&png, false, "again", &s).expect_err("exists");
        assert!(e.to_string().contains("--force"), "{e}");
        replay_plot(&png, true, "again", &sample_replay(40)).expect("forced");
    }

    #[test]
    fn pareto_plot_renders_svg_and_png() {
        let dir = tempfile::tempdir().expect("temp dir");
        let pts = sample_pareto();
        let svg = dir.path().join("p.svg");
        pareto_plot(
            &svg,
            false,
            "Tuning the orchard controller",
            &pts,
            &FrontMarks {
                front: vec![0],
                best: Some(0),
                default: Some(1),
                x_label: None,
            },
            0.01,
        )
        .expect("svg");
        let texts = svg_texts(&svg);
        for needle in [
            "mean transmit power (dBm)",
            "packets lost (%)",
            "target: 1.00 % lost",
            "target 4.5 dB",
        ] {
            assert!(texts.contains(needle), "no '{needle}' in the SVG");
        }
        let png = dir.path().join("p.png");
        pareto_plot(
            &png,
            false,
            "Tuning the orchard controller",
            &pts,
            &FrontMarks::default(),
            0.01,
        )
        .expect("png");
        assert_eq!(png_size(&png), (1000, 640));
    }

    #[test]
    fn label_decimals_follow_the_span() {
        assert_eq!(decimals(0.5), 2);
        assert_eq!(decimals(3.0), 1);
        assert_eq!(decimals(140.0), 0);
    }

    #[test]
    fn labels_use_a_true_minus() {
        assert_eq!(signed(-117.04, 1), "\u{2212}117.0");
        assert_eq!(signed(3.26, 1), "3.3");
        assert_eq!(signed(-0.01, 1), "0.0");
    }
}
