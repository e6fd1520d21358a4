//! Comparison of builds: the same measurements on two or more variants (with and without a
//! clamp, two layouts, two parts), differences of medians with a rank test, and verdict
//! lines a designer can paste into a review.

use std::path::PathBuf;

use crate::document::{CompareDoc, Difference, MeasureDoc, VariantDoc, COMPARE_SCHEMA};
use crate::pipeline::{self, Settings, METRICS};
use crate::stats;

/// One variant to compare: a label and its inputs.
#[derive(Debug, Clone)]
pub struct Variant {
    pub label: String,
    pub inputs: Vec<PathBuf>,
}

/// Metrics the rank tests cover: the stress, the release-time cost and the ringing.
const COMPARED: &[&str] = &[
    "switch_stress_v",
    "decay_time_s",
    "settle_time_s",
    "spike_width_s",
    "ring_freq_hz",
    "energy_j",
    "clamp_energy_j",
];

/// Measures every variant and compares each with the baseline (the first variant unless
/// `baseline` names another).
pub fn compare(
    variants: &[Variant],
    baseline: Option<&str>,
    settings: &Settings,
    progress: &(dyn Fn() + Sync),
) -> (CompareDoc, Vec<MeasureDoc>) {
    let docs: Vec<MeasureDoc> = variants
        .iter()
        .map(|v| pipeline::measure_inputs(&v.inputs, settings, progress))
        .collect();
    let doc = compare_docs(variants, &docs, baseline);
    (doc, docs)
}

/// The comparison of already measured variants.
pub fn compare_docs(variants: &[Variant], docs: &[MeasureDoc], baseline: Option<&str>) -> CompareDoc {
    let base = baseline
        .and_then(|b| variants.iter().position(|v| v.label == b))
        .unwrap_or(0);
    let variant_docs: Vec<VariantDoc> = variants
        .iter()
        .zip(docs)
        .map(|(v, d)| VariantDoc {
            label: v.label.clone(),
            inputs: v.inputs.iter().map(|p| p.display().to_string()).collect(),
            n_events: d.summary.n_events,
            n_clipped: d.summary.n_clipped,
            metrics: d.summary.metrics.clone(),
            worst: d.summary.worst.clone(),
            errors: d.errors.clone(),
        })
        .collect();
    let mut differences = Vec::new();
    let values = |d: &MeasureDoc, name: &str| -> Vec<f64> {
        let get = METRICS
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, g)| *g)
            .expect("compared metrics are listed in METRICS");
        pipeline::metric_values(d.captures.iter().flat_map(|c| c.events.iter()), get)
    };
    for (k, v) in variants.iter().enumerate() {
        if k == base || docs.get(base).is_none() {
            continue;
        }
        for metric in COMPARED {
            let a = values(&docs[base], metric);
            let b = values(&docs[k], metric);
            if a.is_empty() && b.is_empty() {
                continue;
            }
            let test = stats::mann_whitney_u(&a, &b);
            let median_a = stats::median(&a);
            let median_b = stats::median(&b);
            differences.push(Difference {
                metric: metric.to_string(),
                a: variants[base].label.clone(),
                b: v.label.clone(),
                median_a,
                median_b,
                median_diff: median_a.zip(median_b).map(|(x, y)| y - x),
                u: test.as_ref().map(|t| t.u),
                p_value: test.as_ref().map(|t| t.p_value),
            });
        }
    }
    let verdicts = verdicts(&variant_docs, base);
    CompareDoc {
        schema: COMPARE_SCHEMA,
        baseline: variants.get(base).map(|v| v.label.clone()).unwrap_or_default(),
        variants: variant_docs,
        differences,
        verdicts,
    }
}

/// "zener: worst switch stress 52.3 V vs 412 V unclamped (-87 %); decay 0.26 ms vs 0.05 ms".
/// The trade-off is stress against `decay_time_s`, never `settle_time_s`: a diode plateau
/// sits inside the settle band and would hide the slow release.
fn verdicts(variants: &[VariantDoc], base: usize) -> Vec<String> {
    let Some(b) = variants.get(base) else {
        return Vec::new();
    };
    let worst = |v: &VariantDoc| v.metrics.get("switch_stress_v").and_then(|m| m.max);
    let decay = |v: &VariantDoc| v.metrics.get("decay_time_s").and_then(|m| m.p50);
    let mut out = Vec::new();
    for (k, v) in variants.iter().enumerate() {
        if k == base {
            continue;
        }
        let mut line = format!("{}:", v.label);
        match (worst(v), worst(b)) {
            (Some(x), Some(y)) if y > 0.0 => line.push_str(&format!(
                " worst switch stress {} vs {} {} ({:+.0} %)",
                fmt_v(x),
                fmt_v(y),
                b.label,
                (x - y) / y * 100.0
            )),
            (Some(x), _) => line.push_str(&format!(" worst switch stress {}", fmt_v(x))),
            _ => line.push_str(" no events measured"),
        }
        match (decay(v), decay(b)) {
            (Some(x), Some(y)) => {
                line.push_str(&format!("; decay {} vs {}", fmt_s(x), fmt_s(y)));
                if y > 0.0 && x > 3.0 * y {
                    line.push_str(&format!(
                        " ({:.0}x longer: the load releases later)",
                        x / y
                    ));
                }
            }
            (Some(x), None) => line.push_str(&format!("; decay {}", fmt_s(x))),
            _ => {}
        }
        out.push(line);
    }
    out
}

fn fmt_v(v: f64) -> String {
    if v.abs() >= 100.0 {
        format!("{v:.0} V")
    } else {
        format!("{v:.1} V")
    }
}

fn fmt_s(s: f64) -> String {
    let a = s.abs();
    if a >= 1.0 {
        format!("{s:.2} s")
    } else if a >= 1e-3 {
        format!("{:.2} ms", s * 1e3)
    } else if a >= 1e-6 {
        format!("{:.1} us", s * 1e6)
    } else {
        format!("{:.0} ns", s * 1e9)
    }
}
