//! The samples a report needs for its plots, decimated so that memory stays small however
//! long the capture: a min/max envelope of the whole trace (one pair per pixel column) and
//! each event's window, reduced to at most [`MAX_WAVE_POINTS`] points.

use serde::Serialize;

use crate::measure::Event;

/// Most points kept for one event's waveform.
pub const MAX_WAVE_POINTS: usize = 2000;

/// One column of the overview envelope.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EnvelopePoint {
    /// Time of the column's first sample.
    pub t_s: f64,
    pub min_v: f64,
    pub max_v: f64,
}

/// One event's waveform, times relative to its edge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EventWave {
    pub index: usize,
    pub t_edge_s: f64,
    pub switch_stress_v: f64,
    pub peak_v: f64,
    /// Peak time relative to the edge.
    pub t_peak_s: f64,
    pub clipped: bool,
    pub t_s: Vec<f64>,
    pub v: Vec<f64>,
}

/// What the plots of one capture need. The lead keeps one per capture; the document does not
/// carry samples.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TraceSketch {
    pub file: String,
    pub dt_s: f64,
    pub t0_s: f64,
    pub n_samples: usize,
    pub envelope: Vec<EnvelopePoint>,
    pub events: Vec<EventWave>,
    /// Off-state level (median over the events' `v_off`), where there are events.
    pub v_off: Option<f64>,
    /// On-state level (median over the events' `v_on`).
    pub v_on: Option<f64>,
    /// Half-width of the settle band around `v_off`, when the measurement reports it; the
    /// report falls back to `--settle-band` percent of the step.
    pub settle_band_v: Option<f64>,
    /// Variant label (`compare`), if any.
    pub label: Option<String>,
    /// Measured samples against the fitted model for this capture's worst event, when the
    /// model ran.
    #[serde(skip)]
    pub fit: Option<super::FitPlot>,
}

impl TraceSketch {
    /// Decimates one capture. `windows[k]` is the sample range `[start, end)` of
    /// `events[k]`, as [`crate::measure::CaptureMeasurement::windows`] gives them;
    /// `max_points` is the number of envelope columns (about the plot width in pixels).
    /// Out-of-range windows are cut to the trace; non-finite samples are skipped.
    pub fn build(
        file: &str,
        v: &[f64],
        dt_s: f64,
        t0_s: f64,
        windows: &[(usize, usize)],
        events: &[Event],
        max_points: usize,
    ) -> TraceSketch {
        let envelope = envelope(v, dt_s, t0_s, max_points.max(1));
        let waves = events
            .iter()
            .zip(windows.iter())
            .map(|(e, &(start, end))| {
                let end = end.min(v.len());
                let start = start.min(end);
                EventWave::of_window(e, v, 0, (start, end), dt_s, t0_s)
            })
            .collect();
        TraceSketch::assemble(file, dt_s, t0_s, v.len(), envelope, waves, events)
    }

    /// A sketch from parts made while streaming a long capture (see [`EnvelopeBuilder`]
    /// and [`EventWave::of_window`]).
    pub fn assemble(
        file: &str,
        dt_s: f64,
        t0_s: f64,
        n_samples: usize,
        envelope: Vec<EnvelopePoint>,
        waves: Vec<EventWave>,
        events: &[Event],
    ) -> TraceSketch {
        TraceSketch {
            file: file.to_string(),
            dt_s,
            t0_s,
            n_samples,
            envelope,
            events: waves,
            v_off: median(events.iter().map(|e| e.v_off)),
            v_on: median(events.iter().map(|e| e.v_on)),
            // The widest band any event used: what the overlay should shade.
            settle_band_v: events
                .iter()
                .filter_map(|e| e.settle_band_v)
                .reduce(f64::max),
            label: None,
            fit: None,
        }
    }

    /// The event with the median switch stress: the "typical" event of this capture, as
    /// overlaid when variants are compared.
    pub fn median_event(&self) -> Option<&EventWave> {
        let mut order: Vec<&EventWave> = self
            .events
            .iter()
            .filter(|w| w.switch_stress_v.is_finite())
            .collect();
        order.sort_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v));
        order.get(order.len() / 2).copied()
    }
}

fn median(values: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = values.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_unstable_by(f64::total_cmp);
    let n = v.len();
    let mid = v.get(n / 2).copied()?;
    if n % 2 == 1 {
        Some(mid)
    } else {
        v.get(n / 2 - 1).map(|lo| 0.5 * (lo + mid))
    }
}

impl EventWave {
    /// The wave of event `e` over `window` (absolute sample indices), from samples `v`
    /// that start at absolute index `first`.
    pub fn of_window(
        e: &Event,
        v: &[f64],
        first: usize,
        window: (usize, usize),
        dt_s: f64,
        t0_s: f64,
    ) -> EventWave {
        let start = window.0.saturating_sub(first).min(v.len());
        let end = window.1.saturating_sub(first).clamp(start, v.len());
        let offset_s = t0_s + first as f64 * dt_s - e.t_edge_s;
        let (t_s, wv) = decimate_window(v, start, end, dt_s, offset_s);
        EventWave {
            index: e.index,
            t_edge_s: e.t_edge_s,
            switch_stress_v: e.switch_stress_v,
            peak_v: e.peak_v,
            t_peak_s: e.t_peak_s,
            clipped: e.clipped,
            t_s,
            v: wv,
        }
    }
}

/// Min/max per column: every sample lands in exactly one column, so spikes one sample wide
/// still show. O(n), no allocation per sample.
fn envelope(v: &[f64], dt_s: f64, t0_s: f64, columns: usize) -> Vec<EnvelopePoint> {
    let mut b = EnvelopeBuilder::new(v.len(), columns, dt_s, t0_s);
    b.push(v);
    b.finish()
}

/// The overview envelope of a capture of known length fed block by block: column `c`
/// holds samples `[c n / columns, (c + 1) n / columns)`.
#[derive(Debug, Clone)]
pub struct EnvelopeBuilder {
    n: usize,
    columns: usize,
    dt_s: f64,
    t0_s: f64,
    next_index: usize,
    column: usize,
    column_end: usize,
    lo: f64,
    hi: f64,
    out: Vec<EnvelopePoint>,
}

impl EnvelopeBuilder {
    pub fn new(n: usize, columns: usize, dt_s: f64, t0_s: f64) -> Self {
        let columns = columns.max(1).min(n.max(1));
        EnvelopeBuilder {
            n,
            columns,
            dt_s,
            t0_s,
            next_index: 0,
            column: 0,
            column_end: n / columns,
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
            out: Vec::with_capacity(columns),
        }
    }

    fn close_column(&mut self) {
        if self.lo.is_finite() && self.hi.is_finite() {
            let start = self.column * self.n / self.columns;
            self.out.push(EnvelopePoint {
                t_s: self.t0_s + start as f64 * self.dt_s,
                min_v: self.lo,
                max_v: self.hi,
            });
        }
        self.lo = f64::INFINITY;
        self.hi = f64::NEG_INFINITY;
        self.column += 1;
        self.column_end = ((self.column + 1) * self.n / self.columns).min(self.n);
    }

    pub fn push(&mut self, block: &[f64]) {
        for &x in block {
            while self.next_index >= self.column_end && self.column < self.columns {
                self.close_column();
            }
            if x.is_finite() {
                self.lo = self.lo.min(x);
                self.hi = self.hi.max(x);
            }
            self.next_index += 1;
        }
    }

    pub fn finish(mut self) -> Vec<EnvelopePoint> {
        while self.column < self.columns {
            self.close_column();
        }
        self.out
    }
}

/// An event window as (time, value) pairs; longer windows keep each bucket's minimum and
/// maximum in time order, so the peak and the ring's envelope survive decimation.
fn decimate_window(
    v: &[f64],
    start: usize,
    end: usize,
    dt_s: f64,
    t_offset_s: f64,
) -> (Vec<f64>, Vec<f64>) {
    let Some(win) = v.get(start..end) else {
        return (Vec::new(), Vec::new());
    };
    let time = |i: usize| t_offset_s + (start + i) as f64 * dt_s;
    let mut t_out = Vec::with_capacity(win.len().min(MAX_WAVE_POINTS));
    let mut v_out = Vec::with_capacity(win.len().min(MAX_WAVE_POINTS));
    if win.len() <= MAX_WAVE_POINTS {
        for (i, &x) in win.iter().enumerate() {
            if x.is_finite() {
                t_out.push(time(i));
                v_out.push(x);
            }
        }
        return (t_out, v_out);
    }
    let buckets = MAX_WAVE_POINTS / 2;
    let n = win.len();
    for b in 0..buckets {
        let lo_i = b * n / buckets;
        let hi_i = ((b + 1) * n / buckets).min(n);
        let mut i_min = None;
        let mut i_max = None;
        for i in lo_i..hi_i {
            let Some(&x) = win.get(i) else { break };
            if !x.is_finite() {
                continue;
            }
            if i_min.is_none_or(|k: usize| win.get(k).is_some_and(|&m| x < m)) {
                i_min = Some(i);
            }
            if i_max.is_none_or(|k: usize| win.get(k).is_some_and(|&m| x > m)) {
                i_max = Some(i);
            }
        }
        let mut pair = [i_min, i_max];
        pair.sort();
        let mut last = None;
        for i in pair.into_iter().flatten() {
            if last == Some(i) {
                continue;
            }
            last = Some(i);
            if let Some(&x) = win.get(i) {
                t_out.push(time(i));
                v_out.push(x);
            }
        }
    }
    (t_out, v_out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn event(index: usize, t_edge_s: f64, stress: f64) -> Event {
        Event {
            index,
            t_edge_s,
            switch_stress_v: stress,
            peak_v: stress,
            v_off: 24.0,
            v_on: 0.1,
            ..Event::default()
        }
    }

    #[test]
    fn envelope_keeps_a_one_sample_spike() {
        let mut v = vec![0.0; 100_000];
        v[54_321] = 400.0;
        let s = TraceSketch::build("a.csv", &v, 1e-6, -0.01, &[], &[], 500);
        assert_eq!(s.envelope.len(), 500);
        let top = s.envelope.iter().map(|p| p.max_v).fold(0.0, f64::max);
        assert_eq!(top, 400.0);
        // Column 271 holds samples 54200..54400 (100 000 / 500 = 200 per column).
        assert_eq!(s.envelope[271].max_v, 400.0);
        assert!((s.envelope[0].t_s + 0.01).abs() < 1e-15);
    }

    #[test]
    fn event_waves_are_relative_to_the_edge_and_bounded() {
        let n = 50_000;
        let v: Vec<f64> = (0..n).map(|i| (i as f64 * 0.01).sin()).collect();
        let dt = 1e-8;
        // Window 1000..41000 with the edge at sample 2000.
        let e = event(0, 2000.0 * dt, 1.0);
        let s = TraceSketch::build("a.csv", &v, dt, 0.0, &[(1000, 41_000)], &[e], 800);
        let w = &s.events[0];
        assert!(w.t_s.len() <= MAX_WAVE_POINTS);
        assert_eq!(w.t_s.len(), w.v.len());
        assert!((w.t_s[0] - (-1000.0 * dt)).abs() < 1e-15);
        assert!(w.t_s.windows(2).all(|p| p[1] >= p[0]));
        let top = w.v.iter().copied().fold(f64::MIN, f64::max);
        assert!(top > 0.9999, "the peak survives decimation: {top}");
    }

    #[test]
    fn bad_windows_and_samples_do_not_panic() {
        let v = vec![1.0, f64::NAN, 3.0];
        let e = event(0, 0.0, 3.0);
        let s = TraceSketch::build("a.csv", &v, 1.0, 0.0, &[(2, 99)], &[e], 10);
        assert_eq!(s.events[0].v, vec![3.0]);
        let s = TraceSketch::build("a.csv", &[], 1.0, 0.0, &[(5, 1)], &[event(0, 0.0, 1.0)], 10);
        assert!(s.envelope.is_empty());
        assert!(s.events[0].v.is_empty());
    }

    #[test]
    fn median_event_is_the_middle_stress() {
        let v = vec![0.0; 10];
        let evs = [
            event(0, 0.0, 10.0),
            event(1, 0.0, 30.0),
            event(2, 0.0, 20.0),
        ];
        let s = TraceSketch::build("a.csv", &v, 1.0, 0.0, &[(0, 1); 3], &evs, 10);
        assert_eq!(s.median_event().map(|w| w.index), Some(2));
        assert_eq!(s.v_off, Some(24.0));
    }
}
