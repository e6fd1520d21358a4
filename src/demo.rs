//! `kickscan demo`: the whole job on the bundled sample captures. A scenario file
//! (`scenario.json` in the captures folder) says which folders are the variants, the supply,
//! the switch rating and the coil, so the demo runs the same code paths as `compare`,
//! `measure` and `parasitics` with the settings a user would type.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;

use serde::Deserialize;
use thiserror::Error;

use crate::compare::{self, Variant};
use crate::document::{CompareDoc, MeasureDoc};
use crate::measure::CurrentThrough;
use crate::pipeline::{self, Settings};
use crate::report::{self, ReportInput};

/// The bundled scenario's description.
#[derive(Debug, Clone, Deserialize)]
pub struct Scenario {
    pub title: String,
    pub supply_v: f64,
    pub rating_v: Option<f64>,
    pub inductance_h: Option<f64>,
    /// Events per block for the worst-case projection (`--block`); one capture per block
    /// when absent.
    #[serde(default)]
    pub block: Option<usize>,
    /// Variant label and folder (relative to the captures folder), baseline first.
    pub variants: Vec<ScenarioVariant>,
    /// A capture with a coil-current channel, measured with energies.
    pub current: Option<ScenarioCurrent>,
    /// A bare/loaded pair for the added-capacitance method.
    pub parasitics: Option<ScenarioPair>,
}

#[derive(Debug, Clone, Deserialize)]
pub struct ScenarioVariant {
    pub label: String,
    pub folder: PathBuf,
}

#[derive(Debug, Clone, Deserialize)]
pub struct ScenarioCurrent {
    pub folder: PathBuf,
    /// "coil" or "switch".
    pub current_through: String,
}

#[derive(Debug, Clone, Deserialize)]
pub struct ScenarioPair {
    pub bare: PathBuf,
    pub loaded: PathBuf,
    pub added_c_f: f64,
}

#[derive(Debug, Error)]
pub enum DemoError {
    #[error("{0}: no sample captures here (expected a scenario.json); pass --captures DIR")]
    NoCaptures(PathBuf),
    #[error("{file}: {message}")]
    Scenario { file: PathBuf, message: String },
    #[error(transparent)]
    Report(#[from] report::ReportError),
    /// A stop was asked for (Ctrl-C); the run ended between steps, before the report.
    #[error("{measured} of {total} files measured; no report written")]
    Interrupted { measured: usize, total: usize },
}

/// What the demo found, for the closing lines it prints.
pub struct DemoOutcome {
    pub scenario: Scenario,
    pub compare: CompareDoc,
    pub projections: Vec<String>,
    pub current: Option<MeasureDoc>,
    pub parasitics_lines: Vec<String>,
    pub report_html: PathBuf,
    pub n_errors: usize,
}

/// Finds the sample captures: the given folder, `sample-captures/` in the working folder,
/// or the one beside the sources this binary was built from.
pub fn locate_captures(given: Option<&Path>) -> Result<PathBuf, DemoError> {
    let candidates: Vec<PathBuf> = match given {
        Some(p) => vec![p.to_path_buf()],
        None => vec![
            PathBuf::from("sample-captures"),
            Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures"),
        ],
    };
    for c in &candidates {
        if c.join("scenario.json").is_file() {
            return Ok(c.clone());
        }
    }
    Err(DemoError::NoCaptures(candidates[0].clone()))
}

pub fn load_scenario(dir: &Path) -> Result<Scenario, DemoError> {
    let file = dir.join("scenario.json");
    let text = std::fs::read_to_string(&file).map_err(|e| DemoError::Scenario {
        file: file.clone(),
        message: e.to_string(),
    })?;
    let sc: Scenario = serde_json::from_str(&text).map_err(|e| DemoError::Scenario {
        file: file.clone(),
        message: format!("line {}, column {}: {e}", e.line(), e.column()),
    })?;
    if sc.variants.len() < 2 {
        return Err(DemoError::Scenario {
            file,
            message: "at least two variants are needed".into(),
        });
    }
    Ok(sc)
}

/// Runs the demo and writes the report to `out`. When `stop` is set (the binary's Ctrl-C
/// handler), the run ends after the step under way (the files being measured finish) with
/// [`DemoError::Interrupted`], and writes nothing: a report missing captures must not pass
/// for the demo's.
pub fn run(
    captures: &Path,
    out: &Path,
    force: bool,
    stop: Option<Arc<AtomicBool>>,
    progress: &(dyn Fn() + Sync),
) -> Result<DemoOutcome, DemoError> {
    let scenario = load_scenario(captures)?;
    let mut settings = Settings::default();
    settings.measure.supply_v = Some(scenario.supply_v);
    settings.measure.rating_v = scenario.rating_v;
    settings.measure.inductance_h = scenario.inductance_h;
    settings.block = scenario.block;
    settings.stop = stop;

    let measured = AtomicUsize::new(0);
    let counted = || {
        measured.fetch_add(1, Ordering::SeqCst);
        progress();
    };
    let progress: &(dyn Fn() + Sync) = &counted;
    let check_stop = || {
        if settings.stopped() {
            Err(DemoError::Interrupted {
                measured: measured.load(Ordering::SeqCst),
                total: scenario_files(captures, &scenario),
            })
        } else {
            Ok(())
        }
    };

    let variants: Vec<Variant> = scenario
        .variants
        .iter()
        .map(|v| Variant {
            label: v.label.clone(),
            inputs: vec![captures.join(&v.folder)],
        })
        .collect();
    let run = compare::compare(&variants, None, &settings, true, progress);
    check_stop()?;
    let mut projections = compare::rating_lines(&variants, &run.docs);
    projections.extend(compare::projection_lines(&variants, &run.docs));
    let variant_data = run.variant_data(&variants);
    let sketches = run.all_sketches();

    let current = scenario.current.as_ref().map(|c| {
        let mut s = settings.clone();
        s.label = Some("coil current".into());
        s.measure.current_through = if c.current_through == "switch" {
            CurrentThrough::Switch
        } else {
            CurrentThrough::Coil
        };
        pipeline::measure_inputs(&[captures.join(&c.folder)], &s, progress)
    });
    check_stop()?;

    let parasitics_lines = match &scenario.parasitics {
        Some(pair) => {
            let lines = parasitics_lines(captures, pair, &scenario);
            measured.fetch_add(2, Ordering::SeqCst);
            lines
        }
        None => Vec::new(),
    };
    check_stop()?;

    // Advice for this coil, from the capture that has its current at turn-off.
    let advice_lines = current
        .as_ref()
        .and_then(|cur| {
            let mut s = settings.clone();
            s.measure.coil_current_a = None;
            crate::pipeline::suppression_advice(cur, &s)
        })
        .map(|a| report::advice::advice_lines(&a))
        .unwrap_or_default();
    projections.extend(advice_lines);

    let mut merged = compare::merged_doc(&variants, &run.docs, &settings);
    let mut verdicts = run.doc.verdicts.clone();
    verdicts.extend(projections.iter().cloned());
    verdicts.extend(parasitics_lines.iter().cloned());
    if let Some(cur) = &current {
        for c in &cur.captures {
            let mut c = c.clone();
            c.label = Some("coil current".into());
            merged.captures.push(c);
        }
        merged.errors.extend(cur.errors.iter().cloned());
    }
    let n_errors = merged.errors.len();
    let mut input = ReportInput::new(&merged, &settings, &sketches);
    input.verdicts = &verdicts;
    input.variants = &variant_data;
    input.force = force;
    report::write_report(out, &input)?;
    Ok(DemoOutcome {
        scenario,
        compare: run.doc,
        projections,
        current,
        parasitics_lines,
        report_html: out.join("report.html"),
        n_errors,
    })
}

/// How many files the scenario has the demo measure: the variants' and the current
/// capture's (as `measure` expands folders) and the bare/loaded pair.
fn scenario_files(captures: &Path, scenario: &Scenario) -> usize {
    let folders: Vec<PathBuf> = scenario
        .variants
        .iter()
        .map(|v| captures.join(&v.folder))
        .chain(scenario.current.iter().map(|c| captures.join(&c.folder)))
        .collect();
    let pair = if scenario.parasitics.is_some() { 2 } else { 0 };
    pipeline::collect_inputs(&folders).0.len() + pair
}

/// The added-capacitance method on the scenario's bare/loaded pair, in a few lines.
fn parasitics_lines(captures: &Path, pair: &ScenarioPair, scenario: &Scenario) -> Vec<String> {
    use crate::units::eng;
    let inputs = crate::model::ParasiticsInputs {
        c_add_f: pair.added_c_f,
        inductance_h: None,
        supply_v: Some(scenario.supply_v),
        switching_rate_hz: None,
        coil_current_a: None,
        peak_limit_v: None,
        c_slope_f: None,
    };
    let doc = match pipeline::parasitics_of_files(
        &captures.join(&pair.bare),
        &captures.join(&pair.loaded),
        &crate::capture::ReadOptions::default(),
        None,
        &inputs,
    ) {
        Ok(d) => d,
        Err(e) => return vec![format!("parasitics: {e}")],
    };
    let pm = |x: Option<f64>, unit: &str| {
        x.map(|s| format!(" ± {}", eng(s, unit)))
            .unwrap_or_default()
    };
    let mut lines = vec![format!(
        "parasitics (added-capacitance method, {} added): ring {} -> {}; node capacitance {}{}, loop inductance {}{}, characteristic impedance {}",
        eng(doc.c_add_f, "F"),
        eng(doc.f_bare_hz, "Hz"),
        eng(doc.f_loaded_hz, "Hz"),
        eng(doc.c_par_f, "F"),
        pm(doc.uncertainty.c_par_std_f, "F"),
        eng(doc.l_h, "H"),
        pm(doc.uncertainty.l_std_h, "H"),
        eng(doc.z0_ohm, "Ω"),
    )];
    if let Some(s) = &doc.snubber {
        lines.push(format!(
            "ring damper across the node: {} in series with {} (at least {})",
            eng(s.r_ohm, "Ω"),
            eng(s.c_f, "F"),
            eng(s.c_min_f, "F")
        ));
    }
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A stop asked for before the run starts: nothing is measured, the error counts the
    /// scenario's files, and no report folder appears.
    #[test]
    fn a_stopped_run_measures_nothing_and_writes_nothing() {
        let captures = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("report");
        let ticks = AtomicUsize::new(0);
        let tick = || {
            ticks.fetch_add(1, Ordering::SeqCst);
        };
        let stop = Some(Arc::new(AtomicBool::new(true)));
        match run(&captures, &out, false, stop, &tick) {
            // sample-captures/: 4 captures in each of the 4 variant folders, 2 in
            // coil-current/, and the bare/loaded pair of ringdown/ (scenario.json).
            Err(DemoError::Interrupted { measured, total }) => {
                assert_eq!((measured, total), (0, 20));
            }
            Err(e) => panic!("{e}"),
            Ok(_) => panic!("a stopped run wrote its report"),
        }
        assert_eq!(ticks.load(Ordering::SeqCst), 0);
        assert!(!out.exists());
    }
}
