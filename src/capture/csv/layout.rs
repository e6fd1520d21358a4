//! Which delimiter and decimal mark a file uses, and which lines are data.

use super::preamble::split_meta;
use super::text::SniffLine;
use super::{header_cells, row_cell_iter, row_cells};
use crate::capture::cells::{parse_number, trim_cell, Delim};
use crate::capture::columns::{self, MetaKey};
use crate::capture::ReadOptions;

/// Delimiter and decimal mark candidates in order of preference; `quoted` when the lines
/// hold quotes, inside which a decimal comma can sit in a comma-separated file.
fn candidates(opts: &ReadOptions, quoted: bool) -> Vec<(Delim, bool)> {
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
            // A comma cannot be both, unless the numbers are quoted (`"0,25","24,5"`); a
            // forced pair is kept so the user gets what was asked.
            if m && d == Delim::Byte(b',') && opts.delimiter.is_none() && !quoted {
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
        if let Some(n) = numeric_cells(&l.text, delim, comma) {
            match counts.iter_mut().find(|(m, _)| *m == n) {
                Some((_, k)) => *k += 1,
                None => counts.push((n, 1)),
            }
        }
    }
    counts
        .into_iter()
        .max_by_key(|&(n, k)| (k, n))
        .map_or((0, 0), |(n, k)| (k, n))
}

/// The number of cells of a row when every one is a number.
fn numeric_cells(text: &str, delim: Delim, comma: bool) -> Option<usize> {
    let mut n = 0;
    for c in row_cell_iter(text, delim) {
        parse_number(trim_cell(c), comma).ok()?;
        n += 1;
    }
    Some(n)
}

/// Whether the line above the first row of `n` numbers has `n` cells and no number.
fn header_agrees(lines: &[SniffLine], delim: Delim, comma: bool, n: usize) -> bool {
    let numeric = |l: &SniffLine| numeric_cells(&l.text, delim, comma) == Some(n);
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

/// Delimiter, decimal mark and cell count: the pair under which most rows read as numbers.
/// Ties go to the pair under which a header above the rows has as many cells as they do:
/// one column of `1,25` is decimal-comma numbers under a one-cell header, not two columns.
/// Without a header that case stays ambiguous (`--decimal comma` settles it).
pub(super) fn pick_delimiter(
    lines: &[SniffLine],
    opts: &ReadOptions,
) -> Option<(Delim, bool, usize)> {
    // Most files settle it in their first lines: when one pair reads clearly more rows as
    // numbers there than any other, the thousands of lines after them are not scored
    // again. A close call (a tie, a short run of rows) is decided over every sniffed line.
    if lines.len() > QUICK_LINES {
        let ranked = rank(&lines[..QUICK_LINES], opts);
        if let [(first, (k1, _, _)), rest @ ..] = ranked.as_slice() {
            let runner_up = rest.iter().map(|(_, (k, _, _))| *k).max().unwrap_or(0);
            if *k1 >= QUICK_MIN_ROWS && *k1 >= 2 * runner_up {
                return Some(*first);
            }
        }
    }
    rank(lines, opts).first().map(|&(found, _)| found)
}

/// Lines scored first by [`pick_delimiter`], and the rows of numbers among them that make
/// a clear winner (common practice for sniffing: a few dozen rows that agree tell a
/// layout). Scoring is every candidate pair on every line: at 256 lines it was a twentieth
/// of the time a folder of short captures took.
const QUICK_LINES: usize = 64;
const QUICK_MIN_ROWS: usize = 32;

/// Every candidate pair that reads at least one row as numbers, best first, with its
/// (numeric rows, header agrees, cells per row).
#[allow(clippy::type_complexity)]
fn rank(
    lines: &[SniffLine],
    opts: &ReadOptions,
) -> Vec<((Delim, bool, usize), (usize, bool, usize))> {
    let mut out: Vec<((Delim, bool, usize), (usize, bool, usize))> = Vec::new();
    let quoted = lines.iter().any(|l| l.text.contains('"'));
    for (d, m) in candidates(opts, quoted) {
        let (k, n) = score(lines, d, m);
        if k > 0 {
            out.push(((d, m, n), (k, header_agrees(lines, d, m, n), n)));
        }
    }
    // Stable: among equal keys the earlier (preferred) candidate stays first.
    out.sort_by_key(|b| std::cmp::Reverse(b.1));
    out
}

/// Where the rows are, as indices into the sniffed lines.
pub(super) struct Located {
    pub(super) data_idx: usize,
    pub(super) header_idx: Option<usize>,
    pub(super) units_idx: Option<usize>,
}

/// Rows in a row that must look like data to start the data block.
const DATA_RUN: usize = 5;

/// The data block starts at the first run of rows that look like data; a header (and a
/// units row under it) sits directly above it: as many cells, none a number, not a
/// preamble key.
pub(super) fn locate_rows(
    lines: &[SniffLine],
    delim: Delim,
    comma: bool,
    n_fields: usize,
) -> Option<Located> {
    // The non-blank lines, judged as the search reaches them: the data block usually
    // starts within the first lines, and the thousands after it need no look. It starts at
    // the first run of DATA_RUN data rows, or at a shorter run that reaches the last line.
    let mut nonblank: Vec<usize> = Vec::new();
    let mut run = 0;
    for (k, l) in lines.iter().enumerate() {
        if l.text.trim().is_empty() {
            continue;
        }
        nonblank.push(k);
        if data_like(&l.text, delim, comma) {
            run += 1;
            if run == DATA_RUN {
                break;
            }
        } else {
            run = 0;
        }
    }
    if run == 0 {
        return None;
    }
    let start_pos = nonblank.len() - run;
    let data_idx = nonblank[start_pos];
    let is_meta_key = |text: &str| {
        let (key, _) = split_meta(text, delim);
        columns::classify_key(&key) != MetaKey::Other
    };
    let header_fits = |text: &str| {
        let cells = header_cells(text, delim);
        cells.len() == n_fields
            && cells
                .iter()
                .all(|c| parse_number(c.as_bytes(), comma).is_err())
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
    Some(Located {
        data_idx,
        header_idx,
        units_idx,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::borrow::Cow;

    fn lines(text: &str) -> Vec<SniffLine<'_>> {
        text.lines()
            .enumerate()
            .map(|(k, l)| SniffLine {
                no: k + 1,
                offset: 0,
                text: Cow::Borrowed(l),
            })
            .collect()
    }

    #[test]
    fn delimiter_and_decimal_mark_are_sniffed() {
        let o = ReadOptions::default();
        let l = lines("a;b\n1,5;2\n-3,25;4e-3\n");
        assert_eq!(pick_delimiter(&l, &o), Some((Delim::Byte(b';'), true, 2)));
        let l = lines("t,v\n0,1.5\n1,2.5\n");
        assert_eq!(pick_delimiter(&l, &o), Some((Delim::Byte(b','), false, 2)));
        let l = lines("0.5 1.5\t2\n0.25 3 4\n");
        assert_eq!(pick_delimiter(&l, &o), Some((Delim::Whitespace, false, 3)));
        // A one-cell header settles a column of decimal-comma numbers.
        let l = lines("v [V]\n1,25\n2,5\n");
        let (_, comma, n) = pick_delimiter(&l, &o).unwrap();
        assert!(comma);
        assert_eq!(n, 1);
    }

    #[test]
    fn a_close_call_on_the_first_lines_is_decided_on_all_of_them() {
        let o = ReadOptions::default();
        // Integers read the same under either decimal mark: the first 64 lines tie, and
        // the decimal-comma rows after them settle it.
        let text = format!("{}{}", "1;2\n".repeat(300), "1,5;2,5\n".repeat(500));
        let l = lines(&text);
        assert_eq!(pick_delimiter(&l, &o), Some((Delim::Byte(b';'), true, 2)));
        // A clear winner on the first lines is the winner on all of them.
        let text = format!("t,v\n{}", "0.5,1.25\n".repeat(1000));
        let l = lines(&text);
        assert_eq!(pick_delimiter(&l, &o), Some((Delim::Byte(b','), false, 2)));
    }

    #[test]
    fn rows_header_and_units_row_are_located() {
        let l = lines("Sample rate: 1 GHz\ntime,v\ns,V\n0,1\n1e-9,2\n2e-9,3\n");
        let found = locate_rows(&l, Delim::Byte(b','), false, 2).unwrap();
        assert_eq!(found.data_idx, 3);
        assert_eq!(found.header_idx, Some(1));
        assert_eq!(found.units_idx, Some(2));
        // A preamble key directly above headerless rows is not a header.
        let l = lines("Units,V\n1,2\n3,4\n");
        let found = locate_rows(&l, Delim::Byte(b','), false, 2).unwrap();
        assert_eq!((found.data_idx, found.header_idx), (1, None));
        // A text cell in the first data row keeps the row in the data block.
        let l = lines("t,v\n0,open\n1,2\n2,3\n");
        let found = locate_rows(&l, Delim::Byte(b','), false, 2).unwrap();
        assert_eq!((found.data_idx, found.header_idx), (1, Some(0)));
    }

    /// Columns split by spaces under a header whose units stand apart from the names: the
    /// header is found (four words over two columns), and a row of units alone under a
    /// header of names stays a units row.
    #[test]
    fn a_spaced_header_with_units_apart_is_a_header() {
        let l = lines("t [ms] v_sw [V]\n-4 0.006\n-3.999 -0.018\n-3.998 0.079\n");
        let found = locate_rows(&l, Delim::Whitespace, false, 2).unwrap();
        assert_eq!((found.data_idx, found.header_idx), (1, Some(0)));
        assert_eq!(
            super::header_cells("t [ms]  v_sw (V)", Delim::Whitespace),
            ["t [ms]", "v_sw (V)"]
        );
        let l = lines("t v\n[s] [V]\n0 1\n1 2\n2 3\n");
        let found = locate_rows(&l, Delim::Whitespace, false, 2).unwrap();
        assert_eq!(
            (found.data_idx, found.header_idx, found.units_idx),
            (2, Some(0), Some(1))
        );
        // Commas keep every cell: a bracketed cell there is a column of its own.
        assert_eq!(
            super::header_cells("t,[V]", Delim::Byte(b',')),
            ["t", "[V]"]
        );
    }
}
