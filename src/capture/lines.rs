//! Reading text in large chunks that end at a line end, so rows are parsed where they lie
//! (and in parallel) instead of being copied out line by line, with a bound on the length of
//! one line so an enormous line cannot take all memory.

use std::io::Read;

/// Longest line accepted (a row of a thousand numbers fits many times over).
pub(crate) const MAX_LINE_BYTES: usize = 1 << 20;

/// Bytes read per chunk: large enough that the fixed costs of a chunk (a system call, a
/// split between threads) vanish, small enough that a chunk and the values parsed from it
/// stay a few MiB.
pub(crate) const CHUNK_BYTES: usize = 2 << 20;

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

/// Reads a text source chunk by chunk; every chunk but the last ends with `\n`.
pub(crate) struct ChunkReader<R> {
    inner: R,
    chunk_bytes: usize,
    /// The start of a line cut by the end of the previous chunk.
    carry: Vec<u8>,
    done: bool,
}

impl<R: Read> ChunkReader<R> {
    pub(crate) fn new(inner: R) -> Self {
        ChunkReader {
            inner,
            chunk_bytes: CHUNK_BYTES,
            carry: Vec::new(),
            done: false,
        }
    }

    /// Sets the bytes read per chunk (at least 1; tests use tiny chunks to cut every line).
    #[cfg(test)]
    pub(crate) fn set_chunk_bytes(&mut self, n: usize) {
        self.chunk_bytes = n.max(1);
    }

    /// Fills `buf` with the next whole lines: at least `chunk_bytes` when the text has that
    /// many, more when a line crosses the mark, never more than one line beyond
    /// `MAX_LINE_BYTES`. An empty `buf` with [`ChunkEnd::Last`] is the end of the text.
    pub(crate) fn read_chunk(&mut self, buf: &mut Vec<u8>) -> ChunkEnd {
        buf.clear();
        if self.done {
            return ChunkEnd::Last;
        }
        buf.extend_from_slice(&self.carry);
        self.carry.clear();
        // The carry holds no line end; only new bytes are searched.
        let mut searched = buf.len();
        loop {
            // Past the mark (a line crossing it), read on in steps of a chunk, at most 4 KiB.
            let want = self
                .chunk_bytes
                .saturating_sub(buf.len())
                .max(self.chunk_bytes.min(1 << 12));
            let before = buf.len();
            let result = (&mut self.inner).take(want as u64).read_to_end(buf);
            if let Err(e) = result {
                // The lines complete before the failure still count; a cut line does not.
                self.done = true;
                let keep = memchr::memrchr(b'\n', buf).map_or(0, |k| k + 1);
                buf.truncate(keep);
                return ChunkEnd::Failed(e);
            }
            if buf.len() - before < want {
                self.done = true;
                return ChunkEnd::Last;
            }
            if let Some(k) = memchr::memrchr(b'\n', buf.get(searched..).unwrap_or(&[])) {
                let end = searched + k + 1;
                self.carry.extend_from_slice(buf.get(end..).unwrap_or(&[]));
                buf.truncate(end);
                return ChunkEnd::More;
            }
            searched = buf.len();
            if buf.len() > MAX_LINE_BYTES {
                // One line already too long to accept: hand it over to be refused.
                self.done = true;
                return ChunkEnd::Last;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chunks(text: &[u8], chunk_bytes: usize) -> Vec<Vec<u8>> {
        let mut r = ChunkReader::new(text);
        r.set_chunk_bytes(chunk_bytes);
        let mut out = Vec::new();
        loop {
            let mut buf = Vec::new();
            let end = r.read_chunk(&mut buf);
            if !buf.is_empty() {
                out.push(buf);
            }
            match end {
                ChunkEnd::More => {}
                ChunkEnd::Last => return out,
                ChunkEnd::Failed(e) => panic!("{e}"),
            }
        }
    }

    #[test]
    fn chunks_end_at_line_ends_and_lose_nothing() {
        // Every byte comes back once, in order, and every chunk but the last ends a line.
        let text: Vec<u8> = (0..3000)
            .flat_map(|k| format!("{k},{}\r\n", k * 7).into_bytes())
            .chain(b"last,1".iter().copied())
            .collect();
        for size in [1, 5, 4096, 10_000, 1 << 20] {
            let c = chunks(&text, size);
            assert_eq!(c.concat(), text, "chunk size {size}");
            for piece in &c[..c.len() - 1] {
                assert_eq!(piece.last(), Some(&b'\n'));
            }
        }
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
        struct Failing<'a>(&'a [u8]);
        impl Read for Failing<'_> {
            fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
                if self.0.is_empty() {
                    return Err(std::io::Error::other("disk gone"));
                }
                let n = buf.len().min(self.0.len());
                buf[..n].copy_from_slice(&self.0[..n]);
                self.0 = &self.0[n..];
                Ok(n)
            }
        }
        let mut r = ChunkReader::new(Failing(b"1,2\n3,4\n5,"));
        let mut buf = Vec::new();
        assert!(matches!(r.read_chunk(&mut buf), ChunkEnd::Failed(_)));
        assert_eq!(buf, b"1,2\n3,4\n");
        assert!(matches!(r.read_chunk(&mut buf), ChunkEnd::Last));
        assert!(buf.is_empty());
    }
}
