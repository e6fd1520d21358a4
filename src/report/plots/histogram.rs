//! Histogram of per-event switch stress with the rating and derating lines.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    desc, font, max_abs, note, off_scale_note, padded, tick, with_limits, Figure, LimitLine,
    PlotError, EVENT, EVENT_DARK, INK,
};
use crate::report::format::axis_unit;

/// Distribution of switch stress over all events. `limits` are stress levels (the rating
/// itself, not a node voltage).
pub struct StressHistogram<'a> {
    pub title: String,
    pub stress_v: &'a [f64],
    pub limits: Vec<LimitLine>,
}

/// Bin count: the square-root rule (common practice), kept between 5 and 40 bins.
fn n_bins(n: usize) -> usize {
    ((n as f64).sqrt().ceil() as usize).clamp(5, 40)
}

/// Counts per bin over `lo..hi`; the top edge belongs to the last bin.
pub(crate) fn bin_counts(values: &[f64], lo: f64, hi: f64, bins: usize) -> Vec<usize> {
    let mut counts = vec![0usize; bins];
    let width = (hi - lo) / bins as f64;
    if width.is_nan() || width <= 0.0 {
        if let Some(c) = counts.first_mut() {
            *c = values.iter().filter(|v| v.is_finite()).count();
        }
        return counts;
    }
    for &v in values.iter().filter(|v| v.is_finite()) {
        let k = (((v - lo) / width).floor().max(0.0) as usize).min(bins - 1);
        if let Some(c) = counts.get_mut(k) {
            *c += 1;
        }
    }
    counts
}

impl Figure for StressHistogram<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let finite: Vec<f64> = self
            .stress_v
            .iter()
            .copied()
            .filter(|v| v.is_finite())
            .collect();
        let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let (lo, hi) = if lo <= hi { (lo, hi) } else { (0.0, 1.0) };
        let data = padded(lo, hi, 0.02);
        let bins = n_bins(finite.len());
        let counts = bin_counts(&finite, data.start, data.end, bins);
        let width = (data.end - data.start) / bins as f64;
        let (x_lo, x_hi) = with_limits(data.start, data.end, &self.limits, 3.0);
        let xu = axis_unit(max_abs([x_lo, x_hi].into_iter()), "V");
        let x = padded(x_lo * xu.factor, x_hi * xu.factor, 0.03);
        let top = counts.iter().copied().max().unwrap_or(1).max(1) as f64;
        let y = 0.0..top * 1.15;
        let mut chart = ChartBuilder::on(root)
            .caption(&self.title, font(20))
            .margin(12)
            .x_label_area_size(48)
            .y_label_area_size(72)
            .build_cartesian_2d(x.clone(), y.clone())?;
        chart
            .configure_mesh()
            .light_line_style(RGBColor(235, 235, 235))
            .bold_line_style(RGBColor(205, 205, 205))
            .axis_style(INK)
            .x_desc(desc("switch stress |peak - rail|", &xu))
            .y_desc("events per bin")
            .label_style(font(14))
            .axis_desc_style(font(16))
            .x_labels(10)
            .x_label_formatter(&|v| tick(*v))
            // Counts are whole numbers; fractional ticks get no label.
            .y_label_formatter(&|v| {
                if (v - v.round()).abs() < 1e-9 {
                    format!("{v:.0}")
                } else {
                    String::new()
                }
            })
            .draw()?;
        chart
            .draw_series(counts.iter().enumerate().map(|(k, &c)| {
                let a = (data.start + k as f64 * width) * xu.factor;
                let b = (data.start + (k + 1) as f64 * width) * xu.factor;
                Rectangle::new([(a, 0.0), (b, c as f64)], EVENT.filled())
            }))?
            .label(format!("{} events, {bins} bins", finite.len()))
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], EVENT.filled()));
        chart.draw_series(counts.iter().enumerate().map(|(k, &c)| {
            let a = (data.start + k as f64 * width) * xu.factor;
            let b = (data.start + (k + 1) as f64 * width) * xu.factor;
            Rectangle::new([(a, 0.0), (b, c as f64)], EVENT_DARK.stroke_width(1))
        }))?;
        for l in &self.limits {
            let xv = l.level_v * xu.factor;
            if !x.contains(&xv) {
                continue;
            }
            let pts = vec![(xv, 0.0), (xv, y.end)];
            if l.dashed {
                chart.draw_series(DashedLineSeries::new(pts, 10, 6, INK.stroke_width(2)))?;
            } else {
                chart.draw_series(LineSeries::new(pts, INK.stroke_width(2)))?;
            }
            // Right of the line, or left of it near the right edge (about 8 px per character).
            let dx = if xv > x.start + 0.75 * (x.end - x.start) {
                -(l.label.chars().count() as i32 * 8 + 6)
            } else {
                6
            };
            chart.draw_series(std::iter::once(
                EmptyElement::at((xv, y.end * 0.93))
                    + Text::new(l.label.clone(), (dx, 0), font(14)),
            ))?;
        }
        chart
            .configure_series_labels()
            .label_font(font(13))
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .position(SeriesLabelPosition::UpperLeft)
            .draw()?;
        let x_volts = (x.start / xu.factor)..(x.end / xu.factor);
        if let Some(n) = off_scale_note(&self.limits, &x_volts, "V") {
            note(root, &n)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_value_lands_in_one_bin() {
        let v = [0.0, 0.5, 1.0, 9.99, 10.0, f64::NAN];
        let c = bin_counts(&v, 0.0, 10.0, 5);
        assert_eq!(c, vec![3, 0, 0, 0, 2]);
        assert_eq!(c.iter().sum::<usize>(), 5);
        assert_eq!(bin_counts(&[3.0, 3.0], 3.0, 3.0, 4), vec![2, 0, 0, 0]);
        assert_eq!(n_bins(100), 10);
        assert_eq!(n_bins(3), 5);
    }
}
