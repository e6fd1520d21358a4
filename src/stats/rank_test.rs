//! Comparing two variants: the Mann-Whitney U (Wilcoxon rank-sum) test and medians.

use serde::Serialize;

use super::special::normal_sf;
use super::summary::{median, sorted_finite};
use super::StatsError;

/// Samples this small on either side, without ties, get the exact null distribution (the
/// same switch-over as scipy.stats.mannwhitneyu's automatic choice).
const EXACT_MAX_N: usize = 8;

/// Bound on n₁n₂ for the exact distribution, whose table grows as n₁n₂ times the smaller
/// sample; beyond it the normal approximation is already close.
const EXACT_MAX_PAIRS: usize = 2500;

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct MannWhitney {
    /// U statistic of the first sample: the number of pairs (a, b) with a > b, ties counting
    /// one half.
    pub u: f64,
    /// Standardised statistic, with tie and continuity corrections; positive when the first
    /// sample tends to be larger. None when every value is tied.
    pub z: Option<f64>,
    /// Two-sided p-value. None when every value is tied (no ranking to test).
    pub p_value: Option<f64>,
    /// "exact" or "normal approximation".
    pub method: &'static str,
}

/// Two-sided Mann-Whitney U test (Mann & Whitney 1947). Non-finite values are left out.
/// With ties or with both samples larger than 8: normal approximation with the tie-corrected
/// variance σ² = n₁n₂/12 [(n + 1) - Σ(t³ - t)/(n(n - 1))] and a continuity correction of 1/2
/// (as scipy.stats.mannwhitneyu, method "asymptotic", use_continuity=True). Otherwise the
/// exact distribution of U, p = 2 P(U ≥ max(U₁, U₂)) capped at 1 (as scipy's "exact"),
/// as long as n₁n₂ ≤ 2500.
pub fn mann_whitney_u(a: &[f64], b: &[f64]) -> Result<MannWhitney, StatsError> {
    let a = sorted_finite(a);
    let b = sorted_finite(b);
    let (n1, n2) = (a.len(), b.len());
    if n1 == 0 || n2 == 0 {
        return Err(StatsError::EmptySample);
    }
    // Midranks over the merged samples; a tie group of size t adds t³ - t to the correction.
    let mut merged: Vec<(f64, bool)> = a
        .iter()
        .map(|&v| (v, true))
        .chain(b.iter().map(|&v| (v, false)))
        .collect();
    merged.sort_by(|x, y| x.0.total_cmp(&y.0));
    let n = merged.len();
    let mut rank_sum_a = 0.0;
    let mut tie_term = 0.0;
    let mut i = 0;
    while i < n {
        let mut j = i + 1;
        while j < n && merged[j].0 == merged[i].0 {
            j += 1;
        }
        let t = (j - i) as f64;
        let midrank = (i + j + 1) as f64 / 2.0; // mean of ranks i+1 ..= j
        rank_sum_a += midrank * merged[i..j].iter().filter(|m| m.1).count() as f64;
        tie_term += t * t * t - t;
        i = j;
    }
    let (n1f, n2f, nf) = (n1 as f64, n2 as f64, n as f64);
    let u = rank_sum_a - n1f * (n1f + 1.0) / 2.0;
    let mu = n1f * n2f / 2.0;
    let ties = tie_term > 0.0;
    let var = if n > 1 {
        n1f * n2f / 12.0 * ((nf + 1.0) - tie_term / (nf * (nf - 1.0)))
    } else {
        0.0
    };
    let z = (var > 0.0).then(|| {
        let d = u - mu;
        d.signum() * (d.abs() - 0.5).max(0.0) / var.sqrt()
    });
    if !ties && n1.min(n2) <= EXACT_MAX_N && n1 * n2 <= EXACT_MAX_PAIRS {
        let u_big = u.max(n1f * n2f - u).round() as usize;
        // U has the same null distribution with the samples' roles swapped; the table is
        // smallest with the shorter sample second.
        let p = (2.0 * exact_upper_tail(n1.max(n2), n1.min(n2), u_big)).min(1.0);
        return Ok(MannWhitney {
            u,
            z,
            p_value: Some(p),
            method: "exact",
        });
    }
    let p_value = z.map(|z| (2.0 * normal_sf(z.abs())).min(1.0));
    Ok(MannWhitney {
        u,
        z,
        p_value,
        method: "normal approximation",
    })
}

/// P(U ≥ k) under the null hypothesis, from the counts of arrangements with each U:
/// f(i, j, k) = f(i - 1, j, k - j) + f(i, j - 1, k) (Mann & Whitney 1947, eq. 1), over
/// C(n₁ + n₂, n₁) equally likely arrangements. Counts are kept as f64 (exact up to 2⁵³).
fn exact_upper_tail(n1: usize, n2: usize, k: usize) -> f64 {
    let kmax = n1 * n2;
    // prev[j][u] holds f(i - 1, j, u); cur[j][u] holds f(i, j, u)
    let width = kmax + 1;
    let mut prev = vec![0.0f64; (n2 + 1) * width];
    for j in 0..=n2 {
        prev[j * width] = 1.0; // f(0, j, 0) = 1
    }
    let mut cur = vec![0.0f64; (n2 + 1) * width];
    for _i in 1..=n1 {
        cur.iter_mut().for_each(|c| *c = 0.0);
        cur[0] = 1.0; // f(i, 0, 0) = 1
        for j in 1..=n2 {
            for u in 0..width {
                let from_a = if u >= j { prev[j * width + u - j] } else { 0.0 };
                let from_b = cur[(j - 1) * width + u];
                cur[j * width + u] = from_a + from_b;
            }
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    let row = &prev[n2 * width..(n2 + 1) * width];
    let total: f64 = row.iter().sum();
    let upper: f64 = row.iter().skip(k).sum();
    upper / total
}

/// Two variants of one metric side by side.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Comparison {
    pub n_a: usize,
    pub n_b: usize,
    pub median_a: Option<f64>,
    pub median_b: Option<f64>,
    /// median_b - median_a.
    pub median_difference: Option<f64>,
    pub test: Option<MannWhitney>,
}

/// Medians, their difference and the Mann-Whitney test (None when a sample is empty).
pub fn compare(a: &[f64], b: &[f64]) -> Comparison {
    let median_a = median(a);
    let median_b = median(b);
    Comparison {
        n_a: a.iter().filter(|v| v.is_finite()).count(),
        n_b: b.iter().filter(|v| v.is_finite()).count(),
        median_a,
        median_b,
        median_difference: median_a.zip(median_b).map(|(x, y)| y - x),
        test: mann_whitney_u(a, b).ok(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_ties_exact_and_asymptotic_match_scipy() {
        // scipy 1.17.1 stats.mannwhitneyu(A, B): statistic 5.0;
        // method="exact" p = 0.022144522144522144 (also the automatic choice, n1 = 6 <= 8);
        // method="asymptotic" p = 0.026809130715595843.
        let a = [1.2, 3.4, 0.7, 5.1, 2.2, 4.8];
        let b = [6.3, 2.9, 7.7, 5.5, 8.1, 3.8, 9.0];
        let r = mann_whitney_u(&a, &b).unwrap();
        assert_eq!(r.u, 5.0);
        assert_eq!(r.method, "exact");
        assert!((r.p_value.unwrap() - 0.022_144_522_144_522_144).abs() < 1e-15);
        let z = r.z.unwrap();
        assert!(z < 0.0);
        assert!((2.0 * normal_sf(z.abs()) - 0.026_809_130_715_595_843).abs() < 1e-14);
    }

    #[test]
    fn ties_use_corrected_normal_approximation_like_scipy() {
        // scipy 1.17.1 stats.mannwhitneyu(A, B, method="asymptotic", use_continuity=True):
        // statistic 29.5, p = 0.07571884169166969; with the samples swapped: 80.5, same p.
        let a = [2.0, 3.0, 3.0, 5.0, 7.0, 7.0, 7.0, 9.0, 10.0, 4.0];
        let b = [5.0, 6.0, 7.0, 7.0, 8.0, 9.0, 11.0, 12.0, 3.0, 10.0, 13.0];
        let r = mann_whitney_u(&a, &b).unwrap();
        assert_eq!(r.u, 29.5);
        assert_eq!(r.method, "normal approximation");
        assert!((r.p_value.unwrap() - 0.075_718_841_691_669_69).abs() < 1e-13);
        let s = mann_whitney_u(&b, &a).unwrap();
        assert_eq!(s.u, 80.5);
        assert!((s.p_value.unwrap() - 0.075_718_841_691_669_69).abs() < 1e-13);
        assert!(s.z.unwrap() > 0.0);
    }

    #[test]
    fn exact_distribution_is_symmetric_and_complete() {
        // U ranges over 0..=n1 n2; P(U >= 0) = 1, and for n1 = n2 = 2 the six arrangements
        // give U = 0,1,2,2,3,4, so P(U >= 3) = 2/6 (enumerated by hand).
        assert!((exact_upper_tail(2, 2, 0) - 1.0).abs() < 1e-15);
        assert!((exact_upper_tail(2, 2, 3) - 2.0 / 6.0).abs() < 1e-15);
    }

    #[test]
    fn exact_tail_does_not_depend_on_sample_order() {
        // P(U >= k) for (n1, n2) = (3, 5) and (5, 3) are the same distribution (Mann &
        // Whitney 1947); C(8, 3) = 56 arrangements, U = 15 only for one: P(U >= 15) = 1/56.
        assert!((exact_upper_tail(3, 5, 15) - 1.0 / 56.0).abs() < 1e-15);
        assert!((exact_upper_tail(5, 3, 15) - 1.0 / 56.0).abs() < 1e-15);
        // a long second sample beyond the exact bound falls back to the approximation
        let long: Vec<f64> = (0..1000).map(|i| i as f64 + 0.5).collect();
        let r = mann_whitney_u(&[1.0, 2.0, 3.0], &long).unwrap();
        assert_eq!(r.method, "normal approximation");
    }

    #[test]
    fn degenerate_inputs() {
        assert_eq!(mann_whitney_u(&[], &[1.0]), Err(StatsError::EmptySample));
        let r = mann_whitney_u(&[2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0], &[2.0; 9]).unwrap();
        assert_eq!(r.p_value, None);
        let c = compare(&[1.0, 2.0, 3.0], &[4.0, 5.0, f64::NAN]);
        assert_eq!(c.median_difference, Some(2.5));
        assert_eq!(c.n_b, 2);
    }
}
