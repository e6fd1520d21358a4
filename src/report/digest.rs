//! What the terminal table and the HTML page both say about a document, worked out once:
//! the metrics worth a summary line, events ranked worst first, the sentences on the worst
//! event, the rating margin and the extreme-value projection.

use crate::document::{CaptureDoc, MeasureDoc};
use crate::measure::Event;
use crate::stats::MetricSummary;

use super::format::{count, eng, field_value, pct};

/// The metrics summarised in the report, in reading order, with a short name.
pub const MAIN_METRICS: &[(&str, &str)] = &[
    ("switch_stress_v", "switch stress"),
    ("peak_v", "peak"),
    ("overshoot_pct", "overshoot"),
    ("rise_time_s", "rise time"),
    ("slew_v_per_s", "slew rate"),
    ("spike_width_s", "spike width"),
    ("decay_time_s", "decay time"),
    ("settle_time_s", "settle time"),
    ("ring_freq_hz", "ring frequency"),
    ("damping_ratio", "damping ratio"),
    ("volt_seconds", "volt-seconds"),
    ("energy_j", "switch energy"),
    ("clamp_energy_j", "clamp energy"),
    ("c_par_f", "node capacitance"),
];

/// One row of the summary table.
#[derive(Debug, Clone, PartialEq)]
pub struct MetricRow {
    pub field: &'static str,
    pub name: &'static str,
    pub n: usize,
    pub min: String,
    pub p50: String,
    pub p95: String,
    pub max: String,
}

/// Summary rows for the main metrics that the document's summary holds, with values.
pub fn metric_rows(doc: &MeasureDoc) -> Vec<MetricRow> {
    let fmt = |field: &str, v: Option<f64>| {
        v.map_or_else(|| super::format::MISSING.into(), |x| field_value(field, x))
    };
    MAIN_METRICS
        .iter()
        .filter_map(|&(field, name)| {
            let m: &MetricSummary = doc.summary.metrics.get(field)?;
            if m.n == 0 {
                return None;
            }
            Some(MetricRow {
                field,
                name,
                n: m.n,
                min: fmt(field, m.min),
                p50: fmt(field, m.p50),
                p95: fmt(field, m.p95),
                max: fmt(field, m.max),
            })
        })
        .collect()
}

/// Every event with its capture, worst switch stress first (ties in input order).
pub fn ranked_events(doc: &MeasureDoc) -> Vec<(&CaptureDoc, &Event)> {
    let mut all: Vec<(&CaptureDoc, &Event)> = doc
        .captures
        .iter()
        .flat_map(|c| c.events.iter().map(move |e| (c, e)))
        .collect();
    all.sort_by(|a, b| b.1.switch_stress_v.total_cmp(&a.1.switch_stress_v));
    all
}

/// Whether this event is the document's worst.
pub fn is_worst(doc: &MeasureDoc, file: &str, index: usize) -> bool {
    doc.summary
        .worst
        .as_ref()
        .is_some_and(|w| w.file == file && w.index == index)
}

/// Flag letters of an event: C clipped, U undersampled, T truncated.
pub fn flags(e: &Event) -> String {
    let mut s = String::new();
    if e.clipped {
        s.push('C');
    }
    if e.undersampled {
        s.push('U');
    }
    if e.truncated {
        s.push('T');
    }
    s
}

/// The counts sentence: "48 events in 3 captures, 2 clipped; 1 input failed".
pub fn counts_line(doc: &MeasureDoc) -> String {
    let n_cap = doc.captures.len();
    let mut s = format!(
        "{} event{} in {} capture{}",
        count(doc.summary.n_events),
        plural(doc.summary.n_events),
        count(n_cap),
        plural(n_cap)
    );
    if doc.summary.n_clipped > 0 {
        s.push_str(&format!(
            ", {} clipped (their peak is a lower bound)",
            count(doc.summary.n_clipped)
        ));
    } else {
        s.push_str(", none clipped");
    }
    if !doc.errors.is_empty() {
        s.push_str(&format!(
            "; {} input{} failed",
            doc.errors.len(),
            plural(doc.errors.len())
        ));
    }
    s
}

fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}

/// "worst: run3.csv event 7 at 12.3 ms: switch stress 412 V (peak 436 V)".
pub fn worst_line(doc: &MeasureDoc) -> Option<String> {
    let w = doc.summary.worst.as_ref()?;
    Some(format!(
        "{} event {} at {}: switch stress {} (peak {})",
        w.file,
        w.index,
        eng(w.t_edge_s, "s"),
        eng(w.switch_stress_v, "V"),
        eng(w.peak_v, "V")
    ))
}

/// The rating margin in one sentence, if a rating was given.
pub fn rating_line(doc: &MeasureDoc) -> Option<String> {
    let r = doc.summary.rating.as_ref()?;
    let mut s = format!(
        "rating {} (derating line {}): the worst event reaches {} of the rating; {} event{} over the rating, {} over the derating line",
        eng(r.rating_v, "V"),
        eng(r.derated_v, "V"),
        pct(r.max_fraction * 100.0),
        count(r.n_over),
        plural(r.n_over),
        count(r.n_over_derated)
    );
    if let Some(p) = r.p_over_per_event {
        s.push_str(&format!(
            "; projected probability per switching of exceeding the rating {p:.2e}"
        ));
    }
    Some(s)
}

/// One projected return level of the extreme-value fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReturnLevel {
    /// Number of switchings (the return period).
    pub switchings: f64,
    pub level_v: f64,
    pub lower_v: Option<f64>,
    pub upper_v: Option<f64>,
}

/// The extreme-value fit's model name and return levels, read from `Summary::extreme_value`
/// (`{"model", ..., "return_levels": {"<N switchings>": {"level","lower","upper"}}}`), sorted
/// by return period. Keys that are not numbers are skipped.
pub fn return_levels(doc: &MeasureDoc) -> Option<(String, Vec<ReturnLevel>)> {
    let ev = doc.summary.extreme_value.as_ref()?;
    let model = ev
        .get("model")
        .and_then(|m| m.as_str())
        .unwrap_or("extreme-value")
        .to_string();
    let map = ev.get("return_levels")?.as_object()?;
    let mut out: Vec<ReturnLevel> = map
        .iter()
        .filter_map(|(k, v)| {
            let switchings = crate::units::parse_si(k, None).ok()?;
            Some(ReturnLevel {
                switchings,
                level_v: v.get("level")?.as_f64()?,
                lower_v: v.get("lower").and_then(|x| x.as_f64()),
                upper_v: v.get("upper").and_then(|x| x.as_f64()),
            })
        })
        .filter(|r| r.switchings > 0.0 && r.level_v.is_finite())
        .collect();
    out.sort_by(|a, b| a.switchings.total_cmp(&b.switchings));
    Some((model, out))
}

/// One sentence per return level: "over 1e6 switchings: 455 V (440 V to 470 V)".
pub fn return_level_lines(doc: &MeasureDoc) -> Vec<String> {
    let Some((model, levels)) = return_levels(doc) else {
        return Vec::new();
    };
    levels
        .iter()
        .map(|r| {
            let band = match (r.lower_v, r.upper_v) {
                (Some(lo), Some(hi)) => format!(" (interval {} to {})", eng(lo, "V"), eng(hi, "V")),
                _ => String::new(),
            };
            format!(
                "{model}: switch stress expected once in {} switchings: {}{band}",
                switchings_text(r.switchings),
                eng(r.level_v, "V")
            )
        })
        .collect()
}

/// A number of switchings: whole numbers below 100 000 in full (`1 000`), larger ones as a
/// power of ten (`1e6`).
pub fn switchings_text(n: f64) -> String {
    if n.fract() == 0.0 && (1.0..1e5).contains(&n) {
        count(n as usize)
    } else {
        format!("{n:.0e}")
    }
}

/// Every warning, prefixed with its file.
pub fn warnings(doc: &MeasureDoc) -> Vec<String> {
    doc.captures
        .iter()
        .flat_map(|c| c.warnings.iter().map(move |w| format!("{}: {w}", c.file)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::document::{Summary, Worst, MEASURE_SCHEMA};

    fn doc_with_ev(ev: serde_json::Value) -> MeasureDoc {
        MeasureDoc {
            schema: MEASURE_SCHEMA,
            captures: Vec::new(),
            summary: Summary {
                extreme_value: Some(ev),
                worst: Some(Worst {
                    file: "a.csv".into(),
                    index: 3,
                    t_edge_s: 0.0123,
                    peak_v: 436.0,
                    switch_stress_v: 412.0,
                }),
                ..Summary::default()
            },
            errors: Vec::new(),
        }
    }

    #[test]
    fn return_levels_are_read_and_sorted() {
        let doc = doc_with_ev(serde_json::json!({
            "model": "gev",
            "return_levels": {
                "1000000": {"level": 455.0, "lower": 440.0, "upper": 470.0},
                "1000": {"level": 430.0, "lower": null, "upper": null},
                "lots": {"level": 1.0}
            }
        }));
        let (model, r) = return_levels(&doc).expect("levels");
        assert_eq!(model, "gev");
        assert_eq!(r.len(), 2);
        assert_eq!(r[0].switchings, 1000.0);
        assert_eq!(r[1].lower_v, Some(440.0));
        let lines = return_level_lines(&doc);
        assert!(
            lines[0].contains("once in 1 000 switchings: 430 V"),
            "{}",
            lines[0]
        );
        assert!(
            lines[1].contains("once in 1e6 switchings: 455 V"),
            "{}",
            lines[1]
        );
        assert!(lines[1].contains("440 V to 470 V"), "{}", lines[1]);
    }

    #[test]
    fn worst_line_names_file_time_and_stress() {
        let doc = doc_with_ev(serde_json::json!({}));
        let s = worst_line(&doc).unwrap();
        assert_eq!(
            s,
            "a.csv event 3 at 12.3 ms: switch stress 412 V (peak 436 V)"
        );
        assert!(return_levels(&doc).is_none());
    }
}
