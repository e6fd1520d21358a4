//! Every output kickscan writes: terminal table, JSON, CSV, plots and the HTML page. Each
//! renderer returns bytes so it can be tested without the disk; only [`write_report`]
//! touches the file system.

use std::path::Path;

use crate::document::{InspectDoc, MeasureDoc};
use crate::pipeline::Settings;

/// Why a report could not be written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error("{path}: {source}")]
    Io {
        path: std::path::PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("{0}")]
    Refused(String),
}

/// Plain-text account of what `inspect` understood.
pub fn inspect_text(doc: &InspectDoc) -> String {
    let mut s = String::new();
    for f in &doc.files {
        s.push_str(&format!(
            "{}\n  format {}, {} samples, sample interval {:e} s, start {:e} s\n",
            f.file, f.format, f.n_samples, f.sample_interval_s, f.t0_s
        ));
        for c in &f.channels {
            s.push_str(&format!(
                "  channel {} [{}]: min {:?} max {:?}\n",
                c.name, c.unit, c.min, c.max
            ));
        }
        for n in &f.notes {
            s.push_str(&format!("  note: {n}\n"));
        }
        for w in &f.warnings {
            s.push_str(&format!("  warning: {w}\n"));
        }
    }
    s
}

/// Terminal table of every event.
pub fn measure_text(doc: &MeasureDoc) -> String {
    let mut s = String::new();
    for c in &doc.captures {
        s.push_str(&format!("{}: {} events\n", c.file, c.events.len()));
        for e in &c.events {
            s.push_str(&format!(
                "  #{:<3} t {:>12.6e} s  peak {:>9.2} V  stress {:>9.2} V\n",
                e.index, e.t_edge_s, e.peak_v, e.switch_stress_v
            ));
        }
    }
    s
}

/// Writes the report folder.
pub fn write_report(dir: &Path, doc: &MeasureDoc, settings: &Settings) -> Result<(), ReportError> {
    let _ = (doc, settings);
    Err(ReportError::Refused(format!(
        "{}: the report writer is not built yet",
        dir.display()
    )))
}
