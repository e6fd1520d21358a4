//! Which delimiter and decimal mark a file uses, and which lines are data.

use super::row_cells;
use super::text::SniffLine;
use crate::capture::cells::{parse_number, trim_cell, Delim};
use crate::capture::ReadOptions;

/// Delimiter and decimal mark candidates in order of preference.
pub(super) fn candidates(opts: &ReadOptions) -> Vec<(Delim, bool)> {
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
pub(super) fn score(lines: &[SniffLine], delim: Delim, comma: bool) -> (usize, usize) {
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
pub(super) fn header_agrees(lines: &[SniffLine], delim: Delim, comma: bool, n: usize) -> bool {
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
pub(super) fn data_like(text: &str, delim: Delim, comma: bool) -> bool {
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
