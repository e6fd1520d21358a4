//! Meaning of header cells and preamble lines: column names with their units
//! (`t [us]`, `Time (ms)`, `time_s`, `Time/s`, `CH2 (mV)`), and the metadata keys people
//! write before a header (`Sample Interval,2e-9`, `Record Length: 10000`, `Units,V`).

use crate::units::parse_si;

/// Splits a header cell into its name and the unit it carries, if any.
///
/// Accepted spellings: a bracketed unit at the end (`v_sw [V]`, `i_coil (A)`), the
/// quantity/unit notation of ISO 80000-1 (`t/us`), and, for time columns only, a unit
/// suffix after an underscore (`time_s`, `t_us`).
pub(crate) fn split_name_unit(cell: &str) -> (String, Option<String>) {
    let cell = cell.trim().trim_matches('"').trim();
    for (open, close) in [('[', ']'), ('(', ')'), ('{', '}')] {
        if let Some(stripped) = cell.strip_suffix(close) {
            if let Some(k) = stripped.rfind(open) {
                let name = stripped[..k].trim();
                let unit = stripped[k + open.len_utf8()..].trim();
                if !name.is_empty() && !unit.is_empty() {
                    return (name.to_string(), Some(unit.to_string()));
                }
            }
        }
    }
    if let Some((name, unit)) = cell.rsplit_once('/') {
        let (name, unit) = (name.trim(), unit.trim());
        if !name.is_empty() && (time_unit_factor(unit).is_some() || is_value_unit(unit)) {
            return (name.to_string(), Some(unit.to_string()));
        }
    }
    if let Some((name, unit)) = cell.rsplit_once('_') {
        if is_time_name(name) && time_unit_factor(unit).is_some() {
            return (name.to_string(), Some(unit.to_string()));
        }
    }
    (cell.to_string(), None)
}

/// Seconds per unit of a time unit written in a header or a preamble.
pub(crate) fn time_unit_factor(unit: &str) -> Option<f64> {
    Some(match unit.trim() {
        "s" | "S" | "sec" | "secs" | "second" | "seconds" | "Sec" | "Seconds" => 1.0,
        "ms" | "msec" => 1e-3,
        "us" | "µs" | "μs" | "usec" => 1e-6,
        "ns" | "nsec" => 1e-9,
        "ps" => 1e-12,
        _ => return None,
    })
}

fn is_value_unit(unit: &str) -> bool {
    value_unit(unit).1 != 1.0 || matches!(unit.trim(), "V" | "A" | "W")
}

/// The base unit and the factor to it of a value column's unit (`mV` -> (`V`, 1e-3)).
/// Units kickscan does not scale are kept as written with factor 1.
pub(crate) fn value_unit(unit: &str) -> (String, f64) {
    let u = unit.trim();
    let (base, factor) = match u {
        "V" | "v" | "Volt" | "Volts" | "volt" | "volts" => ("V", 1.0),
        "mV" => ("V", 1e-3),
        "uV" | "µV" | "μV" => ("V", 1e-6),
        "kV" => ("V", 1e3),
        "A" | "Amp" | "Amps" | "amp" | "amps" | "Ampere" => ("A", 1.0),
        "mA" => ("A", 1e-3),
        "uA" | "µA" | "μA" => ("A", 1e-6),
        "nA" => ("A", 1e-9),
        "kA" => ("A", 1e3),
        "W" => ("W", 1.0),
        "mW" => ("W", 1e-3),
        "kW" => ("W", 1e3),
        other => return (other.to_string(), 1.0),
    };
    (base.to_string(), factor)
}

/// Whether a header cell is a unit on its own (a second header row of units).
pub(crate) fn is_unit_cell(cell: &str) -> bool {
    let c = cell
        .trim()
        .trim_matches('"')
        .trim_start_matches(['(', '['])
        .trim_end_matches([')', ']'])
        .trim();
    !c.is_empty() && (time_unit_factor(c).is_some() || is_value_unit(c))
}

/// Strips brackets a unit row may carry (`(V)` -> `V`).
pub(crate) fn bare_unit(cell: &str) -> String {
    cell.trim()
        .trim_matches('"')
        .trim_start_matches(['(', '['])
        .trim_end_matches([')', ']'])
        .trim()
        .to_string()
}

fn normalize(key: &str) -> String {
    key.chars()
        .filter(|c| c.is_alphanumeric())
        .flat_map(|c| c.to_lowercase())
        .collect()
}

/// Whether a column name says it holds time.
pub(crate) fn is_time_name(name: &str) -> bool {
    matches!(
        normalize(name).as_str(),
        "t" | "time" | "times" | "sec" | "secs" | "second" | "seconds" | "timestamp" | "ts"
    )
}

/// Whether a column name says it only counts samples.
pub(crate) fn is_index_name(name: &str) -> bool {
    matches!(
        normalize(name).as_str(),
        "index" | "idx" | "n" | "no" | "sample" | "samplenumber" | "point" | "pointnumber"
    )
}

/// Unit a channel most likely has when nothing states it: currents are named for it.
pub(crate) fn unit_from_name(name: &str) -> Option<&'static str> {
    let n = name.trim().to_ascii_lowercase();
    let current = n.starts_with("i_")
        || n.starts_with("i(")
        || n == "i"
        || n.starts_with("current")
        || n.starts_with("icoil")
        || n.contains("_current");
    current.then_some("A")
}

/// What a preamble key means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum MetaKey {
    SampleInterval,
    SampleRate,
    RecordLength,
    Units,
    TimeUnits,
    ProbeFactor,
    StartTime,
    Other,
}

/// Classifies a preamble key, ignoring case, spaces, punctuation and a bracketed unit.
pub(crate) fn classify_key(key: &str) -> MetaKey {
    let (name, _) = split_name_unit(key);
    match normalize(&name).as_str() {
        "sampleinterval" | "samplinginterval" | "interval" | "dt" | "timestep" | "deltat"
        | "sampleperiod" | "samplingperiod" | "timeinterval" | "timeperpoint"
        | "timeresolution" | "secondsperpoint" | "sampletime" | "xstep" => MetaKey::SampleInterval,
        "samplerate" | "samplingrate" | "samplingfrequency" | "samplefrequency" | "fs" | "rate"
        | "samplespersecond" => MetaKey::SampleRate,
        "recordlength" | "length" | "points" | "npoints" | "numberofpoints" | "samples"
        | "nsamples" | "numberofsamples" | "pointcount" | "samplecount" | "rows" => {
            MetaKey::RecordLength
        }
        "units" | "unit" | "verticalunits" | "verticalunit" | "yunit" | "yunits" | "valueunit"
        | "valueunits" => MetaKey::Units,
        "timeunit" | "timeunits" | "horizontalunit" | "horizontalunits" | "xunit" | "xunits" => {
            MetaKey::TimeUnits
        }
        "probe" | "probefactor" | "probeattenuation" | "attenuation" | "proberatio"
        | "probegain" => MetaKey::ProbeFactor,
        "t0" | "starttime" | "timeoffset" | "firsttime" | "tstart" => MetaKey::StartTime,
        _ => MetaKey::Other,
    }
}

fn point_decimal(text: &str, decimal_comma: bool) -> String {
    if decimal_comma {
        text.replace(',', ".")
    } else {
        text.to_string()
    }
}

/// A time value from a preamble: `2e-9`, `2 ns`, `2,5e-9` (decimal comma), or a bare
/// number in the unit the key carries (`Sample Interval (ns),2`).
pub(crate) fn parse_time_value(key: &str, value: &str, decimal_comma: bool) -> Option<f64> {
    let v = point_decimal(value, decimal_comma);
    let key_factor = split_name_unit(key)
        .1
        .and_then(|u| time_unit_factor(&u))
        .unwrap_or(1.0);
    let plain: Option<f64> = v.trim().parse().ok();
    let x = match plain {
        Some(x) => x * key_factor,
        None => parse_si(&v, Some("s")).ok()?,
    };
    x.is_finite().then_some(x)
}

/// A rate from a preamble: `1e9`, `1 GHz`, `500 MS/s`, `250MSa/s`.
pub(crate) fn parse_rate_value(value: &str, decimal_comma: bool) -> Option<f64> {
    let mut v = point_decimal(value, decimal_comma);
    for suffix in [
        "Sa/s",
        "S/s",
        "sa/s",
        "samples/s",
        "Samples/s",
        "sps",
        "SPS",
    ] {
        if let Some(stripped) = v.trim_end().strip_suffix(suffix) {
            v = format!("{stripped}Hz");
            break;
        }
    }
    let x = parse_si(&v, Some("Hz")).ok()?;
    (x.is_finite() && x > 0.0).then_some(x)
}

/// A count from a preamble (`10000`, `10000 points`, `1e4`).
pub(crate) fn parse_count_value(value: &str) -> Option<u64> {
    let first = value.split_whitespace().next()?;
    if let Ok(n) = first.parse::<u64>() {
        return Some(n);
    }
    let x: f64 = first.parse().ok()?;
    (x.is_finite() && x >= 0.0 && x.fract() == 0.0 && x < 1e18).then_some(x as u64)
}

/// A probe factor as people write it: `10`, `10x`, `x10`, `10:1`, `10X`.
pub(crate) fn parse_probe_value(value: &str, decimal_comma: bool) -> Option<f64> {
    let v = point_decimal(value, decimal_comma);
    let t = v
        .trim()
        .trim_start_matches(['x', 'X'])
        .trim_end_matches(['x', 'X'])
        .trim();
    let t = t.strip_suffix(":1").unwrap_or(t).trim();
    let x: f64 = t.parse().ok()?;
    (x.is_finite() && x > 0.0).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_units_are_split_off() {
        assert_eq!(
            split_name_unit("t [us]"),
            ("t".to_string(), Some("us".to_string()))
        );
        assert_eq!(
            split_name_unit("Time (ms)"),
            ("Time".to_string(), Some("ms".to_string()))
        );
        assert_eq!(
            split_name_unit("time_s"),
            ("time".to_string(), Some("s".to_string()))
        );
        assert_eq!(
            split_name_unit("t/ns"),
            ("t".to_string(), Some("ns".to_string()))
        );
        // An underscore in a value column's name is part of the name.
        assert_eq!(split_name_unit("v_sw"), ("v_sw".to_string(), None));
        assert_eq!(split_name_unit("CH1"), ("CH1".to_string(), None));
    }

    #[test]
    fn value_units_scale_to_base_units() {
        assert_eq!(value_unit("mV"), ("V".to_string(), 1e-3));
        assert_eq!(value_unit("kV"), ("V".to_string(), 1e3));
        assert_eq!(value_unit("mA"), ("A".to_string(), 1e-3));
        assert_eq!(value_unit("degC"), ("degC".to_string(), 1.0));
    }

    #[test]
    fn preamble_keys_and_values() {
        assert_eq!(classify_key("Sample Interval"), MetaKey::SampleInterval);
        assert_eq!(classify_key("sample-rate"), MetaKey::SampleRate);
        assert_eq!(classify_key("Record Length"), MetaKey::RecordLength);
        assert_eq!(classify_key("# of points"), MetaKey::Other);
        assert_eq!(classify_key("Units"), MetaKey::Units);
        assert_eq!(classify_key("Probe factor"), MetaKey::ProbeFactor);
        assert_eq!(parse_time_value("dt", "2e-9", false), Some(2e-9));
        assert_eq!(parse_time_value("dt", "2 ns", false), Some(2e-9));
        assert_eq!(parse_time_value("dt", "2,5e-9", true), Some(2.5e-9));
        assert_eq!(parse_time_value("Interval (ns)", "2", false), Some(2e-9));
        assert_eq!(parse_rate_value("500 MS/s", false), Some(500e6));
        assert_eq!(parse_rate_value("1 GHz", false), Some(1e9));
        assert_eq!(parse_count_value("10000 points"), Some(10000));
        assert_eq!(parse_probe_value("10:1", false), Some(10.0));
        assert_eq!(parse_probe_value("x10", false), Some(10.0));
    }
}
