//! `--skew NAME=S`: a channel's samples moved in time as they stream, so a probe's delay is
//! corrected in any capture length without holding the record.
//!
//! Convention: S > 0 says the channel's samples are late by S (its probe and cable delay
//! more than the others'), so they are moved earlier by S: the corrected value at sample
//! `k` is the recorded value at `k + shift` (`shift = S / dt`, in samples), linearly
//! interpolated between its two neighbours; the first and last samples are held beyond
//! the ends of the record. Applied while reading, after `--scale`, to every channel named,
//! before any channel is picked or differenced.

use super::channel::{channels_listed, find_channel};
use super::{sig, Capture, CaptureError, ReadOptions};

/// Largest shift accepted, in samples: a stage holds up to about twice that many samples
/// (and the channels beside a late one wait as long), so the bound keeps memory flat (at
/// most about 16 MiB per channel). Probe and cable delays are a few samples.
pub(crate) const MAX_SHIFT_SAMPLES: f64 = (1 << 20) as f64;

/// One channel's shift, applied to its samples block by block. Every output is computed
/// exactly as on the whole record (the same clamp, floor and interpolation); outputs that
/// would read past the samples seen so far wait until more arrive or the record ends.
#[derive(Debug, Clone)]
pub(crate) struct Skew {
    shift: f64,
    /// Input samples from index `base` on.
    held: Vec<f64>,
    base: usize,
    /// Input samples seen.
    n_in: usize,
    /// Index of the next output.
    next: usize,
}

impl Skew {
    pub(crate) fn new(shift: f64) -> Self {
        Skew {
            shift,
            held: Vec::new(),
            base: 0,
            n_in: 0,
            next: 0,
        }
    }

    /// Takes the next input samples and appends every output they settle.
    pub(crate) fn push(&mut self, x: &[f64], out: &mut Vec<f64>) {
        self.held.extend_from_slice(x);
        self.n_in += x.len();
        let (held, base, shift) = (&self.held, self.base, self.shift);
        // An output is settled once its right neighbour has arrived: `floor(pos) + 1 <
        // n_in`, i.e. `pos < n_in - 1`; below that the upper clamp of the whole-record
        // form does not bite (`pos` is finite: the shift is). State in locals: the loop
        // runs once per sample.
        let below = self.n_in.saturating_sub(1) as f64;
        let mut k = self.next;
        out.reserve(self.n_in.saturating_sub(k));
        while k < self.n_in {
            let pos = (index_value(k) + shift).max(0.0);
            if pos >= below {
                break;
            }
            let (left, i) = floor_of(pos);
            // Positions only increase and `drop_unneeded` keeps the first one still needed.
            debug_assert!(left >= base, "skew stage dropped a needed sample");
            let (a, b) = match held.get(left - base..left - base + 2) {
                Some(&[a, b]) => (a, b),
                _ => (0.0, 0.0),
            };
            out.push(a + (b - a) * (pos - i));
            k += 1;
        }
        self.next = k;
        self.drop_unneeded();
    }

    /// The outputs left once the record has ended (its last sample is known).
    pub(crate) fn finish(&mut self, out: &mut Vec<f64>) {
        let Some(last) = self.n_in.checked_sub(1) else {
            return;
        };
        while self.next < self.n_in {
            let pos = (index_value(self.next) + self.shift).clamp(0.0, last as f64);
            let (left, i) = floor_of(pos);
            let a = self.at(left);
            let b = if left < last { self.at(left + 1) } else { a };
            out.push(a + (b - a) * (pos - i));
            self.next += 1;
        }
        self.held.clear();
    }

    fn at(&self, k: usize) -> f64 {
        self.held.get(k - self.base).copied().unwrap_or(0.0)
    }

    /// Forgets the inputs no later output reads (the outputs' positions only increase),
    /// once they are most of what is held, so each sample moves at most a few times.
    fn drop_unneeded(&mut self) {
        let first_needed = floor_of((index_value(self.next) + self.shift).max(0.0))
            .0
            .min(self.n_in.saturating_sub(1));
        let k = first_needed.saturating_sub(self.base);
        if k > 0 && k >= self.held.len() / 2 {
            self.held.drain(..k);
            self.base += k;
        }
    }
}

/// `floor(pos)` as an index and as a value, for `0 <= pos < 2^53` (sample positions): there
/// truncation is the floor, and the conversion back is exact. (`f64::floor` is a call into
/// the C library on the baseline x86-64 target; it was a seventh of a skewed WAV's time.)
fn floor_of(pos: f64) -> (usize, f64) {
    let left = pos as i64;
    (left as usize, left as f64)
}

/// A sample index as a value, exactly (indices stay far below 2^53), through the signed
/// conversion, which is one instruction where the unsigned one is several.
fn index_value(k: usize) -> f64 {
    k as i64 as f64
}

/// The shift of every channel from `--skew` (summed when a channel is named twice), in
/// samples, with a note in `cap` for each channel that moves; `None` when none does. A name
/// that matches no channel, a time that is not finite or a shift beyond
/// [`MAX_SHIFT_SAMPLES`] is an error naming the option.
pub(crate) fn skews_of(
    cap: &mut Capture,
    opts: &ReadOptions,
) -> Result<Option<Vec<f64>>, CaptureError> {
    if opts.skew.is_empty() {
        return Ok(None);
    }
    let mut seconds = vec![0.0f64; cap.channels.len()];
    for (name, s) in &opts.skew {
        if !s.is_finite() {
            return Err(CaptureError::Invalid {
                file: cap.source.clone(),
                message: format!("--skew {name}={s}: expected a finite time"),
            });
        }
        let k = find_channel(cap, name).ok_or_else(|| CaptureError::Invalid {
            file: cap.source.clone(),
            message: format!(
                "--skew {name}: no channel '{name}'; the channels are: {}",
                channels_listed(cap)
            ),
        })?;
        seconds[k] += s;
    }
    let dt = cap.sample_interval_s;
    let timed = dt.is_finite() && dt > 0.0;
    if !timed || seconds.iter().all(|&s| s == 0.0) {
        return Ok(None);
    }
    let mut shifts = Vec::with_capacity(seconds.len());
    for (ch, s) in cap.channels.iter().zip(&seconds) {
        let shift = s / dt;
        if shift.abs() > MAX_SHIFT_SAMPLES {
            return Err(CaptureError::Invalid {
                file: cap.source.clone(),
                message: format!(
                    "--skew {}={s}: that is {:.0} samples; at most {MAX_SHIFT_SAMPLES} samples are accepted (a probe and cable delay is a few)",
                    ch.name,
                    shift.abs()
                ),
            });
        }
        shifts.push(shift);
    }
    for (ch, &shift) in cap.channels.iter().zip(&shifts) {
        if shift != 0.0 {
            let how = if shift > 0.0 { "earlier" } else { "later" };
            cap.notes.push(format!(
                "'{}' moved {how} by {:e} s ({} samples, --skew)",
                ch.name,
                sig(shift.abs() * dt),
                sig(shift.abs())
            ));
        }
    }
    Ok(Some(shifts))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The definition on a whole record: `out[k] = x(k + shift)`, linearly interpolated,
    /// holding the first and last values beyond the ends.
    fn shift_whole(x: &[f64], shift: f64) -> Vec<f64> {
        let n = x.len();
        if n == 0 {
            return Vec::new();
        }
        let last = (n - 1) as f64;
        (0..n)
            .map(|k| {
                let pos = (k as f64 + shift).clamp(0.0, last);
                let i = pos.floor();
                let a = x[i as usize];
                let b = x.get(i as usize + 1).copied().unwrap_or(a);
                a + (b - a) * (pos - i)
            })
            .collect()
    }

    fn streamed(x: &[f64], shift: f64, cuts: &[usize]) -> Vec<f64> {
        let mut s = Skew::new(shift);
        let mut out = Vec::new();
        let mut from = 0;
        for &c in cuts {
            let to = (from + c).min(x.len());
            s.push(&x[from..to], &mut out);
            from = to;
        }
        s.push(&x[from..], &mut out);
        s.finish(&mut out);
        out
    }

    #[test]
    fn late_by_half_a_sample_and_early_by_one() {
        // Worked by hand: halfway between neighbours, and one sample later with the
        // first value held.
        let x = [0.0, 10.0, 20.0, 30.0];
        assert_eq!(streamed(&x, 0.5, &[1, 1]), [5.0, 15.0, 25.0, 30.0]);
        assert_eq!(streamed(&x, -1.0, &[3]), [0.0, 0.0, 10.0, 20.0]);
        assert_eq!(streamed(&x, 7.25, &[]), [30.0; 4]);
        assert_eq!(streamed(&x, -9.0, &[2]), [0.0; 4]);
    }

    proptest! {
        /// Any block cuts give exactly the whole-record values, bit for bit.
        #[test]
        fn blocks_give_what_the_whole_record_gives(
            x in prop::collection::vec(-1e3f64..1e3, 0..300),
            shift in -40.0f64..40.0,
            cuts in prop::collection::vec(0usize..50, 0..12),
        ) {
            let got = streamed(&x, shift, &cuts);
            let want = shift_whole(&x, shift);
            prop_assert_eq!(got.len(), want.len());
            for (g, w) in got.iter().zip(&want) {
                prop_assert_eq!(g.to_bits(), w.to_bits());
            }
        }

        /// A stage holds about its shift in samples, not the record.
        #[test]
        fn memory_stays_near_the_shift(shift in -30.0f64..30.0) {
            let mut s = Skew::new(shift);
            let mut out = Vec::new();
            for k in 0..200 {
                s.push(&[k as f64; 64], &mut out);
                prop_assert!(s.held.len() <= 2 * (64 + 32), "{} held", s.held.len());
            }
        }
    }
}
