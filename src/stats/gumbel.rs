//! Gumbel (extreme-value type I) distribution fitted by maximum likelihood to block maxima:
//! G(z) = exp{-exp[-(z - μ)/β]} (Coles 2001, §3.1.2; NIST/SEMATECH e-Handbook §1.3.6.6.16).

use super::above;
use serde::Serialize;

use super::likelihood::{
    delta_interval, delta_std_error, ln_y_for, profile_interval, Interval, ReturnLevel,
    Standardized, PROFILE_LIKELIHOOD,
};
use super::optimize::{hessian, inverse_spd, nelder_mead};
use super::{MaximaModel, StatsError, MIN_EXTREMES};

/// Euler-Mascheroni constant (Abramowitz & Stegun 6.1.3), the mean of the standard Gumbel.
pub const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

#[derive(Debug, Clone, Serialize)]
pub struct GumbelFit {
    pub location: f64,
    pub scale: f64,
    pub log_likelihood: f64,
    pub n_maxima: usize,
    /// Covariance of (location, scale) from the inverse observed information.
    pub covariance: Option<[[f64; 2]; 2]>,
    pub std_errors: Option<[f64; 2]>,
    #[serde(skip)]
    data: Standardized,
    #[serde(skip)]
    std_theta: [f64; 2],
    #[serde(skip)]
    std_cov: Option<Vec<Vec<f64>>>,
}

/// Negative log-likelihood of (μ, β) (Coles 2001, eq. 3.9).
pub(crate) fn nll(x: &[f64], mu: f64, beta: f64) -> f64 {
    if !above(beta, 0.0) || !mu.is_finite() {
        return f64::INFINITY;
    }
    let mut s = x.len() as f64 * beta.ln();
    // A product with the reciprocal, not a division a point (see `gev::nll`).
    let inv_beta = 1.0 / beta;
    for &v in x {
        let y = (v - mu) * inv_beta;
        s += y + (-y).exp();
    }
    if s.is_nan() {
        f64::INFINITY
    } else {
        s
    }
}

/// Maximum-likelihood fit of the Gumbel distribution to block maxima (non-finite values are
/// left out). At least 15 maxima are needed.
pub fn fit_gumbel(maxima: &[f64]) -> Result<GumbelFit, StatsError> {
    let data = Standardized::new(maxima, "block maxima", MIN_EXTREMES)?;
    let x = &data.values;
    // Method-of-moments start: β = s √6 / π, μ = mean - γ β (NIST e-Handbook §1.3.6.6.16),
    // with s = 1 and mean = 0 after standardising.
    let b0 = 6f64.sqrt() / std::f64::consts::PI;
    let start = [-EULER_GAMMA * b0, b0.ln()];
    let m = nelder_mead(
        |p| nll(x, p[0], p[1].exp()),
        &start,
        &[0.2, 0.2],
        1e-14,
        20_000,
    )
    .ok_or(StatsError::NoFit { model: "Gumbel" })?;
    let theta = [m.x[0], m.x[1].exp()];
    let h = [1e-4, 1e-4 * theta[1]];
    let std_cov = hessian(|p| nll(x, p[0], p[1]), &theta, &h).and_then(|hh| inverse_spd(&hh));
    let s = data.spread;
    let covariance = std_cov.as_ref().map(|c| {
        [
            [c[0][0] * s * s, c[0][1] * s * s],
            [c[1][0] * s * s, c[1][1] * s * s],
        ]
    });
    Ok(GumbelFit {
        location: data.to_level(theta[0]),
        scale: s * theta[1],
        log_likelihood: data.log_likelihood(-m.f),
        n_maxima: data.n(),
        std_errors: covariance.map(|c| [c[0][0].sqrt(), c[1][1].sqrt()]),
        covariance,
        std_theta: theta,
        std_cov,
        data,
    })
}

impl GumbelFit {
    /// Quantile z_p = μ - β ln(-ln p) (NIST e-Handbook §1.3.6.6.16).
    pub fn quantile(&self, p: f64) -> Option<f64> {
        (p > 0.0 && p < 1.0).then(|| self.location - self.scale * (-p.ln()).ln())
    }

    /// Level exceeded once in `n_switchings` with `events_per_block` switchings per block
    /// (Coles 2001, eq. 3.4 with ξ = 0: z = μ - β ln y), with 95 % intervals by the delta
    /// method and by profile likelihood.
    pub fn return_level(
        &self,
        n_switchings: f64,
        events_per_block: usize,
    ) -> Result<ReturnLevel, StatsError> {
        let ly = ln_y_for(n_switchings, events_per_block)?;
        let level_std = |t: &[f64]| t[0] - t[1] * ly;
        let z_hat = level_std(&self.std_theta);
        let se_std = self
            .std_cov
            .as_ref()
            .and_then(|c| delta_std_error(level_std, &self.std_theta, c));
        let level = self.data.to_level(z_hat);
        let se = se_std.map(|s| s * self.data.spread);
        let x = &self.data.values;
        let nll_min = nll(x, self.std_theta[0], self.std_theta[1]);
        // With the level z held fixed, μ = z + β ln y.
        let (lo, hi) = profile_interval(
            |z, r| {
                let beta = r[0].exp();
                nll(x, z + beta * ly, beta)
            },
            nll_min,
            z_hat,
            &[self.std_theta[1].ln()],
            &[0.1],
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

impl MaximaModel for GumbelFit {
    fn neg_ln_cdf(&self, x: f64) -> f64 {
        (-(x - self.location) / self.scale).exp()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic Gumbel sample by inversion at the plotting positions (i - 1/2)/n.
    fn gumbel_sample(mu: f64, beta: f64, n: usize) -> Vec<f64> {
        (0..n)
            .map(|i| {
                let p = (i as f64 + 0.5) / n as f64;
                mu - beta * (-p.ln()).ln()
            })
            .collect()
    }

    #[test]
    fn recovers_parameters_and_nist_moments() {
        // NIST/SEMATECH e-Handbook §1.3.6.6.16: mean = μ + 0.5772 β, sd = π β / √6.
        let (mu, beta) = (40.0, 2.5);
        let x = gumbel_sample(mu, beta, 4000);
        let n = x.len() as f64;
        let mean = x.iter().sum::<f64>() / n;
        let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        assert!((mean - (mu + EULER_GAMMA * beta)).abs() < 0.01);
        assert!((sd - std::f64::consts::PI * beta / 6f64.sqrt()).abs() < 0.02);
        let fit = fit_gumbel(&x).unwrap();
        let se = fit.std_errors.unwrap();
        assert!((fit.location - mu).abs() < 2.0 * se[0], "{fit:?}");
        assert!((fit.scale - beta).abs() < 2.0 * se[1], "{fit:?}");
        // Quantile formula x_p = μ - β ln(-ln p) (NIST) at p = 0.99: -ln(-ln 0.99) = 4.600149226776579 (Python math).
        assert!(
            (fit.quantile(0.99).unwrap() - fit.location - fit.scale * 4.600_149_226_776_579).abs()
                < 1e-9
        );
    }

    #[test]
    fn too_few_and_flat_data_are_errors() {
        let x = gumbel_sample(1.0, 1.0, 12);
        let e = fit_gumbel(&x).unwrap_err();
        assert_eq!(
            e.to_string(),
            "12 block maxima; at least 15 are needed for an extreme-value fit"
        );
        assert!(matches!(
            fit_gumbel(&[3.0; 20]),
            Err(StatsError::NoSpread { .. })
        ));
    }
}
