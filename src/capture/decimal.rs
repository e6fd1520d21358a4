//! Plain decimal numbers as scopes and scripts print them (`24.3137`, `1.234567890e-01`),
//! read without a general-purpose parser.
//!
//! Clinger's fast path (W. D. Clinger, "How to read floating point numbers accurately",
//! PLDI 1990): a number written as an integer mantissa `w` times `10^e` is exactly the
//! correctly rounded double `w * 10^e` (or `w / 10^-e`) when `w <= 2^53` and `|e| <= 22`,
//! because both operands are then exact doubles and IEEE 754 rounds the one product or
//! quotient correctly. Anything else (more than 19 digits, larger exponents,
//! `inf`, text) is left to the caller's general parser, so results are bit-identical to a
//! correctly rounded parser for every input.

/// Powers of ten that are exact doubles (10^22 is the last one, 5^22 < 2^53).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Mantissas up to this value are exact doubles.
const MAX_EXACT_MANTISSA: u64 = 1 << 53;

/// Most digits gathered into a `u64` mantissa (10^19 - 1 < 2^64).
const MAX_DIGITS: usize = 19;

/// A number read by the fast path.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Decimal {
    pub(crate) value: f64,
    /// Power of ten of the last digit written (`1.25e-6` -> -8): the printed resolution.
    pub(crate) last_place: i32,
    /// Digits written after the decimal mark (`1.25e-6` -> 2).
    pub(crate) decimals: u32,
}

/// Reads `[+-]digits[.digits][(e|E)[+-]digits]` (a comma may stand for the point when
/// `decimal_comma`), or returns `None` when the text is anything else or the value needs
/// more than the fast path: then the general parser decides, and gives the same value.
#[inline]
pub(crate) fn read_fast(cell: &[u8], decimal_comma: bool) -> Option<Decimal> {
    match read_prefix(cell, decimal_comma) {
        Some((d, end)) if end == cell.len() => Some(d),
        _ => None,
    }
}

/// Reads the number at the start of `text` as [`read_fast`] does and returns it with the
/// length of its text; what follows is the caller's to judge (a delimiter, a line end).
#[inline(always)]
pub(crate) fn read_prefix(text: &[u8], decimal_comma: bool) -> Option<(Decimal, usize)> {
    let (negative, mut i) = match text.first() {
        Some(b'-') => (true, 1),
        Some(b'+') => (false, 1),
        _ => (false, 0),
    };
    let int_start = i;
    // The integer part is short (a few digits) in what instruments print: one at a time.
    let mut w: u64 = 0;
    while let Some(d) = text
        .get(i)
        .map(|b| b.wrapping_sub(b'0'))
        .filter(|&d| d <= 9)
    {
        w = w.wrapping_mul(10).wrapping_add(u64::from(d));
        i += 1;
    }
    let n_int = i - int_start;
    let mut n_frac = 0usize;
    if let Some(&b) = text.get(i) {
        if b == b'.' || (decimal_comma && b == b',') {
            i += 1;
            let frac_start = i;
            w = fraction_digits(text, &mut i, w);
            n_frac = i - frac_start;
        }
    }
    // Leading zeros count too: fewer than 20 digits cannot have wrapped the mantissa.
    if n_int + n_frac == 0 || n_int + n_frac > MAX_DIGITS {
        return None;
    }
    let mut exp: i32 = 0;
    if let Some(b'e' | b'E') = text.get(i) {
        i += 1;
        let exp_negative = match text.get(i) {
            Some(b'-') => {
                i += 1;
                true
            }
            Some(b'+') => {
                i += 1;
                false
            }
            _ => false,
        };
        let exp_start = i;
        while let Some(d) = text
            .get(i)
            .map(|b| b.wrapping_sub(b'0'))
            .filter(|&d| d <= 9)
        {
            exp = exp * 10 + i32::from(d);
            i += 1;
            // Four digits bound the exponent far beyond any double; longer ones go to
            // the general parser.
            if i - exp_start > 4 {
                return None;
            }
        }
        if i == exp_start {
            return None;
        }
        if exp_negative {
            exp = -exp;
        }
    }
    // n_frac <= MAX_DIGITS here.
    let d = decimal_of(w, exp, n_frac as u32, negative)?;
    Some((d, i))
}

/// [`read_prefix`] for a number with no exponent whose digits and point fit in eight bytes
/// (`-0.3922`, `100.9804`, `24.31`: what a fixed-decimals column of volts holds), read as
/// one word: the point and the end are the first two bytes that are not digits, and the
/// digits either side of the point, joined, are converted at once. Exactly what
/// [`read_prefix`] gives (the same mantissa, decimals and [`decimal_of`]) where it gives
/// anything; `None` sends the cell to [`read_prefix`]. About a third of a two-column row's
/// instructions went to reading the value digit by digit.
#[inline(always)]
pub(crate) fn read_short_point(text: &[u8], decimal_comma: bool) -> Option<(Decimal, usize)> {
    let (negative, at) = match text.first() {
        Some(b'-') => (true, 1),
        Some(b'+') => (false, 1),
        _ => (false, 0),
    };
    let b: [u8; 8] = text.get(at..at + 8)?.try_into().ok()?;
    let x = u64::from_le_bytes(b);
    let others = non_digit_bits(x);
    // The point: the first byte that is not a digit, after at least one digit.
    let p = (others.trailing_zeros() / 8) as usize;
    if p == 0 || p >= 7 || !(b[p] == b'.' || (decimal_comma && b[p] == b',')) {
        return None;
    }
    // The end: the next byte that is not a digit, inside the word; an exponent there
    // is [`read_prefix`]'s to read.
    let q = ((others & !((1u64 << (8 * (p + 1))) - 1)).trailing_zeros() / 8) as usize;
    if q >= 8 || b[q] | 0x20 == b'e' {
        return None;
    }
    // The digits before the point, then those after it moved down over the point.
    let below = (1u64 << (8 * p)) - 1;
    let joined = (x & below) | ((x >> 8) & !below);
    let w = leading_digits_value(joined.wrapping_sub(ZEROS), q - 1);
    let d = decimal_of(w, 0, (q - p - 1) as u32, negative)?;
    Some((d, at + q))
}

/// The number `w * 10^(exp - decimals)`, negated when `negative`, as the fast path gives it
/// (`None` beyond Clinger's exact cases): the one place both readers compute a value, so
/// they cannot differ by a bit.
#[inline(always)]
fn decimal_of(w: u64, exp: i32, decimals: u32, negative: bool) -> Option<Decimal> {
    let last_place = exp - decimals as i32;
    let magnitude = if w == 0 {
        0.0
    } else if w > MAX_EXACT_MANTISSA {
        return None;
    } else {
        let m = w as f64;
        match last_place {
            0..=22 => m * POW10[last_place as usize],
            -22..=-1 => m / POW10[(-last_place) as usize],
            _ => return None,
        }
    };
    Some(Decimal {
        value: if negative { -magnitude } else { magnitude },
        last_place,
        decimals,
    })
}

/// The layout of a cell printed in a fixed scientific format, as time columns nearly
/// always are (`%.9e` in C: `-1.000000000e-07`, `2.500000000E+00`): an optional sign, one
/// digit, a point, `decimals` digits, `e` or `E`, a sign and two exponent digits. Every
/// row of such a column has the same layout but for the leading sign, so a row is read
/// at fixed places instead of digit by digit: about 20 instructions fewer a cell than
/// [`read_prefix`], which reads anything else (4.5 % of reading a 1 M-row CSV).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct SciShape {
    decimals: usize,
}

/// Most digits after the point a [`SciShape`] takes: with the digit before it, fifteen
/// digits stay below 2^53, so every mantissa is exact.
const SCI_MAX_DECIMALS: usize = 14;

impl SciShape {
    /// The layout of `cell` (one whole cell) when it has one.
    pub(crate) fn of(cell: &[u8]) -> Option<SciShape> {
        let body = match cell.first() {
            Some(b'-' | b'+') => cell.get(1..)?,
            _ => cell,
        };
        let decimals = body.len().checked_sub(6)?;
        let shape = SciShape { decimals };
        if !(1..=SCI_MAX_DECIMALS).contains(&decimals) {
            return None;
        }
        // Only the reader itself says whether the text fits (with a byte of room after it
        // for the eight-digit step, which a whole cell lacks).
        let mut padded = cell.to_vec();
        padded.extend_from_slice(b",,,,,,,,");
        match shape.parts(&padded) {
            Some((.., len)) if len == cell.len() => Some(shape),
            _ => None,
        }
    }

    /// Reads the number at the start of `text` when it has this layout and no digit
    /// follows it: exactly what [`read_prefix`] gives for the same text (a proptest
    /// compares them). `None` for anything else, which [`read_prefix`] then reads.
    #[inline(always)]
    pub(crate) fn read(self, text: &[u8]) -> Option<(Decimal, usize)> {
        let (w, exp, negative, end) = self.parts(text)?;
        Some((decimal_of(w, exp, self.decimals as u32, negative)?, end))
    }

    /// The number [`SciShape::parts`] found (`None` beyond the fast path's exact cases),
    /// exactly what [`SciShape::read`] gives for the same text.
    #[inline(always)]
    pub(crate) fn decimal(self, w: u64, exp: i32, negative: bool) -> Option<Decimal> {
        decimal_of(w, exp, self.decimals as u32, negative)
    }

    /// The mantissa's digits as an integer, the exponent, the sign and the length of the
    /// number at the start of `text`, when it has this layout.
    #[inline(always)]
    pub(crate) fn parts(self, text: &[u8]) -> Option<(u64, i32, bool, usize)> {
        let (negative, at) = match text.first() {
            Some(b'-') => (true, 1),
            Some(b'+') => (false, 1),
            _ => (false, 0),
        };
        let k = self.decimals;
        let end = at + k + 6;
        let cell = text.get(at..end)?;
        let lead = cell.first()?.wrapping_sub(b'0');
        if lead > 9 || cell.get(1) != Some(&b'.') {
            return None;
        }
        // The digits after the point, the first eight (or all, when fewer) read together;
        // the eight bytes must be there, which the text after a cell nearly always is.
        let eight = text.get(at + 2..at + 10)?;
        let codes = u64::from_le_bytes(<[u8; 8]>::try_from(eight).ok()?).wrapping_sub(ZEROS);
        let first = k.min(8);
        if digit_run(codes) < first {
            return None;
        }
        let mut w = u64::from(lead) * POW10_INT[first] + leading_digits_value(codes, first);
        for &b in cell.get(10..k + 2).unwrap_or(&[]) {
            let d = b.wrapping_sub(b'0');
            if d > 9 {
                return None;
            }
            w = w * 10 + u64::from(d);
        }
        let [e, sign, hi, lo] = <[u8; 4]>::try_from(cell.get(k + 2..)?).ok()?;
        let (hi, lo) = (hi.wrapping_sub(b'0'), lo.wrapping_sub(b'0'));
        if e | 0x20 != b'e' || hi > 9 || lo > 9 {
            return None;
        }
        let magnitude = i32::from(hi * 10 + lo);
        let exp = match sign {
            b'-' => -magnitude,
            b'+' => magnitude,
            _ => return None,
        };
        // A third exponent digit would make it another number.
        if text.get(end).is_some_and(u8::is_ascii_digit) {
            return None;
        }
        Some((w, exp, negative, end))
    }
}

/// [`SciShape::parts`] for the layouts of eight or nine decimals (`%.9e`, what scripts and
/// many exports write), whose cells take at most fifteen bytes: the cell and the byte
/// after it come in two eight-byte words, every byte that must be a digit is tested at
/// once, and the digits are converted at fixed places. About half the instructions of
/// the general fixed-layout reader, with no loop and one bounds check.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct SciShort {
    decimals: usize,
    /// Top bits of the second word's bytes that must be digits.
    digits_hi: u64,
    /// Top bit of the byte after the cell, which must not be a digit.
    after_hi: u64,
    /// Top bits of the second word's decimals (bytes 8 to `decimals + 1` of the cell).
    tail_hi: u64,
    /// Every bit of the second word's bytes from the exponent's `e` to the byte after the
    /// cell.
    fixed_hi: u64,
    /// Every bit of the second word's bytes up to the byte after the cell.
    cell_hi: u64,
    /// `10^(decimals - 6)`: the weight of the first word's digits over the second's.
    tail_scale: u64,
}

/// A step between time cells, in counts of their last place and as
/// [`SciShort::next_first_word`] adds it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct FirstWordStep {
    counts: u64,
    digits: u64,
}

/// The last time cell a [`SciShort`] read, kept so the next one can be read from what
/// changed: the sixteen bytes after the sign as two words, the sign's byte (zero without
/// one), where the cell starts, the count, the value of the decimals in the second word,
/// the exponent and whether it is negative.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct ShortCell {
    lo: u64,
    hi: u64,
    lead: u8,
    at: usize,
    w: u64,
    tail: u64,
    exp: i32,
    negative: bool,
}

impl ShortCell {
    /// The cell's two words (the sixteen bytes after its sign).
    pub(crate) fn words(&self) -> (u64, u64) {
        (self.lo, self.hi)
    }

    /// Whether the next cell can be read by [`SciShort::stepped_words`]: this one has no
    /// sign and a positive count.
    pub(crate) fn steps(&self) -> bool {
        self.at == 0 && !self.negative
    }

    /// The cell `n` steps of `step` on, whose words [`SciShort::stepped_words`] gave.
    pub(crate) fn step_on(&mut self, (lo, hi): (u64, u64), n: u64, step: FirstWordStep) {
        (self.lo, self.hi) = (lo, hi);
        self.w += n * step.counts;
    }

    /// The count.
    pub(crate) fn count(&self) -> u64 {
        self.w
    }
}

impl SciShape {
    /// The short reader of this layout, when it has eight or nine decimals.
    pub(crate) fn short(self) -> Option<SciShort> {
        let k = self.decimals;
        if !(8..=9).contains(&k) {
            return None;
        }
        // Bytes 8.. of the cell: the decimals past the eighth, then (k + 4, k + 5) the
        // exponent's digits; byte k + 6 follows the cell.
        let top = |byte: usize| 0x80u64 << (8 * (byte - 8));
        let all = |byte: usize| 0xFFu64 << (8 * (byte - 8));
        let digits_hi = (8..k + 2).chain([k + 4, k + 5]).fold(0, |m, b| m | top(b));
        Some(SciShort {
            decimals: k,
            digits_hi,
            after_hi: top(k + 6),
            tail_hi: (8..k + 2).fold(0, |m, b| m | top(b)),
            fixed_hi: (k + 2..=k + 6).fold(0, |m, b| m | all(b)),
            cell_hi: (8..=k + 6).fold(0, |m, b| m | all(b)),
            tail_scale: POW10_INT[k - 6],
        })
    }
}

/// Top bit of each byte of `x` that is not an ASCII digit. (Each byte is tested on its own:
/// its low seven bits plus 0x76 cannot carry into the next byte.)
#[inline(always)]
fn non_digit_bits(x: u64) -> u64 {
    let t = x ^ ZEROS;
    (((t & 0x7F7F_7F7F_7F7F_7F7F) + 0x7676_7676_7676_7676) | t) & 0x8080_8080_8080_8080
}

/// Top bits of bytes 0 and 2 to 7 of a cell: the lead digit and the first six decimals.
const SHORT_DIGITS_LO: u64 = 0x8080_8080_8080_0080;

impl SciShort {
    /// Exactly what [`SciShape::parts`] gives for the same text, where sixteen bytes
    /// follow the sign; `None` for anything else (the general reader then decides).
    #[inline(always)]
    pub(crate) fn parts(self, text: &[u8]) -> Option<(u64, i32, bool, usize)> {
        let (negative, at) = match text.first() {
            Some(b'-') => (true, 1),
            Some(b'+') => (false, 1),
            _ => (false, 0),
        };
        let b: &[u8; 16] = text.get(at..at + 16)?.try_into().ok()?;
        let word = |from: usize| -> u64 {
            let mut w = [0u8; 8];
            w.copy_from_slice(&b[from..from + 8]);
            u64::from_le_bytes(w)
        };
        let (lo, hi) = (word(0), word(8));
        let k = self.decimals;
        let hi_non_digits = non_digit_bits(hi);
        if non_digit_bits(lo) & SHORT_DIGITS_LO != 0
            || hi_non_digits & self.digits_hi != 0
            || hi_non_digits & self.after_hi == 0
            || b[1] != b'.'
            || b[k + 2] | 0x20 != b'e'
        {
            return None;
        }
        let digit = |i: usize| u64::from(b[i] ^ b'0');
        let eight = eight_digit_value_of_codes(word(2) ^ ZEROS);
        let w = if k == 9 {
            digit(0) * 1_000_000_000 + eight * 10 + digit(10)
        } else {
            digit(0) * 100_000_000 + eight
        };
        let magnitude = (digit(k + 4) * 10 + digit(k + 5)) as i32;
        let exp = match b[k + 3] {
            b'-' => -magnitude,
            b'+' => magnitude,
            _ => return None,
        };
        Some((w, exp, negative, at + k + 6))
    }

    /// [`SciShort::parts`], and what [`SciShort::parts_after`] needs to read the next cell.
    #[inline(always)]
    pub(crate) fn parts_kept(self, text: &[u8]) -> Option<((u64, i32, bool, usize), ShortCell)> {
        let parts @ (w, exp, negative, end) = self.parts(text)?;
        let at = end - self.decimals - 6;
        let (lo, hi) = words_at(text, at)?;
        let cell = ShortCell {
            lo,
            hi,
            // Only a sign is compared: the lead digit is part of the first word.
            lead: if at == 1 { *text.first()? } else { 0 },
            at,
            w,
            tail: self.tail_value(hi),
            exp,
            negative,
        };
        Some((parts, cell))
    }

    /// Exactly what [`SciShort::parts`] gives for `text`, read from what changed since the
    /// cell `last` (updated), or `None` when more than one of its two words changed, its
    /// sign did, or any byte is out of place (the caller then reads it whole). Where
    /// consecutive times differ in a few digits, one word is compared and the other's
    /// digits are read, about half the instructions of the whole reading.
    ///
    /// Why it is the same: with the same sign byte (or none, and no sign now) the cell
    /// starts where `last` did. If the first word is the same, its lead digit, point and
    /// six decimals are; the exponent, its sign and digits and the byte after the cell
    /// are compared, so only the decimals in the second word are left to test and read,
    /// and the count is `last`'s less its old tail plus the new one. If instead the
    /// second word is the same over the whole cell and the byte after it, the first
    /// word's lead digit, point and decimals are tested and read, and the tail is kept.
    #[inline(always)]
    pub(crate) fn parts_after(
        self,
        text: &[u8],
        last: &mut ShortCell,
    ) -> Option<(u64, i32, bool, usize)> {
        let lead = *text.first()?;
        let signed = matches!(lead, b'-' | b'+');
        if (last.at == 1) != signed || (signed && lead != last.lead) {
            return None;
        }
        let (lo, hi) = words_at(text, last.at)?;
        let w = if lo == last.lo {
            if (hi ^ last.hi) & self.fixed_hi != 0 || non_digit_bits(hi) & self.tail_hi != 0 {
                return None;
            }
            let tail = self.tail_value(hi);
            let w = last.w - last.tail + tail;
            last.tail = tail;
            w
        } else if (hi ^ last.hi) & self.cell_hi == 0 {
            if non_digit_bits(lo) & SHORT_DIGITS_LO != 0 || (lo >> 8) as u8 != b'.' {
                return None;
            }
            // The lead digit moved up beside the decimals, in place of the point.
            let codes = lo ^ ZEROS;
            let seven = eight_digit_value_of_codes((codes & !0xFFFF) | ((codes & 0xFF) << 8));
            seven * self.tail_scale + last.tail
        } else {
            return None;
        };
        (last.lo, last.hi, last.w) = (lo, hi, w);
        Some((w, last.exp, last.negative, last.at + self.decimals + 6))
    }

    /// A step of `step` counts as [`SciShort::next_first_word`] adds it: when it is
    /// positive, leaves the second word's decimals as they are (a whole number of units of
    /// the first word's last place) and is less than the first word's seven digits spell.
    pub(crate) fn first_word_step(self, step: i64) -> Option<FirstWordStep> {
        let step = u64::try_from(step).ok().filter(|&s| s > 0)?;
        if step % self.tail_scale != 0 {
            return None;
        }
        let mut units = step / self.tail_scale;
        if units >= 10_000_000 {
            return None;
        }
        // The digits one to a byte, in the order `next_first_word` adds in: the units
        // lowest, and no digit in the point's byte (byte 6 of the reversed word).
        let mut digits = 0u64;
        for byte in [0, 1, 2, 3, 4, 5, 7] {
            digits |= (units % 10) << (8 * byte);
            units /= 10;
        }
        Some(FirstWordStep {
            counts: step,
            digits,
        })
    }

    /// The first word of the cell `step` counts after the one whose first word is `lo`
    /// (a positive count; its decimals in the second word unchanged), or `None` when the
    /// lead digit would pass 9. The digits are added one to a byte in a word reversed so
    /// that the units sit lowest: adding 246 to every byte makes each byte of ten or more
    /// carry into the next, a run of nines carrying on; the bytes that did not carry are
    /// 246 too high, which their top bit shows. The point's byte is a 9 meanwhile, so a
    /// carry passes through it.
    #[inline(always)]
    pub(crate) fn next_first_word(self, lo: u64, step: FirstWordStep) -> Option<u64> {
        // '0' off every digit, and '.' (0x2E) down to 9.
        const DIGITS_AND_POINT: u64 = 0x3030_3030_3030_2530;
        const POINT: u64 = 0xFF << 48;
        let x = (lo - DIGITS_AND_POINT).swap_bytes() + step.digits;
        let (y, out) = x.overflowing_add(0xF6F6_F6F6_F6F6_F6F6);
        if out {
            return None;
        }
        let unspent = (y >> 7) & 0x0101_0101_0101_0101;
        let sum = (y - unspent * 0xF6) & !POINT | (9 << 48);
        Some(sum.swap_bytes() + DIGITS_AND_POINT)
    }

    /// The two words of the cell at the start of `text` when it is the one after a
    /// cell whose second word is `hi`, its first word `next` (from
    /// [`SciShort::next_first_word`]) and its second word `hi` over the whole cell and the
    /// byte after it: then it reads as `step` counts after that cell (see
    /// [`ShortCell::step_on`]). For unsigned positive cells only ([`ShortCell::steps`]),
    /// whose first byte is the lead digit the first word compares.
    #[inline(always)]
    pub(crate) fn stepped_words(self, text: &[u8], hi: u64, next: u64) -> Option<(u64, u64)> {
        let (lo, new_hi) = words_at(text, 0)?;
        (lo == next && (new_hi ^ hi) & self.cell_hi == 0).then_some((lo, new_hi))
    }

    /// Bytes in a cell (the sign aside).
    pub(crate) fn cell_bytes(self) -> usize {
        self.decimals + 6
    }

    /// The number the decimals in the second word spell (two or three digits, tested).
    #[inline(always)]
    fn tail_value(self, hi: u64) -> u64 {
        let d = |i: u32| (hi >> (8 * i)) as u8 as u64 ^ u64::from(b'0');
        if self.decimals == 9 {
            d(0) * 100 + d(1) * 10 + d(2)
        } else {
            d(0) * 10 + d(1)
        }
    }
}

/// The two eight-byte words (first byte lowest) at `at..at + 16` of `text`.
#[inline(always)]
fn words_at(text: &[u8], at: usize) -> Option<(u64, u64)> {
    let b: &[u8; 16] = text.get(at..at + 16)?.try_into().ok()?;
    let mut w = [0u8; 8];
    w.copy_from_slice(&b[..8]);
    let lo = u64::from_le_bytes(w);
    w.copy_from_slice(&b[8..]);
    Some((lo, u64::from_le_bytes(w)))
}

/// `10^n` for the digit counts of one eight-byte step.
const POW10_INT: [u64; 9] = [
    1,
    10,
    100,
    1_000,
    10_000,
    100_000,
    1_000_000,
    10_000_000,
    100_000_000,
];

/// Appends the digits from `i` on to `w` (it wraps past 19 digits; the caller refuses
/// those). The first eight bytes are looked at together: the run of digits at their start
/// is found and converted without a branch per digit, so fractions of varying length cost
/// the same (SWAR, "SIMD within a register", as in Lemire's fast_float); digits past them
/// (`%.9e` writes nine) go one at a time.
#[inline(always)]
fn fraction_digits(text: &[u8], i: &mut usize, mut w: u64) -> u64 {
    if let Some(eight) = text
        .get(*i..*i + 8)
        .and_then(|s| <[u8; 8]>::try_from(s).ok())
    {
        let codes = u64::from_le_bytes(eight).wrapping_sub(ZEROS);
        let run = digit_run(codes);
        if run == 0 {
            return w;
        }
        w = w
            .wrapping_mul(POW10_INT[run])
            .wrapping_add(leading_digits_value(codes, run));
        *i += run;
        if run < 8 {
            return w;
        }
    }
    while let Some(d) = text
        .get(*i)
        .map(|b| b.wrapping_sub(b'0'))
        .filter(|&d| d <= 9)
    {
        w = w.wrapping_mul(10).wrapping_add(u64::from(d));
        *i += 1;
    }
    w
}

/// `'0'` in every byte.
const ZEROS: u64 = 0x3030_3030_3030_3030;

/// How many of eight bytes (first byte lowest), each already less `'0'`, are digits (0 to
/// 9) before the first that is not. Adding 0x76 sets a byte's top bit exactly when it is
/// 10 or more; borrows and carries between bytes only start at a byte that is not a digit,
/// so they can only disturb bytes after the run.
#[inline(always)]
fn digit_run(codes: u64) -> usize {
    let big = (codes.wrapping_add(0x7676_7676_7676_7676) | codes) & 0x8080_8080_8080_8080;
    (big.trailing_zeros() / 8) as usize
}

/// The number spelled by the first `run` (1 to 8) digit codes of `codes`: they are moved
/// to the top of the word, so the bytes below are leading zeros, then converted as eight.
#[inline(always)]
fn leading_digits_value(codes: u64, run: usize) -> u64 {
    let shift = 64 - 8 * run as u32;
    eight_digit_value_of_codes(codes << shift)
}

/// The number eight ASCII digits (first digit in the low byte) spell.
#[cfg(test)]
fn eight_digit_value(v: u64) -> u64 {
    eight_digit_value_of_codes(v.wrapping_sub(ZEROS))
}

/// The number eight digit values (0 to 9, first in the low byte) spell: pairs, then
/// quadruples, then the eight, combined by multiplications within one `u64`.
#[inline(always)]
fn eight_digit_value_of_codes(v: u64) -> u64 {
    const MASK: u64 = 0x0000_00FF_0000_00FF;
    const MUL1: u64 = 100 + (1_000_000 << 32);
    const MUL2: u64 = 1 + (10_000 << 32);
    let v = v.wrapping_mul(10).wrapping_add(v >> 8);
    (v & MASK)
        .wrapping_mul(MUL1)
        .wrapping_add(((v >> 16) & MASK).wrapping_mul(MUL2))
        >> 32
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fast(s: &str) -> Option<f64> {
        read_fast(s.as_bytes(), false).map(|d| d.value)
    }

    /// The one-word reader against the digit-by-digit one on every combination of sign,
    /// integer digits, point (or comma), fraction, exponent and what follows (a line end,
    /// a next cell, text, digits running on, the end of the buffer): wherever it gives a
    /// number it is the same to the bit, with the same decimals and length. And it does
    /// give one for the cells of a fixed-decimals column, with a line end or more digits'
    /// room after them.
    #[test]
    fn one_word_points_read_as_digit_by_digit() {
        let signs = ["", "-", "+"];
        let ints = ["", "0", "7", "12", "100", "0000", "123456", "1234567"];
        let points = ["", ".", ","];
        let fracs = ["", "5", "3922", "12345", "0000001", "00"];
        let exps = ["", "e3", "E-2"];
        let ends = ["", "\n", "\r\n", ",1.5\n", "abcdefgh", "99999999", "e"];
        let mut fast = 0;
        for sign in signs {
            for int in ints {
                for point in points {
                    for frac in fracs {
                        for exp in exps {
                            for end in ends {
                                let text = format!("{sign}{int}{point}{frac}{exp}{end}");
                                for comma in [false, true] {
                                    let t = text.as_bytes();
                                    let Some((d, len)) = read_short_point(t, comma) else {
                                        continue;
                                    };
                                    fast += 1;
                                    let (g, glen) = read_prefix(t, comma).expect(&text);
                                    assert_eq!(d.value.to_bits(), g.value.to_bits(), "{text:?}");
                                    assert_eq!(
                                        (d.last_place, d.decimals),
                                        (g.last_place, g.decimals)
                                    );
                                    assert_eq!(len, glen, "{text:?}");
                                }
                            }
                        }
                    }
                }
            }
        }
        assert!(fast > 500, "only {fast} cells read in one word");
        for cell in [
            "-0.3922\n1.0",
            "10.9804\n",
            "24.31,5\n",
            "-0.0\r\n12345",
            "+7.5\n1234",
        ] {
            let want = read_prefix(cell.as_bytes(), false);
            assert_eq!(read_short_point(cell.as_bytes(), false), want, "{cell:?}");
            assert!(want.is_some());
        }
        // The point and the end must both lie in the eight bytes after the sign.
        assert_eq!(read_short_point(b"100.9804\n", false), None);
        assert_eq!(
            read_short_point(b"-0,3922\n1.0", true).map(|(d, _)| d.value),
            Some(-0.3922)
        );
        assert_eq!(read_short_point(b"-0,3922\n1.0", false), None);
    }

    #[test]
    fn printed_forms_read_exactly() {
        // Expected values: Rust's correctly rounded `str::parse::<f64>` of the same text.
        for s in [
            "24.3137",
            "-0.3922",
            "1.234567890e-01",
            "2.000000000e-08",
            "0.000000000e+00",
            "-0",
            "+7",
            "5.",
            ".5",
            "1E5",
            "9007199254740992",
            "123456789012345678e-3",
            "0.0000000000000000000000000000001",
        ] {
            let want: f64 = s.parse().unwrap();
            let got = fast(s);
            if let Some(g) = got {
                assert_eq!(g.to_bits(), want.to_bits(), "{s}");
            }
        }
        assert_eq!(fast("-0").map(f64::to_bits), Some((-0.0f64).to_bits()));
        assert_eq!(fast("24.3137"), Some(24.3137));
    }

    #[test]
    fn what_the_fast_path_leaves_to_the_general_parser() {
        // 2^53 + 1 is not an exact double; 10^23 is not an exact power; 20 digits overflow
        // the gathered mantissa; the rest is not a plain decimal.
        for s in [
            "9007199254740993",
            "1e23",
            "12345678901234567890",
            "1e-23",
            "1e",
            "1e+",
            "e5",
            ".",
            "-",
            "",
            "1.2.3",
            "1,5",
            "inf",
            "NaN",
            "1e00001",
            "0x10",
            "1_000",
            " 1",
        ] {
            assert_eq!(fast(s), None, "{s}");
        }
        assert_eq!(read_fast(b"1,5", true).map(|d| d.value), Some(1.5));
    }

    #[test]
    fn eight_bytes_at_a_time() {
        let codes = |b: &[u8; 8]| u64::from_le_bytes(*b).wrapping_sub(ZEROS);
        assert_eq!(digit_run(codes(b"01234567")), 8);
        assert_eq!(digit_run(codes(b"0123456.")), 7);
        assert_eq!(digit_run(codes(b"/1234567")), 0);
        assert_eq!(digit_run(codes(b"0123:567")), 4);
        assert_eq!(
            eight_digit_value(u64::from_le_bytes(*b"01234567")),
            1_234_567
        );
        assert_eq!(
            eight_digit_value(u64::from_le_bytes(*b"98765432")),
            98_765_432
        );
        assert_eq!(leading_digits_value(codes(b"407,xyz\n"), 3), 407);
        // Every byte value in every place, after runs of every length, against a scalar
        // count: bytes below '0' (which borrow) and above 0x89 (which carry) included.
        for run in 0..8 {
            for b in 0..=255u8 {
                let mut w = *b"98765432";
                w[run] = b;
                let want = w.iter().take_while(|c| c.is_ascii_digit()).count();
                let v = codes(&w);
                assert_eq!(digit_run(v), want, "{w:?}");
                if want > 0 {
                    let text = std::str::from_utf8(&w[..want]).unwrap();
                    assert_eq!(leading_digits_value(v, want), text.parse::<u64>().unwrap());
                }
            }
        }
        // A prefix stops where the number does.
        let (d, end) = read_prefix(b"1.234567890e-01,24.3137\n", false).unwrap();
        assert_eq!((d.value, end), (0.123456789, 15));
        let (d, end) = read_prefix(b"24.3137\n", false).unwrap();
        assert_eq!((d.value, end), (24.3137, 7));
    }

    proptest::proptest! {
        /// Digits are read eight at a time where eight bytes follow and one at a time
        /// near the end of the text: a number followed by a row's next cells reads as the
        /// same number alone does (value bits, printed place, decimals, length), and a
        /// correctly rounded parser agrees with its value.
        #[test]
        fn a_number_reads_the_same_with_or_without_text_after_it(
            s in "[-+]?[0-9]{0,22}([.,][0-9]{0,22})?([eE][-+]?[0-9]{0,6})?",
            after in "[,;\t ][-+]?[0-9]{0,12}\r?\n?",
            comma: bool,
        ) {
            let alone = read_prefix(s.as_bytes(), comma);
            let row = format!("{s}{after}");
            let followed = read_prefix(row.as_bytes(), comma);
            let key = |r: Option<(Decimal, usize)>| {
                r.map(|(d, n)| (d.value.to_bits(), d.last_place, d.decimals, n))
            };
            // A comma after the number is part of it under a decimal comma when the
            // number has no mark yet; compare only where it cannot be.
            if !(comma && after.starts_with(',')) {
                proptest::prop_assert_eq!(key(alone), key(followed));
            }
            if let Some((d, n)) = alone.filter(|&(_, n)| n == s.len()) {
                let std: f64 = s.replace(',', ".").parse().unwrap();
                proptest::prop_assert_eq!(d.value.to_bits(), std.to_bits(), "{} {}", s, n);
            }
        }
    }

    /// `row` with the byte at `edit.0` changed to `edit.1` (when there is one) and cut to
    /// `cut` bytes: the damaged cells the fixed-layout proptests read.
    fn bent(row: &[u8], edit: Option<(usize, u8)>, cut: Option<usize>) -> Vec<u8> {
        let mut out = row.to_vec();
        if let Some((at, b)) = edit {
            if let Some(x) = out.get_mut(at) {
                *x = b;
            }
        }
        if let Some(n) = cut {
            out.truncate(n);
        }
        out
    }

    proptest::proptest! {
        /// The fixed-layout reader gives exactly what the general one gives (value bits,
        /// printed place, decimals, length) wherever it reads anything, on cells of its
        /// layout with a byte changed anywhere (a digit for a mark, a third exponent
        /// digit, a short text...), and it does read every well-formed cell followed by
        /// the rest of a row.
        #[test]
        fn the_fixed_layout_reads_what_the_general_reader_reads(
            sign in "[-+]?",
            lead in 0u8..10,
            digits in "[0-9]{1,14}",
            e in "[eE]",
            exp_sign in "[-+]",
            exp in 0u8..100,
            after in "[,;\t\n][-+]?[0-9]{0,12}\r?\n?",
            edit in proptest::option::of((0usize..40, proptest::sample::select(
                b"0123456789.eE+-,x \n".to_vec()))),
            cut in proptest::option::of(0usize..40),
        ) {
            let cell = format!("{sign}{lead}.{digits}{e}{exp_sign}{exp:02}");
            let shape = SciShape::of(cell.as_bytes());
            proptest::prop_assert_eq!(shape, Some(SciShape { decimals: digits.len() }));
            let shape = shape.unwrap();
            let key = |r: Option<(Decimal, usize)>| {
                r.map(|(d, n)| (d.value.to_bits(), d.last_place, d.decimals, n))
            };
            let row = format!("{cell}{after}").into_bytes();
            let general = read_prefix(&row, false);
            // Where eight bytes follow the point the fixed reader takes the cell itself
            // (both leave values beyond Clinger's exact cases to the general parser).
            if row.len() >= usize::from(!sign.is_empty()) + 10 {
                proptest::prop_assert_eq!(key(shape.read(&row)), key(general));
            }
            let bent = bent(&row, edit, cut);
            if let Some(fixed) = shape.read(&bent) {
                proptest::prop_assert_eq!(key(Some(fixed)), key(read_prefix(&bent, false)));
            }
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(3000))]

        /// The short reader of eight- and nine-decimal layouts gives exactly what the
        /// general fixed-layout reader gives wherever it reads anything: on well-formed
        /// cells followed by a row's rest, and on the same with a byte changed or the text
        /// cut; and it reads every well-formed cell with sixteen bytes after its sign.
        #[test]
        fn the_short_fixed_layout_reads_what_the_fixed_layout_reads(
            sign in "[-+]?",
            lead in 0u8..10,
            digits in "[0-9]{8,9}",
            e in "[eE]",
            exp_sign in "[-+]",
            exp in 0u8..100,
            after in "[,;\t\n][-+]?[0-9]{0,12}\r?\n?",
            edit in proptest::option::of((0usize..20, proptest::sample::select(
                b"0123456789.eE+-,x/: \n\x80".to_vec()))),
            cut in proptest::option::of(0usize..20),
        ) {
            let cell = format!("{sign}{lead}.{digits}{e}{exp_sign}{exp:02}");
            let shape = SciShape::of(cell.as_bytes()).unwrap();
            let short = shape.short().unwrap();
            let row = format!("{cell}{after}").into_bytes();
            if row.len() >= sign.len() + 16 {
                proptest::prop_assert!(short.parts(&row).is_some(), "{:?}", row);
            }
            let row = bent(&row, edit, cut);
            if let Some(got) = short.parts(&row) {
                proptest::prop_assert_eq!(Some(got), shape.parts(&row));
            }
        }
    }

    /// A time cell of `k` decimals spelling the count `w` (`k + 1` digits).
    fn time_cell(sign: &str, w: u64, k: usize, tail: &str) -> Vec<u8> {
        let unit = 10u64.pow(k as u32);
        format!("{sign}{}.{:0k$}{tail}", w / unit, w % unit).into_bytes()
    }

    /// What reading from the cell before gives over `rows`, against reading each whole:
    /// wherever it gives a reading, that reading and the cell it keeps are the whole
    /// reading's. Returns how many rows it read.
    fn read_from_what_changed(short: SciShort, rows: &[Vec<u8>]) -> usize {
        let mut kept: Option<ShortCell> = None;
        let mut hits = 0;
        for row in rows {
            let whole = short.parts_kept(row);
            if let Some(mut cell) = kept {
                if let Some(got) = short.parts_after(row, &mut cell) {
                    assert_eq!(
                        Some(got),
                        whole.map(|w| w.0),
                        "{}",
                        String::from_utf8_lossy(row)
                    );
                    assert_eq!(Some(cell), whole.map(|w| w.1));
                    hits += 1;
                }
            }
            kept = whole.map(|w| w.1);
        }
        hits
    }

    /// The same for the cells worked out ahead a `step` apart: wherever the next first
    /// word is worked out and a row's words are taken as that cell's, reading the row
    /// whole gives that cell, `step` after the one before. Returns how many rows were
    /// taken so.
    fn read_a_step_on(short: SciShort, rows: &[Vec<u8>], step: i64) -> usize {
        let Some(s) = short.first_word_step(step) else {
            return 0;
        };
        let mut kept: Option<ShortCell> = None;
        let mut hits = 0;
        for row in rows {
            let whole = short.parts_kept(row);
            if let Some(mut cell) = kept.filter(ShortCell::steps) {
                let next = short.next_first_word(cell.words().0, s);
                if let Some(now) = next.and_then(|n| short.stepped_words(row, cell.words().1, n)) {
                    let w = cell.count() + step as u64;
                    cell.step_on(now, 1, s);
                    let text = String::from_utf8_lossy(row);
                    assert_eq!(whole.map(|w| w.1), Some(cell), "{text}");
                    let (got_w, exp, negative, len) = whole.unwrap().0;
                    assert_eq!(
                        (got_w, exp, negative, len),
                        (w, cell.exp, false, short.cell_bytes())
                    );
                    hits += 1;
                }
            }
            kept = whole.map(|w| w.1);
        }
        hits
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(3000))]

        /// Read from what changed since the cell before, a time cell gives exactly what
        /// reading it whole gives, and keeps the same cell: over runs of counts a random
        /// step apart (the step's digits in either word or both, carries across the
        /// point), with a byte changed in some rows (digits, signs, the exponent, the
        /// point, the byte after the cell) or the text cut.
        #[test]
        fn a_time_cell_read_from_what_changed_is_the_cell_read_whole(
            k in 8usize..=9,
            start in 0u64..10_000_000_000,
            step_place in 0u32..10,
            step_digits in 1u64..30,
            sign in "[-+]?",
            e in "[eE]",
            exp_sign in "[-+]",
            exp in 0u8..100,
            after in "[,;\t\n][-+]?[0-9]{0,12}\r?\n?",
            edits in proptest::collection::vec((0usize..24, 0usize..18, proptest::sample::select(
                b"0123456789.eE+-,x \n".to_vec())), 0..4),
            cut in proptest::option::of((0usize..24, 0usize..18)),
        ) {
            let step = step_digits * 10u64.pow(step_place);
            let short = SciShape { decimals: k }.short().unwrap();
            let top = 10u64.pow(k as u32 + 1);
            let tail = format!("{e}{exp_sign}{exp:02}{after}");
            let mut rows: Vec<Vec<u8>> = (0..24u64)
                .map(|i| start % top + i * step)
                .take_while(|&w| w < top)
                .map(|w| time_cell(&sign, w, k, &tail))
                .collect();
            for (row, at, b) in edits {
                if let Some(r) = rows.get_mut(row) {
                    *r = bent(r, Some((at, b)), None);
                }
            }
            if let Some((row, n)) = cut {
                if let Some(r) = rows.get_mut(row) {
                    r.truncate(n);
                }
            }
            read_from_what_changed(short, &rows);
            read_a_step_on(short, &rows, step as i64);
        }
    }

    /// Where consecutive times differ in one word, every cell after the first is read
    /// from what changed: steps in the first word (`%.9e` times 20 ns apart near 12 ms),
    /// in the second (20 ps apart), negative times too; where both words change (a carry
    /// across them) the cell is read whole.
    #[test]
    fn times_a_step_apart_are_read_from_what_changed() {
        let short = SciShape { decimals: 9 }.short().unwrap();
        let run = |sign: &str, first: u64, step: u64, n: u64| -> Vec<Vec<u8>> {
            (0..n)
                .map(|i| time_cell(sign, first + i * step, 9, "e-02,0.5\n"))
                .collect()
        };
        assert_eq!(
            read_from_what_changed(short, &run("", 1_200_000_000, 2_000, 400)),
            399
        );
        assert_eq!(
            read_from_what_changed(short, &run("", 1_200_000_000, 2, 400)),
            399
        );
        assert_eq!(
            read_from_what_changed(short, &run("-", 1_200_000_000, 2, 400)),
            399
        );
        // 1.200000998 to 1.200001000: both words change, once.
        assert_eq!(
            read_from_what_changed(short, &run("", 1_200_000_998, 2, 3)),
            1
        );
        // Eight decimals: the second word holds two of them.
        let short8 = SciShape { decimals: 8 }.short().unwrap();
        let rows: Vec<Vec<u8>> = (0..100u64)
            .map(|i| time_cell("", 350_000_000 + i * 100, 8, "E+00;-1\r\n"))
            .collect();
        assert_eq!(read_from_what_changed(short8, &rows), 99);
        // Worked out ahead: steps in the first word, carries through the point and a
        // run of nines; not past a lead 9 (the exponent changes there), not for steps in
        // the second word, negative times or a step other than the cells'.
        let first = |start: u64, step: u64, n: u64| -> Vec<Vec<u8>> {
            (0..n)
                .map(|i| time_cell("", start + i * step, 9, "e-02,0.5\n"))
                .collect()
        };
        assert_eq!(
            read_a_step_on(short, &first(1_200_000_000, 2_000, 400), 2_000),
            399
        );
        assert_eq!(
            read_a_step_on(short, &first(1_999_990_000, 1_000, 30), 1_000),
            29
        );
        assert_eq!(
            read_a_step_on(short, &first(9_999_990_000, 1_000, 10), 1_000),
            9
        );
        assert_eq!(
            read_a_step_on(short, &first(1_200_000_000, 3_000_000, 99), 3_000_000),
            98
        );
        let past_nine = [
            time_cell("", 9_999_999_000, 9, "e-02,1\n"),
            time_cell("", 0, 9, "e-02,1\n"),
        ];
        assert_eq!(read_a_step_on(short, &past_nine, 1_000), 0);
        assert_eq!(read_a_step_on(short, &first(1_200_000_000, 2, 40), 2), 0);
        assert_eq!(
            read_a_step_on(short, &run("-", 1_200_000_000, 2_000, 40), 2_000),
            0
        );
        assert_eq!(
            read_a_step_on(short, &first(1_200_000_000, 2_000, 40), 4_000),
            0
        );
        // A sign appearing, or going, is read whole.
        let rows = [
            time_cell("", 100, 9, "e-03,1\n"),
            time_cell("-", 102, 9, "e-03,1\n"),
            time_cell("+", 104, 9, "e-03,1\n"),
            time_cell("+", 106, 9, "e-03,1\n"),
            time_cell("", 108, 9, "e-03,1\n"),
        ];
        assert_eq!(read_from_what_changed(short, &rows), 1);
    }

    /// Only the layouts of eight and nine decimals have the short reader.
    #[test]
    fn which_layouts_have_the_short_reader() {
        let short = |s: &str| {
            SciShape::of(s.as_bytes())
                .and_then(SciShape::short)
                .is_some()
        };
        assert!(short("1.000000000e-07"));
        assert!(short("-1.00000000E+07"));
        assert!(!short("1.0000000e-07"));
        assert!(!short("1.0000000000e-07"));
    }

    #[test]
    fn the_fixed_layout_of_time_cells() {
        let shape = |s: &str| SciShape::of(s.as_bytes()).map(|s| s.decimals);
        assert_eq!(shape("1.000000000e-07"), Some(9));
        assert_eq!(shape("-2.5E+03"), Some(1));
        assert_eq!(shape("+0.12345678901234e-00"), Some(14));
        // Not this layout: the general reader takes these.
        for s in [
            "1.0e-7", "10.0e-07", "1.e-07", "1.0e-007", "1.0", "1.0x-07", "1,0e-07",
        ] {
            assert_eq!(shape(s), None, "{s}");
        }
        assert_eq!(
            shape("1.000000000000000e-07"),
            None,
            "15 decimals may pass 2^53"
        );
        let s = SciShape { decimals: 9 };
        let (d, n) = s.read(b"-1.250000000e-07,3.5\n").unwrap();
        assert_eq!(
            (d.value, d.last_place, d.decimals, n),
            (-1.25e-7, -16, 9, 16)
        );
    }

    #[test]
    fn the_last_printed_place() {
        let place = |s: &str| read_fast(s.as_bytes(), false).unwrap().last_place;
        assert_eq!(place("1.25e-6"), -8);
        assert_eq!(place("0.000123"), -6);
        assert_eq!(place("12"), 0);
        assert_eq!(place("-3.50E+02"), 0);
        assert_eq!(place("0.000000000e+00"), -9);
    }
}
