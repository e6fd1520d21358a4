//! Fit of the free ringing of the switch node to the natural response of a second-order
//! (series or parallel RLC) circuit,
//!
//! ```text
//! v(t) = v_off + exp(-alpha t) (A cos(omega_d t) + B sin(omega_d t)),
//! ```
//!
//! by nonlinear least squares (Levenberg-Marquardt, see [`super::lm`]), and the decaying
//! exponential `v_off + A exp(-t / tau)` for events that do not ring.
//!
//! The start comes from zero crossings and lobe heights ([`estimate_ring`]), then a scan of
//! the damped frequency with A, B and v_off solved linearly at each trial (the separable
//! structure of the problem, Golub & Pereyra 1973) so a start 10-30 % off in frequency does
//! not fall into the neighbouring minimum of the sum of squares.

use serde::Serialize;

use super::lm::{self, LmOptions};
use super::recurrence::{fill_decay, fill_sin_cos, StepPlan};
use super::ModelError;

/// Starting values for [`fit_damped_sine`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RingStart {
    /// Damped angular frequency, rad/s.
    pub omega_d_rad_s: f64,
    /// Decay rate, 1/s (0 when unknown).
    pub alpha_per_s: f64,
    /// Final level the ringing settles to.
    pub v_off: f64,
    /// Fit the final level too (otherwise it stays at `v_off`).
    pub fit_offset: bool,
}

/// Standard errors (first-order, from sigma^2 (J^T J)^-1) of the damped-sine fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
pub struct DampedSineErrors {
    pub v_off: Option<f64>,
    pub a_v: Option<f64>,
    pub b_v: Option<f64>,
    pub alpha_per_s: Option<f64>,
    pub omega_d_rad_s: Option<f64>,
    pub omega_0_rad_s: Option<f64>,
    pub f_0_hz: Option<f64>,
    pub damping_ratio: Option<f64>,
}

/// A fitted damped sine. Time runs from the fit's origin (`t = 0` at the caller's origin).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DampedSineFit {
    pub v_off: f64,
    pub a_v: f64,
    pub b_v: f64,
    pub alpha_per_s: f64,
    pub omega_d_rad_s: f64,
    /// Undamped angular frequency sqrt(omega_d^2 + alpha^2).
    pub omega_0_rad_s: f64,
    pub f_d_hz: f64,
    pub f_0_hz: f64,
    /// zeta = alpha / omega_0.
    pub damping_ratio: f64,
    /// Q = 1 / (2 zeta); `None` when zeta is not positive.
    pub q_factor: Option<f64>,
    pub rms_v: f64,
    pub std_err: DampedSineErrors,
    pub n_samples: usize,
    pub n_evals: usize,
    pub converged: bool,
    /// Covariance of (A, B, alpha, omega_d, v_off) in SI units, row-major 5 x 5 (the v_off
    /// row and column are zero when it was held).
    #[serde(skip)]
    pub covariance: Option<[f64; 25]>,
}

impl DampedSineFit {
    /// Model value at time `t_s` from the fit's origin.
    pub fn value(&self, t_s: f64) -> f64 {
        damped_sine(
            [
                self.a_v,
                self.b_v,
                self.alpha_per_s,
                self.omega_d_rad_s,
                self.v_off,
            ],
            t_s,
        )
    }
}

/// Model value for parameters (A, B, alpha, omega_d, v_off).
pub fn damped_sine(p: [f64; 5], t_s: f64) -> f64 {
    let e = (-p[2] * t_s).exp();
    let (s, c) = (p[3] * t_s).sin_cos();
    p[4] + e * (p[0] * c + p[1] * s)
}

/// A fitted decaying exponential `v_off + A exp(-t / tau)`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExponentialFit {
    pub v_off: f64,
    pub a_v: f64,
    pub tau_s: f64,
    pub tau_std_s: Option<f64>,
    pub rms_v: f64,
    pub n_samples: usize,
    pub n_evals: usize,
    pub converged: bool,
}

impl ExponentialFit {
    pub fn value(&self, t_s: f64) -> f64 {
        self.v_off + self.a_v * (-t_s / self.tau_s).exp()
    }
}

/// Ring frequency and decay from zero crossings and lobe heights.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RingEstimate {
    pub freq_hz: f64,
    /// From the log of lobe heights against time; `None` with fewer than two usable lobes.
    pub alpha_per_s: Option<f64>,
    pub n_crossings: usize,
    /// Time (from the slice start) of the last crossing counted: the ring is above the
    /// hysteresis band until about here.
    pub t_last_crossing_s: f64,
}

/// Robust noise standard deviation from the median absolute second difference (white noise
/// gives var(d2) = 6 sigma^2; the MAD-to-sigma factor 1.4826 holds for Gaussian noise).
/// Smooth, well-sampled signals add little to second differences.
pub fn noise_sigma(v: &[f64]) -> f64 {
    if v.len() < 3 {
        return 0.0;
    }
    use crate::levels::{from_total_order_key, median_of_keys, total_order_key};
    // The keys of every second difference in one loop of known length (the compiler
    // vectorises it; through a filter each was pushed on its own, a quarter of a long
    // window's fit), and the rare ones that are not finite dropped after.
    let mut keys: Vec<i64> = Vec::with_capacity(v.len() - 2);
    keys.extend(
        v.windows(3)
            .map(|w| total_order_key((w[2] - 2.0 * w[1] + w[0]).abs())),
    );
    let finite = |k: i64| from_total_order_key(k).is_finite();
    if !keys.iter().fold(true, |all, &k| all & finite(k)) {
        keys.retain(|&k| finite(k));
    }
    let Some((med, _)) = median_of_keys(keys) else {
        return 0.0;
    };
    1.4826 * med / 6f64.sqrt()
}

/// Counts crossings of `u` (the signal minus its final level) through zero with a
/// hysteresis band of +-`hyst`, and estimates the ring frequency from their spacing
/// (least-squares slope of crossing time against crossing number: half a period each) and
/// the decay rate from the lobe extremes. `skip(i)` marks samples that must not count as
/// lobe extremes (clipped by a rail, a body diode or a clamp).
pub fn estimate_ring(
    u: &[f64],
    dt_s: f64,
    hyst: f64,
    skip: &dyn Fn(usize) -> bool,
) -> Option<RingEstimate> {
    if !super::is_pos(dt_s) || u.len() < 4 {
        return None;
    }
    let hyst = hyst.abs();
    let mut state = 0i8;
    let mut last_zero_t = 0.0;
    let mut crossings: Vec<f64> = Vec::new();
    // Lobe extremes (time, |u|, usable).
    let mut lobes: Vec<(f64, f64, bool)> = Vec::new();
    let mut lobe_ext = (0.0f64, 0.0f64, true);
    for (i, &x) in u.iter().enumerate() {
        if !x.is_finite() {
            continue;
        }
        if i > 0 {
            let p = u[i - 1];
            if p.is_finite() && ((p < 0.0) != (x < 0.0)) {
                let frac = if p != x { p / (p - x) } else { 0.0 };
                last_zero_t = ((i - 1) as f64 + frac) * dt_s;
            }
        }
        let new_state = if x > hyst {
            1
        } else if x < -hyst {
            -1
        } else {
            state
        };
        if new_state != state && state != 0 {
            crossings.push(last_zero_t);
            lobes.push(lobe_ext);
            lobe_ext = (0.0, 0.0, true);
        }
        state = new_state;
        if state != 0 && x.abs() > lobe_ext.1 {
            lobe_ext = (i as f64 * dt_s, x.abs(), !skip(i));
        }
    }
    if crossings.len() < 2 {
        return None;
    }
    let half_period = slope_against_index(&crossings)?;
    if !super::is_pos(half_period) {
        return None;
    }
    let freq_hz = 1.0 / (2.0 * half_period);
    // The first lobe may start mid-lobe (at the peak); its extreme is still the peak.
    let pts: Vec<(f64, f64)> = lobes
        .iter()
        .filter(|l| l.2 && l.1 > hyst)
        .map(|l| (l.0, l.1.ln()))
        .collect();
    let alpha_per_s = if pts.len() >= 2 {
        regression_slope(&pts).map(|s| -s).filter(|a| a.is_finite())
    } else {
        None
    };
    Some(RingEstimate {
        freq_hz,
        alpha_per_s,
        n_crossings: crossings.len(),
        t_last_crossing_s: *crossings.last().unwrap_or(&0.0),
    })
}

fn slope_against_index(t: &[f64]) -> Option<f64> {
    let pts: Vec<(f64, f64)> = t.iter().enumerate().map(|(k, &t)| (k as f64, t)).collect();
    regression_slope(&pts)
}

fn regression_slope(pts: &[(f64, f64)]) -> Option<f64> {
    let n = pts.len() as f64;
    if pts.len() < 2 {
        return None;
    }
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx) * (p.0 - mx)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    if sxx > 0.0 {
        Some(sxy / sxx)
    } else {
        None
    }
}

/// Linear least squares for (A, B[, c]) at fixed alpha and omega (times already scaled);
/// returns the coefficients and the sum of squares.
#[cfg(test)]
fn linear_part(
    t: &[f64],
    y: &[f64],
    alpha: f64,
    omega: f64,
    c_fixed: Option<f64>,
) -> Option<([f64; 3], f64)> {
    let plan = StepPlan::new(t);
    let mut trig = vec![(0.0, 0.0); t.len()];
    fill_sin_cos(t, &plan, omega, &mut trig);
    let mut decay = vec![0.0; t.len()];
    let targets = Targets::of(y, c_fixed);
    linear_part_trig(t, &targets, &plan, &trig, &mut decay, alpha, c_fixed)
}

/// The samples a linear part is fitted to, with the sums over them alone that every
/// [`linear_part_trig`] of a scan needs: taken once per fit rather than once per frequency
/// and damping tried (the same additions in the same order, so the same values).
struct Targets<'a> {
    y: &'a [f64],
    /// Sum of the targets (the samples less a fixed offset).
    sum: f64,
    /// Sum of their squares.
    sum_sq: f64,
    /// Their count.
    n: f64,
}

impl Targets<'_> {
    fn of(y: &[f64], c_fixed: Option<f64>) -> Targets<'_> {
        let c0 = c_fixed.unwrap_or(0.0);
        let (mut sum, mut sum_sq, mut n) = (0.0, 0.0, 0.0);
        for &yi in y {
            let target = if c_fixed.is_some() { yi - c0 } else { yi };
            sum += target;
            sum_sq += target * target;
            n += 1.0;
        }
        Targets { y, sum, sum_sq, n }
    }
}

/// [`linear_part`] with `sin_cos(omega t)` already computed for every sample, so a scan
/// over damping at one frequency pays for the trigonometry once; times must increase
/// (`plan` is theirs) and `decay` is room for as many values. The sum of squares comes
/// from the normal equations, `SSR = y'y - x'A'y` at the solution `x` (exact algebra; the
/// rounding it loses is far below the differences a scan compares).
#[inline(always)]
fn linear_part_trig(
    t: &[f64],
    targets: &Targets,
    plan: &StepPlan,
    trig: &[(f64, f64)],
    decay: &mut [f64],
    alpha: f64,
    c_fixed: Option<f64>,
) -> Option<([f64; 3], f64)> {
    let y = targets.y;
    let c0 = c_fixed.unwrap_or(0.0);
    fill_decay(t, plan, alpha, decay);
    let mut ata = [0.0f64; 9];
    let mut aty = [0.0f64; 3];
    let yty = targets.sum_sq;
    if c_fixed.is_some() {
        // Two columns: the oscillation only.
        let (mut scc, mut scs, mut sss, mut syc, mut sys) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for ((&e, &yi), &(s, c)) in decay.iter().zip(y).zip(trig) {
            let (ec, es) = (e * c, e * s);
            let target = yi - c0;
            scc += ec * ec;
            scs += ec * es;
            sss += es * es;
            syc += ec * target;
            sys += es * target;
        }
        ata[..4].copy_from_slice(&[scc, scs, scs, sss]);
        aty[0] = syc;
        aty[1] = sys;
    } else {
        let (mut scc, mut scs, mut sss, mut sc, mut ss) = (0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut syc, mut sys) = (0.0, 0.0);
        for ((&e, &yi), &(s, c)) in decay.iter().zip(y).zip(trig) {
            let (ec, es) = (e * c, e * s);
            scc += ec * ec;
            scs += ec * es;
            sss += es * es;
            sc += ec;
            ss += es;
            syc += ec * yi;
            sys += es * yi;
        }
        ata = [scc, scs, sc, scs, sss, ss, sc, ss, targets.n];
        aty = [syc, sys, targets.sum];
    }
    let k = if c_fixed.is_some() { 2 } else { 3 };
    let mut x = aty;
    if !lm::solve(&mut ata[..k * k], &mut x[..k], k) {
        return None;
    }
    let explained: f64 = (0..k).map(|a| x[a] * aty[a]).sum();
    let ssr = (yty - explained).max(0.0);
    let coef = [x[0], x[1], if k == 3 { x[2] } else { c0 }];
    (ssr.is_finite() && coef.iter().all(|c| c.is_finite())).then_some((coef, ssr))
}

/// The start scan of [`fit_damped_sine`]: frequencies `0.55..1.8` (geometric, `n_grid`
/// steps, in units of the start frequency) times each damping ratio, the linear part
/// solved at each.
struct StartGrid<'a> {
    t: &'a [f64],
    plan: &'a StepPlan,
    targets: &'a Targets<'a>,
    zetas: &'a [f64],
    n_grid: usize,
    c_fixed: Option<f64>,
}

crate::avx2::twice_compiled!(
    /// Best point of the start scan: (rate, frequency, linear coefficients, SSR). Compiled
    /// for AVX2 too: the sums over the samples are independent of each other, so the wider
    /// registers take four at once, each still added in sample order (a third fewer
    /// instructions for the scan, the same bits).
    fn scan_start(grid: &StartGrid) -> Option<(f64, f64, [f64; 3], f64)> => scan_start_on;
);

#[inline(always)]
fn scan_start_on(grid: &StartGrid) -> Option<(f64, f64, [f64; 3], f64)> {
    let n = grid.t.len();
    let mut trig = vec![(0.0, 0.0); n];
    let mut decay = vec![0.0; n];
    let mut best: Option<(f64, f64, [f64; 3], f64)> = None;
    for g in 0..=grid.n_grid {
        let w = 0.55 * (1.8f64 / 0.55).powf(g as f64 / grid.n_grid as f64);
        fill_sin_cos(grid.t, grid.plan, w, &mut trig);
        for &z in grid.zetas {
            let a = z * w / (1.0 - z * z).sqrt();
            let linear = linear_part_trig(
                grid.t,
                grid.targets,
                grid.plan,
                &trig,
                &mut decay,
                a,
                grid.c_fixed,
            );
            if let Some((coef, ssr)) = linear {
                if best.as_ref().is_none_or(|b| ssr < b.3) {
                    best = Some((a, w, coef, ssr));
                }
            }
        }
    }
    best
}

/// Fits the damped sine to samples `y` at times `t_s` (seconds from the model origin; need
/// not be uniform, so excluded samples are simply left out).
pub fn fit_damped_sine(
    t_s: &[f64],
    y: &[f64],
    start: &RingStart,
) -> Result<DampedSineFit, ModelError> {
    let m = t_s.len().min(y.len());
    let n_par = if start.fit_offset { 5 } else { 4 };
    if m < n_par + 3 {
        return Err(ModelError::TooFewSamples {
            n: m,
            min: n_par + 3,
        });
    }
    if !(start.omega_d_rad_s > 0.0 && start.omega_d_rad_s.is_finite()) {
        return Err(ModelError::NoStart("ring frequency".into()));
    }
    // Work in time units of 1/omega_start and amplitude units of the largest deviation, so
    // every parameter is of order one and J^T J is well conditioned.
    let w_s = start.omega_d_rad_s;
    let v_scale = y
        .iter()
        .take(m)
        .map(|v| (v - start.v_off).abs())
        .fold(0.0f64, f64::max)
        .max(1e-300);
    let ts: Vec<f64> = t_s[..m].iter().map(|t| t * w_s).collect();
    let ys: Vec<f64> = y[..m].iter().map(|v| (v - start.v_off) / v_scale).collect();
    let c_fixed = if start.fit_offset { None } else { Some(0.0) };
    let zeta0 = (start.alpha_per_s / w_s).clamp(0.0, 0.9);
    // Separable scan: frequency factors 0.55..1.8 (geometric), several damping ratios.
    let mut zetas = vec![0.002, 0.01, 0.03, 0.08, 0.2, 0.4];
    if zeta0 > 0.0 {
        zetas.push(zeta0);
    }
    // The valley of a fit over N periods is about 1/N wide in relative frequency; steps of
    // a quarter of that (at least 24, at most 80 over the factor 3.3) cannot step over it.
    let periods_spanned = (ts[m - 1] - ts[0]).abs() / std::f64::consts::TAU;
    let n_grid = ((periods_spanned * 5.0).ceil() as usize).clamp(24, 80);
    // The scan only has to land in the right valley: a thinned copy keeps it cheap on long
    // stretches (the least-squares steps after it use every sample). It keeps some sixteen
    // samples per period of the fastest frequency tried (1.8 times the start), and at
    // most 400 samples: still ten per period for fits of up to 40 periods.
    let scan_points = (periods_spanned * 16.0 * 1.8).ceil().clamp(64.0, 400.0) as usize;
    let scan_stride = m.div_ceil(scan_points).max(1);
    let ts_scan: Vec<f64> = ts.iter().step_by(scan_stride).copied().collect();
    let ys_scan: Vec<f64> = ys.iter().step_by(scan_stride).copied().collect();
    let scan_plan = StepPlan::new(&ts_scan);
    let scan_targets = Targets::of(&ys_scan, c_fixed);
    let grid = StartGrid {
        t: &ts_scan,
        plan: &scan_plan,
        targets: &scan_targets,
        zetas: &zetas,
        n_grid,
        c_fixed,
    };
    let (a0, w0, coef0, _) =
        scan_start(&grid).ok_or_else(|| ModelError::NoStart("linear start".into()))?;
    let mut p0 = vec![coef0[0], coef0[1], a0, w0];
    if start.fit_offset {
        p0.push(coef0[2]);
    }
    // Running products along the (mostly uniform) times: within about 1e-14 of the
    // direct values, far inside what the fit resolves.
    let plan = StepPlan::new(&ts);
    let mut decay = vec![0.0; m];
    let mut trig = vec![(0.0, 0.0); m];
    let fit = lm::minimize(&p0, m, &LmOptions::default(), |p, r, jac| {
        let c0 = if p.len() > 4 { p[4] } else { 0.0 };
        fill_decay(&ts, &plan, p[2], &mut decay);
        fill_sin_cos(&ts, &plan, p[3], &mut trig);
        let (a, b) = (p[0], p[1]);
        let samples = ts.iter().zip(&decay).zip(&trig).zip(&ys);
        match jac {
            // Rows of a fixed length, walked in step with the samples: no index to check
            // and no test of the parameter count per sample (the same operations in the
            // same order as one row at a time by index).
            Some(j) => {
                let n_par = p.len();
                for ((((&t, &e), &(s, c)), &y), (ri, row)) in
                    samples.zip(r.iter_mut().zip(j.chunks_exact_mut(n_par)))
                {
                    let osc = a * c + b * s;
                    *ri = c0 + e * osc - y;
                    row[0] = e * c;
                    row[1] = e * s;
                    row[2] = -t * e * osc;
                    row[3] = e * t * (-a * s + b * c);
                    if let Some(last) = row.get_mut(4) {
                        *last = 1.0;
                    }
                }
            }
            None => {
                for ((((_, &e), &(s, c)), &y), ri) in samples.zip(r.iter_mut()) {
                    *ri = c0 + e * (a * c + b * s) - y;
                }
            }
        }
        true
    })?;
    let p = &fit.params;
    // A negative frequency is the same curve with B negated.
    let (a_s, mut b_s, alpha_s, mut w_fit) = (p[0], p[1], p[2], p[3]);
    if w_fit < 0.0 {
        w_fit = -w_fit;
        b_s = -b_s;
    }
    if w_fit == 0.0 {
        return Err(ModelError::NoRing);
    }
    // Back to SI: parameter k in scaled units times unit_k.
    let units = [v_scale, v_scale, w_s, w_s, v_scale];
    let flip = |k: usize| {
        if p[3] < 0.0 && (k == 1 || k == 3) {
            -1.0
        } else {
            1.0
        }
    };
    let cov = fit.covariance.as_ref().map(|c| {
        let n = p.len();
        let mut out = [0.0f64; 25];
        for i in 0..n {
            for j in 0..n {
                let sign = flip(i) * flip(j);
                out[i * 5 + j] = sign * c[i * n + j] * units[i] * units[j];
            }
        }
        out
    });
    let params = [
        a_s * v_scale,
        b_s * v_scale,
        alpha_s * w_s,
        w_fit * w_s,
        start.v_off
            + if start.fit_offset {
                p[4] * v_scale
            } else {
                0.0
            },
    ];
    Ok(assemble(
        params,
        cov,
        start.fit_offset,
        fit.rms * v_scale,
        m,
        fit.n_evals,
        fit.converged,
    ))
}

/// The fit with its derived quantities: omega_0 = sqrt(omega_d^2 + alpha^2),
/// zeta = alpha / omega_0, Q = 1 / (2 zeta), and their standard errors by first-order
/// propagation through the (alpha, omega_d) block of the covariance.
fn assemble(
    p: [f64; 5],
    cov: Option<[f64; 25]>,
    offset_free: bool,
    rms_v: f64,
    n_samples: usize,
    n_evals: usize,
    converged: bool,
) -> DampedSineFit {
    let (alpha, omega_d) = (p[2], p[3]);
    let omega_0 = (omega_d * omega_d + alpha * alpha).sqrt();
    let zeta = alpha / omega_0;
    let var = |k: usize| {
        cov.map(|c| c[k * 5 + k])
            .filter(|v| *v >= 0.0 && v.is_finite())
    };
    let covar = |a: usize, b: usize| cov.map(|c| c[a * 5 + b]).unwrap_or(0.0);
    let omega_0_var = match (var(2), var(3)) {
        (Some(va), Some(vw)) => {
            let (ga, gw) = (alpha / omega_0, omega_d / omega_0);
            Some(ga * ga * va + gw * gw * vw + 2.0 * ga * gw * covar(2, 3))
        }
        _ => None,
    };
    let zeta_var = match (var(2), var(3)) {
        (Some(va), Some(vw)) => {
            let w3 = omega_0.powi(3);
            let (ga, gw) = (omega_d * omega_d / w3, -alpha * omega_d / w3);
            Some(ga * ga * va + gw * gw * vw + 2.0 * ga * gw * covar(2, 3))
        }
        _ => None,
    };
    let sd = |v: Option<f64>| v.filter(|v| *v >= 0.0 && v.is_finite()).map(f64::sqrt);
    let two_pi = std::f64::consts::TAU;
    DampedSineFit {
        v_off: p[4],
        a_v: p[0],
        b_v: p[1],
        alpha_per_s: alpha,
        omega_d_rad_s: omega_d,
        omega_0_rad_s: omega_0,
        f_d_hz: omega_d / two_pi,
        f_0_hz: omega_0 / two_pi,
        damping_ratio: zeta,
        q_factor: (zeta > 0.0).then(|| 1.0 / (2.0 * zeta)),
        rms_v,
        std_err: DampedSineErrors {
            v_off: if offset_free { sd(var(4)) } else { None },
            a_v: sd(var(0)),
            b_v: sd(var(1)),
            alpha_per_s: sd(var(2)),
            omega_d_rad_s: sd(var(3)),
            omega_0_rad_s: sd(omega_0_var),
            f_0_hz: sd(omega_0_var).map(|s| s / two_pi),
            damping_ratio: sd(zeta_var),
        },
        n_samples,
        n_evals,
        converged,
        covariance: cov,
    }
}

/// Fits only the amplitudes A, B (and v_off when `fit_offset`) with the decay and frequency
/// held at values found elsewhere (another stretch of the same circuit). The covariance
/// joins the linear fit's sigma^2 (X^T X)^-1 with the given (alpha, omega_d) covariance,
/// the two taken as independent.
pub fn fit_amplitudes(
    t_s: &[f64],
    y: &[f64],
    alpha_per_s: f64,
    omega_d_rad_s: f64,
    alpha_omega_cov: Option<[f64; 4]>,
    v_off: f64,
    fit_offset: bool,
) -> Result<DampedSineFit, ModelError> {
    let m = t_s.len().min(y.len());
    let k = if fit_offset { 3 } else { 2 };
    if m < k + 2 {
        return Err(ModelError::TooFewSamples { n: m, min: k + 2 });
    }
    let mut xtx = [0.0f64; 9];
    let mut xty = [0.0f64; 3];
    for (&t, &v) in t_s.iter().zip(y).take(m) {
        let e = (-alpha_per_s * t).exp();
        let (s, c) = (omega_d_rad_s * t).sin_cos();
        let row = [e * c, e * s, 1.0];
        for a in 0..k {
            xty[a] += row[a] * (v - v_off);
            for b in 0..k {
                xtx[a * k + b] += row[a] * row[b];
            }
        }
    }
    let mut coef = xty;
    let mut work = xtx;
    if !lm::solve(&mut work[..k * k], &mut coef[..k], k) {
        return Err(ModelError::NoStart("amplitudes (singular fit)".into()));
    }
    let c0 = if fit_offset { coef[2] } else { 0.0 };
    let p = [coef[0], coef[1], alpha_per_s, omega_d_rad_s, v_off + c0];
    let ssr: f64 = t_s
        .iter()
        .zip(y)
        .take(m)
        .map(|(&t, &v)| (damped_sine(p, t) - v).powi(2))
        .sum();
    let sigma2 = ssr / (m - k) as f64;
    let cov = lm::invert(&xtx[..k * k], k).map(|inv| {
        let mut out = [0.0f64; 25];
        // Linear block: indices 0, 1 (A, B) and 4 (v_off).
        let map = [0usize, 1, 4];
        for a in 0..k {
            for b in 0..k {
                out[map[a] * 5 + map[b]] = sigma2 * inv[a * k + b];
            }
        }
        if let Some(c) = alpha_omega_cov {
            out[2 * 5 + 2] = c[0];
            out[2 * 5 + 3] = c[1];
            out[3 * 5 + 2] = c[2];
            out[3 * 5 + 3] = c[3];
        }
        out
    });
    Ok(assemble(
        p,
        cov,
        fit_offset,
        (ssr / m as f64).sqrt(),
        m,
        1,
        true,
    ))
}

/// Fits `v_off + A exp(-t / tau)` to samples `y` at times `t_s` from the model origin.
/// `tau0_s` is the starting time constant; the final level is free when `fit_offset`.
pub fn fit_exponential(
    t_s: &[f64],
    y: &[f64],
    v_off: f64,
    tau0_s: f64,
    fit_offset: bool,
) -> Result<ExponentialFit, ModelError> {
    let m = t_s.len().min(y.len());
    let n_par = if fit_offset { 3 } else { 2 };
    if m < n_par + 3 {
        return Err(ModelError::TooFewSamples {
            n: m,
            min: n_par + 3,
        });
    }
    if !(tau0_s > 0.0 && tau0_s.is_finite()) {
        return Err(ModelError::NoStart("time constant".into()));
    }
    let v_scale = y[..m]
        .iter()
        .map(|v| (v - v_off).abs())
        .fold(0.0f64, f64::max)
        .max(1e-300);
    let ts: Vec<f64> = t_s[..m].iter().map(|t| t / tau0_s).collect();
    let ys: Vec<f64> = y[..m].iter().map(|v| (v - v_off) / v_scale).collect();
    // Amplitude at the origin from the first sample, rate 1 in scaled units.
    let a0 = ys[0] * ts[0].exp();
    let mut p0 = vec![a0, 1.0];
    if fit_offset {
        p0.push(0.0);
    }
    let plan = StepPlan::new(&ts);
    let mut decay = vec![0.0; m];
    let fit = lm::minimize(&p0, m, &LmOptions::default(), |p, r, jac| {
        let c0 = if p.len() > 2 { p[2] } else { 0.0 };
        let mut jac = jac;
        fill_decay(&ts, &plan, p[1], &mut decay);
        for i in 0..m {
            let e = decay[i];
            r[i] = c0 + p[0] * e - ys[i];
            if let Some(j) = jac.as_deref_mut() {
                let row = &mut j[i * p.len()..(i + 1) * p.len()];
                row[0] = e;
                row[1] = -ts[i] * p[0] * e;
                if p.len() > 2 {
                    row[2] = 1.0;
                }
            }
        }
        true
    })?;
    let k = fit.params[1];
    if !super::is_pos(k) {
        return Err(ModelError::NotDecaying);
    }
    let tau = tau0_s / k;
    Ok(ExponentialFit {
        v_off: v_off
            + if fit_offset {
                fit.params[2] * v_scale
            } else {
                0.0
            },
        a_v: fit.params[0] * v_scale,
        tau_s: tau,
        // tau = tau0 / k: d tau / d k = -tau0 / k^2.
        tau_std_s: fit.std_err[1].map(|s| s * tau0_s / (k * k)),
        rms_v: fit.rms * v_scale,
        n_samples: m,
        n_evals: fit.n_evals,
        converged: fit.converged,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic noise: a 64-bit linear congruential generator (Knuth's MMIX constants)
    /// summed over 12 draws for an approximately Gaussian value of unit variance.
    pub(crate) struct Noise(u64);
    impl Noise {
        pub(crate) fn new(seed: u64) -> Self {
            Noise(seed)
        }
        fn uniform(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64
        }
        pub(crate) fn gauss(&mut self) -> f64 {
            (0..12).map(|_| self.uniform()).sum::<f64>() - 6.0
        }
    }

    fn ring(
        alpha: f64,
        omega: f64,
        n: usize,
        dt: f64,
        noise_v: f64,
        seed: u64,
    ) -> (Vec<f64>, Vec<f64>) {
        let mut g = Noise::new(seed);
        let t: Vec<f64> = (0..n).map(|i| i as f64 * dt).collect();
        let y = t
            .iter()
            .map(|&t| damped_sine([80.0, 25.0, alpha, omega, 12.0], t) + noise_v * g.gauss())
            .collect();
        (t, y)
    }

    /// The start scan compiled for AVX2 (taken on a machine that has it) gives the bits
    /// the baseline build gives, with and without a fixed offset.
    #[test]
    fn the_start_scan_is_the_same_either_way_it_is_compiled() {
        let omega = std::f64::consts::TAU * 2e6;
        let (t, y) = ring(0.05 * omega, omega, 400, 10e-9, 0.5, 11);
        let ts: Vec<f64> = t.iter().map(|t| t * omega * 0.9).collect();
        let ys: Vec<f64> = y.iter().map(|v| (v - 11.0) / 90.0).collect();
        let plan = StepPlan::new(&ts);
        let zetas = [0.002, 0.01, 0.03, 0.08, 0.2, 0.4, 0.05];
        for c_fixed in [None, Some(0.0)] {
            let targets = Targets::of(&ys, c_fixed);
            let grid = StartGrid {
                t: &ts,
                plan: &plan,
                targets: &targets,
                zetas: &zetas,
                n_grid: 40,
                c_fixed,
            };
            let bits = |b: Option<(f64, f64, [f64; 3], f64)>| {
                b.map(|(a, w, c, s)| [a, w, c[0], c[1], c[2], s].map(f64::to_bits))
            };
            let got = bits(scan_start(&grid));
            assert!(got.is_some());
            assert_eq!(got, bits(scan_start_on(&grid)), "{c_fixed:?}");
        }
    }

    #[test]
    fn recovers_alpha_and_omega_from_starts_off_in_frequency() {
        // Analytic damped sine: f_d = 2 MHz, zeta about 0.05, sampled at 100 MS/s over
        // 5 us (10 periods), 0.5 V noise on an 84 V first lobe.
        let omega = std::f64::consts::TAU * 2e6;
        let alpha = 0.05 * omega;
        let (t, y) = ring(alpha, omega, 500, 10e-9, 0.5, 7);
        for factor in [0.7, 0.8, 0.9, 1.1, 1.2, 1.3] {
            let fit = fit_damped_sine(
                &t,
                &y,
                &RingStart {
                    omega_d_rad_s: omega * factor,
                    alpha_per_s: 0.0,
                    v_off: 11.0,
                    fit_offset: true,
                },
            )
            .unwrap();
            assert!(
                (fit.omega_d_rad_s / omega - 1.0).abs() < 1e-3,
                "start x{factor}: {fit:?}"
            );
            assert!(
                (fit.alpha_per_s / alpha - 1.0).abs() < 0.02,
                "start x{factor}: {fit:?}"
            );
            assert!((fit.v_off - 12.0).abs() < 0.1);
            assert!(fit.rms_v < 0.6 && fit.rms_v > 0.4, "rms {}", fit.rms_v);
            assert!(fit.n_evals < 60, "{} evaluations", fit.n_evals);
            // The standard error must cover the true value at about 3 sigma.
            let se = fit.std_err.omega_d_rad_s.unwrap();
            assert!((fit.omega_d_rad_s - omega).abs() < 4.0 * se + 1.0);
        }
    }

    #[test]
    fn derived_quantities_follow_their_definitions() {
        let omega = 1e6;
        let alpha = 2e5;
        let (t, y) = ring(alpha, omega, 400, 2e-8, 0.0, 1);
        let fit = fit_damped_sine(
            &t,
            &y,
            &RingStart {
                omega_d_rad_s: omega,
                alpha_per_s: alpha,
                v_off: 12.0,
                fit_offset: false,
            },
        )
        .unwrap();
        // omega_0 = sqrt(omega_d^2 + alpha^2), zeta = alpha / omega_0, Q = 1 / (2 zeta)
        // (second-order system, any circuits textbook): here omega_0 = 1.0198039e6.
        assert!((fit.omega_0_rad_s - 1.019_803_9e6).abs() < 1.0);
        assert!((fit.damping_ratio - 0.196_116_1).abs() < 1e-6);
        assert!((fit.q_factor.unwrap() - 2.549_509_8).abs() < 1e-5);
        assert!(fit.rms_v < 1e-6);
    }

    #[test]
    fn zero_crossings_give_the_frequency() {
        let omega = std::f64::consts::TAU * 1e5;
        let alpha = 0.03 * omega;
        let dt = 1e-7;
        let u: Vec<f64> = (0..1000)
            .map(|i| damped_sine([100.0, 0.0, alpha, omega, 0.0], i as f64 * dt))
            .collect();
        let est = estimate_ring(&u, dt, 3.0, &|_| false).unwrap();
        assert!((est.freq_hz / 1e5 - 1.0).abs() < 0.01, "{est:?}");
        let a = est.alpha_per_s.unwrap();
        assert!((a / alpha - 1.0).abs() < 0.05, "{a} vs {alpha}");
    }

    #[test]
    fn exponential_decay_recovers_tau() {
        let mut g = Noise::new(3);
        let tau = 1.25e-3;
        let t: Vec<f64> = (0..300).map(|i| i as f64 * 2e-5).collect();
        let y: Vec<f64> = t
            .iter()
            .map(|&t| 12.0 + 30.0 * (-t / tau).exp() + 0.05 * g.gauss())
            .collect();
        let fit = fit_exponential(&t, &y, 12.3, 0.5e-3, true).unwrap();
        assert!((fit.tau_s / tau - 1.0).abs() < 0.01, "{fit:?}");
        assert!((fit.v_off - 12.0).abs() < 0.02);
        assert!(fit.tau_std_s.unwrap() < 0.01 * tau);
    }

    #[test]
    fn noise_estimate_is_near_the_truth() {
        let mut g = Noise::new(11);
        let v: Vec<f64> = (0..5000)
            .map(|i| (i as f64 * 0.01).sin() * 5.0 + 0.2 * g.gauss())
            .collect();
        let s = noise_sigma(&v);
        assert!((s / 0.2 - 1.0).abs() < 0.1, "{s}");
    }

    /// The estimate from keys made in one loop is the definition's to the bit: the
    /// median of the finite second differences' magnitudes, times 1.4826 / sqrt(6), with
    /// NaN and infinities (which make their differences not finite) left out, and none
    /// at all from a record of them.
    #[test]
    fn noise_estimate_leaves_out_what_is_not_finite() {
        let definition = |v: &[f64]| {
            let mut d: Vec<f64> = v
                .windows(3)
                .map(|w| (w[2] - 2.0 * w[1] + w[0]).abs())
                .filter(|x| x.is_finite())
                .collect();
            if d.is_empty() {
                return 0.0;
            }
            let mid = d.len() / 2;
            let m = *d.select_nth_unstable_by(mid, f64::total_cmp).1;
            1.4826 * m / 6f64.sqrt()
        };
        let mut g = Noise::new(3);
        let mut v: Vec<f64> = (0..999).map(|_| 0.05 * g.gauss()).collect();
        assert_eq!(noise_sigma(&v).to_bits(), definition(&v).to_bits());
        for (at, x) in [
            (0, f64::NAN),
            (500, f64::INFINITY),
            (998, f64::NEG_INFINITY),
        ] {
            v[at] = x;
            assert_eq!(
                noise_sigma(&v).to_bits(),
                definition(&v).to_bits(),
                "{x} at {at}"
            );
        }
        assert_eq!(noise_sigma(&[f64::NAN; 10]), 0.0);
    }
}
#[cfg(test)]
mod lm_alone {
    use super::*;

    /// Without the frequency scan: Levenberg-Marquardt alone, from amplitudes solved at the
    /// wrong frequency and zero decay, must reach the true frequency (or its mirror image,
    /// the same curve with omega and B negated) from starts 10-30 % off. The analytic
    /// signal is the source of the expected value.
    #[test]
    fn levenberg_marquardt_alone_converges_from_starts_off_in_frequency() {
        let omega = std::f64::consts::TAU * 2e6;
        let alpha = 0.05 * omega;
        let dt = 10e-9;
        let t: Vec<f64> = (0..500).map(|i| i as f64 * dt).collect();
        let y: Vec<f64> = t
            .iter()
            .map(|&t| damped_sine([80.0, 25.0, alpha, omega, 12.0], t))
            .collect();
        for f in [0.7, 0.8, 0.9, 1.1, 1.2, 1.3] {
            let w0 = omega * f;
            let ts: Vec<f64> = t.iter().map(|t| t * w0).collect();
            let ys: Vec<f64> = y.iter().map(|v| (v - 12.0) / 84.0).collect();
            let (coef, _) = linear_part(&ts, &ys, 0.0, 1.0, None).unwrap();
            let r = lm::minimize(
                &[coef[0], coef[1], 0.0, 1.0, coef[2]],
                500,
                &LmOptions::default(),
                |p, r, jac| {
                    let mut jac = jac;
                    for i in 0..500 {
                        let tt = ts[i];
                        let e = (-p[2] * tt).exp();
                        let (s, c) = (p[3] * tt).sin_cos();
                        let osc = p[0] * c + p[1] * s;
                        r[i] = p[4] + e * osc - ys[i];
                        if let Some(j) = jac.as_deref_mut() {
                            let row = &mut j[i * 5..(i + 1) * 5];
                            row[0] = e * c;
                            row[1] = e * s;
                            row[2] = -tt * e * osc;
                            row[3] = e * tt * (-p[0] * s + p[1] * c);
                            row[4] = 1.0;
                        }
                    }
                    true
                },
            )
            .unwrap();
            let ratio = (r.params[3] * w0 / omega).abs();
            assert!((ratio - 1.0).abs() < 1e-6, "start x{f}: ratio {ratio}");
            assert!(r.n_evals < 150, "start x{f}: {} evaluations", r.n_evals);
        }
    }
}
