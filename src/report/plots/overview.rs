//! Capture overview: the whole trace as a min/max envelope, every event's peak marked and
//! numbered, the worst highlighted, clipped peaks as triangles, rating lines.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    desc, draw_limits_h, font, frame, max_abs, note, off_scale_note, padded, with_limits, Figure,
    LimitLine, PlotError, CLIPPED, EVENT, EVENT_DARK, WORST,
};
use crate::report::format::axis_unit;
use crate::report::sketch::TraceSketch;

/// Numbers are written beside the markers only up to this many events.
const MAX_NUMBERED: usize = 40;

/// The overview plot of one capture.
pub struct OverviewPlot<'a> {
    pub sketch: &'a TraceSketch,
    /// `index` of the worst event of this capture (or of the whole run).
    pub worst_index: Option<usize>,
    pub limits: Vec<LimitLine>,
}

impl Figure for OverviewPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let s = self.sketch;
        let env = &s.envelope;
        let t_lo = env.first().map_or(s.t0_s, |p| p.t_s);
        let t_hi = env
            .last()
            .map_or(s.t0_s + s.dt_s * s.n_samples as f64, |p| p.t_s);
        let tu = axis_unit(max_abs([t_lo, t_hi].into_iter()), "s");
        let v_lo = env.iter().map(|p| p.min_v).fold(f64::INFINITY, f64::min);
        let v_hi = env
            .iter()
            .map(|p| p.max_v)
            .fold(f64::NEG_INFINITY, f64::max);
        let (v_lo, v_hi) = if v_lo <= v_hi {
            (v_lo, v_hi)
        } else {
            (0.0, 1.0)
        };
        let (y_lo, y_hi) = with_limits(v_lo, v_hi, &self.limits, 3.0);
        let vu = axis_unit(max_abs([y_lo, y_hi].into_iter()), "V");
        let x = padded(t_lo * tu.factor, t_hi * tu.factor, 0.01);
        let y = padded(y_lo * vu.factor, y_hi * vu.factor, 0.08);
        let title = format!("{}: whole capture, {} events", s.file, s.events.len());
        let mut chart = frame(
            root,
            &title,
            x.clone(),
            y.clone(),
            &desc("time", &tu),
            &desc("switch node", &vu),
        )?;

        // Envelope as a filled band so a one-sample spike stays visible.
        let band: Vec<(f64, f64)> = env
            .iter()
            .map(|p| (p.t_s * tu.factor, p.max_v * vu.factor))
            .chain(
                env.iter()
                    .rev()
                    .map(|p| (p.t_s * tu.factor, p.min_v * vu.factor)),
            )
            .collect();
        if !band.is_empty() {
            chart
                .draw_series(std::iter::once(Polygon::new(
                    band,
                    EVENT.mix(0.55).filled(),
                )))?
                .label("trace (min/max per column)")
                .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], EVENT.filled()));
            chart.draw_series(LineSeries::new(
                env.iter().map(|p| (p.t_s * tu.factor, p.max_v * vu.factor)),
                EVENT_DARK.stroke_width(1),
            ))?;
            chart.draw_series(LineSeries::new(
                env.iter().map(|p| (p.t_s * tu.factor, p.min_v * vu.factor)),
                EVENT_DARK.stroke_width(1),
            ))?;
        }

        draw_limits_h(&mut chart, &self.limits, &x, &y, vu.factor)?;

        let numbered = s.events.len() <= MAX_NUMBERED;
        let at = |w: &crate::report::sketch::EventWave| {
            ((w.t_edge_s + w.t_peak_s) * tu.factor, w.peak_v * vu.factor)
        };
        // Labels above an upward spike, below a downward one.
        let label_dy = |w: &crate::report::sketch::EventWave| {
            if w.peak_v >= s.v_off.unwrap_or(0.0) {
                -22
            } else {
                8
            }
        };
        let plain: Vec<_> = s
            .events
            .iter()
            .filter(|w| !w.clipped && Some(w.index) != self.worst_index)
            .collect();
        if !plain.is_empty() {
            chart
                .draw_series(plain.iter().map(|w| {
                    let label = if numbered {
                        format!("{}", w.index)
                    } else {
                        String::new()
                    };
                    EmptyElement::at(at(w))
                        + Circle::new((0, 0), 4, EVENT_DARK.filled())
                        + Text::new(label, (-4, label_dy(w)), font(13))
                }))?
                .label("event peak (number = event index)")
                .legend(|(x, y)| Circle::new((x + 9, y), 4, EVENT_DARK.filled()));
        }
        let clipped: Vec<_> = s
            .events
            .iter()
            .filter(|w| w.clipped && Some(w.index) != self.worst_index)
            .collect();
        if !clipped.is_empty() {
            chart
                .draw_series(clipped.iter().map(|w| {
                    let label = if numbered {
                        format!("{}", w.index)
                    } else {
                        String::new()
                    };
                    EmptyElement::at(at(w))
                        + TriangleMarker::new((0, 0), 7, CLIPPED.filled())
                        + Text::new(label, (-4, label_dy(w)), font(13))
                }))?
                .label("clipped peak (a lower bound)")
                .legend(|(x, y)| TriangleMarker::new((x + 9, y), 7, CLIPPED.filled()));
        }
        if let Some(w) = s.events.iter().find(|w| Some(w.index) == self.worst_index) {
            let label = format!(
                "worst: event {}{}",
                w.index,
                if w.clipped { " (clipped)" } else { "" }
            );
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at(at(w))
                        + TriangleMarker::new(
                            (0, 0),
                            if w.clipped { 16 } else { 0 },
                            CLIPPED.filled(),
                        )
                        + Circle::new((0, 0), 8, WORST.filled())
                        + Circle::new((0, 0), 11, WORST.stroke_width(2))
                        + Text::new(label, (12, label_dy(w)), font(14)),
                ))?
                .label(if w.clipped {
                    "worst event (clipped: its peak is a lower bound)"
                } else {
                    "worst event"
                })
                .legend(|(x, y)| Circle::new((x + 9, y), 6, WORST.filled()));
        }
        chart
            .configure_series_labels()
            .label_font(font(13))
            .background_style(WHITE.mix(0.85))
            .border_style(super::INK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()?;
        let y_volts = (y.start / vu.factor)..(y.end / vu.factor);
        if let Some(n) = off_scale_note(&self.limits, &y_volts, "V") {
            note(root, &n)?;
        }
        Ok(())
    }
}
