//! Choosing a channel by name, number or difference, and the per-channel corrections
//! (`--scale`, `--skew`).

use super::{Capture, CaptureError, Channel, ReadOptions};

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
        available: capture
            .channels
            .iter()
            .enumerate()
            .map(|(k, c)| format!("{} ({})", c.name, k + 1))
            .collect::<Vec<_>>()
            .join(", "),
    }
}

/// Shifts samples in time by linear interpolation: `out[k] = x(k + shift)` in samples,
/// holding the first and last values beyond the ends.
pub(crate) fn shift_samples(x: &[f64], shift: f64) -> Vec<f64> {
    let n = x.len();
    if n == 0 || shift == 0.0 {
        return x.to_vec();
    }
    let last = (n - 1) as f64;
    (0..n)
        .map(|k| {
            let pos = (k as f64 + shift).clamp(0.0, last);
            let i = pos.floor();
            let frac = pos - i;
            let i = i as usize;
            let a = x.get(i).copied().unwrap_or(0.0);
            let b = x.get(i + 1).copied().unwrap_or(a);
            a + (b - a) * frac
        })
        .collect()
}

/// The skew given for a channel (`--skew NAME=S`, by name or number), summed if repeated.
fn skew_for(capture: &Capture, index: usize, opts: &ReadOptions) -> Result<f64, CaptureError> {
    let mut total = 0.0;
    for (name, s) in &opts.skew {
        if find_channel(capture, name) == Some(index) {
            if !s.is_finite() {
                return Err(CaptureError::Invalid {
                    file: capture.source.clone(),
                    message: format!("--skew {name}={s}: expected a finite time"),
                });
            }
            total += s;
        }
    }
    Ok(total)
}

fn skewed(capture: &Capture, index: usize, opts: &ReadOptions) -> Result<Channel, CaptureError> {
    let ch = capture
        .channels
        .get(index)
        .ok_or_else(|| no_such_channel(capture, &(index + 1).to_string()))?;
    let skew_s = skew_for(capture, index, opts)?;
    if skew_s == 0.0 || capture.sample_interval_s <= 0.0 {
        return Ok(ch.clone());
    }
    Ok(Channel {
        name: ch.name.clone(),
        unit: ch.unit.clone(),
        samples: shift_samples(&ch.samples, skew_s / capture.sample_interval_s),
        adc: ch.adc,
    })
}

/// Picks a channel by header name (case-insensitive), by number (data channels counted
/// from 1, the time column left out), or as the difference `A-B` of two channels (names or
/// numbers; the unit is A's, and there are no ADC rails), applying any `--skew` given.
///
/// Skew convention: `--skew NAME=S` with S > 0 says the channel's samples are late by S
/// (its probe and cable delay more than the others'), so they are moved earlier by S: the
/// corrected value at time t is the recorded value at t + S, linearly interpolated; the
/// first and last samples are held beyond the ends of the record.
pub fn select_channel(
    capture: &Capture,
    wanted: &str,
    opts: &ReadOptions,
) -> Result<Channel, CaptureError> {
    if let Some(k) = find_channel(capture, wanted) {
        return skewed(capture, k, opts);
    }
    let w = wanted.trim();
    for (pos, _) in w.match_indices('-') {
        let (a, b) = (&w[..pos], &w[pos + 1..]);
        if let (Some(ia), Some(ib)) = (find_channel(capture, a), find_channel(capture, b)) {
            let ca = skewed(capture, ia, opts)?;
            let cb = skewed(capture, ib, opts)?;
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
        let o = ReadOptions::default();
        assert_eq!(select_channel(&c, "V_DRAIN", &o).unwrap().name, "v_drain");
        assert_eq!(select_channel(&c, "3", &o).unwrap().unit, "A");
        let d = select_channel(&c, "v_drain-v_src", &o).unwrap();
        assert_eq!(d.samples, vec![-1.0, 9.0, 18.0, 28.0]);
        assert_eq!(d.name, "v_drain-v_src");
        let d = select_channel(&c, "1-2", &o).unwrap();
        assert_eq!(d.unit, "V");
        assert_eq!(d.samples[3], 28.0);
    }

    #[test]
    fn unknown_channel_lists_the_ones_there() {
        let e = select_channel(&cap(), "CH9", &ReadOptions::default())
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "bench/run1.csv: no channel 'CH9'; the channels are: v_drain (1), v_src (2), i_coil (3)"
        );
    }

    #[test]
    fn positive_skew_moves_samples_earlier() {
        // Late by half a sample: the value at t is the recorded value at t + 0.5 dt.
        let o = ReadOptions {
            skew: vec![("v_drain".into(), 0.5e-9)],
            ..Default::default()
        };
        let s = select_channel(&cap(), "v_drain", &o).unwrap();
        assert_eq!(s.samples, vec![5.0, 15.0, 25.0, 30.0]);
        let o = ReadOptions {
            skew: vec![("1".into(), -1e-9)],
            ..Default::default()
        };
        let s = select_channel(&cap(), "v_drain", &o).unwrap();
        assert_eq!(s.samples, vec![0.0, 0.0, 10.0, 20.0]);
    }
}
