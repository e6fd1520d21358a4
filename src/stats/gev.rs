//! Generalized extreme value distribution fitted by maximum likelihood to block maxima
//! (Coles 2001, ch. 3): G(z) = exp{-[1 + ξ (z - μ)/σ]^(-1/ξ)} on 1 + ξ (z - μ)/σ > 0.
//! Sign convention of Coles: ξ < 0 is the bounded (Weibull-type) tail with upper end point
//! μ - σ/ξ, ξ = 0 the Gumbel limit, ξ > 0 the heavy (Fréchet-type) tail.

use super::above;
use serde::Serialize;

use super::gumbel::{self, EULER_GAMMA};
use super::likelihood::{
    delta_interval, delta_std_error, ln_y_for, profile_interval, Interval, ReturnLevel,
    Standardized, PROFILE_LIKELIHOOD,
};
use super::optimize::{hessian, inverse_spd, nelder_mead};
use super::{MaximaModel, StatsError, MIN_EXTREMES};

/// Below this |ξ| the Gumbel limit is used; the two forms agree to O(ξ y²) there.
const XI_ZERO: f64 = 1e-9;

#[derive(Debug, Clone, Serialize)]
pub struct GevFit {
    pub location: f64,
    pub scale: f64,
    /// ξ, Coles' sign convention (scipy.stats.genextreme's c is -ξ).
    pub shape: f64,
    pub log_likelihood: f64,
    pub n_maxima: usize,
    /// Covariance of (location, scale, shape) from the inverse observed information.
    pub covariance: Option<[[f64; 3]; 3]>,
    pub std_errors: Option<[f64; 3]>,
    /// μ - σ/ξ when ξ < 0: no block maximum can exceed it under the fitted model.
    pub upper_end_point: Option<f64>,
    #[serde(skip)]
    data: Standardized,
    #[serde(skip)]
    std_theta: [f64; 3],
    #[serde(skip)]
    std_cov: Option<Vec<Vec<f64>>>,
}

/// Negative log-likelihood of (μ, σ, ξ) (Coles 2001, eqs. 3.7 and 3.9). ξ ≤ -1 is refused:
/// the likelihood is unbounded there and no maximum-likelihood estimate exists (Smith 1985).
pub(crate) fn nll(x: &[f64], mu: f64, sigma: f64, xi: f64) -> f64 {
    if !above(sigma, 0.0) || !mu.is_finite() || !above(xi, -1.0) || !xi.is_finite() {
        return f64::INFINITY;
    }
    if xi.abs() < XI_ZERO {
        return gumbel::nll(x, mu, sigma);
    }
    let mut s = x.len() as f64 * sigma.ln();
    let a = 1.0 + 1.0 / xi;
    // Products with reciprocals made once, not two divisions a point: each term moves by
    // an ulp or so, and the intervals' searches, which evaluate this thousands of times,
    // take a fifth less time (the last step of a large batch, on which the batch waits).
    let (xi_over_sigma, minus_inv_xi) = (xi / sigma, -1.0 / xi);
    for &v in x {
        let arg = xi_over_sigma * (v - mu);
        if !above(arg, -1.0) {
            return f64::INFINITY;
        }
        let lt = arg.ln_1p();
        s += a * lt + (lt * minus_inv_xi).exp();
    }
    if s.is_nan() {
        f64::INFINITY
    } else {
        s
    }
}

/// z with -ln G(z) = y, given ln y: z = μ - σ/ξ [1 - y^(-ξ)] (Coles 2001, eq. 3.4),
/// written with expm1 so that it passes smoothly to μ - σ ln y as ξ → 0.
fn level_from(mu: f64, sigma: f64, xi: f64, ln_y: f64) -> f64 {
    if xi.abs() < XI_ZERO {
        mu - sigma * ln_y
    } else {
        mu + sigma / xi * (-xi * ln_y).exp_m1()
    }
}

/// Maximum-likelihood fit of the GEV distribution to block maxima (non-finite values are left
/// out). At least 15 maxima are needed. The optimiser starts from the Gumbel fit with several
/// shapes and keeps the best feasible result.
pub fn fit_gev(maxima: &[f64]) -> Result<GevFit, StatsError> {
    let data = Standardized::new(maxima, "block maxima", MIN_EXTREMES)?;
    let x = &data.values;
    let b0 = 6f64.sqrt() / std::f64::consts::PI;
    let f = |p: &[f64]| nll(x, p[0], p[1].exp(), p[2]);
    let mut best: Option<super::optimize::Minimum> = None;
    for xi0 in [0.0, -0.2, 0.2] {
        let start = [-EULER_GAMMA * b0, b0.ln(), xi0];
        if let Some(m) = nelder_mead(f, &start, &[0.2, 0.2, 0.1], 1e-14, 30_000) {
            if best.as_ref().is_none_or(|b| m.f < b.f) {
                best = Some(m);
            }
        }
    }
    let m = best.ok_or(StatsError::NoFit { model: "GEV" })?;
    let theta = [m.x[0], m.x[1].exp(), m.x[2]];
    let h = [1e-4, 1e-4 * theta[1], 1e-4];
    let std_cov = hessian(|p| nll(x, p[0], p[1], p[2]), &theta, &h).and_then(|hh| inverse_spd(&hh));
    let s = data.spread;
    let jac = [s, s, 1.0];
    let covariance = std_cov.as_ref().map(|c| {
        let mut out = [[0.0; 3]; 3];
        for (i, row) in out.iter_mut().enumerate() {
            for (j, v) in row.iter_mut().enumerate() {
                *v = c[i][j] * jac[i] * jac[j];
            }
        }
        out
    });
    let location = data.to_level(theta[0]);
    let scale = s * theta[1];
    let shape = theta[2];
    Ok(GevFit {
        location,
        scale,
        shape,
        log_likelihood: data.log_likelihood(-m.f),
        n_maxima: data.n(),
        std_errors: covariance.map(|c| [c[0][0].sqrt(), c[1][1].sqrt(), c[2][2].sqrt()]),
        covariance,
        upper_end_point: (shape < 0.0).then(|| location - scale / shape),
        std_theta: theta,
        std_cov,
        data,
    })
}

impl GevFit {
    /// Level exceeded once in `n_switchings` with `events_per_block` switchings per block,
    /// with 95 % intervals by the delta method (Coles 2001, §3.3.3) and by profile
    /// likelihood (Coles 2001, §3.3.3 and fig. 3.3 for Port Pirie).
    pub fn return_level(
        &self,
        n_switchings: f64,
        events_per_block: usize,
    ) -> Result<ReturnLevel, StatsError> {
        let ly = ln_y_for(n_switchings, events_per_block)?;
        let level_std = |t: &[f64]| level_from(t[0], t[1], t[2], ly);
        let z_hat = level_std(&self.std_theta);
        let se_std = self
            .std_cov
            .as_ref()
            .and_then(|c| delta_std_error(level_std, &self.std_theta, c));
        let level = self.data.to_level(z_hat);
        let se = se_std.map(|s| s * self.data.spread);
        let x = &self.data.values;
        let [mu, sigma, xi] = self.std_theta;
        let nll_min = nll(x, mu, sigma, xi);
        // With the level z held fixed, μ = z - (level_from(0, σ, ξ, ln y)).
        let (lo, hi) = profile_interval(
            |z, r| {
                let sigma = r[0].exp();
                nll(x, z - level_from(0.0, sigma, r[1], ly), sigma, r[1])
            },
            nll_min,
            z_hat,
            &[sigma.ln(), xi],
            &[0.1, 0.05],
            se_std.unwrap_or(0.1),
        );
        Ok(ReturnLevel {
            n_switchings,
            level,
            std_error: se,
            delta: delta_interval(level, se),
            profile: Some(Interval {
                method: PROFILE_LIKELIHOOD,
                lower: lo.map(|z| self.data.to_level(z)),
                upper: hi.map(|z| self.data.to_level(z)),
            }),
        })
    }
}

impl MaximaModel for GevFit {
    fn neg_ln_cdf(&self, x: f64) -> f64 {
        let y = (x - self.location) / self.scale;
        if self.shape.abs() < XI_ZERO {
            return (-y).exp();
        }
        let arg = self.shape * y;
        if arg > -1.0 {
            (-arg.ln_1p() / self.shape).exp()
        } else if self.shape < 0.0 {
            0.0 // above the upper end point
        } else {
            f64::INFINITY // below the lower end point
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nll_reduces_to_gumbel_near_zero_shape() {
        let x = [0.1, -0.4, 1.3, 0.7, 2.2];
        let g = gumbel::nll(&x, 0.2, 0.9);
        let near = nll(&x, 0.2, 0.9, 1e-7);
        assert!((g - near).abs() < 1e-5, "{g} {near}");
        assert_eq!(nll(&x, 0.2, 0.9, -1.0), f64::INFINITY);
        // ξ = -0.5, σ = 0.9, μ = 0.2: end point 2.0 lies below 2.2, outside the support
        assert_eq!(nll(&x, 0.2, 0.9, -0.5), f64::INFINITY);
    }

    #[test]
    fn recovers_bounded_tail_from_a_deterministic_sample() {
        // Inversion of G at plotting positions (i - 1/2)/n with μ = 10, σ = 2, ξ = -0.2:
        // z = μ - σ/ξ [1 - (-ln p)^(-ξ)] (Coles 2001, eq. 3.4).
        let (mu, sigma, xi) = (10.0, 2.0, -0.2);
        let n = 3000;
        let x: Vec<f64> = (0..n)
            .map(|i| {
                let p = (i as f64 + 0.5) / n as f64;
                mu - sigma / xi * (1.0 - (-p.ln()).powf(-xi))
            })
            .collect();
        let fit = fit_gev(&x).unwrap();
        let se = fit.std_errors.unwrap();
        assert!((fit.location - mu).abs() < 3.0 * se[0], "{fit:?}");
        assert!((fit.scale - sigma).abs() < 3.0 * se[1], "{fit:?}");
        assert!((fit.shape - xi).abs() < 3.0 * se[2], "{fit:?}");
        let end = fit.upper_end_point.unwrap();
        assert!((end - (mu - sigma / xi)).abs() < 0.5, "end point {end}");
        // p per event of exceeding the end point is zero; far below it, nearly one
        assert_eq!(fit.neg_ln_cdf(end + 1.0), 0.0);
    }
}
