//! Peaks over threshold: the generalized Pareto distribution fitted by maximum likelihood to
//! the exceedances over a high threshold u (Coles 2001, ch. 4):
//! H(y) = 1 - (1 + ξ y/σ)^(-1/ξ), y = x - u > 0, with the exponential limit at ξ = 0.

use super::above;
use serde::Serialize;

use super::likelihood::{
    delta_interval, delta_std_error, profile_interval, Interval, PROFILE_LIKELIHOOD,
};
use super::optimize::{hessian, inverse_spd, nelder_mead, Minimum};
use super::summary::{quantile_type7, sorted_finite};
use super::{ReturnLevel, StatsError, MIN_EXTREMES};

const XI_ZERO: f64 = 1e-9;

/// Default threshold: the 90th percentile of the values (type 7), a common first choice
/// before a mean-residual-life check (Coles 2001, §4.3.1).
pub const DEFAULT_THRESHOLD_PERCENTILE: f64 = 0.90;

/// With many events the default threshold is raised until at most this many values exceed
/// it: a higher threshold only sharpens the tail approximation, and the profile-likelihood
/// search stays fast on captures with millions of switchings.
pub const MAX_DEFAULT_EXCEEDANCES: usize = 2000;

#[derive(Debug, Clone, Serialize)]
pub struct PotFit {
    pub threshold: f64,
    /// Number of values the exceedances were taken from.
    pub n_values: usize,
    pub n_exceedances: usize,
    /// ζ_u: fraction of the values above the threshold.
    pub exceedance_rate: f64,
    pub scale: f64,
    /// ξ, same sign convention as the GEV shape (scipy.stats.genpareto's c is +ξ).
    pub shape: f64,
    pub log_likelihood: f64,
    /// Covariance of (scale, shape) from the inverse observed information.
    pub covariance: Option<[[f64; 2]; 2]>,
    pub std_errors: Option<[f64; 2]>,
    /// u - σ/ξ when ξ < 0.
    pub upper_end_point: Option<f64>,
    #[serde(skip)]
    y_scaled: Vec<f64>,
    #[serde(skip)]
    unit: f64,
    #[serde(skip)]
    std_theta: [f64; 2],
    #[serde(skip)]
    std_cov: Option<Vec<Vec<f64>>>,
}

/// Negative log-likelihood of (σ, ξ) for exceedances y (Coles 2001, eqs. 4.10 and 4.11).
/// ξ ≤ -1 is refused (unbounded likelihood).
pub(crate) fn nll(y: &[f64], sigma: f64, xi: f64) -> f64 {
    if !above(sigma, 0.0) || !above(xi, -1.0) || !xi.is_finite() {
        return f64::INFINITY;
    }
    let mut s = y.len() as f64 * sigma.ln();
    if xi.abs() < XI_ZERO {
        s += y.iter().sum::<f64>() / sigma;
    } else {
        let a = 1.0 + 1.0 / xi;
        // A product, not a division a point (see `gev::nll`).
        let xi_over_sigma = xi / sigma;
        for &v in y {
            let arg = xi_over_sigma * v;
            if !above(arg, -1.0) {
                return f64::INFINITY;
            }
            s += a * arg.ln_1p();
        }
    }
    if s.is_nan() {
        f64::INFINITY
    } else {
        s
    }
}

/// Maximum-likelihood GPD fit to exceedances `y` (each > 0, in the units of the data).
/// The exceedances are divided by their mean first so the optimiser works on numbers of order
/// one (σ scales with the data, ξ does not).
fn fit_exceedances(y: &[f64]) -> Result<(Vec<f64>, f64, Minimum), StatsError> {
    let unit = y.iter().sum::<f64>() / y.len().max(1) as f64;
    if !above(unit, 0.0) || !unit.is_finite() {
        return Err(StatsError::NoSpread {
            what: "exceedances",
        });
    }
    let ys: Vec<f64> = y.iter().map(|v| v / unit).collect();
    let f = |p: &[f64]| nll(&ys, p[0].exp(), p[1]);
    let mut best: Option<Minimum> = None;
    // the exponential fit (σ = mean, ξ = 0) is the natural start
    for xi0 in [0.0, -0.2, 0.2] {
        if let Some(m) = nelder_mead(f, &[0.0, xi0], &[0.2, 0.1], 1e-14, 20_000) {
            if best.as_ref().is_none_or(|b| m.f < b.f) {
                best = Some(m);
            }
        }
    }
    let m = best.ok_or(StatsError::NoFit {
        model: "generalized Pareto",
    })?;
    Ok((ys, unit, m))
}

/// Peaks-over-threshold fit. `threshold` None means the 90th percentile of the finite values,
/// raised to leave at most `MAX_DEFAULT_EXCEEDANCES`; only values strictly above the
/// threshold count. At least 15 exceedances are needed.
pub fn fit_pot(values: &[f64], threshold: Option<f64>) -> Result<PotFit, StatsError> {
    let sorted = sorted_finite(values);
    let u = match threshold {
        Some(u) if u.is_finite() => u,
        Some(u) => {
            return Err(StatsError::BadArgument(format!(
                "threshold {u} is not a number"
            )))
        }
        None => {
            let p90 = quantile_type7(&sorted, DEFAULT_THRESHOLD_PERCENTILE).ok_or(
                StatsError::TooFew {
                    have: 0,
                    need: MIN_EXTREMES,
                    what: "exceedances",
                },
            )?;
            // the value with MAX_DEFAULT_EXCEEDANCES values above it, where there are more
            let capped = sorted
                .len()
                .checked_sub(MAX_DEFAULT_EXCEEDANCES + 1)
                .and_then(|i| sorted.get(i))
                .copied();
            capped.map_or(p90, |c| c.max(p90))
        }
    };
    let y: Vec<f64> = sorted.iter().filter(|&&v| v > u).map(|v| v - u).collect();
    if y.len() < MIN_EXTREMES {
        return Err(StatsError::TooFew {
            have: y.len(),
            need: MIN_EXTREMES,
            what: "exceedances",
        });
    }
    let (ys, unit, m) = fit_exceedances(&y)?;
    let theta = [m.x[0].exp(), m.x[1]];
    let std_cov = hessian(|p| nll(&ys, p[0], p[1]), &theta, &[1e-4 * theta[0], 1e-4])
        .and_then(|h| inverse_spd(&h));
    let covariance = std_cov.as_ref().map(|c| {
        [
            [c[0][0] * unit * unit, c[0][1] * unit],
            [c[1][0] * unit, c[1][1]],
        ]
    });
    let scale = theta[0] * unit;
    let shape = theta[1];
    let k = y.len();
    Ok(PotFit {
        threshold: u,
        n_values: sorted.len(),
        n_exceedances: k,
        exceedance_rate: k as f64 / sorted.len() as f64,
        scale,
        shape,
        log_likelihood: -m.f - k as f64 * unit.ln(),
        std_errors: covariance.map(|c| [c[0][0].sqrt(), c[1][1].sqrt()]),
        covariance,
        upper_end_point: (shape < 0.0).then(|| u - scale / shape),
        y_scaled: ys,
        unit,
        std_theta: theta,
        std_cov,
    })
}

/// (z - u) for the N-event level: σ/ξ [(N ζ)^ξ - 1], or σ ln(N ζ) at ξ = 0.
fn excess_level(sigma: f64, xi: f64, ln_n_zeta: f64) -> f64 {
    if xi.abs() < XI_ZERO {
        sigma * ln_n_zeta
    } else {
        sigma / xi * (xi * ln_n_zeta).exp_m1()
    }
}

impl PotFit {
    /// Level exceeded on average once in `n_events` events, z_N = u + σ/ξ [(N ζ_u)^ξ - 1]
    /// (Coles 2001, eq. 4.13), with a delta-method interval that includes the uncertainty of
    /// ζ_u, Var ζ_u = ζ_u (1 - ζ_u)/n (Coles 2001, §4.3.3), and a profile-likelihood interval
    /// with ζ_u held at its estimate. An error when N ζ_u ≤ 1: that level lies below the
    /// threshold, outside what the tail model describes.
    pub fn return_level(&self, n_events: f64) -> Result<ReturnLevel, StatsError> {
        let zeta = self.exceedance_rate;
        let n_zeta = n_events * zeta;
        if !above(n_zeta, 1.0) || !n_zeta.is_finite() {
            return Err(StatsError::BadArgument(format!(
                "{n_events} events hold fewer than one exceedance of the threshold {}; \
                 the tail model does not describe that level",
                self.threshold
            )));
        }
        let l = n_zeta.ln();
        let [sigma, xi] = self.std_theta;
        let z_hat = excess_level(sigma, xi, l);
        let level = self.threshold + self.unit * z_hat;
        let theta3 = [zeta, sigma, xi];
        let se = self.std_cov.as_ref().and_then(|c| {
            let var_zeta = zeta * (1.0 - zeta) / self.n_values as f64;
            let cov3 = vec![
                vec![var_zeta, 0.0, 0.0],
                vec![0.0, c[0][0], c[0][1]],
                vec![0.0, c[1][0], c[1][1]],
            ];
            delta_std_error(
                |t| excess_level(t[1], t[2], (n_events * t[0]).ln()),
                &theta3,
                &cov3,
            )
        });
        let ys = &self.y_scaled;
        let nll_min = nll(ys, sigma, xi);
        // With the excess level z held fixed, σ = z ξ / [(N ζ)^ξ - 1] (σ = z / ln(N ζ) at ξ = 0).
        let (lo, hi) = profile_interval(
            |z, r| {
                let xi = r[0];
                let unit_excess = excess_level(1.0, xi, l);
                if !above(z, 0.0) || !above(unit_excess, 0.0) {
                    return f64::INFINITY;
                }
                nll(ys, z / unit_excess, xi)
            },
            nll_min,
            z_hat,
            &[xi],
            &[0.05],
            se.unwrap_or(0.1),
        );
        let se = se.map(|s| s * self.unit);
        Ok(ReturnLevel {
            n_switchings: n_events,
            level,
            std_error: se,
            delta: delta_interval(level, se),
            profile: Some(Interval {
                method: PROFILE_LIKELIHOOD,
                lower: lo.map(|z| self.threshold + self.unit * z),
                upper: hi.map(|z| self.threshold + self.unit * z),
            }),
        })
    }

    /// Probability per event of exceeding `level`: ζ_u [1 + ξ (x - u)/σ]^(-1/ξ) (Coles 2001,
    /// eq. 4.12); zero beyond a finite end point. None at or below the threshold, where the
    /// tail model says nothing.
    pub fn p_exceed_per_event(&self, level: f64) -> Option<f64> {
        if !above(level, self.threshold) {
            return None;
        }
        let y = (level - self.threshold) / self.scale;
        let tail = if self.shape.abs() < XI_ZERO {
            (-y).exp()
        } else {
            let arg = self.shape * y;
            if arg > -1.0 {
                (-arg.ln_1p() / self.shape).exp()
            } else {
                0.0
            }
        };
        Some(self.exceedance_rate * tail)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic GPD sample by inversion at (i - 1/2)/n: y = σ/ξ [(1 - p)^(-ξ) - 1].
    fn gpd_sample(sigma: f64, xi: f64, n: usize) -> Vec<f64> {
        (0..n)
            .map(|i| {
                let p = (i as f64 + 0.5) / n as f64;
                sigma / xi * ((1.0 - p).powf(-xi) - 1.0)
            })
            .collect()
    }

    #[test]
    fn recovers_known_parameters() {
        for (sigma, xi) in [(3.0, -0.25), (0.5, 0.2)] {
            let y = gpd_sample(sigma, xi, 4000);
            let fit = fit_pot(&y, Some(0.0)).unwrap();
            let se = fit.std_errors.unwrap();
            assert!((fit.scale - sigma).abs() < 3.0 * se[0], "{fit:?}");
            assert!((fit.shape - xi).abs() < 3.0 * se[1], "{fit:?}");
        }
    }

    #[test]
    fn default_threshold_and_too_few() {
        // 100 values: the 90th percentile leaves 10 exceedances, fewer than 15.
        let v: Vec<f64> = (0..100).map(|i| i as f64).collect();
        let e = fit_pot(&v, None).unwrap_err();
        assert_eq!(
            e.to_string(),
            "10 exceedances; at least 15 are needed for an extreme-value fit"
        );
        // 200 values 0..199: threshold 179.1 (type 7), 20 exceedances
        let v: Vec<f64> = (0..200).map(|i| i as f64).collect();
        let fit = fit_pot(&v, None).unwrap();
        assert!((fit.threshold - 179.1).abs() < 1e-9);
        assert_eq!(fit.n_exceedances, 20);
        assert!((fit.exceedance_rate - 0.1).abs() < 1e-12);
    }

    #[test]
    fn default_threshold_is_raised_for_long_series() {
        // 100 000 distinct values: the 90th percentile would leave 10 000 exceedances; the
        // threshold rises to the value with exactly MAX_DEFAULT_EXCEEDANCES above it.
        let v: Vec<f64> = (0..100_000)
            .map(|i| (i as f64 * 0.618_033_988_75).fract())
            .collect();
        let fit = fit_pot(&v, None).unwrap();
        assert_eq!(fit.n_exceedances, MAX_DEFAULT_EXCEEDANCES);
        assert!((fit.exceedance_rate - 0.02).abs() < 1e-12);
    }

    #[test]
    fn return_level_and_tail_probability_agree() {
        let y = gpd_sample(2.0, 0.1, 2000);
        let x: Vec<f64> = y.iter().map(|v| v + 50.0).collect();
        let fit = fit_pot(&x, Some(50.0)).unwrap();
        let rl = fit.return_level(1e4).unwrap();
        // by definition the N-event level is exceeded with probability 1/N per event
        let p = fit.p_exceed_per_event(rl.level).unwrap();
        assert!((p * 1e4 - 1.0).abs() < 1e-9, "{p}");
        let (lo, hi) = (rl.delta.lower.unwrap(), rl.delta.upper.unwrap());
        assert!(lo < rl.level && rl.level < hi);
        let pr = rl.profile.unwrap();
        assert!(pr.lower.unwrap() < rl.level && rl.level < pr.upper.unwrap());
        assert!(fit.p_exceed_per_event(40.0).is_none());
    }
}

#[cfg(test)]
mod scipy_reference {
    use super::*;

    #[test]
    fn fixed_vector_matches_scipy_genpareto() {
        // scipy 1.17.1: genpareto.fit(Y, floc=0) gives scale 1.16233, c = -0.00636; refined
        // with scipy.optimize.minimize (Nelder-Mead, fatol 1e-13) on the same likelihood:
        // scale = 1.1623334651158586, c (= ξ) = -0.006339101798925359,
        // log-likelihood -22.88180980187392. The likelihood is flat in ξ, so ξ is compared
        // to 2e-4 and the log-likelihood tightly.
        let y = [
            0.12, 0.45, 1.3, 0.07, 2.9, 0.66, 0.31, 1.8, 0.95, 4.2, 0.22, 0.58, 1.1, 0.04, 3.3,
            0.81, 0.39, 2.2, 0.15, 1.55,
        ];
        let fit = fit_pot(&y, Some(0.0)).unwrap();
        assert!(
            (fit.scale - 1.162_333_465_115_858_6).abs() < 1e-4,
            "{fit:?}"
        );
        assert!(
            (fit.shape + 0.006_339_101_798_925_359).abs() < 2e-4,
            "{fit:?}"
        );
        assert!(
            (fit.log_likelihood + 22.881_809_801_873_92).abs() < 1e-8,
            "{fit:?}"
        );
    }
}
