//! Model fit of one event: measured samples against the fitted damped-RLC curve, clipped
//! stretches shaded, the reconstructed peak marked with its interval.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    desc, font, frame, max_abs, padded, Figure, PlotError, CLIPPED, EVENT_DARK, INK, MODEL, WORST,
};
use crate::report::format::{axis_unit, eng};

/// The peak the model reconstructs through a clipped stretch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakEstimate {
    /// Time from the edge.
    pub t_s: f64,
    pub v: f64,
    pub lower_v: Option<f64>,
    pub upper_v: Option<f64>,
}

/// Measured samples and model curve of one event, times from its edge.
#[derive(Debug, Clone, PartialEq)]
pub struct FitPlot {
    pub title: String,
    pub measured: Vec<(f64, f64)>,
    pub model: Vec<(f64, f64)>,
    /// Name of the model for the legend (`"damped RLC"`).
    pub model_name: String,
    /// Time spans (from the edge) where the samples sit on an ADC rail.
    pub clipped_spans: Vec<(f64, f64)>,
    pub peak_est: Option<PeakEstimate>,
}

impl Figure for FitPlot {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let pts = || self.measured.iter().chain(self.model.iter());
        let t_lo = pts().map(|p| p.0).fold(f64::INFINITY, f64::min);
        let t_hi = pts().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
        let mut v_lo = pts().map(|p| p.1).fold(f64::INFINITY, f64::min);
        let mut v_hi = pts().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
        if let Some(p) = &self.peak_est {
            for v in [Some(p.v), p.lower_v, p.upper_v].into_iter().flatten() {
                v_lo = v_lo.min(v);
                v_hi = v_hi.max(v);
            }
        }
        let (t_lo, t_hi) = if t_lo <= t_hi {
            (t_lo, t_hi)
        } else {
            (0.0, 1e-6)
        };
        let (v_lo, v_hi) = if v_lo <= v_hi {
            (v_lo, v_hi)
        } else {
            (0.0, 1.0)
        };
        let tu = axis_unit(max_abs([t_lo, t_hi].into_iter()), "s");
        let vu = axis_unit(max_abs([v_lo, v_hi].into_iter()), "V");
        let x = padded(t_lo * tu.factor, t_hi * tu.factor, 0.01);
        let y = padded(v_lo * vu.factor, v_hi * vu.factor, 0.08);
        let mut chart = frame(
            root,
            &self.title,
            x.clone(),
            y.clone(),
            &desc("time from the edge", &tu),
            &desc("switch node", &vu),
        )?;
        let mut first = true;
        for &(a, b) in &self.clipped_spans {
            let s = chart.draw_series(std::iter::once(Rectangle::new(
                [(a * tu.factor, y.start), (b * tu.factor, y.end)],
                CLIPPED.mix(0.2).filled(),
            )))?;
            if first {
                s.label("clipped stretch (samples on the ADC rail)")
                    .legend(|(x, y)| {
                        Rectangle::new([(x, y - 5), (x + 18, y + 5)], CLIPPED.mix(0.4).filled())
                    });
                first = false;
            }
        }
        chart
            .draw_series(self.measured.iter().map(|&(t, v)| {
                Circle::new((t * tu.factor, v * vu.factor), 2, EVENT_DARK.filled())
            }))?
            .label("measured samples")
            .legend(|(x, y)| Circle::new((x + 9, y), 3, EVENT_DARK.filled()));
        chart
            .draw_series(DashedLineSeries::new(
                self.model
                    .iter()
                    .map(|&(t, v)| (t * tu.factor, v * vu.factor))
                    .collect::<Vec<_>>(),
                8,
                4,
                MODEL.stroke_width(2),
            ))?
            .label(format!("fitted model: {}", self.model_name))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], MODEL.stroke_width(2)));
        if let Some(p) = &self.peak_est {
            let at = (p.t_s * tu.factor, p.v * vu.factor);
            if let (Some(lo), Some(hi)) = (p.lower_v, p.upper_v) {
                chart.draw_series(LineSeries::new(
                    vec![(at.0, lo * vu.factor), (at.0, hi * vu.factor)],
                    WORST.stroke_width(2),
                ))?;
            }
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at(at)
                        + Cross::new((0, 0), 7, WORST.stroke_width(3))
                        + Text::new(
                            format!("reconstructed peak {}", eng(p.v, "V")),
                            (10, -6),
                            font(14),
                        ),
                ))?
                .label("reconstructed peak (with interval)")
                .legend(|(x, y)| Cross::new((x + 9, y), 5, WORST.stroke_width(2)));
        }
        chart
            .configure_series_labels()
            .label_font(font(13))
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()?;
        Ok(())
    }
}
