//! Statistics over many events: summaries, extreme-value projection, rating margin and
//! variant comparison. Functions take slices and return plain structs; no I/O.

use serde::Serialize;

/// Count, extremes, moments and percentiles of one metric over all events that have it.
/// Percentiles use the linear definition (Hyndman & Fan 1996, type 7; numpy's default).
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
