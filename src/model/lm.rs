//! A small dense Levenberg-Marquardt solver for the handful of parameters of the switch-node
//! models (Levenberg 1944; Marquardt 1963; scaling by the running maximum of the diagonal of
//! J^T J as in Moré 1978). Problems here have at most a few parameters and a few thousand
//! residuals, so the normal equations are formed and solved directly.

/// Most parameters a model may have (the solver keeps its matrices on the stack).
pub const MAX_PARAMS: usize = 6;

/// Stopping rules.
#[derive(Debug, Clone, Copy)]
pub struct LmOptions {
    /// Most model evaluations (residuals plus Jacobian).
    pub max_evals: usize,
    /// Stop when an accepted step lowers the sum of squares by less than this fraction.
    pub ftol: f64,
    /// Stop when every step component is below this fraction of its parameter.
    pub xtol: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            max_evals: 200,
            ftol: 1e-10,
            xtol: 1e-10,
        }
    }
}

/// Result of a fit. Standard errors come from sigma^2 (J^T J)^-1 with
/// sigma^2 = SSR / (m - n), the usual first-order covariance of a least-squares estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct LmFit {
    pub params: Vec<f64>,
    /// Row-major n x n covariance; `None` when J^T J is singular or m <= n.
    pub covariance: Option<Vec<f64>>,
    pub std_err: Vec<Option<f64>>,
    /// Sum of squared residuals at the solution.
    pub ssr: f64,
    /// Root mean square residual.
    pub rms: f64,
    pub n_evals: usize,
    /// True when a tolerance was met (not the evaluation limit).
    pub converged: bool,
}

/// Why a fit could not run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LmError {
    #[error("the fit has {n} parameters; 1 to {MAX_PARAMS} are supported")]
    BadParamCount { n: usize },
    #[error("the fit has {m} samples for {n} parameters; more samples than parameters are needed")]
    TooFewSamples { m: usize, n: usize },
    #[error("the model is not finite at the starting parameters")]
    BadStart,
}

/// Minimises sum r_i(p)^2. `eval(p, r, jac)` fills the m residuals and, when `jac` is given,
/// the row-major m x n Jacobian dr_i/dp_j; it returns false when the model is not finite there.
pub fn minimize<F>(p0: &[f64], m: usize, opts: &LmOptions, mut eval: F) -> Result<LmFit, LmError>
where
    F: FnMut(&[f64], &mut [f64], Option<&mut [f64]>) -> bool,
{
    let n = p0.len();
    if n == 0 || n > MAX_PARAMS {
        return Err(LmError::BadParamCount { n });
    }
    if m <= n {
        return Err(LmError::TooFewSamples { m, n });
    }
    let mut p = p0.to_vec();
    let mut r = vec![0.0; m];
    let mut jac = vec![0.0; m * n];
    let mut r_try = vec![0.0; m];
    let mut jac_try = vec![0.0; m * n];
    let mut p_try = vec![0.0; n];
    if !eval(&p, &mut r, Some(&mut jac)) || !all_finite(&r) || !all_finite(&jac) {
        return Err(LmError::BadStart);
    }
    let mut n_evals = 1;
    let mut cost = sum_sq(&r);
    let mut lambda = 1e-3;
    let mut diag_scale = [0.0f64; MAX_PARAMS];
    let mut converged = false;
    let mut jtj = [0.0f64; MAX_PARAMS * MAX_PARAMS];
    let mut jtr = [0.0f64; MAX_PARAMS];
    normal_equations(&jac, &r, m, n, &mut jtj, &mut jtr);
    while n_evals < opts.max_evals {
        for j in 0..n {
            diag_scale[j] = diag_scale[j].max(jtj[j * n + j]).max(1e-300);
        }
        let mut a = [0.0f64; MAX_PARAMS * MAX_PARAMS];
        a[..n * n].copy_from_slice(&jtj[..n * n]);
        let mut step = [0.0f64; MAX_PARAMS];
        for j in 0..n {
            a[j * n + j] += lambda * diag_scale[j];
            step[j] = -jtr[j];
        }
        if !solve(&mut a[..n * n], &mut step[..n], n) {
            lambda *= 10.0;
            if lambda > 1e20 {
                break;
            }
            continue;
        }
        for j in 0..n {
            p_try[j] = p[j] + step[j];
        }
        // The Jacobian comes with every trial: most steps are taken, and evaluating an
        // accepted point a second time for it cost more than the few rejected ones do.
        n_evals += 1;
        let ok = eval(&p_try, &mut r_try, Some(&mut jac_try)) && all_finite(&r_try);
        let cost_try = if ok { sum_sq(&r_try) } else { f64::INFINITY };
        if cost_try < cost {
            let small_step =
                (0..n).all(|j| step[j].abs() <= opts.xtol * (p_try[j].abs() + opts.xtol));
            let small_gain = cost - cost_try <= opts.ftol * cost;
            // The Jacobian at the accepted point serves the next step and the covariance; a
            // point that is finite for r but not for J ends the fit there.
            if !all_finite(&jac_try) {
                // Keep the previous, fully evaluated point.
                break;
            }
            std::mem::swap(&mut r, &mut r_try);
            std::mem::swap(&mut jac, &mut jac_try);
            p.copy_from_slice(&p_try);
            cost = cost_try;
            normal_equations(&jac, &r, m, n, &mut jtj, &mut jtr);
            lambda = (lambda * 0.1).max(1e-15);
            if small_step || small_gain || cost == 0.0 {
                converged = true;
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e20 {
                // No step lowers the cost: the point is a minimum to working precision.
                converged = true;
                break;
            }
        }
    }
    let dof = (m - n) as f64;
    let sigma2 = cost / dof;
    let covariance = invert(&jtj[..n * n], n).map(|mut inv| {
        for x in inv.iter_mut() {
            *x *= sigma2;
        }
        inv
    });
    let std_err = (0..n)
        .map(|j| {
            covariance
                .as_ref()
                .and_then(|c| c.get(j * n + j).copied())
                .filter(|v| v.is_finite() && *v >= 0.0)
                .map(f64::sqrt)
        })
        .collect();
    Ok(LmFit {
        params: p,
        covariance,
        std_err,
        ssr: cost,
        rms: (cost / m as f64).sqrt(),
        n_evals,
        converged,
    })
}

fn all_finite(x: &[f64]) -> bool {
    // Tested a chunk at a time without stopping inside one, so the test vectorises (every
    // trial's residuals and Jacobian are checked).
    x.chunks(64)
        .all(|c| c.iter().fold(true, |ok, v| ok & v.is_finite()))
}

fn sum_sq(r: &[f64]) -> f64 {
    r.iter().map(|x| x * x).sum()
}

fn normal_equations(jac: &[f64], r: &[f64], m: usize, n: usize, jtj: &mut [f64], jtr: &mut [f64]) {
    // A fixed parameter count lets the compiler unroll the inner loops, which carry the
    // whole cost of a fit over thousands of residuals.
    match n {
        2 => normal_equations_n::<2>(jac, r, m, jtj, jtr),
        3 => normal_equations_n::<3>(jac, r, m, jtj, jtr),
        4 => normal_equations_n::<4>(jac, r, m, jtj, jtr),
        5 => normal_equations_5(jac, r, m, jtj, jtr),
        _ => normal_equations_any(jac, r, m, n, jtj, jtr),
    }
}

crate::avx2::twice_compiled!(
    /// [`normal_equations_n`] for five parameters (the damped sine with an offset, the fit
    /// run on every event), its sums taken two at a time: the row and its residual as three
    /// pairs `(j0, j1), (j2, j3), (j4, r)`, each sum a lane of a pair multiplied by one
    /// broadcast Jacobian entry, which the compiler turns into two-wide vector operations.
    /// Every sum still adds its products row by row in order, so the result is the same to
    /// the bit. Compiled for AVX2 too (as the ring fit's start scan is): the same bits, a
    /// third fewer instructions.
    fn normal_equations_5(
        jac: &[f64],
        r: &[f64],
        m: usize,
        jtj: &mut [f64],
        jtr: &mut [f64],
    ) => normal_equations_5_sums;
);

#[inline(always)]
fn normal_equations_5_sums(jac: &[f64], r: &[f64], m: usize, jtj: &mut [f64], jtr: &mut [f64]) {
    // acc[a][k]: J column a times pair k (k = 0: columns 0, 1; 1: 2, 3; 2: 4 and r), for
    // the pairs holding a column >= a, and J column a times r.
    let mut acc = [[[0.0f64; 2]; 3]; 5];
    for (row, &ri) in jac.chunks_exact(5).zip(r).take(m) {
        let pairs = [[row[0], row[1]], [row[2], row[3]], [row[4], ri]];
        for (a, acc_a) in acc.iter_mut().enumerate() {
            let x = row[a];
            for (k, (acc_k, pair)) in acc_a.iter_mut().zip(&pairs).enumerate() {
                // Pairs wholly left of column a hold nothing needed.
                if 2 * k + 1 >= a {
                    acc_k[0] += x * pair[0];
                    acc_k[1] += x * pair[1];
                }
            }
        }
    }
    for a in 0..5 {
        for b in a..5 {
            let v = acc[a][b / 2][b % 2];
            jtj[a * 5 + b] = v;
            jtj[b * 5 + a] = v;
        }
        jtr[a] = acc[a][2][1];
    }
}

fn normal_equations_n<const N: usize>(
    jac: &[f64],
    r: &[f64],
    m: usize,
    jtj: &mut [f64],
    jtr: &mut [f64],
) {
    let mut acc = [[0.0f64; N]; N];
    let mut g = [0.0f64; N];
    for (row, ri) in jac.chunks_exact(N).zip(r).take(m) {
        let row: &[f64; N] = match row.try_into() {
            Ok(x) => x,
            Err(_) => continue,
        };
        for a in 0..N {
            g[a] += row[a] * ri;
            for b in a..N {
                acc[a][b] += row[a] * row[b];
            }
        }
    }
    for a in 0..N {
        jtr[a] = g[a];
        for b in 0..N {
            jtj[a * N + b] = if b >= a { acc[a][b] } else { acc[b][a] };
        }
    }
}

fn normal_equations_any(
    jac: &[f64],
    r: &[f64],
    m: usize,
    n: usize,
    jtj: &mut [f64],
    jtr: &mut [f64],
) {
    jtj[..n * n].fill(0.0);
    jtr[..n].fill(0.0);
    for (row, ri) in jac.chunks_exact(n).zip(r).take(m) {
        for a in 0..n {
            jtr[a] += row[a] * ri;
            for b in a..n {
                jtj[a * n + b] += row[a] * row[b];
            }
        }
    }
    for a in 0..n {
        for b in 0..a {
            jtj[a * n + b] = jtj[b * n + a];
        }
    }
}

/// Solves a x = b in place (b becomes x) by Gaussian elimination with partial pivoting.
/// Returns false for a singular or non-finite system.
pub fn solve(a: &mut [f64], b: &mut [f64], n: usize) -> bool {
    if a.len() < n * n || b.len() < n {
        return false;
    }
    let scale = a[..n * n].iter().fold(0.0f64, |s, x| s.max(x.abs()));
    if !(scale.is_finite() && scale > 0.0) {
        return false;
    }
    for col in 0..n {
        let mut piv = col;
        for row in col + 1..n {
            if a[row * n + col].abs() > a[piv * n + col].abs() {
                piv = row;
            }
        }
        if a[piv * n + col].abs() <= 1e-14 * scale {
            return false;
        }
        if piv != col {
            for k in 0..n {
                a.swap(col * n + k, piv * n + k);
            }
            b.swap(col, piv);
        }
        let d = a[col * n + col];
        for row in col + 1..n {
            let f = a[row * n + col] / d;
            if f != 0.0 {
                for k in col..n {
                    a[row * n + k] -= f * a[col * n + k];
                }
                b[row] -= f * b[col];
            }
        }
    }
    for col in (0..n).rev() {
        let mut s = b[col];
        for k in col + 1..n {
            s -= a[col * n + k] * b[k];
        }
        b[col] = s / a[col * n + col];
    }
    b[..n].iter().all(|x| x.is_finite())
}

/// Inverse of a small symmetric matrix, column by column.
pub fn invert(a: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut inv = vec![0.0; n * n];
    for col in 0..n {
        let mut work = a.to_vec();
        let mut e = vec![0.0; n];
        e[col] = 1.0;
        if !solve(&mut work, &mut e, n) {
            return None;
        }
        for row in 0..n {
            inv[row * n + col] = e[row];
        }
    }
    Some(inv)
}

#[cfg(test)]
mod tests {
    use super::*;

    proptest::proptest! {
        /// The five-parameter sums taken two at a time, compiled for AVX2 or not, are the
        /// general sums, bit for bit.
        #[test]
        fn paired_sums_for_five_parameters_are_the_plain_ones(
            rows in proptest::collection::vec(proptest::array::uniform6(-1e3f64..1e3), 1..200),
        ) {
            let m = rows.len();
            let jac: Vec<f64> = rows.iter().flat_map(|r| r[..5].to_vec()).collect();
            let r: Vec<f64> = rows.iter().map(|r| r[5]).collect();
            let (mut a, mut ga) = ([0.0; 25], [0.0; 5]);
            let (mut b, mut gb) = ([0.0; 25], [0.0; 5]);
            normal_equations_5(&jac, &r, m, &mut a, &mut ga);
            normal_equations_n::<5>(&jac, &r, m, &mut b, &mut gb);
            let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            proptest::prop_assert_eq!(bits(&a), bits(&b));
            proptest::prop_assert_eq!(bits(&ga), bits(&gb));
            // Whichever way the machine running the tests takes, the other gives the same.
            normal_equations_5_sums(&jac, &r, m, &mut b, &mut gb);
            proptest::prop_assert_eq!(bits(&a), bits(&b));
            proptest::prop_assert_eq!(bits(&ga), bits(&gb));
        }
    }

    #[test]
    fn solves_a_small_system() {
        // 2x + y = 5, x + 3y = 10 -> x = 1, y = 3 (by hand).
        let mut a = [2.0, 1.0, 1.0, 3.0];
        let mut b = [5.0, 10.0];
        assert!(solve(&mut a, &mut b, 2));
        assert!((b[0] - 1.0).abs() < 1e-12 && (b[1] - 3.0).abs() < 1e-12);
        let mut s = [1.0, 2.0, 2.0, 4.0];
        let mut c = [1.0, 2.0];
        assert!(!solve(&mut s, &mut c, 2), "singular matrix refused");
    }

    #[test]
    fn fits_the_rosenbrock_valley() {
        // Rosenbrock as residuals (10 (y - x^2), 1 - x): minimum at (1, 1) (Rosenbrock 1960),
        // a standard test of Moré, Garbow & Hillstrom (1981), started at (-1.2, 1).
        let fit = minimize(&[-1.2, 1.0], 3, &LmOptions::default(), |p, r, jac| {
            r[0] = 10.0 * (p[1] - p[0] * p[0]);
            r[1] = 1.0 - p[0];
            r[2] = 0.0;
            if let Some(j) = jac {
                j.copy_from_slice(&[-20.0 * p[0], 10.0, -1.0, 0.0, 0.0, 0.0]);
            }
            true
        })
        .unwrap();
        assert!((fit.params[0] - 1.0).abs() < 1e-6, "{:?}", fit.params);
        assert!((fit.params[1] - 1.0).abs() < 1e-6, "{:?}", fit.params);
        assert!(fit.converged);
    }

    #[test]
    fn straight_line_standard_errors_match_the_textbook_formula() {
        // y = a + b x on x = 0..9 with residual pattern e; for ordinary least squares
        // se(b) = s / sqrt(Sxx) with s^2 = SSR/(n-2) (any regression textbook).
        let e = [0.1, -0.2, 0.05, 0.15, -0.1, 0.0, 0.2, -0.15, -0.05, 0.0];
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let y: Vec<f64> = x.iter().zip(e).map(|(x, e)| 1.0 + 2.0 * x + e).collect();
        let fit = minimize(&[0.0, 0.0], 10, &LmOptions::default(), |p, r, jac| {
            for i in 0..10 {
                r[i] = p[0] + p[1] * x[i] - y[i];
            }
            if let Some(j) = jac {
                for i in 0..10 {
                    j[2 * i] = 1.0;
                    j[2 * i + 1] = x[i];
                }
            }
            true
        })
        .unwrap();
        let xm = 4.5;
        let sxx: f64 = x.iter().map(|x| (x - xm) * (x - xm)).sum();
        let s2 = fit.ssr / 8.0;
        let se_b = (s2 / sxx).sqrt();
        assert!((fit.std_err[1].unwrap() - se_b).abs() < 1e-9 * se_b.max(1e-12) + 1e-12);
    }

    #[test]
    fn refuses_bad_shapes() {
        let f = |_: &[f64], _: &mut [f64], _: Option<&mut [f64]>| true;
        assert_eq!(
            minimize(&[], 5, &LmOptions::default(), f).unwrap_err(),
            LmError::BadParamCount { n: 0 }
        );
        assert_eq!(
            minimize(&[1.0, 2.0], 2, &LmOptions::default(), f).unwrap_err(),
            LmError::TooFewSamples { m: 2, n: 2 }
        );
    }
}
