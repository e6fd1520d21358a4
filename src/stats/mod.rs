//! Statistics over many events: summaries, extreme-value projection, rating margin and
//! variant comparison. Functions take slices and return plain structs; no I/O.
//!
//! - [`summarize`]: count, extremes, mean, standard deviation, percentiles of one metric.
//! - [`extreme_value`]: block maxima fitted by Gumbel and GEV, peaks over threshold by the
//!   generalized Pareto distribution, return levels over a number of switchings, the
//!   probability per switching of exceeding a rating (Coles 2001).
//! - [`rating_margin`]: counts and fraction of the switch rating used.
//! - [`mann_whitney_u`], [`compare`]: two variants of one metric.

mod extreme;
mod gev;
mod gpd;
mod gumbel;
mod likelihood;
mod optimize;
mod rank_test;
mod rating;
pub mod special;
mod summary;

use serde::Serialize;
use thiserror::Error;

pub use extreme::{
    block_maxima, extreme_value, extreme_value_of_maxima, p_exceed_per_event, ExtremeValueReport,
    ModelBlock, ModelChoice, ReturnLevelEntry, ReturnLevels,
};
pub use gev::{fit_gev, GevFit};
pub use gpd::{fit_pot, PotFit, DEFAULT_THRESHOLD_PERCENTILE, MAX_DEFAULT_EXCEEDANCES};
pub use gumbel::{fit_gumbel, GumbelFit, EULER_GAMMA};
pub use likelihood::{Interval, ReturnLevel};
pub use rank_test::{compare, mann_whitney_u, Comparison, MannWhitney};
pub use rating::{rating_margin, DERATING_FRACTION};
pub use summary::{median, quantile_type7, summarize};

/// Fewest block maxima or exceedances for an extreme-value fit. Below about 15 the shape
/// parameter is so poorly determined that a projection is a guess (common practice; Coles
/// 2001 fits 65 annual maxima in his first example).
pub const MIN_EXTREMES: usize = 15;

/// Count, extremes, moments and percentiles of one metric over all events that have it.
/// Percentiles use the linear definition (Hyndman & Fan 1996, type 7; numpy's default).
/// `std` is the sample standard deviation (n - 1 in the denominator).
#[derive(Debug, Clone, Serialize, PartialEq, Default)]
pub struct MetricSummary {
    pub n: usize,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub mean: Option<f64>,
    pub std: Option<f64>,
    pub p50: Option<f64>,
    pub p95: Option<f64>,
    pub p99: Option<f64>,
}

#[derive(Debug, Clone, Error, PartialEq)]
pub enum StatsError {
    #[error("{have} {what}; at least {need} are needed for an extreme-value fit")]
    TooFew {
        have: usize,
        need: usize,
        what: &'static str,
    },
    #[error("all {what} are equal; a fit needs values that differ")]
    NoSpread { what: &'static str },
    #[error("the {model} likelihood could not be maximised from any starting point")]
    NoFit { model: &'static str },
    #[error("a sample to compare is empty")]
    EmptySample,
    #[error("{0}")]
    BadArgument(String),
}

/// A distribution fitted to block maxima, through -ln G(x) (which stays accurate far in the
/// upper tail, where G(x) rounds to 1).
pub trait MaximaModel {
    /// -ln G(x): 0 above a finite upper end point, +inf below a finite lower one.
    fn neg_ln_cdf(&self, x: f64) -> f64;
}

/// x > bound, false for NaN: the guards on parameters are written as "not above" so that a
/// NaN never passes one.
pub(crate) fn above(x: f64, bound: f64) -> bool {
    x > bound
}
