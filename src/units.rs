//! Numbers with SI prefixes and units, as engineers type them: `50m`, `220p`, `4.7uF`,
//! `24V`, `2ns`, `1e6`, `10 kHz`.

use thiserror::Error;

/// Why a value could not be read.
#[derive(Debug, Error, PartialEq)]
pub enum UnitError {
    #[error("'{text}' is not a number (expected e.g. 24, 4.7u, 220pF, 2ns)")]
    NotANumber { text: String },
    #[error("'{text}': unit '{found}' does not fit here (expected {expected})")]
    WrongUnit {
        text: String,
        found: String,
        expected: String,
    },
    #[error("'{text}' is not finite")]
    NotFinite { text: String },
}

/// Multiplier of an SI prefix character.
fn prefix_factor(c: char) -> Option<f64> {
    Some(match c {
        'f' => 1e-15,
        'p' => 1e-12,
        'n' => 1e-9,
        'u' | 'µ' | 'μ' => 1e-6,
        'm' => 1e-3,
        'k' | 'K' => 1e3,
        'M' => 1e6,
        'G' => 1e9,
        'T' => 1e12,
        _ => return None,
    })
}

/// Parses a value with an optional SI prefix and an optional unit.
///
/// `unit` is the unit symbol the option expects (`"V"`, `"s"`, `"F"`, `"H"`, `"A"`, `"J"`,
/// `"Hz"`, `"ohm"`), or `None` for a plain number; the unit may always be left out. A lone
/// `m` is milli (`50m` = 0.05), never metres. `M` is mega.
pub fn parse_si(text: &str, unit: Option<&str>) -> Result<f64, UnitError> {
    let s = text.trim();
    let not_number = || UnitError::NotANumber {
        text: text.to_string(),
    };
    // Longest numeric prefix that parses as f64 (handles 1e-6, .5, -3).
    let bytes = s.as_bytes();
    let mut end = 0;
    let mut seen_digit = false;
    let mut i = 0;
    if i < bytes.len() && (bytes[i] == b'+' || bytes[i] == b'-') {
        i += 1;
    }
    while i < bytes.len() && (bytes[i].is_ascii_digit() || bytes[i] == b'.') {
        seen_digit |= bytes[i].is_ascii_digit();
        i += 1;
        end = i;
    }
    if !seen_digit {
        return Err(not_number());
    }
    // Exponent only when followed by digits (so "5e" is not swallowed; "2e-9" is).
    if i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        let digits_start = j;
        while j < bytes.len() && bytes[j].is_ascii_digit() {
            j += 1;
        }
        if j > digits_start {
            end = j;
        }
    }
    let number: f64 = s[..end].parse().map_err(|_| not_number())?;
    let rest = s[end..].trim();
    let (factor, tail) = split_prefix(rest, unit);
    let tail = tail.trim();
    if !tail.is_empty() {
        let ok = match unit {
            Some(u) => unit_matches(tail, u),
            None => false,
        };
        if !ok {
            return Err(UnitError::WrongUnit {
                text: text.to_string(),
                found: tail.to_string(),
                expected: match unit {
                    Some(u) => format!("a value in {u}, with an optional SI prefix"),
                    None => "a plain number with an optional SI prefix".to_string(),
                },
            });
        }
    }
    let v = number * factor;
    if !v.is_finite() {
        return Err(UnitError::NotFinite {
            text: text.to_string(),
        });
    }
    Ok(v)
}

/// Splits an optional prefix from the unit text. A string that is exactly the unit
/// (`m` could be milli, but `ms` with unit `s` is milli-seconds; `Hz` is not a prefix `H`).
fn split_prefix<'a>(rest: &'a str, unit: Option<&str>) -> (f64, &'a str) {
    if rest.is_empty() {
        return (1.0, rest);
    }
    if let Some(u) = unit {
        if unit_matches(rest, u) {
            return (1.0, rest);
        }
    }
    let mut chars = rest.chars();
    let first = chars.next().unwrap_or(' ');
    match prefix_factor(first) {
        Some(f) => (f, chars.as_str()),
        None => (1.0, rest),
    }
}

fn unit_matches(text: &str, unit: &str) -> bool {
    let t = text.trim();
    if t.eq_ignore_ascii_case(unit) {
        return true;
    }
    match unit {
        "ohm" => matches!(t, "Ω" | "R" | "ohms" | "Ohm"),
        "s" => matches!(t, "sec" | "S"),
        "Hz" => matches!(t, "hz" | "HZ"),
        _ => false,
    }
}

// Engineering notation: the other direction, for everything kickscan prints. Exponents are
// multiples of three written as an SI prefix, three significant figures by default, ASCII `u`
// for micro so terminals and CSV viewers never mangle it.

/// SI prefixes from femto to tera, indexed by `exponent / 3 + 5`.
const PREFIXES: [&str; 10] = ["f", "p", "n", "u", "m", "", "k", "M", "G", "T"];
const MIN_EXP3: i32 = -15;
const MAX_EXP3: i32 = 12;

/// Shown where a value is absent (null) or not finite.
pub const MISSING: &str = "-";

pub(crate) fn prefix_for(exp3: i32) -> &'static str {
    let k = (exp3 - MIN_EXP3) / 3;
    usize::try_from(k)
        .ok()
        .and_then(|k| PREFIXES.get(k))
        .copied()
        .unwrap_or("")
}

/// Engineering exponent (a multiple of 3, clamped to the prefix table) for `|v|`.
pub(crate) fn exp3_of(abs: f64) -> i32 {
    if abs == 0.0 || !abs.is_finite() {
        return 0;
    }
    let e = abs.log10().floor() as i32;
    (e.div_euclid(3) * 3).clamp(MIN_EXP3, MAX_EXP3)
}

/// `m` rounded to `sig` significant figures.
fn round_sig(m: f64, sig: usize) -> f64 {
    if m == 0.0 || !m.is_finite() {
        return m;
    }
    let scale = 10f64.powi(sig as i32 - 1 - m.abs().log10().floor() as i32);
    (m * scale).round() / scale
}

/// Mantissa text with `sig` significant figures (trailing zeros kept: they state precision).
fn mantissa_text(m: f64, sig: usize) -> String {
    let r = round_sig(m, sig);
    let lead = if r == 0.0 {
        0
    } else {
        r.abs().log10().floor() as i64
    };
    let decimals = (sig as i64 - 1 - lead).max(0) as usize;
    format!("{r:.decimals$}")
}

/// `value` in engineering notation with `sig` significant figures and `unit`:
/// `eng_sig(3.52e-5, "s", 3)` is `"35.2 us"`. Not-finite values give [`MISSING`].
pub fn eng_sig(value: f64, unit: &str, sig: usize) -> String {
    if !value.is_finite() {
        return MISSING.to_string();
    }
    let sig = sig.clamp(1, 15);
    if value == 0.0 {
        return join(&mantissa_text(0.0, sig), "", unit);
    }
    // Just past the prefix table the mantissa grows (`5000 THz`, `0.00200 fF`); further out
    // it would run to hundreds of digits (a wild sample of 1e300 V): scientific notation.
    let e = value.abs().log10().floor() as i32;
    if !(MIN_EXP3 - 3..MAX_EXP3 + 6).contains(&e) {
        return join(&format!("{:.*e}", sig - 1, value), "", unit);
    }
    let mut exp3 = exp3_of(value.abs());
    let mut m = value / 10f64.powi(exp3);
    // Rounding may carry the mantissa to 1000 (999.7 -> "1000"); move to the next prefix.
    if round_sig(m.abs(), sig) >= 1000.0 && exp3 < MAX_EXP3 {
        exp3 += 3;
        m = value / 10f64.powi(exp3);
    }
    join(&mantissa_text(m, sig), prefix_for(exp3), unit)
}

fn join(mantissa: &str, prefix: &str, unit: &str) -> String {
    if prefix.is_empty() && unit.is_empty() {
        mantissa.to_string()
    } else {
        format!("{mantissa} {prefix}{unit}")
    }
}

/// Three significant figures: `eng(412.0, "V")` is `"412 V"`, `eng(1.24e6, "Hz")` is
/// `"1.24 MHz"`.
pub fn eng(value: f64, unit: &str) -> String {
    eng_sig(value, unit, 3)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs().max(1e-30)
    }

    /// Far past tera and below femto the mantissa would be hundreds of digits or all zeros.
    #[test]
    fn beyond_the_prefixes_is_scientific() {
        assert_eq!(eng(6.11e300, "V"), "6.11e300 V");
        assert_eq!(eng(-2.5e-21, "F"), "-2.50e-21 F");
        assert_eq!(eng(5e17, "V"), "500000 TV");
        assert_eq!(eng(2e-18, "F"), "0.00200 fF");
    }

    #[test]
    fn prefixes_and_units() {
        assert!(close(parse_si("50m", None).unwrap(), 0.05));
        assert!(close(parse_si("220p", Some("F")).unwrap(), 220e-12));
        assert!(close(parse_si("4.7uF", Some("F")).unwrap(), 4.7e-6));
        assert!(close(parse_si("24V", Some("V")).unwrap(), 24.0));
        assert!(close(parse_si("2ns", Some("s")).unwrap(), 2e-9));
        assert!(close(parse_si("1e6", None).unwrap(), 1e6));
        assert!(close(parse_si("10 kHz", Some("Hz")).unwrap(), 1e4));
        assert!(close(parse_si("2e-9s", Some("s")).unwrap(), 2e-9));
        assert!(close(parse_si("1M", None).unwrap(), 1e6));
        assert!(close(parse_si("200mH", Some("H")).unwrap(), 0.2));
        assert!(close(parse_si("-3", None).unwrap(), -3.0));
        assert!(close(parse_si("5ms", Some("s")).unwrap(), 5e-3));
        assert!(close(parse_si("1.5s", Some("s")).unwrap(), 1.5));
    }

    #[test]
    fn nonsense_is_refused_with_the_text() {
        let e = parse_si("5 parsecs", Some("V")).unwrap_err();
        assert!(e.to_string().contains("parsecs"), "{e}");
        assert!(matches!(
            parse_si("abc", None),
            Err(UnitError::NotANumber { .. })
        ));
        assert!(matches!(
            parse_si("", None),
            Err(UnitError::NotANumber { .. })
        ));
        assert!(matches!(
            parse_si("3 V", Some("s")),
            Err(UnitError::WrongUnit { .. })
        ));
        assert!(matches!(
            parse_si("1e400", None),
            Err(UnitError::NotFinite { .. })
        ));
    }
}
