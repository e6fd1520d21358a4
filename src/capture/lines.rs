//! Reading text in large chunks that end at a line end, so rows are parsed where they lie
//! (and in parallel) instead of being copied out line by line, with a bound on the length of
//! one line so an enormous line cannot take all memory.
//!
//! Chunks are read at an offset rather than from a shared cursor, so the two halves of a
//! large chunk are copied out of the file on two threads at once.

/// Longest line accepted (a row of a thousand numbers fits many times over).
pub(crate) const MAX_LINE_BYTES: usize = 1 << 20;

/// Bytes read per chunk: large enough that the fixed costs of a chunk (system calls, a
/// split between threads) vanish, small enough that a chunk and the values parsed from it
/// stay a few MiB.
pub(crate) const CHUNK_BYTES: usize = 1 << 20;

/// Reads of at least this many bytes are split in two halves read at once.
const SPLIT_READ_BYTES: usize = 1 << 19;

/// A source read at byte offsets, from any thread.
pub(crate) trait ReadAt: Sync {
    /// Reads into `buf` from `offset`; `Ok(0)` at the end.
    fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize>;
}

impl ReadAt for std::fs::File {
    #[cfg(unix)]
    fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize> {
        std::os::unix::fs::FileExt::read_at(self, buf, offset)
    }

    #[cfg(windows)]
    fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize> {
        std::os::windows::fs::FileExt::seek_read(self, buf, offset)
    }
}

impl<T: ReadAt + ?Sized> ReadAt for &T {
    fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize> {
        (**self).read_at(buf, offset)
    }
}

impl ReadAt for [u8] {
    fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize> {
        let from = usize::try_from(offset)
            .unwrap_or(usize::MAX)
            .min(self.len());
        let src = self.get(from..).unwrap_or(&[]);
        let n = src.len().min(buf.len());
        if let (Some(d), Some(s)) = (buf.get_mut(..n), src.get(..n)) {
            d.copy_from_slice(s);
        }
        Ok(n)
    }
}

/// How a chunk ended.
#[derive(Debug)]
pub(crate) enum ChunkEnd {
    /// More text follows.
    More,
    /// The text ends with this chunk (its last line may lack a line end), or the chunk is
    /// one line longer than [`MAX_LINE_BYTES`] with no end in sight, which its reader
    /// refuses.
    Last,
    /// Reading failed after the lines in the chunk.
    Failed(std::io::Error),
}

/// A buffer of whole lines. Its storage keeps its length between chunks, so it is
/// zero-filled once, not at every read.
#[derive(Debug, Default)]
pub(crate) struct Chunk {
    data: Vec<u8>,
    /// Where the text starts in `data`: after the preamble of a file read whole, which is
    /// skipped, not moved (moving the rest of a short file's text cost as much as reading
    /// its header).
    start: usize,
    len: usize,
}

impl Chunk {
    /// The text from byte `start` of `data` on, as a chunk (text already read whole).
    pub(crate) fn from_text(data: Vec<u8>, start: usize) -> Chunk {
        let len = data.len();
        Chunk {
            data,
            start: start.min(len),
            len,
        }
    }

    pub(crate) fn bytes(&self) -> &[u8] {
        self.data.get(self.start..self.len).unwrap_or(&[])
    }

    /// Room for `n` more bytes after the text, returned for filling.
    fn room(&mut self, n: usize) -> &mut [u8] {
        let end = self.len + n;
        if self.data.len() < end {
            // Room for a whole chunk at once, whatever is read: the allocation has one size
            // for every file (sizes that change from file to file cost the allocator far
            // more than the memory), while only the bytes asked for are zero-filled.
            if self.data.capacity() < end {
                self.data.reserve(end.max(CHUNK_BYTES) - self.data.len());
            }
            self.data.resize(end, 0);
        }
        self.data.get_mut(self.len..end).unwrap_or(&mut [])
    }
}

/// Reads a text source chunk by chunk; every chunk but the last ends with `\n`.
pub(crate) struct ChunkReader<R> {
    inner: R,
    /// Offset of the next byte to read.
    offset: u64,
    chunk_bytes: usize,
    /// The start of a line cut by the end of the previous chunk.
    carry: Vec<u8>,
    done: bool,
    /// The source's length when it was opened, if known.
    length: Option<u64>,
}

impl<R: ReadAt> ChunkReader<R> {
    /// Reads `inner` from byte `offset` on.
    pub(crate) fn new(inner: R, offset: u64) -> Self {
        ChunkReader {
            inner,
            offset,
            chunk_bytes: CHUNK_BYTES,
            carry: Vec::new(),
            done: false,
            length: None,
        }
    }

    /// Gives the source's length: reads then ask for no more than one byte past it, so a
    /// short file is read (and its buffer zero-filled) to its end rather than a whole
    /// chunk's length, in one read rather than two halves on two threads. The byte past
    /// the end shows that the text ended, or that the file has grown since (then reading
    /// goes on as without the length).
    pub(crate) fn set_length(&mut self, length: u64) {
        self.length = Some(length);
    }

    /// Reads nothing more: the caller holds the rest of the text.
    pub(crate) fn finish(&mut self) {
        self.done = true;
    }

    /// Passes over `n` bytes without reading them (rows already read another way).
    pub(crate) fn skip(&mut self, n: u64) {
        self.offset += n;
    }

    /// Reads again from byte `offset`, as if just opened there.
    #[cfg(test)]
    pub(crate) fn restart_at(&mut self, offset: u64) {
        self.offset = offset;
        self.carry.clear();
        self.done = false;
    }

    /// Sets the bytes read per chunk (at least 1; tests use tiny chunks to cut every line).
    #[cfg(test)]
    pub(crate) fn set_chunk_bytes(&mut self, n: usize) {
        self.chunk_bytes = n.max(1);
    }

    /// Fills `chunk` with the next whole lines: at least `chunk_bytes` when the text has
    /// that many, more when a line crosses the mark, never more than one line beyond
    /// `MAX_LINE_BYTES`. An empty chunk with [`ChunkEnd::Last`] is the end of the text.
    pub(crate) fn read_chunk(&mut self, chunk: &mut Chunk) -> ChunkEnd {
        chunk.start = 0;
        chunk.len = 0;
        if self.done {
            return ChunkEnd::Last;
        }
        let carried = self.carry.len();
        chunk.room(carried).copy_from_slice(&self.carry);
        chunk.len = carried;
        self.carry.clear();
        // The carry holds no line end; only new bytes are searched.
        let mut searched = chunk.len;
        loop {
            // Past the mark (a line crossing it), read on in steps of a chunk, at most 4 KiB.
            let mut want = self
                .chunk_bytes
                .saturating_sub(chunk.len)
                .max(self.chunk_bytes.min(1 << 12));
            let mut capped = false;
            if let Some(length) = self.length {
                let left = length.saturating_sub(self.offset).saturating_add(1);
                capped = left < want as u64;
                want = want.min(usize::try_from(left).unwrap_or(usize::MAX));
            }
            let (got, failure) = fill_at(&self.inner, chunk.room(want), self.offset);
            chunk.len += got;
            self.offset += got as u64;
            if capped && got == want {
                // The file has grown since it was opened: its length says nothing now.
                self.length = None;
            }
            if let Some(e) = failure {
                // The lines complete before the failure still count; a cut line does not.
                self.done = true;
                chunk.len = memchr::memrchr(b'\n', chunk.bytes()).map_or(0, |k| k + 1);
                return ChunkEnd::Failed(e);
            }
            if got < want {
                self.done = true;
                return ChunkEnd::Last;
            }
            let text = chunk.bytes();
            if let Some(k) = memchr::memrchr(b'\n', text.get(searched..).unwrap_or(&[])) {
                let end = searched + k + 1;
                self.carry.extend_from_slice(text.get(end..).unwrap_or(&[]));
                chunk.len = end;
                return ChunkEnd::More;
            }
            searched = chunk.len;
            if chunk.len > MAX_LINE_BYTES {
                // One line already too long to accept: hand it over to be refused.
                self.done = true;
                return ChunkEnd::Last;
            }
        }
    }
}

/// Fills `buf` from `offset`, the two halves of a large one on two threads: the bytes
/// read (fewer at the end of the source) and the failure if reading failed.
fn fill_at<R: ReadAt + ?Sized>(
    r: &R,
    buf: &mut [u8],
    offset: u64,
) -> (usize, Option<std::io::Error>) {
    if buf.len() < SPLIT_READ_BYTES {
        return fill_exact_at(r, buf, offset);
    }
    let (a, b) = buf.split_at_mut(buf.len() / 2);
    let half = a.len();
    let ((got_a, fail_a), (got_b, fail_b)) = rayon::join(
        || fill_exact_at(r, a, offset),
        || fill_exact_at(r, b, offset + half as u64),
    );
    if fail_a.is_some() || got_a < half {
        // The second half does not follow the first (the source ended or failed in it).
        return (got_a, fail_a);
    }
    (half + got_b, fail_b)
}

/// Reads until `buf` is full, the source ends, or reading fails.
fn fill_exact_at<R: ReadAt + ?Sized>(
    r: &R,
    buf: &mut [u8],
    offset: u64,
) -> (usize, Option<std::io::Error>) {
    let mut got = 0;
    while let Some(rest) = buf.get_mut(got..).filter(|b| !b.is_empty()) {
        match r.read_at(rest, offset + got as u64) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return (got, Some(e)),
        }
    }
    (got, None)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chunks(text: &[u8], chunk_bytes: usize) -> Vec<Vec<u8>> {
        chunks_told(text, chunk_bytes, None)
    }

    /// As [`chunks`], the reader told the length `length` (which may be wrong: the source
    /// grew or shrank after it was opened).
    fn chunks_told(text: &[u8], chunk_bytes: usize, length: Option<u64>) -> Vec<Vec<u8>> {
        let mut r = ChunkReader::new(text, 0);
        r.set_chunk_bytes(chunk_bytes);
        if let Some(n) = length {
            r.set_length(n);
        }
        let mut out = Vec::new();
        let mut c = Chunk::default();
        loop {
            let end = r.read_chunk(&mut c);
            if !c.bytes().is_empty() {
                out.push(c.bytes().to_vec());
            }
            match end {
                ChunkEnd::More => {}
                ChunkEnd::Last => return out,
                ChunkEnd::Failed(e) => panic!("{e}"),
            }
        }
    }

    /// A reader told the source's length gives the same chunks, also when the text is
    /// shorter than told (it shrank after it was opened); when it is longer (it grew), the
    /// same bytes in about as many chunks.
    #[test]
    fn a_known_length_gives_the_same_chunks() {
        let text: Vec<u8> = (0..40_000)
            .flat_map(|k| format!("{k},{}\n", k * 3).into_bytes())
            .chain(b"9,9".iter().copied())
            .collect();
        let n = text.len() as u64;
        for size in [7, 4096, 100_000, CHUNK_BYTES] {
            let want = chunks(&text, size);
            for told in [n, n + 1, 10 * n] {
                assert_eq!(chunks_told(&text, size, Some(told)), want, "{size}, {told}");
            }
            // Told too little, the first chunk may end sooner; every byte still comes back
            // once, in chunks that end lines, and no more of them than one more chunk.
            for told in [0, 1, n / 2, n - 1] {
                let got = chunks_told(&text, size, Some(told));
                assert_eq!(got.concat(), text, "chunk size {size}, told {told} of {n}");
                assert!(got[..got.len() - 1]
                    .iter()
                    .all(|c| c.last() == Some(&b'\n')));
                assert!(got.len() <= want.len() + 1, "{size}, {told}: {}", got.len());
            }
        }
    }

    #[test]
    fn chunks_end_at_line_ends_and_lose_nothing() {
        // Every byte comes back once, in order, and every chunk but the last ends a line;
        // chunks of 2 MiB are read in two halves at once.
        let text: Vec<u8> = (0..300_000)
            .flat_map(|k| format!("{k},{}\r\n", k * 7).into_bytes())
            .chain(b"last,1".iter().copied())
            .collect();
        for size in [1, 5, 4096, 10_000, CHUNK_BYTES] {
            let sample = if size < 100 {
                &text[..30_000]
            } else {
                &text[..]
            };
            let c = chunks(sample, size);
            assert_eq!(c.concat(), sample, "chunk size {size}");
            for piece in &c[..c.len() - 1] {
                assert_eq!(piece.last(), Some(&b'\n'));
            }
        }
    }

    #[test]
    fn reading_starts_at_the_offset_given() {
        let mut r = ChunkReader::new(&b"skip\n1,2\n3,4\n"[..], 5);
        let mut c = Chunk::default();
        assert!(matches!(r.read_chunk(&mut c), ChunkEnd::Last));
        assert_eq!(c.bytes(), b"1,2\n3,4\n");
    }

    #[test]
    fn an_enormous_line_is_handed_over_whole_enough_to_refuse() {
        let mut text = b"1,2\n".to_vec();
        text.extend(std::iter::repeat_n(b'7', 3 * MAX_LINE_BYTES));
        let c = chunks(&text, 4096);
        // The short line, then more than MAX_LINE_BYTES of the long one, then nothing.
        assert_eq!(c.len(), 2);
        assert_eq!(c[0], b"1,2\n");
        assert!(c[1].len() > MAX_LINE_BYTES && c[1].len() < 2 * MAX_LINE_BYTES);
    }

    #[test]
    fn a_failed_read_keeps_the_whole_lines_before_it() {
        /// Text that cannot be read past its end.
        struct Failing(&'static [u8]);
        impl ReadAt for Failing {
            fn read_at(&self, buf: &mut [u8], offset: u64) -> std::io::Result<usize> {
                match self.0.read_at(buf, offset)? {
                    0 => Err(std::io::Error::other("disk gone")),
                    n => Ok(n),
                }
            }
        }
        let mut r = ChunkReader::new(Failing(b"1,2\n3,4\n5,"), 0);
        let mut c = Chunk::default();
        assert!(matches!(r.read_chunk(&mut c), ChunkEnd::Failed(_)));
        assert_eq!(c.bytes(), b"1,2\n3,4\n");
        assert!(matches!(r.read_chunk(&mut c), ChunkEnd::Last));
        assert!(c.bytes().is_empty());
    }
}
