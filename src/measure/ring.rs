//! Ring frequency and damping of the oscillation around the off level.
//!
//! Frequency: zero crossings of `y = v - v_off`, each refined by linear interpolation
//! between the two samples that bracket it (counted only when the signal swings through a
//! noise band, so noise near zero adds no crossings); the half period is the least-squares
//! slope of crossing time against crossing number. For a damped sinusoid the zero crossings
//! are exactly `pi / omega_d` apart, so this gives the damped frequency without a model.
//! The FFT peak of the same stretch (Hann window, zero padding, parabolic refinement of the
//! peak bin) is the cross-check.
//!
//! Damping: logarithmic decrement of successive peaks of one sign (those in the spike's
//! direction; the opposite troughs are the ones a body diode or clamp clips),
//! `delta = ln(x_n / x_{n+1})`, `zeta = delta / sqrt(4 pi^2 + delta^2)` (any vibrations
//! textbook, e.g. Thomson & Dahleh, Theory of Vibration with Applications, 2.6), fitted over
//! all peaks above the noise by least squares on `ln x_n`.

use rustfft::{num_complex::Complex, FftPlanner};

/// Longest stretch handed to the FFT cross-check.
const MAX_FFT_SAMPLES: usize = 1 << 16;

/// What the ring analysis found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ring {
    /// Damped ring frequency from the zero crossings.
    pub freq_hz: f64,
    /// Period in samples.
    pub period_samples: f64,
    /// Damping ratio from the logarithmic decrement, if two peaks rose above the noise.
    pub damping_ratio: Option<f64>,
    /// Frequency of the FFT peak of the same stretch, if any.
    pub fft_freq_hz: Option<f64>,
    /// Number of zero crossings used.
    pub n_crossings: usize,
    /// Largest swing before the first crossing (the ring's size, for telling which of two
    /// rings dominates).
    pub amplitude: f64,
    /// Centre line of the ring relative to the given zero, when the peaks showed the given
    /// off level to be off (0 otherwise).
    pub offset: f64,
}

/// Analyses `y` (signal minus the off level, spike direction positive), sampled every
/// `dt_s`. `band` is the noise band a swing must pass through to count. `None` when fewer
/// than three crossings (less than one full period) are found: no ring, or overdamped.
pub fn analyse(y: &[f64], dt_s: f64, band: f64) -> Option<Ring> {
    let (ring, peaks) = analyse_once(y, dt_s, band)?;
    // A ring that had not died out by the end of its window leaves the off level uncertain,
    // and the decrement of peaks measured from a wrong zero is biased: fit the zero too.
    let Some(c) = fit_offset(&peaks) else {
        return Some(ring);
    };
    if c.abs() <= band.max(0.01 * peaks.first().copied().unwrap_or(0.0)) {
        return Some(ring);
    }
    let shifted: Vec<f64> = y.iter().map(|x| x - c).collect();
    let (mut again, _) = analyse_once(&shifted, dt_s, band)?;
    again.offset = c;
    Some(again)
}

/// The zero `c` for which successive peaks `p_n - c` fall on one exponential best: the
/// minimum over `c` of the residual of the straight-line fit of `ln(p_n - c)` against `n`
/// (coarse scan, then golden-section search). Only when at least four peaks exist and the fit removes most of
/// the residual left with `c = 0` (so noise alone never moves the zero).
fn fit_offset(peaks: &[f64]) -> Option<f64> {
    if peaks.len() < 4 {
        return None;
    }
    let min_p = peaks.iter().copied().fold(f64::INFINITY, f64::min);
    let max_p = peaks.iter().copied().fold(0f64, f64::max);
    let sse = |c: f64| -> f64 {
        let l: Vec<f64> = peaks.iter().map(|p| (p - c).max(1e-300).ln()).collect();
        let n = l.len() as f64;
        let mk = (n - 1.0) / 2.0;
        let ml = l.iter().sum::<f64>() / n;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for (k, x) in l.iter().enumerate() {
            sxy += (k as f64 - mk) * (x - ml);
            sxx += (k as f64 - mk).powi(2);
        }
        let b = sxy / sxx;
        l.iter()
            .enumerate()
            .map(|(k, x)| (x - ml - b * (k as f64 - mk)).powi(2))
            .sum()
    };
    // A coarse scan first: the residual need not have a single minimum over the range.
    let (a, b) = (-max_p, 0.9 * min_p);
    let steps = 200;
    let h = (b - a) / steps as f64;
    let best = (0..=steps)
        .map(|k| a + k as f64 * h)
        .min_by(|x, y| sse(*x).total_cmp(&sse(*y)))?;
    let (mut lo, mut hi) = ((best - h).max(a), (best + h).min(b));
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..80 {
        let m1 = hi - g * (hi - lo);
        let m2 = lo + g * (hi - lo);
        if sse(m1) < sse(m2) {
            hi = m2;
        } else {
            lo = m1;
        }
    }
    let c = 0.5 * (lo + hi);
    (sse(c) * 4.0 < sse(0.0)).then_some(c)
}

/// One pass of the ring analysis with `y`'s zero taken as given; also returns the peaks
/// used for the decrement.
fn analyse_once(y: &[f64], dt_s: f64, band: f64) -> Option<(Ring, Vec<f64>)> {
    let band = band.max(0.0);
    // Once the swings have shrunk to a few percent of the first, an error in the off level
    // moves the crossings noticeably; the crossings stop there. Only the swings in the
    // spike's direction are judged: the troughs between them may be held by a body diode
    // to a small fraction of the spike while the ring is still large. Judged as each
    // crossing is found, so the search ends with the ring, not with the window (a window
    // held to the memory bound is mostly settled record).
    let amp = |a: usize, b: usize| {
        y.get(a..b.min(y.len()))
            .map_or(0.0, |seg| seg.iter().fold(0f64, |m, x| m.max(x.abs())))
    };
    let (mut first_amp, mut keep_floor) = (0.0, 0.0);
    // Crossings: fractional sample positions and their direction.
    let mut crossings: Vec<(f64, bool)> = Vec::new();
    let mut side: i8 = 0;
    let mut last_opposite: Option<usize> = None;
    let mut k = 0;
    while k < y.len() {
        let x = y[k];
        // A ring that has died out leaves most of a long window inside the band, where a
        // sample changes nothing: eight of them are passed over in one test.
        if x.abs() <= band {
            if let Some(c) = y.get(k..k + 8) {
                if c.iter().fold(true, |all, x| all & (x.abs() <= band)) {
                    k += 8;
                    continue;
                }
            }
        }
        let s: i8 = if x > band {
            1
        } else if x < -band {
            -1
        } else {
            0
        };
        if s != 0 && s != side {
            if side != 0 {
                // The zero crossing lies between the last sample on the old side of zero and
                // the next one; search back from here to the last sign change.
                let from = last_opposite.unwrap_or(0);
                let c = line_fit_zero(y, from, k).or_else(|| zero_crossing_between(y, from, k));
                if let Some(c) = c {
                    crossings.push((c, s > 0));
                    if let [.., (a, true), (b, _)] = crossings[..] {
                        if amp(a as usize, b as usize + 1) < keep_floor {
                            crossings.pop();
                            break;
                        }
                    } else if let [(c0, _)] = crossings[..] {
                        first_amp = amp(0, c0 as usize + 1);
                        keep_floor = (2.0 * band).max(0.03 * first_amp);
                    }
                }
            }
            side = s;
        }
        if s == side && s != 0 {
            last_opposite = Some(k);
        }
        k += 1;
    }
    if crossings.len() < 3 {
        return None;
    }
    // Least-squares slope of crossing time against crossing number = half period.
    let n = crossings.len() as f64;
    let mean_k = (n - 1.0) / 2.0;
    let mean_t = crossings.iter().map(|c| c.0).sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (k, c) in crossings.iter().enumerate() {
        let dk = k as f64 - mean_k;
        sxy += dk * (c.0 - mean_t);
        sxx += dk * dk;
    }
    let half_period = sxy / sxx;
    if !(half_period > 0.0 && half_period.is_finite()) {
        return None;
    }
    let period_samples = 2.0 * half_period;
    let freq_hz = 1.0 / (period_samples * dt_s);

    // Peaks of the positive lobes: the stretch before the first crossing when it starts
    // positive, then each stretch between an upward and the next downward crossing.
    let mut peaks: Vec<f64> = Vec::new();
    let mut lobe_start: Option<usize> = if y.first().is_some_and(|&x| x > 0.0) {
        Some(0)
    } else {
        None
    };
    for &(c, up) in &crossings {
        let k = c.floor() as usize;
        if up {
            lobe_start = Some(k + 1);
        } else if let Some(a) = lobe_start.take() {
            if let Some(p) = lobe_peak(y, a, (k + 1).min(y.len())) {
                peaks.push(p);
            }
        }
    }
    // Small peaks carry the error of the off level (and the noise) as a large share of
    // their height; the fit keeps those above a tenth of the first.
    let floor = (5.0 * band).max(0.1 * peaks.first().copied().unwrap_or(0.0));
    let usable: Vec<f64> = peaks
        .iter()
        .copied()
        .take_while(|&p| p > floor && p > 0.0)
        .collect();
    let damping_ratio = log_decrement(&usable).and_then(|delta| {
        let z = delta / (4.0 * std::f64::consts::PI.powi(2) + delta * delta).sqrt();
        (z > 0.0 && z < 1.0).then_some(z)
    });

    // The spectrum of the same stretch of ring the crossings came from.
    let start = crossings.first().map_or(0, |c| c.0 as usize);
    let stop = crossings
        .last()
        .map_or(y.len(), |c| (c.0 + half_period) as usize)
        .min(y.len());
    let fft_freq_hz = fft_peak_hz(y.get(start..stop).unwrap_or(&[]), dt_s);
    Some((
        Ring {
            freq_hz,
            period_samples,
            damping_ratio,
            fft_freq_hz,
            n_crossings: crossings.len(),
            amplitude: first_amp,
            offset: 0.0,
        },
        usable,
    ))
}

/// Fractional position of the last sign change of `y` in `[from, to]`.
fn zero_crossing_between(y: &[f64], from: usize, to: usize) -> Option<f64> {
    let to = to.min(y.len().checked_sub(1)?);
    let mut k = to;
    while k > from {
        let (a, b) = (y[k - 1], y[k]);
        if (a <= 0.0 && b > 0.0) || (a >= 0.0 && b < 0.0) {
            return Some((k - 1) as f64 + a / (a - b));
        }
        k -= 1;
    }
    None
}

/// Top of the lobe `y[a..b]`: the vertex of a least-squares parabola through the samples
/// within a sixth of the lobe's length of its largest sample (the raw largest sample of a
/// noisy lobe sits high by the noise, and more so on small lobes, which would bias the
/// decrement low). The raw largest sample when the fit is not concave.
fn lobe_peak(y: &[f64], a: usize, b: usize) -> Option<f64> {
    let seg = y.get(a..b)?;
    let (k, &m) = seg.iter().enumerate().max_by(|p, q| p.1.total_cmp(q.1))?;
    let k = a + k;
    let h = ((b - a) / 6).max(1);
    let lo = k.saturating_sub(h);
    let hi = (k + h).min(y.len() - 1);
    if hi - lo < 2 {
        return Some(m);
    }
    // Normal equations for y = c0 + c1 t + c2 t^2, t centred on k.
    let mut s = [0f64; 5];
    let mut r = [0f64; 3];
    for (j, &x) in y.iter().enumerate().take(hi + 1).skip(lo) {
        let t = j as f64 - k as f64;
        let mut p = 1.0;
        for (q, sq) in s.iter_mut().enumerate() {
            *sq += p;
            if q < 3 {
                r[q] += p * x;
            }
            p *= t;
        }
    }
    let mat = [[s[0], s[1], s[2]], [s[1], s[2], s[3]], [s[2], s[3], s[4]]];
    let Some([c0, c1, c2]) = solve3(mat, r) else {
        return Some(m);
    };
    if c2 >= 0.0 {
        return Some(m);
    }
    let tv = (-c1 / (2.0 * c2)).clamp(-(h as f64), h as f64);
    Some(c0 + c1 * tv + c2 * tv * tv)
}

/// Solves a 3x3 linear system by Cramer's rule; `None` when singular.
fn solve3(m: [[f64; 3]; 3], r: [f64; 3]) -> Option<[f64; 3]> {
    let det = |a: [[f64; 3]; 3]| {
        a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
            - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
            + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0])
    };
    let d = det(m);
    if d.abs() < 1e-300 || !d.is_finite() {
        return None;
    }
    let mut out = [0f64; 3];
    for (c, o) in out.iter_mut().enumerate() {
        let mut a = m;
        for row in a.iter_mut().zip(r) {
            row.0[c] = row.1;
        }
        *o = det(a) / d;
    }
    Some(out)
}

/// Zero of the least-squares line through `y[from..=to]`, the samples between the last one
/// beyond the noise band on one side and the first beyond it on the other. Symmetric in
/// time, so noise does not pull it late the way the last sign change does. Needs at least
/// three samples and a zero inside the stretch.
fn line_fit_zero(y: &[f64], from: usize, to: usize) -> Option<f64> {
    let seg = y.get(from..=to)?;
    if seg.len() < 3 {
        return None;
    }
    let n = seg.len() as f64;
    let mean_t = (n - 1.0) / 2.0;
    let mean_y = seg.iter().sum::<f64>() / n;
    let (mut sty, mut stt) = (0.0, 0.0);
    for (k, &x) in seg.iter().enumerate() {
        let dt = k as f64 - mean_t;
        sty += dt * (x - mean_y);
        stt += dt * dt;
    }
    let slope = sty / stt;
    if slope == 0.0 || !slope.is_finite() {
        return None;
    }
    let z = mean_t - mean_y / slope;
    (0.0..=n - 1.0).contains(&z).then_some(from as f64 + z)
}

/// Logarithmic decrement per cycle from successive peaks: `-slope` of `ln(peak)` against
/// peak number, by least squares. Needs two peaks.
pub fn log_decrement(peaks: &[f64]) -> Option<f64> {
    if peaks.len() < 2 || peaks.iter().any(|&p| p <= 0.0) {
        return None;
    }
    let n = peaks.len() as f64;
    let mean_k = (n - 1.0) / 2.0;
    let mean_l = peaks.iter().map(|p| p.ln()).sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (k, p) in peaks.iter().enumerate() {
        let dk = k as f64 - mean_k;
        sxy += dk * (p.ln() - mean_l);
        sxx += dk * dk;
    }
    let d = -sxy / sxx;
    (d.is_finite() && d > 0.0).then_some(d)
}

/// Frequency of the largest FFT bin (DC left out) of `y` minus its mean, Hann-windowed and
/// zero-padded four times, refined by a parabola through the log magnitudes of the peak
/// bin and its neighbours.
pub fn fft_peak_hz(y: &[f64], dt_s: f64) -> Option<f64> {
    let y = y.get(..y.len().min(MAX_FFT_SAMPLES))?;
    if y.len() < 8 {
        return None;
    }
    let n = y.len();
    let mean = y.iter().sum::<f64>() / n as f64;
    let nfft = (4 * n).next_power_of_two();
    // Planning a size costs more than the transform itself (its twiddle tables); a planner
    // per thread keeps the plans of the sizes already seen (a handful: powers of two). The
    // buffers are kept too: fresh ones of this size cost a page fault every 4 KiB, which
    // on a folder of short captures was most of the transform's time.
    thread_local! {
        static WORK: std::cell::RefCell<FftWork> = std::cell::RefCell::new(FftWork {
            planner: FftPlanner::new(),
            buf: Vec::new(),
            scratch: Vec::new(),
            mags: Vec::new(),
        });
    }
    WORK.with(|work| {
        let work = &mut *work.borrow_mut();
        // The windowed samples are real: packed in pairs as one complex value each, they
        // take a transform of half the length (the even and odd samples' spectra are
        // pulled apart again below), which halves the work.
        let half = nfft / 2;
        let buf = &mut work.buf;
        buf.clear();
        buf.resize(half, Complex::new(0.0, 0.0));
        // Hann window 0.5 - 0.5 cos(2 pi k / (n - 1)), its cosines from phasors.
        phasors(2.0 * std::f64::consts::PI / (n - 1) as f64, n, |k, p| {
            let v = (y[k] - mean) * (0.5 - 0.5 * p.re);
            if k % 2 == 0 {
                buf[k / 2].re = v;
            } else {
                buf[k / 2].im = v;
            }
        });
        let fft = work.planner.plan_fft_forward(half);
        work.scratch
            .resize(fft.get_inplace_scratch_len(), Complex::new(0.0, 0.0));
        fft.process_with_scratch(buf, &mut work.scratch);
        // Squared magnitudes: the peak is the same bin, and the parabola through the logs
        // of three of them has the same vertex (every log is doubled), without a square
        // root (or `hypot`) per bin.
        work.mags.clear();
        real_spectrum_sq(buf, &mut work.mags);
        let peak = peak_of_spectrum(&work.mags, n, nfft, dt_s);
        // Long transforms (a long capture's ring) are rare and their buffers large: not
        // kept, so each thread holds at most a few hundred KiB between calls.
        if nfft > KEPT_FFT_POINTS {
            (work.buf, work.scratch, work.mags) = Default::default();
        }
        peak
    })
}

/// Squared magnitudes of bins `0..2h` of the spectrum of a real record of `4h` samples,
/// from the `2h`-point transform `z` of its samples packed in pairs (`x[2k] + i x[2k+1]`):
/// with `a = z[k]` and `b = conj(z[2h - k])`, the even samples' spectrum is `(a + b) / 2`,
/// the odd samples' `(a - b) / 2i`, and `X[k] = E[k] + exp(-2 pi i k / 4h) O[k]` (the
/// standard split of a real transform, e.g. Press et al., Numerical Recipes, 12.3).
fn real_spectrum_sq(z: &[Complex<f64>], out: &mut Vec<f64>) {
    let m = z.len();
    if m == 0 {
        return;
    }
    out.reserve(m);
    phasors(-std::f64::consts::PI / m as f64, m, |k, w| {
        let a = z[k];
        // (Bin 0 pairs with itself; a remainder here, an integer division a bin, was a
        // third of the ring analysis' time.)
        let b = z[if k == 0 { 0 } else { m - k }].conj();
        let even = (a + b) * 0.5;
        let odd = (a - b) * Complex::new(0.0, -0.5);
        out.push((even + w * odd).norm_sqr());
    });
}

/// Bins of a phasor table: [`phasors`] multiplies a coarse phasor every this many.
const PHASOR_BLOCK: usize = 64;

/// `exp(i theta k)` for `k` in `0..count`, handed to `each` in order. Each is the product
/// of a coarse phasor (every [`PHASOR_BLOCK`]th, from `sin_cos`) and a fine one (`k` modulo
/// the block, from a table made once per call): no phasor waits for the one before, where
/// rotating one phasor bin by bin made every bin wait for the last complex product (and
/// carried up to 63 roundings; here each carries the two `sin_cos` and one product's).
/// A cosine per sample (the Hann window) cost more still.
fn phasors(theta: f64, count: usize, mut each: impl FnMut(usize, Complex<f64>)) {
    let fine: [Complex<f64>; PHASOR_BLOCK] = std::array::from_fn(|j| {
        let (s, c) = if j < count {
            (theta * j as f64).sin_cos()
        } else {
            (0.0, 1.0)
        };
        Complex::new(c, s)
    });
    for k0 in (0..count).step_by(PHASOR_BLOCK) {
        let (s, c) = (theta * k0 as f64).sin_cos();
        let coarse = Complex::new(c, s);
        for (j, f) in fine.iter().enumerate().take(count - k0) {
            each(k0 + j, coarse * f);
        }
    }
}

/// Longest transform whose buffers a thread keeps for the next call.
const KEPT_FFT_POINTS: usize = 1 << 14;

/// Buffers and plans of [`fft_peak_hz`], one set per thread.
struct FftWork {
    planner: FftPlanner<f64>,
    buf: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    mags: Vec<f64>,
}

/// The refined frequency of the largest bin of `mags` (squared magnitudes of an `nfft`-point
/// transform of `n` samples).
fn peak_of_spectrum(mags: &[f64], n: usize, nfft: usize, dt_s: f64) -> Option<f64> {
    // Skip the lobe the window leaves around DC.
    let first = 4 * nfft / n;
    let (k, &m) = mags
        .iter()
        .enumerate()
        .skip(first.max(1))
        .max_by(|p, q| p.1.total_cmp(q.1))?;
    if m <= 0.0 {
        return None;
    }
    let mut pos = k as f64;
    if k + 1 < mags.len() {
        let (l, c, r) = (
            mags[k - 1].max(1e-300).ln(),
            m.ln(),
            mags[k + 1].max(1e-300).ln(),
        );
        let den = l - 2.0 * c + r;
        if den < 0.0 {
            pos += 0.5 * (l - r) / den;
        }
    }
    // A flat top (den near zero) can throw the interpolated peak outside the spectrum; a
    // negative or infinite frequency is no peak to report.
    let f = pos / (nfft as f64 * dt_s);
    (f.is_finite() && f > 0.0).then_some(f)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Phasors from the coarse-times-fine table agree with `sin_cos` of each angle to a few
    /// units in the last place, in order and one per index, for counts around the block.
    #[test]
    fn phasors_match_sin_cos() {
        for count in [0usize, 1, 2, 63, 64, 65, 1000] {
            for theta in [
                -std::f64::consts::PI / 4096.0,
                2.0 * std::f64::consts::PI / 999.0,
            ] {
                let mut next = 0;
                phasors(theta, count, |k, p| {
                    assert_eq!(k, next);
                    next += 1;
                    let (s, c) = (theta * k as f64).sin_cos();
                    assert!(
                        (p.re - c).abs() < 1e-15 && (p.im - s).abs() < 1e-15,
                        "{k} {p}"
                    );
                });
                assert_eq!(next, count);
            }
        }
    }
    use std::f64::consts::PI;

    fn damped(zeta: f64, f_hz: f64, dt: f64, n: usize) -> Vec<f64> {
        let wd = 2.0 * PI * f_hz;
        let alpha = zeta * wd / (1.0 - zeta * zeta).sqrt();
        (0..n)
            .map(|k| {
                let t = k as f64 * dt;
                100.0 * (-alpha * t).exp() * (wd * t).sin()
            })
            .collect()
    }

    #[test]
    fn log_decrement_matches_the_textbook_relation() {
        // delta = 2 pi zeta / sqrt(1 - zeta^2) (Thomson & Dahleh, eq. 2.6-4), for zeta 0.05
        // and 0.2: 0.31456 and 1.28255.
        for (zeta, delta) in [(0.05, 0.314_553_6), (0.2, 1.282_549_8)] {
            let y = damped(zeta, 1000.0, 1e-6, 20_000);
            let r = analyse(&y, 1e-6, 1e-9).unwrap();
            let z = r.damping_ratio.unwrap();
            let d = 2.0 * PI * z / (1.0 - z * z).sqrt();
            assert!((d - delta).abs() / delta < 0.01, "zeta {zeta}: delta {d}");
            assert!((z - zeta).abs() / zeta < 0.01, "zeta {zeta}: got {z}");
            assert!((r.freq_hz - 1000.0).abs() < 1.0, "{}", r.freq_hz);
            let f = r.fft_freq_hz.unwrap();
            assert!((f - 1000.0).abs() < 30.0, "fft {f}");
        }
    }

    #[test]
    fn the_packed_real_transform_gives_the_full_spectrum() {
        // Reference: the same record's full complex transform (rustfft), |X[k]|^2 for
        // k < N/2. The packed transform agrees to rounding.
        for len in [8usize, 64, 1024, 4096] {
            let x: Vec<f64> = (0..len)
                .map(|k| ((k * 7919) % 101) as f64 / 50.0 - 1.0 + (0.3 * k as f64).sin())
                .collect();
            let mut full: Vec<Complex<f64>> = x.iter().map(|&v| Complex::new(v, 0.0)).collect();
            FftPlanner::new().plan_fft_forward(len).process(&mut full);
            let mut z: Vec<Complex<f64>> = x.chunks(2).map(|p| Complex::new(p[0], p[1])).collect();
            FftPlanner::new().plan_fft_forward(len / 2).process(&mut z);
            let mut got = Vec::new();
            real_spectrum_sq(&z, &mut got);
            assert_eq!(got.len(), len / 2);
            let top = full.iter().map(|c| c.norm_sqr()).fold(0.0, f64::max);
            for (k, (g, f)) in got.iter().zip(&full).enumerate() {
                assert!(
                    (g - f.norm_sqr()).abs() <= 1e-12 * top,
                    "len {len}, bin {k}"
                );
            }
        }
    }

    #[test]
    fn a_single_lobe_is_no_ring() {
        let y: Vec<f64> = (0..100).map(|k| (PI * k as f64 / 99.0).sin()).collect();
        assert_eq!(analyse(&y, 1.0, 0.01), None);
    }
}

#[cfg(test)]
mod offset_tests {
    use super::*;

    #[test]
    fn offset_of_geometric_peaks_is_found() {
        // Peaks 20 + 300 * 0.82^n: the zero that makes them geometric is 20 (by construction).
        let peaks: Vec<f64> = (0..10).map(|n| 20.0 + 300.0 * 0.82f64.powi(n)).collect();
        let c = fit_offset(&peaks).unwrap();
        assert!((c - 20.0).abs() < 1e-3, "{c}");
    }
}
