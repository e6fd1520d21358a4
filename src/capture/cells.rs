//! Splitting text rows into cells and reading numbers from them without allocating.

/// How cells of a row are separated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Delim {
    /// One byte (`,` `;` tab).
    Byte(u8),
    /// Runs of spaces or tabs.
    Whitespace,
    /// One column: the whole row is one cell.
    None,
}

impl Delim {
    pub(crate) fn describe(self) -> String {
        match self {
            Delim::Byte(b'\t') => "tab".to_string(),
            Delim::Byte(b) => format!("'{}'", b as char),
            Delim::Whitespace => "spaces".to_string(),
            Delim::None => "none (one column)".to_string(),
        }
    }
}

/// Iterator over the cells of one row.
pub(crate) struct Cells<'a> {
    rest: &'a [u8],
    delim: Delim,
    done: bool,
}

impl<'a> Cells<'a> {
    pub(crate) fn new(row: &'a [u8], delim: Delim) -> Self {
        let rest = match delim {
            Delim::Whitespace => trim_ascii(row),
            _ => row,
        };
        Cells {
            rest,
            delim,
            done: false,
        }
    }
}

impl<'a> Iterator for Cells<'a> {
    type Item = &'a [u8];

    fn next(&mut self) -> Option<&'a [u8]> {
        if self.done {
            return None;
        }
        match self.delim {
            Delim::None => {
                self.done = true;
                Some(self.rest)
            }
            Delim::Byte(d) => match memchr::memchr(d, self.rest) {
                Some(k) => {
                    let (cell, rest) = self.rest.split_at(k);
                    self.rest = rest.get(1..).unwrap_or(&[]);
                    Some(cell)
                }
                None => {
                    self.done = true;
                    Some(self.rest)
                }
            },
            Delim::Whitespace => {
                if self.rest.is_empty() {
                    self.done = true;
                    return None;
                }
                let end = self
                    .rest
                    .iter()
                    .position(|&b| b == b' ' || b == b'\t')
                    .unwrap_or(self.rest.len());
                let (cell, rest) = self.rest.split_at(end);
                let skip = rest
                    .iter()
                    .position(|&b| b != b' ' && b != b'\t')
                    .unwrap_or(rest.len());
                self.rest = rest.get(skip..).unwrap_or(&[]);
                Some(cell)
            }
        }
    }
}

pub(crate) fn trim_ascii(s: &[u8]) -> &[u8] {
    let start = s
        .iter()
        .position(|b| !b.is_ascii_whitespace())
        .unwrap_or(s.len());
    let end = s
        .iter()
        .rposition(|b| !b.is_ascii_whitespace())
        .map_or(start, |k| k + 1);
    s.get(start..end).unwrap_or(&[])
}

/// A cell without surrounding spaces and quotes.
pub(crate) fn trim_cell(s: &[u8]) -> &[u8] {
    // Nearly every cell is a bare number: nothing to trim at either end.
    if let (Some(&a), Some(&b)) = (s.first(), s.last()) {
        if !(a.is_ascii_whitespace() || a == b'"' || b.is_ascii_whitespace() || b == b'"') {
            return s;
        }
    }
    let s = trim_ascii(s);
    let s = s.strip_prefix(b"\"").unwrap_or(s);
    let s = s.strip_suffix(b"\"").unwrap_or(s);
    trim_ascii(s)
}

/// Why a cell is not a usable number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum CellError {
    Empty,
    NotANumber,
    NotFinite,
}

/// Longest cell read as a number; longer cells are text (no number needs more digits).
const MAX_NUMBER_LEN: usize = 64;

/// Reads a trimmed cell as a finite number, with a decimal comma when asked.
pub(crate) fn parse_number(cell: &[u8], decimal_comma: bool) -> Result<f64, CellError> {
    if cell.is_empty() {
        return Err(CellError::Empty);
    }
    let x: f64 = if decimal_comma && memchr::memchr(b',', cell).is_some() {
        if cell.len() > MAX_NUMBER_LEN {
            return Err(CellError::NotANumber);
        }
        let mut buf = [0u8; MAX_NUMBER_LEN];
        for (dst, &src) in buf.iter_mut().zip(cell) {
            *dst = if src == b',' { b'.' } else { src };
        }
        fast_float2::parse(&buf[..cell.len()]).map_err(|_| CellError::NotANumber)?
    } else {
        fast_float2::parse(cell).map_err(|_| CellError::NotANumber)?
    };
    if x.is_finite() {
        Ok(x)
    } else {
        Err(CellError::NotFinite)
    }
}

/// Place value of the last digit written in a number cell (`1.25e-6` -> 1e-8): the
/// resolution the writer printed with, so rounding is not mistaken for jitter.
pub(crate) fn last_digit_place(cell: &[u8]) -> f64 {
    // The exponent marker sits near the end of a cell: search from there.
    let (mantissa, exponent) = match cell.iter().rposition(|&b| b == b'e' || b == b'E') {
        Some(k) => {
            let exp_text = cell.get(k + 1..).unwrap_or(&[]);
            let (sign, digits) = match exp_text.first() {
                Some(b'-') => (-1, &exp_text[1..]),
                Some(b'+') => (1, &exp_text[1..]),
                _ => (1, exp_text),
            };
            let exp = digits
                .iter()
                .take(4)
                .filter(|b| b.is_ascii_digit())
                .fold(0i32, |e, &b| e * 10 + i32::from(b - b'0'));
            let exp = sign * exp;
            (cell.get(..k).unwrap_or(&[]), exp)
        }
        None => (cell, 0),
    };
    let decimals = mantissa
        .iter()
        .position(|&b| b == b'.' || b == b',')
        .map_or(0, |k| mantissa.len() - k - 1) as i32;
    pow10(exponent - decimals)
}

/// `10f64.powi(k)`, looked up for the exponents printed numbers have (it runs once per row).
fn pow10(k: i32) -> f64 {
    const LO: i32 = -64;
    static TABLE: std::sync::OnceLock<[f64; 129]> = std::sync::OnceLock::new();
    let table = TABLE.get_or_init(|| {
        let mut t = [0.0; 129];
        for (i, x) in t.iter_mut().enumerate() {
            *x = 10f64.powi(LO + i as i32);
        }
        t
    });
    usize::try_from(k - LO)
        .ok()
        .and_then(|i| table.get(i).copied())
        .unwrap_or_else(|| 10f64.powi(k))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn split(row: &str, d: Delim) -> Vec<String> {
        Cells::new(row.as_bytes(), d)
            .map(|c| String::from_utf8_lossy(c).into_owned())
            .collect()
    }

    #[test]
    fn rows_split_into_cells() {
        assert_eq!(split("1,2,,3", Delim::Byte(b',')), ["1", "2", "", "3"]);
        assert_eq!(split("1,2,", Delim::Byte(b',')), ["1", "2", ""]);
        assert_eq!(split("  1   2\t3 ", Delim::Whitespace), ["1", "2", "3"]);
        assert_eq!(split("1,5", Delim::None), ["1,5"]);
    }

    #[test]
    fn numbers_with_either_decimal_mark() {
        assert_eq!(parse_number(b"1.25", false), Ok(1.25));
        assert_eq!(parse_number(b"1,25", true), Ok(1.25));
        assert_eq!(parse_number(b"-3,5E-3", true), Ok(-3.5e-3));
        assert_eq!(parse_number(b"1,25", false), Err(CellError::NotANumber));
        assert_eq!(parse_number(b"abc", false), Err(CellError::NotANumber));
        assert_eq!(parse_number(b"NaN", false), Err(CellError::NotFinite));
        assert_eq!(parse_number(b"-inf", false), Err(CellError::NotFinite));
        assert_eq!(parse_number(b"", false), Err(CellError::Empty));
    }

    #[test]
    fn printed_resolution() {
        assert!((last_digit_place(b"1.25e-6") - 1e-8).abs() < 1e-20);
        assert!((last_digit_place(b"0.000123") - 1e-6).abs() < 1e-18);
        assert_eq!(last_digit_place(b"12"), 1.0);
        assert!((last_digit_place(b"-3.50E+02") - 1.0).abs() < 1e-12);
    }
}
