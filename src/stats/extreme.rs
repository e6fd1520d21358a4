//! The extreme-value projection of a metric (switch stress, usually): how high it will go over
//! a lifetime of switchings, from the events seen on the bench.

use serde::ser::SerializeMap;
use serde::{Serialize, Serializer};

use super::special::{chi2_1_sf, CHI2_1_95};
use super::{
    fit_gev, fit_gumbel, fit_pot, GevFit, GumbelFit, MaximaModel, PotFit, ReturnLevel, StatsError,
};

/// Maxima of consecutive blocks of `block_len` values, in order. Non-finite values are left
/// out of their block; a block with none finite is skipped; an incomplete last block is
/// dropped, because its maximum is over fewer events than the model assumes.
pub fn block_maxima(values_in_order: &[f64], block_len: usize) -> Vec<f64> {
    if block_len == 0 {
        return Vec::new();
    }
    values_in_order
        .chunks_exact(block_len)
        .filter_map(|block| {
            block
                .iter()
                .copied()
                .filter(|v| v.is_finite())
                .max_by(f64::total_cmp)
        })
        .collect()
}

/// Probability per switching of exceeding `level`, from a model of maxima over blocks of `m`
/// switchings: P(max ≤ x) = G(x) = (1 - p)^m, so p = 1 - G(x)^(1/m), computed as
/// -expm1(ln G / m) to stay exact for the tiny probabilities a rating check meets.
/// None when m is 0 or the level is not a number.
pub fn p_exceed_per_event<M: MaximaModel>(fit: &M, level: f64, m: usize) -> Option<f64> {
    if m == 0 || level.is_nan() {
        return None;
    }
    let t = fit.neg_ln_cdf(level);
    if t == f64::INFINITY {
        return Some(1.0);
    }
    Some(-(-t / m as f64).exp_m1()).filter(|p| p.is_finite())
}

/// `{"level", "lower", "upper"}` of one lifetime in the JSON contract.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReturnLevelEntry {
    pub level: f64,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

/// Return levels keyed by the number of switchings, serialised as a JSON object in the order
/// the lifetimes were asked for (a sorted map would put "1000000" before "2000").
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReturnLevels(pub Vec<(String, ReturnLevelEntry)>);

impl Serialize for ReturnLevels {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut map = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

/// A fitted model with its own return levels, for the sub-blocks of the report.
#[derive(Debug, Clone, Serialize)]
pub struct ModelBlock<F: Serialize> {
    #[serde(flatten)]
    pub fit: F,
    pub return_levels: Vec<ReturnLevel>,
    /// Probability per switching of exceeding the rating under this model.
    pub p_exceed_rating_per_event: Option<f64>,
}

/// How the reported model was chosen.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ModelChoice {
    pub rule: &'static str,
    /// Deviance 2 (ℓ_GEV - ℓ_Gumbel).
    pub deviance: Option<f64>,
    /// P(χ²₁ > deviance).
    pub p_value: Option<f64>,
}

#[derive(Debug, Clone, Serialize)]
pub struct ExtremeValueReport {
    /// "gev", "gumbel", "generalized pareto" (peaks over threshold), or null when the data
    /// allow no fit.
    pub model: Option<&'static str>,
    /// μ of the block-maxima model, or the threshold u for peaks over threshold.
    pub location: Option<f64>,
    pub scale: Option<f64>,
    /// ξ in Coles' convention (ξ < 0: bounded tail); 0 for Gumbel.
    pub shape: Option<f64>,
    pub events_per_block: usize,
    pub n_events: usize,
    pub n_blocks: usize,
    pub return_levels: ReturnLevels,
    pub interval_method: &'static str,
    /// Upper end point of the chosen model when its tail is bounded.
    pub upper_end_point: Option<f64>,
    pub rating: Option<f64>,
    /// Probability per switching of exceeding the rating under the chosen model.
    pub p_exceed_rating_per_event: Option<f64>,
    pub model_choice: ModelChoice,
    pub warnings: Vec<String>,
    pub gumbel: Option<ModelBlock<GumbelFit>>,
    pub gev: Option<ModelBlock<GevFit>>,
    pub pot: Option<ModelBlock<PotFit>>,
}

const MODEL_RULE: &str = "GEV when the likelihood-ratio test rejects Gumbel (xi = 0) at 5 % \
     (deviance > 3.84, chi-squared with 1 degree of freedom; Coles 2001, section 3.4), else \
     Gumbel; peaks over threshold when there are too few blocks";

/// The model the report speaks for, borrowed from its fit.
struct Chosen<'a> {
    name: &'static str,
    location: f64,
    scale: f64,
    shape: f64,
    end: Option<f64>,
    levels: &'a [ReturnLevel],
    p_rating: Option<f64>,
}

fn lifetime_key(n: f64) -> String {
    format!("{n}")
}

fn entry(rl: &ReturnLevel) -> ReturnLevelEntry {
    let (lower, upper) = rl
        .profile
        .as_ref()
        .map_or((None, None), |p| (p.lower, p.upper));
    ReturnLevelEntry {
        level: rl.level,
        lower,
        upper,
    }
}

fn levels_of<F>(
    lifetimes: &[f64],
    what: &str,
    warnings: &mut Vec<String>,
    mut f: F,
) -> Vec<ReturnLevel>
where
    F: FnMut(f64) -> Result<ReturnLevel, StatsError>,
{
    let mut out = Vec::new();
    for &n in lifetimes {
        match f(n) {
            Ok(rl) => out.push(rl),
            Err(e) => warnings.push(format!("{what}: no return level for {n} switchings: {e}")),
        }
    }
    out
}

/// A fitted model's block of the report: its return levels for `lifetimes` and its
/// exceedance probability of `rating`, with the warnings met on the way; a fit that failed
/// gives no block and the warning `failed` makes of its error (if any).
fn model_block<F: Serialize>(
    fitted: Result<F, StatsError>,
    (lifetimes, what, rating): (&[f64], &str, Option<f64>),
    level: impl Fn(&F, f64) -> Result<ReturnLevel, StatsError>,
    p_exceed: impl Fn(&F, f64) -> Option<f64>,
    failed: impl FnOnce(StatsError) -> Option<String>,
) -> (Option<ModelBlock<F>>, Vec<String>) {
    let mut warnings = Vec::new();
    let block = match fitted {
        Ok(fit) => {
            let return_levels = levels_of(lifetimes, what, &mut warnings, |n| level(&fit, n));
            let p = rating.and_then(|r| p_exceed(&fit, r));
            Some(ModelBlock {
                fit,
                return_levels,
                p_exceed_rating_per_event: p,
            })
        }
        Err(e) => {
            warnings.extend(failed(e));
            None
        }
    };
    (block, warnings)
}

/// Fit what the data allow and project: Gumbel and GEV to the maxima of blocks of
/// `block_len` consecutive events, generalized Pareto to the exceedances of the 90th
/// percentile of all events. `lifetimes` are numbers of switchings to project to; `rating`
/// the value whose per-switching exceedance probability is wanted. Never fails: what cannot
/// be fitted is said in `warnings`.
pub fn extreme_value(
    values_in_order: &[f64],
    block_len: usize,
    lifetimes: &[f64],
    rating: Option<f64>,
) -> ExtremeValueReport {
    let maxima = block_maxima(values_in_order, block_len);
    extreme_value_of_maxima(values_in_order, &maxima, block_len, lifetimes, rating)
}

/// [`extreme_value`] with the block maxima given: for blocks the caller formed itself (one
/// capture each, say), `block_len` being the events a block holds on average. The
/// peaks-over-threshold fit still uses every value.
pub fn extreme_value_of_maxima(
    values_in_order: &[f64],
    maxima: &[f64],
    block_len: usize,
    lifetimes: &[f64],
    rating: Option<f64>,
) -> ExtremeValueReport {
    let mut warnings = Vec::new();
    let n_events = values_in_order.iter().filter(|v| v.is_finite()).count();
    let maxima = maxima.to_vec();
    if block_len == 0 {
        warnings.push("events per block must be at least 1; no block-maxima fit".to_string());
    }
    let rating = rating.filter(|r| r.is_finite());
    let m = block_len;

    // The three fits and their profile-likelihood intervals are independent, and on a
    // large batch they are the last step after the captures: run them side by side. Their
    // warnings are kept in the order the report has always listed them.
    let gumbel_block = || {
        model_block(
            fit_gumbel(&maxima),
            (lifetimes, "Gumbel", rating),
            |fit, n| fit.return_level(n, m),
            |fit, r| p_exceed_per_event(fit, r, m),
            |e| (block_len > 0).then(|| e.to_string()),
        )
    };
    let gev_block = || {
        model_block(
            fit_gev(&maxima),
            (lifetimes, "GEV", rating),
            |fit, n| fit.return_level(n, m),
            |fit, r| p_exceed_per_event(fit, r, m),
            |e| match e {
                StatsError::TooFew { .. } | StatsError::NoSpread { .. } => None,
                e => Some(e.to_string()),
            },
        )
    };
    let pot_block = || {
        model_block(
            fit_pot(values_in_order, None),
            (lifetimes, "peaks over threshold", rating),
            |fit, n| fit.return_level(n),
            |fit, r| fit.p_exceed_per_event(r),
            |e| Some(format!("peaks over threshold: {e}")),
        )
    };
    let ((gumbel, w_gumbel), ((gev, w_gev), (pot, w_pot))) =
        rayon::join(gumbel_block, || rayon::join(gev_block, pot_block));
    warnings.extend(w_gumbel.into_iter().chain(w_gev).chain(w_pot));

    // Model choice by the likelihood-ratio (deviance) test, Coles 2001 §2.6.6 and §3.4.
    let deviance = gumbel
        .as_ref()
        .zip(gev.as_ref())
        .map(|(g, v)| (2.0 * (v.fit.log_likelihood - g.fit.log_likelihood)).max(0.0));
    let model_choice = ModelChoice {
        rule: MODEL_RULE,
        deviance,
        p_value: deviance.map(chi2_1_sf),
    };

    if let Some(v) = &gev {
        if v.fit.shape <= -0.5 {
            warnings.push(format!(
                "GEV shape {:.3} is at or below -0.5, where the usual asymptotic standard \
                 errors do not hold (Smith 1985); treat its intervals with care",
                v.fit.shape
            ));
        }
        if v.fit.covariance.is_none() {
            warnings.push(
                "GEV fit: the observed information is not positive definite; \
                           no standard errors"
                    .to_string(),
            );
        }
    }
    // A Gumbel projection above the GEV's finite end point is a level the better-fitting
    // bounded model says can never occur: say so, as a design review would be misled.
    if let (Some(g), Some(v)) = (&gumbel, &gev) {
        if let Some(end) = v.fit.upper_end_point {
            for rl in &g.return_levels {
                if rl.level > end {
                    warnings.push(format!(
                        "Gumbel projection for {} switchings ({:.6}) lies above the GEV upper \
                         end point ({:.6}); the fitted GEV tail is bounded there",
                        lifetime_key(rl.n_switchings),
                        rl.level,
                        end
                    ));
                }
            }
        }
    }

    let use_gev = deviance.is_some_and(|d| d > CHI2_1_95) || (gumbel.is_none() && gev.is_some());
    let mut report = ExtremeValueReport {
        model: None,
        location: None,
        scale: None,
        shape: None,
        events_per_block: block_len,
        n_events,
        n_blocks: maxima.len(),
        return_levels: ReturnLevels::default(),
        interval_method: super::likelihood::PROFILE_LIKELIHOOD,
        upper_end_point: None,
        rating,
        p_exceed_rating_per_event: None,
        model_choice,
        warnings: Vec::new(),
        gumbel: None,
        gev: None,
        pot: None,
    };
    let chosen = if use_gev {
        gev.as_ref().map(|v| {
            let f = &v.fit;
            Chosen {
                name: "gev",
                location: f.location,
                scale: f.scale,
                shape: f.shape,
                end: f.upper_end_point,
                levels: &v.return_levels,
                p_rating: v.p_exceed_rating_per_event,
            }
        })
    } else if let Some(g) = &gumbel {
        let f = &g.fit;
        Some(Chosen {
            name: "gumbel",
            location: f.location,
            scale: f.scale,
            shape: 0.0,
            end: None,
            levels: &g.return_levels,
            p_rating: g.p_exceed_rating_per_event,
        })
    } else {
        pot.as_ref().map(|p| {
            let f = &p.fit;
            Chosen {
                name: "generalized pareto",
                location: f.threshold,
                scale: f.scale,
                shape: f.shape,
                end: f.upper_end_point,
                levels: &p.return_levels,
                p_rating: p.p_exceed_rating_per_event,
            }
        })
    };
    if let Some(Chosen {
        name,
        location,
        scale,
        shape,
        end,
        levels,
        p_rating,
    }) = chosen
    {
        report.model = Some(name);
        report.location = Some(location);
        report.scale = Some(scale);
        report.shape = Some(shape);
        report.upper_end_point = end;
        report.p_exceed_rating_per_event = p_rating;
        report.return_levels = ReturnLevels(
            levels
                .iter()
                .map(|rl| (lifetime_key(rl.n_switchings), entry(rl)))
                .collect(),
        );
        for rl in levels {
            let (lo, hi) = rl
                .profile
                .as_ref()
                .map_or((None, None), |p| (p.lower, p.upper));
            if lo.is_none() || hi.is_none() {
                warnings.push(format!(
                    "{name}: the profile likelihood does not bound the level for {} switchings \
                     on {} side",
                    lifetime_key(rl.n_switchings),
                    if hi.is_none() {
                        "the upper"
                    } else {
                        "the lower"
                    }
                ));
            }
        }
    } else {
        warnings.push("too few events for any extreme-value fit; no projection".to_string());
    }
    report.warnings = warnings;
    report.gumbel = gumbel;
    report.gev = gev;
    report.pot = pot;
    report
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_maxima_drops_partial_block_and_non_finite() {
        let v = [1.0, 5.0, f64::NAN, 2.0, f64::NAN, f64::NAN, 7.0];
        // blocks [1, 5], [NaN, 2], [NaN, NaN]; 7 is an incomplete block
        assert_eq!(block_maxima(&v, 2), vec![5.0, 2.0]);
        assert!(block_maxima(&v, 0).is_empty());
    }

    #[test]
    fn too_few_blocks_reports_no_number() {
        let v: Vec<f64> = (0..120).map(|i| ((i * 37) % 101) as f64).collect();
        // 120 events in blocks of 10: 12 maxima; 12 exceedances of the 90th percentile
        let r = extreme_value(&v, 10, &[1e6], Some(200.0));
        assert_eq!(r.model, None);
        assert!(r.return_levels.0.is_empty());
        assert!(
            r.warnings
                .iter()
                .any(|w| w == "12 block maxima; at least 15 are needed for an extreme-value fit"),
            "{:?}",
            r.warnings
        );
        assert_eq!(r.p_exceed_rating_per_event, None);
    }

    #[test]
    fn return_levels_serialise_in_the_order_asked() {
        let r = ReturnLevels(vec![
            (
                "2000".into(),
                ReturnLevelEntry {
                    level: 1.0,
                    lower: None,
                    upper: Some(2.0),
                },
            ),
            (
                "1000000".into(),
                ReturnLevelEntry {
                    level: 3.0,
                    lower: Some(2.5),
                    upper: None,
                },
            ),
        ]);
        let s = serde_json::to_string(&r).unwrap();
        assert_eq!(
            s,
            r#"{"2000":{"level":1.0,"lower":null,"upper":2.0},"1000000":{"level":3.0,"lower":2.5,"upper":null}}"#
        );
    }
}
