//! Every output kickscan writes: terminal table, JSON, CSV, plots and the HTML page. Each
//! renderer returns bytes so it can be tested without the disk; only [`write_report`]
//! touches the file system.

pub mod advice;
pub mod atomic;
pub mod compare_table;
pub mod csv;
pub mod digest;
pub mod fonts;
pub mod format;
pub mod html;
pub mod json;
#[cfg(feature = "parquet")]
pub mod parquet;
pub mod plots;
pub mod sketch;
pub mod table;

use std::path::Path;

use crate::document::MeasureDoc;
use crate::pipeline::Settings;

pub use compare_table::compare_text;
pub use plots::{FitPlot, LimitLine, PeakEstimate, Plot, PlotError, VariantData};
pub use sketch::{EventWave, TraceSketch};
pub use table::{inspect_text, measure_summary_text, measure_text};

/// Why a report could not be written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    // The cause is in the message and deliberately not a `source`: `anyhow`'s `{:#}` at the
    // edge prints the chain, which said it twice.
    #[error("{path}: {error}")]
    Io {
        path: std::path::PathBuf,
        error: std::io::Error,
    },
    #[error("{0}")]
    Refused(String),
    #[error("{0}")]
    Plot(#[from] PlotError),
    #[error("serialising the document: {0}")]
    Json(#[from] serde_json::Error),
    #[cfg(feature = "parquet")]
    #[error("{0}")]
    Table(#[from] parquet::TableError),
}

/// Most capture overviews drawn; the capture holding the worst event always comes first.
pub const MAX_OVERVIEWS: usize = 8;

/// Everything a report is made from. Build it with [`ReportInput::new`] and set the optional
/// parts that exist.
pub struct ReportInput<'a> {
    pub doc: &'a MeasureDoc,
    pub settings: &'a Settings,
    /// One per capture, for the plots (the document carries no samples).
    pub sketches: &'a [TraceSketch],
    /// Verdict lines (from `compare`), already worded.
    pub verdicts: &'a [String],
    /// Model fit of the worst event, when the model ran.
    pub fit: Option<&'a FitPlot>,
    /// Two or more variants for the comparison plots.
    pub variants: &'a [VariantData],
    /// Replace an existing folder that kickscan did not write.
    pub force: bool,
}

impl<'a> ReportInput<'a> {
    pub fn new(doc: &'a MeasureDoc, settings: &'a Settings, sketches: &'a [TraceSketch]) -> Self {
        // The fit shown is that of the worst event, kept with its capture's sketch.
        let fit = doc.summary.worst.as_ref().and_then(|w| {
            sketches
                .iter()
                .find(|s| s.file == w.file)
                .and_then(|s| s.fit.as_ref())
        });
        ReportInput {
            doc,
            settings,
            sketches,
            verdicts: &[],
            fit,
            variants: &[],
            force: false,
        }
    }
}

/// Rating and derating levels in switch-stress volts, from the summary or `--rating`.
fn rating_levels(input: &ReportInput) -> Option<(f64, f64)> {
    if let Some(r) = &input.doc.summary.rating {
        return Some((r.rating_v, r.derated_v));
    }
    // 80 % derating: common practice.
    input.settings.measure.rating_v.map(|r| (r, 0.8 * r))
}

/// Rating lines on a capture's voltage axis: the rail is recovered from its worst event
/// (`switch_stress_v = |peak_v - rail|`).
fn node_limits(sketch: &TraceSketch, rating: Option<(f64, f64)>) -> Vec<LimitLine> {
    let Some((rating_v, derated_v)) = rating else {
        return Vec::new();
    };
    let Some(w) = sketch
        .events
        .iter()
        .max_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v))
    else {
        return Vec::new();
    };
    let up = w.peak_v >= sketch.v_off.unwrap_or(0.0);
    let rail = if up {
        w.peak_v - w.switch_stress_v
    } else {
        w.peak_v + w.switch_stress_v
    };
    LimitLine::rating_pair(rating_v, derated_v, rail, up)
}

fn settle_band(sketch: &TraceSketch, settings: &Settings) -> Option<f64> {
    sketch.settle_band_v.or_else(|| {
        let step = (sketch.v_off? - sketch.v_on?).abs();
        Some(settings.measure.settle_band_pct / 100.0 * step).filter(|b| *b > 0.0)
    })
}

/// Every plot the inputs allow, plus notes on plots left out.
pub fn build_plots(input: &ReportInput) -> Result<(Vec<Plot>, Vec<String>), ReportError> {
    let doc = input.doc;
    let rating = rating_levels(input);
    let worst = doc.summary.worst.as_ref();
    let mut out = Vec::new();
    let mut notes = Vec::new();

    // Capture overviews, the worst capture first.
    let mut order: Vec<&TraceSketch> = input.sketches.iter().collect();
    order.sort_by_key(|s| worst.is_none_or(|w| w.file != s.file));
    for (k, s) in order.iter().take(MAX_OVERVIEWS).enumerate() {
        let worst_index = match worst {
            Some(w) if w.file == s.file => Some(w.index),
            _ => s
                .events
                .iter()
                .max_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v))
                .map(|w| w.index),
        };
        let fig = plots::OverviewPlot {
            sketch: s,
            worst_index,
            limits: node_limits(s, rating),
        };
        let caption = format!(
            "Whole capture {}: every detected event's peak, numbered; the worst ringed{}.",
            s.file,
            if rating.is_some() {
                "; the switch rating (solid) and 80 % derating (dashed) on the node voltage"
            } else {
                ""
            }
        );
        out.push(plots::render(
            &format!("overview-{}", k + 1),
            &caption,
            &fig,
        )?);
    }
    if order.len() > MAX_OVERVIEWS {
        notes.push(format!(
            "Overviews of {} more captures are left out; their events are in the overlay, the histogram and the tables.",
            order.len() - MAX_OVERVIEWS
        ));
    }

    // Aligned overlays, one per variant label.
    let mut labels: Vec<Option<&str>> = input.sketches.iter().map(|s| s.label.as_deref()).collect();
    labels.dedup();
    labels.sort();
    labels.dedup();
    for (k, label) in labels.iter().enumerate() {
        let group: Vec<&TraceSketch> = input
            .sketches
            .iter()
            .filter(|s| s.label.as_deref() == *label)
            .collect();
        let waves: Vec<&EventWave> = group.iter().flat_map(|s| s.events.iter()).collect();
        if waves.is_empty() {
            continue;
        }
        let home = group.iter().copied().max_by(|a, b| {
            let top = |s: &TraceSketch| {
                s.events
                    .iter()
                    .map(|w| w.switch_stress_v)
                    .fold(f64::NEG_INFINITY, f64::max)
            };
            top(a).total_cmp(&top(b))
        });
        let worst_wave = waves
            .iter()
            .copied()
            .max_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v));
        let others: Vec<&EventWave> = waves
            .iter()
            .copied()
            .filter(|w| !worst_wave.is_some_and(|x| std::ptr::eq(*w, x)))
            .collect();
        let title = match label {
            Some(l) => format!("{l}: events aligned at their edges"),
            None => "All events aligned at their edges".to_string(),
        };
        let fig = plots::OverlayPlot {
            title,
            waves: others,
            worst: worst_wave,
            v_off: home.and_then(|s| s.v_off),
            band_v: home.and_then(|s| settle_band(s, input.settings)),
            limits: home.map_or_else(Vec::new, |s| node_limits(s, rating)),
        };
        out.push(plots::render(
            &format!("overlay-{}", k + 1),
            "Every event on one time axis from its edge (50 % crossing), the worst in bold; the dashed line is the off level and the shaded band the settle band.",
            &fig,
        )?);
    }

    // Switch stress histogram.
    let stress: Vec<f64> = doc
        .captures
        .iter()
        .flat_map(|c| c.events.iter().map(|e| e.switch_stress_v))
        .collect();
    if !stress.is_empty() {
        let limits = rating.map_or_else(Vec::new, |(r, d)| LimitLine::rating_pair(r, d, 0.0, true));
        let fig = plots::StressHistogram {
            title: "Switch stress per event".into(),
            stress_v: &stress,
            limits: limits.clone(),
        };
        out.push(plots::render(
            "stress-histogram",
            "Distribution of the switch stress |peak - rail| over all events, with the rating (solid) and 80 % derating (dashed) when a rating is given.",
            &fig,
        )?);

        if let Some((model, levels)) = digest::return_levels(doc) {
            if !levels.is_empty() {
                let fig = plots::ReturnLevelPlot {
                    title: format!("Projected worst switch stress ({model})"),
                    levels,
                    empirical: plots::ReturnLevelPlot::empirical_points(&stress),
                    limits,
                };
                out.push(plots::render(
                    "return-levels",
                    "Switch stress expected to be exceeded once in N switchings (line, with its interval shaded), and the observed events at their empirical return periods (circles).",
                    &fig,
                )?);
            }
        }
    }

    if let Some(fit) = input.fit {
        out.push(plots::render(
            "fit-worst",
            "Model fit of the worst event: measured samples (dots) and the fitted model (dashed); clipped stretches are shaded and the reconstructed peak is marked with its interval.",
            fit,
        )?);
    }

    if input.variants.len() >= 2 {
        let fig = plots::CompareOverlay {
            title: "Median event of each variant".into(),
            variants: input.variants,
        };
        out.push(plots::render(
            "compare-overlay",
            "The median event (by switch stress) of each variant, aligned at the edge.",
            &fig,
        )?);
        let fig = plots::CompareStrips {
            title: "Spike height against decay time, per variant".into(),
            variants: input.variants,
        };
        out.push(plots::render(
            "compare-strips",
            "Each event's switch stress and decay time, one column per variant: a clamp trades one against the other.",
            &fig,
        )?);
    }
    Ok((out, notes))
}

/// Every file of the report folder as (relative path, bytes), without touching the disk.
pub fn render_report(input: &ReportInput) -> Result<Vec<(String, Vec<u8>)>, ReportError> {
    let (plots, notes) = build_plots(input)?;
    let page = html::render_html(&html::Page {
        doc: input.doc,
        settings: input.settings,
        plots: &plots,
        verdicts: input.verdicts,
        plot_notes: &notes,
    });
    let mut files = vec![
        ("report.html".to_string(), page.into_bytes()),
        (
            "events.csv".to_string(),
            csv::events_csv(input.doc)?.into_bytes(),
        ),
        (
            "summary.json".to_string(),
            json::summary_json(input.doc)?.into_bytes(),
        ),
    ];
    #[cfg(feature = "parquet")]
    files.push((
        "events.parquet".to_string(),
        parquet::events_parquet(input.doc)?,
    ));
    for p in plots {
        files.push((format!("plots/{}.svg", p.name), p.svg.into_bytes()));
        files.push((format!("plots/{}.png", p.name), p.png));
    }
    Ok(files)
}

/// Writes the report folder `dir` atomically: `report.html`, `events.csv`, `summary.json`
/// and `plots/*.png`, `plots/*.svg`; with the `parquet` feature also `events.parquet`.
pub fn write_report(dir: &Path, input: &ReportInput) -> Result<(), ReportError> {
    let files = render_report(input)?;
    atomic::write_folder(dir, &files, input.force)
}
