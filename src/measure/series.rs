//! Passes over a whole event window, written so the compiler vectorises them.
//!
//! A window held back by the memory bound is half a million samples, and a measurement
//! walks it several times: the running sums behind the smoothed copies, the largest value,
//! the last sample out of the settling band. Folds that carry an index along, or searches
//! that stop at the first hit, run one sample at a time; here the values are found over
//! eight lanes first and the index looked up afterwards, and searches test eight samples
//! at once. Every function gives exactly what its plain one-sample-at-a-time form gives
//! (unit tests below compare them); samples are finite, which the readers guarantee.

/// Index of the first largest value of `y`.
pub fn first_max_index(y: &[f64]) -> Option<usize> {
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
    let m = lanes
        .iter()
        .chain(rest)
        .copied()
        .fold(f64::NEG_INFINITY, |m, x| if x > m { x } else { m });
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

/// Running sums of a window, `P[j] = y[0] + ... + y[j-1]` added up in order once, from
/// which centred moving averages of any width are read: the average at `k` over `w`
/// samples is `(P[b] - P[a]) / (b - a)` over `a = k - w/2 .. b = k + w - w/2`, cut to the
/// window (shorter at the ends). One set of sums serves every width a measurement asks
/// for, so the sequential additions are made once.
pub struct RunningSums {
    p: Vec<f64>,
}

/// Averages worked out together when only some are wanted (a search from the end).
const BLOCK: usize = 4096;

impl RunningSums {
    pub fn of(y: &[f64]) -> Self {
        let mut p = Vec::with_capacity(y.len() + 1);
        p.push(0.0);
        let mut sum = 0.0;
        p.extend(y.iter().map(|&x| {
            sum += x;
            sum
        }));
        RunningSums { p }
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
            let width = w as f64;
            out.extend(
                self.p[b0..b0 + m]
                    .iter()
                    .zip(&self.p[a0..a0 + m])
                    .map(|(b, a)| (b - a) / width),
            );
        }
        for k in inner1.max(inner0.min(k1))..k1 {
            out.push(self.average(k, w));
        }
    }

    /// Index of the first largest average over `w >= 2` samples, worked out a block at a
    /// time (no copy of the window's length).
    pub fn first_max_index(&self, w: usize) -> Option<usize> {
        let mut buf = Vec::with_capacity(BLOCK);
        let mut best: Option<(usize, f64)> = None;
        let mut k0 = 0;
        while k0 < self.len() {
            let k1 = (k0 + BLOCK).min(self.len());
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
                assert_eq!(
                    sums.first_max_index(w),
                    first_max_index(&want),
                    "n {n}, w {w}"
                );
                for band in [0.5, 2.0, 4.9] {
                    let last = want.iter().rposition(|x| x.abs() > band);
                    assert_eq!(sums.last_beyond(w, band), last, "n {n}, w {w}");
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
