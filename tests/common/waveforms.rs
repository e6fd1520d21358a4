//! Analytic turn-off waveforms of our own (formulas below) and a small deterministic noise
//! source, for tests with a known truth.

use std::f64::consts::PI;

/// xorshift64* (Vigna 2016) with Box-Muller normal deviates: deterministic across
/// platforms, no dependency.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng(seed.max(1))
    }
    pub fn next_u64(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        x.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    /// Standard normal (Box-Muller).
    pub fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
    }
}

/// Low-side switch opening a coil (L in series with R, from the supply) with capacitance C
/// from the node to ground: the series RLC natural response (Nilsson & Riedel, Electric
/// Circuits, ch. 8). With the node at 0 V and the coil current I0 at t = 0:
/// `v(t) = Vs + exp(-alpha t) (A cos(wd t) + B sin(wd t))`, `alpha = R / 2L`,
/// `w0 = 1 / sqrt(LC)`, `A = -Vs`, `B = (I0 / C - alpha Vs) / wd` (from v(0) = 0 and
/// C dv/dt(0) = I0).
#[derive(Debug, Clone, Copy)]
pub struct Rlc {
    pub vs: f64,
    pub i0: f64,
    pub l: f64,
    pub r: f64,
    pub c: f64,
}

impl Rlc {
    pub fn alpha(&self) -> f64 {
        self.r / (2.0 * self.l)
    }
    pub fn w0(&self) -> f64 {
        1.0 / (self.l * self.c).sqrt()
    }
    pub fn wd(&self) -> f64 {
        (self.w0().powi(2) - self.alpha().powi(2)).sqrt()
    }
    pub fn zeta(&self) -> f64 {
        self.alpha() / self.w0()
    }
    pub fn ring_hz(&self) -> f64 {
        self.wd() / (2.0 * PI)
    }
    fn ab(&self) -> (f64, f64) {
        let a = -self.vs;
        let b = (self.i0 / self.c - self.alpha() * self.vs) / self.wd();
        (a, b)
    }
    /// Node voltage `t` seconds after the switch opened.
    pub fn v(&self, t: f64) -> f64 {
        if t < 0.0 {
            return 0.0;
        }
        let (a, b) = self.ab();
        let wd = self.wd();
        self.vs + (-self.alpha() * t).exp() * (a * (wd * t).cos() + b * (wd * t).sin())
    }
    /// Coil current: `I0` before the opening, then the capacitor's current `C dv/dt`
    /// (the switch carries nothing once open).
    pub fn i(&self, t: f64) -> f64 {
        if t < 0.0 {
            return self.i0;
        }
        let (a, b) = self.ab();
        let (al, wd) = (self.alpha(), self.wd());
        let e = (-al * t).exp();
        self.c * e * ((-al * a + wd * b) * (wd * t).cos() + (-al * b - wd * a) * (wd * t).sin())
    }
    /// End of the first lobe: the second zero of `A cos + B sin`, `(atan(-A/B) + pi) / wd`.
    pub fn first_lobe_end_s(&self) -> f64 {
        let (a, b) = self.ab();
        ((-a / b).atan() + PI) / self.wd()
    }
}

/// Diode across the coil (common practice: the node sits one forward drop above the
/// supply while the coil current decays through the diode). After a linear rise over
/// `rise_s`, `i(t) = (I0 + Vf/R) exp(-t R/L) - Vf/R` until it reaches zero at
/// `(L/R) ln(1 + I0 R / Vf)`; then the node returns to the supply.
#[derive(Debug, Clone, Copy)]
pub struct DiodeClamp {
    pub vs: f64,
    pub vf: f64,
    pub i0: f64,
    pub l: f64,
    pub r: f64,
    pub rise_s: f64,
}

impl DiodeClamp {
    pub fn plateau_s(&self) -> f64 {
        self.l / self.r * (1.0 + self.i0 * self.r / self.vf).ln()
    }
    pub fn v(&self, t: f64) -> f64 {
        let top = self.vs + self.vf;
        if t < 0.0 {
            0.0
        } else if t < self.rise_s {
            top * t / self.rise_s
        } else if t < self.rise_s + self.plateau_s() {
            top
        } else {
            self.vs
        }
    }
}

/// First time in `[a, b]` where `f` crosses `level` (bisection after a scan of `n` steps).
pub fn first_crossing(f: &dyn Fn(f64) -> f64, level: f64, a: f64, b: f64, n: usize) -> Option<f64> {
    let h = (b - a) / n as f64;
    let mut t0 = a;
    let mut f0 = f(a) - level;
    for k in 1..=n {
        let t1 = a + k as f64 * h;
        let f1 = f(t1) - level;
        if f0 == 0.0 {
            return Some(t0);
        }
        if f0 * f1 < 0.0 {
            let (mut lo, mut hi) = (t0, t1);
            for _ in 0..80 {
                let m = 0.5 * (lo + hi);
                if (f(m) - level) * f0 > 0.0 {
                    lo = m;
                } else {
                    hi = m;
                }
            }
            return Some(0.5 * (lo + hi));
        }
        t0 = t1;
        f0 = f1;
    }
    None
}

/// Largest value of `f` on `[a, b]` (grid of `n` steps refined by golden-section search).
pub fn max_of(f: &dyn Fn(f64) -> f64, a: f64, b: f64, n: usize) -> (f64, f64) {
    let h = (b - a) / n as f64;
    let (mut best_t, mut best) = (a, f(a));
    for k in 1..=n {
        let t = a + k as f64 * h;
        let y = f(t);
        if y > best {
            best = y;
            best_t = t;
        }
    }
    let (mut lo, mut hi) = ((best_t - h).max(a), (best_t + h).min(b));
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..100 {
        let m1 = hi - g * (hi - lo);
        let m2 = lo + g * (hi - lo);
        if f(m1) < f(m2) {
            lo = m1;
        } else {
            hi = m2;
        }
    }
    let t = 0.5 * (lo + hi);
    (t, f(t))
}

/// A capture of repeated events: each cycle holds the on level (0 V) for `on_s`, then the
/// switch opens at a sub-sample instant and the node follows `shape(t)` for `off_s`.
/// Returns the samples and the switch-opening instants.
pub struct Train {
    pub v: Vec<f64>,
    pub t_open_s: Vec<f64>,
}

pub fn train(
    shape: &dyn Fn(usize, f64) -> f64,
    n_events: usize,
    on_s: f64,
    off_s: f64,
    dt_s: f64,
    rng: &mut Rng,
) -> Train {
    let period = on_s + off_s;
    let n = ((n_events as f64 * period + on_s) / dt_s).ceil() as usize;
    let t_open_s: Vec<f64> = (0..n_events)
        .map(|k| k as f64 * period + on_s + rng.uniform() * dt_s)
        .collect();
    let mut v = Vec::with_capacity(n);
    for j in 0..n {
        let t = j as f64 * dt_s;
        // Which cycle: the last opening at or before t.
        let k = t_open_s.partition_point(|&o| o <= t);
        let x = if k == 0 {
            0.0
        } else {
            let since = t - t_open_s[k - 1];
            if since < off_s {
                shape(k - 1, since)
            } else {
                0.0
            }
        };
        v.push(x);
    }
    Train { v, t_open_s }
}

/// Adds Gaussian noise of `sigma` and rounds to an ADC of `bits` over `[lo, hi]`, clipping
/// at the rails. Returns the code step.
pub fn digitise(v: &mut [f64], sigma: f64, bits: u32, lo: f64, hi: f64, rng: &mut Rng) -> f64 {
    let codes = (1u64 << bits) as f64 - 1.0;
    let step = (hi - lo) / codes;
    for x in v.iter_mut() {
        let y = *x + sigma * rng.normal();
        let c = ((y - lo) / step).round().clamp(0.0, codes);
        *x = lo + c * step;
    }
    step
}
