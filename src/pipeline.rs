//! Strings the stages together for the commands: expand inputs, read, measure, fit and
//! summarise, in parallel over files, with results in input order.

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::capture::{self, Capture, ReadOptions};
use crate::document::{
    CaptureDoc, FileError, InspectChannel, InspectDoc, InspectFile, MeasureDoc, Summary,
    INSPECT_SCHEMA, MEASURE_SCHEMA,
};
use crate::measure::{self, Event, MeasureOptions, Trace, BODY_DIODE_CLIP_V};
use crate::report::TraceSketch;

mod spill;
mod streamed;
pub use streamed::IN_MEMORY_SAMPLES;

/// Typed settings for a run, after the command line has been checked.
#[derive(Debug, Clone, Default)]
pub struct Settings {
    pub read: ReadOptions,
    pub measure: MeasureOptions,
    /// Switch-node channel (`--signal`); the first voltage channel when `None`.
    pub signal: Option<String>,
    /// Current channel (`--current`); a channel whose unit is amperes when `None`.
    pub current: Option<String>,
    pub label: Option<String>,
    pub switching_rate_hz: Option<f64>,
    pub fail_above_v: Option<f64>,
    pub fail_energy_j: Option<f64>,
    pub no_fit: bool,
    /// Events per block for the block-maxima fit (`--block`); one capture per block when
    /// `None`.
    pub block: Option<usize>,
    /// Numbers of switchings to project the worst case to (`--lifetime`).
    pub lifetimes: Vec<f64>,
    /// Set (by the binary's Ctrl-C handler) to stop starting new files; files already being
    /// measured finish. See [`Settings::stopped`].
    pub stop: Option<std::sync::Arc<std::sync::atomic::AtomicBool>>,
    /// Captures longer than this many samples per channel are measured as they stream
    /// (default [`IN_MEMORY_SAMPLES`]); tests lower it to stream short captures.
    pub stream_above: Option<usize>,
}

impl Settings {
    /// Whether the run was asked to stop; a stopped run's documents miss files and must not
    /// be reported as results.
    pub fn stopped(&self) -> bool {
        self.stop
            .as_ref()
            .is_some_and(|s| s.load(std::sync::atomic::Ordering::SeqCst))
    }
}

/// Default projection: a million switchings, a common relay and valve life figure.
pub const DEFAULT_LIFETIME: f64 = 1e6;

/// File extensions that are sidecars or reports, never captures, when walking folders.
const SKIP_EXTENSIONS: &[&str] = &["json", "md", "sh", "html", "png", "svg", "parquet", "cir"];

/// Expands folders (recursively, sorted by path so runs are repeatable) into files. Files
/// named explicitly are always kept; in folders, sidecars and reports are left out.
pub fn collect_inputs(inputs: &[PathBuf]) -> (Vec<PathBuf>, Vec<FileError>) {
    let mut files = Vec::new();
    let mut errors = Vec::new();
    let mut seen = Folders::default();
    for input in inputs {
        match std::fs::metadata(input) {
            Ok(m) if m.is_dir() => {
                let before = (files.len(), errors.len());
                let again = std::fs::canonicalize(input).is_ok_and(|c| seen.walked.contains(&c));
                walk(input, &mut files, &mut errors, &mut seen, 0);
                // A rig whose captures went missing must not pass as a clean run.
                if !again && (files.len(), errors.len()) == before {
                    errors.push(FileError {
                        file: input.display().to_string(),
                        error: format!(
                            "{}: no capture files in this folder (sidecars, notes and reports are not captures)",
                            input.display()
                        ),
                    });
                }
            }
            Ok(_) => files.push(input.clone()),
            Err(e) => errors.push(FileError {
                file: input.display().to_string(),
                error: format!("{}: {e}", input.display()),
            }),
        }
    }
    (files, errors)
}

/// Folders met while walking, by canonical path: a folder reached twice through symlinks is
/// walked once, and one that contains itself (a symlink loop) is reported.
#[derive(Default)]
struct Folders {
    walked: std::collections::HashSet<PathBuf>,
    open: Vec<PathBuf>,
}

fn walk(
    dir: &Path,
    files: &mut Vec<PathBuf>,
    errors: &mut Vec<FileError>,
    seen: &mut Folders,
    depth: usize,
) {
    if let Ok(canon) = std::fs::canonicalize(dir) {
        if seen.open.contains(&canon) {
            errors.push(FileError {
                file: dir.display().to_string(),
                error: format!(
                    "{}: symlink loop: this folder is {}, which contains it; skipped",
                    dir.display(),
                    canon.display()
                ),
            });
            return;
        }
        if !seen.walked.insert(canon.clone()) {
            return;
        }
        seen.open.push(canon);
        walk_entries(dir, files, errors, seen, depth);
        seen.open.pop();
    } else {
        walk_entries(dir, files, errors, seen, depth);
    }
}

fn walk_entries(
    dir: &Path,
    files: &mut Vec<PathBuf>,
    errors: &mut Vec<FileError>,
    seen: &mut Folders,
    depth: usize,
) {
    // Real capture trees are shallow; this bounds a tree canonicalisation could not see.
    if depth > 32 {
        errors.push(FileError {
            file: dir.display().to_string(),
            error: format!(
                "{}: folders nested deeper than 32 levels (a symlink loop?)",
                dir.display()
            ),
        });
        return;
    }
    let mut entries: Vec<PathBuf> = match std::fs::read_dir(dir) {
        Ok(rd) => rd.filter_map(|e| e.ok().map(|e| e.path())).collect(),
        Err(e) => {
            errors.push(FileError {
                file: dir.display().to_string(),
                error: format!("{}: {e}", dir.display()),
            });
            return;
        }
    };
    entries.sort();
    for p in entries {
        let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if name.starts_with('.') {
            continue;
        }
        match std::fs::metadata(&p) {
            Ok(m) if m.is_dir() => walk(&p, files, errors, seen, depth + 1),
            Ok(_) => {
                let ext = p
                    .extension()
                    .and_then(|e| e.to_str())
                    .unwrap_or("")
                    .to_ascii_lowercase();
                if !SKIP_EXTENSIONS.contains(&ext.as_str()) {
                    files.push(p);
                }
            }
            Err(e) => errors.push(FileError {
                file: p.display().to_string(),
                error: format!("{}: {e}", p.display()),
            }),
        }
    }
}

/// What `inspect` shows of one file.
pub fn inspect_file(path: &Path, read: &ReadOptions) -> Result<InspectFile, String> {
    // Block by block: only each channel's extremes are kept, whatever the length.
    let mut reader = capture::open_blocks(path, read).map_err(|e| e.to_string())?;
    let mut ranges = vec![(f64::INFINITY, f64::NEG_INFINITY); reader.header().channels.len()];
    let mut block = capture::Block::default();
    let mut n = 0usize;
    while reader
        .next_block_into(&mut block)
        .map_err(|e| e.to_string())?
    {
        n += block.len();
        for ((lo, hi), part) in ranges.iter_mut().zip(&block.channels) {
            for &x in part.iter().filter(|x| x.is_finite()) {
                *lo = x.min(*lo);
                *hi = x.max(*hi);
            }
        }
    }
    let cap = reader.finish_with(Vec::new()).map_err(|e| e.to_string())?;
    let found = |v: f64| v.is_finite().then_some(v);
    Ok(InspectFile {
        file: path.display().to_string(),
        format: cap.format.to_string(),
        sample_interval_s: cap.sample_interval_s,
        n_samples: n,
        t0_s: cap.t0_s,
        channels: cap
            .channels
            .iter()
            .zip(ranges)
            .map(|(c, (lo, hi))| InspectChannel {
                name: c.name.clone(),
                unit: c.unit.clone(),
                min: found(lo),
                max: found(hi),
                // A rail not seen is stored as infinite by the readers.
                adc_min_v: c.adc.map(|a| a.min_v).filter(|v| v.is_finite()),
                adc_max_v: c.adc.map(|a| a.max_v).filter(|v| v.is_finite()),
            })
            .collect(),
        metadata: cap.metadata.clone(),
        notes: cap.notes.clone(),
        warnings: cap.warnings.clone(),
    })
}

/// `f` of each file, in order, the files in parallel on rayon's pool, one file per job:
/// with rayon's default splitting a core that finished its share sat idle while the other
/// went on through a run of files it could not hand over. On the pool even for one file:
/// a `par_iter` of one is not split, and rayon runs it on the calling thread, outside the
/// pool, where every block's `rayon::join` went to the pool and back through a wake-up,
/// the pool's threads sat spinning beside the reading thread on two cores, the scan of a
/// long capture waited for its windows asleep instead of measuring them, and the binary
/// readers could not read ahead (see `capture::runs`). Inside the pool: the 10 M-sample
/// CSV 0.234 -> 0.220 s, the 100 M-sample WAV 0.189 -> 0.174 s, 3 to 5 MiB less peak
/// memory (medians of 15 and 11 runs in turn); a folder the same.
fn each_file<'f, T: Sync, R: Send>(files: &'f [T], f: impl Fn(&'f T) -> R + Sync + Send) -> Vec<R> {
    rayon::scope(|_| files.par_iter().with_max_len(1).map(f).collect())
}

/// `inspect` over many files.
pub fn inspect_inputs(inputs: &[PathBuf], read: &ReadOptions) -> InspectDoc {
    let (files, mut errors) = collect_inputs(inputs);
    let results = each_file(&files, |f| (f, inspect_file(f, read)));
    let mut out = Vec::new();
    for (f, r) in results {
        match r {
            Ok(i) => out.push(i),
            Err(e) => errors.push(FileError {
                file: f.display().to_string(),
                error: e,
            }),
        }
    }
    InspectDoc {
        schema: INSPECT_SCHEMA,
        files: out,
        errors,
    }
}

/// Picks the switch-node and current channels of a capture. Channels taken as they are
/// (no `--signal`/`--current` expression) are moved out of `cap`, leaving their samples
/// empty there, so a long capture is never held twice.
fn pick_channels(
    cap: &mut Capture,
    settings: &Settings,
) -> Result<(capture::Channel, Option<capture::Channel>), String> {
    // Both selections are resolved before anything is moved, so each sees every channel.
    let signal = match &settings.signal {
        Some(s) => Some(capture::select_channel(cap, s).map_err(|e| e.to_string())?),
        None => None,
    };
    let current = match &settings.current {
        Some(s) => Some(capture::select_channel(cap, s).map_err(|e| e.to_string())?),
        None => None,
    };
    let signal = match signal {
        Some(c) => c,
        None => {
            let k = cap
                .channels
                .iter()
                .position(|c| !c.unit.eq_ignore_ascii_case("A"))
                .or((!cap.channels.is_empty()).then_some(0))
                .ok_or_else(|| format!("{}: the capture has no channels", cap.source.display()))?;
            take_channel(cap, k)
        }
    };
    let current = match (current, &settings.current) {
        (Some(c), _) => Some(c),
        (None, Some(_)) => None,
        (None, None) => cap
            .channels
            .iter()
            .position(|c| {
                c.unit.eq_ignore_ascii_case("A") && c.name != signal.name && !c.samples.is_empty()
            })
            .map(|k| take_channel(cap, k)),
    };
    Ok((signal, current))
}

/// Moves channel `k` out of the capture, leaving its name and unit with no samples.
fn take_channel(cap: &mut Capture, k: usize) -> capture::Channel {
    match cap.channels.get_mut(k) {
        Some(c) => capture::Channel {
            name: c.name.clone(),
            unit: c.unit.clone(),
            samples: std::mem::take(&mut c.samples),
            adc: c.adc,
        },
        None => capture::Channel {
            name: String::new(),
            unit: String::new(),
            samples: Vec::new(),
            adc: None,
        },
    }
}

/// Points kept per capture overview and per event wave for the plots.
const SKETCH_POINTS: usize = 2000;

/// Reads and measures one file; with `sketch`, also keeps a decimated copy of the trace for
/// the plots.
///
/// A capture longer than [`IN_MEMORY_SAMPLES`] samples per channel is measured
/// as it streams, in memory that does not grow with its length (see [`streamed`]).
pub fn measure_file(
    path: &Path,
    settings: &Settings,
    sketch: bool,
) -> Result<(CaptureDoc, Option<TraceSketch>), String> {
    let cap = match streamed::load(path, settings, sketch)? {
        streamed::Loaded::Whole(cap) => cap,
        streamed::Loaded::Measured(doc, sketch) => return Ok((*doc, sketch)),
    };
    measure_capture(path, cap, settings, sketch)
}

/// Measures a capture held in memory.
fn measure_capture(
    path: &Path,
    mut cap: Capture,
    settings: &Settings,
    sketch: bool,
) -> Result<(CaptureDoc, Option<TraceSketch>), String> {
    let n_samples = cap.n_samples();
    let (signal, current) = pick_channels(&mut cap, settings)?;
    let trace = Trace {
        v: &signal.samples,
        i: current.as_ref().map(|c| c.samples.as_slice()),
        dt_s: cap.sample_interval_s,
        t0_s: cap.t0_s,
        adc: signal.adc,
    };
    let mut m = measure::measure_trace(&trace, &settings.measure)
        .map_err(|e| format!("{}: channel {}: {e}", path.display(), signal.name))?;
    let worst_fit = if settings.no_fit {
        None
    } else {
        fit_events(&mut m, &signal, cap.sample_interval_s, cap.t0_s, settings)
    };
    let mut warnings = cap.warnings.clone();
    warnings.extend(m.warnings.iter().cloned());
    let sketch = sketch.then(|| {
        let mut sk = TraceSketch::build(
            &path.display().to_string(),
            &signal.samples,
            cap.sample_interval_s,
            cap.t0_s,
            &m.windows,
            &m.events,
            SKETCH_POINTS,
        );
        sk.label = settings.label.clone();
        sk.fit = worst_fit.map(|(k, fit)| {
            fit_plot(
                &path.display().to_string(),
                &m.events[k],
                m.windows[k],
                &fit,
                &signal.samples,
                0,
                signal.adc,
                cap.sample_interval_s,
                cap.t0_s,
            )
        });
        sk
    });
    let doc = capture_doc(
        path,
        settings,
        &cap,
        n_samples,
        signal.name.clone(),
        current.map(|c| c.name),
        m,
        warnings,
    );
    Ok((doc, sketch))
}

/// The document of one measured capture: `header` gives its format and time base, the
/// measurement its levels and events.
#[allow(clippy::too_many_arguments)]
fn capture_doc(
    path: &Path,
    settings: &Settings,
    header: &Capture,
    n_samples: usize,
    signal: String,
    current: Option<String>,
    m: measure::CaptureMeasurement,
    mut warnings: Vec<String>,
) -> CaptureDoc {
    warnings.extend(probe_place_warning(current.as_deref(), &settings.measure));
    CaptureDoc {
        file: path.display().to_string(),
        label: settings.label.clone(),
        format: header.format.to_string(),
        sample_interval_s: header.sample_interval_s,
        n_samples,
        t0_s: header.t0_s,
        signal,
        current,
        polarity: m.polarity,
        v_on: m.v_on,
        v_off: m.v_off,
        warnings,
        events: m.events,
    }
}

/// A current channel named for the coil (`i_coil`, `Coil current`) measured as the switch's
/// current: with a clamp across the coil the coil current keeps flowing in the clamp, not
/// the switch, so the switch energies would count the clamp's energy too (on the zener
/// sample captures, 1.2 mJ against the coil's 0.98 mJ stored energy).
fn probe_place_warning(current: Option<&str>, m: &MeasureOptions) -> Option<String> {
    let name = current?;
    (m.current_through == measure::CurrentThrough::Switch
        && name.to_ascii_lowercase().contains("coil"))
    .then(|| {
        format!(
            "the current channel '{name}' is named for the coil, but is measured as the switch current (--current-through switch, the default): if the probe is on the coil, give --current-through coil, or the switch energies count the clamp's share too"
        )
    })
}

/// `measure` over many inputs: files in parallel, results in input order. `progress` is
/// called once per finished file.
pub fn measure_inputs(
    inputs: &[PathBuf],
    settings: &Settings,
    progress: &(dyn Fn() + Sync),
) -> MeasureDoc {
    measure_inputs_sketched(inputs, settings, false, progress).0
}

/// [`measure_inputs`] that also keeps one plot sketch per capture when `sketch` is set.
pub fn measure_inputs_sketched(
    inputs: &[PathBuf],
    settings: &Settings,
    sketch: bool,
    progress: &(dyn Fn() + Sync),
) -> (MeasureDoc, Vec<TraceSketch>) {
    let (files, mut errors) = collect_inputs(inputs);
    let results = each_file(&files, |f| {
        // Checked between files; files under way stop at their next block.
        if settings.stopped() {
            return None;
        }
        let r = measure_file(f, settings, sketch);
        if r.is_err() && settings.stopped() {
            return None;
        }
        progress();
        Some((f, r))
    });
    let mut captures = Vec::new();
    let mut sketches = Vec::new();
    for (f, r) in results.into_iter().flatten() {
        match r {
            Ok((c, sk)) => {
                captures.push(c);
                sketches.extend(sk);
            }
            Err(e) => errors.push(FileError {
                file: f.display().to_string(),
                error: e,
            }),
        }
    }
    let summary = summarize(&captures, settings);
    let doc = MeasureDoc {
        schema: MEASURE_SCHEMA,
        captures,
        summary,
        errors,
    };
    (doc, sketches)
}

/// `measure --from-table`: the summary of event tables written by earlier runs (their
/// `events.parquet`), possibly on many machines, and per-file figures from a grouped query
/// over each table's rows.
#[cfg(feature = "parquet")]
pub struct TableRun {
    pub doc: MeasureDoc,
    pub groups: Vec<crate::report::parquet::FileGroup>,
}

/// Reads event tables (files, or folders searched for `*.parquet`) in parallel, rebuilds
/// each capture's events and summarises them as [`measure_inputs`] does. A table that
/// cannot be read is listed under `errors`; the others are summarised. A file named in two
/// tables (the same path measured on two machines) stays two captures, each named with its
/// table.
#[cfg(feature = "parquet")]
pub fn measure_from_tables(inputs: &[PathBuf], settings: &Settings) -> TableRun {
    use crate::report::parquet;
    let (tables, mut errors) = parquet::collect_tables(inputs);
    let results: Vec<_> = tables
        .par_iter()
        .map(|path| {
            let table = parquet::read_events_table(path)?;
            let groups = parquet::file_groups(&table)?;
            // The grouped query and the rebuilt captures read the same rows.
            let rows: usize = table.captures.iter().map(|c| c.events.len()).sum();
            let grouped: usize = groups.iter().map(|g| g.n_events).sum();
            if rows != grouped {
                return Err(parquet::TableError {
                    file: table.source.clone(),
                    message: format!("{rows} events rebuilt but {grouped} rows grouped"),
                });
            }
            Ok((table.source, table.captures, groups))
        })
        .collect();
    let mut captures: Vec<(String, CaptureDoc)> = Vec::new();
    let mut groups = Vec::new();
    for (path, r) in tables.iter().zip(results) {
        match r {
            Ok((source, caps, g)) => {
                captures.extend(caps.into_iter().map(|c| (source.clone(), c)));
                groups.extend(g);
            }
            Err(e) => errors.push(FileError {
                file: path.display().to_string(),
                error: e.to_string(),
            }),
        }
    }
    let mut seen: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    for (_, c) in &captures {
        *seen.entry(c.file.clone()).or_default() += 1;
    }
    let captures: Vec<CaptureDoc> = captures
        .into_iter()
        .map(|(source, mut c)| {
            if seen.get(&c.file).is_some_and(|&n| n > 1) {
                c.file = format!("{} [from {source}]", c.file);
            }
            c
        })
        .collect();
    let summary = summarize(&captures, settings);
    TableRun {
        doc: MeasureDoc {
            schema: MEASURE_SCHEMA,
            captures,
            summary,
            errors,
        },
        groups,
    }
}

/// Fits the damped RLC model (or an exponential decay) to every event and folds the results
/// into the event: refined damping, Q, node capacitance with `--inductance`, and the
/// reconstructed peak of clipped events. Returns the fit of the capture's worst event.
fn fit_events(
    m: &mut measure::CaptureMeasurement,
    signal: &capture::Channel,
    dt_s: f64,
    t0_s: f64,
    settings: &Settings,
) -> Option<(usize, crate::model::EventFit)> {
    let ctx = model_context(m.polarity, m.v_on, signal.adc, settings);
    let mut worst: Option<(usize, crate::model::EventFit)> = None;
    let mut worst_stress = f64::NEG_INFINITY;
    // Events are fitted independently, on all cores; the results are applied in order.
    let fits: Vec<Option<crate::model::EventFit>> = m
        .events
        .par_iter()
        .zip(&m.windows)
        .map(|(event, &(start, end))| {
            let window = signal.samples.get(start..end)?;
            let t_start_s = t0_s + start as f64 * dt_s;
            crate::model::fit_event(window, dt_s, t_start_s, event, &ctx)
        })
        .collect();
    for (k, (event, fit)) in m.events.iter_mut().zip(fits).enumerate() {
        if let Some(fit) = fit {
            crate::model::apply_fit(event, &fit, &ctx);
            if event.switch_stress_v > worst_stress {
                worst_stress = event.switch_stress_v;
                worst = Some((k, fit));
            }
        }
    }
    worst
}

/// What the model fit needs to know of a capture: the body-diode clip level beyond the
/// rail the spike points away from, the digitiser range, `--inductance`.
fn model_context(
    polarity: measure::Polarity,
    v_on: f64,
    adc: Option<capture::AdcRange>,
    settings: &Settings,
) -> crate::model::ModelContext {
    let clip_level_v = Some(match polarity {
        measure::Polarity::Up => -BODY_DIODE_CLIP_V,
        measure::Polarity::Down => v_on + BODY_DIODE_CLIP_V,
    });
    crate::model::ModelContext {
        inductance_h: settings.measure.inductance_h,
        adc,
        clip_level_v,
        body_diode_v: None,
    }
}

/// The fit plot of event `k`: samples from shortly before the edge to the end of the fitted
/// stretch, and the model over the stretch it was fitted to, times from the edge.
/// `samples` start at absolute index `first`.
#[allow(clippy::too_many_arguments)]
fn fit_plot(
    file: &str,
    event: &Event,
    window: (usize, usize),
    fit: &crate::model::EventFit,
    samples: &[f64],
    first: usize,
    adc: Option<capture::AdcRange>,
    dt_s: f64,
    t0_s: f64,
) -> crate::report::FitPlot {
    let (start, end) = window;
    let sample = |i: usize| i.checked_sub(first).and_then(|k| samples.get(k)).copied();
    let t_edge = event.t_edge_s;
    let from = ((t_edge - t0_s) / dt_s - 8.0).max(start as f64) as usize;
    let to = (((fit.fit_end_s - t0_s) / dt_s).ceil() as usize + 1).min(end);
    let stride = ((to.saturating_sub(from)) / SKETCH_POINTS).max(1);
    let t_of = |i: usize| t0_s + i as f64 * dt_s - t_edge;
    let measured: Vec<(f64, f64)> = (from..to)
        .step_by(stride)
        .filter_map(|i| sample(i).map(|v| (t_of(i), v)))
        .filter(|p| p.1.is_finite())
        .collect();
    let n_model = 1000;
    let span = fit.fit_end_s - fit.fit_start_s;
    let model: Vec<(f64, f64)> = (0..=n_model)
        .map(|j| fit.fit_start_s + span * j as f64 / n_model as f64)
        .map(|t| (t - t_edge, fit.curve.value(t - fit.t_origin_s)))
        .filter(|p| p.1.is_finite())
        .collect();
    // Stretches at the digitiser's top rail, where the samples say nothing of the peak.
    let rail = adc.map(|a| a.max_v).filter(|v| v.is_finite());
    let mut clipped_spans = Vec::new();
    if let Some(rail) = rail {
        let mut run: Option<usize> = None;
        for i in from..to {
            let at_rail = sample(i).is_some_and(|v| v >= rail);
            match (at_rail, run) {
                (true, None) => run = Some(i),
                (false, Some(r)) => {
                    clipped_spans.push((t_of(r), t_of(i)));
                    run = None;
                }
                _ => {}
            }
        }
        if let Some(r) = run {
            clipped_spans.push((t_of(r), t_of(to)));
        }
    }
    let peak_est = fit.peak.as_ref().map(|p| crate::report::PeakEstimate {
        t_s: event.t_peak_s,
        v: p.peak_v,
        lower_v: Some(p.lower_v),
        upper_v: Some(p.upper_v),
    });
    crate::report::FitPlot {
        title: format!(
            "{file}, event {}: samples and the fitted model",
            event.index
        ),
        measured,
        model,
        model_name: match &fit.curve {
            crate::model::FitCurve::DampedSine(_) => "damped RLC ring".to_string(),
            crate::model::FitCurve::Exponential(_) => "exponential decay".to_string(),
        },
        clipped_spans,
        peak_est,
    }
}

/// The per-event metrics that summaries and comparisons cover, with their accessors.
/// Reads one metric off an event.
pub type MetricGetter = fn(&Event) -> Option<f64>;

pub const METRICS: &[(&str, MetricGetter)] = &[
    ("switch_stress_v", |e| Some(e.switch_stress_v)),
    ("peak_v", |e| Some(e.peak_v)),
    ("overshoot_v", |e| Some(e.overshoot_v)),
    ("overshoot_pct", |e| e.overshoot_pct),
    ("rise_time_s", |e| e.rise_time_s),
    ("slew_v_per_s", |e| e.slew_v_per_s),
    ("spike_width_s", |e| e.spike_width_s),
    ("decay_time_s", |e| e.decay_time_s),
    ("ring_freq_hz", |e| e.ring_freq_hz),
    ("damping_ratio", |e| e.damping_ratio),
    ("settle_time_s", |e| e.settle_time_s),
    ("volt_seconds", |e| Some(e.volt_seconds)),
    ("energy_j", |e| e.energy_j),
    ("clamp_energy_j", |e| e.clamp_energy_j),
    ("energy_to_peak_j", |e| e.energy_to_peak_j),
    ("coil_energy_j", |e| e.coil_energy_j),
    ("c_par_f", |e| e.c_par_f),
    ("c_par_slope_f", |e| e.c_par_slope_f),
    ("peak_v_est", |e| e.peak_v_est),
];

/// Values of one metric over every event, in input order, leaving out events without it.
pub fn metric_values<'a>(events: impl Iterator<Item = &'a Event>, get: MetricGetter) -> Vec<f64> {
    events.filter_map(get).filter(|v| v.is_finite()).collect()
}

/// Counts, worst event, per-metric summaries, extreme-value projection and rating margin
/// over every event.
pub fn summarize(captures: &[CaptureDoc], settings: &Settings) -> Summary {
    let mut s = Summary::default();
    let all = || captures.iter().flat_map(|c| c.events.iter());
    for c in captures {
        s.n_events += c.events.len();
        s.n_clipped += c.events.iter().filter(|e| e.clipped).count();
        for e in &c.events {
            let worse = s
                .worst
                .as_ref()
                .is_none_or(|w| e.switch_stress_v > w.switch_stress_v);
            if worse {
                s.worst = Some(crate::document::Worst {
                    file: c.file.clone(),
                    index: e.index,
                    t_edge_s: e.t_edge_s,
                    peak_v: e.peak_v,
                    switch_stress_v: e.switch_stress_v,
                });
            }
        }
    }
    for (name, get) in METRICS {
        let values = metric_values(all(), *get);
        if !values.is_empty() {
            s.metrics
                .insert(name.to_string(), crate::stats::summarize(&values));
        }
    }
    let (ev, p_over) = extreme_value(captures, settings);
    s.extreme_value = ev;
    if let Some(rating_v) = settings.measure.rating_v {
        let stresses = metric_values(all(), |e| Some(e.switch_stress_v));
        s.rating = crate::stats::rating_margin(&stresses, rating_v, p_over);
    }
    s
}

/// Extreme-value projection of switch stress (Coles 2001): block maxima of `--block N`
/// events, or one block per capture (its largest event) by default, which suits a folder of
/// single-shot captures as well as long multi-event records. Returns the JSON block and the
/// probability per switching of exceeding the rating.
fn extreme_value(
    captures: &[CaptureDoc],
    settings: &Settings,
) -> (Option<serde_json::Value>, Option<f64>) {
    let n_events: usize = captures.iter().map(|c| c.events.len()).sum();
    if n_events == 0 {
        return (None, None);
    }
    let lifetimes: Vec<f64> = if settings.lifetimes.is_empty() {
        vec![DEFAULT_LIFETIME]
    } else {
        settings.lifetimes.clone()
    };
    let rating = settings.measure.rating_v;
    let report = match settings.block {
        Some(block) => {
            let values: Vec<f64> = captures
                .iter()
                .flat_map(|c| c.events.iter().map(|e| e.switch_stress_v))
                .collect();
            crate::stats::extreme_value(&values, block.max(1), &lifetimes, rating)
        }
        None => {
            // One block per capture (its largest event); a block then holds the mean number
            // of events per capture, so return periods still count switchings.
            let values: Vec<f64> = captures
                .iter()
                .flat_map(|c| c.events.iter().map(|e| e.switch_stress_v))
                .collect();
            let maxima: Vec<f64> = captures
                .iter()
                .filter_map(|c| {
                    c.events
                        .iter()
                        .map(|e| e.switch_stress_v)
                        .filter(|v| v.is_finite())
                        .reduce(f64::max)
                })
                .collect();
            let per_block = (n_events as f64 / maxima.len().max(1) as f64)
                .round()
                .max(1.0);
            crate::stats::extreme_value_of_maxima(
                &values,
                &maxima,
                per_block as usize,
                &lifetimes,
                rating,
            )
        }
    };
    let p_over = report.p_exceed_rating_per_event;
    (serde_json::to_value(&report).ok(), p_over)
}

/// The reason a `--fail-above` or `--fail-energy` limit was crossed, if one was.
pub fn limit_crossed(doc: &MeasureDoc, settings: &Settings) -> Option<String> {
    let events = doc
        .captures
        .iter()
        .flat_map(|c| c.events.iter().map(move |e| (c, e)));
    for (c, e) in events {
        if let Some(limit) = settings.fail_above_v {
            if e.switch_stress_v > limit {
                return Some(format!(
                    "{} event {}: switch stress {:.1} V exceeds --fail-above {:.1} V",
                    c.file, e.index, e.switch_stress_v, limit
                ));
            }
        }
        if let (Some(limit), Some(energy)) = (settings.fail_energy_j, e.energy_j) {
            if energy > limit {
                return Some(format!(
                    "{} event {}: switch energy {:.3e} J exceeds --fail-energy {:.3e} J",
                    c.file, e.index, energy, limit
                ));
            }
        }
    }
    None
}

/// The main ring of a single-event capture (for the added-capacitance method).
pub fn ring_of_file(
    path: &Path,
    read: &ReadOptions,
    signal: Option<&str>,
) -> Result<crate::model::RingMeasurement, String> {
    let mut cap = capture::read_capture(path, read).map_err(|e| e.to_string())?;
    let settings = Settings {
        read: read.clone(),
        signal: signal.map(str::to_string),
        ..Settings::default()
    };
    let (ch, _) = pick_channels(&mut cap, &settings)?;
    let ctx = crate::model::ModelContext {
        adc: ch.adc,
        body_diode_v: Some(BODY_DIODE_CLIP_V),
        ..crate::model::ModelContext::default()
    };
    crate::model::measure_ring(&ch.samples, cap.sample_interval_s, &ctx).map_err(|e| {
        format!(
            "{}: channel {}: no ringing to measure after the main spike ({e})",
            path.display(),
            ch.name
        )
    })
}

/// `kickscan parasitics`: both captures' rings and the added-capacitance method.
pub fn parasitics_of_files(
    bare: &Path,
    loaded: &Path,
    read: &ReadOptions,
    signal: Option<&str>,
    inputs: &crate::model::ParasiticsInputs,
) -> Result<crate::model::ParasiticsDoc, String> {
    let b = ring_of_file(bare, read, signal)?;
    let l = ring_of_file(loaded, read, signal)?;
    crate::model::parasitics_doc(&b, &l, inputs).map_err(|e| {
        format!(
            "{} and {}: added-capacitance method: {e}",
            bare.display(),
            loaded.display()
        )
    })
}

/// Suppression advice for the measured coil, when `--inductance`, the supply and the coil
/// current at turn-off (a current channel or `--coil-current`) are known. The peak limit is
/// the derating line of `--rating` (80 %, common practice); the ring damper is sized from the
/// median node capacitance the events gave.
pub fn suppression_advice(
    doc: &MeasureDoc,
    settings: &Settings,
) -> Option<crate::model::advice::Advice> {
    let m = &settings.measure;
    let l = m.inductance_h?;
    let events = || doc.captures.iter().flat_map(|c| c.events.iter());
    let i0 = m
        .coil_current_a
        .or_else(|| crate::stats::median(&metric_values(events(), |e| e.i0_a.map(f64::abs))))?;
    let supply = m
        .supply_v
        .or_else(|| crate::stats::median(&metric_values(events(), |e| Some(e.v_off))))?;
    let c_par = crate::stats::median(&metric_values(events(), |e| e.c_par_f));
    Some(crate::model::advice::advise(
        &crate::model::advice::AdviceInputs {
            ring_l_h: c_par.map(|_| l),
            c_par_f: c_par,
            coil_l_h: Some(l),
            coil_current_a: Some(i0),
            supply_v: Some(supply),
            switching_rate_hz: settings.switching_rate_hz,
            peak_limit_v: m.rating_v.map(|r| crate::stats::DERATING_FRACTION * r),
        },
    ))
}

#[cfg(test)]
mod tests {
    use rayon::prelude::*;

    /// Called from a thread outside the pool (a test's own, as `main` is), a file is
    /// measured on one of the pool's threads, where one file alone would otherwise have
    /// run on the calling thread (see [`super::each_file`]).
    #[test]
    fn one_file_is_measured_on_the_pool() {
        assert_eq!(rayon::current_thread_index(), None);
        let files = [1];
        let seen = super::each_file(&files, |_| rayon::current_thread_index());
        assert!(seen[0].is_some(), "ran outside the pool");
        let outside: Vec<Option<usize>> = files
            .par_iter()
            .with_max_len(1)
            .map(|_| rayon::current_thread_index())
            .collect();
        // What the helper is there for: rayon runs a job of one on the caller.
        assert_eq!(outside, [None]);
    }
}
