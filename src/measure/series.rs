//! Passes over a whole event window, written so the compiler vectorises them.
//!
//! A window held back by the memory bound is half a million samples, and a measurement
//! walks it several times: the running sums behind the smoothed copies, the largest value,
//! the last sample out of the settling band. Folds that carry an index along, or searches
//! that stop at the first hit, run one sample at a time; here the values are found over
//! eight lanes first and the index looked up afterwards, and searches test eight samples
//! at once. Every function gives exactly what its plain one-sample-at-a-time form gives
//! (unit tests below compare them); samples are finite, which the readers guarantee. The
//! one exception is [`lane_sum`]: a sum over eight lanes is another order of additions.

/// The largest value of `y` (minus infinity for none).
fn max_value(y: &[f64]) -> f64 {
    let mut lanes = [f64::NEG_INFINITY; 8];
    let chunks = y.chunks_exact(8);
    let rest = chunks.remainder();
    for c in chunks {
        for j in 0..8 {
            // `>` rather than `f64::max`: finite samples need no NaN handling, and the
            // plain comparison is one vector instruction.
            lanes[j] = if c[j] > lanes[j] { c[j] } else { lanes[j] };
        }
    }
    lanes
        .iter()
        .chain(rest)
        .copied()
        .fold(f64::NEG_INFINITY, |m, x| if x > m { x } else { m })
}

/// Index of the first largest value of `y`.
pub fn first_max_index(y: &[f64]) -> Option<usize> {
    let m = max_value(y);
    y.iter().position(|&x| x == m)
}

/// Index of the last `y[k]` with `|y[k]| > band`.
pub fn last_beyond(y: &[f64], band: f64) -> Option<usize> {
    let chunks = y.rchunks_exact(8);
    let head = chunks.remainder().len();
    for (c, chunk) in chunks.enumerate() {
        if chunk.iter().fold(false, |any, x| any | (x.abs() > band)) {
            let from = y.len() - 8 * (c + 1);
            return chunk.iter().rposition(|x| x.abs() > band).map(|k| from + k);
        }
    }
    y[..head].iter().rposition(|x| x.abs() > band)
}

/// The sum of `f(x[k], y[k])` over the pairs of `x` and `y` (as far as the shorter goes),
/// kept in eight partial sums (`k` modulo 8) added pairwise at the end. A sum in order
/// waits for each addition before the next (four cycles a sample, which made the window
/// integrals most of an event's measurement); eight independent ones keep the adder busy.
/// The result is not the in-order sum to the last bit but is as good: the rounding error
/// of a sum in order grows with the count of terms (Higham, "Accuracy and Stability of
/// Numerical Algorithms", 2nd ed., ch. 4, from memory), here with an eighth of it. An
/// empty sum is `-0.0`, as `Iterator::sum` gives.
#[inline]
pub fn lane_sum(x: &[f64], y: &[f64], f: impl Fn(f64, f64) -> f64) -> f64 {
    let n = x.len().min(y.len());
    let (x, y) = (&x[..n], &y[..n]);
    let mut lanes = [-0.0f64; 8];
    let (xc, yc) = (x.chunks_exact(8), y.chunks_exact(8));
    let (xr, yr) = (xc.remainder(), yc.remainder());
    for (a, b) in xc.zip(yc) {
        for j in 0..8 {
            lanes[j] += f(a[j], b[j]);
        }
    }
    let tail = xr.iter().zip(yr).fold(-0.0, |s, (&a, &b)| s + f(a, b));
    let [l0, l1, l2, l3, l4, l5, l6, l7] = lanes;
    (((l0 + l1) + (l2 + l3)) + ((l4 + l5) + (l6 + l7))) + tail
}

/// Running sums of a window, `P[j] = y[0] + ... + y[j-1]` added up in order once, from
/// which centred moving averages of any width are read: the average at `k` over `w`
/// samples is `(P[b] - P[a]) / (b - a)` over `a = k - w/2 .. b = k + w - w/2`, cut to the
/// window (shorter at the ends). One set of sums serves every width a measurement asks
/// for, so the sequential additions are made once.
pub struct RunningSums {
    p: Vec<f64>,
    /// The largest `|P[j]|`, which bounds the rounding of every average.
    p_max: f64,
}

/// Averages worked out together when only some are wanted (a search from the end).
const BLOCK: usize = 4096;

impl RunningSums {
    pub fn of(y: &[f64]) -> Self {
        let mut p = Vec::with_capacity(y.len() + 1);
        p.push(0.0);
        let mut sum = 0.0f64;
        p.extend(y.iter().map(|&x| {
            sum += x;
            sum
        }));
        // The largest magnitude afterwards, over eight lanes: kept alongside the sums it
        // was a second chain of dependent operations (`max` waits for the last `max`),
        // slower than the additions. The largest of a set is the same in any order.
        let mut lanes = [0.0f64; 8];
        let chunks = p.chunks_exact(8);
        let rest = chunks.remainder();
        for c in chunks {
            for j in 0..8 {
                lanes[j] = lanes[j].max(c[j].abs());
            }
        }
        let p_max = lanes
            .iter()
            .chain(rest)
            .fold(0.0f64, |m, &x| m.max(x.abs()));
        RunningSums { p, p_max }
    }

    /// Samples in the window.
    pub fn len(&self) -> usize {
        self.p.len() - 1
    }

    /// The average at `k` over `w >= 2` samples.
    pub fn average(&self, k: usize, w: usize) -> f64 {
        let (a, b) = (k.saturating_sub(w / 2), (k + w - w / 2).min(self.len()));
        (self.p[b] - self.p[a]) / (b - a) as f64
    }

    /// Appends the averages over `w >= 2` samples at `k0..k1` to `out`.
    fn fill(&self, w: usize, k0: usize, k1: usize, out: &mut Vec<f64>) {
        let (n, h) = (self.len(), w / 2);
        // Away from the ends every average spans exactly `w` samples: one subtraction and
        // one division per sample over two shifted views of the sums (the same operations
        // as at the ends, so the same values).
        let inner0 = k0.max(h);
        let inner1 = k1.min((n + h + 1).saturating_sub(w)).max(inner0);
        for k in k0..inner0.min(k1) {
            out.push(self.average(k, w));
        }
        let m = inner1 - inner0;
        if m > 0 {
            let (a0, b0) = (inner0 - h, inner0 + w - h);
            let (b, a) = (&self.p[b0..b0 + m], &self.p[a0..a0 + m]);
            if w.is_power_of_two() {
                // Dividing by a power of two and multiplying by its inverse scale by the
                // same exact factor, so give the same value; the product is several
                // times cheaper.
                let inv = 1.0 / w as f64;
                out.extend(b.iter().zip(a).map(|(b, a)| (b - a) * inv));
            } else {
                let width = w as f64;
                out.extend(b.iter().zip(a).map(|(b, a)| (b - a) / width));
            }
        }
        for k in inner1.max(inner0.min(k1))..k1 {
            out.push(self.average(k, w));
        }
    }

    /// Index of the first largest average over `w >= 2` samples of `y` (the samples these
    /// sums were made of), worked out a block at a time (no copy of the window's length).
    /// A block whose samples all lie below a value some average reaches cannot hold the
    /// largest average and is passed over: so only the stretch around the spike is
    /// averaged, not the settled rest of a long window. The average at `near` is that
    /// value: any index gives the same result, one at (or by) the largest sample, which
    /// the caller has found already, lets the most be passed over.
    pub fn first_max_index(&self, y: &[f64], w: usize, near: usize) -> Option<usize> {
        debug_assert_eq!(y.len(), self.len());
        let (n, h) = (self.len(), w / 2);
        // Any one average bounds the largest from below.
        let floor = (n > 0).then(|| self.average(near.min(n - 1), w));
        // A computed average exceeds its largest sample by its rounding at most: each of
        // the `b - a` sums between P[a] and P[b] was rounded by at most u p_max (u = 2^-53),
        // so their share of the average is at most u p_max; the difference and the
        // division add u each of a value at most 2 p_max (a sample is the difference of
        // two sums). 5 u p_max in all; 2^-48 p_max (32 u) leaves room to spare.
        let margin = self.p_max * f64::EPSILON * 16.0;
        let mut buf = Vec::with_capacity(BLOCK);
        let mut best: Option<(usize, f64)> = None;
        let mut k0 = 0;
        while k0 < n {
            let k1 = (k0 + BLOCK).min(n);
            // The samples the averages at k0..k1 span.
            let span = &y[k0.saturating_sub(h)..(k1 - 1 + w - h).min(n)];
            if floor.is_some_and(|f| max_value(span) + margin < f) {
                k0 = k1;
                continue;
            }
            buf.clear();
            self.fill(w, k0, k1, &mut buf);
            if let Some(j) = first_max_index(&buf) {
                if best.is_none_or(|(_, m)| buf[j] > m) {
                    best = Some((k0 + j, buf[j]));
                }
            }
            k0 = k1;
        }
        best.map(|(k, _)| k)
    }

    /// Index of the last average over `w >= 2` samples beyond `band` either side of zero,
    /// worked out a block at a time from the end (a settled window's search stops long
    /// before its start, and no copy of the window's length is made).
    pub fn last_beyond(&self, w: usize, band: f64) -> Option<usize> {
        let mut buf = Vec::with_capacity(BLOCK);
        let mut k1 = self.len();
        while k1 > 0 {
            let k0 = k1.saturating_sub(BLOCK);
            buf.clear();
            self.fill(w, k0, k1, &mut buf);
            if let Some(j) = last_beyond(&buf, band) {
                return Some(k0 + j);
            }
            k1 = k0;
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The largest running sum's magnitude, found after the sums over eight lanes, is the
    /// one the in-order fold finds, for every length around the lane count.
    #[test]
    fn largest_running_sum() {
        for n in 0..40 {
            let y = record(n);
            let sums = RunningSums::of(&y);
            let mut sum = 0.0f64;
            let plain = y.iter().fold(0.0f64, |m, &x| {
                sum += x;
                m.max(sum.abs())
            });
            assert_eq!(sums.p_max.to_bits(), plain.to_bits(), "n = {n}");
        }
    }

    /// Sums over eight lanes: exact where every partial sum is (multiples of 1/1024 of
    /// modest size), so equal to the sum in order; within the textbook bound of it
    /// elsewhere (n u times the sum of magnitudes, u = 2^-53); `-0.0` when empty, as the
    /// standard library's sum.
    #[test]
    fn sums_over_eight_lanes() {
        for n in [0usize, 1, 7, 8, 9, 63, 1000] {
            let x: Vec<f64> = (0..n)
                .map(|k| ((k * 37) % 101) as f64 / 1024.0 - 0.046875)
                .collect();
            let y: Vec<f64> = (0..n + 3).map(|k| (k % 7) as f64 - 3.0).collect();
            let plain: f64 = x.iter().zip(&y).map(|(a, b)| a * b).sum();
            let lanes = lane_sum(&x, &y, |a, b| a * b);
            assert_eq!(lanes.to_bits(), plain.to_bits(), "n = {n}");
        }
        assert_eq!(lane_sum(&[], &[], |a, _| a).to_bits(), (-0.0f64).to_bits());
        let x: Vec<f64> = (0..100_003)
            .map(|k| (0.37 * k as f64).sin() * 1e3 + 0.1)
            .collect();
        let lanes = lane_sum(&x, &x, |a, _| a - 0.1);
        let plain: f64 = x.iter().map(|a| a - 0.1).sum();
        let bound =
            x.len() as f64 * f64::EPSILON / 2.0 * x.iter().map(|a| (a - 0.1).abs()).sum::<f64>();
        assert!(
            (lanes - plain).abs() <= 2.0 * bound,
            "{lanes} {plain} {bound}"
        );
    }

    /// Every average over `w >= 2` samples, through the block-filling path the searches use.
    fn averages(sums: &RunningSums, w: usize) -> Vec<f64> {
        let mut out = Vec::new();
        sums.fill(w, 0, sums.len(), &mut out);
        out
    }

    /// A record with repeated values (ties for the largest) and both signs.
    fn record(n: usize) -> Vec<f64> {
        (0..n)
            .map(|k| ((k * 37) % 11) as f64 - 4.5 + 1e-3 * (k % 97) as f64)
            .collect()
    }

    #[test]
    fn the_first_largest_value_is_the_one_a_plain_fold_finds() {
        // The fold the measurement used before: a later sample replaces the best only when
        // strictly larger, so the first of equal largest values wins.
        let plain = |y: &[f64]| {
            (0..y.len()).fold(None::<usize>, |best, k| match best {
                Some(b) if y[b] >= y[k] => Some(b),
                _ => Some(k),
            })
        };
        let y = record(3000);
        for n in [0, 1, 2, 7, 8, 9, 17, 100, 3000] {
            assert_eq!(first_max_index(&y[..n]), plain(&y[..n]), "n {n}");
        }
        assert_eq!(first_max_index(&[-1.0, -0.0, 0.0, -2.0]), Some(1));
        assert_eq!(first_max_index(&[3.0; 20]), Some(0));
    }

    #[test]
    fn the_last_sample_beyond_a_band_is_the_one_a_plain_search_finds() {
        let y = record(3000);
        for n in [0, 1, 7, 8, 9, 15, 16, 17, 3000] {
            for band in [0.0, 3.0, 5.4, 5.6, 10.0] {
                let want = y[..n].iter().rposition(|x| x.abs() > band);
                assert_eq!(last_beyond(&y[..n], band), want, "n {n}, band {band}");
            }
        }
    }

    #[test]
    fn averages_match_the_direct_sums_at_every_length() {
        // Each average straight from its definition (the mean of y[k - w/2 .. k + w - w/2]
        // cut to the record), from the same prefix sums, so the values agree exactly.
        let y = record(9000);
        // Short records, and long ones across the blocks searches work in.
        for n in [0, 1, 3, 15, 16, 17, 40, 4095, 4096, 4097, 4104, 9000] {
            for w in [2, 3, 4, 16, 41] {
                let y = &y[..n];
                let mut prefix = vec![0.0];
                for &x in y {
                    prefix.push(prefix.last().unwrap() + x);
                }
                let want: Vec<f64> = (0..n)
                    .map(|k| {
                        let (a, b) = (k.saturating_sub(w / 2), (k + w - w / 2).min(n));
                        (prefix[b] - prefix[a]) / (b - a) as f64
                    })
                    .collect();
                let sums = RunningSums::of(y);
                assert_eq!(averages(&sums, w), want, "n {n}, w {w}");
                for near in [0, n / 2, n.saturating_sub(1)] {
                    assert_eq!(
                        sums.first_max_index(y, w, near),
                        first_max_index(&want),
                        "n {n}, w {w}"
                    );
                }
                for band in [0.5, 2.0, 4.9] {
                    let last = want.iter().rposition(|x| x.abs() > band);
                    assert_eq!(sums.last_beyond(w, band), last, "n {n}, w {w}");
                }
            }
        }
    }

    /// Long records, mostly quiet, whose largest averages sit in a few blocks: the search
    /// that passes over blocks below an average already reached finds what averaging
    /// every sample finds, also for ties between a flat top and an earlier one, a single
    /// sample as high as the largest average, and negative records.
    #[test]
    fn the_largest_average_of_a_mostly_quiet_record_is_found() {
        let quiet: Vec<f64> = record(40_000).iter().map(|x| 0.01 * x).collect();
        let mut cases = Vec::new();
        // One spike far into the record.
        let mut y = quiet.clone();
        for k in 0..300 {
            y[25_000 + k] = 50.0 * (std::f64::consts::PI * k as f64 / 300.0).sin();
        }
        cases.push(y.clone());
        // Flat tops of 7 at 30 000 and (first) at 9000, and one sample of 7 at 2000.
        for k in 0..40 {
            y[30_000 + k] = 7.0;
            y[9000 + k] = 7.0;
        }
        y[2000] = 7.0;
        cases.push(y.iter().map(|x| x.min(7.0)).collect());
        // All below zero.
        cases.push(y.iter().map(|x| x - 100.0).collect());
        for y in &cases {
            let sums = RunningSums::of(y);
            let peak = first_max_index(y).unwrap_or(0);
            for w in [2, 3, 16, 41] {
                for near in [peak, 0, 31_000] {
                    assert_eq!(
                        sums.first_max_index(y, w, near),
                        first_max_index(&averages(&sums, w)),
                        "w {w}, near {near}"
                    );
                }
            }
        }
    }

    #[test]
    fn averages_keep_a_constant_and_a_ramp() {
        let c = averages(&RunningSums::of(&[2.0; 10]), 4);
        assert!(c.iter().all(|&x| (x - 2.0).abs() < 1e-12));
        let r: Vec<f64> = (0..10).map(|k| k as f64).collect();
        let m = averages(&RunningSums::of(&r), 3);
        assert!((m[5] - 5.0).abs() < 1e-12);
    }
}
