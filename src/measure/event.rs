//! Measurements of one event window (DESIGN.md's table is the definition of each field).
//!
//! Inside this module the signal is looked at as `y = s (v - v_off)`, with `s = +1` for an
//! upward spike and `-1` for a downward one, so the spike is always positive and the on
//! level sits at `-step`.

use super::ring;
use super::series::{self, RunningSums};
use crate::levels::{crossing_index, median, overshoot_pct};
use crate::measure::{CurrentThrough, Event, MeasureOptions, Polarity, RingKind};

/// Samples fewer than this across the main lobe or a ring period mark an event undersampled
/// (common practice: ten samples per feature).
const MIN_SAMPLES_PER_FEATURE: f64 = 10.0;
/// A lobe is a clamp plateau when this fraction of its samples sit near its median.
const PLATEAU_FRACTION: f64 = 0.6;
/// Relative disagreement between the zero-crossing and spectrum-peak frequencies above
/// which two rings are taken to overlap.
const FFT_DISAGREEMENT: f64 = 0.25;
/// Zero crossings (three periods) a ring needs before its spectrum is a fair cross-check.
const MIN_CROSSINGS_FOR_SPECTRUM: usize = 6;
/// Ratio of ring to main-lobe frequency above which the ring is a parasitic one.
const PARASITIC_RATIO: f64 = 2.5;

/// What the capture-wide analysis hands to each event.
#[derive(Debug, Clone, Copy)]
pub struct Context<'a> {
    /// Samples from absolute index `first_index` on: the whole record, or the stretch of a
    /// streamed record that holds the window (and the sample after it, where there is one).
    pub v: &'a [f64],
    pub i: Option<&'a [f64]>,
    pub dt_s: f64,
    pub t0_s: f64,
    /// Absolute index of `v[0]`; window indices are relative to `v`.
    pub first_index: usize,
    pub v_on: f64,
    pub v_off: f64,
    pub polarity: Polarity,
    /// Noise standard deviation on the on state.
    pub sigma_v: f64,
    /// ADC code step (0 when unknown).
    pub adc_step_v: f64,
    /// ADC rail in the spike's direction, when the digitiser range is known.
    pub adc_rail_v: Option<f64>,
    /// The capture's extreme sample in the spike's direction.
    pub extreme_v: f64,
    pub opts: &'a MeasureOptions,
}

/// One event window as the edge scan found it.
#[derive(Debug, Clone, Copy)]
pub struct Window {
    pub index: usize,
    pub start: usize,
    pub end: usize,
    /// Sample before the 50 % crossing.
    pub edge: usize,
    /// The window was cut by `max_window`.
    pub cut: bool,
    /// The window ends at a turn-on (not at the end of the record).
    pub closed_by_turn_on: bool,
}

/// Levels seen around the event, for the capture-wide cross-check of the state levels,
/// and notes for the capture's warnings.
#[derive(Debug, Clone, Default)]
pub struct LocalLevels {
    pub before_edge_v: Option<f64>,
    pub settled_v: Option<f64>,
    pub notes: Vec<String>,
}

impl Context<'_> {
    fn s(&self) -> f64 {
        match self.polarity {
            Polarity::Up => 1.0,
            Polarity::Down => -1.0,
        }
    }
    fn y(&self, k: usize) -> f64 {
        self.s() * (self.v[k] - self.v_off)
    }
    fn step(&self) -> f64 {
        (self.v_off - self.v_on).abs()
    }
    /// Band a swing must leave to be more than noise: 3 sigma plus one code.
    /// Narrowest band noise allows: 3 sigma plus one ADC step (DESIGN.md). On a coarse grid
    /// the difference-based sigma can read zero while samples still flip between two codes,
    /// so sigma is never taken below the quantization noise step/sqrt(12) (Widrow's
    /// uniform-quantization model), and a sample exactly one code off stays inside.
    fn noise_band(&self) -> f64 {
        let sigma = self.sigma_v.max(self.adc_step_v / 12f64.sqrt());
        (3.0 * sigma + self.adc_step_v) * (1.0 + 1e-9)
    }
    fn noisy(&self) -> bool {
        self.sigma_v > 0.5 * self.adc_step_v && self.sigma_v > 1e-9 * self.step()
    }
}

/// Measures one event.
pub fn measure_event(cx: &Context, w: &Window) -> (Event, LocalLevels) {
    let s = cx.s();
    let v = cx.v;
    let n = v.len();
    let step = cx.step();
    let end = w.end.min(n);
    let e = w.edge.min(end.saturating_sub(2));
    let t_of = |x: f64| cx.t0_s + (cx.first_index as f64 + x) * cx.dt_s;
    let level = |pct: f64| cx.v_on + pct / 100.0 * (cx.v_off - cx.v_on);

    let edge_x = crossing_index(v, e, level(50.0)).unwrap_or(e as f64 + 0.5);
    let t_edge_s = t_of(edge_x);

    // Analysis end: before the turn-on transition that closes the window.
    let mut ae = end;
    if w.closed_by_turn_on {
        let b = cx.noise_band().max(0.05 * step);
        while ae > e + 2 && cx.y(ae - 1) < -b {
            ae -= 1;
        }
    }
    let ae = ae.max(e + 2).min(n);

    // The window from the edge on, in the spike's direction above the off level.
    // (`s` is one or minus one: the product is the same value `cx.y` gives, in a loop
    // without a bounds check or polarity test per sample, which vectorises.) The same
    // pass finds what the peak search, the searches over the smoothed copy and the
    // window integral would each walk the window again for.
    let series::Oriented {
        ys,
        extremes,
        after_sum,
    } = series::orient(&v[e..ae], cx.v_off, s);
    // Peak: the extreme sample in the spike's direction after the edge sample.
    // The first of equal extremes (a clipped run starts there).
    let p = extremes
        .first_max_index_after_first(&ys)
        .map_or(e + 1, |j| e + j)
        .min(n - 1);
    let peak_v = v[p];
    let rail_v = match cx.polarity {
        Polarity::Up => 0.0,
        Polarity::Down => cx.v_on,
    };
    let overshoot_v = (peak_v - cx.v_off).abs();
    let y_peak = cx.y(p);

    // 10 % crossing: last upward crossing at or before the edge; 90 %: first after it.
    let x10 = (w.start..=e)
        .rev()
        .find_map(|k| crossing_index(v, k, level(10.0)));
    let x90 = (e..p).find_map(|k| crossing_index(v, k, level(90.0)));
    let rise_time_s = match (x10, x90) {
        (Some(a), Some(b)) if b >= a => Some((b - a) * cx.dt_s),
        _ => None,
    };
    let k10 = x10.map_or(e, |x| x.floor() as usize);
    let slew_v_per_s = (k10..p)
        .map(|k| s * (v[k + 1] - v[k]) / cx.dt_s)
        .max_by(f64::total_cmp)
        .filter(|d| *d > 0.0);

    // The lobe's shape is judged on a lightly smoothed copy when the samples are noisy (a
    // centred moving average, unbiased on straight stretches), so a noise sample on a clamp
    // plateau is not taken for its top; times are then refined on the raw samples.
    let smooth_w = if cx.noisy() { 16 } else { 1 };
    // One set of running sums serves every smoothing width asked for below.
    let sums_once = std::cell::OnceCell::new();
    let sums = || sums_once.get_or_init(|| RunningSums::with_extremes(&ys, extremes.clone()));
    // Smoothed copies are read where needed, never held whole (a long window's copy
    // would add to the memory peak); a width of one is the samples themselves.
    let smoothed = |j: usize, w: usize| if w > 1 { sums().average(j, w) } else { ys[j] };
    let sm = |j: usize| smoothed(j, smooth_w);
    let ps = if smooth_w > 1 {
        sums().first_max_index(smooth_w, p - e)
    } else {
        extremes.first_max_index(&ys)
    }
    .unwrap_or(0);
    let y_top = if ps < ys.len() { sm(ps) } else { y_peak };
    let cross_sm = |j: usize, level: f64| -> Option<f64> {
        if j + 1 >= ys.len() {
            return None;
        }
        let (a, b) = (sm(j), sm(j + 1));
        (a != b).then(|| j as f64 + (level - a) / (b - a))
    };

    // Main lobe width at half its overshoot above the off level.
    let half = y_top / 2.0;
    let spike_width_s = if y_top > cx.noise_band() {
        let left = (0..ps)
            .rev()
            .find(|&j| sm(j) < half)
            .and_then(|j| cross_sm(j, half));
        let right = (ps..ys.len().saturating_sub(1))
            .find(|&j| sm(j + 1) < half)
            .and_then(|j| cross_sm(j, half));
        match (left, right) {
            (Some(a), Some(b)) if b > a => Some((b - a) * cx.dt_s),
            _ => None,
        }
    } else {
        None
    };

    // Decay: end of the clamp plateau, or of the first lobe.
    let band_n = cx.noise_band();
    let lobe_start = (0..ys.len()).find(|&j| sm(j) > band_n).unwrap_or(0).min(ps);
    let first_dip = (ps..ys.len())
        .find(|&j| sm(j) <= band_n)
        .unwrap_or(ys.len().saturating_sub(1));
    let lobe_end =
        plateau_through_dips(&ys, &sums, lobe_start, first_dip, band_n).unwrap_or(first_dip);
    let mut plateau_v: Option<f64> = None;
    let decay_end_x = (|| {
        let lobe = ys.get(lobe_start..lobe_end)?;
        let med = median(lobe)?;
        let tol = 0.1 * med.abs() + band_n;
        let near = lobe.iter().filter(|&&y| (y - med).abs() <= tol).count();
        let is_plateau =
            lobe.len() >= 10 && med > band_n && near as f64 >= PLATEAU_FRACTION * lobe.len() as f64;
        // Refine on the raw samples: the last fall through the threshold before the lobe
        // ended (half the plateau; zero for a lobe, or the noise band when the lobe only
        // sinks back onto the off level without crossing it).
        let search_to = (e + lobe_end + smooth_w).min(ae - 1);
        let from = e + lobe_start;
        let last_fall = |thr: f64| {
            (from..search_to)
                .rev()
                .find(|&k| cx.y(k) >= thr && cx.y(k + 1) < thr)
                .and_then(|k| crossing_index(v, k, cx.v_off + s * thr))
        };
        if is_plateau {
            plateau_v = Some(med);
            last_fall(med / 2.0)
        } else {
            last_fall(0.0).or_else(|| last_fall(band_n.max(1e-9 * step)))
        }
    })();
    let decay_time_s = decay_end_x.map(|x| t_of(x) - t_edge_s);

    // Ring: after the peak, or after the clamp releases.
    let ring_start = match (plateau_v, decay_end_x) {
        (Some(_), Some(x)) => (x.ceil() as usize).min(ae),
        _ => p,
    };
    let ring_y = ys.get(ring_start.saturating_sub(e)..).unwrap_or(&[]);
    let after_ring = ring::analyse(ring_y, cx.dt_s, cx.noise_band());
    // A fast ring on the clamp plateau (the clamp's own loop inductance with the node
    // capacitance) is looked for around the plateau level; the larger of the two rings is
    // the one reported.
    let plateau_ring = match (plateau_v, decay_end_x) {
        (Some(level), Some(xe)) => {
            let to = (xe.floor() as usize).min(ae);
            let seg: Vec<f64> = (e + lobe_start..to).map(|k| cx.y(k) - level).collect();
            ring::analyse(&seg, cx.dt_s, band_n).filter(|r| r.amplitude > 5.0 * band_n)
        }
        _ => None,
    };
    let (ring, on_plateau) = match (after_ring, plateau_ring) {
        (Some(a), Some(b)) if b.amplitude > a.amplitude => (Some(b), true),
        (None, Some(b)) => (Some(b), true),
        (a, _) => (a, false),
    };
    let ring_kind = ring.map(|r| {
        if on_plateau {
            return RingKind::Parasitic;
        }
        if plateau_v.is_some() {
            return RingKind::Coil;
        }
        // An unclamped first lobe is half a period of the coil ring.
        let lobe_s = match (x90, decay_end_x) {
            (Some(a), Some(b)) if b > a => (b - a) * cx.dt_s,
            _ => return RingKind::Coil,
        };
        if r.freq_hz * 2.0 * lobe_s > PARASITIC_RATIO {
            RingKind::Parasitic
        } else {
            RingKind::Coil
        }
    });
    let ring_freq_hz = ring.map(|r| r.freq_hz);
    let mut notes = Vec::new();
    // A ring of fewer than three periods has a spectrum as wide as the ring itself, whose
    // peak the first lobe's width sets; only a longer ring can contradict its crossings.
    let spectrum_says = ring
        .filter(|r| r.n_crossings >= MIN_CROSSINGS_FOR_SPECTRUM)
        .and_then(|r| Some((r.freq_hz, r.fft_freq_hz?)));
    if let Some((f, g)) = spectrum_says {
        if (f - g).abs() > FFT_DISAGREEMENT * f {
            notes.push(format!(
                "event {}: the ring's zero crossings give {} but its spectrum peaks at {}; two rings overlap and ring_freq_hz follows the larger swing",
                w.index,
                hz(f),
                hz(g)
            ));
        }
    }
    let damping_ratio = ring.and_then(|r| r.damping_ratio);

    // Settling: band around v_off, judged on a smoothed envelope.
    let band = (cx.opts.settle_band_pct / 100.0 * step).max(cx.noise_band());
    let settle_w = if cx.noisy() {
        ring.map_or(16.0, |r| r.period_samples / 10.0)
            .clamp(1.0, 16.0) as usize
    } else {
        1
    };
    let smoothed_at = |k: usize| smoothed(k, settle_w);
    let last_out = if settle_w > 1 {
        sums().last_beyond(settle_w, band)
    } else {
        series::last_beyond(&ys, band)
    };
    let needed_in_band = settle_w.max(8);
    let (settle_time_s, settle_idx) = match last_out {
        Some(k) if ys.len() - 1 - k >= needed_in_band => {
            let a = smoothed_at(k).abs();
            let b = if k + 1 < ys.len() {
                smoothed_at(k + 1).abs()
            } else {
                a
            };
            let f = if a > b { (a - band) / (a - b) } else { 0.0 };
            let x = (e + k) as f64 + f.clamp(0.0, 1.0);
            (Some(t_of(x) - t_edge_s), Some(e + k + 1))
        }
        _ => (None, None),
    };

    let volt_seconds = after_sum * cx.dt_s;

    // Current: I0 just before the edge, energies per where the probe sits.
    let i_slice = cx.i.filter(|i| i.len() == n);
    let pre_from = k10.saturating_sub(32).max(w.start);
    let i0_signed = i_slice.and_then(|i| median(i.get(pre_from..k10.max(pre_from + 1))?));
    let i0_a = i0_signed.map(f64::abs).or(cx.opts.coil_current_a);
    let (mut energy_j, mut clamp_energy_j, mut energy_to_peak_j) = (None, None, None);
    if let Some(i) = i_slice {
        // The voltage and current samples `from..to`, cut to the window.
        let span = |from: usize, to: usize| {
            let r = from..to.min(n);
            (v.get(r.clone()).unwrap_or(&[]), i.get(r).unwrap_or(&[]))
        };
        let across_switch = |x: f64, i: f64| s * (x - rail_v) * i;
        // The first lobe charges the node capacitance until the peak, or, on a clamped
        // event, until the node reaches the clamp's plateau: from there the clamp takes
        // the current, and the largest sample is only the noise's highest point on the
        // plateau (integrating to it counted the clamp's energy, a different amount on
        // every shot).
        let charged = plateau_v
            .and_then(|med| {
                // (From the edge on the raw samples: `lobe_start` is judged on the
                // smoothed copy, which reaches the band only after a fast ramp has.)
                (0..=ps.min(ys.len().saturating_sub(1))).find(|&j| ys[j] >= med - band_n)
            })
            .map_or(p, |j| (e + j).min(p));
        let (vs, is) = span(e + 1, charged + 1);
        energy_to_peak_j = Some(series::lane_sum(vs, is, across_switch) * cx.dt_s);
        let (vs, is) = span(e + 1, ae);
        match cx.opts.current_through {
            CurrentThrough::Switch => {
                energy_j = Some(series::lane_sum(vs, is, across_switch) * cx.dt_s)
            }
            CurrentThrough::Coil => {
                let across_clamp = |x: f64, i: f64| s * (x - cx.v_off) * i;
                clamp_energy_j = Some(series::lane_sum(vs, is, across_clamp) * cx.dt_s)
            }
        }
    }
    let coil_energy_j = match (cx.opts.inductance_h, i0_a) {
        (Some(l), Some(i0)) => Some(0.5 * l * i0 * i0),
        _ => None,
    };
    let c_par_f = match (cx.opts.inductance_h, ring, ring_kind) {
        (Some(l), Some(r), Some(RingKind::Coil)) if l > 0.0 => {
            let z = r.damping_ratio.unwrap_or(0.0);
            let w0 = 2.0 * std::f64::consts::PI * r.freq_hz / (1.0 - z * z).sqrt();
            Some(1.0 / (w0 * w0 * l))
        }
        _ => None,
    };
    let (c_par_slope_f, c_par_slope_range_v) = match (i_slice, i0_signed) {
        (Some(i), Some(i0)) => slope_capacitance(cx, i, i0, k10, e, p),
        _ => (None, None),
    };

    let clipped = is_clipped(cx, p, ae);
    let undersampled = spike_width_s.is_some_and(|w| w / cx.dt_s < MIN_SAMPLES_PER_FEATURE)
        || ring.is_some_and(|r| r.period_samples < MIN_SAMPLES_PER_FEATURE);
    let truncated = w.cut || settle_time_s.is_none();

    let before_edge_v = median(v.get(w.start..k10.max(w.start + 1)).unwrap_or(&[]));
    let settled_v = settle_idx
        .filter(|_| w.closed_by_turn_on)
        .and_then(|si| {
            let from = si + (ae.saturating_sub(si)) / 2;
            median(v.get(from..ae)?)
        })
        .or_else(|| {
            // An event that never settled: the centre line its ring peaks point to.
            ring.filter(|r| r.offset != 0.0 && !on_plateau)
                .map(|r| cx.v_off + s * r.offset)
        });

    let ev = Event {
        index: w.index,
        t_edge_s,
        polarity: cx.polarity,
        v_on: cx.v_on,
        v_off: cx.v_off,
        peak_v,
        switch_stress_v: (peak_v - rail_v).abs(),
        overshoot_v,
        overshoot_pct: overshoot_pct(cx.v_on, cx.v_off, peak_v),
        t_peak_s: t_of(p as f64) - t_edge_s,
        rise_time_s,
        slew_v_per_s,
        spike_width_s,
        decay_time_s,
        ring_freq_hz,
        ring_kind,
        damping_ratio,
        settle_time_s,
        settle_band_v: Some(band),
        volt_seconds,
        energy_j,
        clamp_energy_j,
        energy_to_peak_j,
        coil_energy_j,
        i0_a,
        c_par_f,
        c_par_slope_f,
        c_par_slope_range_v,
        clipped,
        undersampled,
        truncated,
        window_s: (end - w.start.min(end)) as f64 * cx.dt_s,
        ..Event::default()
    };
    (
        ev,
        LocalLevels {
            before_edge_v,
            settled_v,
            notes,
        },
    )
}

/// A clamp plateau carrying a fast ring dips through the off level long before the clamp
/// lets go. When the signal over 64 times the first lobe's length (at least 8) stays mostly above
/// the off level (three quarters of the samples, median above twice the noise band; a coil
/// ring spends half its time below), the lobe instead ends where a moving average four first
/// lobes long falls to half that median, plus half the averaging length (the caller then
/// finds the release on the raw samples).
fn plateau_through_dips<'a>(
    ys: &[f64],
    sums: &dyn Fn() -> &'a RunningSums<'a>,
    start: usize,
    first_dip: usize,
    band: f64,
) -> Option<usize> {
    let lobe = first_dip.checked_sub(start)?.max(4);
    let span = ys.get(start..(start + 64 * lobe).min(ys.len()))?;
    if span.len() < 8 * lobe {
        return None;
    }
    let above = span.iter().filter(|&&y| y > 0.0).count();
    let m = median(span)?;
    if !(m > 2.0 * band && m > 0.0 && above * 4 >= span.len() * 3) {
        return None;
    }
    let w = 4 * lobe;
    let sums = sums();
    let end = (start + w..ys.len())
        .find(|&j| sums.average(j, w) <= m / 2.0)
        .unwrap_or(ys.len() - 1);
    Some((end + w / 2).min(ys.len() - 1))
}

/// A frequency with a prefix, for messages.
fn hz(f: f64) -> String {
    if f >= 1e6 {
        format!("{:.3} MHz", f / 1e6)
    } else if f >= 1e3 {
        format!("{:.3} kHz", f / 1e3)
    } else {
        format!("{f:.2} Hz")
    }
}

/// Node capacitance from the charge the coil pushed into the node on the part of the rise
/// where the switch no longer conducts: `C = Q / dV` (`I0 / (dv/dt)` integrated, which is
/// steadier on noisy samples). With the probe on the switch the coil current is taken as
/// `I0` and the switch's remaining current subtracted; the stretch ends a third of the way
/// to the peak, where the coil current of an LC quarter-cycle is still within 5 % of `I0`.
/// With the probe on the coil its own current is integrated, up to 80 % of the way, from the
/// first sample past the 50 % crossing: the switch let go somewhere in the step before it,
/// and counting that whole step's current overstated C by 10 to 44 % (5 to 20 samples a
/// ring period). The charge is summed by the trapezoid rule, which a current falling over a
/// few samples needs (the rectangles gave 5 % more).
fn slope_capacitance(
    cx: &Context,
    i: &[f64],
    i0: f64,
    k10: usize,
    e: usize,
    p: usize,
) -> (Option<f64>, Option<[f64; 2]>) {
    let s = cx.s();
    let v = cx.v;
    if i0 == 0.0 {
        return (None, None);
    }
    let a = match cx.opts.current_through {
        CurrentThrough::Switch => (k10..p).find(|&k| (i[k] / i0).abs() < 0.1),
        CurrentThrough::Coil => Some(e + 1).filter(|&a| a < p),
    };
    let Some(a) = a else {
        return (None, None);
    };
    let frac = match cx.opts.current_through {
        CurrentThrough::Switch => 1.0 / 3.0,
        CurrentThrough::Coil => 0.8,
    };
    let target = s * (v[p] - v[a]) * frac;
    let Some(b) = (a..=p).find(|&k| s * (v[k] - v[a]) >= target) else {
        return (None, None);
    };
    if b < a + 3 {
        return (None, None);
    }
    let into_node = |k: usize| match cx.opts.current_through {
        CurrentThrough::Switch => i0 - i[k],
        CurrentThrough::Coil => i[k],
    };
    let q: f64 = (a..b)
        .map(|k| 0.5 * (into_node(k) + into_node(k + 1)))
        .sum::<f64>()
        * cx.dt_s;
    let dv = v[b] - v[a];
    if dv == 0.0 {
        return (None, None);
    }
    let c = (q / dv).abs();
    (
        c.is_finite().then_some(c),
        Some([v[a].min(v[b]), v[a].max(v[b])]),
    )
}

/// Clipping: two or more consecutive samples at the known ADC rail, or, without a known
/// range, three or more at the capture's extreme code, either on a noisy record (the rail
/// flattened the noise) or, on a clean record on an ADC grid, entered and left by jumps of
/// more than a code and a half (a smooth peak drifts onto its top code; a clipped one slams
/// into it and out again).
fn is_clipped(cx: &Context, p: usize, ae: usize) -> bool {
    let s = cx.s();
    let v = cx.v;
    let tol = 0.5 * cx.adc_step_v.max(1e-12 * cx.extreme_v.abs());
    let run_at = |level: f64| -> usize {
        (p..ae.min(v.len()))
            .take_while(|&k| s * (v[k] - level) >= -tol)
            .count()
    };
    if let Some(rail) = cx.adc_rail_v {
        if run_at(rail) >= 2 {
            return true;
        }
    }
    if s * (v[p] - cx.extreme_v) < -tol {
        return false;
    }
    let run = run_at(cx.extreme_v);
    if run < 3 {
        return false;
    }
    // With noise of more than half a code, three equal samples at the extreme code do not
    // happen by chance: the rail flattened the noise.
    if cx.noisy() {
        return true;
    }
    // Noise-free samples off any grid (simulated data) cannot tell a rail from a clamp
    // plateau; only a known range flags them.
    if cx.adc_step_v <= 0.0 {
        return false;
    }
    let jump = 1.5 * cx.adc_step_v;
    let entry = p.checked_sub(1).map_or(0.0, |k| s * (v[p] - v[k]));
    let exit = v.get(p + run).map_or(0.0, |&x| s * (v[p + run - 1] - x));
    entry > jump && exit > jump
}
