//! Reading text lines with a bound on their length, so one enormous line cannot take all
//! memory, and with the byte offset of each line kept for error messages.

use std::io::{BufRead, ErrorKind};

/// Longest line accepted (a row of a thousand numbers fits many times over).
pub(crate) const MAX_LINE_BYTES: usize = 1 << 20;

/// Why a line could not be read.
#[derive(Debug)]
pub(crate) enum LineError {
    Io(std::io::Error),
    TooLong,
}

/// Line reader over any buffered source.
pub(crate) struct LineReader<R> {
    inner: R,
    /// Byte offset of the next line.
    pub(crate) offset: u64,
    /// 1-based number of the next line.
    pub(crate) line_no: usize,
}

impl<R: BufRead> LineReader<R> {
    pub(crate) fn new(inner: R, offset: u64, line_no: usize) -> Self {
        LineReader {
            inner,
            offset,
            line_no,
        }
    }

    /// Reads the next line into `buf` without its `\n` or `\r\n`. `Ok(false)` at the end.
    #[cfg(test)]
    pub(crate) fn next_line(&mut self, buf: &mut Vec<u8>) -> Result<bool, LineError> {
        buf.clear();
        self.append_line(buf)
    }

    /// Appends the next line to `buf` (after what it holds) without its `\n` or `\r\n`, so
    /// many lines can be gathered into one buffer. `Ok(false)` at the end.
    pub(crate) fn append_line(&mut self, buf: &mut Vec<u8>) -> Result<bool, LineError> {
        let base = buf.len();
        let mut consumed_any = false;
        loop {
            let available = match self.inner.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == ErrorKind::Interrupted => continue,
                Err(e) => return Err(LineError::Io(e)),
            };
            if available.is_empty() {
                break;
            }
            consumed_any = true;
            let (take, found) = match memchr::memchr(b'\n', available) {
                Some(k) => (k + 1, true),
                None => (available.len(), false),
            };
            let content = if found { take - 1 } else { take };
            if buf.len() - base + content > MAX_LINE_BYTES {
                return Err(LineError::TooLong);
            }
            buf.extend_from_slice(available.get(..content).unwrap_or(&[]));
            self.inner.consume(take);
            self.offset += take as u64;
            if found {
                break;
            }
        }
        if !consumed_any {
            return Ok(false);
        }
        if buf.len() > base && buf.last() == Some(&b'\r') {
            buf.pop();
        }
        self.line_no += 1;
        Ok(true)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_and_offsets() {
        let text = b"a,b\r\n1,2\n3,4";
        let mut r = LineReader::new(&text[..], 0, 1);
        let mut buf = Vec::new();
        assert!(r.next_line(&mut buf).unwrap());
        assert_eq!(buf, b"a,b");
        assert_eq!(r.offset, 5);
        assert!(r.next_line(&mut buf).unwrap());
        assert_eq!(buf, b"1,2");
        assert!(r.next_line(&mut buf).unwrap());
        assert_eq!(buf, b"3,4");
        assert_eq!(r.line_no, 4);
        assert!(!r.next_line(&mut buf).unwrap());
    }

    #[test]
    fn an_enormous_line_is_refused() {
        let text = vec![b'1'; MAX_LINE_BYTES + 10];
        let mut r = LineReader::new(&text[..], 0, 1);
        let mut buf = Vec::new();
        assert!(matches!(r.next_line(&mut buf), Err(LineError::TooLong)));
    }
}
