//! `summary.json`: the same `kickscan.measure/1` document that `measure --json` prints.

use crate::document::MeasureDoc;

/// The document as pretty JSON with a final newline.
pub fn summary_json(doc: &MeasureDoc) -> Result<String, serde_json::Error> {
    let mut s = serde_json::to_string_pretty(doc)?;
    s.push('\n');
    Ok(s)
}
