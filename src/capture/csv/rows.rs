//! Streaming the data rows into channels, block by block.

use std::fs::File;
use std::io::BufReader;
use std::path::PathBuf;

use super::timebase::{check_time, TimeCheck, JITTER_FRACTION};
use super::{cell_message, csv_err, Role};
use crate::capture::cells::{last_digit_place, parse_number, trim_cell, Cells, Delim};
use crate::capture::lines::{LineError, LineReader, MAX_LINE_BYTES};
use crate::capture::CaptureError;

/// Streaming reader of the data rows.
pub(crate) struct CsvStream {
    pub(super) file: PathBuf,
    pub(super) lines: LineReader<BufReader<File>>,
    /// Rows of the block being read, one after the other, and where each lies in it.
    pub(super) text: Vec<u8>,
    pub(super) spans: Vec<(usize, usize, usize)>,
    pub(super) delim: Delim,
    pub(super) decimal_comma: bool,
    pub(super) n_fields: usize,
    pub(super) roles: Vec<Role>,
    pub(super) factors: Vec<f64>,
    pub(super) time: Option<TimeCheck>,
    pub(crate) rows: u64,
}

/// Rows below this count are parsed on the calling thread; above it the block is split
/// between threads (a block of the default 65 536 rows is a few milliseconds of parsing).
const PARALLEL_MIN_ROWS: usize = 8192;

/// The cells of one gathered stretch of rows, parsed: values per channel, the time cell of
/// each row with its printed resolution, and the first error in the stretch.
#[derive(Default)]
struct Parsed {
    channels: Vec<Vec<f64>>,
    /// Time cell of each good row (when the file has a time column).
    times: Vec<(f64, f64)>,
    /// Rows parsed without a problem, all before `error`.
    n_ok: usize,
    error: Option<CaptureError>,
}

impl CsvStream {
    /// Appends up to `max` samples to each channel; returns how many rows were read.
    ///
    /// The rows are gathered into one buffer first (reading stays sequential), parsed in
    /// parallel stretches, then the time column is checked row by row in file order, so the
    /// first problem in the file is the one reported, with its line, exactly as when every
    /// row is read one after the other.
    pub(crate) fn fill(&mut self, out: &mut [Vec<f64>], max: usize) -> Result<usize, CaptureError> {
        let mut text = std::mem::take(&mut self.text);
        let mut spans = std::mem::take(&mut self.spans);
        text.clear();
        spans.clear();
        let read_error = self.gather(&mut text, &mut spans, max);
        let r = self.parse_gathered(&text, &spans, out);
        self.text = text;
        self.spans = spans;
        let n = r?;
        // A read problem comes after every row gathered before it.
        if let Some(e) = read_error {
            return Err(e);
        }
        self.rows += n as u64;
        Ok(n)
    }

    /// Reads up to `max` non-blank lines into `text`, each as `(start, end, line number)`.
    /// A read error is returned after the lines before it, which still count.
    fn gather(
        &mut self,
        text: &mut Vec<u8>,
        spans: &mut Vec<(usize, usize, usize)>,
        max: usize,
    ) -> Option<CaptureError> {
        while spans.len() < max {
            let line_no = self.lines.line_no;
            let start = text.len();
            let more = match self.lines.append_line(text) {
                Ok(m) => m,
                Err(LineError::Io(source)) => {
                    return Some(CaptureError::Io {
                        file: self.file.clone(),
                        source,
                    })
                }
                Err(LineError::TooLong) => {
                    return Some(csv_err(
                        &self.file,
                        line_no,
                        1,
                        format!(
                            "line is longer than {} KiB; expected a row of {} numbers",
                            MAX_LINE_BYTES / 1024,
                            self.n_fields
                        ),
                    ))
                }
            };
            if !more {
                break;
            }
            let line = text.get(start..).unwrap_or(&[]);
            if line.iter().all(|b| b.is_ascii_whitespace()) {
                text.truncate(start);
                continue;
            }
            spans.push((start, text.len(), line_no));
        }
        None
    }

    /// Parses the gathered rows into `out` and checks their times; returns the row count.
    fn parse_gathered(
        &mut self,
        text: &[u8],
        spans: &[(usize, usize, usize)],
        out: &mut [Vec<f64>],
    ) -> Result<usize, CaptureError> {
        let pieces = if spans.len() >= PARALLEL_MIN_ROWS {
            rayon::current_num_threads().clamp(1, 8)
        } else {
            1
        };
        let chunk = spans.len().div_ceil(pieces).max(1);
        let this = &*self;
        let parsed: Vec<Parsed> = if pieces > 1 {
            use rayon::prelude::*;
            spans
                .par_chunks(chunk)
                .map(|rows| this.parse_rows(text, rows, out.len()))
                .collect()
        } else {
            spans
                .chunks(chunk)
                .map(|rows| this.parse_rows(text, rows, out.len()))
                .collect()
        };
        let mut n = 0;
        let mut row_spans = spans.iter();
        for p in parsed {
            let good = p.n_ok;
            let lines = row_spans.by_ref().take(good).map(|s| s.2);
            if let Some(tc) = self.time.as_mut() {
                for (&(t, q), line) in p.times.iter().zip(lines) {
                    check_time(&self.file, tc, t, q, line)?;
                }
            }
            for (all, part) in out.iter_mut().zip(&p.channels) {
                all.extend_from_slice(part.get(..good).unwrap_or(part));
            }
            n += good;
            if let Some(e) = p.error {
                return Err(e);
            }
        }
        Ok(n)
    }

    /// Parses a stretch of rows, stopping at the first bad one.
    fn parse_rows(&self, text: &[u8], rows: &[(usize, usize, usize)], n_channels: usize) -> Parsed {
        let mut p = Parsed {
            channels: (0..n_channels)
                .map(|_| Vec::with_capacity(rows.len()))
                .collect(),
            times: Vec::with_capacity(if self.time.is_some() { rows.len() } else { 0 }),
            n_ok: 0,
            error: None,
        };
        for (k, &(a, b, line)) in rows.iter().enumerate() {
            let row = text.get(a..b).unwrap_or(&[]);
            match self.parse_row(row, line, &mut p.channels) {
                Ok(time) => {
                    if let (Some(_), Some(t)) = (&self.time, time) {
                        p.times.push(t);
                    }
                    p.n_ok = k + 1;
                }
                Err(e) => {
                    p.error = Some(e);
                    break;
                }
            }
        }
        p
    }

    /// Parses one row into `out`; returns its time cell (value and printed resolution).
    /// After an error some channels may hold a value of the bad row: callers keep only the
    /// rows before it.
    fn parse_row(
        &self,
        row: &[u8],
        line: usize,
        out: &mut [Vec<f64>],
    ) -> Result<Option<(f64, f64)>, CaptureError> {
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
        Ok(time)
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
                    crate::capture::sig(tc.dt_s)
                ));
            }
        }
        w
    }
}

#[cfg(test)]
mod tests {
    use crate::capture::{read_capture, CaptureError, ReadOptions};
    use std::fmt::Write;

    /// A `time_s,v` file of `n` rows (header on line 1, row k on line k + 2), with the
    /// cell text of some rows replaced.
    fn file_with(n: usize, edit: &dyn Fn(usize) -> Option<String>) -> tempfile::NamedTempFile {
        let mut s = String::from("time_s,v\n");
        for k in 0..n {
            match edit(k) {
                Some(row) => s.push_str(&row),
                None => write!(s, "{:.9e},{}", k as f64 * 1e-6, k % 97).unwrap(),
            }
            s.push('\n');
        }
        let f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
        std::fs::write(f.path(), s).unwrap();
        f
    }

    fn csv_error(e: CaptureError) -> (usize, usize, String) {
        match e {
            CaptureError::Csv {
                line,
                column,
                message,
                ..
            } => (line, column, message),
            other => panic!("expected a CSV error, got {other}"),
        }
    }

    #[test]
    fn rows_parsed_in_parallel_stretches_come_back_in_file_order() {
        // 100 000 rows: two blocks, each split between threads. Expected values are the
        // ones written.
        let f = file_with(100_000, &|_| None);
        let cap = read_capture(f.path(), &ReadOptions::default()).unwrap();
        let v = &cap.channels[0].samples;
        assert_eq!(v.len(), 100_000);
        assert!(v.iter().enumerate().all(|(k, x)| *x == (k % 97) as f64));
        assert!((cap.sample_interval_s - 1e-6).abs() < 1e-15);
    }

    #[test]
    fn a_bad_cell_late_in_a_block_names_its_line_and_column() {
        // Row 40 000 sits in the second half of the first block; its line is 40 002.
        let f = file_with(50_000, &|k| (k == 40_000).then(|| "4.0e-2,abc".to_string()));
        let e = read_capture(f.path(), &ReadOptions::default()).unwrap_err();
        let (line, column, message) = csv_error(e);
        assert_eq!((line, column), (40_002, 2));
        assert!(message.contains("'abc' is not a number"), "{message}");
    }

    #[test]
    fn the_first_problem_in_file_order_is_reported() {
        // Time repeats on row 20 000 (first half of the block), a bad cell follows on row
        // 60 000 (second half): the time problem, on line 20 002, comes first.
        let f = file_with(70_000, &|k| match k {
            20_000 => Some(format!("{:.9e},1", 19_999.0 * 1e-6)),
            60_000 => Some("6.0e-2,x".to_string()),
            _ => None,
        });
        let e = read_capture(f.path(), &ReadOptions::default()).unwrap_err();
        let (line, column, message) = csv_error(e);
        assert_eq!((line, column), (20_002, 1), "{message}");
        assert!(
            message.contains("time goes backwards or repeats"),
            "{message}"
        );
    }
}
