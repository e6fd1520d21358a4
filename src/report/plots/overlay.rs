//! Aligned overlay: every event of a variant on one time axis from its edge, the worst
//! highlighted, the off level and the settle band shaded.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    desc, draw_limits_h, frame, max_abs, note, off_scale_note, padded, with_limits, Figure,
    LimitLine, PlotError, BAND, EVENT, INK, WORST,
};
use crate::report::format::{axis_unit, eng};
use crate::report::sketch::EventWave;

/// Most waves drawn; beyond this the SVG grows without showing more.
pub const MAX_OVERLAID: usize = 300;

/// Overlay of events aligned at their edges.
pub struct OverlayPlot<'a> {
    pub title: String,
    pub waves: Vec<&'a EventWave>,
    pub worst: Option<&'a EventWave>,
    pub v_off: Option<f64>,
    /// Half-width of the settle band around `v_off`.
    pub band_v: Option<f64>,
    pub limits: Vec<LimitLine>,
}

impl Figure for OverlayPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let all = || self.waves.iter().copied().chain(self.worst);
        let t_lo = all()
            .flat_map(|w| w.t_s.first())
            .fold(f64::INFINITY, |a, &b| a.min(b));
        let t_hi = all()
            .flat_map(|w| w.t_s.last())
            .fold(f64::NEG_INFINITY, |a, &b| a.max(b));
        let (mut v_lo, mut v_hi) = all()
            .flat_map(|w| w.v.iter())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v), hi.max(v))
            });
        if let (Some(off), Some(b)) = (self.v_off, self.band_v) {
            v_lo = v_lo.min(off - b);
            v_hi = v_hi.max(off + b);
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
        let (y_lo, y_hi) = with_limits(v_lo, v_hi, &self.limits, 3.0);
        let tu = axis_unit(max_abs([t_lo, t_hi].into_iter()), "s");
        let vu = axis_unit(max_abs([y_lo, y_hi].into_iter()), "V");
        let x = padded(t_lo * tu.factor, t_hi * tu.factor, 0.01);
        let y = padded(y_lo * vu.factor, y_hi * vu.factor, 0.08);
        let mut chart = frame(
            root,
            &self.title,
            x.clone(),
            y.clone(),
            &desc("time from the edge (50 % crossing)", &tu),
            &desc("switch node", &vu),
        )?;

        if let (Some(off), Some(b)) = (self.v_off, self.band_v) {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [
                        (x.start, (off - b) * vu.factor),
                        (x.end, (off + b) * vu.factor),
                    ],
                    BAND.mix(0.22).filled(),
                )))?
                .label(format!("settle band (off level ± {})", eng(b, "V")))
                .legend(|(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], BAND.mix(0.4).filled())
                });
        }
        if let Some(off) = self.v_off {
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(x.start, off * vu.factor), (x.end, off * vu.factor)],
                    4,
                    4,
                    BAND.stroke_width(2),
                ))?
                .label(format!("off level {}", eng(off, "V")))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], BAND.stroke_width(2)));
        }
        let mut first = true;
        for w in self.waves.iter().take(MAX_OVERLAID) {
            let series = chart.draw_series(LineSeries::new(
                w.t_s
                    .iter()
                    .zip(&w.v)
                    .map(|(&t, &v)| (t * tu.factor, v * vu.factor)),
                EVENT.mix(0.8).stroke_width(1),
            ))?;
            if first {
                let label = if self.waves.len() > MAX_OVERLAID {
                    format!(
                        "other events (first {MAX_OVERLAID} of {})",
                        self.waves.len()
                    )
                } else {
                    format!("other events ({})", self.waves.len())
                };
                series.label(label).legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], EVENT.stroke_width(2))
                });
                first = false;
            }
        }
        if let Some(w) = self.worst {
            chart
                .draw_series(LineSeries::new(
                    w.t_s
                        .iter()
                        .zip(&w.v)
                        .map(|(&t, &v)| (t * tu.factor, v * vu.factor)),
                    WORST.stroke_width(3),
                ))?
                .label(format!(
                    "worst: event {}, {}",
                    w.index,
                    eng(w.switch_stress_v, "V")
                ))
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], WORST.stroke_width(3))
                });
        }
        draw_limits_h(&mut chart, &self.limits, &x, &y, vu.factor)?;
        chart
            .configure_series_labels()
            .label_font(super::font(13))
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .position(SeriesLabelPosition::UpperRight)
            .draw()?;
        let y_volts = (y.start / vu.factor)..(y.end / vu.factor);
        if let Some(n) = off_scale_note(&self.limits, &y_volts, "V") {
            note(root, &n)?;
        }
        Ok(())
    }
}
