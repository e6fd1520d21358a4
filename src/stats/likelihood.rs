//! Pieces shared by the maximum-likelihood fits: standardising the data, confidence
//! intervals for a return level by the delta method and by profile likelihood.

use super::above;
use super::optimize::nelder_mead;
use super::special::{CHI2_1_95, Z_975};
use super::StatsError;
use serde::Serialize;

/// Data moved to zero mean and unit spread, so that the optimiser and the finite-difference
/// steps work on numbers of order one whatever the unit (volts of a 400 V spike or metres of
/// sea level). Location-scale families are equivariant: location = centre + spread * location',
/// scale = spread * scale', shape unchanged, log-likelihood = log-likelihood' - n ln(spread).
#[derive(Debug, Clone)]
pub(crate) struct Standardized {
    pub centre: f64,
    pub spread: f64,
    pub values: Vec<f64>,
}

impl Standardized {
    pub fn new(values: &[f64], what: &'static str, need: usize) -> Result<Self, StatsError> {
        let finite: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
        let n = finite.len();
        if n < need {
            return Err(StatsError::TooFew {
                have: n,
                need,
                what,
            });
        }
        let centre = finite.iter().sum::<f64>() / n as f64;
        let var = finite.iter().map(|x| (x - centre).powi(2)).sum::<f64>() / (n - 1) as f64;
        let spread = var.sqrt();
        if !above(spread, 0.0) || !spread.is_finite() {
            return Err(StatsError::NoSpread { what });
        }
        let values = finite.iter().map(|x| (x - centre) / spread).collect();
        Ok(Self {
            centre,
            spread,
            values,
        })
    }

    pub fn n(&self) -> usize {
        self.values.len()
    }

    pub fn to_level(&self, z: f64) -> f64 {
        self.centre + self.spread * z
    }

    /// ln L on the original scale from ln L on the standardised one.
    pub fn log_likelihood(&self, std_ll: f64) -> f64 {
        std_ll - self.n() as f64 * self.spread.ln()
    }
}

/// A two-sided 95 % confidence interval, with the method that produced it. A missing bound
/// means the method gives none (a profile that never drops far enough: the data do not bound
/// the level on that side).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Interval {
    pub method: &'static str,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

pub(crate) const DELTA_METHOD: &str = "delta method";
pub(crate) const PROFILE_LIKELIHOOD: &str = "profile likelihood";

/// The level exceeded once in N switchings, with its intervals.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReturnLevel {
    pub n_switchings: f64,
    pub level: f64,
    /// Standard error of the level by the delta method.
    pub std_error: Option<f64>,
    pub delta: Interval,
    pub profile: Option<Interval>,
}

/// Standard error of g(θ) by the delta method, Var g ≈ ∇gᵀ V ∇g (Coles 2001, Theorem 2.4),
/// with the gradient by central differences.
pub(crate) fn delta_std_error<G: Fn(&[f64]) -> f64>(
    g: G,
    theta: &[f64],
    cov: &[Vec<f64>],
) -> Option<f64> {
    let mut grad = Vec::with_capacity(theta.len());
    let mut p = theta.to_vec();
    for i in 0..theta.len() {
        let h = 1e-6 * (1.0 + theta[i].abs());
        p[i] = theta[i] + h;
        let up = g(&p);
        p[i] = theta[i] - h;
        let down = g(&p);
        p[i] = theta[i];
        grad.push((up - down) / (2.0 * h));
    }
    let mut var = 0.0;
    for (i, gi) in grad.iter().enumerate() {
        for (j, gj) in grad.iter().enumerate() {
            var += gi * cov.get(i)?.get(j)? * gj;
        }
    }
    (var.is_finite() && var >= 0.0).then(|| var.sqrt())
}

/// Delta-method interval level ± z₀.₉₇₅ · se.
pub(crate) fn delta_interval(level: f64, se: Option<f64>) -> Interval {
    Interval {
        method: DELTA_METHOD,
        lower: se.map(|s| level - Z_975 * s),
        upper: se.map(|s| level + Z_975 * s),
    }
}

/// Profile-likelihood interval for a level z (Coles 2001, §2.6.6 and §3.3.3): the set of z
/// with 2 [ℓ(θ̂) - ℓ_p(z)] ≤ χ²₁(0.95), where ℓ_p(z) maximises the likelihood over the other
/// parameters with the model re-parametrised so that z is one of them.
///
/// `nll_at(z, rest)` is the negative log-likelihood with the level held at z; `rest_hat` the
/// other parameters at the overall maximum; `step` the optimiser's initial simplex;
/// `scale_hint` a rough width (the delta-method standard error) to start the bracket search.
pub(crate) fn profile_interval<F: Fn(f64, &[f64]) -> f64 + Sync>(
    nll_at: F,
    nll_min: f64,
    z_hat: f64,
    rest_hat: &[f64],
    step: &[f64],
    scale_hint: f64,
) -> (Option<f64>, Option<f64>) {
    // Warm start from the neighbouring point of the profile; the overall maximum serves when
    // that start is outside the support at this z.
    let profile = |z: f64, starts: &[&[f64]]| -> Option<(f64, Vec<f64>)> {
        starts
            .iter()
            .find_map(|s| nelder_mead(|r| nll_at(z, r), s, step, 1e-12, 4_000).map(|m| (m.f, m.x)))
    };
    // deviance minus its 95 % point: negative inside the interval
    let excess = |v: f64| 2.0 * (v - nll_min) - CHI2_1_95;
    let width = if scale_hint.is_finite() && scale_hint > 0.0 {
        scale_hint
    } else {
        0.1
    };
    // The two ends are searched independently, side by side.
    let bound = |dir: f64| -> Option<f64> {
        let mut inner = z_hat;
        let mut f_inner = excess(nll_min);
        let mut inner_rest = rest_hat.to_vec();
        let mut d = 0.5 * width;
        let mut outer = None;
        for _ in 0..60 {
            let z = inner + dir * d;
            match profile(z, &[&inner_rest, rest_hat]) {
                Some((v, r)) if excess(v) < 0.0 => {
                    inner = z;
                    f_inner = excess(v);
                    inner_rest = r;
                    d *= 1.6;
                }
                found => {
                    outer = Some((z, found.map(|(v, _)| excess(v))));
                    break;
                }
            }
        }
        let (mut outer, mut f_outer) = outer?;
        // The crossing of the deviance with its 95 % point, by regula falsi with the
        // Illinois modification (Dowell & Jarratt 1971: the end kept twice in a row has its
        // value halved, so both ends close in), falling back to halving where the profile
        // cannot be evaluated; the bracket always holds the crossing.
        let mut kept = 0i8;
        for _ in 0..60 {
            if (outer - inner).abs() <= 1e-9 * (1.0 + z_hat.abs()) {
                break;
            }
            let z = match f_outer.filter(|f| f.is_finite() && *f > f_inner) {
                Some(fo) => {
                    let t = (f_inner / (f_inner - fo)).clamp(0.0, 1.0);
                    inner + t * (outer - inner)
                }
                None => 0.5 * (inner + outer),
            };
            match profile(z, &[&inner_rest, rest_hat]) {
                Some((v, r)) if excess(v) < 0.0 => {
                    inner = z;
                    f_inner = excess(v);
                    inner_rest = r;
                    if kept == -1 {
                        f_outer = f_outer.map(|f| 0.5 * f);
                    }
                    kept = -1;
                }
                found => {
                    outer = z;
                    f_outer = found.map(|(v, _)| excess(v));
                    if kept == 1 {
                        f_inner *= 0.5;
                    }
                    kept = 1;
                }
            }
        }
        Some(0.5 * (inner + outer))
    };
    rayon::join(|| bound(-1.0), || bound(1.0))
}

/// ln y for the level exceeded once in N switchings with m switchings per block: a block
/// maximum stays below z when all m switchings do, so G(z) = (1 - 1/N)^m and
/// y = -ln G(z) = -m ln(1 - 1/N). For m = 1 this is Coles' (2001, §3.1.3) return level of
/// return period N; for N ≫ m it equals his 1 - G = m/N.
pub(crate) fn ln_y_for(n_switchings: f64, m: usize) -> Result<f64, StatsError> {
    if !above(n_switchings, 1.0) || !n_switchings.is_finite() || m == 0 {
        return Err(StatsError::BadArgument(format!(
            "a return level needs more than 1 switching and at least 1 event per block \
             (got N = {n_switchings}, m = {m})"
        )));
    }
    let y = -(m as f64) * (-1.0 / n_switchings).ln_1p();
    Ok(y.ln())
}
