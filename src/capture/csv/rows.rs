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
    pub(super) buf: Vec<u8>,
    pub(super) delim: Delim,
    pub(super) decimal_comma: bool,
    pub(super) n_fields: usize,
    pub(super) roles: Vec<Role>,
    pub(super) factors: Vec<f64>,
    pub(super) time: Option<TimeCheck>,
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
                    crate::capture::sig(tc.dt_s)
                ));
            }
        }
        w
    }
}
