//! Comparison of builds: the same measurements on two or more variants (with and without a
//! clamp, two layouts, two parts), differences of medians with a rank test, and verdict
//! lines a designer can paste into a review.

use std::path::PathBuf;

use crate::document::{CompareDoc, Difference, MeasureDoc, VariantDoc, COMPARE_SCHEMA};
use crate::pipeline::{self, Settings, METRICS};
use crate::report::{TraceSketch, VariantData};
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

/// Every variant measured, and their comparison.
pub struct CompareRun {
    pub doc: CompareDoc,
    /// One measurement document per variant, in variant order.
    pub docs: Vec<MeasureDoc>,
    /// Plot sketches per variant (empty unless asked for).
    pub sketches: Vec<Vec<TraceSketch>>,
}

impl CompareRun {
    /// Each variant's median event and distributions, for the comparison plots.
    pub fn variant_data(&self, variants: &[Variant]) -> Vec<VariantData> {
        variants
            .iter()
            .zip(&self.docs)
            .zip(&self.sketches)
            .map(|((v, d), sk)| {
                let refs: Vec<&TraceSketch> = sk.iter().collect();
                VariantData::from_parts(
                    &v.label,
                    &refs,
                    d.captures.iter().flat_map(|c| c.events.iter()),
                )
            })
            .collect()
    }

    /// Every variant's sketches in one list, in variant order.
    pub fn all_sketches(&self) -> Vec<TraceSketch> {
        self.sketches.iter().flatten().cloned().collect()
    }
}

/// Measures every variant (each labelled with its name) and compares each with the baseline
/// (the first variant unless `baseline` names another). With `sketch`, keeps plot sketches.
pub fn compare(
    variants: &[Variant],
    baseline: Option<&str>,
    settings: &Settings,
    sketch: bool,
    progress: &(dyn Fn() + Sync),
) -> CompareRun {
    let mut docs = Vec::new();
    let mut sketches = Vec::new();
    for v in variants {
        let mut s = settings.clone();
        s.label = Some(v.label.clone());
        let (doc, sk) = pipeline::measure_inputs_sketched(&v.inputs, &s, sketch, progress);
        docs.push(doc);
        sketches.push(sk);
    }
    let doc = compare_docs(variants, &docs, baseline);
    CompareRun {
        doc,
        docs,
        sketches,
    }
}

/// The comparison of already measured variants.
pub fn compare_docs(
    variants: &[Variant],
    docs: &[MeasureDoc],
    baseline: Option<&str>,
) -> CompareDoc {
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
            let test = stats::mann_whitney_u(&a, &b).ok();
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
                p_value: test.as_ref().and_then(|t| t.p_value),
            });
        }
    }
    let verdicts = verdicts(&variant_docs, base);
    CompareDoc {
        schema: COMPARE_SCHEMA,
        baseline: variants
            .get(base)
            .map(|v| v.label.clone())
            .unwrap_or_default(),
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
                    line.push_str(&format!(" ({:.0}x longer: the load releases later)", x / y));
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
    crate::units::eng(v, "V")
}

fn fmt_s(s: f64) -> String {
    crate::units::eng(s, "s")
}

/// All variants' captures in one document, for the report page: each capture labelled with
/// its variant. The summary's counts, metrics and rating cover every event; the
/// extreme-value projection is left to each variant (mixing a clamped and an unclamped
/// build in one fit would mean nothing), and its lines go with the verdicts.
pub fn merged_doc(variants: &[Variant], docs: &[MeasureDoc], settings: &Settings) -> MeasureDoc {
    let mut captures = Vec::new();
    let mut errors = Vec::new();
    for (v, d) in variants.iter().zip(docs) {
        for c in &d.captures {
            let mut c = c.clone();
            c.label = Some(v.label.clone());
            captures.push(c);
        }
        errors.extend(d.errors.iter().cloned());
    }
    let mut summary = pipeline::summarize(&captures, settings);
    summary.extreme_value = None;
    MeasureDoc {
        schema: crate::document::MEASURE_SCHEMA,
        captures,
        summary,
        errors,
    }
}

/// One line per variant on its margin against the switch rating (`--rating`), with the
/// 80 % derating line of common practice.
pub fn rating_lines(variants: &[Variant], docs: &[MeasureDoc]) -> Vec<String> {
    let mut out = Vec::new();
    for (v, d) in variants.iter().zip(docs) {
        let Some(r) = &d.summary.rating else {
            continue;
        };
        let n = d.summary.n_events;
        let worst = r.max_fraction * r.rating_v;
        let line = if r.n_over > 0 {
            format!(
                "{}: {} of {} events exceed the {} rating (worst {}, {:.0} % of the rating)",
                v.label,
                r.n_over,
                n,
                fmt_v(r.rating_v),
                fmt_v(worst),
                r.max_fraction * 100.0
            )
        } else if r.n_over_derated > 0 {
            format!(
                "{}: under the {} rating, but {} of {} events exceed the {} derating line (worst {})",
                v.label,
                fmt_v(r.rating_v),
                r.n_over_derated,
                n,
                fmt_v(r.derated_v),
                fmt_v(worst)
            )
        } else {
            format!(
                "{}: worst {} is {:.0} % of the {} rating, under the {} derating line",
                v.label,
                fmt_v(worst),
                r.max_fraction * 100.0,
                fmt_v(r.rating_v),
                fmt_v(r.derated_v)
            )
        };
        out.push(line);
    }
    out
}

/// One line per variant with its projected worst case, from the variant's own fit.
pub fn projection_lines(variants: &[Variant], docs: &[MeasureDoc]) -> Vec<String> {
    let mut out = Vec::new();
    for (v, d) in variants.iter().zip(docs) {
        let Some(ev) = &d.summary.extreme_value else {
            continue;
        };
        let model = ev.get("model").and_then(|m| m.as_str());
        let levels = ev.get("return_levels").and_then(|r| r.as_object());
        match (model, levels) {
            (Some(model), Some(levels)) if !levels.is_empty() => {
                for (n, entry) in levels {
                    let level = entry.get("level").and_then(|x| x.as_f64());
                    let lower = entry.get("lower").and_then(|x| x.as_f64());
                    let upper = entry.get("upper").and_then(|x| x.as_f64());
                    if let Some(level) = level {
                        let interval = match (lower, upper) {
                            (Some(lo), Some(hi)) => {
                                format!(" (95 % interval {} to {})", fmt_v(lo), fmt_v(hi))
                            }
                            _ => String::new(),
                        };
                        out.push(format!(
                            "{}: projected worst switch stress over {} switchings {}{} ({model} fit)",
                            v.label,
                            n.parse::<f64>()
                                .map(crate::report::digest::switchings_text)
                                .unwrap_or_else(|_| n.clone()),
                            fmt_v(level),
                            interval
                        ));
                    }
                }
            }
            _ => {
                let why = ev
                    .get("warnings")
                    .and_then(|w| w.as_array())
                    .and_then(|w| w.first())
                    .and_then(|w| w.as_str())
                    .unwrap_or("too few events for an extreme-value fit");
                out.push(format!("{}: no worst-case projection: {why}", v.label));
            }
        }
    }
    out
}
