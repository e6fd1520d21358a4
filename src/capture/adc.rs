//! ADC rails and code step seen in text data, where no header states them.
//!
//! A digitiser that overranges writes its extreme code for every clipped sample, so the
//! extreme value of a channel repeating several times marks a rail (common practice; a true
//! peak lands on one sample, rarely on the same value twice). The code step is the smallest
//! gap between distinct values when every gap is a whole multiple of it.

use super::AdcRange;
use crate::levels::{from_total_order_key, total_order_key};

/// Samples at exactly the extreme value needed to call it a rail.
const MIN_RAIL_HITS: u64 = 3;
/// A value held by more than this share of samples is a state level, not a rail.
const MAX_RAIL_SHARE: f64 = 0.25;
/// Width of the band inside a rail, as a share of the range, where few samples may lie.
const NEAR_BAND: f64 = 0.02;
/// Values kept per channel to estimate the code step (bounded memory).
const KEPT_VALUES: usize = 1 << 16;
/// Distinct values needed before calling them gridded.
const MIN_GRID_VALUES: usize = 8;
/// Share of gaps that must be whole multiples of the step to call the values gridded.
const GRID_SHARE: f64 = 0.99;

/// Running extremes of one channel, and a uniform subsample of its values.
#[derive(Debug, Clone)]
pub(crate) struct RailWatch {
    min: f64,
    max: f64,
    n_min: u64,
    n_max: u64,
    n: u64,
    /// Every `stride`-th value; the stride doubles whenever the store fills, so it stays a
    /// uniform subsample of the whole capture in bounded memory.
    kept: Vec<f64>,
    stride: u64,
}

impl Default for RailWatch {
    fn default() -> Self {
        RailWatch {
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            n_min: 0,
            n_max: 0,
            n: 0,
            kept: Vec::new(),
            stride: 1,
        }
    }
}

impl RailWatch {
    /// Takes in the next values of the channel. Same result as looking at them one by one:
    /// the extremes are the first values reaching them, counted with every value equal to
    /// them, and the subsample keeps every `stride`-th value of the whole channel.
    pub(crate) fn observe(&mut self, values: &[f64]) {
        let Some((lo, hi)) = crate::levels::finite_extremes(values) else {
            return;
        };
        if hi > self.max {
            // Of equal values (0 and -0), the first one seen is the one kept.
            self.max = values.iter().copied().find(|&x| x == hi).unwrap_or(hi);
            self.n_max = count_equal(values, hi);
        } else if hi == self.max {
            self.n_max += count_equal(values, hi);
        }
        if lo < self.min {
            self.min = values.iter().copied().find(|&x| x == lo).unwrap_or(lo);
            self.n_min = count_equal(values, lo);
        } else if lo == self.min {
            self.n_min += count_equal(values, lo);
        }
        self.keep_subsample(values);
        self.n += values.len() as u64;
    }

    /// Keeps the values at positions (counted over the whole channel) that are multiples
    /// of the stride, halving the store and doubling the stride whenever it is full.
    fn keep_subsample(&mut self, values: &[f64]) {
        let n = values.len() as u64;
        let mut pos = self.n.next_multiple_of(self.stride);
        while pos < self.n + n {
            if self.kept.len() >= KEPT_VALUES {
                let mut k = 0;
                self.kept.retain(|_| {
                    k += 1;
                    k % 2 == 1
                });
                self.stride *= 2;
                if !pos.is_multiple_of(self.stride) {
                    pos = pos.next_multiple_of(self.stride);
                    continue;
                }
            }
            if let Some(&x) = usize::try_from(pos - self.n)
                .ok()
                .and_then(|i| values.get(i))
            {
                self.kept.push(x);
            }
            pos += self.stride;
        }
    }

    /// Whether the extreme `value`, hit `hits` times, is a rail: it repeats, it is not a
    /// state level (held by a large share of samples), and few samples lie just inside it.
    /// Clipped samples sit on the rail with only edge-transit samples near it; the floor
    /// of a noisy state level has its whole noise band next to its extreme code.
    fn is_rail(&self, value: f64, hits: u64, step: Option<f64>) -> bool {
        if hits < MIN_RAIL_HITS || hits as f64 > MAX_RAIL_SHARE * self.n as f64 {
            return false;
        }
        // At least a few codes wide, so a coarse ADC's noise band is inside it.
        let band = (NEAR_BAND * (self.max - self.min)).max(2.5 * step.unwrap_or(0.0));
        let near = self
            .kept
            .iter()
            .filter(|&&v| v != value && (v - value).abs() <= band)
            .count();
        let near_est = near as f64 * self.n as f64 / self.kept.len().max(1) as f64;
        near_est < hits as f64
    }

    /// Rails and step seen, with a note for `inspect`. Unseen rails are infinite.
    pub(crate) fn conclude(&self, name: &str, unit: &str) -> Option<(AdcRange, String)> {
        if self.n == 0 || self.min >= self.max {
            return None;
        }
        let step = code_step(&self.kept);
        let upper = self.is_rail(self.max, self.n_max, step);
        let lower = self.is_rail(self.min, self.n_min, step);
        if !upper && !lower && step.is_none() {
            return None;
        }
        let mut parts = Vec::new();
        if upper {
            parts.push(format!(
                "upper rail {} {unit} (the maximum repeats {} times)",
                self.max, self.n_max
            ));
        }
        if lower {
            parts.push(format!(
                "lower rail {} {unit} (the minimum repeats {} times)",
                self.min, self.n_min
            ));
        }
        if let Some(s) = step {
            parts.push(format!("code step {:e} {unit}", super::sig(s)));
        }
        let range = AdcRange {
            min_v: if lower { self.min } else { f64::NEG_INFINITY },
            max_v: if upper { self.max } else { f64::INFINITY },
            step_v: step,
        };
        Some((
            range,
            format!("'{name}': {} (seen in the data)", parts.join(", ")),
        ))
    }
}

fn count_equal(values: &[f64], target: f64) -> u64 {
    values.iter().map(|&x| u64::from(x == target)).sum()
}

/// Smallest gap between distinct values, when the values sit on a grid of that step.
pub(crate) fn code_step(values: &[f64]) -> Option<f64> {
    // Sorted as integers in `f64::total_cmp`'s order: the same sequence (values equal
    // under total_cmp are the same bits), in 0.21 ms instead of 0.29 ms for 10 k values,
    // a short capture's whole record. Only the distinct values count, so a value equal to
    // the one before it is not kept: a quiet stretch of a digitised record repeats its
    // code sample after sample, and a short capture's sort shrank to a fifth.
    let mut keys: Vec<i64> = Vec::with_capacity(values.len());
    for &x in values {
        let k = total_order_key(x);
        if keys.last() != Some(&k) {
            keys.push(k);
        }
    }
    keys.sort_unstable();
    let mut v: Vec<f64> = keys.into_iter().map(from_total_order_key).collect();
    let n_all = values.len();
    v.dedup();
    // A handful of values sits on the grid of its printed decimals by chance.
    if v.len() < MIN_GRID_VALUES || v.len() == n_all {
        return None;
    }
    let gaps: Vec<f64> = v.windows(2).map(|w| w[1] - w[0]).collect();
    let step = gaps.iter().copied().fold(f64::INFINITY, f64::min);
    if !(step.is_finite() && step > 0.0) {
        return None;
    }
    let on_grid = gaps
        .iter()
        .filter(|&&g| {
            let k = g / step;
            (k - k.round()).abs() <= 0.05
        })
        .count();
    (on_grid as f64 >= GRID_SHARE * gaps.len() as f64).then_some(step)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Sorting by the integer keys gives, bit for bit, what sorting by `f64::total_cmp`
    /// gives, signed zeros, infinities, NaNs of both signs and subnormals included.
    #[test]
    fn integer_keys_sort_as_total_cmp_does() {
        let mut v = vec![
            0.0,
            -0.0,
            1.5,
            -1.5,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NAN,
            -f64::NAN,
            f64::MIN_POSITIVE / 4.0,
            -f64::MIN_POSITIVE / 4.0,
            f64::MAX,
            f64::MIN,
            1e-300,
            -1e300,
        ];
        v.extend((0..500).map(|k| ((k * 7919) % 613) as f64 * 0.0196 - 3.0));
        let mut want = v.clone();
        want.sort_unstable_by(f64::total_cmp);
        let mut keys: Vec<i64> = v.iter().map(|&x| total_order_key(x)).collect();
        keys.sort_unstable();
        let got: Vec<u64> = keys
            .into_iter()
            .map(|k| from_total_order_key(k).to_bits())
            .collect();
        let want: Vec<u64> = want.iter().map(|x| x.to_bits()).collect();
        assert_eq!(got, want);
    }

    #[test]
    fn repeated_extremes_are_rails() {
        // An invented clipped trace on a 0.5 V grid: three samples stuck at 10 V.
        let mut w = RailWatch::default();
        let v = [
            0.0, 0.5, 1.0, 0.0, 3.5, 10.0, 10.0, 10.0, 4.5, 2.0, 0.5, 0.0, 0.0, 1.5, -0.5, 0.0,
        ];
        w.observe(&v);
        let (r, note) = w.conclude("v", "V").unwrap();
        assert_eq!(r.max_v, 10.0);
        assert_eq!(r.min_v, f64::NEG_INFINITY);
        assert_eq!(r.step_v, Some(0.5));
        assert!(note.contains("upper rail 10 V"), "{note}");
    }

    #[test]
    fn the_floor_of_a_noisy_state_is_no_rail() {
        // An invented quantized noise band around 0 V with its minimum -1 V hit 3 times.
        let mut w = RailWatch::default();
        let mut v = vec![0.0; 40];
        for (k, x) in v.iter_mut().enumerate() {
            *x = [0.0, 0.5, -0.5, 0.0, 0.5][k % 5];
        }
        v[3] = -1.0;
        v[13] = -1.0;
        v[23] = -1.0;
        v.extend_from_slice(&[8.0, 13.0, 20.0, 20.0, 20.0, 6.0, 2.5]);
        w.observe(&v);
        let (r, _) = w.conclude("v", "V").unwrap();
        assert_eq!(r.min_v, f64::NEG_INFINITY);
        assert_eq!(r.max_v, 20.0);
    }

    #[test]
    fn the_subsample_stays_bounded_and_uniform() {
        let mut w = RailWatch::default();
        let v: Vec<f64> = (0..(3 * KEPT_VALUES)).map(|k| k as f64).collect();
        w.observe(&v);
        assert!(w.kept.len() <= KEPT_VALUES);
        assert_eq!(w.stride, 4);
        assert_eq!(w.kept[1], 4.0);
    }

    /// The one-value-at-a-time watch these blocks must agree with.
    fn observe_one_by_one(w: &mut RailWatch, values: &[f64]) {
        for &x in values {
            if x > w.max {
                w.max = x;
                w.n_max = 1;
            } else if x == w.max {
                w.n_max += 1;
            }
            if x < w.min {
                w.min = x;
                w.n_min = 1;
            } else if x == w.min {
                w.n_min += 1;
            }
            if w.n.is_multiple_of(w.stride) {
                if w.kept.len() >= KEPT_VALUES {
                    let mut k = 0;
                    w.kept.retain(|_| {
                        k += 1;
                        k % 2 == 1
                    });
                    w.stride *= 2;
                }
                if w.n.is_multiple_of(w.stride) {
                    w.kept.push(x);
                }
            }
            w.n += 1;
        }
    }

    #[test]
    fn blocks_of_any_length_give_what_one_value_at_a_time_gives() {
        // Invented values on a coarse grid (many ties) with signed zeros, through the
        // subsample's first halvings, cut into blocks of awkward lengths.
        let mut seed = 0x9e37_79b9_7f4a_7c15u64;
        let values: Vec<f64> = (0..(5 * KEPT_VALUES / 2))
            .map(|_| {
                seed ^= seed << 13;
                seed ^= seed >> 7;
                seed ^= seed << 17;
                match seed % 11 {
                    0 => 0.0,
                    1 => -0.0,
                    r => (r as f64 - 6.0) * 0.5,
                }
            })
            .collect();
        for len in [1usize, 3, 4, 7, 1000, 65_536, values.len()] {
            let mut blocks = RailWatch::default();
            for b in values.chunks(len) {
                blocks.observe(b);
            }
            let mut single = RailWatch::default();
            observe_one_by_one(&mut single, &values);
            assert_eq!(blocks.max.to_bits(), single.max.to_bits(), "{len}");
            assert_eq!(blocks.min.to_bits(), single.min.to_bits(), "{len}");
            assert_eq!((blocks.n_max, blocks.n_min), (single.n_max, single.n_min));
            assert_eq!((blocks.n, blocks.stride), (single.n, single.stride));
            assert_eq!(blocks.kept, single.kept, "{len}");
        }
        // A block starting with -0 after a +0 maximum keeps the +0 first seen.
        let mut w = RailWatch::default();
        w.observe(&[-1.0, 0.0]);
        w.observe(&[-0.0, -2.0]);
        assert_eq!((w.max.to_bits(), w.n_max), (0.0f64.to_bits(), 2));
    }

    #[test]
    fn values_off_a_grid_have_no_step() {
        let v = [0.0, 0.1, 0.1, 0.37, 0.52, 0.9, 1.13, 1.4, 2.0, 2.5];
        assert_eq!(code_step(&v), None);
        let g = [0.0, 0.25, 0.25, 0.75, 1.5, 2.0, -0.5, -1.0, 3.0, 3.25];
        assert_eq!(code_step(&g), Some(0.25));
        // Too few distinct values to tell a grid from chance.
        assert_eq!(code_step(&[0.0, 0.25, 0.25, 0.75]), None);
        // Ten distinct values on a 0.25 grid: all distinct, no repeat, tells nothing; held
        // for runs of samples (repeats next to each other) or met again later, a grid.
        let distinct: Vec<f64> = (0..10).map(|k| k as f64 * 0.25).collect();
        assert_eq!(code_step(&distinct), None);
        let held: Vec<f64> = distinct.iter().flat_map(|&x| [x, x, x]).collect();
        assert_eq!(code_step(&held), Some(0.25));
        let again: Vec<f64> = distinct.iter().chain(&distinct).copied().collect();
        assert_eq!(code_step(&again), Some(0.25));
    }
}
