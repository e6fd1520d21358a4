//! Clipped-peak reconstruction. When the spike sits on an ADC rail, the samples on both
//! sides of the clipped stretch and the ringing after it still follow the natural response
//! of the node from the edge on: once the switch has stopped conducting, the node is a free
//! second-order circuit whose initial conditions (node voltage and coil current) are
//! unknown, which the damped sine with A, B and v_off free describes. The fit leaves out
//! every sample at a rail, and stops where the body diode or a clamp first conducts (the
//! circuit changes there). When that cuts the first lobe short (no full lobe after the
//! peak), the decay and frequency come from the free ringing after the diode released (the
//! same L and C) and only the amplitudes are fitted to the first lobe. The peak is the
//! model's maximum over the clipped stretch.
//!
//! The result is a model estimate, not a measurement. Its interval is first-order (delta
//! method): the gradient of the model peak with respect to the five parameters, taken by
//! central differences, against their covariance sigma^2 (J^T J)^-1; +-1.96 standard errors
//! (about 95 % for a well-determined fit). The lower end is never below the rail, since the
//! true peak reached at least the rail.

use serde::Serialize;

use super::event_fit::{collect, fit_free_ring, EventFit, FitCurve, LeftOut};
use super::ringfit::{self, RingStart};
use super::ModelContext;
use crate::measure::{Event, Polarity};

/// How the reconstructed peak was obtained, stated with the number.
pub const PEAK_METHOD: &str = "model estimate: damped sine fitted from the edge to the unclipped samples (decay and frequency from the later free ring when the body diode cuts the first lobe short); 95 % interval from the parameter covariance (delta method)";

/// Longest stretch after the clipped lobe that the fit uses, in ring periods: enough to pin
/// down the frequency and decay, short enough that a voltage-dependent capacitance does
/// not pull the early lobes.
const PERIODS_AFTER: f64 = 6.0;

/// A reconstructed peak with its interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeakEstimate {
    pub peak_v: f64,
    pub lower_v: f64,
    pub upper_v: f64,
    /// Standard error of the peak, volts.
    pub std_v: Option<f64>,
    /// The rail the samples were clipped at.
    pub rail_v: f64,
    pub method: &'static str,
}

pub(crate) fn fit_clipped(
    samples: &[f64],
    dt_s: f64,
    t_start_s: f64,
    i_edge: usize,
    i_pk: usize,
    event: &Event,
    ctx: &ModelContext,
) -> Option<EventFit> {
    let n = samples.len();
    let sign = match event.polarity {
        Polarity::Up => 1.0,
        Polarity::Down => -1.0,
    };
    let left_out = LeftOut::new(ctx, sign);
    // The clipped stretch around the peak; without an ADC range the flat top itself is
    // the clipped stretch (samples equal to the peak value).
    let rail_v = samples[i_pk];
    let clipped_here = |i: usize| {
        let v = samples[i];
        left_out.at_rail(v) || (ctx.adc.is_none() && v == rail_v)
    };
    let c_end = (i_pk..n).find(|&i| !clipped_here(i)).unwrap_or(n);
    let c_start = (i_edge..=i_pk)
        .rev()
        .find(|&i| !clipped_here(i))
        .map_or(i_edge, |i| i + 1);
    let flat_top = ctx.adc.is_none();
    let excluded = |i: usize| left_out.excluded(samples[i]) || (flat_top && samples[i] == rail_v);
    let noise = ringfit::noise_sigma(&samples[i_edge..]);
    // The free stretch from the edge ends where the body diode or a clamp first conducts.
    let seg_end = (c_end..n)
        .find(|&i| left_out.body_clipped(samples[i]))
        .unwrap_or(n);
    // Ring frequency: zero crossings after the clipped stretch within the free stretch.
    let tail: Vec<f64> = (c_end..seg_end)
        .map(|i| sign * (samples[i] - event.v_off))
        .collect();
    let tail_max = tail.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let hyst = (5.0 * noise).max(0.03 * tail_max);
    let skip = |k: usize| excluded(c_end + k);
    let est = ringfit::estimate_ring(&tail, dt_s, hyst, &skip).filter(|e| e.n_crossings >= 2);
    let (fit, n_used_end) = match est {
        Some(e) => {
            // The ring after the peak is in the same free stretch: fit everything.
            let end = (c_end + (PERIODS_AFTER / e.freq_hz / dt_s).ceil() as usize).min(seg_end);
            let (t, y, _) = collect(samples, i_edge, end, dt_s, &excluded);
            let start = RingStart {
                omega_d_rad_s: std::f64::consts::TAU * e.freq_hz,
                alpha_per_s: e.alpha_per_s.unwrap_or(0.0).max(0.0),
                v_off: event.v_off,
                fit_offset: true,
            };
            (ringfit::fit_damped_sine(&t, &y, &start).ok()?, end)
        }
        None => {
            // The body diode cuts the first lobe short: take the decay and frequency from
            // the free ringing after it conducted (same L and C), and fit only the
            // amplitudes of the first lobe with v_off held.
            let later = fit_free_ring(
                samples,
                dt_s,
                t_start_s,
                seg_end,
                noise,
                event.v_off,
                sign,
                &left_out,
            );
            let (alpha, omega, cov) = match later.as_ref().map(|f| &f.curve) {
                Some(FitCurve::DampedSine(f)) => (
                    f.alpha_per_s,
                    f.omega_d_rad_s,
                    f.covariance.map(|c| [c[12], c[13], c[17], c[18]]),
                ),
                _ => match (event.ring_freq_hz, event.damping_ratio) {
                    (Some(fr), z) if super::is_pos(fr) => {
                        let z = z.unwrap_or(0.0).clamp(0.0, 0.9);
                        let wd = std::f64::consts::TAU * fr;
                        (z * wd / (1.0 - z * z).sqrt(), wd, None)
                    }
                    _ => return None,
                },
            };
            let (t, y, _) = collect(samples, i_edge, seg_end, dt_s, &excluded);
            let f = ringfit::fit_amplitudes(&t, &y, alpha, omega, cov, event.v_off, false).ok()?;
            (f, seg_end)
        }
    };
    let (t_first, t_last, n_used) = {
        let (t, _, _) = collect(samples, i_edge, n_used_end, dt_s, &excluded);
        (
            t.first().copied().unwrap_or(0.0),
            t.last().copied().unwrap_or(0.0),
            t.len(),
        )
    };
    let n_left_out = (i_edge..n_used_end).filter(|&i| excluded(i)).count();
    let p = [
        fit.a_v,
        fit.b_v,
        fit.alpha_per_s,
        fit.omega_d_rad_s,
        fit.v_off,
    ];
    // The model maximum over the clipped stretch, one sample either side.
    let t_lo = (c_start.saturating_sub(1).max(i_edge) - i_edge) as f64 * dt_s;
    let t_hi = ((c_end + 1).min(n) - i_edge) as f64 * dt_s;
    let peak_of = |p: [f64; 5]| {
        let steps = 400;
        (0..=steps)
            .map(|k| t_lo + (t_hi - t_lo) * k as f64 / steps as f64)
            .map(|t| sign * ringfit::damped_sine(p, t))
            .fold(f64::NEG_INFINITY, f64::max)
    };
    let peak_s = peak_of(p);
    if !peak_s.is_finite() {
        return None;
    }
    let std_v = fit.covariance.and_then(|cov| {
        let mut g = [0.0f64; 5];
        for (k, gk) in g.iter_mut().enumerate() {
            let h = 1e-6 * p[k].abs().max(1e-9);
            let mut hi = p;
            let mut lo = p;
            hi[k] += h;
            lo[k] -= h;
            *gk = (peak_of(hi) - peak_of(lo)) / (2.0 * h);
        }
        let mut var = 0.0;
        for a in 0..5 {
            for b in 0..5 {
                var += g[a] * cov[a * 5 + b] * g[b];
            }
        }
        (var.is_finite() && var >= 0.0).then(|| var.sqrt())
    });
    let rail_s = sign * rail_v;
    let half = 1.96 * std_v.unwrap_or(0.0);
    let est_s = peak_s.max(rail_s);
    let lower_s = (peak_s - half).max(rail_s);
    let upper_s = (peak_s + half).max(rail_s);
    let (peak_v, lo_v, hi_v) = (sign * est_s, sign * lower_s, sign * upper_s);
    let t_origin_s = t_start_s + i_edge as f64 * dt_s;
    Some(EventFit {
        t_origin_s,
        fit_start_s: t_origin_s + t_first,
        fit_end_s: t_origin_s + t_last,
        n_used,
        n_left_out,
        curve: FitCurve::DampedSine(Box::new(fit)),
        peak: Some(PeakEstimate {
            peak_v,
            lower_v: lo_v.min(hi_v),
            upper_v: lo_v.max(hi_v),
            std_v,
            rail_v,
            method: PEAK_METHOD,
        }),
    })
}
