//! Time integration of the circuit over a switching plan.
//!
//! Two integrators share the work. While no junction conducts and the switch sits fully on
//! or fully off, the equations are linear with constant coefficients, and one sample
//! interval is advanced exactly with the matrix exponential of the augmented system
//! (Van Loan 1978, "Computing integrals involving the matrix exponential"), computed by
//! scaling and squaring a Taylor series (Moler & Van Loan 2003, "Nineteen dubious ways").
//! Everywhere else (switch transitions, clamps and diodes conducting) the TR-BDF2 method
//! (Bank et al. 1985, IEEE Trans. Electron Devices 32(10)) takes adaptive steps with
//! Newton iterations on the three-variable system; it is L-stable, so the stiff junctions
//! do not ring numerically, and its local error estimate is the one given by Bank et al.
//! Samples inside a TR-BDF2 step come from cubic Hermite interpolation with the
//! derivatives at both ends.

use super::circuit::{Circuit, Operating, Powers, State, N_STATE};
use super::SimError;

/// One switching cycle: the switch turns on at `t_on_s`, off at `t_off_s`, and the cycle
/// lasts until the next cycle's `t_on_s`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cycle {
    pub t_on_s: f64,
    pub t_off_s: f64,
    pub turn_on_s: f64,
    pub turn_off_s: f64,
    pub op: Operating,
}

/// The switch's resistance when fully on and fully off.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SwitchModel {
    pub r_on_ohm: f64,
    pub r_off_ohm: f64,
}

/// Accuracy settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SolverOptions {
    pub rtol: f64,
    pub atol_a: f64,
    pub atol_v: f64,
    /// Use the exact linear propagator where it applies (off only to test TR-BDF2 alone).
    pub linear_shortcut: bool,
}

impl Default for SolverOptions {
    fn default() -> Self {
        SolverOptions {
            rtol: 1e-6,
            atol_a: 1e-9,
            atol_v: 1e-6,
            linear_shortcut: true,
        }
    }
}

/// Energies over the off phase of one cycle, from the turn-off instant to the next
/// turn-on (or the end of the record).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct OffEnergy {
    /// Coil current at the start of the turn-off.
    pub i0_a: f64,
    pub stored_start_j: f64,
    pub stored_end_j: f64,
    pub supply_j: f64,
    pub coil_resistance_j: f64,
    pub parallel_j: f64,
    pub clamp_j: f64,
    pub switch_j: f64,
}

impl OffEnergy {
    /// Energy in minus energy out and stored; zero for a perfect integration.
    pub fn imbalance_j(&self) -> f64 {
        self.stored_start_j + self.supply_j
            - self.stored_end_j
            - self.coil_resistance_j
            - self.parallel_j
            - self.clamp_j
            - self.switch_j
    }
}

/// Sampled result of a transient run, in the voltage across the switch.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Transient {
    pub v_switch_v: Vec<f64>,
    pub i_coil_a: Vec<f64>,
    pub i_switch_a: Vec<f64>,
    pub off_energy: Vec<OffEnergy>,
    pub implicit_steps: usize,
    pub propagated_samples: usize,
}

/// Where and how often the run is sampled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sampling {
    pub t_start_s: f64,
    pub dt_s: f64,
    pub n_samples: usize,
    /// Also record the switch current.
    pub keep_switch_current: bool,
}

/// Smooth 0-to-1 ramp with zero slope at both ends (cubic smoothstep).
fn smoothstep(x: f64) -> f64 {
    let x = x.clamp(0.0, 1.0);
    x * x * (3.0 - 2.0 * x)
}

struct Plan<'a> {
    circuit: &'a Circuit,
    cycles: &'a [Cycle],
    switch: SwitchModel,
    ln_r_on: f64,
    ln_r_off: f64,
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Static {
    On,
    Off,
}

impl Plan<'_> {
    fn cycle_at(&self, t: f64, hint: usize) -> usize {
        let mut k = hint.min(self.cycles.len().saturating_sub(1));
        while k + 1 < self.cycles.len() && t >= self.cycles[k + 1].t_on_s {
            k += 1;
        }
        while k > 0 && t < self.cycles[k].t_on_s {
            k -= 1;
        }
        k
    }

    /// Fraction of the way from on (0) to off (1), by cycle and time.
    fn off_fraction(&self, k: usize, t: f64) -> f64 {
        let c = &self.cycles[k];
        if t < c.t_off_s {
            if c.turn_on_s > 0.0 && t < c.t_on_s + c.turn_on_s {
                1.0 - smoothstep((t - c.t_on_s) / c.turn_on_s)
            } else {
                0.0
            }
        } else if c.turn_off_s > 0.0 {
            smoothstep((t - c.t_off_s) / c.turn_off_s)
        } else {
            1.0
        }
    }

    /// Switch conductance: the resistance moves from on to off along a smoothstep in its
    /// logarithm, so the current commutates over the middle of the turn-off time.
    fn g(&self, k: usize, t: f64) -> f64 {
        let s = self.off_fraction(k, t);
        if s <= 0.0 {
            1.0 / self.switch.r_on_ohm
        } else if s >= 1.0 {
            1.0 / self.switch.r_off_ohm
        } else {
            (-(self.ln_r_on + s * (self.ln_r_off - self.ln_r_on))).exp()
        }
    }

    fn breakpoints(&self, k: usize) -> [f64; 5] {
        let c = &self.cycles[k];
        let next = self.cycles.get(k + 1).map_or(f64::INFINITY, |n| n.t_on_s);
        [
            c.t_on_s,
            c.t_on_s + c.turn_on_s,
            c.t_off_s,
            c.t_off_s + c.turn_off_s,
            next,
        ]
    }

    fn next_breakpoint(&self, k: usize, t: f64) -> f64 {
        let eps = 1e-12 * t.abs().max(1e-9);
        self.breakpoints(k)
            .into_iter()
            .filter(|&b| b > t + eps)
            .fold(f64::INFINITY, f64::min)
    }

    /// Whether the switch holds still over `[ta, tb]`, all in cycle `k`.
    fn static_over(&self, k: usize, ta: f64, tb: f64) -> Option<Static> {
        let [_, on_done, off_start, off_done, next] = self.breakpoints(k);
        if ta >= on_done && tb <= off_start {
            Some(Static::On)
        } else if ta >= off_done && tb <= next {
            Some(Static::Off)
        } else {
            None
        }
    }
}

/// Exact one-interval propagator of `dx/dt = A x + b`: `x(t + dt) = phi x + gamma`.
#[derive(Clone, Copy)]
struct Propagator {
    m: [[f64; 4]; 4],
}

impl Propagator {
    fn new(a: &[[f64; N_STATE]; N_STATE], b: &State, dt: f64) -> Self {
        let mut aug = [[0.0; 4]; 4];
        for i in 0..N_STATE {
            for j in 0..N_STATE {
                aug[i][j] = a[i][j] * dt;
            }
            aug[i][3] = b[i] * dt;
        }
        Propagator { m: expm4(&aug) }
    }

    fn apply(&self, x: &State) -> State {
        let mut y = [0.0; N_STATE];
        for (i, yi) in y.iter_mut().enumerate() {
            *yi = self.m[i][0] * x[0] + self.m[i][1] * x[1] + self.m[i][2] * x[2] + self.m[i][3];
        }
        y
    }
}

fn matmul4(a: &[[f64; 4]; 4], b: &[[f64; 4]; 4]) -> [[f64; 4]; 4] {
    let mut c = [[0.0; 4]; 4];
    for i in 0..4 {
        for k in 0..4 {
            let aik = a[i][k];
            for j in 0..4 {
                c[i][j] += aik * b[k][j];
            }
        }
    }
    c
}

/// Matrix exponential by scaling and squaring a Taylor series (Moler & Van Loan 2003):
/// the matrix is scaled to a norm below 1/2, where 16 Taylor terms reach double precision.
fn expm4(a: &[[f64; 4]; 4]) -> [[f64; 4]; 4] {
    let norm = a
        .iter()
        .map(|r| r.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max);
    let mut squarings = 0u32;
    if norm > 0.5 && norm.is_finite() {
        squarings = (norm / 0.5).log2().ceil().max(0.0) as u32;
    }
    let scale = 0.5f64.powi(squarings as i32);
    let mut s = [[0.0; 4]; 4];
    for i in 0..4 {
        for j in 0..4 {
            s[i][j] = a[i][j] * scale;
        }
    }
    let mut result = [[0.0; 4]; 4];
    let mut term = [[0.0; 4]; 4];
    for i in 0..4 {
        result[i][i] = 1.0;
        term[i][i] = 1.0;
    }
    for n in 1..=16 {
        term = matmul4(&term, &s);
        let inv = 1.0 / n as f64;
        for i in 0..4 {
            for j in 0..4 {
                term[i][j] *= inv;
                result[i][j] += term[i][j];
            }
        }
    }
    for _ in 0..squarings {
        result = matmul4(&result, &result);
    }
    result
}

/// Solves `m x = r` by Gaussian elimination with partial pivoting; `None` if singular.
fn solve3(mut m: [[f64; N_STATE]; N_STATE], mut r: State) -> Option<State> {
    for col in 0..N_STATE {
        let mut piv = col;
        for row in col + 1..N_STATE {
            if m[row][col].abs() > m[piv][col].abs() {
                piv = row;
            }
        }
        if m[piv][col] == 0.0 || !m[piv][col].is_finite() {
            return None;
        }
        m.swap(col, piv);
        r.swap(col, piv);
        for row in col + 1..N_STATE {
            let f = m[row][col] / m[col][col];
            let pivot_row = m[col];
            for (mk, pk) in m[row].iter_mut().zip(pivot_row).skip(col) {
                *mk -= f * pk;
            }
            r[row] -= f * r[col];
        }
    }
    let mut x = [0.0; N_STATE];
    for col in (0..N_STATE).rev() {
        let mut s = r[col];
        for k in col + 1..N_STATE {
            s -= m[col][k] * x[k];
        }
        x[col] = s / m[col][col];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// TR-BDF2 constant gamma = 2 - sqrt(2) (Bank et al. 1985).
const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;

struct Stepper<'a> {
    circuit: &'a Circuit,
    opts: SolverOptions,
}

struct StepResult {
    x: State,
    f: State,
    err: f64,
}

impl Stepper<'_> {
    fn weight(&self, i: usize, a: f64, b: f64) -> f64 {
        let atol = if i == 0 {
            self.opts.atol_a
        } else {
            self.opts.atol_v
        };
        atol + self.opts.rtol * a.abs().max(b.abs())
    }

    /// Newton's method on `y - base - kappa h f(y, g) = 0`.
    fn newton(
        &self,
        base: &State,
        kh: f64,
        g: f64,
        op: &Operating,
        guess: State,
    ) -> Option<(State, State)> {
        let mut y = guess;
        for _ in 0..30 {
            let mut jac = [[0.0; N_STATE]; N_STATE];
            let f = self.circuit.derivative(&y, g, op, Some(&mut jac));
            let mut m = [[0.0; N_STATE]; N_STATE];
            let mut r = [0.0; N_STATE];
            for i in 0..N_STATE {
                for j in 0..N_STATE {
                    m[i][j] = -kh * jac[i][j];
                }
                m[i][i] += 1.0;
                r[i] = -(y[i] - base[i] - kh * f[i]);
            }
            let d = solve3(m, r)?;
            let mut norm: f64 = 0.0;
            for i in 0..N_STATE {
                y[i] += d[i];
                norm = norm.max(d[i].abs() / self.weight(i, y[i], 0.0));
            }
            if norm <= 1e-3 {
                let f = self.circuit.derivative(&y, g, op, None);
                return f.iter().all(|v| v.is_finite()).then_some((y, f));
            }
        }
        None
    }

    /// One TR-BDF2 step of size `h` from `(t, x)` with derivative `f0`.
    fn step(
        &self,
        plan: &Plan,
        k: usize,
        t: f64,
        x: &State,
        f0: &State,
        h: f64,
    ) -> Option<StepResult> {
        let op = &plan.cycles[k].op;
        let g1 = plan.g(k, t + GAMMA * h);
        let g2 = plan.g(k, t + h);
        // Stage 1, trapezoidal rule to t + gamma h.
        let d = GAMMA / 2.0;
        let mut base = [0.0; N_STATE];
        for i in 0..N_STATE {
            base[i] = x[i] + d * h * f0[i];
        }
        let (z, f1) = self.newton(&base, d * h, g1, op, *x)?;
        // Stage 2, BDF2 on the points t, t + gamma h, t + h.
        let a1 = 1.0 / (GAMMA * (2.0 - GAMMA));
        let a0 = (1.0 - GAMMA) * (1.0 - GAMMA) / (GAMMA * (2.0 - GAMMA));
        let c = (1.0 - GAMMA) / (2.0 - GAMMA);
        for i in 0..N_STATE {
            base[i] = a1 * z[i] - a0 * x[i];
        }
        let (y, f2) = self.newton(&base, c * h, g2, op, z)?;
        // Local truncation error estimate of Bank et al. (1985).
        let kc = (-3.0 * GAMMA * GAMMA + 4.0 * GAMMA - 2.0) / (12.0 * (2.0 - GAMMA));
        let mut err: f64 = 0.0;
        for i in 0..N_STATE {
            let lte = 2.0
                * kc
                * h
                * (f0[i] / GAMMA - f1[i] / (GAMMA * (1.0 - GAMMA)) + f2[i] / (1.0 - GAMMA));
            let e = lte / self.weight(i, x[i], y[i]);
            err += e * e;
        }
        Some(StepResult {
            x: y,
            f: f2,
            err: (err / N_STATE as f64).sqrt(),
        })
    }
}

/// Collects outputs and energies.
struct Recorder<'a> {
    out: Transient,
    plan: &'a Plan<'a>,
    keep_switch_current: bool,
    started: Vec<bool>,
    /// Power at the end of the last booked step, reused as the next step's start.
    last_power: Option<(usize, f64, Powers)>,
}

impl Recorder<'_> {
    fn sample(&mut self, k: usize, t: f64, x: &State) {
        let op = &self.plan.cycles[k].op;
        self.out.v_switch_v.push(x[1]);
        self.out.i_coil_a.push(x[0]);
        if self.keep_switch_current {
            let g = self.plan.g(k, t);
            self.out
                .i_switch_a
                .push(self.plan.circuit.currents(x, g, op).switch_a);
        }
    }

    /// Books the trapezoidal energy of a step from `(ta, xa)` to `(tb, xb)` in cycle `k`.
    fn energy(&mut self, k: usize, ta: f64, xa: &State, tb: f64, xb: &State) {
        let c = &self.plan.cycles[k];
        if ta < c.t_off_s - 1e-12 * c.t_off_s.abs().max(1e-9) {
            return;
        }
        let circuit = self.plan.circuit;
        let (Some(e), Some(started)) = (self.out.off_energy.get_mut(k), self.started.get_mut(k))
        else {
            return;
        };
        if !*started {
            *started = true;
            e.i0_a = xa[0];
            e.stored_start_j = circuit.stored_energy_j(xa);
        }
        let pa = match self.last_power {
            Some((kk, t, p)) if kk == k && t == ta => p,
            _ => circuit.powers(xa, self.plan.g(k, ta), &c.op),
        };
        let pb = circuit.powers(xb, self.plan.g(k, tb), &c.op);
        self.last_power = Some((k, tb, pb));
        let h2 = 0.5 * (tb - ta);
        e.supply_j += h2 * (pa.supply_w + pb.supply_w);
        e.coil_resistance_j += h2 * (pa.coil_resistance_w + pb.coil_resistance_w);
        e.parallel_j += h2 * (pa.parallel_w + pb.parallel_w);
        e.clamp_j += h2 * (pa.clamp_w + pb.clamp_w);
        e.switch_j += h2 * (pa.switch_w + pb.switch_w);
        e.stored_end_j = circuit.stored_energy_j(xb);
    }
}

/// Cubic Hermite interpolation inside a step (textbook).
fn hermite(xa: &State, fa: &State, xb: &State, fb: &State, h: f64, s: f64) -> State {
    let s2 = s * s;
    let s3 = s2 * s;
    let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
    let h10 = s3 - 2.0 * s2 + s;
    let h01 = -2.0 * s3 + 3.0 * s2;
    let h11 = s3 - s2;
    let mut y = [0.0; N_STATE];
    for i in 0..N_STATE {
        y[i] = h00 * xa[i] + h10 * h * fa[i] + h01 * xb[i] + h11 * h * fb[i];
    }
    y
}

/// Integrates the circuit over the plan and samples it every `dt_s` from `t_start_s`.
/// The record starts in the DC state of the first cycle's on state.
pub fn run(
    circuit: &Circuit,
    cycles: &[Cycle],
    switch: SwitchModel,
    sampling: Sampling,
    opts: SolverOptions,
) -> Result<Transient, SimError> {
    let Sampling {
        t_start_s,
        dt_s,
        n_samples,
        keep_switch_current,
    } = sampling;
    if cycles.is_empty() || n_samples == 0 {
        return Ok(Transient::default());
    }
    let plan = Plan {
        circuit,
        cycles,
        switch,
        ln_r_on: switch.r_on_ohm.ln(),
        ln_r_off: switch.r_off_ohm.ln(),
    };
    let stepper = Stepper { circuit, opts };
    let mut rec = Recorder {
        out: Transient {
            v_switch_v: Vec::with_capacity(n_samples),
            i_coil_a: Vec::with_capacity(n_samples),
            i_switch_a: Vec::with_capacity(if keep_switch_current { n_samples } else { 0 }),
            off_energy: vec![OffEnergy::default(); cycles.len()],
            ..Transient::default()
        },
        plan: &plan,
        keep_switch_current,
        started: vec![false; cycles.len()],
        last_power: None,
    };
    let sample_time = |j: usize| t_start_s + j as f64 * dt_s;
    let mut k = plan.cycle_at(t_start_s, 0);
    let mut t = t_start_s;
    let mut x = circuit.dc_state(plan.g(k, t), &cycles[k].op);
    rec.sample(k, t, &x);
    let mut next = 1usize;
    let mut t_on_grid = true;
    let mut h = dt_s / 16.0;
    let mut cache: [Option<(usize, Propagator)>; 2] = [None, None];
    let t_end = sample_time(n_samples - 1);

    // Guard against a loop that stops advancing (it would hang a batch run): many passes
    // without time or sample progress is reported as a convergence failure.
    let mut stalled = 0usize;
    // Largest junction current at the current state, when known (saves re-evaluating it).
    let mut x_jmax: Option<f64> = None;
    let mut last = (t, next);
    while next < n_samples {
        if (t, next) == last {
            stalled += 1;
            if stalled > 10_000 {
                return Err(SimError::StepTooSmall { t_s: t });
            }
        } else {
            stalled = 0;
            last = (t, next);
        }
        let k_new = plan.cycle_at(t, k);
        if k_new != k {
            x_jmax = None;
            k = k_new;
        }
        let op = cycles[k].op;
        let tb = sample_time(next);
        let tol = |x: &State| 1e-7 + 1e-5 * x[0].abs();
        // Exact linear step, when it applies.
        if opts.linear_shortcut && t_on_grid {
            if let Some(st) = plan.static_over(k, t, tb) {
                let slot = usize::from(st == Static::Off);
                let prop = match cache[slot] {
                    Some((kk, p)) if kk == k => p,
                    _ => {
                        let (a, b) = circuit.linear(plan.g(k, t), &op);
                        let p = Propagator::new(&a, &b, dt_s);
                        cache[slot] = Some((k, p));
                        p
                    }
                };
                let y = prop.apply(&x);
                let x_ok = match x_jmax {
                    Some(m) => m <= tol(&x),
                    None => circuit.max_junction_current(&x, &op) <= tol(&x),
                };
                let y_jmax = circuit.max_junction_current(&y, &op);
                if x_ok && y_jmax <= tol(&y) {
                    x_jmax = Some(y_jmax);
                    rec.energy(k, t, &x, tb, &y);
                    x = y;
                    t = tb;
                    rec.sample(k, t, &x);
                    rec.out.propagated_samples += 1;
                    next += 1;
                    continue;
                }
            }
        }
        // TR-BDF2 step, ending at the next breakpoint, or at the next sample when the
        // state is linear again (so the exact propagator can take over).
        let mut limit = plan.next_breakpoint(k, t).min(t_end);
        let linear_now = opts.linear_shortcut
            && plan.static_over(k, t, t).is_some()
            && x_jmax.unwrap_or_else(|| circuit.max_junction_current(&x, &op)) <= tol(&x);
        if linear_now {
            limit = limit.min(tb);
        }
        let span = limit - t;
        if span <= 0.0 || span.is_nan() {
            // Nothing left before the limit: only rounding separates t from it.
            t = t.max(limit);
            if (t - tb).abs() <= 1e-9 * dt_s {
                rec.sample(k, tb, &x);
                next += 1;
                t_on_grid = true;
            }
            continue;
        }
        let mut hh = h.min(span);
        if span - hh < 0.05 * hh {
            hh = span;
        }
        let f = circuit.derivative(&x, plan.g(k, t), &op, None);
        let Some(res) = stepper.step(&plan, k, t, &x, &f, hh) else {
            h = hh / 4.0;
            if h < 1e-9 * dt_s.min(1e-9) {
                return Err(SimError::StepTooSmall { t_s: t });
            }
            continue;
        };
        if res.err > 1.0 {
            h = hh * (0.9 * res.err.powf(-1.0 / 3.0)).clamp(0.1, 0.9);
            if h < 1e-9 * dt_s.min(1e-9) {
                return Err(SimError::StepTooSmall { t_s: t });
            }
            continue;
        }
        rec.out.implicit_steps += 1;
        let t_new = if hh == span { limit } else { t + hh };
        while next < n_samples && sample_time(next) <= t_new + 1e-9 * dt_s {
            let ts = sample_time(next);
            let s = ((ts - t) / hh).clamp(0.0, 1.0);
            let xs = if (ts - t_new).abs() <= 1e-9 * dt_s {
                res.x
            } else {
                hermite(&x, &f, &res.x, &res.f, hh, s)
            };
            rec.sample(k, ts, &xs);
            next += 1;
        }
        rec.energy(k, t, &x, t_new, &res.x);
        // Never snap t back onto the grid: that could step behind a breakpoint just passed.
        t_on_grid = (t_new - sample_time(next - 1)).abs() <= 1e-9 * dt_s;
        t = t_new;
        x = res.x;
        x_jmax = None;
        let grow = if res.err > 0.0 {
            (0.9 * res.err.powf(-1.0 / 3.0)).min(4.0)
        } else {
            4.0
        };
        // A step truncated by a limit says little about the next one; keep the larger.
        h = (hh * grow).max(if hh < h { h } else { 0.0 });
    }
    Ok(rec.out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn expm_of_a_rotation_and_a_decay() {
        // exp([[0, w], [-w, 0]]) is a rotation by w (textbook).
        let w = 2.5;
        let mut a = [[0.0; 4]; 4];
        a[0][1] = w;
        a[1][0] = -w;
        a[2][2] = -40.0;
        let e = expm4(&a);
        assert!((e[0][0] - w.cos()).abs() < 1e-13);
        assert!((e[0][1] - w.sin()).abs() < 1e-13);
        assert!((e[2][2] - (-40.0f64).exp()).abs() < 1e-15);
        assert!((e[3][3] - 1.0).abs() < 1e-15);
    }

    #[test]
    fn propagator_matches_first_order_solution() {
        // dx/dt = -x/tau + u/tau has x(dt) = u + (x0 - u) e^{-dt/tau} (textbook).
        let tau = 1e-6;
        let u = 5.0;
        let mut a = [[0.0; N_STATE]; N_STATE];
        a[1][1] = -1.0 / tau;
        let b = [0.0, u / tau, 0.0];
        let p = Propagator::new(&a, &b, 0.3e-6);
        let y = p.apply(&[0.0, 1.0, 0.0]);
        let expect = u + (1.0 - u) * (-0.3f64).exp();
        assert!((y[1] - expect).abs() < 1e-12, "{} vs {expect}", y[1]);
    }

    #[test]
    fn solve3_solves() {
        let m = [[2.0, 1.0, 0.0], [1.0, 3.0, 1.0], [0.0, 1.0, 4.0]];
        let x = solve3(m, [3.0, 5.0, 5.0]).unwrap();
        for (xi, ei) in x.iter().zip([1.0, 1.0, 1.0]) {
            assert!((xi - ei).abs() < 1e-14);
        }
        assert!(solve3([[0.0; 3]; 3], [1.0, 0.0, 0.0]).is_none());
    }
}
