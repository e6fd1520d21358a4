//! Choosing the pair of state levels that explains the record.
//!
//! The two most populated, separate histogram modes are the on and off states on almost
//! every record. A clean (noise-free) record can fool them: a body diode holding the ring's
//! troughs a forward drop beyond the rail makes a perfectly flat mode, while the true off
//! state is approached along a decaying ring and spreads over many of the narrow bins such a
//! record allows, so the on level and the clip level come out as "the two states" (and with
//! no noise any two distinct levels count as separate).
//!
//! A pair of state levels must explain the event structure: each turn-off edge leaves the on
//! level, and each event ends near the off level (before the next turn-on, or at the end of
//! the record). When the histogram pair fails that for some events, other candidate levels
//! (modes of the histogram at the noise resolution and at coarser ones, where a decaying
//! tail gathers into one mode) are paired and tried the same way. An alternative replaces
//! the histogram pair only when it explains strictly more events and also lies closer to the
//! samples: its two-median cost, the sum over samples of the distance to the nearer level
//! (the k-medians criterion, Kaufman & Rousseeuw 1990, restricted to candidate levels), is
//! lower. Both must agree, so a record the histogram already explains keeps its levels.

use crate::events;
use crate::levels;
use crate::measure::{Polarity, PolarityChoice};

/// Histogram modes taken per resolution.
const MODES_PER_SCALE: usize = 4;
/// Ratio between successive candidate resolutions.
const SCALE_RATIO: f64 = 8.0;
/// Coarsest candidate resolution, as a fraction of the record's range.
const COARSEST_FRACTION: f64 = 1.0 / 16.0;
/// Number of coarser resolutions tried beyond the noise one.
const COARSER_SCALES: usize = 3;
/// A level explains an event when the middle half of the stretch it should hold lies
/// within this fraction of the step (or the noise band, if wider) of it.
const LEVEL_TOLERANCE_F: f64 = 0.1;
/// Fraction of an event window, after the edge, whose median is the event's end level.
const END_FRACTION: usize = 10;

/// What the pair search needs to know about the record.
#[derive(Debug, Clone, Copy)]
pub struct Setting {
    /// Noise resolution of the histogram.
    pub resolution_v: f64,
    /// Smallest separation of two states.
    pub separation_v: f64,
    pub sigma_v: f64,
    pub adc_step_v: f64,
    pub lo_v: f64,
    pub hi_v: f64,
    pub polarity: PolarityChoice,
    /// On-state dwell given by the user, in samples.
    pub dwell_samples: Option<usize>,
    /// Longest event window, in samples.
    pub max_samples: Option<usize>,
}

/// Polarity of a pair of state levels: the user's choice, or (auto) up unless the
/// downward excursion beyond the low level clearly wins; low-side switching is the common
/// case.
pub fn polarity_of(low_v: f64, high_v: f64, s: &Setting) -> Polarity {
    match s.polarity {
        PolarityChoice::Up => Polarity::Up,
        PolarityChoice::Down => Polarity::Down,
        PolarityChoice::Auto => {
            if low_v - s.lo_v <= s.hi_v - high_v + s.resolution_v {
                Polarity::Up
            } else {
                Polarity::Down
            }
        }
    }
}

/// How well a pair of levels explains the record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairFit {
    pub low_v: f64,
    pub high_v: f64,
    /// Events found with this pair.
    pub n_events: usize,
    /// Fraction of those events that leave the on level and end near the off level
    /// (0 when there is none); an event cut by the window limit or the end of the record
    /// is judged on the on level alone.
    pub explained_f: f64,
}

/// Finds the events a pair gives and the fraction of them it explains.
pub fn fit_pair(v: &[f64], low_v: f64, high_v: f64, s: &Setting) -> PairFit {
    let mut fit = PairFit {
        low_v,
        high_v,
        n_events: 0,
        explained_f: 0.0,
    };
    let (v_on, v_off) = match polarity_of(low_v, high_v, s) {
        Polarity::Up => (low_v, high_v),
        Polarity::Down => (high_v, low_v),
    };
    let step = (v_off - v_on).abs();
    if !(step > 0.0 && step.is_finite()) {
        return fit;
    }
    // Same hysteresis, floor and dwell rules as the measurement itself.
    let mut params = super::edge_params(v_on, v_off, s.sigma_v, s.adc_step_v);
    params.dwell_samples = s
        .dwell_samples
        .unwrap_or_else(|| events::derive_dwell(&events::low_run_lengths(v, &params)));
    let scan = events::scan_edges(v, params);
    let windows = events::event_windows(&scan, v.len(), s.max_samples);
    let tol = (LEVEL_TOLERANCE_F * step).max(3.0 * s.sigma_v + s.adc_step_v);
    let mut buf = Vec::new();
    // A state is held: the middle half of the stretch (between its quartiles) lies within
    // the tolerance of the level, which a flat on state or a settled tail does and the
    // turning point of a ring does not.
    let mut holds = |a: usize, b: usize, level: f64| -> Option<bool> {
        buf.clear();
        buf.extend_from_slice(v.get(a..b)?);
        if buf.is_empty() || buf.iter().any(|x| !x.is_finite()) {
            return None;
        }
        let n = buf.len();
        let (_, q1, _) = buf.select_nth_unstable_by(n / 4, f64::total_cmp);
        let q1 = *q1;
        let (_, q3, _) = buf.select_nth_unstable_by(3 * n / 4, f64::total_cmp);
        Some((q1 - level).abs() <= tol && (*q3 - level).abs() <= tol)
    };
    let mut explained = 0usize;
    for (&(start, end, cut), &e) in windows.iter().zip(&scan.edges) {
        let leaves_on = holds(start, e, v_on).unwrap_or(true);
        // A window cut by the window limit or by the end of the record says nothing about
        // where the event ends.
        let ends_off = cut || end >= v.len() || {
            let m = (end.saturating_sub(e) / END_FRACTION).max(1);
            holds(end.saturating_sub(m), end, v_off).unwrap_or(false)
        };
        if leaves_on && ends_off {
            explained += 1;
        }
    }
    fit.n_events = windows.len();
    if fit.n_events > 0 {
        fit.explained_f = explained as f64 / fit.n_events as f64;
    }
    fit
}

/// Two-median cost of a pair: mean distance of the samples to the nearer level.
fn two_median_cost(v: &[f64], a: f64, b: f64) -> f64 {
    let (mut sum, mut n) = (0.0, 0usize);
    for &x in v {
        if x.is_finite() {
            sum += (x - a).abs().min((x - b).abs());
            n += 1;
        }
    }
    if n == 0 {
        f64::INFINITY
    } else {
        sum / n as f64
    }
}

/// Candidate state levels: the most populated histogram modes at the noise resolution and
/// at a few coarser ones (a level approached along a decaying ring only gathers into one
/// mode when the bins are a fair fraction of the ring's late amplitude wide).
fn candidates(v: &[f64], s: &Setting) -> Vec<f64> {
    let range = s.hi_v - s.lo_v;
    let mut out: Vec<f64> = Vec::new();
    let mut r = s.resolution_v;
    for j in 0..=COARSER_SCALES {
        if j > 0 {
            r *= SCALE_RATIO;
            if r > range * COARSEST_FRACTION {
                break;
            }
        }
        for m in levels::histogram_modes(v, r, MODES_PER_SCALE) {
            if out
                .iter()
                .all(|c| (c - m.level_v).abs() > 2.0 * s.resolution_v)
            {
                out.push(m.level_v);
            }
        }
    }
    out
}

/// The pair to use instead of the histogram pair `(low_v, high_v)`, when one explains the
/// record better (see the module notes); `None` keeps the histogram pair.
pub fn better_pair(v: &[f64], low_v: f64, high_v: f64, s: &Setting) -> Option<PairFit> {
    let primary = fit_pair(v, low_v, high_v, s);
    if primary.explained_f >= 1.0 {
        return None;
    }
    let cands = candidates(v, s);
    let primary_cost = two_median_cost(v, low_v, high_v);
    let mut best: Option<(PairFit, f64)> = None;
    for (i, &a) in cands.iter().enumerate() {
        for &b in cands.iter().skip(i + 1) {
            let (lo, hi) = (a.min(b), a.max(b));
            if hi - lo < s.separation_v || (lo == low_v && hi == high_v) {
                continue;
            }
            let fit = fit_pair(v, lo, hi, s);
            if fit.explained_f <= primary.explained_f {
                continue;
            }
            if best.is_some_and(|(f, _)| fit.explained_f < f.explained_f) {
                continue;
            }
            let cost = two_median_cost(v, lo, hi);
            if cost >= primary_cost {
                continue;
            }
            let better = match best {
                None => true,
                Some((f, c)) => fit.explained_f > f.explained_f || cost < c,
            };
            if better {
                best = Some((fit, cost));
            }
        }
    }
    best.map(|(f, _)| f)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two cycles: 400 samples on at 0 V, then a ring decaying towards 10 V whose troughs
    /// a diode holds at -0.5 V (invented demo shape).
    fn clipped_ring() -> Vec<f64> {
        let mut v = Vec::new();
        for _ in 0..2 {
            v.extend(std::iter::repeat_n(0.0, 400));
            v.extend((0..1600).map(|k| {
                let t = k as f64;
                let w = 2.0 * std::f64::consts::PI * t / 200.0;
                let e = (-t / 250.0).exp();
                (10.0 + e * (-10.0 * w.cos() + 100.0 * w.sin())).max(-0.5)
            }));
        }
        v
    }

    fn setting(v: &[f64]) -> Setting {
        let (lo_v, hi_v) = levels::finite_range(v).unwrap();
        Setting {
            resolution_v: 1e-3,
            separation_v: 1e-3,
            sigma_v: 0.0,
            adc_step_v: 0.0,
            lo_v,
            hi_v,
            polarity: PolarityChoice::Auto,
            dwell_samples: None,
            max_samples: None,
        }
    }

    #[test]
    fn the_clip_level_does_not_explain_the_events_and_is_replaced() {
        let v = clipped_ring();
        let s = setting(&v);
        // On level and supply: both events leave 0 V and end near 10 V (the ring's
        // envelope 100 exp(-1600/250) = 0.17 V is within a tenth of the step).
        let truth = fit_pair(&v, 0.0, 10.0, &s);
        assert_eq!((truth.n_events, truth.explained_f), (2, 1.0));
        // Clip and on level: its events start at the clip and end inside the ring.
        let clip = fit_pair(&v, -0.5, 0.0, &s);
        assert!(clip.explained_f < 1.0, "{clip:?}");
        let better = better_pair(&v, -0.5, 0.0, &s).expect("a better pair");
        assert!(better.low_v.abs() < 0.05, "{better:?}");
        assert!((better.high_v - 10.0).abs() < 1.0, "{better:?}");
        // A pair that explains every event is kept.
        assert_eq!(better_pair(&v, 0.0, 10.0, &s), None);
    }
}
