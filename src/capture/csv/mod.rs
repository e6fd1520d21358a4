//! Delimited text captures as people have them: free-text metadata before an optional
//! header, comma, semicolon, tab or space delimiters, decimal point or comma, a time column
//! or a stated sample interval, units in the header.
//!
//! [`open`] sniffs the layout from the first lines (at most `SNIFF_BYTES` and
//! `SNIFF_LINES`) and reads the data rows among them with the stream's own fast path: their
//! times give the sample interval, their values the first block. [`CsvStream`] hands those
//! out (their times checked as every row's are) and reads on after them in blocks, checking
//! each row as it goes. When the fast path cannot read every sniffed row (blank lines,
//! quoted or padded cells, a bad row), the sniff reads only the time cells and the stream
//! reads every data row from the first.

mod layout;
mod preamble;
mod rows;
mod text;
mod timebase;

use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::cells::{trim_cell, CellError, Cells, Delim};
use super::columns;
use super::lines::CHUNK_BYTES;
use super::{Capture, CaptureError, Channel, Format, ReadOptions};
use layout::{locate_rows, pick_delimiter, Located};
use preamble::read_preamble;
pub(crate) use rows::CsvStream;
use rows::RowFormat;
use text::{check_text, split_lines, SNIFF_BYTES, UTF8_BOM};
use timebase::{looks_like_time, window_times, TimeCheck, JITTER_FRACTION};

/// What one column of a data row holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Role {
    Time,
    Skip,
    Value(usize),
}

pub(super) fn csv_err(
    file: &Path,
    line: usize,
    column: usize,
    message: impl Into<String>,
) -> CaptureError {
    CaptureError::Csv {
        file: file.to_path_buf(),
        line,
        column,
        message: message.into(),
    }
}

pub(super) fn invalid(file: &Path, message: impl Into<String>) -> CaptureError {
    CaptureError::Invalid {
        file: file.to_path_buf(),
        message: message.into(),
    }
}

pub(super) fn cell_message(cell: &[u8], e: CellError) -> String {
    let shown: String = String::from_utf8_lossy(cell).chars().take(40).collect();
    match e {
        CellError::Empty => "empty cell; expected a number".to_string(),
        CellError::NotANumber => format!("'{shown}' is not a number; expected a number"),
        CellError::NotFinite => format!(
            "'{shown}' is not a finite number; expected a number (NaN and infinity cannot be measured)"
        ),
        CellError::Overrange => format!(
            "'{shown}' is the value instruments write for a sample out of range or missing, not a measurement: the signal left the screen there (capture again with more volts per division), or cut the record before it"
        ),
    }
}

/// Cells of a row, without the empty cell a trailing delimiter leaves; nothing is
/// collected (the sniffer looks at thousands of lines under every candidate delimiter).
pub(super) fn row_cell_iter(text: &str, delim: Delim) -> impl Iterator<Item = &[u8]> {
    let mut cells = Cells::new(text.as_bytes(), delim).peekable();
    let mut n = 0usize;
    std::iter::from_fn(move || {
        let c = cells.next()?;
        if n > 0 && cells.peek().is_none() && trim_cell(c).is_empty() {
            return None;
        }
        n += 1;
        Some(c)
    })
}

/// Cells of a row, without the empty cell a trailing delimiter leaves.
pub(super) fn row_cells(text: &str, delim: Delim) -> Vec<&[u8]> {
    row_cell_iter(text, delim).collect()
}

/// The first cell, among the first lines, that is a number followed by letters (`-0.004s`,
/// `23.4V`, `1,5 mA`): rows written with their units in every cell, which no delimiter turns
/// into rows of numbers.
fn numbers_with_units(lines: &[text::SniffLine]) -> Option<(usize, String)> {
    lines.iter().take(64).find_map(|l| {
        let cell = l
            .text
            .split([',', ';', '\t'])
            .map(str::trim)
            .find(|c| !c.is_empty())?;
        let (_, end) = super::decimal::read_prefix(cell.as_bytes(), false)
            .or_else(|| super::decimal::read_prefix(cell.as_bytes(), true))?;
        let rest = cell.get(end..)?.trim_start();
        (!rest.is_empty() && rest.chars().all(char::is_alphabetic))
            .then(|| (l.no, cell.chars().take(40).collect()))
    })
}

/// Cells of a header row. Between columns split by spaces, a unit written apart from its
/// name (`t [ms] v_sw [V]`) is a cell of its own; it is joined to the name before it, so the
/// header has one cell per column and the unit is not lost (a time in ms taken as seconds is
/// a thousand times off). Other delimiters give the cells as they are.
pub(super) fn header_cells(text: &str, delim: Delim) -> Vec<String> {
    let bracketed_unit = |cell: &str| {
        cell.starts_with(['[', '(']) && cell.ends_with([']', ')']) && columns::is_unit_cell(cell)
    };
    let mut out: Vec<String> = Vec::new();
    for c in row_cell_iter(text, delim) {
        let cell = String::from_utf8_lossy(trim_cell(c)).into_owned();
        match out.last_mut() {
            // (A row of units alone, `[s] [V]`, stays one cell per unit.)
            Some(prev)
                if delim == Delim::Whitespace && bracketed_unit(&cell) && !bracketed_unit(prev) =>
            {
                prev.push(' ');
                prev.push_str(&cell);
            }
            _ => out.push(cell),
        }
    }
    out
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
    // The length of a regular file: room for the whole head at once (grown from nothing,
    // the buffer was copied a dozen times over for a file of a few hundred KiB), and the
    // stream's reads capped at it.
    let length = f.metadata().ok().filter(|m| m.is_file()).map(|m| m.len());
    let head_room = length.map_or(0, |n| usize::try_from(n).unwrap_or(usize::MAX));
    let mut head = Vec::with_capacity((head_room.min(SNIFF_BYTES) + 1).max(CHUNK_BYTES));
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
    let (latin1, valid) = check_text(path, &head, &mut cap.notes)?;
    let lines = split_lines(path, &head, valid, complete, latin1)?;

    let best = pick_delimiter(&lines, opts);
    let Some((delim, comma, n_fields)) = best else {
        let last = lines.last().map_or(1, |l| l.no);
        let why = match numbers_with_units(&lines) {
            Some((no, cell)) => format!(
                " (line {no}: '{cell}' is a number with its unit after it; export plain numbers, the units in the header)"
            ),
            None => " (a header alone is not a capture)".to_string(),
        };
        return Err(invalid(
            path,
            format!("no rows of numbers in lines 1 to {last}; expected rows of numbers{why}"),
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

    let Some(found) = locate_rows(&lines, delim, comma, n_fields) else {
        return Err(invalid(
            path,
            "no block of number rows found; expected rows of numbers after any header",
        ));
    };
    let Located {
        data_idx,
        header_idx,
        units_idx,
    } = found;
    let data_line = lines[data_idx].no;
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
            header_cells(&lines[h].text, delim)
                .iter()
                .map(|c| columns::split_name_unit(c))
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

    let data_lines = &lines[data_idx..];
    let (time_col, index_col) = time_and_index_columns(
        &header,
        header_idx.is_some(),
        data_lines,
        (n_fields, delim, comma),
        opts.dt_s.or(pre.interval_s),
        &mut cap,
    );
    let (roles, factors) = build_channels(
        &header, &unit_row, &pre.units, time_col, index_col, &mut cap,
    );
    if cap.channels.is_empty() {
        return Err(invalid(
            path,
            format!("line {data_line}: the rows hold only a time column; expected at least one value column"),
        ));
    }

    let format = RowFormat {
        file: path.to_path_buf(),
        delim,
        decimal_comma: comma,
        n_fields,
        roles,
        factors,
    };

    // Time base.
    let mut time_check = None;
    let mut dt_from_time = None;
    let mut head_rows = None;
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
        // The sniffed rows are read once, by the stream's own fast path, when it reads
        // every one of them: their times give the interval, their values the first block.
        // Otherwise (blank lines, rows the stream reads its general way or refuses) the
        // time cells are read here and the stream reads every row itself.
        head_rows = window_span(&head, &lines, data_idx, complete)
            .map(|(a, b)| (b - a, format.read_head_rows(&head[a..b], data_lines.len())))
            .filter(|(n, rows)| rows.bytes == *n && rows.times.len() == data_lines.len())
            .map(|(_, rows)| rows);
        let read_here;
        let times: &[(f64, f64, usize)] = match &head_rows {
            Some(rows) => &rows.times,
            None => {
                read_here = window_times(data_lines, tc, n_fields, delim, comma);
                &read_here
            }
        };
        if let Some(&(t0, _, _)) = times.first() {
            cap.t0_s = t0 * factor;
        }
        if let Some(check) = TimeCheck::from_first_rows(times, factor) {
            let dt = check.dt_s;
            if let Some(coarsest) = check.coarse_resolution_s {
                cap.notes.push(format!(
                    "time column printed with a resolution of {:e} s; its steps are checked only that closely",
                    super::sig(coarsest)
                ));
            }
            dt_from_time = Some(dt);
            time_check = Some(check);
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

    // Stream from the first data row, or from the first after the rows read above.
    let offset = lines[data_idx].offset;
    let checked = time_check.is_some();
    let mut stream = CsvStream::new(format, f, offset as u64, data_line, time_check, length);
    let mut text_from = offset;
    if let Some(rows) = head_rows.filter(|_| checked) {
        text_from += rows.bytes;
        stream = stream.with_head_rows(rows);
    }
    if complete {
        stream = stream.with_whole_text(head, text_from);
    }
    Ok((cap, stream, pre.record_length))
}

/// The bytes of the sniffed lines from the first data row to the last line, its line end
/// included.
fn window_span(
    head: &[u8],
    lines: &[text::SniffLine],
    data_idx: usize,
    complete: bool,
) -> Option<(usize, usize)> {
    let first = lines.get(data_idx)?.offset;
    let last = lines.last()?.offset;
    let end = match memchr::memchr(b'\n', head.get(last..)?) {
        Some(k) => last + k + 1,
        None if complete => head.len(),
        None => return None,
    };
    Some((first, end))
}

/// Which column holds time and which only counts samples. A header names them; without
/// one, a first column rising in equal steps is time (or a sample count when it steps by 1
/// from 0 and an interval is stated), unless it disagrees with a stated interval.
fn time_and_index_columns(
    header: &[(String, Option<String>)],
    has_header: bool,
    data_lines: &[text::SniffLine],
    (n_fields, delim, comma): (usize, Delim, bool),
    stated: Option<f64>,
    cap: &mut Capture,
) -> (Option<usize>, Option<usize>) {
    let mut time_col = header
        .iter()
        .position(|(name, _)| columns::is_time_name(name));
    let mut counter = false;
    if time_col.is_none() && !has_header && n_fields >= 2 {
        let times = window_times(data_lines, 0, n_fields, delim, comma);
        if looks_like_time(&times) {
            let unit_steps = times.windows(2).all(|w| w[1].0 - w[0].0 == 1.0);
            let step = times.get(1).map_or(0.0, |t| t.0) - times.first().map_or(0.0, |t| t.0);
            let matches_stated =
                stated.is_none_or(|dt| ((step - dt) / dt).abs() <= JITTER_FRACTION);
            let first_is_zero = times.first().is_some_and(|t| t.0 == 0.0);
            if unit_steps && first_is_zero && stated.is_some() {
                counter = true;
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
    let index_col = match header.first() {
        _ if time_col == Some(0) => None,
        _ if counter => Some(0),
        Some((name, _)) if columns::is_index_name(name) => {
            cap.notes
                .push(format!("column '{name}' counts samples; left out"));
            Some(0)
        }
        _ => None,
    };
    (time_col, index_col)
}

/// Names, units and unit factors of the value columns, and what each column holds. A
/// unit comes from the header cell, a units row, the preamble (one for all or one per
/// column), the name (`i_...` is a current), or is taken as V; each guess is noted.
fn build_channels(
    header: &[(String, Option<String>)],
    unit_row: &[Option<String>],
    pre_units: &[String],
    time_col: Option<usize>,
    index_col: Option<usize>,
    cap: &mut Capture,
) -> (Vec<Role>, Vec<f64>) {
    let n_fields = header.len();
    let mut roles = vec![Role::Skip; n_fields];
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
                match pre_units.len() {
                    0 => None,
                    1 => pre_units.first().cloned(),
                    n if n == n_fields => pre_units.get(j).cloned(),
                    _ => pre_units.get(k_value).or(pre_units.first()).cloned(),
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
    (roles, factors)
}
