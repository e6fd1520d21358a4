//! Variant comparison: the median event of each variant overlaid, and strip plots of switch
//! stress and decay time per variant (the trade-off a clamp choice makes).

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{desc, font, frame, max_abs, padded, Figure, PlotError, INK, VARIANT_STYLES};
use crate::measure::Event;
use crate::report::format::axis_unit;
use crate::report::sketch::{EventWave, TraceSketch};

/// One variant's data for the comparison plots.
#[derive(Debug, Clone, PartialEq)]
pub struct VariantData {
    pub label: String,
    /// The median event's waveform: times from the edge, volts.
    pub median_t_s: Vec<f64>,
    pub median_v: Vec<f64>,
    pub stress_v: Vec<f64>,
    pub decay_s: Vec<f64>,
}

impl VariantData {
    /// A variant from its captures' sketches and events: the median wave is that of the event
    /// with the median switch stress over all its captures.
    pub fn from_parts<'a>(
        label: &str,
        sketches: &[&TraceSketch],
        events: impl IntoIterator<Item = &'a Event>,
    ) -> VariantData {
        let mut waves: Vec<&EventWave> = sketches
            .iter()
            .flat_map(|s| s.events.iter())
            .filter(|w| w.switch_stress_v.is_finite())
            .collect();
        waves.sort_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v));
        let median = waves.get(waves.len() / 2);
        let mut stress_v = Vec::new();
        let mut decay_s = Vec::new();
        for e in events {
            stress_v.push(e.switch_stress_v);
            if let Some(d) = e.decay_time_s {
                decay_s.push(d);
            }
        }
        VariantData {
            label: label.to_string(),
            median_t_s: median.map_or_else(Vec::new, |w| w.t_s.clone()),
            median_v: median.map_or_else(Vec::new, |w| w.v.clone()),
            stress_v,
            decay_s,
        }
    }
}

/// Median events of several variants on one axis.
pub struct CompareOverlay<'a> {
    pub title: String,
    pub variants: &'a [VariantData],
}

impl Figure for CompareOverlay<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let ts = || {
            self.variants
                .iter()
                .flat_map(|v| v.median_t_s.iter().copied())
        };
        let vs = || {
            self.variants
                .iter()
                .flat_map(|v| v.median_v.iter().copied())
        };
        let t_lo = ts().fold(f64::INFINITY, f64::min);
        let t_hi = ts().fold(f64::NEG_INFINITY, f64::max);
        let v_lo = vs().fold(f64::INFINITY, f64::min);
        let v_hi = vs().fold(f64::NEG_INFINITY, f64::max);
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
        let mut chart = frame(
            root,
            &self.title,
            padded(t_lo * tu.factor, t_hi * tu.factor, 0.01),
            padded(v_lo * vu.factor, v_hi * vu.factor, 0.08),
            &desc("time from the edge", &tu),
            &desc("switch node", &vu),
        )?;
        for (k, v) in self.variants.iter().enumerate() {
            let (colour, width, dashed) = VARIANT_STYLES[k % VARIANT_STYLES.len()];
            let pts: Vec<(f64, f64)> = v
                .median_t_s
                .iter()
                .zip(&v.median_v)
                .map(|(&t, &y)| (t * tu.factor, y * vu.factor))
                .collect();
            let style = colour.stroke_width(width);
            let series = if dashed {
                chart.draw_series(DashedLineSeries::new(pts, 10, 5, style))?
            } else {
                chart.draw_series(LineSeries::new(pts, style))?
            };
            series
                .label(format!("{} (median event)", v.label))
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], style));
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

/// Strip plots of switch stress and decay time per variant, side by side.
pub struct CompareStrips<'a> {
    pub title: String,
    pub variants: &'a [VariantData],
}

/// Deterministic horizontal spread of the k-th point in a strip (golden-ratio sequence), so
/// points do not hide each other and the picture is the same on every run.
fn jitter(k: usize) -> f64 {
    let g = 0.618_033_988_75;
    ((k as f64 * g).fract() - 0.5) * 0.5
}

fn strip<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: &str,
    name: &str,
    unit: &str,
    variants: &[VariantData],
    values: fn(&VariantData) -> &[f64],
) -> Result<(), PlotError> {
    let all = || {
        variants
            .iter()
            .flat_map(|v| values(v).iter().copied())
            .filter(|x| x.is_finite())
    };
    let lo = all().fold(f64::INFINITY, f64::min);
    let hi = all().fold(f64::NEG_INFINITY, f64::max);
    let (lo, hi) = if lo <= hi {
        (lo.min(0.0), hi)
    } else {
        (0.0, 1.0)
    };
    let u = axis_unit(max_abs([lo, hi].into_iter()), unit);
    let n = variants.len().max(1) as f64;
    let x = -0.5..(n - 0.5);
    let y = padded(lo * u.factor, hi * u.factor, 0.08);
    let labels: Vec<String> = variants.iter().map(|v| v.label.clone()).collect();
    let mut chart = ChartBuilder::on(area)
        .caption(title, font(18))
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(72)
        .build_cartesian_2d(x, y)?;
    chart
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(RGBColor(235, 235, 235))
        .bold_line_style(RGBColor(205, 205, 205))
        .axis_style(INK)
        .y_desc(desc(name, &u))
        .y_label_formatter(&|v| super::tick(*v))
        .label_style(font(14))
        .axis_desc_style(font(16))
        .x_labels(variants.len().max(1) * 2 + 1)
        .x_label_formatter(&|x| {
            let k = x.round();
            if (x - k).abs() < 1e-6 && k >= 0.0 {
                labels.get(k as usize).cloned().unwrap_or_default()
            } else {
                String::new()
            }
        })
        .draw()?;
    for (k, v) in variants.iter().enumerate() {
        let (colour, _, _) = VARIANT_STYLES[k % VARIANT_STYLES.len()];
        chart.draw_series(values(v).iter().filter(|x| x.is_finite()).enumerate().map(
            |(i, &val)| Circle::new((k as f64 + jitter(i), val * u.factor), 3, colour.filled()),
        ))?;
    }
    Ok(())
}

impl Figure for CompareStrips<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), PlotError> {
        let titled = root.titled(&self.title, font(20))?;
        let panels = titled.split_evenly((1, 2));
        if let [left, right] = panels.as_slice() {
            strip(
                left,
                "switch stress per event",
                "switch stress",
                "V",
                self.variants,
                |v| &v.stress_v,
            )?;
            strip(
                right,
                "decay time per event",
                "decay time",
                "s",
                self.variants,
                |v| &v.decay_s,
            )?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn variant_takes_the_median_wave_and_every_event() {
        let events: Vec<Event> = [10.0, 30.0, 20.0]
            .iter()
            .enumerate()
            .map(|(k, &s)| Event {
                index: k,
                switch_stress_v: s,
                decay_time_s: (k != 1).then_some(1e-6 * (k + 1) as f64),
                ..Event::default()
            })
            .collect();
        let v: Vec<f64> = (0..30).map(|i| i as f64).collect();
        let windows = [(0, 10), (10, 20), (20, 30)];
        let sk = TraceSketch::build("a.csv", &v, 1.0, 0.0, &windows, &events, 10);
        let d = VariantData::from_parts("bare", &[&sk], &events);
        assert_eq!(d.stress_v, vec![10.0, 30.0, 20.0]);
        assert_eq!(d.decay_s, vec![1e-6, 3e-6]);
        // Median stress 20 V is event 2, whose window holds samples 20..30.
        assert_eq!(d.median_v.first(), Some(&20.0));
    }

    #[test]
    fn jitter_stays_inside_the_strip() {
        for k in 0..1000 {
            let j = jitter(k);
            assert!((-0.25..=0.25).contains(&j), "{k}: {j}");
        }
        assert_eq!(jitter(0), -0.25);
    }
}
