//! Descriptive summary of one metric: count, extremes, mean, sample standard deviation and
//! percentiles.

use super::MetricSummary;

/// Quantile of already sorted, finite values by linear interpolation between order
/// statistics: h = (n - 1) p, Q = x[⌊h⌋] + (h - ⌊h⌋)(x[⌊h⌋+1] - x[⌊h⌋]) (Hyndman & Fan 1996,
/// definition 7; numpy.quantile's default "linear"). None when empty or p outside [0, 1].
pub fn quantile_type7(sorted: &[f64], p: f64) -> Option<f64> {
    if sorted.is_empty() || !(0.0..=1.0).contains(&p) {
        return None;
    }
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let frac = h - h.floor();
    let x_lo = *sorted.get(lo)?;
    match sorted.get(lo + 1) {
        Some(x_hi) if frac > 0.0 => Some(x_lo + frac * (x_hi - x_lo)),
        _ => Some(x_lo),
    }
}

/// Finite values, sorted ascending.
pub(crate) fn sorted_finite(values: &[f64]) -> Vec<f64> {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    // Unstable is enough: values equal under total_cmp are the same bits.
    v.sort_unstable_by(f64::total_cmp);
    v
}

/// Median (type-7 quantile at 1/2) of the finite values; None when there are none.
pub fn median(values: &[f64]) -> Option<f64> {
    quantile_type7(&sorted_finite(values), 0.5)
}

/// Summary of the finite values (NaN and infinities are ignored, as an unmeasured metric is).
/// `std` is the sample standard deviation with n - 1 in the denominator (None for n < 2).
/// The mean and variance use Welford's one-pass update (Welford 1962) for stability when the
/// values sit on a large offset.
pub fn summarize(values: &[f64]) -> MetricSummary {
    let sorted = sorted_finite(values);
    let n = sorted.len();
    if n == 0 {
        return MetricSummary::default();
    }
    let mut mean = 0.0;
    let mut m2 = 0.0;
    for (i, &x) in sorted.iter().enumerate() {
        let d = x - mean;
        mean += d / (i + 1) as f64;
        m2 += d * (x - mean);
    }
    let std = (n >= 2).then(|| (m2 / (n - 1) as f64).sqrt());
    MetricSummary {
        n,
        min: sorted.first().copied(),
        max: sorted.last().copied(),
        mean: Some(mean),
        std,
        p50: quantile_type7(&sorted, 0.50),
        p95: quantile_type7(&sorted, 0.95),
        p99: quantile_type7(&sorted, 0.99),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Fixed vector for the reference values below (invented).
    const V: [f64; 11] = [3.1, -2.0, 7.5, 0.25, 12.0, 5.5, 5.5, 9.75, -0.5, 4.0, 100.0];

    #[test]
    fn percentiles_match_numpy_linear() {
        // numpy 2.x, np.percentile(V, [50, 95, 99]) (default method "linear"), computed once:
        // 5.5, 56.0, 91.2; np.mean = 13.19090909090909, np.std(ddof=1) = 29.10624347267969.
        let s = summarize(&V);
        assert_eq!(s.n, 11);
        assert_eq!(s.min, Some(-2.0));
        assert_eq!(s.max, Some(100.0));
        let close = |a: Option<f64>, b: f64| (a.unwrap() - b).abs() < 1e-12 * b.abs().max(1.0);
        assert!(close(s.p50, 5.5));
        assert!(close(s.p95, 56.0));
        assert!(close(s.p99, 91.2));
        assert!(close(s.mean, 13.190_909_090_909_09));
        assert!(close(s.std, 29.106_243_472_679_69));
    }

    #[test]
    fn non_finite_ignored_and_empty_is_none() {
        let s = summarize(&[f64::NAN, 2.0, f64::INFINITY, 4.0]);
        assert_eq!(s.n, 2);
        assert_eq!(s.mean, Some(3.0));
        // sample sd of {2, 4}: sqrt(((−1)² + 1²)/1) = √2
        assert!((s.std.unwrap() - 2f64.sqrt()).abs() < 1e-15);
        let e = summarize(&[f64::NAN]);
        assert_eq!(e, MetricSummary::default());
        assert_eq!(e.p50, None);
        let one = summarize(&[7.0]);
        assert_eq!(one.std, None);
        assert_eq!(one.p99, Some(7.0));
    }

    #[test]
    fn quantile_edges() {
        let v = [1.0, 2.0, 4.0];
        assert_eq!(quantile_type7(&v, 0.0), Some(1.0));
        assert_eq!(quantile_type7(&v, 1.0), Some(4.0));
        // h = 2 * 0.75 = 1.5 -> 2 + 0.5 * (4 - 2) = 3
        assert_eq!(quantile_type7(&v, 0.75), Some(3.0));
        assert_eq!(quantile_type7(&v, 1.5), None);
        assert_eq!(quantile_type7(&[], 0.5), None);
        assert_eq!(median(&[5.0, 1.0, 3.0, 2.0]), Some(2.5));
    }
}
