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

/// A preamble line split as [`split_meta`] does. A file of one value column has no data
/// delimiter, so there a line that would stay whole is split at its first comma or
/// semicolon, as it would be above several comma- or semicolon-separated columns
/// (`sample interval [s],1e-7` above a single column).
fn split_meta_key(text: &str, delim: Delim) -> (String, String) {
    let whole = split_meta(text, delim);
    if !matches!(delim, Delim::None) || whole.0 != "text" {
        return whole;
    }
    match text.bytes().find(|&b| b == b',' || b == b';') {
        Some(b) => split_meta(text, Delim::Byte(b)),
        None => whole,
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
        let (key, value) = split_meta_key(&l.text, delim);
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

    fn preamble_of(text: &str, delim: Delim) -> (Preamble, Capture) {
        let lines: Vec<SniffLine> = text
            .lines()
            .enumerate()
            .map(|(k, l)| SniffLine {
                no: k + 1,
                offset: 0,
                text: l.into(),
            })
            .collect();
        let mut cap = Capture {
            source: "p.csv".into(),
            format: crate::capture::Format::Csv,
            sample_interval_s: 0.0,
            t0_s: 0.0,
            channels: Vec::new(),
            metadata: Vec::new(),
            notes: Vec::new(),
            warnings: Vec::new(),
        };
        let p = read_preamble(&lines, delim, false, &mut cap);
        (p, cap)
    }

    #[test]
    fn keys_with_a_unit_read_above_a_single_column() {
        // What `kickscan simulate --format csv-values` writes above its one value column.
        let (p, cap) = preamble_of(
            "source,kickscan simulate\nsample interval [s],1e-7\nrecord length,3001\nstart time [s],-0.0001\nclamp,none",
            Delim::None,
        );
        assert_eq!(p.interval_s, Some(1e-7));
        assert_eq!(p.record_length, Some(3001));
        assert_eq!(p.t0_s, Some(-1e-4));
        assert!(cap.warnings.is_empty(), "{:?}", cap.warnings);
        assert!(cap
            .metadata
            .contains(&("record length".to_string(), "3001".to_string())));
        assert!(cap
            .metadata
            .contains(&("clamp".to_string(), "none".to_string())));
        // The unit in brackets or parentheses scales the bare number: 0.25 us, -40 ms.
        let (p, _) = preamble_of(
            "sample interval (us);0.25\nstart time [ms];-40\nrecord length (samples);8",
            Delim::None,
        );
        assert!((p.interval_s.unwrap() - 0.25e-6).abs() < 1e-20);
        assert!((p.t0_s.unwrap() - -40e-3).abs() < 1e-15);
        assert_eq!(p.record_length, Some(8));
        // Text with no separator stays whole; the first of comma and semicolon splits.
        let (p, cap) = preamble_of("bench 3 valve V3\nrig;A,B", Delim::None);
        assert!(p.interval_s.is_none());
        assert_eq!(
            cap.metadata,
            vec![
                ("text".to_string(), "bench 3 valve V3".to_string()),
                ("rig".to_string(), "A,B".to_string())
            ]
        );
    }
}
