//! State levels (IEEE Std 181-2011 histogram method, made robust to spikes) and reference
//! levels.
//!
//! The textbook method splits the histogram of the whole record at the middle of its range
//! and takes the mode of each half. Flyback spikes are often 10 to 100 times the switching
//! step, so both states end up in the lower half and the bins can be wider than the step.
//! Here the bin width comes from the noise and the ADC code step, and two modes count as
//! separate states when they lie apart by many noise standard deviations, whatever the range.

/// Largest number of histogram bins; beyond it the bin width grows (memory stays bounded).
const MAX_BINS: usize = 1 << 20;
/// Largest number of first differences kept for a noise estimate (a strided subset beyond).
pub const MAX_NOISE_SAMPLES: usize = 1 << 20;
/// Records longer than this are scanned in parallel pieces of this many samples.
const PARALLEL_PIECE: usize = 1 << 18;
/// Consistency constant of the median absolute deviation for Gaussian data
/// (Rousseeuw & Croux 1993).
const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// Reference level at `pct` percent of the way from `base_v` to `top_v`
/// (IEEE Std 181-2011, 5.3.3: x% reference level = base + x/100 * amplitude).
pub fn reference_level(base_v: f64, top_v: f64, pct: f64) -> f64 {
    base_v + pct / 100.0 * (top_v - base_v)
}

/// Instant where the straight line through `(t0, v0)` and `(t1, v1)` crosses `level_v`
/// (IEEE Std 181-2011, 5.3.4: linear interpolation between the two samples that bracket the
/// crossing). `None` when the two samples do not bracket the level.
pub fn crossing_time(t0_s: f64, v0: f64, t1_s: f64, v1: f64, level_v: f64) -> Option<f64> {
    let lo = v0.min(v1);
    let hi = v0.max(v1);
    if !(lo <= level_v && level_v <= hi) {
        return None;
    }
    if v1 == v0 {
        return Some(t0_s);
    }
    Some(t0_s + (level_v - v0) / (v1 - v0) * (t1_s - t0_s))
}

/// Fractional sample index where `v[k] -> v[k+1]` crosses `level_v`, if it does.
pub fn crossing_index(v: &[f64], k: usize, level_v: f64) -> Option<f64> {
    let a = *v.get(k)?;
    let b = *v.get(k + 1)?;
    crossing_time(k as f64, a, k as f64 + 1.0, b, level_v)
}

/// Overshoot aberration in percent of the amplitude (IEEE Std 181-2011, 5.3.6.2 applied to
/// the level just after the transition): `|peak - top| / |top - base| * 100`.
pub fn overshoot_pct(base_v: f64, top_v: f64, peak_v: f64) -> Option<f64> {
    let amp = (top_v - base_v).abs();
    (amp > 0.0).then(|| (peak_v - top_v).abs() / amp * 100.0)
}

/// Median of a slice: the element of rank n / 2 in `f64::total_cmp` order. `None` when
/// empty or when it holds a NaN.
pub fn median(v: &[f64]) -> Option<f64> {
    if v.iter().any(|x| x.is_nan()) {
        return None;
    }
    median_of(v.iter().copied(), v.len()).map(|(m, _)| m)
}

/// The median (rank n / 2 in `f64::total_cmp` order, NaN included in that order) of the
/// values `values` gives, and their count n; `None` when there are none. `room` sizes the
/// buffer at once (a filtered collect grows by doubling and copies, which cost half as
/// much as the selection).
///
/// The values are selected as integer keys in the same order (the very transformation
/// `total_cmp` makes before it compares; one to one, so the value of the rank comes back
/// to the bit): the standard library partitions integers without branches, a quarter to a
/// third less time than with the `total_cmp` closure on 5000 digitised samples, the copy
/// of the keys included.
pub(crate) fn median_of(values: impl Iterator<Item = f64>, room: usize) -> Option<(f64, usize)> {
    let mut keys: Vec<i64> = Vec::with_capacity(room);
    keys.extend(values.map(total_order_key));
    median_of_keys(keys)
}

/// The median of the values whose [`total_order_key`]s `keys` holds, and their count, as
/// [`median_of`] gives it (for callers that make the keys in a loop of their own).
pub(crate) fn median_of_keys(mut keys: Vec<i64>) -> Option<(f64, usize)> {
    let n = keys.len();
    if n == 0 {
        return None;
    }
    let k = *keys.select_nth_unstable(n / 2).1;
    Some((from_total_order_key(k), n))
}

/// `x`'s place in `f64::total_cmp`'s order as an integer (the transform that method
/// compares): the sign bit set flips every other bit, so negative values count down.
#[inline]
pub(crate) fn total_order_key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ ((((b >> 63) as u64) >> 1) as i64)
}

/// The value of a [`total_order_key`] (the transform undoes itself).
#[inline]
pub(crate) fn from_total_order_key(k: i64) -> f64 {
    f64::from_bits((k ^ ((((k >> 63) as u64) >> 1) as i64)) as u64)
}

/// Noise standard deviation from first differences: `MAD(diff) * 1.4826 / sqrt(2)`.
///
/// Differencing removes slow signal, and the median ignores the few large differences at
/// edges and spikes, so this holds on a whole record as long as most of it is quiet. Only
/// the differences where `keep(v[k-1], v[k])` holds enter (e.g. samples in the on state).
pub fn noise_sigma_where(v: &[f64], keep: impl Fn(f64, f64) -> bool) -> Option<f64> {
    let stride = (v.len() / MAX_NOISE_SAMPLES).max(1);
    if stride == 1 {
        // Every pair (a record up to MAX_NOISE_SAMPLES long): neighbouring windows, without
        // the index arithmetic and bounds checks of the strided walk (which was 1.4 % of a
        // folder of short captures' instructions; this takes about half of that, and
        // `windows(2).step_by(1)` for both cases 0.9 % more than this).
        return noise_sigma_of_pairs(
            v.windows(2)
                .map(|w| (w[0], w[1]))
                .filter(|&(a, b)| keep(a, b)),
        );
    }
    let pairs = (1..v.len())
        .step_by(stride)
        .map(|k| (v[k - 1], v[k]))
        .filter(|&(a, b)| keep(a, b));
    noise_sigma_of_pairs(pairs)
}

/// Noise standard deviation from pairs of neighbouring samples, as [`noise_sigma_where`]
/// computes it; the pairs of a long record can be gathered while streaming it.
pub fn noise_sigma_of_pairs(pairs: impl Iterator<Item = (f64, f64)>) -> Option<f64> {
    let (least, most) = pairs.size_hint();
    let d = pairs
        .filter(|(a, b)| a.is_finite() && b.is_finite())
        .map(|(a, b)| (b - a).abs());
    // The differences are absolute values of a zero-centred quantity, so their median is
    // the MAD of the differences.
    let (mad, n) = median_of(d, most.unwrap_or(least))?;
    (n >= 8).then(|| mad * MAD_TO_SIGMA / std::f64::consts::SQRT_2)
}

/// Noise standard deviation over the whole record (see [`noise_sigma_where`]).
pub fn noise_sigma(v: &[f64]) -> Option<f64> {
    noise_sigma_where(v, |_, _| true)
}

/// The ADC code step, when the samples sit on a regular grid: the smallest non-zero first
/// difference, accepted when (nearly) every difference is a whole multiple of it.
pub fn adc_step_estimate(v: &[f64]) -> Option<f64> {
    let stride = (v.len() / MAX_NOISE_SAMPLES).max(1);
    let (lo, hi) = finite_range(v)?;
    let diffs = (1..v.len()).step_by(stride).map(|k| v[k] - v[k - 1]);
    adc_step_of_diffs(diffs, hi - lo)
}

/// The ADC code step from first differences, as [`adc_step_estimate`] finds it;
/// `range_v` is the record's span (differences below a billionth of it count as zero).
pub fn adc_step_of_diffs(diffs: impl Iterator<Item = f64> + Clone, range_v: f64) -> Option<f64> {
    let tiny = range_v.abs() * 1e-9;
    let d_min = diffs
        .clone()
        .map(f64::abs)
        .filter(|d| d.is_finite() && *d > tiny)
        .fold(f64::INFINITY, f64::min);
    if !d_min.is_finite() {
        return None;
    }
    let (mut n, mut on_grid) = (0usize, 0usize);
    for d in diffs
        .map(f64::abs)
        .filter(|d| d.is_finite() && *d > tiny)
        .take(4096)
    {
        n += 1;
        let r = d / d_min;
        if (r - r.round()).abs() < 0.02 {
            on_grid += 1;
        }
    }
    // Unquantised data with noise gives ratios spread evenly, so about 4 % land within
    // 0.02 of an integer by chance; a grid gives nearly all.
    (n >= 8 && on_grid * 100 >= n * 95).then_some(d_min)
}

/// Records up to this long are copied for [`median_near`] rather than tallied.
const SHORT_RECORD: usize = 1 << 16;

/// Median of the samples within `half_width_v` of `target_v`; `None` with fewer than 16.
pub fn level_near(v: &[f64], target_v: f64, half_width_v: f64) -> Option<f64> {
    let (m, n) = median_near(v, target_v, half_width_v)?;
    (n >= 16).then_some(m)
}

/// The median (the element of rank n / 2 in total order, as [`median`]) of the n
/// samples within `w` of `c`, and n, in memory that does not grow with the record: a
/// counting pass over fine sub-bins of `[c - w, c + w]` finds the sub-bin holding that
/// rank (the bin index rises with the value, so ranks stay in bin order), and a second pass
/// selects within that sub-bin's samples only. A sub-bin holding one repeated value (an
/// ADC code) answers without the second pass.
pub fn median_near(v: &[f64], c: f64, w: f64) -> Option<(f64, usize)> {
    use rayon::prelude::*;
    // A short record is copied and selected in: less work than the tally's bins, and the
    // same answer by definition.
    if v.len() <= SHORT_RECORD {
        // (NaN is never near, so none is selected.)
        return median_of(v.iter().copied().filter(|x| (x - c).abs() <= w), v.len());
    }
    const BINS: usize = 4096;
    // Long records are counted in parallel pieces; the tallies add up in any order.
    const PIECE: usize = 1 << 18;
    let lo = c - w;
    // Any bin index that never falls as the value rises serves; a product is cheaper than
    // a division.
    let per_bin = BINS as f64 / (2.0 * w);
    let bin_of = |x: f64| (((x - lo) * per_bin) as usize).min(BINS - 1);
    let tally = |part: &[f64]| {
        let mut t = Tally::new(BINS);
        for &x in part {
            if (x - c).abs() <= w {
                t.add(bin_of(x), x);
            }
        }
        t
    };
    let Tally {
        counts,
        first,
        uniform,
        n,
    } = if v.len() > PIECE {
        v.par_chunks(PIECE)
            .map(tally)
            .reduce(|| Tally::new(BINS), Tally::merge)
    } else {
        tally(v)
    };
    let k = n / 2;
    let mut below = 0usize;
    let mut bin = None;
    for (b, &cnt) in counts.iter().enumerate() {
        if below + cnt > k {
            bin = Some(b);
            break;
        }
        below += cnt;
    }
    let b = bin?;
    if uniform[b] {
        return Some((first[b], n));
    }
    let mut sel: Vec<f64> = v
        .par_iter()
        .copied()
        .filter(|&x| (x - c).abs() <= w && bin_of(x) == b)
        .collect();
    let (_, m, _) = sel
        .get_mut(..)?
        .select_nth_unstable_by(k - below, f64::total_cmp);
    Some((*m, n))
}

/// Counts per sub-bin for [`median_near`], with the first value seen in each and whether
/// every value in it equals that one.
struct Tally {
    counts: Vec<usize>,
    first: Vec<f64>,
    uniform: Vec<bool>,
    n: usize,
}

impl Tally {
    fn new(bins: usize) -> Self {
        Tally {
            counts: vec![0; bins],
            first: vec![f64::NAN; bins],
            uniform: vec![true; bins],
            n: 0,
        }
    }

    fn add(&mut self, b: usize, x: f64) {
        if let (Some(cnt), Some(f), Some(u)) = (
            self.counts.get_mut(b),
            self.first.get_mut(b),
            self.uniform.get_mut(b),
        ) {
            if *cnt == 0 {
                *f = x;
            } else if *u && x.to_bits() != f.to_bits() {
                *u = false;
            }
            *cnt += 1;
            self.n += 1;
        }
    }

    fn merge(mut self, other: Tally) -> Tally {
        for b in 0..self.counts.len() {
            let (c2, f2, u2) = (other.counts[b], other.first[b], other.uniform[b]);
            if c2 == 0 {
                continue;
            }
            if self.counts[b] == 0 {
                self.first[b] = f2;
                self.uniform[b] = u2;
            } else {
                self.uniform[b] = self.uniform[b] && u2 && f2.to_bits() == self.first[b].to_bits();
            }
            self.counts[b] += c2;
        }
        self.n += other.n;
        self
    }
}

/// Longest stretch of consecutive samples within `half_width_v` of `level_v`: a true state
/// holds for a while, the turning points of a ring only for a few samples.
pub fn longest_run_near(v: &[f64], level_v: f64, half_width_v: f64) -> usize {
    let (mut best, mut run) = (0, 0);
    for &x in v {
        if (x - level_v).abs() <= half_width_v {
            run += 1;
            best = best.max(run);
        } else {
            run = 0;
        }
    }
    best
}

crate::avx2::twice_compiled!(
    /// Smallest and largest finite value of `v`, one thread. Eight lanes of plain
    /// comparisons vectorise (and NaN never wins one); an infinity, rare in samples, sends
    /// the slice to a second look that leaves it out. Compiled for AVX2 too (every sample
    /// of a long capture passes here: 3.4 instructions a sample before, 1.1 after).
    pub fn finite_extremes(v: &[f64]) -> Option<(f64, f64)> => finite_extremes_on;
);

#[inline(always)]
fn finite_extremes_on(v: &[f64]) -> Option<(f64, f64)> {
    let (lanes_lo, lanes_hi) = lane_extremes(v);
    let rest = v.chunks_exact(8).remainder();
    let (mut lo, mut hi) = lanes_lo
        .iter()
        .zip(&lanes_hi)
        .map(|(&l, &h)| (l, h))
        .chain(rest.iter().map(|&x| (x, x)))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (l, h)| {
            (a.min(l), b.max(h))
        });
    if lo == f64::NEG_INFINITY || hi == f64::INFINITY {
        (lo, hi) = v
            .iter()
            .filter(|x| x.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
    }
    (lo <= hi).then_some((lo, hi))
}

/// The smallest and largest value in each of eight lanes over the whole groups of eight of
/// `v` (plain comparisons, so NaN never wins one). A function of its own: written inline in
/// [`finite_extremes_on`], the AVX2 build compiled it to blends instead of `vminpd`.
#[inline(always)]
fn lane_extremes(v: &[f64]) -> ([f64; 8], [f64; 8]) {
    let mut lo = [f64::INFINITY; 8];
    let mut hi = [f64::NEG_INFINITY; 8];
    for c in v.chunks_exact(8) {
        for j in 0..8 {
            lo[j] = if c[j] < lo[j] { c[j] } else { lo[j] };
            hi[j] = if c[j] > hi[j] { c[j] } else { hi[j] };
        }
    }
    (lo, hi)
}

/// Smallest and largest finite sample ([`finite_extremes`], long records in parallel
/// pieces).
pub fn finite_range(v: &[f64]) -> Option<(f64, f64)> {
    use rayon::prelude::*;
    if v.len() <= PARALLEL_PIECE {
        return finite_extremes(v);
    }
    // Minimum and maximum do not depend on the order pieces are combined in.
    v.par_chunks(PARALLEL_PIECE)
        .filter_map(finite_extremes)
        .reduce_with(|a, b| (a.0.min(b.0), a.1.max(b.1)))
}

/// The two state levels found in a record, lower one first, with how many samples each
/// histogram mode holds (after smoothing).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StateLevels {
    pub low_v: f64,
    pub high_v: f64,
    pub low_count: f64,
    pub high_count: f64,
    /// Histogram bin width used.
    pub bin_v: f64,
}

/// The two most populated histogram modes that lie apart by at least `min_separation_v`.
///
/// `resolution_v` is the finest detail the bins must resolve (noise, ADC step); the bins are
/// half of it wide (never narrower than the range / `MAX_BINS`), and the counts are smoothed
/// with a kernel about `resolution_v` wide so the noise of one state makes one mode. Each
/// mode's level is the mean of the samples within one resolution of its bin, which undoes
/// the bin's quantisation.
pub fn two_state_levels(
    v: &[f64],
    resolution_v: f64,
    min_separation_v: f64,
) -> Option<StateLevels> {
    let h = Histogram::new(v, resolution_v)?;
    let first = *h.peaks.first()?;
    let second = h
        .peaks
        .iter()
        .copied()
        .find(|&k| (h.centre(k) - h.centre(first)).abs() >= min_separation_v)?;
    let (a, b) = (h.refine(v, first), h.refine(v, second));
    let (ca, cb) = (h.smooth[first], h.smooth[second]);
    Some(if a <= b {
        StateLevels {
            low_v: a,
            high_v: b,
            low_count: ca,
            high_count: cb,
            bin_v: h.bin,
        }
    } else {
        StateLevels {
            low_v: b,
            high_v: a,
            low_count: cb,
            high_count: ca,
            bin_v: h.bin,
        }
    })
}

/// A histogram mode: its level (refined as in [`two_state_levels`]) and its smoothed count.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Mode {
    pub level_v: f64,
    pub count: f64,
}

/// The `max_modes` most populated histogram modes at `resolution_v` (same bins, smoothing
/// and refinement as [`two_state_levels`]), most populated first.
pub fn histogram_modes(v: &[f64], resolution_v: f64, max_modes: usize) -> Vec<Mode> {
    let Some(h) = Histogram::new(v, resolution_v) else {
        return Vec::new();
    };
    h.peaks
        .iter()
        .take(max_modes)
        .map(|&k| Mode {
            level_v: h.refine(v, k),
            count: h.smooth[k],
        })
        .collect()
}

/// Smoothed histogram of a record with its local maxima, most populated first.
struct Histogram {
    lo: f64,
    bin: f64,
    resolution: f64,
    smooth: Vec<f64>,
    peaks: Vec<usize>,
}

impl Histogram {
    /// Bins half of `resolution_v` wide (never narrower than the range / `MAX_BINS`), counts
    /// smoothed with a box about `resolution_v` wide so the noise of one state makes one
    /// mode.
    fn new(v: &[f64], resolution_v: f64) -> Option<Histogram> {
        let (lo, hi) = finite_range(v)?;
        let range = hi - lo;
        if range <= 0.0 {
            return None;
        }
        let bin = (resolution_v / 2.0).max(range / MAX_BINS as f64);
        if !(bin > 0.0 && bin.is_finite()) {
            return None;
        }
        let nbins = ((range / bin).floor() as usize + 1).min(MAX_BINS + 1);
        let count = |part: &[f64]| {
            let mut counts = vec![0f64; nbins];
            for &x in part {
                if x.is_finite() {
                    let b = (((x - lo) / bin) as usize).min(nbins - 1);
                    counts[b] += 1.0;
                }
            }
            counts
        };
        // A long record is counted in two halves at once; counts are whole numbers, so the
        // sum is exact in any order.
        let counts = if v.len() > 4 * PARALLEL_PIECE {
            let (a, b) = v.split_at(v.len() / 2);
            let (mut ca, cb) = rayon::join(|| count(a), || count(b));
            for (x, y) in ca.iter_mut().zip(&cb) {
                *x += y;
            }
            ca
        } else {
            count(v)
        };
        // Box smoothing over +-half_k bins (about one resolution wide).
        let half_k = ((resolution_v / bin).round() as usize / 2).max(1);
        let mut smooth = vec![0f64; nbins];
        let mut acc = 0.0;
        for k in 0..nbins + half_k {
            if k < nbins {
                acc += counts[k];
            }
            if k > 2 * half_k {
                acc -= counts[k - 2 * half_k - 1];
            }
            if k >= half_k && k - half_k < nbins {
                smooth[k - half_k] = acc;
            }
        }
        // Local maxima (plateaus of equal counts take their first bin).
        let mut peaks: Vec<usize> = Vec::new();
        for k in 0..nbins {
            let c = smooth[k];
            if c <= 0.0 {
                continue;
            }
            let left = if k > 0 { smooth[k - 1] } else { 0.0 };
            let right = if k + 1 < nbins { smooth[k + 1] } else { 0.0 };
            if c > left && c >= right {
                peaks.push(k);
            }
        }
        peaks.sort_by(|a, b| smooth[*b].total_cmp(&smooth[*a]));
        Some(Histogram {
            lo,
            bin,
            resolution: resolution_v,
            smooth,
            peaks,
        })
    }

    fn centre(&self, k: usize) -> f64 {
        self.lo + (k as f64 + 0.5) * self.bin
    }

    /// The median of the samples near the mode, re-centred a few times, undoes the bin's
    /// quantisation without being pulled by the transitions that pass through.
    fn refine(&self, v: &[f64], k: usize) -> f64 {
        let mut c = self.centre(k);
        let w = 2.0 * self.resolution.max(self.bin);
        for _ in 0..3 {
            match median_near(v, c, w) {
                // The same centre gives the same median again.
                Some((m, _)) if m.to_bits() == c.to_bits() => break,
                Some((m, _)) => c = m,
                None => break,
            }
        }
        c
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The lane extremes against a plain one-by-one fold over the finite values, at every
    /// remainder length, with NaN and infinities anywhere, and over parallel pieces.
    #[test]
    fn finite_extremes_match_a_plain_fold() {
        let plain = |v: &[f64]| {
            let (lo, hi) = v
                .iter()
                .filter(|x| x.is_finite())
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                    (a.min(x), b.max(x))
                });
            (lo <= hi).then_some((lo, hi))
        };
        let base: Vec<f64> = (0..40).map(|k| ((k * 37) % 23) as f64 - 11.5).collect();
        for n in 0..40 {
            let mut v = base[..n].to_vec();
            assert_eq!(finite_extremes(&v), plain(&v), "n {n}");
            // The baseline build too (the AVX2 one runs above where the CPU has it).
            assert_eq!(finite_extremes_on(&v), plain(&v), "n {n}");
            for (k, x) in [
                (0, f64::NAN),
                (n / 2, f64::INFINITY),
                (n / 3, f64::NEG_INFINITY),
            ] {
                if k < v.len() {
                    v[k] = x;
                }
                assert_eq!(finite_extremes(&v), plain(&v), "n {n}, {x} at {k}");
                assert_eq!(finite_extremes_on(&v), plain(&v), "n {n}, {x} at {k}");
            }
        }
        assert_eq!(finite_extremes(&[f64::NAN; 9]), None);
        let long: Vec<f64> = (0..3 * PARALLEL_PIECE + 5)
            .map(|k| ((k * 7919) % 100_003) as f64)
            .collect();
        assert_eq!(finite_range(&long), plain(&long));
    }

    /// The bounded-memory median equals the plain one (copy and select, the reference) on
    /// continuous values, on values repeated on a code grid, and at the window's edges; the
    /// records are longer than `SHORT_RECORD`, so the tally answers, not the copy.
    /// The median selected on integer keys is the element `select_nth_unstable_by` with
    /// `f64::total_cmp` gives (the definition the keys stand in for), to the bit: signed
    /// zeros, infinities, subnormals, repeated codes, odd and even counts.
    #[test]
    fn the_median_on_keys_is_the_total_order_median() {
        let by_cmp = |v: &[f64]| {
            let mut b = v.to_vec();
            let mid = b.len() / 2;
            b.select_nth_unstable_by(mid, f64::total_cmp).1.to_bits()
        };
        let specials = [
            0.0,
            -0.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::MIN_POSITIVE / 4.0,
            -f64::MIN_POSITIVE / 4.0,
            1.5,
            -1.5,
            24.3137,
            -0.3922,
        ];
        let mut g = 7u64;
        for n in 1..60 {
            let v: Vec<f64> = (0..n)
                .map(|_| {
                    g = g
                        .wrapping_mul(6364136223846793005)
                        .wrapping_add(1442695040888963407);
                    specials[(g >> 33) as usize % specials.len()]
                })
                .collect();
            assert_eq!(median(&v).map(f64::to_bits), Some(by_cmp(&v)), "{v:?}");
            let x = v[0];
            assert_eq!(
                from_total_order_key(total_order_key(x)).to_bits(),
                x.to_bits()
            );
        }
        assert_eq!(median(&[1.0, f64::NAN]), None);
        assert_eq!(median(&[]), None);
        // A NaN anywhere gives none.
        for at in [0, 1023, 1024, 2500, 2999] {
            let mut v: Vec<f64> = (0..3000).map(|k| k as f64).collect();
            assert_eq!(median(&v), Some(1500.0));
            v[at] = -f64::NAN;
            assert_eq!(median(&v), None, "NaN at {at}");
        }
    }

    #[test]
    fn median_near_equals_the_plain_median() {
        let mut g = 12345u64;
        let mut next = || {
            g = g
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (g >> 11) as f64 / (1u64 << 53) as f64
        };
        let smooth: Vec<f64> = (0..SHORT_RECORD + 20_001)
            .map(|_| 3.0 + 2.0 * next())
            .collect();
        let coded: Vec<f64> = (0..SHORT_RECORD + 20_000)
            .map(|_| (4.0 * next()).round() * 0.5)
            .collect();
        for (v, c, w) in [
            (&smooth, 4.0, 0.7),
            (&smooth, 3.0, 1.0),
            (&coded, 1.0, 0.5),
            (&coded, 0.5, 2.0),
        ] {
            let near: Vec<f64> = v.iter().copied().filter(|x| (x - c).abs() <= w).collect();
            let n = near.len();
            let plain = median(&near).unwrap();
            assert_eq!(median_near(v, c, w), Some((plain, n)), "c {c} w {w}");
        }
        assert_eq!(median_near(&smooth, 100.0, 1.0), None);
        assert_eq!(median_near(&smooth[..1000], 100.0, 1.0), None);
        // Long enough to be tallied in parallel pieces.
        let long: Vec<f64> = (0..700_001)
            .map(|k| if k % 3 == 0 { 2.5 } else { 2.0 + next() })
            .collect();
        let near: Vec<f64> = long
            .iter()
            .copied()
            .filter(|x| (x - 2.5).abs() <= 0.3)
            .collect();
        let n = near.len();
        let plain = median(&near).unwrap();
        assert_eq!(median_near(&long, 2.5, 0.3), Some((plain, n)));
    }

    #[test]
    fn reference_levels_of_the_standard_example() {
        // IEEE Std 181-2011 formulas: base 0 V, top 12 V -> 10/50/90 % at 1.2/6.0/10.8 V.
        assert!((reference_level(0.0, 12.0, 10.0) - 1.2).abs() < 1e-12);
        assert!((reference_level(0.0, 12.0, 50.0) - 6.0).abs() < 1e-12);
        assert!((reference_level(0.0, 12.0, 90.0) - 10.8).abs() < 1e-12);
        // Overshoot aberration: peak 30 V over a 12 V step -> (30-12)/12 = 150 %.
        assert!((overshoot_pct(0.0, 12.0, 30.0).unwrap() - 150.0).abs() < 1e-9);
    }

    #[test]
    fn crossing_is_interpolated_between_bracketing_samples() {
        // IEEE Std 181-2011 linear interpolation: (0 ns, 1.0 V), (1 ns, 2.0 V), level 1.2 V
        // -> 0.2 ns.
        let t = crossing_time(0.0, 1.0, 1e-9, 2.0, 1.2).unwrap();
        assert!((t - 0.2e-9).abs() < 1e-21);
        assert_eq!(crossing_time(0.0, 1.0, 1e-9, 2.0, 2.5), None);
    }

    #[test]
    fn noise_from_differences_ignores_steps() {
        // A square wave with a deterministic +-1 alternating ripple: diffs are 2 except at
        // edges, so MAD = 2 and sigma = 2 * 1.4826 / sqrt(2) (formula of the estimator).
        let v: Vec<f64> = (0..1000)
            .map(|k| if (k / 100) % 2 == 0 { 0.0 } else { 50.0 } + if k % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let s = noise_sigma(&v).unwrap();
        assert!((s - 2.0 * MAD_TO_SIGMA / 2f64.sqrt()).abs() < 1e-9);
    }

    #[test]
    fn adc_step_found_on_a_grid_and_not_off_it() {
        let grid: Vec<f64> = (0..500)
            .map(|k| ((k as f64 * 0.05).sin() * 40.0).round() * 0.25 + 3.0)
            .collect();
        assert!((adc_step_estimate(&grid).unwrap() - 0.25).abs() < 1e-12);
        let off: Vec<f64> = (0..500).map(|k| (k as f64 * 0.7).sin() * 3.3).collect();
        assert_eq!(adc_step_estimate(&off), None);
    }

    #[test]
    fn modes_survive_a_spike_a_hundred_times_the_step() {
        // 24 V step, rare spikes to 2.4 kV: the two-halves method would put both states
        // below the middle of the range; the separated modes must stay at 0 and 24 V.
        let mut v = Vec::new();
        for cycle in 0..20 {
            v.extend(std::iter::repeat_n(0.0, 400));
            v.extend((0..5).map(|k| 2400.0 - 100.0 * k as f64 + cycle as f64));
            v.extend(std::iter::repeat_n(24.0, 300));
        }
        let s = two_state_levels(&v, 0.5, 5.0).unwrap();
        assert!((s.low_v - 0.0).abs() < 1e-9, "{s:?}");
        assert!((s.high_v - 24.0).abs() < 1e-9, "{s:?}");
    }
}
