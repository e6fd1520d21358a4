//! Free-text lines before the header: what they say about the capture.

use super::text::SniffLine;
use crate::capture::cells::Delim;
use crate::capture::columns::{self, MetaKey};
use crate::capture::Capture;

/// A metadata line split into key and value (`Sample Interval,2e-9`, `dt: 2 ns`,
/// `# units = V`). Lines with no separator are kept whole as free text.
pub(super) fn split_meta(text: &str, delim: Delim) -> (String, String) {
    let t = text
        .trim()
        .trim_start_matches(['#', '%', ';', '!', '*'])
        .trim_start_matches("//")
        .trim();
    let delim_char = match delim {
        Delim::Byte(b) => Some(b as char),
        _ => None,
    };
    let cut = t
        .char_indices()
        .find(|&(_, c)| c == ':' || c == '=' || c == '\t' || Some(c) == delim_char);
    match cut {
        Some((k, c)) => {
            let key = t[..k].trim().trim_matches('"').trim();
            let rest = &t[k + c.len_utf8()..];
            let value: String = rest
                .split(|ch| Some(ch) == delim_char || ch == '\t')
                .map(|s| s.trim().trim_matches('"').trim())
                .filter(|s| !s.is_empty())
                .collect::<Vec<_>>()
                .join(" ");
            (key.to_string(), value)
        }
        None => ("text".to_string(), t.to_string()),
    }
}

/// What the preamble said.
#[derive(Default)]
pub(super) struct Preamble {
    pub(super) interval_s: Option<f64>,
    pub(super) t0_s: Option<f64>,
    pub(super) record_length: Option<u64>,
    /// One unit for every value column, or one per column (`Units,V,mV,A`).
    pub(super) units: Vec<String>,
    pub(super) time_unit_factor: Option<f64>,
}

pub(super) fn read_preamble(
    lines: &[SniffLine],
    delim: Delim,
    comma: bool,
    cap: &mut Capture,
) -> Preamble {
    let mut p = Preamble::default();
    for l in lines {
        if l.text.trim().is_empty() {
            continue;
        }
        let (key, value) = split_meta(&l.text, delim);
        if key.is_empty() && value.is_empty() {
            continue;
        }
        let line = l.no;
        match columns::classify_key(&key) {
            MetaKey::SampleInterval => match columns::parse_time_value(&key, &value, comma) {
                Some(x) if x > 0.0 => {
                    p.interval_s = Some(x);
                    cap.notes
                        .push(format!("sample interval {x:e} s stated on line {line}"));
                }
                _ => cap.warnings.push(format!(
                    "line {line}: '{key}' = '{value}' is not a usable sample interval; ignored"
                )),
            },
            MetaKey::SampleRate => match columns::parse_rate_value(&value, comma) {
                Some(hz) => {
                    p.interval_s = Some(1.0 / hz);
                    cap.notes.push(format!(
                        "sample rate {hz:e} Hz stated on line {line}: interval {:e} s",
                        crate::capture::sig(1.0 / hz)
                    ));
                }
                None => cap.warnings.push(format!(
                    "line {line}: '{key}' = '{value}' is not a usable sample rate; ignored"
                )),
            },
            MetaKey::RecordLength => {
                if let Some(n) = columns::parse_count_value(&value) {
                    p.record_length = Some(n);
                    cap.notes
                        .push(format!("record length {n} stated on line {line}"));
                }
            }
            MetaKey::Units => {
                let units: Vec<String> = value
                    .split_whitespace()
                    .map(columns::bare_unit)
                    .filter(|u| !u.is_empty())
                    .collect();
                if !units.is_empty() {
                    cap.notes.push(format!(
                        "value unit {} stated on line {line}",
                        units.join(" ")
                    ));
                    p.units = units;
                }
            }
            MetaKey::TimeUnits => {
                if let Some(f) = columns::time_unit_factor(&columns::bare_unit(&value)) {
                    p.time_unit_factor = Some(f);
                    cap.notes.push(format!(
                        "time unit {} stated on line {line}",
                        columns::bare_unit(&value)
                    ));
                }
            }
            MetaKey::ProbeFactor => {
                if let Some(f) = columns::parse_probe_value(&value, comma) {
                    cap.notes.push(format!(
                        "probe factor {f} stated on line {line}; values are taken as already scaled by it (apply it with --scale NAME={f} if they are not)"
                    ));
                }
            }
            MetaKey::StartTime => {
                if let Some(t) = columns::parse_time_value(&key, &value, comma) {
                    p.t0_s = Some(t);
                    cap.notes
                        .push(format!("first sample at {t:e} s stated on line {line}"));
                }
            }
            MetaKey::Other => {}
        }
        cap.metadata.push((key, value));
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn preamble_lines_split_into_key_and_value() {
        let d = Delim::Byte(b',');
        assert_eq!(
            split_meta("Sample Interval,2e-9,s", d),
            ("Sample Interval".to_string(), "2e-9 s".to_string())
        );
        assert_eq!(
            split_meta("# Record Length: 10000", d),
            ("Record Length".to_string(), "10000".to_string())
        );
        assert_eq!(
            split_meta("units = mV", Delim::Byte(b';')),
            ("units".to_string(), "mV".to_string())
        );
        assert_eq!(
            split_meta("valve V3 bench", d),
            ("text".to_string(), "valve V3 bench".to_string())
        );
    }
}
