//! Delimited text captures as people have them: free-text metadata before an optional
//! header, comma, semicolon, tab or space delimiters, decimal point or comma, a time column
//! or a stated sample interval, units in the header.
//!
//! Reading happens in two passes over the start of the file: [`open`] sniffs the layout
//! from the first lines (at most [`SNIFF_BYTES`]), then [`CsvStream`] reads every data row
//! from the first one on, in blocks, checking each row as it goes.

use std::borrow::Cow;
use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use super::cells::{last_digit_place, parse_number, trim_cell, CellError, Cells, Delim};
use super::columns::{self, MetaKey};
use super::lines::{LineError, LineReader, MAX_LINE_BYTES};
use super::{Capture, CaptureError, Channel, Format, ReadOptions};

/// How much of the start of a file is read to sniff its layout: twice the longest line, so
/// a line too long to accept that starts in the first half is seen whole enough to refuse.
pub(crate) const SNIFF_BYTES: usize = 2 * MAX_LINE_BYTES;
const UTF8_BOM: &[u8] = &[0xEF, 0xBB, 0xBF];
/// Most lines looked at while sniffing.
const SNIFF_LINES: usize = 4000;
/// A time step this much longer than the sample interval is a gap, not jitter.
const GAP_FACTOR: f64 = 1.5;
/// Relative step deviation above which time steps count as jittered.
const JITTER_FRACTION: f64 = 0.01;

/// What one column of a data row holds.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Role {
    Time,
    Skip,
    Value(usize),
}

/// One line of the sniffed start of the file.
struct SniffLine<'a> {
    no: usize,
    /// Byte offset of the line in the file.
    offset: usize,
    text: Cow<'a, str>,
}

fn csv_err(file: &Path, line: usize, column: usize, message: impl Into<String>) -> CaptureError {
    CaptureError::Csv {
        file: file.to_path_buf(),
        line,
        column,
        message: message.into(),
    }
}

fn invalid(file: &Path, message: impl Into<String>) -> CaptureError {
    CaptureError::Invalid {
        file: file.to_path_buf(),
        message: message.into(),
    }
}

fn cell_message(cell: &[u8], e: CellError) -> String {
    let shown: String = String::from_utf8_lossy(cell).chars().take(40).collect();
    match e {
        CellError::Empty => "empty cell; expected a number".to_string(),
        CellError::NotANumber => format!("'{shown}' is not a number; expected a number"),
        CellError::NotFinite => format!(
            "'{shown}' is not a finite number; expected a number (NaN and infinity cannot be measured)"
        ),
    }
}

/// Cells of a row, without the empty cell a trailing delimiter leaves.
fn row_cells(text: &str, delim: Delim) -> Vec<&[u8]> {
    let mut cells: Vec<&[u8]> = Cells::new(text.as_bytes(), delim).collect();
    if cells.len() > 1 && cells.last().is_some_and(|c| trim_cell(c).is_empty()) {
        cells.pop();
    }
    cells
}

/// Refuses files that are not text: a NUL byte, control characters, or mostly invalid
/// UTF-8 (a single Latin-1 `µ` is text, a sample dump is not).
fn check_text(file: &Path, head: &[u8], notes: &mut Vec<String>) -> Result<bool, CaptureError> {
    let binary = |offset: usize, what: &str| {
        CaptureError::Binary {
        file: file.to_path_buf(),
        offset: offset as u64,
        message: format!(
            "looks like a binary file ({what}); expected text rows of numbers (for a raw sample dump give --raw, for WAV use a .wav file)"
        ),
    }
    };
    if let Some(k) = memchr::memchr(0, head) {
        return Err(binary(k, "NUL byte"));
    }
    let controls: Vec<usize> = head
        .iter()
        .enumerate()
        .filter(|(_, &b)| (b < 0x20 && !matches!(b, b'\t' | b'\n' | b'\r' | 0x0c)) || b == 0x7f)
        .map(|(k, _)| k)
        .take(8)
        .collect();
    if let Some(&first) = controls.first() {
        if controls.len() >= 4 || head.len() < 64 {
            return Err(binary(first, "control characters"));
        }
    }
    match std::str::from_utf8(head) {
        Ok(_) => Ok(false),
        Err(e) if e.error_len().is_none() => Ok(false),
        Err(e) => {
            let high = head.iter().filter(|&&b| b >= 0x80).count();
            if high * 100 > head.len() {
                Err(binary(e.valid_up_to(), "invalid UTF-8"))
            } else {
                notes.push("text is not UTF-8; read as Latin-1".to_string());
                Ok(true)
            }
        }
    }
}

/// Splits the sniffed bytes into lines, dropping a last line cut off by the sniff limit.
fn split_lines<'a>(
    file: &Path,
    head: &'a [u8],
    complete: bool,
    latin1: bool,
) -> Result<Vec<SniffLine<'a>>, CaptureError> {
    let mut out = Vec::new();
    // A UTF-8 byte-order mark (Windows editors write one) is not part of the first cell.
    let mut start = if head.starts_with(UTF8_BOM) { 3 } else { 0 };
    let mut no = 1usize;
    while start < head.len() && out.len() < SNIFF_LINES {
        let (end, next) = match memchr::memchr(b'\n', &head[start..]) {
            Some(k) => (start + k, start + k + 1),
            None if complete => (head.len(), head.len()),
            None => {
                if head.len() - start >= MAX_LINE_BYTES {
                    return Err(csv_err(
                        file,
                        no,
                        1,
                        format!(
                            "line is longer than {} KiB; expected rows of numbers",
                            MAX_LINE_BYTES / 1024
                        ),
                    ));
                }
                break;
            }
        };
        let mut bytes = &head[start..end];
        if bytes.last() == Some(&b'\r') {
            bytes = &bytes[..bytes.len() - 1];
        }
        let text = match std::str::from_utf8(bytes) {
            Ok(s) => Cow::Borrowed(s),
            Err(_) if latin1 => Cow::Owned(bytes.iter().map(|&b| b as char).collect()),
            Err(_) => Cow::Owned(String::from_utf8_lossy(bytes).into_owned()),
        };
        out.push(SniffLine {
            no,
            offset: start,
            text,
        });
        no += 1;
        start = next;
    }
    Ok(out)
}

/// Delimiter and decimal mark candidates in order of preference.
fn candidates(opts: &ReadOptions) -> Vec<(Delim, bool)> {
    let delims: Vec<Delim> = match opts.delimiter {
        Some(b' ') => vec![Delim::Whitespace],
        Some(d) => vec![Delim::Byte(d)],
        None => vec![
            Delim::Byte(b','),
            Delim::Byte(b';'),
            Delim::Byte(b'\t'),
            Delim::Whitespace,
            Delim::None,
        ],
    };
    let marks: Vec<bool> = match opts.decimal_comma {
        Some(c) => vec![c],
        None => vec![false, true],
    };
    let mut out = Vec::new();
    for &d in &delims {
        for &m in &marks {
            // A comma cannot be both; a forced pair is kept so the user gets what was asked.
            if m && d == Delim::Byte(b',') && opts.delimiter.is_none() {
                continue;
            }
            out.push((d, m));
        }
    }
    out
}

/// Number of fully numeric rows with the most common cell count, and that count.
fn score(lines: &[SniffLine], delim: Delim, comma: bool) -> (usize, usize) {
    let mut counts: Vec<(usize, usize)> = Vec::new();
    for l in lines {
        if l.text.trim().is_empty() {
            continue;
        }
        let cells = row_cells(&l.text, delim);
        if cells
            .iter()
            .all(|c| parse_number(trim_cell(c), comma).is_ok())
        {
            match counts.iter_mut().find(|(n, _)| *n == cells.len()) {
                Some((_, k)) => *k += 1,
                None => counts.push((cells.len(), 1)),
            }
        }
    }
    counts
        .into_iter()
        .max_by_key(|&(n, k)| (k, n))
        .map_or((0, 0), |(n, k)| (k, n))
}

/// Whether the line above the first row of `n` numbers has `n` cells and no number.
fn header_agrees(lines: &[SniffLine], delim: Delim, comma: bool, n: usize) -> bool {
    let numeric = |l: &SniffLine| {
        let cells = row_cells(&l.text, delim);
        cells.len() == n
            && cells
                .iter()
                .all(|c| parse_number(trim_cell(c), comma).is_ok())
    };
    let Some(first) = lines.iter().position(numeric) else {
        return false;
    };
    lines[..first]
        .iter()
        .rev()
        .find(|l| !l.text.trim().is_empty())
        .is_some_and(|l| {
            let cells = row_cells(&l.text, delim);
            cells.len() == n
                && cells
                    .iter()
                    .all(|c| parse_number(trim_cell(c), comma).is_err())
        })
}

/// A row that belongs to the data block: its first cell is a number, or most cells are.
/// A text cell or a missing cell in a data row keeps it here, so the row gets an error
/// naming its line instead of being taken for a header.
fn data_like(text: &str, delim: Delim, comma: bool) -> bool {
    let cells = row_cells(text, delim);
    let numeric = cells
        .iter()
        .filter(|c| parse_number(trim_cell(c), comma).is_ok())
        .count();
    let first = cells
        .first()
        .is_some_and(|c| parse_number(trim_cell(c), comma).is_ok());
    first || numeric * 2 > cells.len()
}

/// A metadata line split into key and value (`Sample Interval,2e-9`, `dt: 2 ns`,
/// `# units = V`). Lines with no separator are kept whole as free text.
fn split_meta(text: &str, delim: Delim) -> (String, String) {
    let t = text
        .trim()
        .trim_start_matches(['#', '%', ';', '!', '*'])
        .trim_start_matches("//")
        .trim();
    let delim_char = match delim {
        Delim::Byte(b) => Some(b as char),
        _ => None,
    };
    let cut = t
        .char_indices()
        .find(|&(_, c)| c == ':' || c == '=' || c == '\t' || Some(c) == delim_char);
    match cut {
        Some((k, c)) => {
            let key = t[..k].trim().trim_matches('"').trim();
            let rest = &t[k + c.len_utf8()..];
            let value: String = rest
                .split(|ch| Some(ch) == delim_char || ch == '\t')
                .map(|s| s.trim().trim_matches('"').trim())
                .filter(|s| !s.is_empty())
                .collect::<Vec<_>>()
                .join(" ");
            (key.to_string(), value)
        }
        None => ("text".to_string(), t.to_string()),
    }
}

/// What the preamble said.
#[derive(Default)]
struct Preamble {
    interval_s: Option<f64>,
    t0_s: Option<f64>,
    record_length: Option<u64>,
    /// One unit for every value column, or one per column (`Units,V,mV,A`).
    units: Vec<String>,
    time_unit_factor: Option<f64>,
}

fn read_preamble(lines: &[SniffLine], delim: Delim, comma: bool, cap: &mut Capture) -> Preamble {
    let mut p = Preamble::default();
    for l in lines {
        if l.text.trim().is_empty() {
            continue;
        }
        let (key, value) = split_meta(&l.text, delim);
        if key.is_empty() && value.is_empty() {
            continue;
        }
        let line = l.no;
        match columns::classify_key(&key) {
            MetaKey::SampleInterval => match columns::parse_time_value(&key, &value, comma) {
                Some(x) if x > 0.0 => {
                    p.interval_s = Some(x);
                    cap.notes
                        .push(format!("sample interval {x:e} s stated on line {line}"));
                }
                _ => cap.warnings.push(format!(
                    "line {line}: '{key}' = '{value}' is not a usable sample interval; ignored"
                )),
            },
            MetaKey::SampleRate => match columns::parse_rate_value(&value, comma) {
                Some(hz) => {
                    p.interval_s = Some(1.0 / hz);
                    cap.notes.push(format!(
                        "sample rate {hz:e} Hz stated on line {line}: interval {:e} s",
                        super::sig(1.0 / hz)
                    ));
                }
                None => cap.warnings.push(format!(
                    "line {line}: '{key}' = '{value}' is not a usable sample rate; ignored"
                )),
            },
            MetaKey::RecordLength => {
                if let Some(n) = columns::parse_count_value(&value) {
                    p.record_length = Some(n);
                    cap.notes
                        .push(format!("record length {n} stated on line {line}"));
                }
            }
            MetaKey::Units => {
                let units: Vec<String> = value
                    .split_whitespace()
                    .map(columns::bare_unit)
                    .filter(|u| !u.is_empty())
                    .collect();
                if !units.is_empty() {
                    cap.notes.push(format!(
                        "value unit {} stated on line {line}",
                        units.join(" ")
                    ));
                    p.units = units;
                }
            }
            MetaKey::TimeUnits => {
                if let Some(f) = columns::time_unit_factor(&columns::bare_unit(&value)) {
                    p.time_unit_factor = Some(f);
                    cap.notes.push(format!(
                        "time unit {} stated on line {line}",
                        columns::bare_unit(&value)
                    ));
                }
            }
            MetaKey::ProbeFactor => {
                if let Some(f) = columns::parse_probe_value(&value, comma) {
                    cap.notes.push(format!(
                        "probe factor {f} stated on line {line}; values are taken as already scaled by it (apply it with --scale NAME={f} if they are not)"
                    ));
                }
            }
            MetaKey::StartTime => {
                if let Some(t) = columns::parse_time_value(&key, &value, comma) {
                    p.t0_s = Some(t);
                    cap.notes
                        .push(format!("first sample at {t:e} s stated on line {line}"));
                }
            }
            MetaKey::Other => {}
        }
        cap.metadata.push((key, value));
    }
    p
}

/// Digits after the decimal mark of a number cell's mantissa.
fn decimals(cell: &[u8]) -> usize {
    let mantissa = cell
        .iter()
        .position(|&b| b == b'e' || b == b'E')
        .map_or(cell, |k| &cell[..k]);
    mantissa
        .iter()
        .position(|&b| b == b'.' || b == b',')
        .map_or(0, |k| mantissa.len() - k - 1)
}

/// Time values of the first data rows, in the file's unit, with their printed resolution
/// and number of decimals.
fn window_times(
    lines: &[SniffLine],
    col: usize,
    n_fields: usize,
    delim: Delim,
    comma: bool,
) -> Vec<(f64, f64, usize)> {
    let mut out = Vec::new();
    for l in lines {
        if l.text.trim().is_empty() {
            continue;
        }
        let cells = row_cells(&l.text, delim);
        if cells.len() != n_fields {
            break;
        }
        let Some(cell) = cells.get(col).map(|c| trim_cell(c)) else {
            break;
        };
        match parse_number(cell, comma) {
            Ok(t) => out.push((t, last_digit_place(cell), decimals(cell))),
            Err(_) => break,
        }
    }
    out
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    Some(v[v.len() / 2])
}

/// Whether times rise in equal steps (a time column without a header says so).
fn looks_like_time(times: &[(f64, f64, usize)]) -> bool {
    if times.len() < 4 {
        return false;
    }
    let mut steps: Vec<f64> = times.windows(2).map(|w| w[1].0 - w[0].0).collect();
    let Some(m) = median(&mut steps) else {
        return false;
    };
    m > 0.0
        && times.windows(2).all(|w| {
            let tol = JITTER_FRACTION * m + w[0].1 + w[1].1;
            (w[1].0 - w[0].0 - m).abs() <= tol
        })
}

/// Per-row time checks while streaming.
struct TimeCheck {
    /// Seconds per unit of the time column.
    factor: f64,
    dt_s: f64,
    /// Times written in full (shortest round-trip form): no rounding to allow for.
    exact: bool,
    /// How `dt_s` was found over the first rows (`median step`, `mean step`).
    dt_from: &'static str,
    prev: Option<(f64, f64)>,
    steps: u64,
    jittered: u64,
    first_jitter_line: usize,
    max_deviation: f64,
}

/// Streaming reader of the data rows.
pub(crate) struct CsvStream {
    file: PathBuf,
    lines: LineReader<BufReader<File>>,
    buf: Vec<u8>,
    delim: Delim,
    decimal_comma: bool,
    n_fields: usize,
    roles: Vec<Role>,
    factors: Vec<f64>,
    time: Option<TimeCheck>,
    pub(crate) rows: u64,
}

impl CsvStream {
    /// Appends up to `max` samples to each channel; returns how many rows were read.
    pub(crate) fn fill(&mut self, out: &mut [Vec<f64>], max: usize) -> Result<usize, CaptureError> {
        let mut n = 0;
        while n < max {
            let line_no = self.lines.line_no;
            let more = self.lines.next_line(&mut self.buf).map_err(|e| match e {
                LineError::Io(source) => CaptureError::Io {
                    file: self.file.clone(),
                    source,
                },
                LineError::TooLong => csv_err(
                    &self.file,
                    line_no,
                    1,
                    format!(
                        "line is longer than {} KiB; expected a row of {} numbers",
                        MAX_LINE_BYTES / 1024,
                        self.n_fields
                    ),
                ),
            })?;
            if !more {
                break;
            }
            if self.buf.iter().all(|b| b.is_ascii_whitespace()) {
                continue;
            }
            let buf = std::mem::take(&mut self.buf);
            let r = self.parse_row(&buf, line_no, out);
            self.buf = buf;
            r?;
            n += 1;
        }
        self.rows += n as u64;
        Ok(n)
    }

    fn parse_row(
        &mut self,
        row: &[u8],
        line: usize,
        out: &mut [Vec<f64>],
    ) -> Result<(), CaptureError> {
        let mut count = 0usize;
        let mut time: Option<(f64, f64)> = None;
        let mut cells = Cells::new(row, self.delim).peekable();
        while let Some(raw) = cells.next() {
            let cell = trim_cell(raw);
            let Some(&role) = self.roles.get(count) else {
                if cell.is_empty() && cells.peek().is_none() {
                    break;
                }
                return Err(self.ragged(line, count + 1 + cells.count()));
            };
            count += 1;
            match role {
                Role::Skip => {}
                Role::Time => {
                    let t = parse_number(cell, self.decimal_comma)
                        .map_err(|e| csv_err(&self.file, line, count, cell_message(cell, e)))?;
                    // The printed resolution matters only for fixed-format times.
                    let fixed = self.time.as_ref().is_some_and(|tc| !tc.exact);
                    let place = if fixed { last_digit_place(cell) } else { 0.0 };
                    time = Some((t, place));
                }
                Role::Value(k) => {
                    let v = parse_number(cell, self.decimal_comma)
                        .map_err(|e| csv_err(&self.file, line, count, cell_message(cell, e)))?;
                    let f = self.factors.get(k).copied().unwrap_or(1.0);
                    if let Some(ch) = out.get_mut(k) {
                        ch.push(v * f);
                    }
                }
            }
        }
        if count < self.n_fields {
            return Err(self.ragged(line, count));
        }
        if let (Some(tc), Some((t, q))) = (self.time.as_mut(), time) {
            check_time(&self.file, tc, t, q, line)?;
        }
        Ok(())
    }

    fn ragged(&self, line: usize, found: usize) -> CaptureError {
        csv_err(
            &self.file,
            line,
            found.min(self.n_fields) + 1,
            format!(
                "row has {found} cells; expected {} like the rows above (delimiter {})",
                self.n_fields,
                self.delim.describe()
            ),
        )
    }

    /// Warnings known only once every row has been read.
    pub(crate) fn end_warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if let Some(tc) = &self.time {
            if tc.jittered > 0 {
                w.push(format!(
                    "time steps deviate by more than {:.0} % from the sample interval at {} of {} steps (first on line {}, largest {:.1} %); the {} of the first rows, {:e} s, is used",
                    JITTER_FRACTION * 100.0,
                    tc.jittered,
                    tc.steps,
                    tc.first_jitter_line,
                    tc.max_deviation * 100.0,
                    tc.dt_from,
                    super::sig(tc.dt_s)
                ));
            }
        }
        w
    }
}

fn check_time(
    file: &Path,
    tc: &mut TimeCheck,
    t_file: f64,
    q_file: f64,
    line: usize,
) -> Result<(), CaptureError> {
    let t = t_file * tc.factor;
    let q = if tc.exact {
        1e-6 * tc.dt_s + 1e-12 * t.abs()
    } else {
        q_file * tc.factor
    };
    if let Some((prev, prev_q)) = tc.prev {
        let step = t - prev;
        // Every check allows for rounding to the printed resolution of both times, so a
        // coarsely printed column is checked only as far as its digits allow.
        let rounding = q + prev_q;
        if step < -rounding || (step <= 0.0 && rounding < 0.25 * tc.dt_s) {
            return Err(csv_err(
                file,
                line,
                1,
                format!(
                    "time goes backwards or repeats ({:e} s after {:e} s); expected rising time",
                    super::sig(t),
                    super::sig(prev)
                ),
            ));
        }
        tc.steps += 1;
        if step > GAP_FACTOR * tc.dt_s + rounding {
            return Err(csv_err(
                file,
                line,
                1,
                format!(
                    "gap in the time column: a step of {:e} s where the sample interval is {:e} s (missing rows before this line?)",
                    super::sig(step),
                    super::sig(tc.dt_s)
                ),
            ));
        }
        let dev = (step - tc.dt_s).abs();
        if dev > JITTER_FRACTION * tc.dt_s + rounding {
            if tc.jittered == 0 {
                tc.first_jitter_line = line;
            }
            tc.jittered += 1;
            tc.max_deviation = tc.max_deviation.max(dev / tc.dt_s);
        }
    }
    tc.prev = Some((t, q));
    Ok(())
}

/// Sniffs the layout of a delimited text file and opens it for streaming. The returned
/// capture has every channel with empty samples; the record length is the preamble's.
pub(crate) fn open(
    path: &Path,
    opts: &ReadOptions,
) -> Result<(Capture, CsvStream, Option<u64>), CaptureError> {
    let io = |source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    };
    let mut f = File::open(path).map_err(io)?;
    let mut head = Vec::new();
    (&mut f)
        .take(SNIFF_BYTES as u64 + 1)
        .read_to_end(&mut head)
        .map_err(io)?;
    let complete = head.len() <= SNIFF_BYTES;
    head.truncate(SNIFF_BYTES);
    if head.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(invalid(
            path,
            "the file is empty; expected rows of numbers (a capture)",
        ));
    }
    let mut cap = Capture {
        source: path.to_path_buf(),
        format: Format::Csv,
        sample_interval_s: 0.0,
        t0_s: 0.0,
        channels: Vec::new(),
        metadata: Vec::new(),
        notes: Vec::new(),
        warnings: Vec::new(),
    };
    if head.starts_with(&[0xFF, 0xFE]) || head.starts_with(&[0xFE, 0xFF]) {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: 0,
            message: "the file is UTF-16 text; expected UTF-8 or ASCII text (save it as UTF-8)"
                .to_string(),
        });
    }
    if head.starts_with(UTF8_BOM) {
        cap.notes.push("UTF-8 byte-order mark skipped".to_string());
    }
    let latin1 = check_text(path, &head, &mut cap.notes)?;
    let lines = split_lines(path, &head, complete, latin1)?;

    // Delimiter and decimal mark: the pair under which most rows read as numbers.
    // Ties go to the pair under which a header above the rows has as many cells as they
    // do: one column of `1,25` is decimal-comma numbers under a one-cell header, not two
    // columns. Without a header that case stays ambiguous (`--decimal comma` settles it).
    let mut best: Option<(Delim, bool, (usize, bool, usize))> = None;
    for (d, m) in candidates(opts) {
        let (k, n) = score(&lines, d, m);
        let key = (k, header_agrees(&lines, d, m, n), n);
        if k > 0 && best.is_none_or(|(_, _, b)| key > b) {
            best = Some((d, m, key));
        }
    }
    let Some((delim, comma, (_, _, n_fields))) = best else {
        let last = lines.last().map_or(1, |l| l.no);
        return Err(invalid(
            path,
            format!(
                "no rows of numbers in lines 1 to {last}; expected rows of numbers (a header alone is not a capture)"
            ),
        ));
    };
    let delim = if n_fields == 1 { Delim::None } else { delim };
    let how = |forced: bool| if forced { "(given)" } else { "(sniffed)" };
    if n_fields > 1 {
        cap.notes.push(format!(
            "delimiter {} {}",
            delim.describe(),
            how(opts.delimiter.is_some())
        ));
    } else {
        cap.notes.push("one column per row".to_string());
    }
    let uses_comma = comma && lines.iter().any(|l| l.text.contains(','));
    if uses_comma || opts.decimal_comma == Some(true) {
        cap.notes.push(format!(
            "decimal comma {}",
            how(opts.decimal_comma.is_some())
        ));
    }

    // The data block starts at the first run of rows that look like data.
    let nonblank: Vec<usize> = (0..lines.len())
        .filter(|&k| !lines[k].text.trim().is_empty())
        .collect();
    let is_data: Vec<bool> = nonblank
        .iter()
        .map(|&k| data_like(&lines[k].text, delim, comma))
        .collect();
    let run = 5usize;
    let start_pos = (0..nonblank.len()).find(|&p| {
        let end = (p + run).min(nonblank.len());
        is_data[p..end].iter().all(|&d| d)
    });
    let Some(start_pos) = start_pos else {
        return Err(invalid(
            path,
            "no block of number rows found; expected rows of numbers after any header",
        ));
    };
    let data_idx = nonblank[start_pos];
    let data_line = lines[data_idx].no;

    // Header (and a units row under it) directly above the data.
    let is_meta_key = |text: &str| {
        let (key, _) = split_meta(text, delim);
        columns::classify_key(&key) != MetaKey::Other
    };
    let header_fits = |text: &str| {
        let cells = row_cells(text, delim);
        cells.len() == n_fields
            && cells
                .iter()
                .all(|c| parse_number(trim_cell(c), comma).is_err())
            && !is_meta_key(text)
    };
    let above = |pos: usize| -> Option<usize> { pos.checked_sub(1).map(|p| nonblank[p]) };
    let mut header_idx = None;
    let mut units_idx = None;
    if let Some(h) = above(start_pos) {
        if header_fits(&lines[h].text) {
            let cells = row_cells(&lines[h].text, delim);
            let all_units = cells
                .iter()
                .all(|c| columns::is_unit_cell(&String::from_utf8_lossy(trim_cell(c))));
            let h2 = start_pos.checked_sub(1).and_then(above);
            if all_units && h2.is_some_and(|h2| header_fits(&lines[h2].text)) {
                units_idx = Some(h);
                header_idx = h2;
            } else {
                header_idx = Some(h);
            }
        }
    }
    let preamble_end = header_idx.unwrap_or(data_idx);
    let pre = read_preamble(&lines[..preamble_end], delim, comma, &mut cap);
    cap.notes
        .push(format!("first data row on line {data_line}"));

    let header: Vec<(String, Option<String>)> = match header_idx {
        Some(h) => {
            cap.notes.push(format!(
                "header on line {}: {}",
                lines[h].no,
                lines[h].text.trim()
            ));
            row_cells(&lines[h].text, delim)
                .iter()
                .map(|c| columns::split_name_unit(&String::from_utf8_lossy(trim_cell(c))))
                .collect()
        }
        None => {
            cap.notes.push("no header row".to_string());
            vec![(String::new(), None); n_fields]
        }
    };
    let unit_row: Vec<Option<String>> = match units_idx {
        Some(u) => {
            cap.notes.push(format!("units row on line {}", lines[u].no));
            row_cells(&lines[u].text, delim)
                .iter()
                .map(|c| Some(columns::bare_unit(&String::from_utf8_lossy(c))))
                .collect()
        }
        None => vec![None; n_fields],
    };

    // Column roles.
    let data_lines = &lines[data_idx..];
    let mut roles = vec![Role::Skip; n_fields];
    let mut time_col = header
        .iter()
        .position(|(name, _)| columns::is_time_name(name));
    if time_col.is_none() && header_idx.is_none() && n_fields >= 2 {
        let times = window_times(data_lines, 0, n_fields, delim, comma);
        if looks_like_time(&times) {
            let unit_steps = times.windows(2).all(|w| w[1].0 - w[0].0 == 1.0);
            // With an interval stated, a headerless first column is time only if it steps
            // by that interval; otherwise it is data that happens to rise evenly.
            let stated = opts.dt_s.or(pre.interval_s);
            let step = times.get(1).map_or(0.0, |t| t.0) - times.first().map_or(0.0, |t| t.0);
            let matches_stated =
                stated.is_none_or(|dt| ((step - dt) / dt).abs() <= JITTER_FRACTION);
            let first_is_zero = times.first().is_some_and(|t| t.0 == 0.0);
            if unit_steps && first_is_zero && stated.is_some() {
                cap.notes
                    .push("first column counts samples (0, 1, 2, ...); left out".to_string());
            } else if !matches_stated {
                cap.notes.push(
                    "first column rises evenly but not by the stated interval: taken as data"
                        .to_string(),
                );
            } else {
                time_col = Some(0);
                cap.notes
                    .push("first column rises in equal steps: taken as time (sniffed)".to_string());
            }
        }
    }
    let index_col = if time_col != Some(0) {
        match header.first() {
            Some((name, _)) if columns::is_index_name(name) => {
                cap.notes
                    .push(format!("column '{name}' counts samples; left out"));
                Some(0)
            }
            _ if header_idx.is_none()
                && cap
                    .notes
                    .iter()
                    .any(|n| n.starts_with("first column counts")) =>
            {
                Some(0)
            }
            _ => None,
        }
    } else {
        None
    };
    let mut factors = Vec::new();
    for (j, role) in roles.iter_mut().enumerate() {
        if Some(j) == time_col {
            *role = Role::Time;
            continue;
        }
        if Some(j) == index_col {
            continue;
        }
        let k = cap.channels.len();
        let (hname, hunit) = header.get(j).cloned().unwrap_or_default();
        let name = if hname.is_empty() {
            format!("CH{}", k + 1)
        } else if cap
            .channels
            .iter()
            .any(|c| c.name.eq_ignore_ascii_case(&hname))
        {
            let renamed = format!("{hname}_{}", k + 1);
            cap.warnings.push(format!(
                "two columns are named '{hname}'; column {} is called '{renamed}'",
                j + 1
            ));
            renamed
        } else {
            hname
        };
        let stated = hunit
            .or_else(|| unit_row.get(j).cloned().flatten())
            .or_else(|| {
                // Units listed per value column, per column, or one for all.
                let k_value = cap.channels.len();
                match pre.units.len() {
                    0 => None,
                    1 => pre.units.first().cloned(),
                    n if n == n_fields => pre.units.get(j).cloned(),
                    _ => pre.units.get(k_value).or(pre.units.first()).cloned(),
                }
            });
        let (unit, factor) = match stated {
            Some(u) => {
                let (base, f) = columns::value_unit(&u);
                if f != 1.0 {
                    cap.notes
                        .push(format!("'{name}' in {u}: scaled by {f:e} to {base}"));
                }
                (base, f)
            }
            None => match columns::unit_from_name(&name) {
                Some(u) => {
                    cap.notes
                        .push(format!("'{name}' has no unit; taken as {u} from its name"));
                    (u.to_string(), 1.0)
                }
                None => {
                    cap.notes.push(format!("'{name}' has no unit; taken as V"));
                    ("V".to_string(), 1.0)
                }
            },
        };
        *role = Role::Value(k);
        factors.push(factor);
        cap.channels.push(Channel {
            name,
            unit,
            samples: Vec::new(),
            adc: None,
        });
    }
    if cap.channels.is_empty() {
        return Err(invalid(
            path,
            format!("line {data_line}: the rows hold only a time column; expected at least one value column"),
        ));
    }

    // Time base.
    let mut time_check = None;
    let mut dt_from_time = None;
    if let Some(tc) = time_col {
        let tname = header.get(tc).map(|h| h.0.clone()).unwrap_or_default();
        let tunit = header.get(tc).and_then(|h| h.1.clone()).or_else(|| {
            unit_row
                .get(tc)
                .cloned()
                .flatten()
                .filter(|u| columns::time_unit_factor(u).is_some())
        });
        let factor = match tunit.as_deref().and_then(columns::time_unit_factor) {
            Some(f) => {
                cap.notes.push(format!(
                    "time column in {}",
                    tunit.clone().unwrap_or_default()
                ));
                f
            }
            None => match pre.time_unit_factor {
                Some(f) => f,
                None => {
                    if let Some(u) = &tunit {
                        cap.warnings.push(format!(
                            "time column unit '{u}' is not a time unit; taken as seconds"
                        ));
                    } else {
                        cap.notes
                            .push("time column has no unit; taken as seconds".to_string());
                    }
                    1.0
                }
            },
        };
        let times = window_times(data_lines, tc, n_fields, delim, comma);
        if let Some(&(t0, _, _)) = times.first() {
            cap.t0_s = t0 * factor;
        }
        let mut steps: Vec<f64> = times.windows(2).map(|w| w[1].0 - w[0].0).collect();
        // A zero is exact in any format; it says nothing about the printed resolution.
        let coarsest = times
            .iter()
            .filter(|t| t.0 != 0.0)
            .map(|t| t.1)
            .fold(0.0, f64::max)
            * factor;
        // A column printed more coarsely than it steps has a median step of zero; its
        // mean step over the window still holds the interval.
        let mean_step = match (times.first(), times.last()) {
            (Some(f), Some(l)) if times.len() >= 2 => (l.0 - f.0) / (times.len() - 1) as f64,
            _ => 0.0,
        };
        let med = median(&mut steps)
            .filter(|&m| m > 0.0)
            .or((mean_step > 0.0).then_some(mean_step));
        if let Some(med) = med {
            // The last printed digit bounds the rounding of a time (`%.3e`, `%.6f`, `%g`).
            // Shortest round-trip output of doubles (`3.0000000000000004e-9`) is exact: it
            // shows as a varying number of decimals, 10 or more in some cells.
            let nonzero: Vec<_> = times.iter().filter(|t| t.0 != 0.0).collect();
            let same_decimals = nonzero.windows(2).all(|w| w[0].2 == w[1].2);
            let exact = !same_decimals && nonzero.iter().any(|t| t.2 >= 10);
            let q = |t: &(f64, f64, usize)| {
                if exact {
                    1e-6 * med + 1e-12 * t.0.abs()
                } else {
                    t.1
                }
            };
            let mean = mean_step;
            // Evenly printed steps: the mean over the window is the finer estimate. Any
            // jitter: the median step, which the jitter does not pull.
            let even = times.windows(2).all(|w| {
                (w[1].0 - w[0].0 - med).abs() <= JITTER_FRACTION * med + q(&w[0]) + q(&w[1])
            });
            let dt_file = if even { mean } else { med };
            let dt = dt_file * factor;
            if !exact && coarsest > 0.25 * dt {
                cap.notes.push(format!(
                    "time column printed with a resolution of {:e} s; its steps are checked only that closely",
                    super::sig(coarsest)
                ));
            }
            dt_from_time = Some(dt);
            time_check = Some(TimeCheck {
                factor,
                dt_s: dt,
                exact,
                dt_from: if even { "mean step" } else { "median step" },
                prev: None,
                steps: 0,
                jittered: 0,
                first_jitter_line: 0,
                max_deviation: 0.0,
            });
            let label = if tname.is_empty() {
                "time".to_string()
            } else {
                format!("'{tname}'")
            };
            cap.notes.push(format!(
                "sample interval {:e} s from the time column {label}",
                super::sig(dt)
            ));
        }
    }
    if let Some(t0) = pre.t0_s {
        if time_col.is_none() {
            cap.t0_s = t0;
        }
    }
    cap.sample_interval_s = match (opts.dt_s, dt_from_time, pre.interval_s) {
        (Some(dt), from_time, _) => {
            cap.notes
                .push(format!("sample interval {dt:e} s from --dt/--sample-rate"));
            // The time column is still checked against its own step.
            if let Some(col) = from_time {
                if ((col - dt) / dt).abs() > JITTER_FRACTION {
                    cap.warnings.push(format!(
                        "--dt/--sample-rate gives {dt:e} s but the time column steps by {:e} s; the option is used",
                        super::sig(col)
                    ));
                }
            }
            dt
        }
        (None, Some(dt), stated) => {
            if let Some(s) = stated {
                if ((s - dt) / dt).abs() > JITTER_FRACTION {
                    cap.warnings.push(format!(
                        "the file states a sample interval of {s:e} s but its time column steps by {:e} s; the time column is used",
                        super::sig(dt)
                    ));
                }
            }
            dt
        }
        (None, None, Some(s)) => s,
        (None, None, None) => {
            return Err(invalid(
                path,
                "no time column and no sample interval in the file; expected a time column, a 'Sample interval' line, or --dt/--sample-rate",
            ))
        }
    };

    // Stream from the first data row.
    let offset = lines[data_idx].offset as u64;
    f.seek(SeekFrom::Start(offset)).map_err(io)?;
    let reader = BufReader::with_capacity(1 << 18, f);
    let stream = CsvStream {
        file: path.to_path_buf(),
        lines: LineReader::new(reader, offset, data_line),
        buf: Vec::with_capacity(256),
        delim,
        decimal_comma: comma,
        n_fields,
        roles,
        factors,
        time: time_check,
        rows: 0,
    };
    Ok((cap, stream, pre.record_length))
}
