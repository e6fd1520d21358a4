//! The serialisable results of each command: the JSON contracts of DESIGN.md
//! (`kickscan.measure/1`, `kickscan.inspect/1`). Fields may be added, never changed in
//! meaning without a new schema version.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::measure::{Event, Polarity};
use crate::stats::MetricSummary;

pub const MEASURE_SCHEMA: &str = "kickscan.measure/1";
pub const INSPECT_SCHEMA: &str = "kickscan.inspect/1";

/// One input that could not be processed.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FileError {
    pub file: String,
    pub error: String,
}

/// `kickscan measure --json`.
#[derive(Debug, Clone, Serialize)]
pub struct MeasureDoc {
    pub schema: &'static str,
    pub captures: Vec<CaptureDoc>,
    pub summary: Summary,
    pub errors: Vec<FileError>,
}

/// One capture's events.
#[derive(Debug, Clone, Serialize)]
pub struct CaptureDoc {
    pub file: String,
    /// Variant label (`--label`, or the variant in `compare`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    pub format: String,
    pub sample_interval_s: f64,
    pub n_samples: usize,
    pub t0_s: f64,
    pub signal: String,
    pub current: Option<String>,
    pub polarity: Polarity,
    pub v_on: f64,
    pub v_off: f64,
    pub warnings: Vec<String>,
    pub events: Vec<Event>,
}

/// The event that stressed the switch most.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Worst {
    pub file: String,
    pub index: usize,
    pub t_edge_s: f64,
    pub peak_v: f64,
    pub switch_stress_v: f64,
}

/// Margin against the switch rating (`--rating`); the derating line is 80 % of the rating
/// (common practice).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RatingMargin {
    pub rating_v: f64,
    pub derated_v: f64,
    /// Worst switch stress as a fraction of the rating.
    pub max_fraction: f64,
    pub n_over: usize,
    pub n_over_derated: usize,
    /// Probability per switching of exceeding the rating, from the extreme-value fit
    /// where one exists.
    pub p_over_per_event: Option<f64>,
}

/// The summary block over every event of every capture.
#[derive(Debug, Clone, Serialize, Default)]
pub struct Summary {
    pub n_events: usize,
    pub n_clipped: usize,
    pub metrics: BTreeMap<String, MetricSummary>,
    pub worst: Option<Worst>,
    pub extreme_value: Option<serde_json::Value>,
    pub rating: Option<RatingMargin>,
}

/// `kickscan inspect --json`.
#[derive(Debug, Clone, Serialize)]
pub struct InspectDoc {
    pub schema: &'static str,
    pub files: Vec<InspectFile>,
    pub errors: Vec<FileError>,
}

#[derive(Debug, Clone, Serialize)]
pub struct InspectFile {
    pub file: String,
    pub format: String,
    pub sample_interval_s: f64,
    pub n_samples: usize,
    pub t0_s: f64,
    pub channels: Vec<InspectChannel>,
    pub metadata: Vec<(String, String)>,
    pub notes: Vec<String>,
    pub warnings: Vec<String>,
}

#[derive(Debug, Clone, Serialize)]
pub struct InspectChannel {
    pub name: String,
    pub unit: String,
    pub min: Option<f64>,
    pub max: Option<f64>,
    /// Digitiser rails seen (values repeated at the extreme codes), where any.
    pub adc_min_v: Option<f64>,
    pub adc_max_v: Option<f64>,
}

pub const COMPARE_SCHEMA: &str = "kickscan.compare/1";

/// One variant of `compare`.
#[derive(Debug, Clone, Serialize)]
pub struct VariantDoc {
    pub label: String,
    pub inputs: Vec<String>,
    pub n_events: usize,
    pub n_clipped: usize,
    pub metrics: BTreeMap<String, MetricSummary>,
    pub worst: Option<Worst>,
    pub errors: Vec<FileError>,
}

/// A metric of one variant against the baseline, with a rank test.
#[derive(Debug, Clone, Serialize)]
pub struct Difference {
    pub metric: String,
    /// Baseline label.
    pub a: String,
    /// Compared variant label.
    pub b: String,
    pub median_a: Option<f64>,
    pub median_b: Option<f64>,
    /// `median_b - median_a`.
    pub median_diff: Option<f64>,
    /// Mann-Whitney U of `a` against `b`, two-sided.
    pub u: Option<f64>,
    pub p_value: Option<f64>,
}

/// `kickscan compare --json`.
#[derive(Debug, Clone, Serialize)]
pub struct CompareDoc {
    pub schema: &'static str,
    pub baseline: String,
    pub variants: Vec<VariantDoc>,
    pub differences: Vec<Difference>,
    pub verdicts: Vec<String>,
}
