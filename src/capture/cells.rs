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

/// The delimiter byte and the decimal mark to read numbers with when rows split at `delim`
/// read the same as numbers read straight from the text, one after another (the delimiter
/// cannot be part of a number; a comma that delimits is no decimal mark).
pub(crate) fn bare_delimiter(delim: Delim, decimal_comma: bool) -> Option<(u8, bool)> {
    match delim {
        Delim::Byte(d) if !b"0123456789+-.eE\r\n".contains(&d) => {
            Some((d, decimal_comma && d != b','))
        }
        _ => None,
    }
}

/// Where a cell that opens with a quote (after spaces) closes, just past its closing quote:
/// a delimiter inside the quotes (a decimal comma in a comma-separated file, a comma in a
/// column name) belongs to the cell. A doubled quote inside is a quote. `None` for a cell
/// without an opening quote or with no closing one (split as it stands).
fn quoted_end(rest: &[u8]) -> Option<usize> {
    let open = rest.iter().position(|b| *b != b' ' && *b != b'\t')?;
    if rest[open] != b'"' {
        return None;
    }
    let mut k = open + 1;
    loop {
        k += memchr::memchr(b'"', rest.get(k..)?)?;
        if rest.get(k + 1) == Some(&b'"') {
            k += 2;
        } else {
            return Some(k + 1);
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
            Delim::Byte(d) => {
                // Searched from past a quoted cell's closing quote.
                let from = quoted_end(self.rest).unwrap_or(0);
                match memchr::memchr(d, &self.rest[from..]) {
                    Some(k) => {
                        let (cell, rest) = self.rest.split_at(from + k);
                        self.rest = rest.get(1..).unwrap_or(&[]);
                        Some(cell)
                    }
                    None => {
                        self.done = true;
                        Some(self.rest)
                    }
                }
            }
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
    /// One of the values instruments write in place of a sample that was out of range or
    /// invalid ([`is_overrange_marker`]).
    Overrange,
}

/// SCPI's stand-ins for infinity (`9.9E37`, negated for minus infinity) and not-a-number
/// (`9.91E37`), which many instruments write into an exported record where the signal left
/// the screen or no sample was taken (SCPI-1999 Volume 1, the numeric-value conventions;
/// quoted from memory). Read as numbers they are finite, and one of them among volts wrecks
/// the levels or becomes the peak, so they are refused like NaN and infinity.
pub(crate) fn is_overrange_marker(x: f64) -> bool {
    let a = x.abs();
    a == 9.9e37 || a == 9.91e37
}

/// Longest cell read as a number; longer cells are text (no number needs more digits).
const MAX_NUMBER_LEN: usize = 64;

/// Reads a trimmed cell as a finite number, with a decimal comma when asked.
///
/// Plain decimals take the exact fast path of [`super::decimal`]; everything else goes to
/// `fast_float2`, which rounds correctly too, so the value is the same either way.
#[inline]
pub(crate) fn parse_number(cell: &[u8], decimal_comma: bool) -> Result<f64, CellError> {
    match super::decimal::read_prefix(cell, decimal_comma) {
        Some((d, end)) if end == cell.len() => Ok(d.value),
        // A plain decimal followed by anything is no number to the general parser either
        // (its grammar has nothing that continues a complete decimal but an exponent,
        // which the fast path reads itself): the sniffer tries every delimiter on every
        // line, and whole rows like `0.5,1.25` are refused here without a second parse.
        Some(_) => Err(CellError::NotANumber),
        None => parse_number_general(cell, decimal_comma),
    }
}

/// Reads a time cell: its value and the place value of its last printed digit (see
/// [`last_digit_place`]), the latter only when `want_place`, else 0.
#[inline]
pub(crate) fn parse_time_cell(
    cell: &[u8],
    decimal_comma: bool,
    want_place: bool,
) -> Result<(f64, f64), CellError> {
    match super::decimal::read_fast(cell, decimal_comma) {
        Some(d) => Ok((d.value, if want_place { pow10(d.last_place) } else { 0.0 })),
        None => {
            let t = parse_number_general(cell, decimal_comma)?;
            Ok((
                t,
                if want_place {
                    last_digit_place(cell)
                } else {
                    0.0
                },
            ))
        }
    }
}

/// Any number `fast_float2` reads (it rounds correctly), refusing NaN and infinities.
fn parse_number_general(cell: &[u8], decimal_comma: bool) -> Result<f64, CellError> {
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
    // (The fast path never gives a marker: its values stay below 2^53 * 10^22, about 9e37
    // but short of 9.9e37, so only this reader needs the look.)
    if !x.is_finite() {
        Err(CellError::NotFinite)
    } else if is_overrange_marker(x) {
        Err(CellError::Overrange)
    } else {
        Ok(x)
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
pub(crate) fn pow10(k: i32) -> f64 {
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
    fn a_delimiter_inside_quotes_stays_in_its_cell() {
        let comma = Delim::Byte(b',');
        assert_eq!(split(r#""0,25","24,5""#, comma), [r#""0,25""#, r#""24,5""#]);
        assert_eq!(
            split(r#" "Time, s" ,"a ""b"", c",3"#, comma),
            [r#" "Time, s" "#, r#""a ""b"", c""#, "3"]
        );
        // No closing quote: split as it stands.
        assert_eq!(split(r#""0,25,3"#, comma), [r#""0"#, "25", "3"]);
        assert_eq!(
            split(r#"1;"2;3";4"#, Delim::Byte(b';')),
            ["1", r#""2;3""#, "4"]
        );
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
        // The SCPI stand-ins, however printed; a neighbour of theirs is a number.
        for marker in [
            &b"9.9E+37"[..],
            b"-9.9e37",
            b"9.91E37",
            b"99E36",
            b"9.90000000e+37",
        ] {
            assert_eq!(parse_number(marker, false), Err(CellError::Overrange));
        }
        assert_eq!(parse_number(b"9.8E37", false), Ok(9.8e37));
        assert_eq!(parse_number(b"", false), Err(CellError::Empty));
    }

    /// The fast path against the general parser it stands in for (`fast_float2`, the
    /// reader before it, same values and same refusals) and against Rust's correctly
    /// rounded `str::parse::<f64>`: bit for bit, and the printed resolution as
    /// [`last_digit_place`] reads it.
    fn agrees(cell: &[u8], comma: bool) -> Result<(), proptest::test_runner::TestCaseError> {
        use proptest::prelude::*;
        let fast = parse_number(cell, comma);
        let general = parse_number_general(cell, comma);
        let shown = String::from_utf8_lossy(cell);
        match (fast, general) {
            (Ok(a), Ok(b)) => prop_assert_eq!(a.to_bits(), b.to_bits(), "{}", shown),
            (a, b) => prop_assert_eq!(a, b, "{}", shown),
        }
        if let Ok(x) = fast {
            if !comma {
                if let Some(y) = std::str::from_utf8(cell)
                    .ok()
                    .and_then(|t| t.parse::<f64>().ok())
                {
                    prop_assert_eq!(x.to_bits(), y.to_bits(), "{}", shown);
                }
            }
            let (t, place) = parse_time_cell(cell, comma, true).unwrap();
            prop_assert_eq!(t.to_bits(), x.to_bits());
            prop_assert_eq!(
                place.to_bits(),
                last_digit_place(cell).to_bits(),
                "{}",
                shown
            );
        }
        Ok(())
    }

    /// `%.{p}e` as C prints it: at least two exponent digits, with a sign.
    fn c_exponent(x: f64, p: usize) -> String {
        let s = format!("{x:.p$e}");
        let (m, e) = s.split_once('e').unwrap();
        let e: i32 = e.parse().unwrap();
        format!("{m}e{}{:02}", if e < 0 { '-' } else { '+' }, e.abs())
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(4000))]

        #[test]
        fn printed_numbers_read_the_same_by_either_path(
            m in 1.0f64..10.0,
            negative: bool,
            scale in -30i32..30,
            p in 0usize..20,
        ) {
            // The forms scopes and scripts write: %.4f, %.9e, %.{p}f, %.{p}e, shortest.
            let x = if negative { -m } else { m } * 10f64.powi(scale);
            for s in [
                format!("{x:.4}"),
                c_exponent(x, 9),
                format!("{x:.p$}"),
                c_exponent(x, p),
                format!("{x:.p$e}"),
                format!("{x:e}"),
                format!("{x}"),
                format!("{x:.4}").replace('.', ","),
            ] {
                agrees(s.as_bytes(), false)?;
                agrees(s.as_bytes(), true)?;
            }
        }

        #[test]
        fn number_like_text_reads_the_same_by_either_path(
            s in "[-+]?[0-9]{0,24}([.,][0-9]{0,24})?([eE][-+]?[0-9]{0,6})?",
        ) {
            agrees(s.as_bytes(), false)?;
            agrees(s.as_bytes(), true)?;
        }

        #[test]
        fn any_mix_of_number_bytes_reads_the_same_by_either_path(
            bytes in proptest::collection::vec(
                proptest::sample::select(b"0123456789+-.,;\teE xinfatyNI\xff".to_vec()),
                0..32,
            ),
        ) {
            agrees(&bytes, false)?;
            agrees(&bytes, true)?;
        }

        /// The sniffer tries every delimiter on every line, so whole rows (two printed
        /// numbers and what separates them) reach the parser as one cell: refused by the
        /// fast path exactly when the general parser refuses them.
        #[test]
        fn whole_rows_as_one_cell_read_the_same_by_either_path(
            a in "[-+]?[0-9]{1,12}([.,][0-9]{0,10})?([eE][-+]?[0-9]{1,3})?",
            sep in "[,; \t]|e|inf|nan|[.]|x",
            b in "[-+]?[0-9]{0,12}([.,][0-9]{0,10})?([eE][-+]?[0-9]{0,3})?",
        ) {
            let row = format!("{a}{sep}{b}");
            agrees(row.as_bytes(), false)?;
            agrees(row.as_bytes(), true)?;
        }
    }

    #[test]
    fn printed_resolution() {
        assert!((last_digit_place(b"1.25e-6") - 1e-8).abs() < 1e-20);
        assert!((last_digit_place(b"0.000123") - 1e-6).abs() < 1e-18);
        assert_eq!(last_digit_place(b"12"), 1.0);
        assert!((last_digit_place(b"-3.50E+02") - 1.0).abs() < 1e-12);
    }
}
