//! `events.parquet`: the events table of `events.csv` (same rows, same columns, same names)
//! as a Parquet file, and the way back from such tables to per-capture events for
//! `measure --from-table`, so captures measured on many machines can be summarised together.
//!
//! Columns are typed from the event serialisation: numbers as 64-bit floats (`index` as a
//! 64-bit integer), flags as booleans, names as strings, the `c_par_slope_range_v` pair as a
//! list of two floats; a missing value is a Parquet null, never NaN. What a table cannot hold
//! row by row (each capture's format, sample interval, levels and warnings, including
//! captures without events) travels as JSON in the file's key-value metadata under
//! [`KEY_CAPTURES`].

use std::collections::HashMap;
use std::io::Cursor;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};

use crate::document::{CaptureDoc, MeasureDoc};
use crate::measure::{Event, Polarity};

use super::csv::{event_rows, EventRow};
use super::format::{count, eng_opt};

/// Version of the table layout, stored under [`KEY_SCHEMA`].
pub const TABLE_SCHEMA: &str = "kickscan.events/1";
/// Metadata key of the table layout version.
pub const KEY_SCHEMA: &str = "kickscan.schema";
/// Metadata key of the capture list (JSON array of [`CaptureHead`]).
pub const KEY_CAPTURES: &str = "kickscan.captures";

/// Why an events table could not be written or read.
#[derive(Debug, thiserror::Error)]
#[error("{file}: {message}")]
pub struct TableError {
    /// The table (or "events.parquet" while writing one).
    pub file: String,
    pub message: String,
}

impl TableError {
    fn new(file: &str, message: impl Into<String>) -> Self {
        TableError {
            file: file.to_string(),
            message: message.into(),
        }
    }
}

/// A capture as the table's metadata records it: everything of [`CaptureDoc`] but the
/// events, which are the rows.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct CaptureHead {
    pub file: String,
    #[serde(default)]
    pub label: Option<String>,
    pub format: String,
    pub sample_interval_s: f64,
    pub n_samples: usize,
    pub t0_s: f64,
    pub signal: String,
    #[serde(default)]
    pub current: Option<String>,
    pub polarity: Polarity,
    pub v_on: f64,
    pub v_off: f64,
    #[serde(default)]
    pub warnings: Vec<String>,
}

impl CaptureHead {
    fn of(c: &CaptureDoc) -> Self {
        CaptureHead {
            file: c.file.clone(),
            label: c.label.clone(),
            format: c.format.clone(),
            sample_interval_s: c.sample_interval_s,
            n_samples: c.n_samples,
            t0_s: c.t0_s,
            signal: c.signal.clone(),
            current: c.current.clone(),
            polarity: c.polarity,
            v_on: c.v_on,
            v_off: c.v_off,
            warnings: c.warnings.clone(),
        }
    }

    fn into_doc(self, events: Vec<Event>) -> CaptureDoc {
        CaptureDoc {
            file: self.file,
            label: self.label,
            format: self.format,
            sample_interval_s: self.sample_interval_s,
            n_samples: self.n_samples,
            t0_s: self.t0_s,
            signal: self.signal,
            current: self.current,
            polarity: self.polarity,
            v_on: self.v_on,
            v_off: self.v_off,
            warnings: self.warnings,
            events,
        }
    }
}

/// The Parquet type a column gets.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
    Float,
    Int,
    Bool,
    Text,
    FloatList,
}

/// Event fields that are not plain numbers, for columns where every row is null (the JSON
/// of a null says nothing of its type).
const TEXT_FIELDS: &[&str] = &["polarity", "ring_kind", "fit_model"];
const LIST_FIELDS: &[&str] = &["c_par_slope_range_v"];

fn kind_of(name: &str, rows: &[EventRow]) -> Kind {
    let mut seen: Option<Kind> = None;
    for (_, m) in rows {
        let k = match m.get(name) {
            None | Some(Value::Null) => continue,
            Some(Value::Bool(_)) => Kind::Bool,
            Some(Value::String(_)) => Kind::Text,
            Some(Value::Array(_)) => Kind::FloatList,
            Some(Value::Number(n)) if n.is_i64() || n.is_u64() => Kind::Int,
            Some(Value::Number(_)) => Kind::Float,
            Some(Value::Object(_)) => Kind::Text,
        };
        seen = Some(match (seen, k) {
            (None, k) => k,
            (Some(a), b) if a == b => a,
            // Integers and floats mixed: floats hold both.
            (Some(Kind::Int), Kind::Float) | (Some(Kind::Float), Kind::Int) => Kind::Float,
            _ => Kind::Text,
        });
    }
    seen.unwrap_or(if TEXT_FIELDS.contains(&name) {
        Kind::Text
    } else if LIST_FIELDS.contains(&name) {
        Kind::FloatList
    } else {
        Kind::Float
    })
}

fn text_of(v: &Value) -> Option<String> {
    match v {
        Value::Null => None,
        Value::String(s) => Some(s.clone()),
        other => Some(other.to_string()),
    }
}

fn column_of(name: &str, kind: Kind, rows: &[EventRow]) -> Column {
    let cells = rows
        .iter()
        .map(|(_, m)| m.get(name).unwrap_or(&Value::Null));
    let series = match kind {
        Kind::Float => {
            let v: Vec<Option<f64>> = cells.map(Value::as_f64).collect();
            Series::new(name.into(), v)
        }
        Kind::Int => {
            let v: Vec<Option<i64>> = cells.map(Value::as_i64).collect();
            Series::new(name.into(), v)
        }
        Kind::Bool => {
            let v: Vec<Option<bool>> = cells.map(Value::as_bool).collect();
            Series::new(name.into(), v)
        }
        Kind::Text => {
            let v: Vec<Option<String>> = cells.map(text_of).collect();
            Series::new(name.into(), v)
        }
        Kind::FloatList => {
            let mut b = ListPrimitiveChunkedBuilder::<Float64Type>::new(
                name.into(),
                rows.len(),
                2 * rows.len(),
                DataType::Float64,
            );
            for cell in cells {
                match cell.as_array() {
                    Some(a) => {
                        let xs: Vec<Option<f64>> = a.iter().map(Value::as_f64).collect();
                        b.append_iter(xs.into_iter());
                    }
                    None => b.append_null(),
                }
            }
            b.finish().into_series()
        }
    };
    series.into_column()
}

/// The events of `doc` as a Parquet file: one row per event, `file` then the columns of
/// `events.csv`, the captures in the metadata.
pub fn events_parquet(doc: &MeasureDoc) -> Result<Vec<u8>, TableError> {
    const NAME: &str = "events.parquet";
    let (names, rows) = event_rows(doc).map_err(|e| TableError::new(NAME, e.to_string()))?;
    let mut columns = Vec::with_capacity(names.len() + 1);
    let files: Vec<&str> = rows.iter().map(|(f, _)| *f).collect();
    columns.push(Series::new("file".into(), files).into_column());
    for name in &names {
        columns.push(column_of(name, kind_of(name, &rows), &rows));
    }
    let mut frame = DataFrame::new(rows.len(), columns)
        .map_err(|e| TableError::new(NAME, format!("building the table: {e}")))?;
    let heads: Vec<CaptureHead> = doc.captures.iter().map(CaptureHead::of).collect();
    let heads = serde_json::to_string(&heads).map_err(|e| TableError::new(NAME, e.to_string()))?;
    let metadata = KeyValueMetadata::from_static(vec![
        (KEY_SCHEMA.to_string(), TABLE_SCHEMA.to_string()),
        (KEY_CAPTURES.to_string(), heads),
    ]);
    let mut out = Vec::new();
    ParquetWriter::new(&mut out)
        .with_key_value_metadata(Some(metadata))
        .finish(&mut frame)
        .map_err(|e| TableError::new(NAME, format!("writing Parquet: {e}")))?;
    Ok(out)
}

/// One events table read back: its captures with their events, and the rows as a frame for
/// grouped summaries.
pub struct EventTable {
    /// Where the table came from (a path, or a name given by the caller).
    pub source: String,
    pub captures: Vec<CaptureDoc>,
    pub frame: DataFrame,
}

/// Reads an events table from a file.
pub fn read_events_table(path: &Path) -> Result<EventTable, TableError> {
    let source = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| TableError::new(&source, e.to_string()))?;
    events_from_parquet(&bytes, &source)
}

/// Reads an events table from its bytes; `source` names it in messages.
pub fn events_from_parquet(bytes: &[u8], source: &str) -> Result<EventTable, TableError> {
    // Parquet starts and ends with these four bytes (Apache Parquet file format).
    const MAGIC: &[u8] = b"PAR1";
    if bytes.len() < 12 || !bytes.starts_with(MAGIC) || !bytes.ends_with(MAGIC) {
        return Err(TableError::new(
            source,
            "not a Parquet file (expected PAR1 at the start and end)",
        ));
    }
    // The decoder is a large third-party library: a corrupt file must give an error for this
    // table, never stop a batch of them.
    let read = std::panic::catch_unwind(|| {
        let mut reader = ParquetReader::new(Cursor::new(bytes)).set_rechunk(true);
        let kv = reader
            .get_metadata()?
            .key_value_metadata
            .clone()
            .unwrap_or_default();
        let frame = reader.finish()?;
        PolarsResult::Ok((kv, frame))
    });
    let (kv, frame) = match read {
        Ok(Ok(r)) => r,
        Ok(Err(e)) => return Err(TableError::new(source, format!("reading Parquet: {e}"))),
        Err(_) => {
            return Err(TableError::new(
                source,
                "reading Parquet: the decoder failed on this file (corrupt?)",
            ))
        }
    };
    let meta = |key: &str| {
        kv.iter()
            .find(|k| k.key == key)
            .and_then(|k| k.value.clone())
    };
    if let Some(schema) = meta(KEY_SCHEMA) {
        if schema != TABLE_SCHEMA {
            return Err(TableError::new(
                source,
                format!("table layout {schema}; this kickscan reads {TABLE_SCHEMA}"),
            ));
        }
    }
    let heads: Option<Vec<CaptureHead>> = match meta(KEY_CAPTURES) {
        Some(text) => Some(
            serde_json::from_str(&text)
                .map_err(|e| TableError::new(source, format!("metadata {KEY_CAPTURES}: {e}")))?,
        ),
        None => None,
    };
    let captures = rebuild_captures(&frame, heads, source)?;
    Ok(EventTable {
        source: source.to_string(),
        captures,
        frame,
    })
}

/// One column's cells, typed, for reading rows back.
enum Cells<'a> {
    Bool(&'a BooleanChunked),
    Text(&'a StringChunked),
    Int(Int64Chunked),
    Float(Float64Chunked),
    List(&'a ListChunked),
    Null,
}

impl Cells<'_> {
    fn of<'a>(c: &'a Column, source: &str) -> Result<Cells<'a>, TableError> {
        let bad = |e: PolarsError| TableError::new(source, format!("column {}: {e}", c.name()));
        let dt = c.dtype();
        Ok(match dt {
            DataType::Boolean => Cells::Bool(c.bool().map_err(bad)?),
            DataType::String => Cells::Text(c.str().map_err(bad)?),
            DataType::Null => Cells::Null,
            DataType::List(_) => Cells::List(c.list().map_err(bad)?),
            _ if dt.is_integer() => Cells::Int(
                c.cast(&DataType::Int64)
                    .map_err(bad)?
                    .i64()
                    .map_err(bad)?
                    .clone(),
            ),
            _ if dt.is_float() => Cells::Float(
                c.cast(&DataType::Float64)
                    .map_err(bad)?
                    .f64()
                    .map_err(bad)?
                    .clone(),
            ),
            other => {
                return Err(TableError::new(
                    source,
                    format!(
                        "column {}: type {other} is not one an events table uses",
                        c.name()
                    ),
                ))
            }
        })
    }

    fn get(&self, i: usize) -> Value {
        let float = |x: Option<f64>| {
            x.and_then(serde_json::Number::from_f64)
                .map_or(Value::Null, Value::Number)
        };
        match self {
            Cells::Bool(ca) => ca.get(i).map_or(Value::Null, Value::Bool),
            Cells::Text(ca) => ca.get(i).map_or(Value::Null, |s| Value::String(s.into())),
            Cells::Int(ca) => ca.get(i).map_or(Value::Null, Value::from),
            Cells::Float(ca) => float(ca.get(i)),
            Cells::List(ca) => match ca.get_as_series(i) {
                None => Value::Null,
                Some(s) => match s.cast(&DataType::Float64) {
                    Ok(s) => match s.f64() {
                        Ok(f) => Value::Array(f.iter().map(float).collect()),
                        Err(_) => Value::Null,
                    },
                    Err(_) => Value::Null,
                },
            },
            Cells::Null => Value::Null,
        }
    }
}

/// Groups the rows by file into captures: in the metadata's order with its details, or, for
/// a table without them, in order of first appearance with what the events tell.
fn rebuild_captures(
    frame: &DataFrame,
    heads: Option<Vec<CaptureHead>>,
    source: &str,
) -> Result<Vec<CaptureDoc>, TableError> {
    let file_col = frame
        .column("file")
        .map_err(|_| TableError::new(source, "no column `file`: not an events table"))?;
    let files = file_col
        .str()
        .map_err(|_| TableError::new(source, "column `file` does not hold text"))?;
    let cells: Vec<(String, Cells)> = frame
        .columns()
        .iter()
        .filter(|c| c.name().as_str() != "file")
        .map(|c| Ok((c.name().to_string(), Cells::of(c, source)?)))
        .collect::<Result<_, TableError>>()?;

    let from_metadata = heads.is_some();
    let mut heads = heads.unwrap_or_default();
    let mut slot: HashMap<String, usize> = HashMap::new();
    for (k, h) in heads.iter().enumerate() {
        slot.entry(h.file.clone()).or_insert(k);
    }
    let mut events: Vec<Vec<Event>> = vec![Vec::new(); heads.len()];
    for i in 0..frame.height() {
        let row = i + 1;
        let file = files
            .get(i)
            .ok_or_else(|| TableError::new(source, format!("row {row}: no file name")))?;
        let mut m = Map::with_capacity(cells.len());
        for (name, c) in &cells {
            m.insert(name.clone(), c.get(i));
        }
        let event: Event = serde_json::from_value(Value::Object(m))
            .map_err(|e| TableError::new(source, format!("row {row} ({file}): {e}")))?;
        let k = match slot.get(file) {
            Some(&k) => k,
            None => {
                heads.push(head_from_event(file, &event, from_metadata));
                events.push(Vec::new());
                slot.insert(file.to_string(), heads.len() - 1);
                heads.len() - 1
            }
        };
        if let Some(list) = events.get_mut(k) {
            list.push(event);
        }
    }
    let mut out = Vec::with_capacity(heads.len());
    for (h, ev) in heads.into_iter().zip(events) {
        out.push(h.into_doc(ev));
    }
    // Levels of a capture known only from its events: the median over them.
    for c in out.iter_mut().filter(|c| c.format == NO_METADATA_FORMAT) {
        let on: Vec<f64> = c.events.iter().map(|e| e.v_on).collect();
        let off: Vec<f64> = c.events.iter().map(|e| e.v_off).collect();
        c.v_on = crate::levels::median(&on).unwrap_or(c.v_on);
        c.v_off = crate::levels::median(&off).unwrap_or(c.v_off);
    }
    Ok(out)
}

/// `format` of a capture rebuilt from rows alone.
const NO_METADATA_FORMAT: &str = "events table";

fn head_from_event(file: &str, e: &Event, table_had_metadata: bool) -> CaptureHead {
    let why = if table_had_metadata {
        "the table's capture list does not name this file"
    } else {
        "the table carries no capture list"
    };
    CaptureHead {
        file: file.to_string(),
        label: None,
        format: NO_METADATA_FORMAT.to_string(),
        sample_interval_s: 0.0,
        n_samples: 0,
        t0_s: 0.0,
        signal: String::new(),
        current: None,
        polarity: e.polarity,
        v_on: e.v_on,
        v_off: e.v_off,
        warnings: vec![format!(
            "rebuilt from its events alone ({why}): sample interval, record length and channels unknown"
        )],
    }
}

/// Per-file figures of an events table, worked out by a grouped query over its rows.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FileGroup {
    pub table: String,
    pub file: String,
    pub n_events: usize,
    pub n_clipped: usize,
    pub max_switch_stress_v: Option<f64>,
    /// Median (linear interpolation between order statistics) over the events that have one.
    pub median_decay_time_s: Option<f64>,
}

/// Count, clipped count, largest switch stress and median decay time per file, in the
/// order files first appear.
pub fn file_groups(table: &EventTable) -> Result<Vec<FileGroup>, TableError> {
    let source = table.source.as_str();
    let bad = |e: PolarsError| TableError::new(source, format!("grouping the rows by file: {e}"));
    let names: Vec<&str> = table
        .frame
        .get_column_names()
        .into_iter()
        .map(|n| n.as_str())
        .collect();
    for need in ["file", "switch_stress_v", "clipped"] {
        if !names.contains(&need) {
            return Err(TableError::new(source, format!("no column `{need}`")));
        }
    }
    let decay = if names.contains(&"decay_time_s") {
        col("decay_time_s").cast(DataType::Float64)
    } else {
        lit(NULL).cast(DataType::Float64)
    };
    let grouped = table
        .frame
        .clone()
        .lazy()
        .group_by_stable([col("file")])
        .agg([
            len().cast(DataType::Int64).alias("n_events"),
            col("clipped")
                .cast(DataType::Int64)
                .sum()
                .alias("n_clipped"),
            col("switch_stress_v")
                .cast(DataType::Float64)
                .max()
                .alias("max_switch_stress_v"),
            decay.median().alias("median_decay_time_s"),
        ])
        .collect()
        .map_err(bad)?;
    let file = grouped.column("file").and_then(|c| c.str().cloned());
    let n = grouped.column("n_events").and_then(|c| c.i64().cloned());
    let clipped = grouped.column("n_clipped").and_then(|c| c.i64().cloned());
    let stress = grouped
        .column("max_switch_stress_v")
        .and_then(|c| c.f64().cloned());
    let decay = grouped
        .column("median_decay_time_s")
        .and_then(|c| c.f64().cloned());
    let (file, n, clipped, stress, decay) = (
        file.map_err(bad)?,
        n.map_err(bad)?,
        clipped.map_err(bad)?,
        stress.map_err(bad)?,
        decay.map_err(bad)?,
    );
    let mut out = Vec::with_capacity(grouped.height());
    for i in 0..grouped.height() {
        out.push(FileGroup {
            table: source.to_string(),
            file: file.get(i).unwrap_or_default().to_string(),
            n_events: n.get(i).unwrap_or(0).max(0) as usize,
            n_clipped: clipped.get(i).unwrap_or(0).max(0) as usize,
            max_switch_stress_v: stress.get(i).filter(|v| v.is_finite()),
            median_decay_time_s: decay.get(i).filter(|v| v.is_finite()),
        });
    }
    Ok(out)
}

/// Expands folders into the `.parquet` files under them (sorted, recursively); files named
/// explicitly are kept whatever their name.
pub fn collect_tables(inputs: &[PathBuf]) -> (Vec<PathBuf>, Vec<crate::document::FileError>) {
    let mut files = Vec::new();
    let mut errors = Vec::new();
    for input in inputs {
        if input.is_dir() {
            walk(input, &mut files, &mut errors, 0);
        } else {
            files.push(input.clone());
        }
    }
    // A table named twice (itself and its folder) is read once.
    let mut seen = std::collections::HashSet::new();
    files.retain(|p| seen.insert(std::fs::canonicalize(p).unwrap_or_else(|_| p.clone())));
    (files, errors)
}

fn walk(
    dir: &Path,
    files: &mut Vec<PathBuf>,
    errors: &mut Vec<crate::document::FileError>,
    depth: usize,
) {
    let fail = |errors: &mut Vec<crate::document::FileError>, e: String| {
        errors.push(crate::document::FileError {
            file: dir.display().to_string(),
            error: format!("{}: {e}", dir.display()),
        })
    };
    // A symlink loop would recurse forever; real table trees are shallow.
    if depth > 32 {
        fail(errors, "folders nested deeper than 32 levels".into());
        return;
    }
    let mut entries: Vec<PathBuf> = match std::fs::read_dir(dir) {
        Ok(rd) => rd.filter_map(|e| e.ok().map(|e| e.path())).collect(),
        Err(e) => {
            fail(errors, e.to_string());
            return;
        }
    };
    entries.sort();
    for p in entries {
        if p.is_dir() {
            walk(&p, files, errors, depth + 1);
        } else if p
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
        {
            files.push(p);
        }
    }
}

/// The per-file block of `measure --from-table`, one line per file of every table.
pub fn groups_text(groups: &[FileGroup]) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    if groups.is_empty() {
        return s;
    }
    let _ = writeln!(
        s,
        "{:>8} {:>8} {:>12} {:>12}  file",
        "events", "clipped", "max stress", "p50 decay"
    );
    let mut last_table = "";
    for g in groups {
        if g.table != last_table {
            let _ = writeln!(s, "table {}", g.table);
            last_table = &g.table;
        }
        let _ = writeln!(
            s,
            "{:>8} {:>8} {:>12} {:>12}  {}",
            count(g.n_events),
            count(g.n_clipped),
            eng_opt(g.max_switch_stress_v, "V"),
            eng_opt(g.median_decay_time_s, "s"),
            g.file
        );
    }
    let total: usize = groups.iter().map(|g| g.n_events).sum();
    let _ = writeln!(
        s,
        "{} events in {} files; max stress: largest |peak - rail|; p50 decay: median decay time",
        count(total),
        count(groups.len())
    );
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::document::{FileError, Summary, MEASURE_SCHEMA};
    use crate::measure::RingKind;

    /// Made-up events: one with most fields filled, one with most left null.
    fn event(index: usize, stress_v: f64, decay_s: Option<f64>, clipped: bool) -> Event {
        Event {
            index,
            t_edge_s: 1e-3 * (index as f64 + 1.0),
            polarity: Polarity::Up,
            v_on: 0.1,
            v_off: 24.0,
            peak_v: stress_v,
            switch_stress_v: stress_v,
            overshoot_v: stress_v - 24.0,
            overshoot_pct: Some((stress_v - 24.0) / 23.9 * 100.0),
            decay_time_s: decay_s,
            ring_kind: decay_s.map(|_| RingKind::Coil),
            c_par_slope_range_v: decay_s.map(|_| [30.0, 41.5]),
            clipped,
            window_s: 2e-4,
            ..Event::default()
        }
    }

    fn capture(file: &str, events: Vec<Event>) -> CaptureDoc {
        CaptureDoc {
            file: file.into(),
            label: Some("bench A".into()),
            format: "csv".into(),
            sample_interval_s: 1e-8,
            n_samples: 50_000,
            t0_s: -1e-4,
            signal: "CH1".into(),
            current: None,
            polarity: Polarity::Up,
            v_on: 0.1,
            v_off: 24.0,
            warnings: vec!["a warning, with a comma".into()],
            events,
        }
    }

    fn doc() -> MeasureDoc {
        MeasureDoc {
            schema: MEASURE_SCHEMA,
            captures: vec![
                capture(
                    "a.csv",
                    vec![
                        event(0, 50.0, Some(1e-4), false),
                        event(1, 62.5, None, true),
                        event(2, 48.0, Some(3e-4), false),
                    ],
                ),
                capture("quiet.csv", vec![]),
                capture("b,2.csv", vec![event(0, 70.0, Some(2e-4), false)]),
            ],
            summary: Summary::default(),
            errors: vec![FileError {
                file: "x.csv".into(),
                error: "x.csv: unreadable".into(),
            }],
        }
    }

    #[test]
    fn round_trip_gives_back_every_capture_and_event() {
        let d = doc();
        let bytes = events_parquet(&d).expect("written");
        let table = events_from_parquet(&bytes, "t.parquet").expect("read back");
        assert_eq!(table.captures.len(), 3, "the capture without events too");
        for (a, b) in d.captures.iter().zip(&table.captures) {
            assert_eq!(CaptureHead::of(a), CaptureHead::of(b));
            assert_eq!(a.events, b.events);
        }
        assert_eq!(table.frame.height(), 4);
    }

    #[test]
    fn nulls_stay_null_and_null_columns_keep_their_type() {
        let bytes = events_parquet(&doc()).expect("written");
        let frame = ParquetReader::new(Cursor::new(bytes.as_slice()))
            .finish()
            .expect("polars reads it");
        let decay = frame.column("decay_time_s").expect("column");
        assert_eq!(decay.null_count(), 1);
        assert_eq!(decay.f64().expect("f64").get(1), None);
        // No event has a fit: every row null, typed from the field, never NaN.
        let rms = frame.column("fit_rms_v").expect("column");
        assert_eq!(rms.dtype(), &DataType::Float64);
        assert_eq!(rms.null_count(), 4);
        assert_eq!(
            frame.column("fit_model").expect("column").dtype(),
            &DataType::String
        );
        assert_eq!(
            frame.column("c_par_slope_range_v").expect("column").dtype(),
            &DataType::List(Box::new(DataType::Float64))
        );
        assert_eq!(
            frame.column("index").expect("column").dtype(),
            &DataType::Int64
        );
        for c in frame.columns() {
            if let Ok(f) = c.f64() {
                assert!(f.iter().flatten().all(|x| !x.is_nan()), "{}", c.name());
            }
        }
    }

    #[test]
    fn groups_count_and_rank_per_file() {
        let table =
            events_from_parquet(&events_parquet(&doc()).expect("written"), "t").expect("read back");
        let g = file_groups(&table).expect("grouped");
        // Expected from the events above: a.csv has 3 events (one clipped), stresses 50,
        // 62.5, 48 V, decays 1e-4 and 3e-4 s (median of two: their mean); b,2.csv one.
        assert_eq!(g.len(), 2, "files without events have no rows");
        assert_eq!(g[0].file, "a.csv");
        assert_eq!((g[0].n_events, g[0].n_clipped), (3, 1));
        assert_eq!(g[0].max_switch_stress_v, Some(62.5));
        let med = g[0].median_decay_time_s.expect("median");
        assert!((med - 2e-4).abs() < 1e-15, "{med}");
        assert_eq!(g[1].file, "b,2.csv");
        assert_eq!((g[1].n_events, g[1].n_clipped), (1, 0));
        assert_eq!(g[1].max_switch_stress_v, Some(70.0));
        assert_eq!(g[1].median_decay_time_s, Some(2e-4));
        let text = groups_text(&g);
        assert!(text.contains("62.5 V"), "{text}");
        assert!(text.contains("4 events in 2 files"), "{text}");
    }

    #[test]
    fn a_table_without_capture_list_is_rebuilt_from_its_rows() {
        let bytes = events_parquet(&doc()).expect("written");
        let mut frame = ParquetReader::new(Cursor::new(bytes.as_slice()))
            .finish()
            .expect("read");
        let mut plain = Vec::new();
        ParquetWriter::new(&mut plain)
            .finish(&mut frame)
            .expect("written without metadata");
        let table = events_from_parquet(&plain, "plain.parquet").expect("read back");
        let files: Vec<&str> = table.captures.iter().map(|c| c.file.as_str()).collect();
        assert_eq!(files, ["a.csv", "b,2.csv"]);
        assert_eq!(table.captures[0].events.len(), 3);
        assert_eq!(table.captures[0].v_off, 24.0);
        assert!(table.captures[0].warnings[0].contains("no capture list"));
    }

    #[test]
    fn bad_tables_are_errors_naming_the_file() {
        let e = events_from_parquet(b"time,v\n0,1\n", "x.parquet")
            .err()
            .expect("error");
        assert!(
            e.to_string().starts_with("x.parquet: not a Parquet file"),
            "{e}"
        );

        let good = events_parquet(&doc()).expect("written");
        // The footer cut away, the end marker put back: the decoder must fail cleanly.
        let mut cut = good[..good.len() / 2].to_vec();
        cut.extend_from_slice(b"PAR1");
        assert!(events_from_parquet(&cut, "cut.parquet").is_err());
        let mut garbage = b"PAR1".to_vec();
        garbage.extend((0..200u32).map(|i| (i.wrapping_mul(2654435761) >> 24) as u8));
        garbage.extend_from_slice(b"PAR1");
        assert!(events_from_parquet(&garbage, "g.parquet").is_err());

        // A table without the switch stress cannot give events.
        let mut frame = ParquetReader::new(Cursor::new(good.as_slice()))
            .finish()
            .expect("read");
        let _ = frame.drop_in_place("switch_stress_v").expect("dropped");
        let mut short = Vec::new();
        ParquetWriter::new(&mut short)
            .finish(&mut frame)
            .expect("written");
        let e = events_from_parquet(&short, "short.parquet")
            .err()
            .expect("error");
        let text = e.to_string();
        assert!(text.starts_with("short.parquet: row 1 (a.csv)"), "{text}");
        assert!(text.contains("switch_stress_v"), "{text}");
    }

    #[test]
    fn another_layout_version_is_refused() {
        let mut frame = ParquetReader::new(Cursor::new(
            events_parquet(&doc()).expect("written").as_slice(),
        ))
        .finish()
        .expect("read");
        let mut bytes = Vec::new();
        ParquetWriter::new(&mut bytes)
            .with_key_value_metadata(Some(KeyValueMetadata::from_static(vec![(
                KEY_SCHEMA.into(),
                "kickscan.events/9".into(),
            )])))
            .finish(&mut frame)
            .expect("written");
        let e = events_from_parquet(&bytes, "new.parquet")
            .err()
            .expect("error");
        assert!(e.to_string().contains("kickscan.events/9"), "{e}");
    }
}
