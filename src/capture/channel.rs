//! Choosing a channel by name, number or difference. (`--scale` and `--skew` are applied
//! while reading, in `blocks`.)

use super::{Capture, CaptureError, Channel};

/// Index of a channel named (case-insensitively) or numbered (from 1, time column left out).
pub(crate) fn find_channel(capture: &Capture, wanted: &str) -> Option<usize> {
    let w = wanted.trim();
    if w.is_empty() {
        return None;
    }
    capture
        .channels
        .iter()
        .position(|c| c.name.eq_ignore_ascii_case(w))
        .or_else(|| {
            w.parse::<usize>()
                .ok()
                .and_then(|n| n.checked_sub(1))
                .filter(|&k| k < capture.channels.len())
        })
}

pub(crate) fn no_such_channel(capture: &Capture, wanted: &str) -> CaptureError {
    CaptureError::NoSuchChannel {
        file: capture.source.clone(),
        wanted: wanted.to_string(),
        available: channels_listed(capture),
    }
}

/// The channels by name and number, as messages list them: `v_sw (1), i_coil (2)`.
pub(crate) fn channels_listed(capture: &Capture) -> String {
    capture
        .channels
        .iter()
        .enumerate()
        .map(|(k, c)| format!("{} ({})", c.name, k + 1))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A copy of channel `index`.
fn channel_at(capture: &Capture, index: usize) -> Result<Channel, CaptureError> {
    capture
        .channels
        .get(index)
        .cloned()
        .ok_or_else(|| no_such_channel(capture, &(index + 1).to_string()))
}

/// Picks a channel by header name (case-insensitive), by number (data channels counted
/// from 1, the time column left out), or as the difference `A-B` of two channels (names or
/// numbers; the unit is A's, and there are no ADC rails).
pub fn select_channel(capture: &Capture, wanted: &str) -> Result<Channel, CaptureError> {
    if let Some(k) = find_channel(capture, wanted) {
        return channel_at(capture, k);
    }
    let w = wanted.trim();
    for (pos, _) in w.match_indices('-') {
        let (a, b) = (&w[..pos], &w[pos + 1..]);
        if let (Some(ia), Some(ib)) = (find_channel(capture, a), find_channel(capture, b)) {
            let ca = channel_at(capture, ia)?;
            let cb = channel_at(capture, ib)?;
            let samples = ca
                .samples
                .iter()
                .zip(&cb.samples)
                .map(|(x, y)| x - y)
                .collect();
            return Ok(Channel {
                name: format!("{}-{}", ca.name, cb.name),
                unit: ca.unit,
                samples,
                adc: None,
            });
        }
    }
    Err(no_such_channel(capture, wanted))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::Format;
    use std::path::PathBuf;

    fn cap() -> Capture {
        let ch = |name: &str, unit: &str, s: Vec<f64>| Channel {
            name: name.into(),
            unit: unit.into(),
            samples: s,
            adc: None,
        };
        Capture {
            source: PathBuf::from("bench/run1.csv"),
            format: Format::Csv,
            sample_interval_s: 1e-9,
            t0_s: 0.0,
            channels: vec![
                ch("v_drain", "V", vec![0.0, 10.0, 20.0, 30.0]),
                ch("v_src", "V", vec![1.0, 1.0, 2.0, 2.0]),
                ch("i_coil", "A", vec![0.5, 0.5, 0.5, 0.5]),
            ],
            metadata: vec![],
            notes: vec![],
            warnings: vec![],
        }
    }

    #[test]
    fn by_name_number_and_difference() {
        let c = cap();
        assert_eq!(select_channel(&c, "V_DRAIN").unwrap().name, "v_drain");
        assert_eq!(select_channel(&c, "3").unwrap().unit, "A");
        let d = select_channel(&c, "v_drain-v_src").unwrap();
        assert_eq!(d.samples, vec![-1.0, 9.0, 18.0, 28.0]);
        assert_eq!(d.name, "v_drain-v_src");
        let d = select_channel(&c, "1-2").unwrap();
        assert_eq!(d.unit, "V");
        assert_eq!(d.samples[3], 28.0);
    }

    #[test]
    fn unknown_channel_lists_the_ones_there() {
        let e = select_channel(&cap(), "CH9").unwrap_err().to_string();
        assert_eq!(
            e,
            "bench/run1.csv: no channel 'CH9'; the channels are: v_drain (1), v_src (2), i_coil (3)"
        );
    }
}
