//! ADC rails and code step seen in text data, where no header states them.
//!
//! A digitiser that overranges writes its extreme code for every clipped sample, so the
//! extreme value of a channel repeating several times marks a rail (common practice; a true
//! peak lands on one sample, rarely on the same value twice). The code step is the smallest
//! gap between distinct values when every gap is a whole multiple of it.

use super::AdcRange;

/// Samples at exactly the extreme value needed to call it a rail.
const MIN_RAIL_HITS: u64 = 3;
/// A value held by more than this share of samples is a state level, not a rail.
const MAX_RAIL_SHARE: f64 = 0.25;
/// Values kept per channel to estimate the code step (bounded memory).
const KEPT_VALUES: usize = 1 << 16;
/// Share of gaps that must be whole multiples of the step to call the values gridded.
const GRID_SHARE: f64 = 0.99;

/// Running extremes of one channel.
#[derive(Debug, Clone)]
pub(crate) struct RailWatch {
    min: f64,
    max: f64,
    n_min: u64,
    n_max: u64,
    n: u64,
    kept: Vec<f64>,
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
        }
    }
}

impl RailWatch {
    pub(crate) fn observe(&mut self, values: &[f64]) {
        for &x in values {
            if x > self.max {
                self.max = x;
                self.n_max = 1;
            } else if x == self.max {
                self.n_max += 1;
            }
            if x < self.min {
                self.min = x;
                self.n_min = 1;
            } else if x == self.min {
                self.n_min += 1;
            }
        }
        self.n += values.len() as u64;
        let room = KEPT_VALUES.saturating_sub(self.kept.len());
        self.kept
            .extend_from_slice(values.get(..room.min(values.len())).unwrap_or(&[]));
    }

    /// Rails and step seen, with a note for `inspect`. Unseen rails are infinite.
    pub(crate) fn conclude(&self, name: &str, unit: &str) -> Option<(AdcRange, String)> {
        if self.n == 0 || self.min >= self.max {
            return None;
        }
        let is_rail =
            |hits: u64| hits >= MIN_RAIL_HITS && (hits as f64) <= MAX_RAIL_SHARE * self.n as f64;
        let upper = is_rail(self.n_max);
        let lower = is_rail(self.n_min);
        let step = code_step(&self.kept);
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
            parts.push(format!("code step {s:e} {unit}"));
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

/// Smallest gap between distinct values, when the values sit on a grid of that step.
pub(crate) fn code_step(values: &[f64]) -> Option<f64> {
    let mut v: Vec<f64> = values.to_vec();
    v.sort_by(|a, b| a.total_cmp(b));
    let n_all = v.len();
    v.dedup();
    if v.len() < 3 || v.len() == n_all {
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

    #[test]
    fn repeated_extremes_are_rails() {
        // An invented clipped trace on a 0.5 V grid: three samples stuck at 10 V.
        let mut w = RailWatch::default();
        let v = [
            0.0, 0.5, 1.0, 0.0, 10.0, 10.0, 10.0, 4.5, 0.5, 0.0, 0.0, 1.5, -0.5, 0.0,
        ];
        w.observe(&v);
        let (r, note) = w.conclude("v", "V").unwrap();
        assert_eq!(r.max_v, 10.0);
        assert_eq!(r.min_v, f64::NEG_INFINITY);
        assert_eq!(r.step_v, Some(0.5));
        assert!(note.contains("upper rail 10 V"), "{note}");
    }

    #[test]
    fn values_off_a_grid_have_no_step() {
        let v = [0.0, 0.1, 0.1, 0.37, 0.52, 0.9];
        assert_eq!(code_step(&v), None);
        let g = [0.0, 0.25, 0.25, 0.75, 1.5];
        assert_eq!(code_step(&g), Some(0.25));
    }
}
