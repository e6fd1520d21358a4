//! Passes over a whole event window, written so the compiler vectorises them.
//!
//! A window held back by the memory bound is half a million samples, and a measurement
//! walks it several times: the running sums behind the smoothed copies, the largest value,
//! the last sample out of the settling band. Folds that carry an index along, or searches
//! that stop at the first hit, run one sample at a time; here the values are found over
//! eight lanes first and the index looked up afterwards, and searches test eight samples
//! at once. Every function gives exactly what its plain one-sample-at-a-time form gives
//! (unit tests below compare them); samples are finite, which the readers guarantee. The
//! exceptions are [`lane_sum`] and the integral [`orient`] adds up: a sum over eight lanes
//! is another order of additions. [`orient`] makes the window's values and, in the same
//! pass, the extremes of each block the searches then read instead of the samples.
//! ([`window_sums_bound`] is a bound, with its rounding allowed for by whoever uses it.)

use std::cell::{Ref, RefCell};

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

/// The largest `|y[k]|` (zero for none).
#[inline(always)]
fn max_abs(y: &[f64]) -> f64 {
    let mut lanes = [0.0f64; 8];
    let chunks = y.chunks_exact(8);
    let rest = chunks.remainder();
    for c in chunks {
        for j in 0..8 {
            let a = c[j].abs();
            lanes[j] = if a > lanes[j] { a } else { lanes[j] };
        }
    }
    lanes
        .iter()
        .chain(rest)
        .fold(0.0f64, |m, x| if x.abs() > m { x.abs() } else { m })
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

/// What one pass over a window finds besides its samples: each [`BLOCK`]'s largest value
/// and largest magnitude, and the sum and the largest of all the magnitudes. The searches
/// over a long window ([`RunningSums::first_max_index`], [`RunningSums::last_beyond`])
/// judge most blocks by their extremes alone; reading them here instead of walking the
/// window again for each search saves a pass over memory per search (a window at the
/// memory bound is four megabytes, past the cache).
#[derive(Debug, Clone, Default)]
pub struct Extremes {
    block_max: Vec<f64>,
    block_abs_max: Vec<f64>,
    /// The sum of `|y|`, over eight lanes.
    abs_sum: f64,
    /// The largest `|y|` (zero for none).
    abs_max: f64,
}

impl Extremes {
    /// The extremes of `y`, in one pass (tests; the measurement has [`orient`] find them).
    #[cfg(test)]
    pub fn of(y: &[f64]) -> Self {
        orient(y, 0.0, 1.0).extremes
    }

    /// The largest value (minus infinity for none).
    pub fn max(&self) -> f64 {
        greatest(f64::NEG_INFINITY, &self.block_max)
    }

    /// Index of the first largest value of `y`, the samples these extremes were found of
    /// (what [`first_max_index`] gives, with the largest value known: the search stops
    /// at it).
    pub fn first_max_index(&self, y: &[f64]) -> Option<usize> {
        let m = self.max();
        y.iter().position(|&x| x == m)
    }

    /// Index of the first largest of `y[1..]` (as an index into `y`): the largest after
    /// a window's edge sample. Only when the edge sample is itself the largest does it
    /// take a second look.
    pub fn first_max_index_after_first(&self, y: &[f64]) -> Option<usize> {
        match self.first_max_index(y) {
            Some(0) => first_max_index(y.get(1..)?).map(|j| j + 1),
            other => other,
        }
    }

    /// The whole blocks inside `a..b` of a window of `n` samples (the last block may be
    /// short), as block indices.
    fn whole_blocks(&self, a: usize, b: usize, n: usize) -> std::ops::Range<usize> {
        let i0 = a.div_ceil(BLOCK);
        let i1 = if b == n {
            self.block_max.len()
        } else {
            b / BLOCK
        };
        i0..i1.max(i0)
    }

    /// The largest of `y[a..b]`: the whole blocks' from the extremes, the samples at the
    /// ends read. Exact (a largest value does not depend on the order it is found in).
    fn span_max(&self, y: &[f64], a: usize, b: usize) -> f64 {
        let blocks = self.whole_blocks(a, b, y.len());
        if blocks.is_empty() {
            return max_value(&y[a..b]);
        }
        let (from, to) = (blocks.start * BLOCK, (blocks.end * BLOCK).min(y.len()));
        let inner = greatest(f64::NEG_INFINITY, &self.block_max[blocks]);
        let edges = max_value(&y[a..from]).max(max_value(&y[to..b]));
        inner.max(edges)
    }

    /// The largest `|y[k]|` over `a..b`, as [`Extremes::span_max`] finds the largest value.
    fn span_abs_max(&self, y: &[f64], a: usize, b: usize) -> f64 {
        let blocks = self.whole_blocks(a, b, y.len());
        if blocks.is_empty() {
            return max_abs(&y[a..b]);
        }
        let (from, to) = (blocks.start * BLOCK, (blocks.end * BLOCK).min(y.len()));
        let inner = greatest(0.0, &self.block_abs_max[blocks]);
        inner.max(max_abs(&y[a..from])).max(max_abs(&y[to..b]))
    }
}

/// The larger of `start` and the largest of `x`.
fn greatest(start: f64, x: &[f64]) -> f64 {
    x.iter().fold(start, |m, &v| if v > m { v } else { m })
}

/// The window-long sums [`orient`] keeps over eight lanes.
struct Lanes {
    sum: [f64; 8],
    abs: [f64; 8],
}

impl Default for Lanes {
    fn default() -> Self {
        // An empty sum is -0.0, as `Iterator::sum` and [`lane_sum`] give.
        Lanes {
            sum: [-0.0; 8],
            abs: [0.0; 8],
        }
    }
}

/// A block's extremes over eight lanes.
struct BlockLanes {
    max: [f64; 8],
    abs_max: [f64; 8],
}

impl Default for BlockLanes {
    fn default() -> Self {
        BlockLanes {
            max: [f64::NEG_INFINITY; 8],
            abs_max: [0.0; 8],
        }
    }
}

/// [`orient`]'s extremes and sums over the whole eights of `y` (values already in the
/// spike's direction), lane `j` taking every eighth value. The lanes are locals of loops
/// of their own: updated in the structs eight at a time, beside the values' write, the
/// AVX2 build kept most of them on the stack and paired the rest into half-width vectors
/// (about ten instructions a sample; about four now, the turning included). The integral's
/// lanes add `v[k] - v_off`, which is `y` for an upward spike and `-y` for a downward one.
#[inline(always)]
fn orient_lanes(y: &[f64], s: f64, sums: &mut Lanes, ext: &mut BlockLanes) {
    let (mut max, mut abs_max, mut abs) = (ext.max, ext.abs_max, sums.abs);
    for c in y.chunks_exact(8) {
        for j in 0..8 {
            let (y, a) = (c[j], c[j].abs());
            max[j] = if y > max[j] { y } else { max[j] };
            abs_max[j] = if a > abs_max[j] { a } else { abs_max[j] };
            abs[j] += a;
        }
    }
    (ext.max, ext.abs_max, sums.abs) = (max, abs_max, abs);
    // (`a - y` is `a + -y` to the bit: IEEE 754 defines the difference so.)
    let mut sum = sums.sum;
    if s > 0.0 {
        for c in y.chunks_exact(8) {
            for j in 0..8 {
                sum[j] += c[j];
            }
        }
    } else {
        for c in y.chunks_exact(8) {
            for j in 0..8 {
                sum[j] -= c[j];
            }
        }
    }
    sums.sum = sum;
}

/// A window in the spike's direction, as [`orient`] makes it.
pub struct Oriented {
    /// `s * (v[k] - v_off)`.
    pub ys: Vec<f64>,
    pub extremes: Extremes,
    /// The sum of `v[k] - v_off` from the second sample on (the window integral after the
    /// edge sample), over eight lanes (`k` modulo 8, then pairwise, then the samples past
    /// the last whole eight in order; the same rounding [`lane_sum`] has, lanes counted
    /// from the window's first sample).
    pub after_sum: f64,
}

crate::avx2::twice_compiled!(
    /// The samples `v` in the spike's direction, `s * (v[k] - v_off)` (`s` is one or minus
    /// one), with their [`Extremes`] and the window integral's sum, in one pass over `v`:
    /// the values, their largest, the largest magnitude and the integral were four passes
    /// over a long window, each reading it from memory again.
    pub fn orient(v: &[f64], v_off: f64, s: f64) -> Oriented => orient_body;
);

#[inline(always)]
fn orient_body(v: &[f64], v_off: f64, s: f64) -> Oriented {
    let n = v.len();
    // Not zeroed first: filling a window's length with zeros cost as much as the pass.
    let mut ys = Vec::with_capacity(n);
    let n_blocks = n.div_ceil(BLOCK);
    let (mut block_max, mut block_abs_max) =
        (Vec::with_capacity(n_blocks), Vec::with_capacity(n_blocks));
    let mut sums = Lanes::default();
    let mut tail = -0.0f64;
    let mut abs_tail = 0.0f64;
    for (b, vb) in v.chunks(BLOCK).enumerate() {
        // The block is turned into `ys` (a loop the compiler vectorises), and its extremes
        // and sums taken from the turned values while they sit in the cache. (Written
        // eight values at a time into the growing vector, the pass had a possible
        // reallocation inside its loop: a call, across which no vector register survives.
        // A copy, then the turning in place, was 4 % of a long WAV's CPU time in `memcpy`.)
        let from = ys.len();
        ys.extend(vb.iter().map(|&x| s * (x - v_off)));
        let yb = &ys[from..];
        let mut ext = BlockLanes::default();
        let rest = yb.chunks_exact(8).remainder();
        let whole = yb.len() - rest.len();
        let mut lanes_from = 0;
        if b == 0 && whole >= 8 {
            // The window's first sample (the edge) is left out of the integral: its
            // lane, which holds only that sample yet, is emptied again.
            orient_lanes(&yb[..8], s, &mut sums, &mut ext);
            sums.sum[0] = -0.0;
            lanes_from = 8;
        }
        orient_lanes(&yb[lanes_from..whole], s, &mut sums, &mut ext);
        // Only the last block has samples past its last whole eight.
        let mut max_r = f64::NEG_INFINITY;
        let mut amax_r = 0.0f64;
        for (j, &y) in rest.iter().enumerate() {
            if !(b == 0 && j == 0 && whole == 0) {
                // (`s` is one or minus one: `s * y` is `v[k] - v_off` to the bit.)
                tail += s * y;
            }
            let a = y.abs();
            abs_tail += a;
            max_r = if y > max_r { y } else { max_r };
            amax_r = if a > amax_r { a } else { amax_r };
        }
        block_max.push(greatest(max_r, &ext.max));
        block_abs_max.push(greatest(amax_r, &ext.abs_max));
    }
    let sum_l = sums.sum;
    let abs_l = sums.abs;
    let [l0, l1, l2, l3, l4, l5, l6, l7] = sum_l;
    let after_sum = (((l0 + l1) + (l2 + l3)) + ((l4 + l5) + (l6 + l7))) + tail;
    let abs_sum = abs_l.iter().sum::<f64>() + abs_tail;
    let abs_max = greatest(0.0, &block_abs_max);
    Oriented {
        ys,
        extremes: Extremes {
            block_max,
            block_abs_max,
            abs_sum,
            abs_max,
        },
        after_sum,
    }
}

/// Running sums of a window, `P[j] = y[0] + ... + y[j-1]` added up in order, from which
/// centred moving averages of any width are read: the average at `k` over `w` samples is
/// `(P[b] - P[a]) / (b - a)` over `a = k - w/2 .. b = k + w - w/2`, cut to the window
/// (shorter at the ends). One set of sums serves every width a measurement asks for.
///
/// The sums are made only as far as a question needs them (each waits for the one before:
/// four cycles a sample, a fifth of the measuring thread's time on a long capture when
/// they were made over the whole window at once). On a window cut at the memory bound the
/// event has settled after a few percent of it, and [`RunningSums::last_beyond`] proves the
/// settled rest inside the band without them (see [`window_sums_bound`]), so the sums, and
/// their memory, stop near the end of the ring.
pub struct RunningSums<'a> {
    y: &'a [f64],
    /// `P[0..=m]`, as far as made so far.
    p: RefCell<Vec<f64>>,
    /// At least every `|P[j]|`, made or not: the sum of `|y|`, rounded up.
    p_bound: f64,
    /// The largest `|y[k]|`.
    y_max: f64,
    extremes: Extremes,
}

/// Averages worked out together when only some are wanted (a search from the end).
const BLOCK: usize = 4096;

impl<'a> RunningSums<'a> {
    /// The sums of `y`, its extremes found in a pass of its own (tests).
    #[cfg(test)]
    pub fn of(y: &'a [f64]) -> Self {
        Self::with_extremes(y, Extremes::of(y))
    }

    /// The sums of `y`, whose extremes [`orient`] found as it made `y`.
    pub fn with_extremes(y: &'a [f64], extremes: Extremes) -> Self {
        // A sum of n terms in any order is within (n - 1) u of the exact one, relative to
        // the sum of magnitudes (Higham, "Accuracy and Stability of Numerical Algorithms",
        // 2nd ed., ch. 4, from memory): so each made |P[j]| is at most the exact sum of
        // |y| times (1 + n u), and the lanes' sum at least that sum times (1 - n u). A
        // NaN or infinity in `y` makes the bound so, and then nothing is passed over.
        let n = y.len() as f64 + 8.0;
        let p_bound = extremes.abs_sum * (1.0 + 4.0 * n * f64::EPSILON);
        let y_max = extremes.abs_max;
        let mut p = Vec::with_capacity(BLOCK + 1);
        p.push(0.0);
        RunningSums {
            y,
            p: RefCell::new(p),
            p_bound,
            y_max,
            extremes,
        }
    }

    /// Samples in the window.
    pub fn len(&self) -> usize {
        self.y.len()
    }

    /// Sums made so far (for tests).
    #[cfg(test)]
    fn made(&self) -> usize {
        self.p.borrow().len() - 1
    }

    /// The sums `P[0..=j]` (at least), made in order as far as needed, a block at a time.
    fn made_to(&self, j: usize) -> Ref<'_, Vec<f64>> {
        if self.p.borrow().len() <= j {
            let mut p = self.p.borrow_mut();
            let from = p.len() - 1;
            let to = j.max(from + BLOCK).min(self.y.len());
            let mut sum = p[from];
            p.extend(self.y[from..to].iter().map(|&x| {
                sum += x;
                sum
            }));
        }
        self.p.borrow()
    }

    /// The average at `k` over `w >= 2` samples.
    pub fn average(&self, k: usize, w: usize) -> f64 {
        let (a, b) = (k.saturating_sub(w / 2), (k + w - w / 2).min(self.len()));
        let p = self.made_to(b);
        (p[b] - p[a]) / (b - a) as f64
    }

    /// The averages at `k0..k1` that span fewer than `w` samples (cut by the window's
    /// ends) come first and last; those between span exactly `w`: `k` in `inner`.
    fn inner(&self, w: usize, k0: usize, k1: usize) -> std::ops::Range<usize> {
        let (n, h) = (self.len(), w / 2);
        let inner0 = k0.max(h);
        let inner1 = k1.min((n + h + 1).saturating_sub(w)).max(inner0);
        inner0..inner1
    }

    /// Appends the averages over `w >= 2` samples at `k0..k1` to `out`.
    fn fill(&self, w: usize, k0: usize, k1: usize, out: &mut Vec<f64>) {
        let h = w / 2;
        // Away from the ends every average spans exactly `w` samples: one subtraction and
        // one division per sample over two shifted views of the sums (the same operations
        // as at the ends, so the same values).
        let inner = self.inner(w, k0, k1);
        for k in k0..inner.start.min(k1) {
            out.push(self.average(k, w));
        }
        let m = inner.len();
        if m > 0 {
            let (a0, b0) = (inner.start - h, inner.start + w - h);
            let p = self.made_to(b0 + m - 1);
            let (b, a) = (&p[b0..b0 + m], &p[a0..a0 + m]);
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
        for k in inner.end.max(inner.start.min(k1))..k1 {
            out.push(self.average(k, w));
        }
    }

    /// How far an average read from the sums may lie from the exact mean of its samples,
    /// with p_max the largest |P[j]| (at most `p_bound`): each of the `b - a` sums between
    /// P[a] and P[b] was rounded by at most u p_max (u = 2^-53), so their share of the
    /// average is at most u p_max; the difference and the division add u each of a value
    /// at most 2 p_max (a sample is the difference of two sums). 5 u p_max in all; 2^-48
    /// of the bound (32 u) leaves room to spare.
    fn rounding(&self) -> f64 {
        self.p_bound * f64::EPSILON * 16.0
    }

    /// Whether every average over `w >= 2` samples at `k0..k1` is sure to lie within
    /// `band` of zero, judged without the running sums: first by the samples themselves
    /// (an average lies within their range), then by the magnitudes summed over cells
    /// ([`magnitude_cells_bound`], a bound above the exact sums), else by sums of each `w`
    /// samples made in a tree ([`window_sums_bound`]), whose rounding, with that of the
    /// averages from the running sums, is covered by a margin. `false` means only "not
    /// sure".
    fn surely_within(
        &self,
        w: usize,
        k0: usize,
        k1: usize,
        band: f64,
        tree: &mut TreeRoom,
    ) -> bool {
        let (n, h) = (self.len(), w / 2);
        // A sum of `w` samples, in a tree (at most 2 log2 w additions on the way) or in
        // order at the window's ends (at most w - 1), is within (w + 8) u w y_max of the
        // exact one, so its mean within (w + 8) u y_max; the caller's average from the
        // running sums adds [`RunningSums::rounding`]; the division and the limit here, u
        // of the band each. Twice each, as u is half of `EPSILON`, and room to spare.
        let margin =
            self.rounding() + f64::EPSILON * ((w + 16) as f64 * self.y_max + 16.0 * band.abs());
        let limit = band - margin;
        let (a, b) = (k0.saturating_sub(h), (k1 - 1 + w - h).min(n));
        if self.extremes.span_abs_max(self.y, a, b) <= limit {
            return true;
        }
        let inner = self.inner(w, k0, k1);
        let mut edges = (k0..inner.start.min(k1)).chain(inner.end.max(inner.start.min(k1))..k1);
        let edge_within = |k: usize| {
            let (a, b) = (k.saturating_sub(h), (k + w - h).min(n));
            let s: f64 = self.y[a..b].iter().sum();
            s.abs() / (b - a) as f64 <= limit
        };
        if !edges.all(edge_within) {
            return false;
        }
        let m = inner.len();
        if m == 0 {
            return true;
        }
        let a0 = inner.start - h;
        let span = &self.y[a0..a0 + m + w - 1];
        if magnitude_cells_bound(span, w) / w as f64 <= limit {
            return true;
        }
        let largest = window_sums_bound(span, w, m, tree);
        largest / w as f64 <= limit
    }

    /// Index of the first largest average over `w >= 2` samples of `y` (the samples these
    /// sums were made of), worked out a block at a time (no copy of the window's length).
    /// A block whose samples all lie below a value some average reaches cannot hold the
    /// largest average and is passed over: so only the stretch around the spike is
    /// averaged, not the settled rest of a long window. The average at `near` is that
    /// value: any index gives the same result, one at (or by) the largest sample, which
    /// the caller has found already, lets the most be passed over.
    pub fn first_max_index(&self, w: usize, near: usize) -> Option<usize> {
        let (y, n, h) = (self.y, self.len(), w / 2);
        // Any one average bounds the largest from below.
        let floor = (n > 0).then(|| self.average(near.min(n - 1), w));
        // A computed average exceeds its largest sample by its rounding at most.
        let margin = self.rounding();
        let mut buf = Vec::with_capacity(BLOCK);
        let mut best: Option<(usize, f64)> = None;
        let mut k0 = 0;
        while k0 < n {
            let k1 = (k0 + BLOCK).min(n);
            // The samples the averages at k0..k1 span: a..b.
            let (a, b) = (k0.saturating_sub(h), (k1 - 1 + w - h).min(n));
            if floor.is_some_and(|f| self.extremes.span_max(y, a, b) + margin < f) {
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
    /// before its start, and no copy of the window's length is made). A block proved
    /// inside the band without the running sums is passed over, so they are made only up
    /// to the block where the answer lies.
    pub fn last_beyond(&self, w: usize, band: f64) -> Option<usize> {
        let mut buf = Vec::with_capacity(BLOCK);
        let mut tree = TreeRoom::default();
        let mut k1 = self.len();
        while k1 > 0 {
            // Blocks counted from the window's start, as the extremes are.
            let k0 = (k1 - 1) / BLOCK * BLOCK;
            if self.surely_within(w, k0, k1, band, &mut tree) {
                k1 = k0;
                continue;
            }
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

/// Room for [`window_sums_bound`]'s levels, kept from block to block.
#[derive(Default)]
struct TreeRoom {
    level: Vec<f64>,
    next: Vec<f64>,
    sums: Vec<f64>,
}

/// Samples in a cell of [`magnitude_cells_bound`]: the widest window the settling search
/// smooths with.
const CELL: usize = 16;

crate::avx2::twice_compiled!(
    /// At least the largest `|y[t] + ... + y[t + w - 1]|` over the windows of `w <= 16`
    /// samples inside `span` (infinity for wider ones): the span is cut into cells of
    /// sixteen samples, a window lies within two neighbouring cells, and the magnitudes
    /// summed over two cells bound its sum. On a settled stretch this proves the averages
    /// inside the band in one pass where [`window_sums_bound`] takes four: noise's average
    /// magnitude is 0.8 of its deviation, so 32 samples over 16 come to about 1.6
    /// deviations against a band of three and a code (it proved every block of the
    /// benchmark's long WAV the tree proved). A sum of 32 non-negative terms is within
    /// 31 u of the exact one; the bound is raised by 64 `EPSILON` (128 u) to lie above it,
    /// the product's rounding included.
    fn magnitude_cells_bound(span: &[f64], w: usize) -> f64 => magnitude_cells_bound_body;
);

#[inline(always)]
fn magnitude_cells_bound_body(span: &[f64], w: usize) -> f64 {
    if w > CELL {
        return f64::INFINITY;
    }
    let cells = span.chunks_exact(CELL);
    let rest = cells.remainder();
    // The cell before's sum, and the largest sum over two neighbouring cells (a first
    // cell alone counts as one with an empty cell before it).
    let (mut before, mut largest) = (0.0f64, 0.0f64);
    for c in cells {
        let mut l = [0.0f64; 4];
        for q in 0..4 {
            for j in 0..4 {
                l[j] += c[4 * q + j].abs();
            }
        }
        let a = (l[0] + l[1]) + (l[2] + l[3]);
        let two = before + a;
        largest = if two > largest { two } else { largest };
        before = a;
    }
    let a: f64 = rest.iter().map(|x| x.abs()).sum();
    let two = before + a;
    largest = if two > largest { two } else { largest };
    largest * (1.0 + 64.0 * f64::EPSILON)
}

crate::avx2::twice_compiled!(
    /// The largest `|s_t|` over the sums `s_t` of `span[t..t + w]`, `t < m` (`span` holds
    /// `m + w - 1` samples). Each sum is made in a tree: level `j` holds the sums of `2^j`
    /// neighbours, each the sum of two of the level below, and `s_t` adds up one entry of
    /// each level in `w`'s binary digits. That is about one addition a sample a level, all
    /// independent (a sum in order over each window would take `w` a sample, and running
    /// sums wait for each other); at most five levels up to `w = 16`, the widest the
    /// settling search smooths with, so the rounding stays within a few u of `w` times the
    /// largest sample. A bound, not an average: only to prove a block inside a band.
    fn window_sums_bound(span: &[f64], w: usize, m: usize, room: &mut TreeRoom) -> f64
        => window_sums_bound_body;
);

#[inline(always)]
fn window_sums_bound_body(span: &[f64], w: usize, m: usize, room: &mut TreeRoom) -> f64 {
    let TreeRoom { level, next, sums } = room;
    // Level `width` holds `m + w - width` sums (level one is `span` itself); the digits
    // below `width` took `off` samples, and `off + width <= w` keeps each view inside.
    // The first digit's view is taken as the sums, and the last one's added with the
    // largest magnitude found in the same pass: for `w = 16` that is four passes over a
    // block in all.
    let top = usize::BITS - 1 - w.leading_zeros();
    let (mut width, mut off, mut started) = (1usize, 0usize, false);
    loop {
        let here: &[f64] = if width == 1 { span } else { level };
        if w & width != 0 {
            let view = &here[off..off + m];
            if width == 1 << top {
                // The last digit: add it and take the largest magnitude at once.
                return if started {
                    add_max_abs(sums, view)
                } else {
                    max_abs(view)
                };
            }
            if started {
                for (s, x) in sums.iter_mut().zip(view) {
                    *s += x;
                }
            } else {
                sums.clear();
                sums.extend_from_slice(view);
                started = true;
            }
            off += width;
        }
        next.clear();
        next.extend(here.iter().zip(&here[width..]).map(|(a, b)| a + b));
        std::mem::swap(level, next);
        width *= 2;
    }
}

/// The largest `|s[k] + x[k]|`.
#[inline(always)]
fn add_max_abs(s: &[f64], x: &[f64]) -> f64 {
    let mut lanes = [0.0f64; 8];
    let (sc, xc) = (s.chunks_exact(8), x.chunks_exact(8));
    let (sr, xr) = (sc.remainder(), xc.remainder());
    for (a, b) in sc.zip(xc) {
        for j in 0..8 {
            let v = (a[j] + b[j]).abs();
            lanes[j] = if v > lanes[j] { v } else { lanes[j] };
        }
    }
    let rest = sr.iter().zip(xr).map(|(a, b)| (a + b).abs());
    lanes
        .into_iter()
        .chain(rest)
        .fold(0.0f64, |m, v| if v > m { v } else { m })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The bound on the running sums holds every made sum's magnitude and is no looser
    /// than the sum of magnitudes it comes from (by a millionth), for every length around
    /// the lane count and a long record of large values; the largest sample is the
    /// largest `|y|`.
    #[test]
    fn the_running_sums_bound_holds_them_all() {
        let long: Vec<f64> = (0..100_003)
            .map(|k| (0.37 * k as f64).sin() * 1e3 + 7.5)
            .collect();
        for y in (0..40).map(record).chain([long]) {
            let sums = RunningSums::of(&y);
            let made = sums.made_to(y.len());
            let largest = made.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            let magnitudes: f64 = y.iter().map(|x| x.abs()).sum();
            let n = y.len();
            assert!(sums.p_bound >= largest, "n = {n}");
            assert!(sums.p_bound <= magnitudes * (1.0 + 1e-6), "n = {n}");
            let y_max = y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            assert_eq!(sums.y_max.to_bits(), y_max.to_bits(), "n = {n}");
        }
    }

    /// The tree's window sums against sums in order: every width to 41 (all the binary
    /// digit patterns the settling search meets, and wider), every offset of a short
    /// record; within a few u of the sum of magnitudes (the bound the margin allows for).
    #[test]
    fn window_sums_in_a_tree_match_the_direct_sums() {
        let y = record(300);
        let mut room = TreeRoom::default();
        for w in 1..=41 {
            for m in [1, 2, 7, 8, 9, 100, 300 - w + 1] {
                let span = &y[..m + w - 1];
                let direct = (0..m).map(|t| span[t..t + w].iter().sum::<f64>());
                let want = direct.fold(0.0f64, |a, s| a.max(s.abs()));
                let got = window_sums_bound(span, w, m, &mut room);
                let scale: f64 = span.iter().map(|x| x.abs()).sum();
                assert!(
                    (got - want).abs() <= 8.0 * f64::EPSILON * scale,
                    "w {w}, m {m}: {got} against {want}"
                );
            }
        }
        // Exactly the sums where every partial sum is exact.
        let ints: Vec<f64> = (0..50).map(|k| ((k * 7) % 13) as f64 - 6.0).collect();
        for w in 1..=16 {
            let m = ints.len() - w + 1;
            let want = (0..m)
                .map(|t| ints[t..t + w].iter().sum::<f64>().abs())
                .fold(0.0, f64::max);
            assert_eq!(window_sums_bound(&ints, w, m, &mut room), want, "w {w}");
        }
    }

    /// The cells' bound lies at or above the magnitude of every window's sum, the sums
    /// added up plainly here (the definition), for every width up to sixteen, at spans
    /// that end inside a cell and on its edge, with a large sample either side of a
    /// cell's edge (only a window across the edge sees both, and its sum is the largest);
    /// and it is no proof at all for wider windows. Both builds agree to the bit.
    #[test]
    fn the_cells_bound_every_window_s_sum() {
        let mut g = 5u64;
        let mut next = || {
            g = g
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (g >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        for len in [1, 15, 16, 17, 31, 32, 33, 200] {
            let noise: Vec<f64> = (0..len).map(|_| next()).collect();
            let mut spiked = vec![0.001; len];
            for at in [15, 16] {
                if at < len {
                    spiked[at] = 2.0;
                }
            }
            for y in [&noise, &spiked] {
                for w in 1..=16.min(len) {
                    let plain = (0..=len - w)
                        .map(|t| y[t..t + w].iter().sum::<f64>().abs())
                        .fold(0.0f64, f64::max);
                    let bound = magnitude_cells_bound(y, w);
                    assert!(bound >= plain, "len {len} w {w}: {bound} < {plain}");
                    // The baseline build gives the same bits as the AVX2 one.
                    assert_eq!(bound.to_bits(), magnitude_cells_bound_body(y, w).to_bits());
                    // Not looser than the magnitudes of every sample twice over.
                    let all: f64 = y.iter().map(|x| x.abs()).sum();
                    assert!(bound <= 2.0 * all + 1e-12, "len {len} w {w}");
                }
            }
        }
        assert_eq!(magnitude_cells_bound(&[0.0; 40], 17), f64::INFINITY);
    }

    /// A long record that rings, then settles into noise larger than the band while its
    /// averages stay inside: the search from the end gives the definition's answer (the
    /// last average beyond the band, by the same running sums made whole), and makes
    /// the running sums only to a block or two past it, not to the end. With the band
    /// below the noise's averages, nothing can be passed over and the answer is the end.
    #[test]
    fn the_settled_rest_is_passed_over_without_the_running_sums() {
        let n = 200_000;
        let mut g = 99u64;
        let y: Vec<f64> = (0..n)
            .map(|k| {
                g = g
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let noise = ((g >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.4;
                let x = k as f64;
                40.0 * (-x / 3000.0).exp() * (x / 50.0).sin() + noise
            })
            .collect();
        for w in [2, 5, 11, 16] {
            let want_sums = RunningSums::of(&y);
            let every = averages(&want_sums, w);
            // The noise (±0.2) pokes out of a band of 0.15, its averages (over 11 or 16
            // samples) do not.
            for band in [0.15, 0.5] {
                let want = every.iter().rposition(|x| x.abs() > band);
                let sums = RunningSums::of(&y);
                let got = sums.last_beyond(w, band);
                assert_eq!(got, want, "w {w}, band {band}");
                let last = want.unwrap();
                if w >= 11 || band == 0.5 {
                    assert!(last < 60_000, "w {w}, band {band}: {last}");
                    assert!(
                        sums.made() <= last + 3 * BLOCK,
                        "w {w}, band {band}: sums made to {} for an answer at {last}",
                        sums.made()
                    );
                }
            }
            let sums = RunningSums::of(&y);
            assert_eq!(
                sums.last_beyond(w, 0.0),
                every.iter().rposition(|x| x.abs() > 0.0)
            );
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

    /// `orient` against each of the passes it replaces, written plainly from their
    /// definitions: the values exactly; each block's largest value and magnitude and the
    /// overall largest magnitude exactly (a largest value does not depend on the order);
    /// the sum of magnitudes within n u of the sum in order (it only feeds a bound); the
    /// integral after the edge sample exactly as the eight lanes (`k` modulo 8, `k >= 1`)
    /// add it, and within n u of the sum in order. Both polarities, every length around
    /// the lane count and the block.
    #[test]
    fn one_pass_gives_what_the_separate_passes_give() {
        let long = record(12_300);
        for n in [
            0, 1, 2, 7, 8, 9, 15, 16, 17, 4095, 4096, 4097, 4104, 8192, 12_300,
        ] {
            let v = &long[..n];
            for (s, v_off) in [(1.0, 0.75), (-1.0, -2.25)] {
                let got = orient(v, v_off, s);
                let ys: Vec<f64> = v.iter().map(|&x| s * (x - v_off)).collect();
                assert_eq!(got.ys, ys, "n {n}");
                let ex = &got.extremes;
                assert_eq!(ex.block_max.len(), n.div_ceil(BLOCK), "n {n}");
                for (b, block) in ys.chunks(BLOCK).enumerate() {
                    assert_eq!(ex.block_max[b], max_value(block), "n {n}, block {b}");
                    let m = block.iter().fold(0.0f64, |m, y| m.max(y.abs()));
                    assert_eq!(ex.block_abs_max[b], m, "n {n}, block {b}");
                }
                assert_eq!(ex.max(), max_value(&ys), "n {n}");
                assert_eq!(ex.abs_max, ys.iter().fold(0.0f64, |m, y| m.max(y.abs())));
                let in_order: f64 = ys.iter().map(|y| y.abs()).sum();
                let tol = n as f64 * f64::EPSILON * in_order;
                assert!((ex.abs_sum - in_order).abs() <= tol, "n {n}");
                // The integral's eight lanes, from the definition.
                let t: Vec<f64> = v.iter().map(|&x| x - v_off).collect();
                let whole = n / 8 * 8;
                let mut lanes = [-0.0f64; 8];
                for k in 1..whole {
                    lanes[k % 8] += t[k];
                }
                let tail = t[whole.max(1).min(n)..].iter().fold(-0.0, |a, &x| a + x);
                let [l0, l1, l2, l3, l4, l5, l6, l7] = lanes;
                let want = (((l0 + l1) + (l2 + l3)) + ((l4 + l5) + (l6 + l7))) + tail;
                assert_eq!(got.after_sum.to_bits(), want.to_bits(), "n {n}");
                let in_order: f64 = t.iter().skip(1).sum();
                let scale: f64 = t.iter().map(|x| x.abs()).sum();
                assert!((got.after_sum - in_order).abs() <= n as f64 * f64::EPSILON * scale);
            }
        }
    }

    /// The largest value and magnitude over any stretch, read from the blocks' extremes
    /// where the stretch covers whole blocks (the short last block included), equal the
    /// ones found by walking the stretch.
    #[test]
    fn a_stretch_s_extremes_are_read_from_its_blocks() {
        for n in [5, 4096, 4100, 10_000, 12_288] {
            let y: Vec<f64> = record(n).iter().map(|x| -x).collect();
            let ex = Extremes::of(&y);
            let cuts = [0, 1, 4095, 4096, 4097, 8191, 8192, 9000, n - 1, n];
            for &a in cuts.iter().filter(|&&a| a <= n) {
                for &b in cuts.iter().filter(|&&b| a <= b && b <= n) {
                    assert_eq!(
                        ex.span_max(&y, a, b),
                        max_value(&y[a..b]),
                        "{a}..{b} of {n}"
                    );
                    assert_eq!(
                        ex.span_abs_max(&y, a, b),
                        max_abs(&y[a..b]),
                        "{a}..{b} of {n}"
                    );
                }
            }
        }
    }

    /// The peak after the edge sample: the first of equal largest values after it, also
    /// when the edge sample is larger still (then the search looks again without it).
    #[test]
    fn the_largest_after_the_edge_sample_skips_only_the_edge_sample() {
        let after_first = |y: &[f64]| Extremes::of(y).first_max_index_after_first(y);
        assert_eq!(after_first(&[1.0, 5.0, 5.0, 2.0]), Some(1));
        assert_eq!(after_first(&[9.0, 5.0, 7.0, 7.0]), Some(2));
        assert_eq!(after_first(&[7.0, 7.0, 1.0]), Some(1));
        assert_eq!(after_first(&[7.0]), None);
        assert_eq!(after_first(&[]), None);
        let mut long = record(9000);
        long[0] = 100.0;
        long[8500] = 50.0;
        assert_eq!(after_first(&long), Some(8500));
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
                        sums.first_max_index(w, near),
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
                        sums.first_max_index(w, near),
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
