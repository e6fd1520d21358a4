//! The time column: the sample interval it holds, and the checks on each row (backwards,
//! gaps, jitter), allowing for the resolution the times were printed with.

use std::path::Path;

use super::text::SniffLine;
use super::{csv_err, row_cells};
use crate::capture::cells::{last_digit_place, parse_number, trim_cell, Delim};
use crate::capture::CaptureError;

/// A time step this much longer than the sample interval is a gap, not jitter.
pub(super) const GAP_FACTOR: f64 = 1.5;
/// Relative step deviation above which time steps count as jittered.
pub(super) const JITTER_FRACTION: f64 = 0.01;

/// Digits after the decimal mark of a number cell's mantissa.
pub(super) fn decimals(cell: &[u8]) -> usize {
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
pub(super) fn window_times(
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

pub(super) fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    Some(v[v.len() / 2])
}

/// Whether times rise in equal steps (a time column without a header says so).
pub(super) fn looks_like_time(times: &[(f64, f64, usize)]) -> bool {
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
pub(super) struct TimeCheck {
    /// Seconds per unit of the time column.
    pub(super) factor: f64,
    pub(super) dt_s: f64,
    /// Times written in full (shortest round-trip form): no rounding to allow for.
    pub(super) exact: bool,
    /// How `dt_s` was found over the first rows (`median step`, `mean step`).
    pub(super) dt_from: &'static str,
    pub(super) prev: Option<(f64, f64)>,
    pub(super) steps: u64,
    pub(super) jittered: u64,
    pub(super) first_jitter_line: usize,
    pub(super) max_deviation: f64,
}

pub(super) fn check_time(
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
                    crate::capture::sig(t),
                    crate::capture::sig(prev)
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
                    crate::capture::sig(step),
                    crate::capture::sig(tc.dt_s)
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
