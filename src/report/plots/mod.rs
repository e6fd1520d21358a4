//! Plots of the report. Each figure is a small struct of plain data that draws itself on any
//! plotters backend; [`render`] turns it into an SVG string (for the HTML page) and a PNG
//! (for slides and tickets) from the same drawing code.
//!
//! Colours are chosen to stay apart in grey-scale print: the worst event is dark and thick,
//! ordinary events light and thin, clipped events carry a triangle, limits are black (solid
//! for the rating, dashed for the derating line).

mod compare;
mod fit;
mod histogram;
mod overlay;
mod overview;
mod return_level;

use std::ops::Range;

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

pub use compare::{CompareOverlay, CompareStrips, VariantData};
pub use fit::{FitPlot, PeakEstimate};
pub use histogram::StressHistogram;
pub use overlay::OverlayPlot;
pub use overview::OverviewPlot;
pub use return_level::ReturnLevelPlot;

use super::fonts;
use super::format::AxisUnit;

/// Pixel size of every plot.
pub const SIZE: (u32, u32) = (1000, 480);

/// One rendered plot.
#[derive(Debug, Clone)]
pub struct Plot {
    /// File stem under `plots/` (`overview-1`).
    pub name: String,
    /// Caption for the HTML page.
    pub caption: String,
    pub svg: String,
    pub png: Vec<u8>,
}

/// Why a plot could not be drawn.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("plot: {0}")]
pub struct PlotError(pub String);

impl<E: std::error::Error + Send + Sync> From<DrawingAreaErrorKind<E>> for PlotError {
    fn from(e: DrawingAreaErrorKind<E>) -> Self {
        PlotError(e.to_string())
    }
}

/// A figure that can draw itself on any backend.
pub trait Figure {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError>;
}

/// Draws `fig` twice, as SVG and as PNG.
pub fn render<F: Figure>(name: &str, caption: &str, fig: &F) -> Result<Plot, PlotError> {
    if !fonts::ensure_registered() {
        return Err(PlotError("the bundled font could not be loaded".into()));
    }
    let (w, h) = SIZE;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        root.fill(&WHITE)?;
        fig.draw(&root)?;
        root.present()?;
    }
    let mut rgb = vec![0u8; (w as usize) * (h as usize) * 3];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, SIZE).into_drawing_area();
        root.fill(&WHITE)?;
        fig.draw(&root)?;
        root.present()?;
    }
    let png = encode_png(&rgb, w, h).map_err(|e| PlotError(format!("PNG encoding: {e}")))?;
    Ok(Plot {
        name: name.to_string(),
        caption: caption.to_string(),
        svg,
        png,
    })
}

fn encode_png(rgb: &[u8], w: u32, h: u32) -> Result<Vec<u8>, png::EncodingError> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        enc.set_compression(png::Compression::Best);
        enc.set_adaptive_filter(png::AdaptiveFilterType::Adaptive);
        let mut writer = enc.write_header()?;
        writer.write_image_data(rgb)?;
        writer.finish()?;
    }
    Ok(out)
}

/// A horizontal (or, on a histogram, vertical) limit drawn across a plot.
#[derive(Debug, Clone, PartialEq)]
pub struct LimitLine {
    pub level_v: f64,
    pub label: String,
    pub dashed: bool,
}

impl LimitLine {
    /// The rating and 80 % derating lines for a switch whose other terminal sits at
    /// `rail_v`; the spike goes up from it (`up`) or down.
    pub fn rating_pair(rating_v: f64, derated_v: f64, rail_v: f64, up: bool) -> Vec<LimitLine> {
        let sign = if up { 1.0 } else { -1.0 };
        vec![
            LimitLine {
                level_v: rail_v + sign * rating_v,
                label: format!("rating {}", super::format::eng(rating_v, "V")),
                dashed: false,
            },
            LimitLine {
                level_v: rail_v + sign * derated_v,
                label: format!("derating {}", super::format::eng(derated_v, "V")),
                dashed: true,
            },
        ]
    }
}

// Palette (RGB of our own; lightness differs so grey-scale print keeps them apart).
pub(crate) const INK: RGBColor = RGBColor(25, 25, 25);
pub(crate) const EVENT: RGBColor = RGBColor(120, 150, 195);
pub(crate) const EVENT_DARK: RGBColor = RGBColor(35, 70, 125);
pub(crate) const WORST: RGBColor = RGBColor(165, 25, 20);
pub(crate) const CLIPPED: RGBColor = RGBColor(225, 135, 0);
pub(crate) const BAND: RGBColor = RGBColor(70, 165, 95);
pub(crate) const MODEL: RGBColor = RGBColor(0, 0, 0);

/// Line styles for several variants: colour, width, dashed.
pub(crate) const VARIANT_STYLES: [(RGBColor, u32, bool); 6] = [
    (RGBColor(20, 20, 20), 2, false),
    (RGBColor(200, 60, 40), 2, true),
    (RGBColor(60, 120, 200), 3, false),
    (RGBColor(120, 120, 120), 2, true),
    (RGBColor(230, 150, 30), 3, false),
    (RGBColor(90, 160, 90), 2, true),
];

pub(crate) fn font(size: u32) -> TextStyle<'static> {
    (fonts::FAMILY, size).into_font().color(&INK)
}

/// `lo..hi` widened by `frac` on each side; a degenerate or non-finite range becomes a
/// small one around its value so that plotters never divides by zero.
pub(crate) fn padded(lo: f64, hi: f64, frac: f64) -> Range<f64> {
    let (lo, hi) = match (lo.is_finite(), hi.is_finite()) {
        (true, true) => (lo.min(hi), lo.max(hi)),
        (true, false) => (lo, lo),
        (false, true) => (hi, hi),
        (false, false) => (0.0, 1.0),
    };
    let span = hi - lo;
    if span <= f64::EPSILON * lo.abs().max(hi.abs()).max(1e-300) {
        let d = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        return (lo - d)..(hi + d);
    }
    (lo - frac * span)..(hi + frac * span)
}

/// Extends `lo..hi` to include the limit levels that are within reach (no further than
/// `reach` data spans beyond the data): far-off limits would flatten the trace, so those
/// are left out and named in a note instead.
pub(crate) fn with_limits(lo: f64, hi: f64, limits: &[LimitLine], reach: f64) -> (f64, f64) {
    let span = (hi - lo).abs().max(f64::MIN_POSITIVE);
    let mut lo2 = lo;
    let mut hi2 = hi;
    for l in limits {
        if l.level_v.is_finite() && l.level_v >= lo - reach * span && l.level_v <= hi + reach * span
        {
            lo2 = lo2.min(l.level_v);
            hi2 = hi2.max(l.level_v);
        }
    }
    (lo2, hi2)
}

/// Limits outside `range`, as a note line.
pub(crate) fn off_scale_note(
    limits: &[LimitLine],
    range: &Range<f64>,
    unit: &str,
) -> Option<String> {
    let off: Vec<String> = limits
        .iter()
        .filter(|l| !range.contains(&l.level_v))
        .map(|l| format!("{} at {}", l.label, super::format::eng(l.level_v, unit)))
        .collect();
    if off.is_empty() {
        None
    } else {
        Some(format!("off scale: {}", off.join(", ")))
    }
}

pub(crate) type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The common frame: caption, axes with prefixed units, light grid.
pub(crate) fn frame<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    title: &str,
    x: Range<f64>,
    y: Range<f64>,
    x_desc: &str,
    y_desc: &str,
) -> Result<Chart<'a, DB>, PlotError> {
    let mut chart = ChartBuilder::on(area)
        .caption(title, font(20))
        .margin(12)
        .x_label_area_size(48)
        .y_label_area_size(72)
        .build_cartesian_2d(x, y)?;
    chart
        .configure_mesh()
        .light_line_style(RGBColor(235, 235, 235))
        .bold_line_style(RGBColor(205, 205, 205))
        .axis_style(INK)
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(font(14))
        .axis_desc_style(font(16))
        .x_labels(10)
        .y_labels(8)
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .draw()?;
    Ok(chart)
}

/// Axis tick text without needless zeros: `600`, `2.5`, `-0.125`.
pub fn tick(v: f64) -> String {
    let s = format!("{v:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

/// Draws the limits as horizontal lines across `x` with their labels at the right end.
pub(crate) fn draw_limits_h<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    limits: &[LimitLine],
    x: &Range<f64>,
    y_range: &Range<f64>,
    y_factor: f64,
) -> Result<(), PlotError> {
    for l in limits {
        let y = l.level_v * y_factor;
        if !y_range.contains(&y) {
            continue;
        }
        let pts = vec![(x.start, y), (x.end, y)];
        if l.dashed {
            chart.draw_series(DashedLineSeries::new(pts, 10, 6, INK.stroke_width(2)))?;
        } else {
            chart.draw_series(LineSeries::new(pts, INK.stroke_width(2)))?;
        }
        // Labels sit at the left end, clear of the legend box in the upper right.
        let x_text = x.start + 0.01 * (x.end - x.start);
        chart.draw_series(std::iter::once(
            EmptyElement::at((x_text, y)) + Text::new(l.label.clone(), (0, -18), font(14)),
        ))?;
    }
    Ok(())
}

/// Writes a note in the top-left corner of the plotting area.
pub(crate) fn note<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
) -> Result<(), PlotError> {
    area.draw(&Text::new(text.to_string(), (84, 40), font(14)))?;
    Ok(())
}

/// Scaled axis description: `"time from edge [us]"`.
pub(crate) fn desc(name: &str, unit: &AxisUnit) -> String {
    format!("{name} [{}]", unit.unit)
}

/// Largest absolute finite value, for picking an axis prefix.
pub(crate) fn max_abs(values: impl Iterator<Item = f64>) -> f64 {
    values
        .filter(|v| v.is_finite())
        .fold(0.0, |m, v| m.max(v.abs()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_never_collapse() {
        let r = padded(5.0, 5.0, 0.05);
        assert!(r.start < 5.0 && r.end > 5.0);
        let r = padded(0.0, 0.0, 0.05);
        assert!(r.start < 0.0 && r.end > 0.0);
        let r = padded(f64::NAN, f64::NAN, 0.05);
        assert!(r.start < r.end);
        let r = padded(0.0, 10.0, 0.1);
        assert_eq!(r, -1.0..11.0);
    }

    #[test]
    fn ticks_drop_needless_zeros() {
        assert_eq!(tick(600.0), "600");
        assert_eq!(tick(2.5), "2.5");
        assert_eq!(tick(-0.125), "-0.125");
        assert_eq!(tick(-0.00001), "0");
        assert_eq!(tick(1e-9), "0");
    }

    #[test]
    fn far_limits_are_left_out_of_the_range() {
        let lines = LimitLine::rating_pair(600.0, 480.0, 0.0, true);
        assert_eq!(lines[0].level_v, 600.0);
        // Data 0..50 V: 600 V lies 11 spans above, beyond a reach of 3.
        let (lo, hi) = with_limits(0.0, 50.0, &lines, 3.0);
        assert_eq!((lo, hi), (0.0, 50.0));
        let note = off_scale_note(&lines, &(lo..hi), "V").unwrap();
        assert!(note.contains("rating 600 V at 600 V"), "{note}");
        // Data 0..400 V: both lines come in.
        let (lo, hi) = with_limits(0.0, 400.0, &lines, 3.0);
        assert_eq!((lo, hi), (0.0, 600.0));
        let down = LimitLine::rating_pair(60.0, 48.0, 24.0, false);
        assert_eq!(down[0].level_v, -36.0);
    }
}
