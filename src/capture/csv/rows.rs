//! Streaming the data rows into channels, block by block.
//!
//! The text is read in chunks of whole lines ([`ChunkReader`]). Each chunk is cut at line
//! ends into pieces parsed on separate threads while the next chunk is read; the pieces are
//! then joined in file order: their line numbers are offset by the lines before them, and
//! the time check is carried across each join, so the first problem in the file is the one
//! reported, at its exact line, as when every row is read one after the other.

use std::fs::File;
use std::path::PathBuf;

use super::timebase::{check_time, step_always_passes, TimeCheck, JITTER_FRACTION};
use super::{cell_message, csv_err, Role};
use crate::capture::cells::{
    bare_delimiter, parse_number, parse_time_cell, pow10, trim_cell, Cells, Delim,
};
use crate::capture::decimal::{
    read_prefix, read_short_point, Decimal, FirstWordStep, SciShape, SciShort, ShortCell,
};
use crate::capture::lines::{Chunk, ChunkEnd, ChunkReader, MAX_LINE_BYTES};
use crate::capture::CaptureError;

/// How a data row is laid out, and what each cell becomes.
pub(super) struct RowFormat {
    pub(super) file: PathBuf,
    pub(super) delim: Delim,
    pub(super) decimal_comma: bool,
    pub(super) n_fields: usize,
    pub(super) roles: Vec<Role>,
    /// Unit factor per value channel.
    pub(super) factors: Vec<f64>,
}

/// Chunks below this many bytes are parsed in one piece.
const PARALLEL_MIN_BYTES: usize = 1 << 18;

/// Streaming reader of the data rows.
pub(crate) struct CsvStream {
    format: RowFormat,
    source: ChunkReader<File>,
    /// The chunk read while the previous one was parsed, and how it ended.
    ahead: Option<(Chunk, ChunkEnd)>,
    spare: Chunk,
    /// Parsed pieces of the current chunk; the first `n_ready` are handed out.
    pieces: Vec<Piece>,
    n_ready: usize,
    /// Next piece and row within it to hand out.
    cursor: (usize, usize),
    /// The first problem after the rows handed out so far.
    pending: Option<CaptureError>,
    /// No text left to read.
    exhausted: bool,
    /// Line number of the first line of the next chunk.
    line_no: usize,
    /// The time column's check, carried through the file in row order.
    time: Option<TimeCheck>,
    /// Chunks below this many bytes are parsed in one piece.
    parallel_min_bytes: usize,
    /// Free-text lines after the last row, skipped: first line number, count, and the
    /// first of them.
    trailing: Option<(usize, usize, String)>,
    #[cfg(test)]
    data_start: DataStart,
    /// Rows handed over by the sniff ([`CsvStream::with_head_rows`]).
    #[cfg(test)]
    head_rows_taken: usize,
}

/// Most lines of free text after the last row that are skipped (with a warning) rather
/// than refused: a note or two an instrument or logger appends, not a second table.
const MAX_TRAILING_LINES: usize = 32;

/// The rows of one piece of a chunk, parsed.
#[derive(Default)]
struct Piece {
    /// Values per channel, `n_rows` each.
    channels: Vec<Vec<f64>>,
    n_rows: usize,
    /// Lines passed (blank ones too); line numbers in the piece count from 0.
    n_lines: usize,
    /// The time check over this piece's rows alone (its first row not checked against
    /// the row before the piece), with lines counted within the piece.
    time: Option<TimeCheck>,
    /// Time cell of the piece's first row (value, printed resolution, line in the piece),
    /// checked against the previous piece's last row when the pieces are joined.
    first_time: Option<(f64, f64, usize)>,
    /// The first problem, its line counted within the piece.
    error: Option<CaptureError>,
}

impl Piece {
    /// Takes back the counts a run of rows kept in locals (lines, rows, first time) and
    /// its problem, if any; `false` at a problem, as the runs return.
    fn end_run(
        &mut self,
        (n_lines, n_rows, first_time): (usize, usize, Option<(f64, f64, usize)>),
        problem: Option<CaptureError>,
    ) -> bool {
        (self.n_lines, self.n_rows, self.first_time) = (n_lines, n_rows, first_time);
        match problem {
            Some(e) => {
                self.fail(e);
                false
            }
            None => true,
        }
    }

    /// Keeps the piece's first problem and drops what the bad row left in the channels.
    #[cold]
    fn fail(&mut self, e: CaptureError) {
        for c in &mut self.channels {
            c.truncate(self.n_rows);
        }
        self.error = Some(e);
    }
}

/// The first data rows, read while sniffing: their values, and their time cells (value,
/// printed resolution, decimals) from which the sample interval is found.
pub(super) struct HeadRows {
    channels: Vec<Vec<f64>>,
    pub(super) times: Vec<(f64, f64, usize)>,
    /// Bytes of text the rows took, line ends included.
    pub(super) bytes: usize,
}

/// Where the data rows start, to read them again from there (tests cut the text into
/// chunks of their own after the sniff has read the first rows).
#[cfg(test)]
struct DataStart {
    offset: u64,
    line: usize,
    time: Option<TimeCheck>,
}

impl CsvStream {
    /// `length` is the file's when it was opened, if it is a regular file (see
    /// [`ChunkReader::set_length`]).
    pub(super) fn new(
        format: RowFormat,
        file: File,
        offset: u64,
        first_line: usize,
        time: Option<TimeCheck>,
        length: Option<u64>,
    ) -> Self {
        let mut source = ChunkReader::new(file, offset);
        if let Some(length) = length {
            source.set_length(length);
        }
        #[cfg(test)]
        let data_start = DataStart {
            offset,
            line: first_line,
            time: time.as_ref().map(TimeCheck::fresh),
        };
        CsvStream {
            format,
            source,
            ahead: None,
            spare: Chunk::default(),
            pieces: Vec::new(),
            n_ready: 0,
            cursor: (0, 0),
            pending: None,
            exhausted: false,
            line_no: first_line,
            time,
            parallel_min_bytes: PARALLEL_MIN_BYTES,
            trailing: None,
            #[cfg(test)]
            data_start,
            #[cfg(test)]
            head_rows_taken: 0,
        }
    }

    /// Hands out the rows the sniff read (`rows`, the first of the data) before reading on
    /// after them, their times checked as the stream checks every row: a short capture's
    /// first rows are not read twice. Without a time check the rows are read again.
    pub(super) fn with_head_rows(mut self, rows: HeadRows) -> Self {
        let Some(template) = self.time.as_ref() else {
            return self;
        };
        let bytes = rows.bytes;
        #[cfg(test)]
        {
            self.head_rows_taken = rows.times.len();
        }
        let piece = self.format.head_piece(rows, template);
        self.source.skip(bytes as u64);
        self.pieces = vec![piece];
        self.join_pieces();
        self
    }

    /// Streams the rows from the text already read: `text` is the whole file and the
    /// rows start at byte `offset`. A short file sniffed whole is not read a second time.
    pub(super) fn with_whole_text(mut self, text: Vec<u8>, offset: usize) -> Self {
        self.source.finish();
        self.ahead = Some((Chunk::from_text(text, offset), ChunkEnd::Last));
        self
    }

    /// Sets the bytes read per chunk (tests cut lines at every place with tiny chunks).
    #[cfg(test)]
    pub(crate) fn set_chunk_bytes(&mut self, n: usize) {
        self.read_from_the_first_row();
        self.source.set_chunk_bytes(n);
    }

    /// Cuts every chunk into pieces, however small (tests check the joins on small files).
    #[cfg(test)]
    pub(crate) fn always_in_pieces(&mut self) {
        self.read_from_the_first_row();
        self.parallel_min_bytes = 0;
    }

    /// Forgets the rows read so far (the sniff's, a file's text read whole) and reads
    /// again from the first data row, in chunks.
    #[cfg(test)]
    fn read_from_the_first_row(&mut self) {
        self.source.restart_at(self.data_start.offset);
        self.ahead = None;
        self.pieces.clear();
        self.n_ready = 0;
        self.cursor = (0, 0);
        self.pending = None;
        self.exhausted = false;
        self.line_no = self.data_start.line;
        self.time = self.data_start.time.as_ref().map(TimeCheck::fresh);
        self.head_rows_taken = 0;
    }

    /// Appends up to `max` samples to each channel; returns how many rows were read. The
    /// block that would hold a bad row is an error.
    pub(crate) fn fill(&mut self, out: &mut [Vec<f64>], max: usize) -> Result<usize, CaptureError> {
        let mut n = 0;
        loop {
            while n < max && self.cursor.0 < self.n_ready {
                let Some(p) = self.pieces.get(self.cursor.0) else {
                    break;
                };
                let from = self.cursor.1;
                let take = p.n_rows.saturating_sub(from).min(max - n);
                if take == 0 {
                    self.cursor = (self.cursor.0 + 1, 0);
                    continue;
                }
                for (o, ch) in out.iter_mut().zip(&p.channels) {
                    o.extend_from_slice(ch.get(from..from + take).unwrap_or(&[]));
                }
                self.cursor.1 += take;
                n += take;
            }
            if n >= max {
                return Ok(n);
            }
            if let Some(e) = self.pending.take() {
                self.exhausted = true;
                return Err(e);
            }
            if self.exhausted {
                return Ok(n);
            }
            self.next_chunk();
        }
    }

    /// Parses the next chunk while reading the one after it, then joins its pieces.
    fn next_chunk(&mut self) {
        let (buf, end) = match self.ahead.take() {
            Some(a) => a,
            None => {
                let mut buf = std::mem::take(&mut self.spare);
                let end = self.source.read_chunk(&mut buf);
                (buf, end)
            }
        };
        let more = matches!(end, ChunkEnd::More);
        let mut next = std::mem::take(&mut self.spare);
        let (source, format, pieces) = (&mut self.source, &self.format, &mut self.pieces);
        let template = self.time.as_ref();
        let min_bytes = self.parallel_min_bytes;
        let (next_end, ()) = rayon::join(
            || more.then(|| source.read_chunk(&mut next)),
            || format.parse_chunk(buf.bytes(), template, min_bytes, pieces),
        );
        // The parsed chunk's bytes are spent: its buffer takes the next read.
        match next_end {
            Some(e) => self.ahead = Some((next, e)),
            None => drop(next),
        }
        let first_line = self.line_no;
        self.join_pieces();
        let ends_in_text = self.ends_in_text(&buf, first_line, &end);
        self.spare = buf;
        if ends_in_text {
            // Nothing follows the text: the rows before it are the whole capture.
            self.pending = None;
            self.exhausted = true;
            return;
        }
        match end {
            ChunkEnd::More => {}
            ChunkEnd::Last => self.exhausted = true,
            ChunkEnd::Failed(source) => {
                self.exhausted = true;
                if self.pending.is_none() {
                    self.pending = Some(CaptureError::Io {
                        file: self.format.file.clone(),
                        source,
                    });
                }
            }
        }
    }

    /// Whether the problem just found starts the free text some exports append after the
    /// last row: from its line to the end of the file, at most [`MAX_TRAILING_LINES`]
    /// lines, each blank or with a first cell that is no number (a bad cell in a row of
    /// numbers stays an error). The chunks after this one are read to see; whatever the
    /// answer, nothing more is parsed. Notes the lines for a warning.
    fn ends_in_text(&mut self, chunk: &Chunk, first_line: usize, end: &ChunkEnd) -> bool {
        let Some(CaptureError::Csv { line, .. }) = &self.pending else {
            return false;
        };
        let line = *line;
        // The problem's line within this chunk.
        let mut text = chunk.bytes();
        for _ in first_line..line {
            match memchr::memchr(b'\n', text) {
                Some(k) => text = &text[k + 1..],
                None => return false,
            }
        }
        let (mut count, mut first) = (0usize, None);
        if !self.all_free_text(text, &mut count, &mut first) {
            return false;
        }
        let mut last = matches!(end, ChunkEnd::Last);
        let mut ahead = self.ahead.take();
        while !last {
            let (next, end) = ahead.take().unwrap_or_else(|| {
                let mut c = Chunk::default();
                let e = self.source.read_chunk(&mut c);
                (c, e)
            });
            if matches!(end, ChunkEnd::Failed(_))
                || !self.all_free_text(next.bytes(), &mut count, &mut first)
            {
                return false;
            }
            last = matches!(end, ChunkEnd::Last);
        }
        self.trailing = Some((line, count, first.unwrap_or_default()));
        true
    }

    /// Whether every line of `text` is free text, counting them into `count` (false past
    /// [`MAX_TRAILING_LINES`]) and keeping the first that is not blank.
    fn all_free_text(&self, text: &[u8], count: &mut usize, first: &mut Option<String>) -> bool {
        if text.is_empty() {
            return true;
        }
        // A text ending in a line end would leave an empty piece after it: no line.
        let body = text.strip_suffix(b"\n").unwrap_or(text);
        for l in body.split(|&b| b == b'\n') {
            let l = l.strip_suffix(b"\r").unwrap_or(l);
            *count += 1;
            if *count > MAX_TRAILING_LINES || !self.is_free_text(l) {
                return false;
            }
            if first.is_none() && !l.trim_ascii().is_empty() {
                *first = Some(String::from_utf8_lossy(l.trim_ascii()).into_owned());
            }
        }
        true
    }

    /// A blank line, or a line of words: its first cell is no number and does not even
    /// begin like one (a digit, a sign or a decimal mark), so a mangled number or a line
    /// of digits too long to read is never taken for a note.
    fn is_free_text(&self, line: &[u8]) -> bool {
        let Ok(text) = std::str::from_utf8(line) else {
            return false;
        };
        if text.trim().is_empty() {
            return true;
        }
        if line.len() > MAX_LINE_BYTES {
            return false;
        }
        let Some(first) = super::row_cell_iter(text, self.format.delim)
            .next()
            .map(trim_cell)
        else {
            return true;
        };
        let numberlike = |b: &u8| b.is_ascii_digit() || matches!(b, b'+' | b'-' | b'.' | b',');
        !first.first().is_some_and(numberlike)
            && parse_number(first, self.format.decimal_comma).is_err()
    }

    /// Puts the parsed pieces in file order: line numbers, the time check across each
    /// join, and the first problem, after which nothing is handed out.
    fn join_pieces(&mut self) {
        self.cursor = (0, 0);
        self.n_ready = self.pieces.len();
        let file = &self.format.file;
        let mut base = self.line_no;
        for (i, p) in self.pieces.iter_mut().enumerate() {
            if let (Some(all), Some(own), Some((t, q, line))) =
                (self.time.as_mut(), p.time.as_ref(), p.first_time)
            {
                if let Err(e) = check_time(file, all, t, q, base + line) {
                    p.n_rows = 0;
                    self.pending = Some(e);
                    self.n_ready = i + 1;
                    return;
                }
                all.steps += own.steps;
                if own.jittered > 0 {
                    if all.jittered == 0 {
                        all.first_jitter_line = base + own.first_jitter_line;
                    }
                    all.jittered += own.jittered;
                    all.max_deviation = all.max_deviation.max(own.max_deviation);
                }
                all.prev = own.prev;
            }
            if let Some(e) = p.error.take() {
                self.pending = Some(at_line_offset(e, base));
                self.n_ready = i + 1;
                return;
            }
            base += p.n_lines;
        }
        self.line_no = base;
    }

    /// Warnings known only once every row has been read.
    pub(crate) fn end_warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if let Some((line, n, first)) = &self.trailing {
            w.push(format!(
                "{n} line(s) of text after the last row (from line {line}: '{first}') were not read"
            ));
        }
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

/// [`RowFormat::fast_row`] for a row of a time and one value, without the loop over
/// column roles: the same value pushed, the same length and time cell returned, or `None`
/// for the general path. (Two plain decimals are far shorter than a line may be.)
#[inline(always)]
fn fast_pair(
    text: &[u8],
    d: u8,
    comma: bool,
    shape: Option<SciShape>,
    factor: f64,
    values: &mut Vec<f64>,
) -> Option<(usize, Option<Decimal>)> {
    let (t, i) = read_time(shape, text, comma)?;
    let (v, len) = value_to_line_end(text, i, d, comma)?;
    values.push(v.value * factor);
    Some((len, Some(t)))
}

/// What follows a time cell of `t_len` bytes at the start of `row` in a row of a time and
/// one value: the delimiter `d`, a number [`read_prefix`] reads and the line's end. The
/// value and the row's length with its line end, or `None` for any other row.
#[inline(always)]
fn value_to_line_end(row: &[u8], t_len: usize, d: u8, comma: bool) -> Option<(Decimal, usize)> {
    if *row.get(t_len)? != d {
        return None;
    }
    let cell = row.get(t_len + 1..)?;
    let (v, j) = match read_short_point(cell, comma) {
        Some(r) => r,
        None => read_prefix(cell, comma)?,
    };
    let end = t_len + 1 + j;
    let len = match row.get(end) {
        Some(b'\n') => end + 1,
        Some(b'\r') if row.get(end + 1) == Some(&b'\n') => end + 2,
        None => end,
        _ => return None,
    };
    Some((v, len))
}

/// The rows of a short fixed-layout time (`short`) and one value from `*at` on, for as long
/// as each is the common case of [`RowFormat::sci_pair_run`]: its time at the exponent
/// `exp`, `step` counts of its last place after the one before (`last`: its count and sign,
/// updated), and its value read by [`read_prefix`]. The values are pushed, `*at` ends at the
/// first row that is not such a row (the caller reads it its own way), and the count of
/// rows read is returned. A loop of its own, with little state, so that it lives in
/// registers: inside the caller, which keeps the check's whole state, a third of the
/// loop's instructions were loads and stores of spilled values. Each time cell is read
/// from what changed since the last ([`SciShort::parts_after`]), and runs of unsigned
/// positive times a step apart within the cell's first word go to [`stepped_rows`].
#[inline(never)]
#[allow(clippy::too_many_arguments)]
fn quick_rows(
    text: &[u8],
    at: &mut usize,
    short: SciShort,
    (d, comma): (u8, bool),
    factor: f64,
    (exp, step): (i32, i64),
    last: &mut (i64, bool),
    values: &mut Vec<f64>,
) -> usize {
    let (mut pos, mut n) = (*at, 0);
    let (mut prev, mut prev_negative) = *last;
    // The last time cell read.
    let mut cell: Option<ShortCell> = None;
    let stepped = short.first_word_step(step);
    while let Some(rest) = text.get(pos..) {
        if let (Some(s), Some(c)) = (stepped, cell.as_mut()) {
            if c.steps() {
                let k = stepped_rows(text, &mut pos, short, s, c, (d, comma), factor, values);
                if k > 0 {
                    n += k;
                    prev = c.count() as i64;
                    continue;
                }
            }
        }
        let read = cell.as_mut().and_then(|c| short.parts_after(rest, c));
        let parts = match read {
            Some(p) => p,
            None => match short.parts_kept(rest) {
                Some((p, c)) => {
                    cell = Some(c);
                    p
                }
                None => break,
            },
        };
        let (w, e, negative, t_len) = parts;
        // (w < 10^10: nine decimals at most.)
        let count = if negative { -(w as i64) } else { w as i64 };
        if e != exp || count - prev != step {
            break;
        }
        let Some((v, len)) = value_to_line_end(rest, t_len, d, comma) else {
            break;
        };
        values.push(v.value * factor);
        (prev, prev_negative) = (count, negative);
        pos += len;
        n += 1;
    }
    *at = pos;
    *last = (prev, prev_negative);
    n
}

/// The rows from `*pos` on whose time cell is `step` after the one before, from `cell` (an
/// unsigned positive cell, updated) on, with the second word unchanged: each cell's first
/// word is worked out ahead ([`SciShort::next_first_word`]) and compared, the value read
/// and pushed as in [`quick_rows`]. `*pos` ends at the first other row; returns how many
/// were read. Its state is four words, which stay in registers.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn stepped_rows(
    text: &[u8],
    pos: &mut usize,
    short: SciShort,
    step: FirstWordStep,
    cell: &mut ShortCell,
    (d, comma): (u8, bool),
    factor: f64,
    values: &mut Vec<f64>,
) -> usize {
    let t_len = short.cell_bytes();
    let (mut words, mut p, mut n) = (cell.words(), *pos, 0);
    let mut repeat = RepeatedValue::default();
    while let Some(next) = short.next_first_word(words.0, step) {
        let Some(rest) = text.get(p..) else {
            break;
        };
        let Some(now) = short.stepped_words(rest, words.1, next) else {
            break;
        };
        let Some((x, len)) = repeat.or_read(rest, t_len, (d, comma), factor) else {
            break;
        };
        values.push(x);
        words = now;
        p += len;
        n += 1;
    }
    cell.step_on(words, n as u64, step);
    *pos = p;
    n
}

/// The rest of the last row after its time cell (the delimiter, the value and the line
/// end) when it fits in sixteen bytes, with the value it gave: a row whose rest is the same
/// bytes gives the same value and rest length, so it is not read again. Digitised samples
/// sit on a few codes, and a flat stretch prints the same value row after row (three rows
/// in four of the benchmark's CSV: its 2 M-row head took 433 M instructions to read
/// before, 308 M after). Where values seldom repeat the comparison and the keeping cost
/// about 18 instructions a row (a 2 M-row file of noisy values, times a step apart: 518 M
/// to 554 M, the wall time within the noise). A credit that stopped comparing after
/// misses cost more than it saved on both files.
#[derive(Clone, Copy, Default)]
struct RepeatedValue {
    word: u128,
    /// Bytes in the kept rest (none kept: zero).
    rest: usize,
    value: f64,
}

/// Per-rest-length masks of the bytes that make up the rest.
const REST_MASKS: [u128; 17] = {
    let mut m = [0u128; 17];
    let mut k = 1;
    while k <= 16 {
        m[k] = u128::MAX >> (128 - 8 * k);
        k += 1;
    }
    m
};

impl RepeatedValue {
    /// [`value_to_line_end`]'s value, times `factor`, and length: the kept ones when the
    /// rest of `row` from `t_len` on is the kept rest, else read (and kept).
    #[inline(always)]
    fn or_read(
        &mut self,
        row: &[u8],
        t_len: usize,
        (d, comma): (u8, bool),
        factor: f64,
    ) -> Option<(f64, usize)> {
        let word = word_at(row, t_len);
        if let Some(r) = word.and_then(|w| self.of(w, t_len)) {
            return Some(r);
        }
        let (v, len) = value_to_line_end(row, t_len, d, comma)?;
        let x = v.value * factor;
        if let Some(word) = word {
            if row.get(len.wrapping_sub(1)) == Some(&b'\n') {
                self.keep(word, len - t_len, x);
            }
        }
        Some((x, len))
    }

    /// The value and length of the row whose rest (from `t_len` on) begins with `word`,
    /// when that rest is the kept one.
    #[inline(always)]
    fn of(&self, word: u128, t_len: usize) -> Option<(f64, usize)> {
        let mask = REST_MASKS.get(self.rest).copied().unwrap_or(0);
        (mask != 0 && (word ^ self.word) & mask == 0).then_some((self.value, t_len + self.rest))
    }

    /// Keeps the rest that begins with `word`, `rest` bytes long and ending with a line
    /// end, which read as `value`, when it fits in the word. (The last row of a text may
    /// have no line end: the same bytes and a line end would be another row.)
    #[inline(always)]
    fn keep(&mut self, word: u128, rest: usize, value: f64) {
        if rest <= 16 {
            (self.word, self.rest, self.value) = (word, rest, value);
        }
    }
}

/// The sixteen bytes of `row` from `at` (first byte lowest).
#[inline(always)]
fn word_at(row: &[u8], at: usize) -> Option<u128> {
    let b: [u8; 16] = row.get(at..at + 16)?.try_into().ok()?;
    Some(u128::from_le_bytes(b))
}

/// The time cell at the start of `text`: by its fixed layout when the column has one and
/// this cell keeps to it, else by the general fast path (the same number either way).
#[inline(always)]
fn read_time(shape: Option<SciShape>, text: &[u8], comma: bool) -> Option<(Decimal, usize)> {
    if let Some(r) = shape.and_then(|s| s.read(text)) {
        return Some(r);
    }
    read_prefix(text, comma)
}

/// The same error with its line moved from a count within a piece to the file's count.
fn at_line_offset(e: CaptureError, base: usize) -> CaptureError {
    match e {
        CaptureError::Csv {
            file,
            line,
            column,
            message,
        } => CaptureError::Csv {
            file,
            line: line + base,
            column,
            message,
        },
        other => other,
    }
}

impl RowFormat {
    /// Reads rows of bare numbers from the start of `text` by the fast path the stream
    /// uses, up to the first row it cannot read (which the stream then reads, or refuses,
    /// its own way) or the end of `text`; `lines` (the lines in `text`) sizes the storage.
    pub(super) fn read_head_rows(&self, text: &[u8], lines: usize) -> HeadRows {
        let mut rows = HeadRows {
            channels: (0..self.factors.len())
                .map(|_| Vec::with_capacity(lines))
                .collect(),
            times: Vec::with_capacity(lines),
            bytes: 0,
        };
        let Some((d, comma)) = self.fast_delimiter() else {
            return rows;
        };
        let pair = self.time_and_one_value();
        let shape = self.time_shape(text, d);
        while let Some(rest) = text.get(rows.bytes..).filter(|r| !r.is_empty()) {
            let got = match pair {
                Some(f) => rows
                    .channels
                    .first_mut()
                    .and_then(|c| fast_pair(rest, d, comma, shape, f, c)),
                None => self.fast_row(rest, d, comma, shape, &mut rows.channels),
            };
            let Some((len, Some(t))) = got else {
                break;
            };
            rows.times
                .push((t.value, pow10(t.last_place), t.decimals as usize));
            rows.bytes += len;
        }
        // A row the fast path gave up on may have left values behind.
        for c in &mut rows.channels {
            c.truncate(rows.times.len());
        }
        rows
    }

    /// The piece of the rows the sniff read, each counted and its time checked by
    /// [`RowFormat::row_read`], as the stream's general path counts a row (lines counted
    /// within the piece).
    fn head_piece(&self, rows: HeadRows, template: &TimeCheck) -> Piece {
        let mut p = Piece {
            channels: rows.channels,
            time: Some(template.fresh()),
            ..Piece::default()
        };
        let want_place = !template.exact;
        for &(t, place, _) in &rows.times {
            let q = if want_place { place } else { 0.0 };
            if !self.row_read(&mut p, Ok(Some((t, q)))) {
                break;
            }
        }
        p
    }

    /// Cuts a chunk into pieces at line ends and parses them, on several threads when the
    /// chunk is large.
    fn parse_chunk(
        &self,
        chunk: &[u8],
        time: Option<&TimeCheck>,
        min_bytes: usize,
        pieces: &mut Vec<Piece>,
    ) {
        let n_pieces = if chunk.len() < min_bytes.max(1) {
            1
        } else {
            // Four times the threads, so a thread busy reading ahead or surveying the last
            // block does not hold the others up: the pieces left when it comes back are
            // short (twice the threads: 10 M CSV median 0.265 s against 0.246 s, 15 runs in
            // turn on 2 cores).
            (4 * rayon::current_num_threads()).clamp(2, 16)
        };
        let mut bounds = Vec::with_capacity(n_pieces + 1);
        bounds.push(0);
        for k in 1..n_pieces {
            let from = (chunk.len() * k / n_pieces).max(bounds.last().copied().unwrap_or(0));
            let cut = memchr::memchr(b'\n', chunk.get(from..).unwrap_or(&[]))
                .map_or(chunk.len(), |j| from + j + 1);
            if cut > bounds.last().copied().unwrap_or(0) && cut < chunk.len() {
                bounds.push(cut);
            }
        }
        bounds.push(chunk.len());
        let n = bounds.len() - 1;
        pieces.resize_with(n, Piece::default);
        let work = |(k, p): (usize, &mut Piece)| {
            let text = match (bounds.get(k), bounds.get(k + 1)) {
                (Some(&a), Some(&b)) => chunk.get(a..b).unwrap_or(&[]),
                _ => &[],
            };
            self.parse_piece(text, time, p);
        };
        if n > 1 {
            use rayon::prelude::*;
            pieces.par_iter_mut().enumerate().for_each(work);
        } else {
            pieces.iter_mut().enumerate().for_each(work);
        }
    }

    /// Parses the lines of one piece, stopping at the first problem.
    fn parse_piece(&self, text: &[u8], time: Option<&TimeCheck>, p: &mut Piece) {
        self.parse_piece_by(text, time, p, true);
    }

    /// [`RowFormat::parse_piece`], where `by_digits` allows [`RowFormat::sci_pair_run`]
    /// (the tests compare it with the path it stands in for).
    fn parse_piece_by(
        &self,
        text: &[u8],
        time: Option<&TimeCheck>,
        p: &mut Piece,
        by_digits: bool,
    ) {
        let n_channels = self.factors.len();
        p.channels.resize_with(n_channels, Vec::new);
        // Room for the rows the piece holds if they are about as long as its first, and
        // an eighth more: a short capture's vectors were otherwise grown, and copied, a
        // dozen times. (Counting the line ends instead was a pass over the text, 1.3 % of
        // a long file's time, where the vectors kept their room from the last chunk.)
        // (A first line of under eight bytes, blank say, is no guide: taken as eight, the
        // room stays near the size of the text itself.)
        let first = memchr::memchr(b'\n', text)
            .map_or(text.len(), |k| k + 1)
            .max(8);
        let rows = text.len() / first + text.len() / first / 8 + 16;
        for c in &mut p.channels {
            c.clear();
            c.reserve(rows);
        }
        p.n_rows = 0;
        p.n_lines = 0;
        p.first_time = None;
        p.error = None;
        p.time = time.map(TimeCheck::fresh);
        let want_place = time.is_some_and(|tc| !tc.exact);
        let fast = self.fast_delimiter();
        let pair = self.time_and_one_value();
        let shape = fast.and_then(|(d, _)| self.time_shape(text, d));
        let mut pos = 0;
        loop {
            if let Some((d, comma)) = fast {
                let read_on = match (pair, shape) {
                    (Some(f), Some(s)) if want_place && by_digits => {
                        self.sci_pair_run(text, &mut pos, p, s, (d, comma), f)
                    }
                    (Some(f), _) => self.fast_run(text, &mut pos, p, want_place, |row, out| {
                        fast_pair(row, d, comma, shape, f, out.first_mut()?)
                    }),
                    (None, _) => self.fast_run(text, &mut pos, p, want_place, |row, out| {
                        self.fast_row(row, d, comma, shape, out)
                    }),
                };
                if !read_on {
                    return;
                }
            }
            let Some(rest) = text.get(pos..).filter(|r| !r.is_empty()) else {
                break;
            };
            let (line, next) = match memchr::memchr(b'\n', rest) {
                Some(k) => (rest.get(..k).unwrap_or(&[]), pos + k + 1),
                None => (rest, text.len()),
            };
            pos = next;
            if !self.take_line(line, want_place, p) {
                return;
            }
        }
    }

    /// Reads rows with `read` (a fast path: [`fast_pair`] or [`RowFormat::fast_row`]) from
    /// `pos` for as long as it can, its state in locals (the piece's fields, behind a
    /// reference, would be read back from memory after every push); `pos` ends at the
    /// first row it cannot read, whose values the fast path took are dropped again.
    /// `false` at a problem, kept in `p`.
    fn fast_run(
        &self,
        text: &[u8],
        pos: &mut usize,
        p: &mut Piece,
        want_place: bool,
        mut read: impl FnMut(&[u8], &mut [Vec<f64>]) -> Option<(usize, Option<Decimal>)>,
    ) -> bool {
        let mut channels = std::mem::take(&mut p.channels);
        let mut time = p.time.take();
        let (mut n_lines, mut n_rows, mut first_time) = (p.n_lines, p.n_rows, p.first_time);
        let mut at = *pos;
        let mut problem = None;
        while let Some(rest) = text.get(at..).filter(|r| !r.is_empty()) {
            let Some((len, t)) = read(rest, &mut channels) else {
                for c in &mut channels {
                    c.truncate(n_rows);
                }
                break;
            };
            at += len;
            let here = n_lines;
            n_lines += 1;
            let t = t.map(|t| (t.value, if want_place { pow10(t.last_place) } else { 0.0 }));
            if let (Some(tc), Some((t, q))) = (time.as_mut(), t) {
                if first_time.is_none() {
                    first_time = Some((t, q, here));
                }
                if let Err(e) = check_time(&self.file, tc, t, q, here) {
                    problem = Some(e);
                    break;
                }
            }
            n_rows += 1;
        }
        p.channels = channels;
        p.time = time;
        *pos = at;
        p.end_run((n_lines, n_rows, first_time), problem)
    }

    /// [`RowFormat::fast_run`] with [`fast_pair`] for the commonest layout of all: a time
    /// printed in a fixed layout (`shape`) with its printed place checked, and one value.
    /// The same rows are read, with the same values, the same check and the same state
    /// left behind; but the check's common case is made on the printed digits. Two times
    /// with the same exponent differ by a whole number of counts of their last place, and
    /// once [`step_always_passes`] has shown that a step of that many counts at that
    /// exponent always passes, a row with it is counted without forming its time (which
    /// took a division) or the check's arithmetic: a fifth of a long file's rows' cost.
    /// The previous time, which the check keeps, is formed again from its digits when a
    /// row needs it (the same number: the same digits go through the same arithmetic).
    #[inline(never)]
    fn sci_pair_run(
        &self,
        text: &[u8],
        pos: &mut usize,
        p: &mut Piece,
        shape: SciShape,
        (d, comma): (u8, bool),
        factor: f64,
    ) -> bool {
        let Some(mut tc) = p.time.take() else {
            return true;
        };
        let mut values = p
            .channels
            .first_mut()
            .map(std::mem::take)
            .unwrap_or_default();
        let (mut n_lines, mut n_rows, mut first_time) = (p.n_lines, p.n_rows, p.first_time);
        // The previous row's time as printed (signed count of its last place, exponent,
        // sign), and whether `tc.prev` holds it already.
        let mut held: Option<(i64, i32, bool)> = None;
        let mut formed = true;
        // The exponent and step (in counts) known to pass, and the last pair tried.
        let mut sure: Option<(i32, i64)> = None;
        let mut tried: Option<(i32, i64)> = None;
        let form = |tc: &mut TimeCheck, (m, e, negative): (i64, i32, bool)| {
            if let Some(t) = shape.decimal(m.unsigned_abs(), e, negative) {
                tc.prev = Some((t.value * tc.factor, pow10(t.last_place) * tc.factor));
            }
        };
        let mut at = *pos;
        let mut problem = None;
        let short = shape.short();
        loop {
            // Runs of rows that are all the common case, by the lean loop.
            if let (Some(s), Some((m, e, negative)), Some((se, step))) = (short, held, sure) {
                if e == se {
                    let mut last = (m, negative);
                    let n = quick_rows(
                        text,
                        &mut at,
                        s,
                        (d, comma),
                        factor,
                        (e, step),
                        &mut last,
                        &mut values,
                    );
                    if n > 0 {
                        tc.steps += n as u64;
                        n_lines += n;
                        n_rows += n;
                        held = Some((last.0, e, last.1));
                        formed = false;
                    }
                }
            }
            let Some(rest) = text.get(at..).filter(|r| !r.is_empty()) else {
                break;
            };
            let parts = match short {
                Some(s) => s.parts(rest).or_else(|| shape.parts(rest)),
                None => shape.parts(rest),
            };
            let Some((w, exp, negative, t_len)) = parts else {
                break;
            };
            let Some((v, len)) = value_to_line_end(rest, t_len, d, comma) else {
                break;
            };
            // (w < 10^15: the layout takes at most 14 decimals.)
            let count = if negative { -(w as i64) } else { w as i64 };
            let here = n_lines;
            let quick = matches!((held, sure), (Some((m, e, _)), Some((se, step)))
                if e == exp && se == exp && count - m == step);
            if quick {
                tc.steps += 1;
                formed = false;
                n_lines += 1;
            } else {
                let Some(t) = shape.decimal(w, exp, negative) else {
                    break;
                };
                n_lines += 1;
                let q = pow10(t.last_place);
                if let Some(h) = held.filter(|_| !formed) {
                    form(&mut tc, h);
                }
                if first_time.is_none() {
                    first_time = Some((t.value, q, here));
                }
                if let Err(e) = check_time(&self.file, &mut tc, t.value, q, here) {
                    problem = Some(e);
                    break;
                }
                formed = true;
                if let Some((m, ..)) = held.filter(|h| h.1 == exp) {
                    let candidate = (exp, count - m);
                    if tried != Some(candidate) {
                        tried = Some(candidate);
                        if step_always_passes(&tc, count - m, q, pow10(exp + 1)) {
                            sure = Some(candidate);
                        }
                    }
                }
            }
            held = Some((count, exp, negative));
            values.push(v.value * factor);
            at += len;
            n_rows += 1;
        }
        if let Some(h) = held.filter(|_| !formed) {
            form(&mut tc, h);
        }
        if let Some(c) = p.channels.first_mut() {
            *c = values;
        }
        p.time = Some(tc);
        *pos = at;
        p.end_run((n_lines, n_rows, first_time), problem)
    }

    /// The fixed layout of the time cells ([`SciShape`]), judged on the first line of
    /// `text` (cells split by `d`), when the time column has one.
    fn time_shape(&self, text: &[u8], d: u8) -> Option<SciShape> {
        let k = self.roles.iter().position(|r| *r == Role::Time)?;
        let line = text.split(|&b| b == b'\n').next()?;
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        SciShape::of(line.split(|&b| b == d).nth(k)?)
    }

    /// The delimiter byte and decimal comma for [`RowFormat::fast_row`] (see
    /// [`bare_delimiter`]).
    fn fast_delimiter(&self) -> Option<(u8, bool)> {
        bare_delimiter(self.delim, self.decimal_comma)
    }

    /// The factor of the one value column when rows are exactly a time and one value (the
    /// layout nearly every export uses), read by [`fast_pair`].
    fn time_and_one_value(&self) -> Option<f64> {
        match (self.roles.as_slice(), self.factors.as_slice()) {
            ([Role::Time, Role::Value(0)], &[f]) => Some(f),
            _ => None,
        }
    }

    /// Reads a row of bare numbers (no spaces, no quotes) split by the one-byte delimiter
    /// `d` straight from the text, each number read up to where it ends: the line's length
    /// with its end and the time cell, or `None` for any other row (the general path then
    /// reads it, with the same result or the error; values pushed here are the caller's to
    /// drop).
    #[inline]
    fn fast_row(
        &self,
        text: &[u8],
        d: u8,
        comma: bool,
        shape: Option<SciShape>,
        out: &mut [Vec<f64>],
    ) -> Option<(usize, Option<Decimal>)> {
        let mut i = 0;
        let mut time = None;
        let last = self.roles.len().checked_sub(1)?;
        for (k, role) in self.roles.iter().enumerate() {
            let rest = text.get(i..)?;
            match *role {
                Role::Skip => {
                    i += rest
                        .iter()
                        .position(|&b| b == d || b == b'\n')
                        .unwrap_or(rest.len());
                }
                Role::Time => {
                    let (t, len) = read_time(shape, rest, comma)?;
                    time = Some(t);
                    i += len;
                }
                Role::Value(c) => {
                    let (v, len) = read_prefix(rest, comma)?;
                    let f = self.factors.get(c).copied().unwrap_or(1.0);
                    out.get_mut(c)?.push(v.value * f);
                    i += len;
                }
            }
            if i > MAX_LINE_BYTES {
                return None;
            }
            match text.get(i) {
                Some(&b) if k < last && b == d => i += 1,
                Some(b'\n') if k == last => return Some((i + 1, time)),
                Some(b'\r') if k == last && text.get(i + 1) == Some(&b'\n') => {
                    return Some((i + 2, time))
                }
                None if k == last => return Some((i, time)),
                _ => return None,
            }
        }
        None
    }

    /// Parses one line (without its `\n`) into the piece; `false` at a problem.
    fn take_line(&self, line: &[u8], want_place: bool, p: &mut Piece) -> bool {
        if line.len() > MAX_LINE_BYTES {
            let e = csv_err(
                &self.file,
                p.n_lines,
                1,
                format!(
                    "line is longer than {} KiB; expected a row of {} numbers",
                    MAX_LINE_BYTES / 1024,
                    self.n_fields
                ),
            );
            return self.row_read(p, Err(e));
        }
        let row = line.strip_suffix(b"\r").unwrap_or(line);
        if row.iter().all(|b| b.is_ascii_whitespace()) {
            p.n_lines += 1;
            return true;
        }
        let r = self.parse_row(row, p.n_lines, want_place, &mut p.channels);
        self.row_read(p, r)
    }

    /// Counts a row read (its time checked against the row before it in the piece), or
    /// keeps the problem and drops what the bad row left; `false` at a problem.
    #[inline]
    fn row_read(&self, p: &mut Piece, row: Result<Option<(f64, f64)>, CaptureError>) -> bool {
        let here = p.n_lines;
        p.n_lines += 1;
        let problem = match (row, p.time.as_mut()) {
            (Ok(Some((t, q))), Some(tc)) => {
                if p.first_time.is_none() {
                    p.first_time = Some((t, q, here));
                }
                check_time(&self.file, tc, t, q, here).err()
            }
            (Ok(_), _) => None,
            (Err(e), _) => Some(e),
        };
        match problem {
            None => {
                p.n_rows += 1;
                true
            }
            Some(e) => {
                p.fail(e);
                false
            }
        }
    }

    /// Parses one row into `out`; returns its time cell (value and printed resolution,
    /// the latter only when `want_place`). After an error some channels may hold a value
    /// of the bad row.
    #[inline]
    fn parse_row(
        &self,
        row: &[u8],
        line: usize,
        want_place: bool,
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
                    let t = parse_time_cell(cell, self.decimal_comma, want_place)
                        .map_err(|e| csv_err(&self.file, line, count, cell_message(cell, e)))?;
                    time = Some(t);
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
}

#[cfg(test)]
mod tests {
    use super::{value_to_line_end, word_at, Piece, RepeatedValue, TimeCheck};
    use crate::capture::{read_capture, CaptureError, ReadOptions};
    use std::fmt::Write;

    /// A row whose delimiter, value and line end are the kept row's bytes gives what the
    /// kept row gave, and reading it again gives the same; a row with any byte of them
    /// changed is read anew. A rest longer than sixteen bytes, or without a line end, is
    /// not kept. The length is the rest's from the row's own time cell.
    #[test]
    fn a_repeated_value_is_the_value_read_again() {
        let time = "1.000000000e-07";
        let t_len = time.len();
        let kept_after = |row: &[u8], d: u8| {
            let mut kept = RepeatedValue::default();
            let read = kept.or_read(row, t_len, (d, false), 1.0).unwrap();
            (kept, read)
        };
        let taken = |kept: &RepeatedValue, row: &[u8], t_len: usize| {
            word_at(row, t_len).and_then(|w| kept.of(w, t_len))
        };
        let rests = [
            ",-0.3922\n",
            ",24.31\r\n",
            ",5\n",
            ";-100.98041\r\n",
            ",1.2345678901\n",
            ",1.234567890123e-05\n",
        ];
        for rest in rests {
            let d = rest.as_bytes()[0];
            let row = format!("{time}{rest}2.000000000e-07{rest}").into_bytes();
            let (v, len) = value_to_line_end(&row, t_len, d, false).unwrap();
            let (kept, read) = kept_after(&row, d);
            assert_eq!(read, (v.value, len));
            if rest.len() > 16 {
                assert_eq!(taken(&kept, &row, t_len), None, "{rest:?}");
                continue;
            }
            assert_eq!(taken(&kept, &row, t_len), Some((v.value, len)), "{rest:?}");
            // What follows the rest does not matter, and reading anew agrees.
            let mut other = row.clone();
            other.truncate(len);
            other.extend_from_slice(b"x\n7,1\n..........");
            assert_eq!(taken(&kept, &other, t_len), Some((v.value, len)));
            let again = value_to_line_end(&other, t_len, d, false).unwrap();
            assert_eq!((again.0.value.to_bits(), again.1), (v.value.to_bits(), len));
            // After a signed time cell, a byte longer.
            let signed = format!("-{time}{rest}................").into_bytes();
            assert_eq!(taken(&kept, &signed, t_len + 1), Some((v.value, len + 1)));
            for i in t_len..len {
                for b in [b'0', b'9', b'-', b'.', b'\r', b'\n', b'x', b',', b';'] {
                    let mut bent = row.clone();
                    if bent[i] != b {
                        bent[i] = b;
                        assert_eq!(taken(&kept, &bent, t_len), None, "{rest:?} byte {i}");
                    }
                }
            }
        }
        // The last row of the text, without a line end (sixteen bytes from the cell's
        // end, so the kept bytes are all there), is not kept: the same bytes with a line
        // end after them are another row.
        let row = format!("{time},1.2345678901234").into_bytes();
        let (_, len) = value_to_line_end(&row, t_len, b',', false).unwrap();
        assert_eq!(len, row.len());
        let (kept, _) = kept_after(&row, b',');
        let mut longer = row.clone();
        longer.extend_from_slice(b"\n..........");
        assert_eq!(taken(&kept, &longer, t_len), None);
    }

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

    /// Reads every row of `path` through the stream, `per_block` rows at a time, with
    /// chunks of `chunk` bytes (the default when `None`), cut into pieces when `pieces`:
    /// the values (as bits), the end warnings, or the error.
    fn read_all(
        path: &std::path::Path,
        chunk: Option<usize>,
        pieces: bool,
        per_block: usize,
    ) -> Result<(Vec<Vec<u64>>, Vec<String>), String> {
        let (cap, mut s, _) =
            crate::capture::csv::open(path, &ReadOptions::default()).map_err(|e| e.to_string())?;
        if let Some(n) = chunk {
            s.set_chunk_bytes(n);
        }
        if pieces {
            s.always_in_pieces();
        }
        let mut all = vec![Vec::new(); cap.channels.len()];
        loop {
            let mut block = vec![Vec::new(); cap.channels.len()];
            match s.fill(&mut block, per_block) {
                Ok(0) => break,
                Ok(n) => {
                    for (a, b) in all.iter_mut().zip(&block) {
                        assert_eq!(b.len(), n);
                        a.extend(b.iter().map(|x| x.to_bits()));
                    }
                }
                Err(e) => return Err(e.to_string()),
            }
        }
        Ok((all, s.end_warnings()))
    }

    /// One line of an invented record: row `k` at 1 us steps, well formed or broken in one
    /// of the ways files are.
    fn line(kind: u8, k: usize, v: f64) -> String {
        let t = k as f64 * 1e-6;
        // Times as C's `%.9e` prints them (a signed two-digit exponent, the layout the
        // fixed-layout reader takes), and one kind as Rust prints them (`1e-6`).
        let c = |t: f64| {
            let s = format!("{t:.9e}");
            let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
            let e: i32 = e.parse().unwrap_or(0);
            format!("{m}e{}{:02}", if e < 0 { '-' } else { '+' }, e.abs())
        };
        match kind {
            0 => format!("{},{v:.4}", c(t)),
            1 => format!("{},{v:.4}\r", c(t)),
            2 => String::new(),
            3 => "  \r".to_string(),
            4 => format!(" {} , \"{v:.4}\" ", c(t)),
            5 => format!("{},{v:.4},", c(t)),
            6 => format!("{},abc", c(t)),
            7 => format!("{},{v:.4},1", c(t)),
            8 => format!("{},{v:.4}", c(t + 0.3e-6)),
            9 => format!("{},{v:.4}", c(t - 1e-6)),
            10 => c(t),
            11 => format!("{},NaN", c(t)),
            12 => format!("{t},{v}"),
            13 => format!("{},{v:.4}", c(t + 3e-6)),
            14 => format!("{t:.9e},{v:.4}"),
            _ => "note".to_string(),
        }
    }

    /// The two-column short cut against the general fast row it stands in for: the same
    /// verdict, length, time cell and value for every kind of line the tests write, with
    /// either decimal mark and line end.
    #[test]
    fn time_and_value_rows_read_the_same_by_the_short_cut() {
        use super::{fast_pair, Role, RowFormat};
        use crate::capture::cells::Delim;
        use crate::capture::decimal::SciShape;
        for (d, comma) in [(b',', false), (b';', true)] {
            let format = RowFormat {
                file: "x.csv".into(),
                delim: Delim::Byte(d),
                decimal_comma: comma,
                n_fields: 2,
                roles: vec![Role::Time, Role::Value(0)],
                factors: vec![1e-3],
            };
            assert_eq!(format.time_and_one_value(), Some(1e-3));
            for kind in 0..16u8 {
                for (k, v) in [(0usize, 0.0), (7, -12.5), (123_456, 4.25e-3)] {
                    let mut text = line(kind, k, v);
                    if d == b';' {
                        text = text.replace(',', ";").replace('.', ",");
                    }
                    for end in ["", "\n", "\r\n", "\nnext"] {
                        let row = format!("{text}{end}");
                        let mut general = vec![Vec::new()];
                        let want = format.fast_row(row.as_bytes(), d, comma, None, &mut general);
                        // With and without the time column's fixed layout, judged on this
                        // row (the `%.9e` kinds have one) and on another layout's row.
                        let own = format.time_shape(row.as_bytes(), d);
                        assert!(own.is_some() || kind != 0 || comma, "{row:?}");
                        let other = SciShape::of(b"1.5e+00");
                        for shape in [None, own, other] {
                            let mut values = Vec::new();
                            let got = fast_pair(row.as_bytes(), d, comma, shape, 1e-3, &mut values);
                            assert_eq!(got, want, "{row:?} {shape:?}");
                            if want.is_some() {
                                assert_eq!(values, general[0], "{row:?}");
                            }
                            let mut by_row = vec![Vec::new()];
                            let got = format.fast_row(row.as_bytes(), d, comma, shape, &mut by_row);
                            assert_eq!(got, want, "{row:?} {shape:?}");
                        }
                    }
                }
            }
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(300))]

        /// However the text is cut into chunks and pieces and the rows into blocks, the
        /// values, warnings and first error are the same.
        #[test]
        fn chunks_pieces_and_blocks_do_not_change_what_is_read(
            kinds in proptest::collection::vec(
                proptest::prop_oneof![
                    30 => proptest::strategy::Just(0u8),
                    20 => 1u8..16,
                ],
                0..120,
            ),
            values in proptest::collection::vec(-500.0f64..500.0, 120),
            last_newline: bool,
        ) {
            let mut text = String::from("t,v\n");
            for k in 0..6 {
                text.push_str(&line(0, k, 1.0));
                text.push('\n');
            }
            for (j, &kind) in kinds.iter().enumerate() {
                text.push_str(&line(kind, 6 + j, values[j]));
                if j + 1 < kinds.len() || last_newline {
                    text.push('\n');
                }
            }
            let f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
            std::fs::write(f.path(), &text).unwrap();
            let reference = read_all(f.path(), None, false, 1 << 16);
            for (chunk, pieces, per_block) in [
                (Some(1), true, 1),
                (Some(13), true, 3),
                (Some(64), false, 7),
                (Some(200), true, 50),
                (None, true, 2),
            ] {
                let got = read_all(f.path(), chunk, pieces, per_block);
                proptest::prop_assert_eq!(&got, &reference, "chunk {:?} pieces {}", chunk, pieces);
            }
        }
    }

    /// What a parsed piece holds, with numbers as bits, for comparing two ways of parsing.
    fn piece_state(p: &Piece) -> String {
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        let time = p.time.as_ref().map(|t| {
            (
                t.prev.map(|(a, b)| (a.to_bits(), b.to_bits())),
                t.steps,
                t.jittered,
                t.first_jitter_line,
                t.max_deviation.to_bits(),
            )
        });
        format!(
            "{:?} rows {} lines {} first {:?} time {:?} error {:?}",
            p.channels.iter().map(|c| bits(c)).collect::<Vec<_>>(),
            p.n_rows,
            p.n_lines,
            p.first_time.map(|(t, q, l)| (t.to_bits(), q.to_bits(), l)),
            time,
            p.error.as_ref().map(ToString::to_string)
        )
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(400))]

        /// Rows of a `%.Ne` time and a value read with the time check made on the printed
        /// digits ([`RowFormat::sci_pair_run`]) leave exactly what the general fast path
        /// leaves: values, counts, the first time, the check's state and the first
        /// problem, through steady steps, stretches of steps off by a little (within the
        /// allowance) or a lot, backward steps, gaps, exponent changes, negative times
        /// crossing zero, rows in another layout and bad rows.
        #[test]
        fn the_check_on_printed_digits_gives_what_the_check_on_times_gives(
            stretches in proptest::collection::vec(
                (
                    proptest::prop_oneof![
                        60 => proptest::strategy::Just(0u8),
                        20 => 1u8..10,
                    ],
                    1usize..12,
                ),
                1..40,
            ),
            values in proptest::collection::vec(-500.0f64..500.0, 200),
            dt_pick in 0usize..4,
            t0_pick in 0usize..4,
            places in proptest::prop_oneof![proptest::strategy::Just(9usize), 6usize..13],
            in_ms: bool,
        ) {
            use super::{Role, RowFormat};
            use crate::capture::cells::Delim;
            let dt = [1e-6, 2e-8, 3.2e-7, 1e-3][dt_pick];
            let t0 = [0.0, -7.0 * dt, 0.0123, -1.0e-4][t0_pick];
            let c = |t: f64| {
                let s = format!("{t:.places$e}");
                let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
                let e: i32 = e.parse().unwrap_or(0);
                format!("{m}e{}{:02}", if e < 0 { '-' } else { '+' }, e.abs())
            };
            // Each kind steps from the row before by its own multiple of the interval (in
            // thousandths, so a stretch of one kind repeats one step exactly): 1.3 is
            // jitter, 1.004 within the allowance, -1 backwards, 4 a gap.
            let mut ticks: i64 = 0;
            let mut row = |kind: u8, v: f64| {
                ticks += [1000, 1300, 1004, -1000, 4000, 1000, 0, 1000, 1000, 997][kind as usize];
                let t = t0 + ticks as f64 * dt / 1000.0;
                match kind {
                    0..=4 | 9 => format!("{},{v:.4}", c(t)),
                    5 => format!("{t:e},{v:.4}"),
                    6 => String::new(),
                    7 => format!("{},{v:.4}\r", c(t)),
                    _ => format!("{},x", c(t)),
                }
            };
            let format = RowFormat {
                file: "x.csv".into(),
                delim: Delim::Byte(b','),
                decimal_comma: false,
                n_fields: 2,
                roles: vec![Role::Time, Role::Value(0)],
                factors: vec![1.0],
            };
            let head: String = (0..8).map(|_| row(0, 1.0) + "\n").collect();
            let first = format.read_head_rows(head.as_bytes(), 8);
            let factor = if in_ms { 1e-3 } else { 1.0 };
            let template = TimeCheck::from_first_rows(&first.times, factor).unwrap();
            proptest::prop_assume!(!template.exact);
            let mut text = String::new();
            let kinds = stretches.iter().flat_map(|&(kind, n)| std::iter::repeat_n(kind, n));
            for (kind, &v) in kinds.zip(values.iter().cycle()) {
                text.push_str(&row(kind, v));
                text.push('\n');
            }
            let mut by_digits = Piece::default();
            format.parse_piece_by(text.as_bytes(), Some(&template), &mut by_digits, true);
            let mut by_times = Piece::default();
            format.parse_piece_by(text.as_bytes(), Some(&template), &mut by_times, false);
            proptest::prop_assert_eq!(piece_state(&by_digits), piece_state(&by_times), "{}", text);
        }
    }

    /// The rows the sniff reads (the first 4000 lines) are handed to the stream instead of
    /// read again: values, warnings and the first problem are what reading every row from
    /// the first gives, and the problem's line is the one edited.
    #[test]
    fn rows_read_while_sniffing_give_what_reading_them_again_gives() {
        let backwards = |at: usize| {
            move |k: usize| (k == at).then(|| format!("{:.9e},1", (at as f64 - 1.0) * 1e-6))
        };
        let jitter =
            |k: usize| (k % 500 == 7).then(|| format!("{:.9e},2", (k as f64 + 0.3) * 1e-6));
        let gap = |k: usize| (k == 2_500).then(|| format!("{:.9e},3", (k as f64 + 4.0) * 1e-6));
        type Edit = Box<dyn Fn(usize) -> Option<String>>;
        let cases: Vec<(usize, Edit, Option<usize>)> = vec![
            (3_000, Box::new(|_| None), None),
            (9_000, Box::new(|_| None), None),
            (3_000, Box::new(backwards(10)), Some(12)),
            (9_000, Box::new(backwards(3_990)), Some(3_992)),
            (9_000, Box::new(jitter), None),
            (3_000, Box::new(gap), Some(2_502)),
        ];
        for (n, edit, bad_line) in cases {
            let f = file_with(n, &*edit);
            let (_, mut s, _) =
                crate::capture::csv::open(f.path(), &ReadOptions::default()).unwrap();
            // Every sniffed line is a row here: the header and 3999 rows.
            assert_eq!(s.head_rows_taken, n.min(3_999), "{n} rows");
            let mut all = vec![Vec::new()];
            let mut got = Ok(());
            loop {
                match s.fill(&mut all, 1 << 12) {
                    Ok(0) => break,
                    Ok(_) => {}
                    Err(e) => {
                        got = Err(csv_error(e));
                        break;
                    }
                }
            }
            let again = read_all(f.path(), Some(4_096), false, 1 << 12);
            match (got, bad_line) {
                (Ok(()), None) => {
                    let bits: Vec<u64> = all[0].iter().map(|x| x.to_bits()).collect();
                    assert_eq!(Ok((vec![bits], s.end_warnings())), again, "{n} rows");
                }
                (Err((line, _, message)), Some(want)) => {
                    assert_eq!(line, want, "{message}");
                    assert!(again.unwrap_err().contains(&format!("line {want},")));
                }
                (got, want) => panic!("{n} rows: {got:?}, expected a problem on {want:?}"),
            }
        }
    }

    /// Text after the last row is found the same however the file is cut into chunks
    /// (the text may start in one chunk and run on through several).
    #[test]
    fn text_after_the_last_row_is_found_at_every_chunk_size() {
        let mut text = String::from("t,v\n");
        for k in 0..40 {
            text.push_str(&line(0, k, k as f64));
            text.push('\n');
        }
        text.push_str("\nlogger stopped\r\n\n# 40 rows\n  \nend");
        let f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
        std::fs::write(f.path(), &text).unwrap();
        for (chunk, pieces, per_block) in [
            (None, false, 1 << 16),
            (Some(1), true, 1),
            (Some(13), true, 3),
            (Some(64), false, 7),
            (None, true, 2),
        ] {
            let (values, warnings) = read_all(f.path(), chunk, pieces, per_block).unwrap();
            let want: Vec<u64> = (0..40).map(|k| (k as f64).to_bits()).collect();
            assert_eq!(values[0], want, "chunk {chunk:?}");
            assert_eq!(
                warnings,
                ["5 line(s) of text after the last row (from line 43: 'logger stopped') were not read"],
                "chunk {chunk:?}"
            );
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
