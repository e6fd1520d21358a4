//! Return-level plot of the extreme-value projection (Coles 2001, section 3.3.3): the
//! level expected to be exceeded once in N switchings against N on a log axis, with its
//! interval band, and the events themselves at their empirical return periods.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{font, max_abs, padded, tick, Figure, LimitLine, PlotError, EVENT_DARK, INK, WORST};
use crate::report::digest::ReturnLevel;
use crate::report::format::axis_unit;

/// Projected levels and the observed events.
pub struct ReturnLevelPlot {
    pub title: String,
    pub levels: Vec<ReturnLevel>,
    /// (return period in switchings, switch stress) of each observed event.
    pub empirical: Vec<(f64, f64)>,
    /// Stress levels (rating, derating) as horizontal lines.
    pub limits: Vec<LimitLine>,
}

impl ReturnLevelPlot {
    /// Empirical return periods of observed stresses: the k-th largest of n values is
    /// exceeded with probability k / (n + 1) per switching (Weibull plotting position,
    /// Gumbel 1958), so its return period is (n + 1) / k switchings.
    pub fn empirical_points(stress_v: &[f64]) -> Vec<(f64, f64)> {
        let mut v: Vec<f64> = stress_v.iter().copied().filter(|x| x.is_finite()).collect();
        v.sort_by(|a, b| b.total_cmp(a));
        let n = v.len() as f64;
        v.iter()
            .enumerate()
            .map(|(k, &x)| ((n + 1.0) / (k as f64 + 1.0), x))
            .collect()
    }
}

impl Figure for ReturnLevelPlot {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let periods = self
            .levels
            .iter()
            .map(|r| r.switchings)
            .chain(self.empirical.iter().map(|p| p.0))
            .filter(|p| p.is_finite() && *p > 0.0);
        let p_lo = periods.clone().fold(f64::INFINITY, f64::min).min(1.0);
        let p_hi = periods.fold(f64::NEG_INFINITY, f64::max).max(10.0);
        let values = self
            .levels
            .iter()
            .flat_map(|r| [Some(r.level_v), r.lower_v, r.upper_v])
            .flatten()
            .chain(self.empirical.iter().map(|p| p.1))
            .chain(self.limits.iter().map(|l| l.level_v))
            .filter(|v| v.is_finite());
        let v_lo = values.clone().fold(f64::INFINITY, f64::min);
        let v_hi = values.fold(f64::NEG_INFINITY, f64::max);
        let (v_lo, v_hi) = if v_lo <= v_hi {
            (v_lo, v_hi)
        } else {
            (0.0, 1.0)
        };
        let vu = axis_unit(max_abs([v_lo, v_hi].into_iter()), "V");
        let y = padded(v_lo * vu.factor, v_hi * vu.factor, 0.08);
        let x = (p_lo * 0.8)..(p_hi * 1.5);
        let mut chart = ChartBuilder::on(root)
            .caption(&self.title, font(20))
            .margin(12)
            .x_label_area_size(48)
            .y_label_area_size(72)
            .build_cartesian_2d(x.clone().log_scale(), y.clone())?;
        chart
            .configure_mesh()
            .light_line_style(RGBColor(235, 235, 235))
            .bold_line_style(RGBColor(205, 205, 205))
            .axis_style(INK)
            .x_desc("return period [switchings, log scale]")
            .y_desc(format!("switch stress [{}]", vu.unit))
            .label_style(font(14))
            .axis_desc_style(font(16))
            .x_label_formatter(&|v| format!("{v:.0e}"))
            .y_label_formatter(&|v| tick(*v))
            .draw()?;
        let banded: Vec<_> = self
            .levels
            .iter()
            .filter_map(|r| Some((r.switchings, r.lower_v?, r.upper_v?)))
            .collect();
        if banded.len() >= 2 {
            let poly: Vec<(f64, f64)> = banded
                .iter()
                .map(|&(p, _, hi)| (p, hi * vu.factor))
                .chain(banded.iter().rev().map(|&(p, lo, _)| (p, lo * vu.factor)))
                .collect();
            chart
                .draw_series(std::iter::once(Polygon::new(
                    poly,
                    WORST.mix(0.15).filled(),
                )))?
                .label("interval of the projection")
                .legend(|(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], WORST.mix(0.3).filled())
                });
        }
        if !self.levels.is_empty() {
            chart
                .draw_series(LineSeries::new(
                    self.levels
                        .iter()
                        .map(|r| (r.switchings, r.level_v * vu.factor)),
                    WORST.stroke_width(3),
                ))?
                .label("projected return level")
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], WORST.stroke_width(3))
                });
        }
        if !self.empirical.is_empty() {
            chart
                .draw_series(
                    self.empirical.iter().map(|&(p, v)| {
                        Circle::new((p, v * vu.factor), 3, EVENT_DARK.stroke_width(1))
                    }),
                )?
                .label("observed events")
                .legend(|(x, y)| Circle::new((x + 9, y), 3, EVENT_DARK.stroke_width(1)));
        }
        for l in &self.limits {
            let yv = l.level_v * vu.factor;
            let pts = vec![(x.start, yv), (x.end, yv)];
            if l.dashed {
                chart.draw_series(DashedLineSeries::new(pts, 10, 6, INK.stroke_width(2)))?;
            } else {
                chart.draw_series(LineSeries::new(pts, INK.stroke_width(2)))?;
            }
            chart.draw_series(std::iter::once(
                EmptyElement::at((x.start * 1.2, yv))
                    + Text::new(l.label.clone(), (0, -18), font(14)),
            ))?;
        }
        chart
            .configure_series_labels()
            .label_font(font(13))
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .position(SeriesLabelPosition::LowerRight)
            .draw()?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weibull_positions() {
        // n = 3: the largest has return period 4 switchings, the smallest 4/3 (Weibull
        // plotting position k/(n+1)).
        let p = ReturnLevelPlot::empirical_points(&[10.0, 30.0, 20.0, f64::NAN]);
        assert_eq!(p, vec![(4.0, 30.0), (2.0, 20.0), (4.0 / 3.0, 10.0)]);
    }
}
