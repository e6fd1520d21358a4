//! The start of a text file as lines: refusing binary files, skipping a byte-order mark,
//! bounding the bytes and lines looked at.

use std::borrow::Cow;
use std::path::Path;

use super::csv_err;
use crate::capture::lines::MAX_LINE_BYTES;
use crate::capture::CaptureError;

/// How much of the start of a file is read to sniff its layout: twice the longest line, so
/// a line too long to accept that starts in the first half is seen whole enough to refuse.
pub(super) const SNIFF_BYTES: usize = 2 * MAX_LINE_BYTES;
pub(super) const UTF8_BOM: &[u8] = &[0xEF, 0xBB, 0xBF];
/// Most lines looked at while sniffing.
pub(super) const SNIFF_LINES: usize = 4000;

/// One line of the sniffed start of the file.
pub(super) struct SniffLine<'a> {
    pub(super) no: usize,
    /// Byte offset of the line in the file.
    pub(super) offset: usize,
    pub(super) text: Cow<'a, str>,
}

/// A control character (what text does not hold): below 0x20 except tab, line feed, form
/// feed and carriage return, or DEL. Comparisons and bitwise operations only, so a test
/// over many bytes becomes byte-wide vector compares.
#[inline(always)]
fn is_control(b: u8) -> bool {
    let allowed = (b == b'\t') | (b == b'\n') | (b == b'\r') | (b == 0x0c);
    ((b < 0x20) & !allowed) | (b == 0x7f)
}

crate::avx2::twice_compiled!(
    /// Whether `text` holds no control character: tested 64 bytes at a time without
    /// stopping inside them, so clean stretches pass before any is located; compiled for
    /// AVX2 too (a short capture's whole text is checked: 2 % of a folder's instructions).
    fn no_control_bytes(text: &[u8]) -> bool => no_control_bytes_on;
);

#[inline(always)]
fn no_control_bytes_on(text: &[u8]) -> bool {
    text.chunks(64)
        .all(|c| !c.iter().fold(false, |any, &b| any | is_control(b)))
}

/// Refuses files that are not text: a NUL byte, control characters, or mostly invalid
/// UTF-8 (a single Latin-1 `µ` is text, a sample dump is not). Gives whether the text is
/// read as Latin-1, and its valid UTF-8 start (all of it, nearly always), checked once
/// here for [`split_lines`] too.
pub(super) fn check_text<'a>(
    file: &Path,
    head: &'a [u8],
    notes: &mut Vec<String>,
) -> Result<(bool, &'a str), CaptureError> {
    let binary = |offset: usize, what: &str| {
        CaptureError::Binary {
        file: file.to_path_buf(),
        offset: offset as u64,
        message: format!(
            "looks like a binary file ({what}); expected text rows of numbers (for a raw sample dump give --raw, for WAV use a .wav file)"
        ),
    }
    };
    if let Some(k) = memchr::memchr(0, head) {
        return Err(binary(k, "NUL byte"));
    }
    let clean = no_control_bytes(head);
    let controls: Vec<usize> = if clean {
        Vec::new()
    } else {
        head.iter()
            .enumerate()
            .filter(|(_, &b)| is_control(b))
            .map(|(k, _)| k)
            .take(8)
            .collect()
    };
    if let Some(&first) = controls.first() {
        if controls.len() >= 4 || head.len() < 64 {
            return Err(binary(first, "control characters"));
        }
    }
    let valid_start =
        |e: std::str::Utf8Error| std::str::from_utf8(head.get(..e.valid_up_to()).unwrap_or(&[]));
    match std::str::from_utf8(head) {
        Ok(text) => Ok((false, text)),
        Err(e) if e.error_len().is_none() => Ok((false, valid_start(e).unwrap_or(""))),
        Err(e) => {
            let high = head.iter().filter(|&&b| b >= 0x80).count();
            if high * 100 > head.len() {
                Err(binary(e.valid_up_to(), "invalid UTF-8"))
            } else {
                notes.push("text is not UTF-8; read as Latin-1".to_string());
                Ok((true, valid_start(e).unwrap_or("")))
            }
        }
    }
}

/// Splits the sniffed bytes into lines, dropping a last line cut off by the sniff limit.
/// `valid` is the valid UTF-8 start of `head` ([`check_text`] gives it): its lines need no
/// check of their own.
pub(super) fn split_lines<'a>(
    file: &Path,
    head: &'a [u8],
    valid: &'a str,
    complete: bool,
    latin1: bool,
) -> Result<Vec<SniffLine<'a>>, CaptureError> {
    // Sized once (the count of line ends is a vectorised pass): grown by doubling, the
    // list was copied eleven times on the way to the sniffer's 4000 lines.
    let mut out = Vec::with_capacity(SNIFF_LINES.min(memchr::memchr_iter(b'\n', head).count() + 1));
    // A UTF-8 byte-order mark (Windows editors write one) is not part of the first cell.
    let mut start = if head.starts_with(UTF8_BOM) { 3 } else { 0 };
    let mut no = 1usize;
    while start < head.len() && out.len() < SNIFF_LINES {
        let (end, next) = match memchr::memchr(b'\n', &head[start..]) {
            Some(k) => (start + k, start + k + 1),
            None if complete => (head.len(), head.len()),
            None => {
                if head.len() - start >= MAX_LINE_BYTES {
                    return Err(csv_err(
                        file,
                        no,
                        1,
                        format!(
                            "line is longer than {} KiB; expected rows of numbers",
                            MAX_LINE_BYTES / 1024
                        ),
                    ));
                }
                break;
            }
        };
        let mut bytes = &head[start..end];
        if bytes.last() == Some(&b'\r') {
            bytes = &bytes[..bytes.len() - 1];
        }
        let text = match valid.get(start..start + bytes.len()) {
            Some(s) => Cow::Borrowed(s),
            None => match std::str::from_utf8(bytes) {
                Ok(s) => Cow::Borrowed(s),
                Err(_) if latin1 => Cow::Owned(bytes.iter().map(|&b| b as char).collect()),
                Err(_) => Cow::Owned(String::from_utf8_lossy(bytes).into_owned()),
            },
        };
        out.push(SniffLine {
            no,
            offset: start,
            text,
        });
        no += 1;
        start = next;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_and_binary_are_told_apart() {
        let f = Path::new("x.csv");
        let mut notes = Vec::new();
        assert_eq!(
            check_text(f, b"t,v\n0,1\n", &mut notes).unwrap(),
            (false, "t,v\n0,1\n")
        );
        // One Latin-1 micro sign in a header is still text.
        let mut latin = b"t [\xB5s],v\n".to_vec();
        latin.extend(std::iter::repeat_n(b'1', 200));
        // Latin-1, its valid UTF-8 start ending before the micro sign.
        assert_eq!(check_text(f, &latin, &mut notes).unwrap(), (true, "t ["));
        assert_eq!(notes, ["text is not UTF-8; read as Latin-1"]);
        let e = check_text(f, b"12\x00\x01", &mut notes)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("byte 2: looks like a binary file (NUL byte)"),
            "{e}"
        );
    }

    /// The control-byte test, however it is compiled, against a plain one-by-one test:
    /// every byte value at every place of a text longer than one 64-byte step.
    #[test]
    fn control_bytes_are_found_wherever_they_are() {
        let plain = |t: &[u8]| {
            !t.iter()
                .any(|&b| (b < 0x20 && !matches!(b, b'\t' | b'\n' | b'\r' | 0x0c)) || b == 0x7f)
        };
        let base = b"0.000000000e+00,24.3137\r\n\t".repeat(7);
        for at in [0, 1, 63, 64, 65, 127, base.len() - 1] {
            for b in 0..=255u8 {
                let mut t = base.clone();
                t[at] = b;
                assert_eq!(no_control_bytes(&t), plain(&t), "{b} at {at}");
                assert_eq!(no_control_bytes_on(&t), plain(&t), "{b} at {at}");
            }
        }
    }

    #[test]
    fn lines_keep_their_numbers_and_offsets() {
        let f = Path::new("x.csv");
        let text = b"\xEF\xBB\xBFa\r\nbb\ncc";
        let l = split_lines(f, text, std::str::from_utf8(text).unwrap(), true, false).unwrap();
        let got: Vec<_> = l
            .iter()
            .map(|l| (l.no, l.offset, l.text.as_ref()))
            .collect();
        assert_eq!(got, [(1, 3, "a"), (2, 6, "bb"), (3, 9, "cc")]);
        // A last line cut by the sniff limit is dropped.
        let l = split_lines(f, b"a\nbb\ncc", "a\nbb\ncc", false, false).unwrap();
        assert_eq!(l.len(), 2);
    }
}
