//! `exp(-rate t)` and `sin_cos(omega t)` over the sample times of a fit, by running products
//! along runs of equal steps: a value at `t + d` follows from the value at `t` by one
//! multiplication (exp) or one rotation (sin, cos). Samples left out of a fit break a run;
//! there, and every [`RESYNC`] samples, the value is computed directly.
//!
//! Where the runs are depends only on the times, so it is found once per set of times
//! ([`StepPlan`]) and every model evaluation over them (a scan tries a few hundred decays
//! and frequencies, a least-squares fit a dozen) fills its values run by run, with no test
//! per sample.

/// Samples between direct evaluations: the running products lose about one rounding per
/// step, so resynchronising every 64 keeps them within some 1e-14 of the direct values,
/// far below what a scan for the starting point can notice.
const RESYNC: usize = 64;

/// A run of samples: the first computed directly (taking a new step when `new_step` is
/// given), the others `first + 1 .. end` each one step on from the one before.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Run {
    first: usize,
    end: usize,
    new_step: Option<f64>,
}

/// The runs of equal steps in a set of increasing times.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct StepPlan {
    runs: Vec<Run>,
}

impl StepPlan {
    /// Walks the times once. A step counts as equal to the run's step within 1e-9 of it;
    /// a sample whose step differs starts a run with its own step; every [`RESYNC`]th
    /// sample and any sample after a non-finite step starts a run with the step kept.
    pub(crate) fn new(t: &[f64]) -> StepPlan {
        let mut runs: Vec<Run> = Vec::new();
        let (mut prev_t, mut step) = (f64::NAN, f64::NAN);
        for (i, &ti) in t.iter().enumerate() {
            let d = ti - prev_t;
            prev_t = ti;
            let same = (d - step).abs() <= 1e-9 * step.abs();
            let starts = if same {
                ((i + 1) % RESYNC == 0).then_some(None)
            } else if d.is_finite() {
                step = d;
                Some(Some(d))
            } else {
                Some(None)
            };
            match (starts, runs.last_mut()) {
                (None, Some(run)) => run.end = i + 1,
                // A run cannot start without a direct value (`same` needs a step).
                (None, None) => runs.push(Run {
                    first: i,
                    end: i + 1,
                    new_step: None,
                }),
                (Some(new_step), _) => runs.push(Run {
                    first: i,
                    end: i + 1,
                    new_step,
                }),
            }
        }
        StepPlan { runs }
    }
}

/// `exp(-rate t)` for every time of `plan` into `out` (as long as the times).
pub(crate) fn fill_decay(t: &[f64], plan: &StepPlan, rate: f64, out: &mut [f64]) {
    let mut factor = 1.0;
    for run in &plan.runs {
        let (Some(&t0), Some(values)) = (t.get(run.first), out.get_mut(run.first..run.end)) else {
            return;
        };
        let mut e = (-rate * t0).exp();
        if let Some(step) = run.new_step {
            factor = (-rate * step).exp();
        }
        let mut values = values.iter_mut();
        if let Some(v) = values.next() {
            *v = e;
        }
        for v in values {
            e *= factor;
            *v = e;
        }
    }
}

/// `sin_cos(omega t)` for every time of `plan` into `out` (as long as the times).
pub(crate) fn fill_sin_cos(t: &[f64], plan: &StepPlan, omega: f64, out: &mut [(f64, f64)]) {
    let mut step_sc = (0.0, 1.0);
    for run in &plan.runs {
        let (Some(&t0), Some(values)) = (t.get(run.first), out.get_mut(run.first..run.end)) else {
            return;
        };
        let mut sc = (omega * t0).sin_cos();
        if let Some(step) = run.new_step {
            step_sc = (omega * step).sin_cos();
        }
        let (sd, cd) = step_sc;
        let mut values = values.iter_mut();
        if let Some(v) = values.next() {
            *v = sc;
        }
        for v in values {
            let (s, c) = sc;
            sc = (s * cd + c * sd, c * cd - s * sd);
            *v = sc;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Times at a step of 0.013 with a left-out stretch (samples 700 to 899).
    fn gapped_times() -> Vec<f64> {
        let mut t: Vec<f64> = (0..700).map(|i| i as f64 * 0.013).collect();
        t.extend((900..1500).map(|i| i as f64 * 0.013));
        t
    }

    /// The running products agree with direct evaluation (the reference) within 1e-12,
    /// across a gap in the times (a left-out stretch) and over many resynchronisations.
    #[test]
    fn running_products_match_direct_values() {
        let t = gapped_times();
        let plan = StepPlan::new(&t);
        let omega = 3.7;
        let mut trig = vec![(0.0, 0.0); t.len()];
        fill_sin_cos(&t, &plan, omega, &mut trig);
        let mut decay = vec![0.0; t.len()];
        fill_decay(&t, &plan, 0.2, &mut decay);
        for ((&ti, &(s, c)), &e) in t.iter().zip(&trig).zip(&decay) {
            let (s0, c0) = (omega * ti).sin_cos();
            assert!((s - s0).abs() < 1e-12 && (c - c0).abs() < 1e-12, "t {ti}");
            let e0 = (-0.2 * ti).exp();
            assert!((e - e0).abs() < 1e-12 * e0.max(1e-300) + 1e-300, "t {ti}");
        }
    }

    /// Where the runs start: the first sample (direct), the second (the step is taken),
    /// every 64th sample (direct, step kept), and the two samples after a gap (the first
    /// takes the gap as its step, the second takes the regular step back).
    #[test]
    fn runs_start_where_the_steps_say() {
        let t = gapped_times();
        let plan = StepPlan::new(&t);
        let starts: Vec<(usize, bool)> = plan
            .runs
            .iter()
            .map(|r| (r.first, r.new_step.is_some()))
            .collect();
        assert_eq!(
            &starts[..4],
            &[(0, false), (1, true), (63, false), (127, false)]
        );
        assert!(starts.contains(&(700, true)) && starts.contains(&(701, true)));
        // The runs cover every sample once, in order.
        let mut next = 0;
        for r in &plan.runs {
            assert_eq!(r.first, next);
            assert!(r.end > r.first);
            next = r.end;
        }
        assert_eq!(next, t.len());
    }

    /// A non-finite time breaks the run without taking a step: its own value and the next
    /// are direct.
    #[test]
    fn a_non_finite_time_is_computed_directly() {
        let t = [0.0, 1.0, 2.0, f64::NAN, 4.0, 5.0];
        let plan = StepPlan::new(&t);
        let mut e = [0.0; 6];
        fill_decay(&t, &plan, 0.5, &mut e);
        for (k, &tk) in t.iter().enumerate() {
            if tk.is_finite() {
                assert!((e[k] - (-0.5 * tk).exp()).abs() < 1e-15, "sample {k}");
            } else {
                assert!(e[k].is_nan());
            }
        }
    }
}
