//! `events.csv`: one row per event, `file` then every field of the event under its JSON name
//! (RFC 4180 quoting). Cells come from the event's own serialisation, so a field added to
//! [`Event`] appears here without a change; nulls are empty cells, and a pair such as
//! `c_par_slope_range_v` is written as `low;high` in one cell.

use serde_json::Value;

use crate::document::MeasureDoc;

/// Event fields in the order DESIGN.md lists them; fields not named here follow in
/// alphabetical order.
const ORDER: &[&str] = &[
    "index",
    "t_edge_s",
    "polarity",
    "v_on",
    "v_off",
    "peak_v",
    "switch_stress_v",
    "overshoot_v",
    "overshoot_pct",
    "t_peak_s",
    "rise_time_s",
    "slew_v_per_s",
    "spike_width_s",
    "decay_time_s",
    "ring_freq_hz",
    "ring_kind",
    "damping_ratio",
    "settle_time_s",
    "settle_band_v",
    "volt_seconds",
    "energy_j",
    "clamp_energy_j",
    "energy_to_peak_j",
    "coil_energy_j",
    "i0_a",
    "c_par_f",
    "c_par_slope_f",
    "c_par_slope_range_v",
    "fit_model",
    "ring_alpha",
    "q_factor",
    "fit_rms_v",
    "peak_v_est",
    "peak_v_est_lower",
    "peak_v_est_upper",
    "clipped",
    "undersampled",
    "truncated",
    "window_s",
];

/// The rows of the events table: each event's file and its serialised fields.
pub(crate) type EventRow<'a> = (&'a str, serde_json::Map<String, Value>);

/// Every event of `doc` as a row, and the table's columns after `file`: the fields in
/// [`ORDER`], then any others in alphabetical order. Shared with `events.parquet`, so both
/// tables have the same rows and columns.
pub(crate) fn event_rows(
    doc: &MeasureDoc,
) -> Result<(Vec<String>, Vec<EventRow<'_>>), serde_json::Error> {
    let mut rows: Vec<EventRow> = Vec::new();
    for c in &doc.captures {
        for e in &c.events {
            if let Value::Object(m) = serde_json::to_value(e)? {
                rows.push((c.file.as_str(), m));
            }
        }
    }
    let mut columns: Vec<String> = ORDER.iter().map(|s| s.to_string()).collect();
    let template = serde_json::to_value(crate::measure::Event::default())?;
    let mut extra: Vec<String> = template
        .as_object()
        .into_iter()
        .flat_map(|m| m.keys())
        .chain(rows.iter().flat_map(|(_, m)| m.keys()))
        .filter(|k| !ORDER.contains(&k.as_str()))
        .cloned()
        .collect();
    extra.sort();
    extra.dedup();
    columns.extend(extra);
    // A field named in ORDER but gone from Event would be an always-empty column.
    columns.retain(|k| {
        template.get(k.as_str()).is_some() || rows.iter().any(|(_, m)| m.contains_key(k))
    });
    Ok((columns, rows))
}

/// The events table as CSV text.
pub fn events_csv(doc: &MeasureDoc) -> Result<String, serde_json::Error> {
    let (columns, rows) = event_rows(doc)?;
    let mut out = String::from("file");
    for k in &columns {
        out.push(',');
        out.push_str(&quote(k));
    }
    out.push('\n');
    for (file, m) in &rows {
        out.push_str(&quote(file));
        for k in &columns {
            out.push(',');
            out.push_str(&quote(&cell(m.get(k.as_str()))));
        }
        out.push('\n');
    }
    Ok(out)
}

fn cell(v: Option<&Value>) -> String {
    match v {
        None | Some(Value::Null) => String::new(),
        Some(Value::String(s)) => s.clone(),
        Some(Value::Array(a)) => a
            .iter()
            .map(|x| cell(Some(x)))
            .collect::<Vec<_>>()
            .join(";"),
        Some(other) => other.to_string(),
    }
}

/// RFC 4180: a cell holding a comma, quote or line break is quoted, quotes doubled.
fn quote(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quoting_follows_rfc_4180() {
        assert_eq!(quote("plain.csv"), "plain.csv");
        assert_eq!(quote("a,b.csv"), "\"a,b.csv\"");
        assert_eq!(quote("say \"hi\""), "\"say \"\"hi\"\"\"");
    }

    #[test]
    fn every_event_field_is_a_column() {
        let template = serde_json::to_value(crate::measure::Event::default()).unwrap();
        let doc = crate::document::MeasureDoc {
            schema: crate::document::MEASURE_SCHEMA,
            captures: Vec::new(),
            summary: Default::default(),
            errors: Vec::new(),
        };
        let csv = events_csv(&doc).unwrap();
        let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
        let keys = template.as_object().unwrap();
        assert_eq!(header.len(), keys.len() + 1);
        for k in keys.keys() {
            assert!(header.contains(&k.as_str()), "missing column {k}");
        }
        assert_eq!(cell(Some(&serde_json::json!([1.5, 2.0]))), "1.5;2.0");
        assert_eq!(cell(Some(&Value::Null)), "");
    }
}
