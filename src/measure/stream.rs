//! Measuring a record too long to hold in memory, in a few passes over its samples.
//!
//! [`super::measure_trace`] looks at the whole record at once. Here the record is a
//! [`Replay`]: something that can hand out its samples block by block, from the first to the
//! last, as often as asked (a spill file, a WAV file opened again, a slice in tests). The
//! steps are the same and share their code with `measure_trace`:
//!
//! 1. While the record is first read, a [`Surveyor`] keeps its range, a thinned copy
//!    (every `stride`-th sample, at most [`StreamLimits::thin_samples`] of them) and a
//!    thinned set of neighbouring-sample pairs. The state levels come from the thinned
//!    copy, the noise and the ADC step from the pairs (the whole-record path also takes a
//!    strided subset of the pairs, so for a record of up to `thin_samples` samples both
//!    paths agree exactly).
//! 2. The dwell (unless `--min-on-time` gives it) comes from the on runs of the thinned
//!    copy, their lengths times the stride.
//! 3. One pass feeds the edge detector and keeps only the samples of the open event window
//!    (and a short history for the stretch before the next edge); each window is measured
//!    as soon as the turn-on after it is seen. Windows longer than
//!    [`StreamLimits::window_samples`] are cut there, and a warning says so.
//! 4. When the local levels disagree with the histogram ones, steps 2 and 3 run again
//!    with the local levels, as in `measure_trace`.
//!
//! So a record is read twice (three times when the levels are refined), whatever its
//! length.
//!
//! Memory is the thinned copy, the pairs, the open window and the closed ones being
//! measured on other threads: bounded by the limits, whatever the record's length.

use super::{
    check_length_and_interval, choose_levels, conclude, cross_check, edge_params, event, near_on,
    CaptureMeasurement, Event, Found, MeasureError, MeasureOptions, Survey, Trace, MIN_STATE_RUN,
};
use crate::capture::{AdcRange, TakeValues};
use crate::{events, levels};

/// Memory bounds of the streaming measurement, in samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct StreamLimits {
    /// Most samples of the thinned copy the state levels come from.
    pub thin_samples: usize,
    /// Most neighbouring-sample pairs kept for the noise and ADC-step estimates.
    pub pairs: usize,
    /// Longest event window kept, edge to end.
    pub window_samples: usize,
    /// Most samples of closed windows being measured on other threads at once.
    pub batch_samples: usize,
}

impl Default for StreamLimits {
    fn default() -> Self {
        StreamLimits {
            thin_samples: 1 << 19,
            pairs: 1 << 18,
            // Measuring a window takes a few working copies of it: 4 MiB each at this
            // length.
            window_samples: 1 << 19,
            batch_samples: 1 << 19,
        }
    }
}

/// One block of a record: voltage samples and (when the record has one) current samples,
/// both the same length.
#[derive(Debug, Default)]
pub struct Samples {
    pub v: Vec<f64>,
    pub i: Option<Vec<f64>>,
}

/// What a [`Replay`] hands each block to; `false` stops the pass. The sink may keep the
/// block's vectors and leave others (of any length) in their place, which the source
/// fills next: so the scan keeps recent blocks without copying them.
pub type BlockSink<'a> = dyn FnMut(&mut Samples) -> bool + 'a;

/// A record that can be read again from its start, block by block.
pub trait Replay {
    /// Calls `each` with consecutive blocks of the record, from the first sample to the
    /// last. `each` returns `false` to stop early; the result says whether every block
    /// was handed out. The error message names the file and place.
    fn replay(&mut self, each: &mut BlockSink) -> Result<bool, String>;
}

/// A record already in memory, handed out in blocks of a fixed length (tests, and the
/// model for any other source).
pub struct SliceReplay<'a> {
    pub v: &'a [f64],
    pub i: Option<&'a [f64]>,
    pub block: usize,
}

impl Replay for SliceReplay<'_> {
    fn replay(&mut self, each: &mut BlockSink) -> Result<bool, String> {
        let block = self.block.max(1);
        let mut s = Samples::default();
        for (k, v) in self.v.chunks(block).enumerate() {
            let refill = |buf: &mut Vec<f64>, from: &[f64]| {
                buf.clear();
                buf.extend_from_slice(from);
            };
            refill(&mut s.v, v);
            let mut cur = s.i.take();
            s.i = self
                .i
                .and_then(|i| i.get(k * block..k * block + v.len()))
                .map(|i| {
                    let mut buf = cur.take().unwrap_or_default();
                    refill(&mut buf, i);
                    buf
                });
            if !each(&mut s) {
                return Ok(false);
            }
        }
        Ok(true)
    }
}

/// Keeps `v[from]`, `v[from + 2]`, ... at the front of `v` and drops the rest, in place: a
/// new vector for each halving of the survey's copies was pages faulted in afresh each time
/// (the copies are megabytes).
fn keep_every_other<T: Copy>(v: &mut Vec<T>, from: usize) {
    let kept = v.len().saturating_sub(from).div_ceil(2);
    for j in 0..kept {
        v[j] = v[from + 2 * j];
    }
    v.truncate(kept);
}

/// What is kept of the record while it is read the first time (step 1 of the module
/// notes). Thinning doubles the stride whenever the copy fills, so the kept samples are
/// always every `stride`-th one, whatever the length turns out to be.
#[derive(Debug, Clone)]
pub struct Surveyor {
    limits: StreamLimits,
    n: usize,
    lo: f64,
    hi: f64,
    thin: Vec<f64>,
    thin_stride: usize,
    pairs: Vec<(f64, f64)>,
    pair_stride: usize,
    /// Next sample index the thinned copy and the pairs take.
    next_thin: usize,
    next_pair: usize,
    last: Option<f64>,
}

impl Surveyor {
    pub fn new(limits: StreamLimits) -> Self {
        Surveyor {
            limits,
            n: 0,
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
            thin: Vec::new(),
            thin_stride: 1,
            pairs: Vec::new(),
            pair_stride: 1,
            next_thin: 0,
            next_pair: 1,
            last: None,
        }
    }

    /// Takes the next block of voltage samples.
    pub fn push(&mut self, block: &[f64]) {
        self.take_values(block.len(), levels::finite_extremes(block), |j| block[j]);
    }

    /// Samples taken so far.
    pub fn len(&self) -> usize {
        self.n
    }

    pub fn is_empty(&self) -> bool {
        self.n == 0
    }
}

impl TakeValues for Surveyor {
    /// Takes the next `len` voltage samples, given by their smallest and largest finite
    /// value and by `value(j)` for each `j < len` (asked only of the samples kept: a
    /// source that must convert its samples, a run of stored codes, converts only those).
    #[inline]
    fn take_values(
        &mut self,
        len: usize,
        extremes: Option<(f64, f64)>,
        value: impl Fn(usize) -> f64,
    ) {
        let base = self.n;
        let end = base + len;
        if let Some((lo, hi)) = extremes {
            self.lo = self.lo.min(lo);
            self.hi = self.hi.max(hi);
        }
        // Taken a run at a time, as many as the copy has room for: one sample pushed per
        // turn of the loop (with its test for room) was most of the survey's cost while
        // the stride is still short, over the first few million samples.
        while self.next_thin < end {
            let room = self
                .limits
                .thin_samples
                .max(2)
                .saturating_sub(self.thin.len());
            if room == 0 {
                keep_every_other(&mut self.thin, 0);
                self.thin_stride *= 2;
                self.next_thin = self.next_thin.next_multiple_of(self.thin_stride);
                continue;
            }
            let from = self.next_thin - base;
            let before = self.thin.len();
            self.thin
                .extend((from..len).step_by(self.thin_stride).take(room).map(&value));
            self.next_thin += (self.thin.len() - before) * self.thin_stride;
        }
        while self.next_pair < end {
            let room = self.limits.pairs.max(16).saturating_sub(self.pairs.len());
            if room == 0 {
                // Pair k sits at position k / stride - 1 (pairs start at sample 1), so the
                // pairs of the doubled stride are those at the odd positions.
                keep_every_other(&mut self.pairs, 1);
                self.pair_stride *= 2;
                self.next_pair = self.next_pair.next_multiple_of(self.pair_stride);
                continue;
            }
            let k = self.next_pair - base;
            if k == 0 {
                // The pair's first sample ended the block before.
                if let (Some(a), true) = (self.last, len > 0) {
                    self.pairs.push((a, value(0)));
                }
                self.next_pair += self.pair_stride;
                continue;
            }
            let before = self.pairs.len();
            self.pairs.extend(
                (k..len)
                    .step_by(self.pair_stride)
                    .take(room)
                    .map(|k| (value(k - 1), value(k))),
            );
            self.next_pair += (self.pairs.len() - before) * self.pair_stride;
        }
        if len > 0 {
            self.last = Some(value(len - 1));
        }
        self.n = end;
    }
}

/// The time base and digitiser range of a streamed record.
#[derive(Debug, Clone, Copy)]
pub struct StreamInfo {
    pub dt_s: f64,
    pub t0_s: f64,
    pub adc: Option<AdcRange>,
}

/// One measured event window, as an [`Observer`] sees it.
#[derive(Debug, Clone, Copy)]
pub struct WindowView<'a> {
    pub event: &'a Event,
    /// Samples `[start, end)` of the window (absolute indices in `range`).
    pub v: &'a [f64],
    pub i: Option<&'a [f64]>,
    pub range: (usize, usize),
}

/// Work done on the samples of the final pass, while they are at hand: plots, fits.
pub trait Observer: Sync {
    type Out: Send;
    /// Every block of each pass, in order (from the reading thread, while windows are
    /// being measured on others).
    fn block(&self, _v: &[f64]) {}
    /// Each measured window (called in parallel, from any thread).
    fn window(&self, w: &WindowView) -> Self::Out;
    /// The result of [`Observer::window`] for event `index`, in event order.
    fn keep(&mut self, index: usize, out: Self::Out);
    /// A pass starts again from the first sample: forget what was kept.
    fn restart(&mut self);
}

/// An observer that does nothing.
pub struct NoObserver;

impl Observer for NoObserver {
    type Out = ();
    fn window(&self, _w: &WindowView) {}
    fn keep(&mut self, _index: usize, _out: ()) {}
    fn restart(&mut self) {}
}

/// Measures a record streamed from `src`, after `survey` saw it once. `stop` is polled
/// between blocks: when it says so the measurement ends with [`MeasureError::Interrupted`].
pub fn measure_stream<O: Observer>(
    src: &mut dyn Replay,
    survey: Surveyor,
    info: StreamInfo,
    opts: &MeasureOptions,
    observer: &mut O,
    stop: &dyn Fn() -> bool,
) -> Result<CaptureMeasurement, MeasureError> {
    let limits = survey.limits;
    let n = survey.n;
    check_length_and_interval(n, info.dt_s)?;
    if survey.lo > survey.hi {
        return Err(MeasureError::NoStates { spread_v: 0.0 });
    }
    let (lo, hi) = (survey.lo, survey.hi);
    let pairs = survey.pairs;
    let adc_step_v = info
        .adc
        .and_then(|a| a.step_v)
        .or_else(|| levels::adc_step_of_diffs(pairs.iter().map(|(a, b)| b - a), hi - lo))
        .unwrap_or(0.0);
    let rough_sigma = levels::noise_sigma_of_pairs(pairs.iter().copied()).unwrap_or(0.0);
    let sv = Survey::new(lo, hi, adc_step_v, rough_sigma, info.dt_s, opts);
    let mut warnings = Vec::new();
    let (thin, stride) = (survey.thin, survey.thin_stride);
    let mut chosen = choose_levels(&thin, stride, &sv, opts, &mut warnings)?;
    let trace = Trace {
        v: &[],
        i: None,
        dt_s: info.dt_s,
        t0_s: info.t0_s,
        adc: info.adc,
    };
    // The window limit in force: the user's, or the memory bound when that is shorter.
    let window_limit = match sv.max_samples {
        Some(m) if m <= limits.window_samples => m,
        _ => limits.window_samples,
    };
    let mut pass = 0;
    loop {
        let (v_on, v_off) = (chosen.v_on, chosen.v_off);
        let step = (v_off - v_on).abs();
        let sigma = levels::noise_sigma_of_pairs(
            pairs
                .iter()
                .copied()
                .filter(|&(a, b)| near_on(a, b, v_on, step)),
        )
        .unwrap_or(rough_sigma);
        let mut params = edge_params(v_on, v_off, sigma, adc_step_v);
        // The dwell only has to fall in the wide gap between ring dips and on states
        // (ratio DWELL_GAP_RATIO or more), which run lengths counted on the thinned copy
        // locate to a stride either way; with a stride of 1 they are the exact ones.
        params.dwell_samples = sv.dwell_samples.unwrap_or_else(|| {
            let runs: Vec<usize> = events::low_run_lengths(&thin, &params)
                .into_iter()
                .map(|r| r * stride)
                .collect();
            events::derive_dwell(&runs)
        });
        let cx = sv.context(&[], None, &trace, &chosen, sigma, opts);
        observer.restart();
        let scan = Scan {
            cx,
            params,
            n,
            window_limit,
            user_limit: sv.max_samples,
            limits,
            resolution_v: sv.resolution_v,
        };
        let out = scan.run(src, observer, stop)?;
        if pass == 0 {
            if let Some(refined) = cross_check(&out.found, &chosen, sigma, &sv, &mut warnings) {
                chosen = refined;
                pass += 1;
                continue;
            }
        }
        if out.memory_cuts > 0 {
            warnings.push(format!(
                "{} event window(s) longer than {} samples ({:.3} s) were cut there to keep memory bounded and are marked truncated: settling is judged on the part kept (give --max-window to choose the cut)",
                out.memory_cuts,
                limits.window_samples,
                limits.window_samples as f64 * info.dt_s
            ));
        }
        return Ok(conclude(
            out.found,
            out.windows,
            &chosen,
            out.longest_runs,
            warnings,
            opts,
        ));
    }
}

/// Runs one pass over `src`, polling `stop` between blocks.
#[allow(clippy::type_complexity)]
fn run_pass(
    src: &mut dyn Replay,
    stop: &dyn Fn() -> bool,
    each: &mut dyn FnMut(&mut Samples),
) -> Result<(), MeasureError> {
    let mut stopped = false;
    let done = src
        .replay(&mut |block| {
            if stop() {
                stopped = true;
                return false;
            }
            each(block);
            true
        })
        .map_err(MeasureError::Read)?;
    if stopped || !done {
        return Err(MeasureError::Interrupted);
    }
    Ok(())
}

/// Step 3 of the module notes: one pass finding and measuring the events.
struct Scan<'a> {
    cx: event::Context<'a>,
    params: events::EdgeParams,
    n: usize,
    /// Longest window kept, edge to end, in samples.
    window_limit: usize,
    /// The user's `--max-window`, in samples.
    user_limit: Option<usize>,
    limits: StreamLimits,
    resolution_v: f64,
}

/// What one scan pass found.
struct ScanOut {
    found: Found,
    windows: Vec<(usize, usize)>,
    longest_runs: [usize; 2],
    /// Windows cut by the memory bound rather than by the user's limit.
    memory_cuts: usize,
}

/// Samples of a stretch of the record: `v[skip + k]` is absolute sample `first + k`. The
/// `skip` samples before are dropped ones, left in place: moving a long window's samples
/// down to drop its first few was 6 % of the scanning thread's profile in a long CSV's
/// second pass.
#[derive(Debug, Default)]
struct Stretch {
    first: usize,
    skip: usize,
    v: Vec<f64>,
    i: Option<Vec<f64>>,
}

impl Stretch {
    fn end(&self) -> usize {
        self.first + self.len()
    }

    fn len(&self) -> usize {
        self.v.len() - self.skip
    }

    /// The voltage samples held, the first at `first`.
    fn values(&self) -> &[f64] {
        self.v.get(self.skip..).unwrap_or(&[])
    }

    /// The current samples held, if any, the first at `first`.
    fn currents(&self) -> Option<&[f64]> {
        self.i.as_deref().map(|i| i.get(self.skip..).unwrap_or(&[]))
    }

    fn push(&mut self, v: &[f64], i: Option<&[f64]>) {
        // Grown by a quarter at a time, not doubled: a long window's slack stays small.
        let grow = |all: &mut Vec<f64>, more: usize| {
            if all.capacity() < all.len() + more {
                all.reserve_exact(more.max(all.len() / 4));
            }
        };
        grow(&mut self.v, v.len());
        if let Some(all) = self.i.as_mut() {
            grow(all, v.len());
        }
        self.v.extend_from_slice(v);
        let first_push = self.len() == v.len();
        match (self.i.as_mut(), i) {
            (Some(all), Some(i)) => all.extend_from_slice(i),
            (None, Some(i)) if first_push => {
                let mut all = Vec::with_capacity(self.v.capacity());
                all.extend_from_slice(i);
                self.i = Some(all);
            }
            _ => self.i = None,
        }
    }

    /// Makes room for `n` samples in all (the current, if any, takes as much room when its
    /// first samples arrive).
    fn reserve(&mut self, n: usize) {
        self.v.reserve_exact(n.saturating_sub(self.v.len()));
    }

    /// Keeps only the samples from absolute index `from` on.
    fn drop_before(&mut self, from: usize) {
        let k = from.saturating_sub(self.first).min(self.len());
        self.skip += k;
        self.first += k;
    }

    /// Drops the samples from absolute index `to` on.
    fn truncate_at(&mut self, to: usize) {
        let k = self.skip + to.saturating_sub(self.first);
        self.v.truncate(k);
        if let Some(i) = self.i.as_mut() {
            i.truncate(k);
        }
    }

    /// Appends the history's samples `[from, to)` (cut to what it holds).
    fn extend_from(&mut self, other: &History, from: usize, to: usize) {
        for p in &other.pieces {
            let a = from.saturating_sub(p.first).min(p.v.len());
            let b = to.saturating_sub(p.first).clamp(a, p.v.len());
            if a < b {
                self.push(&p.v[a..b], p.i.as_ref().map(|i| &i[a..b]));
            }
        }
    }
}

/// The last samples of the record, kept for the stretch before the next edge: the
/// blocks themselves, taken from the source rather than copied (copying every block in
/// was 9 % of a long WAV's measurement), and their vectors handed back to the source once
/// they fall out of use.
#[derive(Debug, Default)]
struct History {
    pieces: std::collections::VecDeque<Piece>,
    /// Index of the next sample to come.
    end: usize,
    /// Vectors of dropped pieces, for the source to fill again.
    spare: Vec<Vec<f64>>,
}

/// A block held by the history: `v[k]` is absolute sample `first + k`; the current, if
/// any, is as long as `v`.
#[derive(Debug)]
struct Piece {
    first: usize,
    v: Vec<f64>,
    i: Option<Vec<f64>>,
}

impl History {
    /// Vectors kept for reuse: a block and its current, twice over.
    const SPARE: usize = 4;

    /// Index of the first sample held (the next to come when none is).
    fn first(&self) -> usize {
        self.pieces.front().map_or(self.end, |p| p.first)
    }

    fn end(&self) -> usize {
        self.end
    }

    /// Takes the block's samples, leaving spare vectors in their place; a current whose
    /// length differs from the voltage's is not kept.
    fn push(&mut self, block: &mut Samples) {
        let mut take =
            |x: &mut Vec<f64>| std::mem::replace(x, self.spare.pop().unwrap_or_default());
        let v = take(&mut block.v);
        let i = block.i.as_mut().map(take).filter(|i| i.len() == v.len());
        let first = self.end;
        self.end += v.len();
        self.pieces.push_back(Piece { first, v, i });
    }

    /// The samples of the last block taken.
    fn last(&self) -> &[f64] {
        self.pieces.back().map_or(&[], |p| &p.v)
    }

    /// Drops the blocks that end at or before absolute index `from` (a block holding it
    /// is kept whole).
    fn drop_before(&mut self, from: usize) {
        // (`VecDeque::pop_front_if` is newer than the crate's minimum Rust.)
        while self
            .pieces
            .front()
            .is_some_and(|p| p.first + p.v.len() <= from)
        {
            let Some(p) = self.pieces.pop_front() else {
                break;
            };
            // Handed back with their old samples: the source sets the length it fills (a
            // spill read then overwrites a block's worth without zeroing it first).
            for x in std::iter::once(p.v).chain(p.i) {
                if self.spare.len() < Self::SPARE {
                    self.spare.push(x);
                }
            }
        }
    }
}

/// An event window waiting for the turn-on that ends it.
struct OpenWindow {
    edge: usize,
    /// Samples before the edge the window may start at (half the on run, at most the
    /// most any window's pre-edge stretch can be).
    pre_max: usize,
    samples: Stretch,
}

/// A window whose end is known, with its samples (and the one after its end, if any).
struct ClosedWindow {
    index: usize,
    start: usize,
    end: usize,
    edge: usize,
    cut: bool,
    closed_by_turn_on: bool,
    samples: Stretch,
}

/// The longest stretch of `v` held within `half_width_v` of each of two levels, what
/// [`levels::longest_run_near`] gives for each, in one pass counted on bit masks
/// ([`RunNear::push_both`]): about a fifth of the instructions (9 a sample and level
/// one by one, under 2 on masks compiled for AVX2).
pub(crate) fn longest_runs_near(v: &[f64], levels: [f64; 2], half_width_v: f64) -> [usize; 2] {
    let mut runs = RunNear::both(levels, half_width_v);
    RunNear::push_both(&mut runs, v);
    runs.map(|r| r.best)
}

/// Longest stretch held within a band around a level, fed block by block (as
/// [`levels::longest_run_near`]).
#[derive(Debug, Clone, Copy)]
struct RunNear {
    level_v: f64,
    half_width_v: f64,
    run: usize,
    best: usize,
}

impl RunNear {
    /// Counters for two levels, nothing seen yet.
    fn both(levels: [f64; 2], half_width_v: f64) -> [RunNear; 2] {
        levels.map(|level_v| RunNear {
            level_v,
            half_width_v,
            run: 0,
            best: 0,
        })
    }

    crate::avx2::twice_compiled!(
        /// Feeds a block to both levels' counters. Sixty-four samples at a time become a
        /// bit mask (comparisons that vectorise), and the runs are counted on the mask: a
        /// stretch all near a level or all away from it costs one step, not sixty-four.
        /// Compiled for AVX2 too: every sample of a long capture passes here, tested against
        /// each of the two levels.
        fn push_both(runs: &mut [RunNear; 2], v: &[f64]) => RunNear::push_both_on;
    );

    #[inline(always)]
    fn push_both_on(runs: &mut [RunNear; 2], v: &[f64]) {
        for chunk in v.chunks(64) {
            for r in runs.iter_mut() {
                let near = |x: f64| (x - r.level_v).abs() <= r.half_width_v;
                // Counting first is the cheap test: most chunks are all near or all away.
                let count = chunk.iter().map(|&x| usize::from(near(x))).sum::<usize>();
                if count == chunk.len() {
                    r.run += count;
                    r.best = r.best.max(r.run);
                } else if count == 0 {
                    r.run = 0;
                } else {
                    let mask = chunk
                        .iter()
                        .enumerate()
                        .fold(0u64, |m, (k, &x)| m | (u64::from(near(x)) << k));
                    r.push_mask(mask, chunk.len() as u32);
                }
            }
        }
    }

    /// Counts the runs of set bits in the low `len` bits of `mask` (bit 0 first).
    fn push_mask(&mut self, mask: u64, len: u32) {
        let mut pos = 0u32;
        while pos < len {
            let rest = mask >> pos;
            let ones = rest.trailing_ones().min(len - pos);
            if ones > 0 {
                self.run += ones as usize;
                self.best = self.best.max(self.run);
                pos += ones;
            }
            if pos < len {
                self.run = 0;
                pos += (mask >> pos).trailing_zeros().min(len - pos);
            }
        }
    }
}

impl Scan<'_> {
    /// Samples before an edge any window can start at: the pre-edge stretch is at most a
    /// tenth of the window after the edge, and at least 16 samples (see
    /// [`events::event_windows`]).
    fn history(&self) -> usize {
        (self.window_limit / 10).max(16)
    }

    fn run<O: Observer>(
        &self,
        src: &mut dyn Replay,
        observer: &mut O,
        stop: &dyn Fn() -> bool,
    ) -> Result<ScanOut, MeasureError> {
        let mut det = events::EdgeDetector::new(self.params);
        let mut marks = Vec::new();
        let mut recent = History::default();
        let mut open: Option<OpenWindow> = None;
        let mut last_on: Option<usize> = None;
        let mut memory_cuts = 0usize;
        let mut index = 0usize;
        let mut last_len = 0usize;
        let mut runs = RunNear::both([self.cx.v_on, self.cx.v_off], 2.0 * self.resolution_v);
        // History kept beyond what the next edge can ask for: the edge is reported once
        // the signal has risen past the hysteresis band, a little after the crossing.
        let keep = self.history() + (1 << 16);
        let measured: std::sync::Mutex<Vec<Measured<O::Out>>> = Default::default();
        let in_flight = std::sync::atomic::AtomicUsize::new(0);
        let shared: &O = observer;

        // Closed windows are measured on the thread pool while this thread reads on; past
        // the memory budget of windows in flight, a window is measured right here (never a
        // blocking wait, which could stall a pool already busy with other files).
        let scanned = rayon::in_place_scope(|scope| {
            let dispatch = |closed: ClosedWindow| {
                use std::sync::atomic::Ordering;
                let size = closed.samples.len();
                let (measured, in_flight) = (&measured, &in_flight);
                let push = move |m: Measured<O::Out>| {
                    measured.lock().unwrap_or_else(|p| p.into_inner()).push(m)
                };
                // One window is always let go, however long: the longest (cut at the
                // window limit) is larger than the budget, and measuring every one of them
                // here would leave the pool idle while this thread does all the work. A
                // long one waits for the windows in flight instead of being measured here
                // beside them (two long windows' working copies at once would double the
                // peak memory); waiting, this thread runs pool work, its own spawned window
                // first, so the wait always ends.
                let budget = self.limits.batch_samples;
                let mut busy = in_flight.load(Ordering::Acquire);
                if busy > 0 && busy + size > budget && 2 * size > budget {
                    while in_flight.load(Ordering::Acquire) > 0 {
                        match rayon::yield_now() {
                            Some(rayon::Yield::Executed) => {}
                            Some(rayon::Yield::Idle) => std::thread::yield_now(),
                            // Outside the pool this thread can run none of the windows:
                            // it gives its core to the threads measuring them rather than
                            // asking the kernel for it back thousands of times a second
                            // (a twelfth of a long WAV's CPU time went to that).
                            None => std::thread::sleep(std::time::Duration::from_micros(100)),
                        }
                    }
                    busy = 0;
                }
                if busy == 0 || busy + size <= budget {
                    in_flight.fetch_add(size, Ordering::AcqRel);
                    scope.spawn(move |_| {
                        push(self.measure_window(&closed, shared));
                        in_flight.fetch_sub(size, Ordering::AcqRel);
                    });
                } else {
                    push(self.measure_window(&closed, shared));
                }
            };
            let mut each = |block: &mut Samples| {
                recent.push(block);
                let v = recent.last();
                shared.block(v);
                // Only whether each level held for MIN_STATE_RUN samples is asked (see
                // `conclude`): once both have, the counting stops, a fifth of this
                // thread's work on a long capture.
                if runs.iter().any(|r| r.best < MIN_STATE_RUN) {
                    RunNear::push_both(&mut runs, v);
                }
                let here = recent.end();
                if let Some(w) = open.as_mut() {
                    let cap_end = w.edge + self.window_limit + 1;
                    let from = w.samples.end();
                    if from < cap_end {
                        w.samples.extend_from(&recent, from, cap_end.min(here));
                    }
                }
                marks.clear();
                det.push(v, &mut marks);
                for &m in &marks {
                    match m {
                        events::Mark::TurnOn { index: t } => {
                            if let Some(w) = open.take_if(|w| t > w.edge) {
                                let closed = self.close(w, index, Some(t), here);
                                last_len = closed.samples.len();
                                index += 1;
                                memory_cuts += usize::from(self.cut_by_memory(&closed, t));
                                dispatch(closed);
                            }
                            last_on = Some(t);
                        }
                        events::Mark::Edge { index: e } => {
                            if let Some(w) = open.take() {
                                // Not expected (an edge needs a turn-on first); the earlier
                                // window then ends where this one starts.
                                let closed = self.close(w, index, Some(e), here);
                                index += 1;
                                dispatch(closed);
                            }
                            let prev_on = last_on.filter(|&t| t <= e).unwrap_or(0);
                            let pre_max = (e.saturating_sub(prev_on) / 2).min(self.history());
                            let from = e.saturating_sub(pre_max);
                            let cap_end = e + self.window_limit + 1;
                            let mut samples = Stretch {
                                first: from.max(recent.first()),
                                ..Stretch::default()
                            };
                            // Switchings repeat: room for about the last window's length
                            // saves growing (and copying) this one step by step.
                            let room = (last_len + last_len / 8).min(cap_end - samples.first);
                            samples.reserve(room);
                            samples.extend_from(&recent, from, cap_end.min(here));
                            open = Some(OpenWindow {
                                edge: e,
                                pre_max,
                                samples,
                            });
                        }
                    }
                }
                recent.drop_before(here.saturating_sub(keep));
            };
            let r = run_pass(src, stop, &mut each);
            if r.is_ok() {
                if let Some(w) = open.take() {
                    let closed = self.close(w, index, None, self.n);
                    memory_cuts += usize::from(self.cut_by_memory(&closed, self.n));
                    dispatch(closed);
                }
            }
            r
        });
        scanned?;
        let mut measured = measured.into_inner().unwrap_or_else(|p| p.into_inner());
        measured.sort_by_key(|m| m.event.index);
        let mut found = Found::default();
        let mut windows = Vec::with_capacity(measured.len());
        for m in measured {
            windows.push(m.range);
            observer.keep(m.event.index, m.out);
            found.add(m.event, m.local);
        }
        Ok(ScanOut {
            found,
            windows,
            longest_runs: runs.map(|r| r.best),
            memory_cuts,
        })
    }

    /// The window of `w` ending at turn-on `t` (or the end of the record when `None`), as
    /// [`events::event_windows`] would place it.
    fn close(&self, w: OpenWindow, index: usize, t: Option<usize>, held_to: usize) -> ClosedWindow {
        let e = w.edge;
        let next_on = t.unwrap_or(self.n);
        let limit = self.window_limit;
        let (end, cut) = if e.saturating_add(limit) < next_on {
            (e + limit, true)
        } else {
            (next_on, false)
        };
        let pre = w.pre_max.min(((end - e) / 10).max(16));
        let start = e.saturating_sub(pre).max(w.samples.first);
        let mut samples = w.samples;
        samples.drop_before(start);
        samples.truncate_at((end + 1).min(held_to));
        ClosedWindow {
            index,
            start,
            end: end.min(self.n),
            edge: e,
            cut,
            closed_by_turn_on: !cut && end < self.n,
            samples,
        }
    }

    /// A window cut by the memory bound where the user's limit (if any) would not have.
    fn cut_by_memory(&self, w: &ClosedWindow, next_on: usize) -> bool {
        w.cut
            && self
                .user_limit
                .is_none_or(|m| w.edge.saturating_add(m) >= next_on)
    }

    /// Measures one closed window and lets the observer work on it.
    fn measure_window<O: Observer>(&self, w: &ClosedWindow, observer: &O) -> Measured<O::Out> {
        let s = &w.samples;
        let mut cx = self.cx;
        cx.v = s.values();
        cx.i = s.currents();
        cx.first_index = s.first;
        let rel = event::Window {
            index: w.index,
            start: w.start - s.first,
            end: w.end - s.first,
            edge: w.edge - s.first,
            cut: w.cut,
            closed_by_turn_on: w.closed_by_turn_on,
        };
        let (event, local) = event::measure_event(&cx, &rel);
        let len = (w.end - w.start).min(s.len());
        let view = WindowView {
            event: &event,
            v: &s.values()[..len],
            i: s.currents().map(|i| &i[..len.min(i.len())]),
            range: (w.start, w.end),
        };
        let out = observer.window(&view);
        Measured {
            range: (w.start, w.end),
            event,
            local,
            out,
        }
    }
}

/// One measured window: its sample range, event, local levels and the observer's result.
struct Measured<T> {
    range: (usize, usize),
    event: Event,
    local: event::LocalLevels,
    out: T,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::measure::measure_trace;

    /// Three turn-off events of an RLC ring (invented shape): on at 0.2 V for 300 samples,
    /// then `24 + 60 exp(-x/40) sin(2 pi x / 25)` volts for 900 samples, with a little
    /// deterministic noise.
    fn record() -> Vec<f64> {
        let mut v = Vec::new();
        let mut seed = 12345u64;
        let mut noise = || {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((seed >> 33) as f64 / (1u64 << 31) as f64 - 0.5) * 0.2
        };
        for _ in 0..3 {
            for _ in 0..300 {
                v.push(0.2 + noise());
            }
            for k in 0..900 {
                let x = k as f64;
                v.push(
                    24.0 + 60.0 * (-x / 40.0).exp() * (2.0 * std::f64::consts::PI * x / 25.0).sin()
                        + noise(),
                );
            }
        }
        v
    }

    fn run_streamed(
        v: &[f64],
        block: usize,
        limits: StreamLimits,
        stop: &dyn Fn() -> bool,
    ) -> Result<CaptureMeasurement, MeasureError> {
        let mut s = Surveyor::new(limits);
        for b in v.chunks(block) {
            s.push(b);
        }
        let mut src = SliceReplay { v, i: None, block };
        let info = StreamInfo {
            dt_s: 1e-6,
            t0_s: 0.0,
            adc: None,
        };
        measure_stream(
            &mut src,
            s,
            info,
            &MeasureOptions::default(),
            &mut NoObserver,
            stop,
        )
    }

    fn streamed(v: &[f64], block: usize, limits: StreamLimits) -> CaptureMeasurement {
        run_streamed(v, block, limits, &|| false).expect("measurable")
    }

    /// The same record measured whole, 1 us per sample.
    fn whole(v: &[f64]) -> CaptureMeasurement {
        let trace = Trace {
            v,
            i: None,
            dt_s: 1e-6,
            t0_s: 0.0,
            adc: None,
        };
        measure_trace(&trace, &MeasureOptions::default()).expect("measurable")
    }

    /// Ranges copied out of the history are the samples at those absolute indices, current
    /// included, across the blocks it holds; it keeps every sample from the trim point on,
    /// and the vectors it leaves in a block's place are ones it dropped.
    #[test]
    fn the_history_hands_out_the_samples_it_holds() {
        let mut h = History::default();
        let (mut next, mut most_pieces, mut reused) = (0usize, 0usize, 0usize);
        for block in [7usize, 13, 5, 20, 9, 31, 4, 17, 11, 23, 6] {
            let v: Vec<f64> = (next..next + block).map(|k| k as f64).collect();
            let i: Vec<f64> = v.iter().map(|x| -x).collect();
            let mut b = Samples { v, i: Some(i) };
            h.push(&mut b);
            reused += usize::from(b.v.capacity() > 0);
            assert_eq!(h.last().len(), block);
            next += block;
            let trim = next.saturating_sub(25);
            h.drop_before(trim);
            assert!(h.first() <= trim);
            most_pieces = most_pieces.max(h.pieces.len());
            let first = h.first();
            for (from, to) in [(first, next), (first + 3, next - 2), (0, next + 5)] {
                let mut w = Stretch {
                    first: from.max(first),
                    ..Stretch::default()
                };
                w.extend_from(&h, from, to);
                let want: Vec<f64> = (from.max(first)..to.min(next)).map(|k| k as f64).collect();
                assert_eq!(w.values(), want, "{from}..{to}");
                let neg: Vec<f64> = want.iter().map(|x| -x).collect();
                assert_eq!(w.currents().unwrap_or(&[]), neg.as_slice());
                // Dropping the first samples and the last leaves the stretch between.
                let (a, b) = (from.max(first) + 2, to.min(next).saturating_sub(3));
                w.drop_before(a);
                w.truncate_at(b);
                let kept: Vec<f64> = (a..b.max(a)).map(|k| k as f64).collect();
                assert_eq!((w.first, w.values()), (a, kept.as_slice()), "{from}..{to}");
                let neg: Vec<f64> = kept.iter().map(|x| -x).collect();
                assert_eq!(w.currents().unwrap_or(&[]), neg.as_slice());
            }
        }
        assert_eq!(h.end(), next);
        assert!(most_pieces >= 3, "ranges never spanned several blocks");
        assert!(reused > 0, "no dropped vector was handed back");
    }

    /// The mask count against the plain per-sample count it replaced (run = (run + 1) when
    /// near, else 0; best = the longest), over stretches near, away and alternating, NaN
    /// included, fed in blocks of awkward sizes.
    #[test]
    fn runs_near_a_level_counted_on_masks_match_a_plain_count() {
        let mut v: Vec<f64> = Vec::new();
        v.extend(std::iter::repeat_n(1.0, 130));
        v.extend((0..300).map(|k| if k % 3 == 0 { 5.0 } else { 1.01 }));
        v.extend(std::iter::repeat_n(5.0, 70));
        v.push(f64::NAN);
        v.extend(std::iter::repeat_n(0.99, 200));
        v.extend((0..500).map(|k| if (k / 37) % 2 == 0 { 1.0 } else { -3.0 }));
        // Samples at the band's edges, where the rounded `x - level` decides: 1.05 - 1.0
        // and 0.95 - 1.0 round to just beyond 0.05, 1.04 and 0.96 stay within it; an
        // infinity among near samples.
        v.extend((0..300).map(|k| [1.05, 1.04, 0.96, 0.95][(k / 50) % 4]));
        v.extend((0..200).map(|k| if k % 64 == 5 { 1.05 } else { 1.0 }));
        v.extend(std::iter::repeat_n(1.0, 100));
        v.push(f64::INFINITY);
        v.extend(std::iter::repeat_n(1.0, 100));
        let plain = |level: f64| {
            let (mut run, mut best) = (0usize, 0usize);
            for &x in &v {
                run = if (x - level).abs() <= 0.05 {
                    run + 1
                } else {
                    0
                };
                best = best.max(run);
            }
            (run, best)
        };
        let want = [plain(1.0), plain(5.0)];
        // 200 samples at 0.99 and the first 37 of the alternating stretch at 1.0.
        assert_eq!(want[0].1, 237);
        let best = want.map(|w| w.1);
        assert_eq!(
            [1.0, 5.0].map(|l| levels::longest_run_near(&v, l, 0.05)),
            best
        );
        assert_eq!(longest_runs_near(&v, [1.0, 5.0], 0.05), best);
        for size in [1, 5, 63, 64, 65, 129, v.len()] {
            let mut runs = RunNear::both([1.0, 5.0], 0.05);
            // The baseline build too (the AVX2 one runs above where the CPU has it).
            let mut baseline = runs;
            for block in v.chunks(size) {
                RunNear::push_both(&mut runs, block);
                RunNear::push_both_on(&mut baseline, block);
            }
            assert_eq!(runs.map(|r| (r.run, r.best)), want, "blocks of {size}");
            assert_eq!(baseline.map(|r| (r.run, r.best)), want, "blocks of {size}");
        }
    }

    #[test]
    fn streaming_a_short_record_gives_what_the_whole_record_gives() {
        let v = record();
        let whole = whole(&v);
        assert_eq!(whole.events.len(), 3);
        for block in [1, 37, 4096] {
            let s = streamed(&v, block, StreamLimits::default());
            // Equal but for the last bits of times interpolated between samples (a window's
            // crossings are found from its own first sample, then offset).
            assert_same_events(&s.events, &whole.events);
            assert_eq!(s.windows, whole.windows);
            assert_eq!(s.warnings, whole.warnings);
        }
    }

    fn assert_same_events(a: &[Event], b: &[Event]) {
        assert_eq!(a.len(), b.len());
        for (x, y) in a.iter().zip(b) {
            let (x, y) = (
                serde_json::to_value(x).unwrap(),
                serde_json::to_value(y).unwrap(),
            );
            for (k, vx) in x.as_object().unwrap() {
                let vy = &y[k];
                match (vx.as_f64(), vy.as_f64()) {
                    (Some(p), Some(q)) => {
                        assert!(
                            (p - q).abs() <= 1e-12 * p.abs().max(q.abs()),
                            "{k}: {p} {q}"
                        )
                    }
                    _ => assert_eq!(vx, vy, "{k}"),
                }
            }
        }
    }

    #[test]
    fn a_thinned_survey_finds_the_same_events() {
        let v = record();
        let whole = whole(&v);
        let limits = StreamLimits {
            thin_samples: 256,
            pairs: 512,
            ..StreamLimits::default()
        };
        let s = streamed(&v, 100, limits);
        assert_eq!(s.events.len(), whole.events.len());
        for (a, b) in s.events.iter().zip(&whole.events) {
            // Levels from a thinned copy and a quarter of the pairs are refined on the
            // events themselves, so the figures agree to a small part of the noise.
            assert!((a.peak_v - b.peak_v).abs() < 1e-9, "{a:?} {b:?}");
            assert!((a.v_off - b.v_off).abs() < 0.05, "{} {}", a.v_off, b.v_off);
            // The edge's 50 % crossing moves with the levels by far less than a sample.
            assert!((a.t_peak_s - b.t_peak_s).abs() < 0.01e-6);
            assert!((a.t_edge_s - b.t_edge_s).abs() < 0.01e-6);
        }
    }

    #[test]
    fn the_surveyor_keeps_every_stride_th_sample() {
        let v: Vec<f64> = (0..1000).map(f64::from).collect();
        let mut s = Surveyor::new(StreamLimits {
            thin_samples: 100,
            pairs: 100,
            ..StreamLimits::default()
        });
        for b in v.chunks(33) {
            s.push(b);
        }
        assert_eq!(s.thin_stride, 16);
        assert!(s
            .thin
            .iter()
            .enumerate()
            .all(|(k, &x)| x == (k * 16) as f64));
        assert_eq!(s.pair_stride, 16);
        assert!(s
            .pairs
            .iter()
            .enumerate()
            .all(|(k, &(a, b))| b == ((k + 1) * 16) as f64 && a == b - 1.0));
        assert_eq!(s.len(), 1000);
    }

    /// The survey sample by sample, as it was first written: the reference the runs taken
    /// at a time must match.
    fn survey_one_by_one(s: &mut Surveyor, block: &[f64]) {
        let (base, end) = (s.n, s.n + block.len());
        if let Some((lo, hi)) = levels::finite_extremes(block) {
            s.lo = s.lo.min(lo);
            s.hi = s.hi.max(hi);
        }
        while s.next_thin < end {
            if s.thin.len() >= s.limits.thin_samples.max(2) {
                s.thin = s.thin.iter().copied().step_by(2).collect();
                s.thin_stride *= 2;
                s.next_thin = s.next_thin.next_multiple_of(s.thin_stride);
                continue;
            }
            s.thin.push(block[s.next_thin - base]);
            s.next_thin += s.thin_stride;
        }
        while s.next_pair < end {
            if s.pairs.len() >= s.limits.pairs.max(16) {
                s.pairs = s.pairs.iter().copied().skip(1).step_by(2).collect();
                s.pair_stride *= 2;
                s.next_pair = s.next_pair.next_multiple_of(s.pair_stride);
                continue;
            }
            let k = s.next_pair - base;
            let prev = match k.checked_sub(1) {
                Some(j) => block.get(j).copied(),
                None => s.last,
            };
            if let (Some(a), Some(&b)) = (prev, block.get(k)) {
                s.pairs.push((a, b));
            }
            s.next_pair += s.pair_stride;
        }
        s.last = block.last().copied().or(s.last);
        s.n = end;
    }

    #[test]
    fn the_survey_taken_in_runs_keeps_what_a_sample_by_sample_survey_keeps() {
        // Block lengths that put pairs across block ends at every stride, limits that
        // double the strides several times (the copy's length even and odd).
        let v: Vec<f64> = (0..20_000).map(|k| ((k * 7919) % 1013) as f64).collect();
        for (thin, pairs) in [(100, 64), (101, 17), (2, 16), (4096, 4096)] {
            for len in [1, 2, 3, 7, 33, 64, 1000, 20_000] {
                let limits = StreamLimits {
                    thin_samples: thin,
                    pairs,
                    ..StreamLimits::default()
                };
                let (mut a, mut b) = (Surveyor::new(limits), Surveyor::new(limits));
                for block in v.chunks(len) {
                    a.push(block);
                    survey_one_by_one(&mut b, block);
                }
                assert_eq!(a.thin, b.thin, "thin {thin} pairs {pairs} block {len}");
                assert_eq!(a.thin_stride, b.thin_stride);
                assert_eq!(a.pairs, b.pairs, "thin {thin} pairs {pairs} block {len}");
                assert_eq!(a.pair_stride, b.pair_stride);
                assert_eq!((a.n, a.lo, a.hi), (b.n, b.lo, b.hi));
            }
        }
    }

    #[test]
    fn long_windows_are_cut_at_the_memory_bound_with_a_warning() {
        let v = record();
        let limits = StreamLimits {
            window_samples: 400,
            ..StreamLimits::default()
        };
        let s = streamed(&v, 64, limits);
        assert_eq!(s.events.len(), 3);
        assert!(s.events.iter().all(|e| e.truncated));
        assert!(s
            .warnings
            .iter()
            .any(|w| w.contains("cut there to keep memory")));
    }

    #[test]
    fn a_stop_request_interrupts_the_measurement() {
        let r = run_streamed(&record(), 64, StreamLimits::default(), &|| true);
        assert_eq!(r.unwrap_err(), MeasureError::Interrupted);
    }
}
