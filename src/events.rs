//! Turn-off edges: 50 % reference-level crossings after an on-state dwell.
//!
//! The node rings back through the middle level many times after turn-off; those crossings
//! are not new switchings. Samples are classified with hysteresis around the 50 % level
//! (in units of the step: 0 is the on level, 1 the off level, the spike goes beyond 1
//! whatever the polarity), and an edge counts only when the on state ("low" in these units)
//! held for a dwell time. The dwell comes from the data: ringing dips into the on state last
//! at most half a ring period, true on states last far longer, so the lengths of the on runs
//! fall in two groups and the dwell sits in the gap between them.
//!
//! The on state is near the on level, not anywhere below the band: samples further than
//! `floor_f` of the step beyond the on level (away from the off level) are the switch's body
//! diode or a clamp holding the node past its rail while the coil current flows on, and
//! count as neither on nor off. Such a stretch can last far longer than a ring dip (the
//! diode conducts until the current has gone); taken for an on state, the ring after it
//! was a turn-off that never happened, and it cut the real event's window.
//!
//! [`EdgeDetector`] is a state machine fed block by block with absolute sample indices, so
//! it can run on a stream.

/// Smallest ratio between two groups of on-run lengths for them to count as different kinds
/// (ringing dips against true on states).
const DWELL_GAP_RATIO: f64 = 4.0;

/// Samples the edge detector judges together when they cannot change its state.
const QUIET_RUN: usize = 64;

/// Settings of the edge detector.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EdgeParams {
    pub v_on: f64,
    pub v_off: f64,
    /// Half-width of the hysteresis band around the 50 % level, as a fraction of the step.
    pub hysteresis_f: f64,
    /// Samples the on state must hold before an upward crossing counts as an edge.
    pub dwell_samples: usize,
    /// How far beyond the on level, as a fraction of the step and away from the off level,
    /// a sample may lie and still be the on state (see the module notes); `f64::INFINITY`
    /// takes every sample below the band as on.
    pub floor_f: f64,
}

impl EdgeParams {
    /// Position of `v` in units of the step: 0 at the on level, 1 at the off level.
    fn unit(&self, v: f64) -> f64 {
        (v - self.v_on) / (self.v_off - self.v_on)
    }
}

/// The quiet-run tests of [`EdgeDetector::skip_quiet`] without a division per sample: with
/// `d = v_off - v_on` and `s` its sign, `s (v - v_on) > above` proves `unit(v) > 0.5 + h`
/// and `s (v - v_on) < below` proves `unit(v) < 0.5 - h`. The bounds are the band's edges
/// times `|d|`, moved outwards by 1e-12 of themselves: more than the roundings of the
/// division and of the bounds' own product (a few 2^-53 each), so a sample the test passes
/// always passes the exact one; a sample near an edge fails it and the run is judged
/// sample by sample as before.
#[derive(Debug, Clone, Copy)]
struct QuietBounds {
    s: f64,
    above: f64,
    below: f64,
    /// `s (v - v_on) > floor_in` proves `unit(v) >= -floor_f` (not beyond the on level),
    /// `s (v - v_on) < floor_out` proves `unit(v) < -floor_f`: the floor times `|d|`, moved
    /// towards the on level and away from it as the band's edges are.
    floor_in: f64,
    floor_out: f64,
}

impl QuietBounds {
    fn of(p: &EdgeParams) -> Self {
        let d = p.v_off - p.v_on;
        let (hi, lo) = (0.5 + p.hysteresis_f, 0.5 - p.hysteresis_f);
        let outwards = |bound: f64, up: bool| {
            let b = bound * d.abs();
            if up == (b >= 0.0) {
                b * (1.0 + 1e-12)
            } else {
                b * (1.0 - 1e-12)
            }
        };
        let (above, below) = (outwards(hi, true), outwards(lo, false));
        // The floor sits at -floor_f |d| (at or below zero): in is towards zero, out away.
        let floor = -p.floor_f * d.abs();
        let (floor_in, floor_out) = if floor.is_finite() {
            (floor * (1.0 - 1e-12), floor * (1.0 + 1e-12))
        } else {
            (f64::NEG_INFINITY, f64::NEG_INFINITY)
        };
        // A step too small (or not finite) for the bounds to mean anything: never skip.
        if d.abs().is_normal()
            && above.is_finite()
            && below.is_finite()
            && hi > 0.0
            && !p.floor_f.is_nan()
            && p.floor_f >= 0.0
        {
            QuietBounds {
                s: d.signum(),
                above,
                below,
                floor_in,
                floor_out,
            }
        } else {
            QuietBounds {
                s: 1.0,
                above: f64::INFINITY,
                below: f64::NEG_INFINITY,
                floor_in: f64::INFINITY,
                floor_out: f64::NEG_INFINITY,
            }
        }
    }
}

/// What the detector reports, with absolute sample indices.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mark {
    /// A turn-off edge: the 50 % level is crossed between samples `index` and `index + 1`.
    Edge { index: usize },
    /// An on state that held for the dwell began at `index` (first sample below 50 %):
    /// the turn-on that closes the event before it.
    TurnOn { index: usize },
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum State {
    Unknown,
    Low,
    /// Beyond the on level (a body diode or clamp conducting): neither on nor off.
    Beyond,
    High,
}

/// Streaming edge detector (see the module notes).
#[derive(Debug, Clone)]
pub struct EdgeDetector {
    p: EdgeParams,
    quiet: QuietBounds,
    state: State,
    /// Where the current low run entered the low band.
    low_start: usize,
    /// First sample below 50 % since the signal was last at or above it.
    below_mid_start: usize,
    /// Last sample below 50 %.
    last_below_mid: Option<usize>,
    was_below_mid: bool,
    qualified: bool,
    next_index: usize,
}

impl EdgeDetector {
    pub fn new(p: EdgeParams) -> Self {
        EdgeDetector {
            p,
            quiet: QuietBounds::of(&p),
            state: State::Unknown,
            low_start: 0,
            below_mid_start: 0,
            last_below_mid: None,
            was_below_mid: false,
            qualified: false,
            next_index: 0,
        }
    }

    /// Feeds the next block of samples; marks found are appended to `out`.
    pub fn push(&mut self, block: &[f64], out: &mut Vec<Mark>) {
        push_runs(self, block, out);
    }

    /// Takes a run of samples that cannot change the state in one step: all beyond the
    /// hysteresis band on the side the detector is on (and, in the on state, not reaching
    /// the dwell). Long captures are almost all such runs; `false` leaves the run to
    /// [`Self::push_each`], which gives the same result sample by sample.
    #[inline(always)]
    fn skip_quiet(&mut self, run: &[f64]) -> bool {
        let (first, len) = (self.next_index, run.len());
        if len == 0 {
            return true;
        }
        let QuietBounds {
            s,
            above,
            below,
            floor_in,
            floor_out,
        } = self.quiet;
        let v_on = self.p.v_on;
        // Folded without a short cut so the comparisons vectorise; NaN fails both.
        match self.state {
            State::High => {
                let above = run
                    .iter()
                    .fold(true, |all, &v| all & (s * (v - v_on) > above));
                if !above {
                    return false;
                }
                self.was_below_mid = false;
                self.qualified = false;
            }
            State::Low => {
                let last = first + len - 1;
                let qualifies_here =
                    !self.qualified && last + 1 - self.low_start >= self.p.dwell_samples;
                if qualifies_here {
                    return false;
                }
                let below = run.iter().fold(true, |all, &v| {
                    let y = s * (v - v_on);
                    all & (y < below) & (y > floor_in)
                });
                if !below {
                    return false;
                }
                self.all_below_mid(first, last);
            }
            State::Beyond => {
                let beyond = run
                    .iter()
                    .fold(true, |all, &v| all & (s * (v - v_on) < floor_out));
                if !beyond {
                    return false;
                }
                self.all_below_mid(first, first + len - 1);
            }
            State::Unknown => return false,
        }
        self.next_index += len;
        true
    }

    /// Notes samples `first..=last`, all below the 50 % level.
    #[inline(always)]
    fn all_below_mid(&mut self, first: usize, last: usize) {
        if !self.was_below_mid {
            self.below_mid_start = first;
        }
        self.was_below_mid = true;
        self.last_below_mid = Some(last);
    }

    /// [`Self::push`] one sample at a time.
    fn push_each(&mut self, block: &[f64], out: &mut Vec<Mark>) {
        let h = self.p.hysteresis_f;
        for &v in block {
            let k = self.next_index;
            self.next_index += 1;
            let x = self.p.unit(v);
            if !x.is_finite() {
                continue;
            }
            if x < 0.5 {
                if !self.was_below_mid {
                    self.below_mid_start = k;
                }
                self.was_below_mid = true;
                self.last_below_mid = Some(k);
            } else {
                self.was_below_mid = false;
            }
            if x < -self.p.floor_f {
                if self.state != State::Beyond {
                    self.state = State::Beyond;
                    self.qualified = false;
                }
            } else if x < 0.5 - h {
                if self.state != State::Low {
                    // A record that opens in the on state counts its run from sample 0.
                    self.low_start = if self.state == State::Unknown { 0 } else { k };
                    self.state = State::Low;
                    self.qualified = false;
                }
            } else if x > 0.5 + h {
                if self.state == State::Low && self.qualified {
                    if let Some(i) = self.last_below_mid {
                        out.push(Mark::Edge { index: i });
                    }
                }
                self.state = State::High;
                self.qualified = false;
            }
            if self.state == State::Low
                && !self.qualified
                && k + 1 - self.low_start >= self.p.dwell_samples
            {
                self.qualified = true;
                out.push(Mark::TurnOn {
                    index: self.below_mid_start.min(self.low_start),
                });
            }
        }
    }
}

crate::avx2::twice_compiled!(
    /// [`EdgeDetector::push`], compiled for AVX2 too: every sample of a long capture passes
    /// the quiet-run tests on the scanning thread, which sets the pace of its last pass.
    fn push_runs(det: &mut EdgeDetector, block: &[f64], out: &mut Vec<Mark>) => push_runs_on;
);

#[inline(always)]
fn push_runs_on(det: &mut EdgeDetector, block: &[f64], out: &mut Vec<Mark>) {
    for run in block.chunks(QUIET_RUN) {
        if !det.skip_quiet(run) {
            det.push_each(run, out);
        }
    }
}

/// Lengths (in samples) of the runs spent in the low (on) band, hysteresis as in
/// [`EdgeDetector`]. A run cut by the start or the end of the record is included: its
/// length is a lower bound, and a long one still marks a true on state.
///
/// Samples beyond the detector's floor (a body diode holding the node) neither count nor
/// end a run: a stretch the diode holds after a spike is no on state (it can outlast a
/// short pre-trigger, and so set the dwell above the true on state's length), while a ring
/// trough the diode clips stays one dip. Cut at the floor instead, a clipped trough fell into
/// short pieces, and the widest gap between run lengths then fell between those pieces and
/// a later unclipped dip, which became an "on state" (a clean record of two events gave
/// four).
pub fn low_run_lengths(v: &[f64], p: &EdgeParams) -> Vec<usize> {
    let mut runs = LowRuns::new(p);
    runs.push(v);
    runs.finish()
}

/// [`low_run_lengths`] fed block by block.
#[derive(Debug, Clone)]
pub struct LowRuns {
    v_on: f64,
    span: f64,
    hysteresis_f: f64,
    floor_f: f64,
    /// Samples beyond the floor since the open run started.
    beyond: usize,
    runs: Vec<usize>,
    start: Option<usize>,
    next_index: usize,
}

impl LowRuns {
    /// The runs the detector `p` sees (its dwell is not used).
    pub fn new(p: &EdgeParams) -> Self {
        LowRuns {
            v_on: p.v_on,
            span: p.v_off - p.v_on,
            hysteresis_f: p.hysteresis_f,
            floor_f: p.floor_f,
            beyond: 0,
            runs: Vec::new(),
            start: None,
            next_index: 0,
        }
    }

    pub fn push(&mut self, block: &[f64]) {
        push_low_runs(self, block);
    }

    /// The run lengths, the run still open at the end included.
    pub fn finish(mut self) -> Vec<usize> {
        if let Some(s) = self.start {
            self.runs.push(self.next_index - s - self.beyond);
        }
        self.runs
    }
}

crate::avx2::twice_compiled!(
    /// Feeds `block` to `runs`. Sixty-four samples at a time become two bit masks, the
    /// samples in the low band and those above the high one (comparisons that vectorise),
    /// and only the first of the kind the state waits for is looked at, so a stretch that
    /// stays on one side costs one step: the same runs as testing each sample in turn
    /// (a unit test compares them), a fifth of the instructions. Compiled for AVX2 too.
    fn push_low_runs(runs: &mut LowRuns, block: &[f64]) => push_low_runs_on;
);

#[inline(always)]
fn push_low_runs_on(runs: &mut LowRuns, block: &[f64]) {
    let (v_on, span) = (runs.v_on, runs.span);
    let (low_below, high_above) = (0.5 - runs.hysteresis_f, 0.5 + runs.hysteresis_f);
    let floor = -runs.floor_f;
    // The beyond samples of `mask` in bits `from..to`.
    let count = |mask: u64, from: u32, to: u32| -> usize {
        let width = to - from;
        let m = if width >= 64 {
            u64::MAX
        } else {
            (1u64 << width) - 1
        };
        ((mask >> from) & m).count_ones() as usize
    };
    for chunk in block.chunks(64) {
        let (mut low, mut high, mut beyond) = (0u64, 0u64, 0u64);
        for (j, &x) in chunk.iter().enumerate() {
            let u = (x - v_on) / span;
            let is_beyond = u < floor;
            let is_low = u < low_below && !is_beyond;
            low |= u64::from(is_low) << j;
            beyond |= u64::from(is_beyond) << j;
            // A sample in the low band is never taken as high (a negative hysteresis
            // makes the bands overlap).
            high |= u64::from(!is_low && !is_beyond && u > high_above) << j;
        }
        let base = runs.next_index;
        let n = chunk.len() as u32;
        let mut pos = 0u32;
        while pos < n {
            let waiting = if runs.start.is_none() { low } else { high };
            let rest = waiting >> pos;
            if rest == 0 {
                if runs.start.is_some() {
                    runs.beyond += count(beyond, pos, n);
                }
                break;
            }
            let j = pos + rest.trailing_zeros();
            let k = base + j as usize;
            match runs.start.take() {
                None => {
                    runs.start = Some(k);
                    runs.beyond = 0;
                }
                Some(s) => {
                    runs.beyond += count(beyond, pos, j);
                    runs.runs.push(k - s - runs.beyond);
                }
            }
            pos = j + 1;
        }
        runs.next_index += chunk.len();
    }
}

/// The dwell that separates ringing dips from true on states: the geometric middle of the
/// widest gap (ratio at least [`DWELL_GAP_RATIO`]) between sorted run lengths; half the
/// shortest run when all runs are of one kind.
pub fn derive_dwell(runs: &[usize]) -> usize {
    let mut r: Vec<usize> = runs.iter().copied().filter(|&n| n > 0).collect();
    r.sort_unstable();
    let Some(&shortest) = r.first() else {
        return 2;
    };
    let mut best: Option<(f64, usize, usize)> = None;
    for w in r.windows(2) {
        let (a, b) = (w[0] as f64, w[1] as f64);
        let ratio = b / a;
        if ratio >= DWELL_GAP_RATIO && best.is_none_or(|(q, _, _)| ratio > q) {
            best = Some((ratio, w[0], w[1]));
        }
    }
    match best {
        Some((_, a, b)) => (((a as f64) * (b as f64)).sqrt().ceil() as usize).max(2),
        None => (shortest / 2).max(2),
    }
}

/// Edges and turn-ons of a whole record.
#[derive(Debug, Clone, PartialEq)]
pub struct EdgeScan {
    /// Sample index before each turn-off 50 % crossing.
    pub edges: Vec<usize>,
    /// First sample below 50 % of each on state that held for the dwell.
    pub turn_ons: Vec<usize>,
    pub dwell_samples: usize,
}

/// Runs the detector over a whole record.
pub fn scan_edges(v: &[f64], p: EdgeParams) -> EdgeScan {
    let mut det = EdgeDetector::new(p);
    let mut marks = Vec::new();
    det.push(v, &mut marks);
    let mut scan = EdgeScan {
        edges: Vec::new(),
        turn_ons: Vec::new(),
        dwell_samples: p.dwell_samples,
    };
    for m in marks {
        match m {
            Mark::Edge { index } => scan.edges.push(index),
            Mark::TurnOn { index } => scan.turn_ons.push(index),
        }
    }
    scan
}

/// Sample range `[start, end)` of each event window: from a little before the edge (half
/// the on run before it, at most a tenth of the window after the edge and at least 16
/// samples, so the pre-edge on level is included) to the next turn-on, the end of the record
/// or `max_samples` after the edge, whichever comes first. The flag says the window was cut
/// by `max_samples`.
pub fn event_windows(
    scan: &EdgeScan,
    n: usize,
    max_samples: Option<usize>,
) -> Vec<(usize, usize, bool)> {
    let mut out = Vec::with_capacity(scan.edges.len());
    for &e in &scan.edges {
        // Turn-ons come in order, so both neighbours are found by bisection.
        let after = scan.turn_ons.partition_point(|&t| t <= e);
        let next_on = scan.turn_ons.get(after).copied().unwrap_or(n);
        let (end, cut) = match max_samples {
            Some(m) if e.saturating_add(m) < next_on => (e + m, true),
            _ => (next_on, false),
        };
        let prev_on = after
            .checked_sub(1)
            .and_then(|k| scan.turn_ons.get(k))
            .copied()
            .unwrap_or(0);
        let on_run = e.saturating_sub(prev_on);
        let pre = (on_run / 2).min(((end - e) / 10).max(16));
        out.push((e.saturating_sub(pre), end.min(n), cut));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(dwell: usize) -> EdgeParams {
        EdgeParams {
            v_on: 0.0,
            v_off: 10.0,
            hysteresis_f: 0.1,
            dwell_samples: dwell,
            floor_f: f64::INFINITY,
        }
    }

    /// On for 200 samples, a spike, then a ring around the off level swinging through the
    /// on level (amplitude 15 V on a 10 V step, 40-sample period), off for a while.
    fn ringing_cycle(v: &mut Vec<f64>) {
        v.extend(std::iter::repeat_n(0.0, 200));
        for k in 0..600 {
            let t = k as f64;
            v.push(
                10.0 + 15.0 * (-t / 150.0).exp() * (2.0 * std::f64::consts::PI * t / 40.0).sin(),
            );
        }
    }

    /// The runs counted on masks, however the samples come in blocks and whichever build
    /// runs, against the definition tested sample by sample: on a ring through the middle
    /// and below the floor (samples there neither count nor end a run), noise, NaN, and bands
    /// that overlap (a negative hysteresis).
    #[test]
    fn low_runs_counted_on_masks_match_a_sample_by_sample_count() {
        let plain = |v: &[f64], h: f64, floor: f64| {
            let (mut runs, mut start, mut beyond) = (Vec::new(), None, 0);
            for (k, &x) in v.iter().enumerate() {
                let u = (x - 0.0) / 10.0;
                if u < -floor {
                    beyond += usize::from(start.is_some());
                } else if u < 0.5 - h {
                    if start.is_none() {
                        start = Some(k);
                        beyond = 0;
                    }
                } else if u > 0.5 + h {
                    if let Some(s) = start.take() {
                        runs.push(k - s - beyond);
                    }
                }
            }
            if let Some(s) = start {
                runs.push(v.len() - s - beyond);
            }
            runs
        };
        let mut v = Vec::new();
        for _ in 0..3 {
            ringing_cycle(&mut v);
        }
        let mut g = 99u64;
        v.extend((0..700).map(|_| {
            g = g
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (g >> 11) as f64 / (1u64 << 53) as f64 * 10.0
        }));
        v[130] = f64::NAN;
        v[1000] = f64::NAN;
        for (h, floor) in [0.1, 0.0, -0.05, 0.3]
            .into_iter()
            .flat_map(|h| [(h, f64::INFINITY), (h, 0.2), (h, 0.0)])
        {
            let want = plain(&v, h, floor);
            assert!(want.len() > 10, "{h}: {want:?}");
            let p = EdgeParams {
                hysteresis_f: h,
                floor_f: floor,
                ..params(1)
            };
            assert_eq!(low_run_lengths(&v, &p), want, "h {h}, floor {floor}");
            for size in [1, 5, 63, 64, 65, 200] {
                let (mut fast, mut base) = (LowRuns::new(&p), LowRuns::new(&p));
                for block in v.chunks(size) {
                    fast.push(block);
                    push_low_runs_on(&mut base, block);
                }
                assert_eq!(
                    fast.finish(),
                    want,
                    "h {h}, floor {floor}, blocks of {size}"
                );
                assert_eq!(
                    base.finish(),
                    want,
                    "h {h}, floor {floor}, blocks of {size}"
                );
            }
        }
    }

    #[test]
    fn ringing_through_the_middle_is_not_an_edge() {
        let mut v = Vec::new();
        for _ in 0..5 {
            ringing_cycle(&mut v);
        }
        let runs = low_run_lengths(&v, &params(1));
        let dwell = derive_dwell(&runs);
        // Ring dips last under half the 40-sample period; on states 200 samples.
        assert!(dwell > 20 && dwell < 200, "dwell {dwell} from {runs:?}");
        let scan = scan_edges(&v, params(dwell));
        assert_eq!(scan.edges, vec![199, 999, 1799, 2599, 3399]);
        assert_eq!(scan.turn_ons.len(), 5);
    }

    #[test]
    fn block_feeding_gives_the_same_marks_as_one_slice() {
        let mut v = Vec::new();
        for _ in 0..3 {
            ringing_cycle(&mut v);
        }
        let mut whole = Vec::new();
        EdgeDetector::new(params(60)).push(&v, &mut whole);
        let mut det = EdgeDetector::new(params(60));
        let mut blocks = Vec::new();
        for chunk in v.chunks(37) {
            det.push(chunk, &mut blocks);
        }
        assert_eq!(whole, blocks);
    }

    /// The quiet-run short cut against the sample-by-sample state machine: long on and off
    /// stretches (taken 64 at a time), noise straddling the band edges, a dwell reached in
    /// the middle of a run, NaN and infinite samples, steps up and down, and blocks of
    /// every awkward size.
    #[test]
    fn quiet_runs_give_the_same_marks_as_sample_by_sample() {
        let mut v = Vec::new();
        let mut seed = 12345u64;
        let mut noise = |scale: f64| {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            scale * ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5)
        };
        for cycle in 0..6 {
            let on = 300 + 97 * cycle;
            v.extend((0..on).map(|_| noise(if cycle % 2 == 0 { 0.5 } else { 8.0 })));
            ringing_cycle(&mut v);
            v.extend(
                (0..1000 + 13 * cycle).map(|_| 10.0 + noise(if cycle == 3 { 9.0 } else { 1.0 })),
            );
            if cycle == 2 {
                v.push(f64::NAN);
                v.extend(std::iter::repeat_n(f64::NAN, 70));
            }
        }
        v.extend(std::iter::repeat_n(f64::INFINITY, 3));
        v.extend(std::iter::repeat_n(10.0, 100));
        // The same record upside down: a step down, where the quiet tests' sign is minus
        // one.
        let flipped: Vec<f64> = v.iter().map(|x| -x).collect();
        for (v, sign) in [(&v, 1.0), (&flipped, -1.0)] {
            for (dwell, floor) in [1, 60, 150, 400]
                .into_iter()
                .flat_map(|d| [(d, f64::INFINITY), (d, 0.15)])
            {
                let p = EdgeParams {
                    v_off: 10.0 * sign,
                    floor_f: floor,
                    ..params(dwell)
                };
                let mut want = Vec::new();
                let mut one = EdgeDetector::new(p);
                for x in v {
                    one.push_each(std::slice::from_ref(x), &mut want);
                }
                assert!(want.len() > 4, "dwell {dwell}: {want:?}");
                for size in [1, 7, 63, 64, 65, 100, 1000, v.len()] {
                    let (mut got, mut baseline) = (Vec::new(), Vec::new());
                    let mut det = EdgeDetector::new(p);
                    // The baseline build too (the AVX2 one runs in `push` where the CPU
                    // has it).
                    let mut plain = EdgeDetector::new(p);
                    for block in v.chunks(size) {
                        det.push(block, &mut got);
                        push_runs_on(&mut plain, block, &mut baseline);
                    }
                    let case =
                        format!("sign {sign}, dwell {dwell}, floor {floor}, blocks of {size}");
                    assert_eq!(got, want, "{case}");
                    assert_eq!(baseline, want, "{case}");
                }
            }
        }
    }

    /// The division-free quiet tests never pass a sample the exact test would not: samples
    /// ulp by ulp and 1e-13 of the step at a time either side of each band edge, for steps
    /// up and down, large offsets, tiny and huge steps; and they do pass samples clearly
    /// beyond the band.
    #[test]
    fn quiet_bounds_never_pass_a_sample_the_exact_test_fails() {
        let cases = [
            (0.0, 10.0, 0.1),
            (24.0, 0.15, 0.07),
            (-3.3, 1e6, 0.25),
            (1e9, 1e9 + 3.0, 0.01),
            (5e-300, 7e-300, 0.2),
            (2.0, -40.0, 0.45),
        ];
        for (v_on, v_off, h) in cases {
            let p = EdgeParams {
                v_on,
                v_off,
                hysteresis_f: h,
                dwell_samples: 10,
                floor_f: 0.03,
            };
            let q = QuietBounds::of(&p);
            let d = v_off - v_on;
            let mut passed = [0usize; 4];
            for edge in [0.5 + h, 0.5 - h, -p.floor_f] {
                let centre = v_on + edge * d;
                let mut vs = vec![centre, v_on + 0.5 * d, v_on + 2.0 * d, v_on - d];
                let (mut up, mut down) = (centre, centre);
                for k in 0..2000 {
                    up = up.next_up();
                    down = down.next_down();
                    // Also steps of 1e-13 of the step, across the bounds' margin.
                    let f = k as f64 * 1e-13 * d;
                    vs.extend([up, down, centre + f, centre - f]);
                }
                for v in vs {
                    if q.s * (v - v_on) > q.above {
                        assert!(p.unit(v) > 0.5 + h, "{v} above for {p:?}");
                        passed[0] += 1;
                    }
                    if q.s * (v - v_on) < q.below {
                        assert!(p.unit(v) < 0.5 - h, "{v} below for {p:?}");
                        passed[1] += 1;
                    }
                    if q.s * (v - v_on) > q.floor_in {
                        assert!(p.unit(v) >= -p.floor_f, "{v} inside the floor for {p:?}");
                        passed[2] += 1;
                    }
                    if q.s * (v - v_on) < q.floor_out {
                        assert!(p.unit(v) < -p.floor_f, "{v} beyond the floor for {p:?}");
                        passed[3] += 1;
                    }
                }
            }
            assert!(passed.iter().all(|&n| n > 0), "{p:?}: {passed:?}");
        }
    }

    /// A ring clipped by the switch's body diode: the node sits 0.7 V beyond the on level
    /// (7 % of this 10 V step) for 150 samples, longer than the dwell, then rings up again as
    /// the diode lets go. Taken for an on state, that was a second turn-off in every cycle
    /// and a turn-on cutting the real event's window; beyond the floor, it is neither.
    #[test]
    fn a_body_diode_stretch_is_not_an_on_state() {
        let mut v = Vec::new();
        for _ in 0..3 {
            v.extend(std::iter::repeat_n(0.0, 400));
            // Spike and one lobe down to the diode's clamp, held, then the free ring.
            for k in 0..10 {
                v.push(60.0 * (std::f64::consts::PI * k as f64 / 10.0).sin());
            }
            v.extend(std::iter::repeat_n(-0.7, 150));
            for k in 0..400 {
                let t = k as f64;
                v.push(
                    10.0 - 10.7 * (-t / 60.0).exp() * (2.0 * std::f64::consts::PI * t / 40.0).cos(),
                );
            }
            v.extend(std::iter::repeat_n(10.0, 300));
        }
        let with_floor = EdgeParams {
            floor_f: 0.04,
            ..params(100)
        };
        let scan = scan_edges(&v, with_floor);
        assert_eq!(scan.edges.len(), 3, "{scan:?}");
        assert_eq!(scan.turn_ons.len(), 3, "{scan:?}");
        // Without the floor the diode stretch qualifies as an on state (the old behaviour).
        let scan = scan_edges(&v, params(100));
        assert_eq!(scan.edges.len(), 6, "{scan:?}");
        // The runs the dwell comes from leave the diode stretch's samples out.
        let runs = low_run_lengths(&v, &with_floor);
        assert!(runs.iter().all(|&r| !(100..400).contains(&r)), "{runs:?}");
    }

    #[test]
    fn windows_end_at_the_next_turn_on_or_the_limit() {
        let scan = EdgeScan {
            edges: vec![100, 500],
            turn_ons: vec![0, 400],
            dwell_samples: 50,
        };
        let w = event_windows(&scan, 900, None);
        assert_eq!(w[0], (100 - 30, 400, false));
        assert_eq!(w[1].1, 900);
        let w = event_windows(&scan, 900, Some(100));
        assert_eq!(w[0].1, 200);
        assert!(w[0].2);
    }

    #[test]
    fn dwell_without_ring_dips_is_half_the_shortest_on_run() {
        assert_eq!(derive_dwell(&[300, 320, 310]), 150);
        assert_eq!(derive_dwell(&[]), 2);
    }
}
