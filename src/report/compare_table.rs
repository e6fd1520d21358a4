//! Terminal text of `compare`: one column per variant for the main metrics, the rank tests
//! against the baseline, and the verdict lines. Fits in 100 columns for up to five variants.

use std::fmt::Write as _;

use crate::document::CompareDoc;

use super::format::{count, eng_opt, field_unit, MISSING};

/// Rows of the side-by-side table: metric, statistic, label.
const ROWS: &[(&str, &str, &str)] = &[
    ("switch_stress_v", "max", "worst switch stress"),
    ("switch_stress_v", "p50", "median switch stress"),
    ("decay_time_s", "p50", "median decay time"),
    ("settle_time_s", "p50", "median settle time"),
    ("spike_width_s", "p50", "median spike width"),
    ("ring_freq_hz", "p50", "median ring frequency"),
    ("energy_j", "p50", "median switch energy"),
    ("clamp_energy_j", "p50", "median clamp energy"),
];

/// The `compare` table and verdicts.
pub fn compare_text(doc: &CompareDoc) -> String {
    let mut s = String::new();
    let label_w = 24;
    let col_w = 13;
    let _ = write!(s, "{:<label_w$}", "");
    for v in &doc.variants {
        let name: String = v.label.chars().take(col_w - 1).collect();
        let _ = write!(s, "{name:>col_w$}");
    }
    s.push('\n');
    let _ = write!(s, "{:<label_w$}", "events");
    for v in &doc.variants {
        let _ = write!(s, "{:>col_w$}", count(v.n_events));
    }
    s.push('\n');
    for (metric, stat, label) in ROWS {
        let cells: Vec<String> = doc
            .variants
            .iter()
            .map(|v| {
                let m = v.metrics.get(*metric);
                let value = m.and_then(|m| match *stat {
                    "max" => m.max,
                    _ => m.p50,
                });
                eng_opt(value, field_unit(metric))
            })
            .collect();
        if cells.iter().all(|c| c == MISSING) {
            continue;
        }
        let _ = write!(s, "{label:<label_w$}");
        for c in cells {
            let _ = write!(s, "{c:>col_w$}");
        }
        s.push('\n');
    }
    if !doc.differences.is_empty() {
        let _ = writeln!(
            s,
            "\nagainst {} (medians, Mann-Whitney U two-sided p):",
            doc.baseline
        );
        for d in doc.differences.iter().filter(|d| d.p_value.is_some()) {
            let unit = field_unit(&d.metric);
            let p = d
                .p_value
                .map_or_else(|| MISSING.to_string(), |p| format!("{p:.2e}"));
            let _ = writeln!(
                s,
                "  {:<10} {:<16} {:>10} vs {:>10}  p = {p}",
                d.b.chars().take(10).collect::<String>(),
                d.metric,
                eng_opt(d.median_b, unit),
                eng_opt(d.median_a, unit),
            );
        }
    }
    if !doc.verdicts.is_empty() {
        s.push('\n');
        for v in &doc.verdicts {
            let _ = writeln!(s, "{v}");
        }
    }
    for v in &doc.variants {
        for e in &v.errors {
            let _ = writeln!(s, "{}: input failed: {}", v.label, e.error);
        }
    }
    s
}
