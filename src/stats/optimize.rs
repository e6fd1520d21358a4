//! Small numerical tools for maximum likelihood: a Nelder-Mead minimiser, a central-difference
//! Hessian and a symmetric matrix inverse. Dimensions here are 1 to 3, so plain `Vec`s do.

use super::above;

/// Result of a minimisation.
#[derive(Debug, Clone)]
pub(crate) struct Minimum {
    pub x: Vec<f64>,
    pub f: f64,
}

/// Minimise `f` from `start` by the Nelder-Mead simplex method (Nelder & Mead 1965, with the
/// usual coefficients: reflection 1, expansion 2, contraction 1/2, shrink 1/2; as described
/// by Lagarias et al. 1998). `step` is the initial simplex edge per coordinate. The search
/// restarts from its best point with a fresh simplex until a restart no longer improves,
/// which guards against the simplex collapsing early (common practice). Infeasible points
/// return +inf from `f` and are simply never accepted. None when `start` is not feasible.
pub(crate) fn nelder_mead<F: FnMut(&[f64]) -> f64>(
    mut f: F,
    start: &[f64],
    step: &[f64],
    f_tol: f64,
    max_evals: usize,
) -> Option<Minimum> {
    let n = start.len();
    let f0 = f(start);
    if n == 0 || step.len() != n || !f0.is_finite() {
        return None;
    }
    let mut best = Minimum {
        x: start.to_vec(),
        f: f0,
    };
    let mut evals = 1usize;
    for _restart in 0..20 {
        let before = best.f;
        best = simplex_run(&mut f, &best, step, f_tol, max_evals, &mut evals);
        if evals >= max_evals || before - best.f <= f_tol * (1.0 + before.abs()) {
            break;
        }
    }
    Some(best)
}

fn simplex_run<F: FnMut(&[f64]) -> f64>(
    f: &mut F,
    start: &Minimum,
    step: &[f64],
    f_tol: f64,
    max_evals: usize,
    evals: &mut usize,
) -> Minimum {
    let n = start.x.len();
    let mut pts: Vec<Vec<f64>> = Vec::with_capacity(n + 1);
    let mut vals: Vec<f64> = Vec::with_capacity(n + 1);
    pts.push(start.x.clone());
    vals.push(start.f);
    for (i, s) in step.iter().enumerate() {
        let mut p = start.x.clone();
        if let Some(pi) = p.get_mut(i) {
            *pi += s;
        }
        let mut v = f(&p);
        *evals += 1;
        if !v.is_finite() {
            // Try the other side before giving up on this vertex.
            if let Some(pi) = p.get_mut(i) {
                *pi -= 2.0 * s;
            }
            v = f(&p);
            *evals += 1;
        }
        pts.push(p);
        vals.push(if v.is_nan() { f64::INFINITY } else { v });
    }
    let mut order: Vec<usize> = (0..=n).collect();
    let mut centroid = vec![0.0; n];
    let mut trial = vec![0.0; n];
    let mut trial2 = vec![0.0; n];
    let point = |c: &[f64], w: &[f64], t: f64, out: &mut Vec<f64>| {
        for ((o, ci), wi) in out.iter_mut().zip(c).zip(w) {
            *o = ci + t * (wi - ci);
        }
    };
    while *evals < max_evals {
        order.sort_by(|&a, &b| vals[a].total_cmp(&vals[b]));
        let (ib, iw) = (order[0], order[n]);
        let isw = order[n.saturating_sub(1)];
        let (fb, fw) = (vals[ib], vals[iw]);
        if fw.is_finite() && (fw - fb).abs() <= f_tol * (1.0 + fb.abs()) {
            break;
        }
        centroid.iter_mut().for_each(|c| *c = 0.0);
        for &k in order.iter().take(n) {
            for (c, p) in centroid.iter_mut().zip(&pts[k]) {
                *c += p / n as f64;
            }
        }
        // reflection: c + 1 (c - w) == c + (-1)(w - c)
        point(&centroid, &pts[iw], -1.0, &mut trial);
        let fr = f(&trial);
        *evals += 1;
        if fr < fb {
            point(&centroid, &pts[iw], -2.0, &mut trial2);
            let fe = f(&trial2);
            *evals += 1;
            if fe < fr {
                pts[iw].clone_from(&trial2);
                vals[iw] = fe;
            } else {
                pts[iw].clone_from(&trial);
                vals[iw] = fr;
            }
            continue;
        }
        if fr < vals[isw] {
            pts[iw].clone_from(&trial);
            vals[iw] = fr;
            continue;
        }
        // contraction, outside when the reflected point beats the worst, inside otherwise
        let (t, f_ref) = if fr < fw { (-0.5, fr) } else { (0.5, fw) };
        point(&centroid, &pts[iw], t, &mut trial2);
        let fc = f(&trial2);
        *evals += 1;
        if fc <= f_ref {
            pts[iw].clone_from(&trial2);
            vals[iw] = fc;
            continue;
        }
        // shrink toward the best vertex
        let best = pts[ib].clone();
        for &k in order.iter().skip(1) {
            for (p, b) in pts[k].iter_mut().zip(&best) {
                *p = b + 0.5 * (*p - b);
            }
            let v = f(&pts[k]);
            vals[k] = if v.is_nan() { f64::INFINITY } else { v };
            *evals += 1;
        }
    }
    let ib = (0..=n)
        .min_by(|&a, &b| vals[a].total_cmp(&vals[b]))
        .unwrap_or(0);
    Minimum {
        x: pts[ib].clone(),
        f: vals[ib],
    }
}

/// Hessian of `f` at `x` by central differences with steps `h` (Abramowitz & Stegun 25.3.23
/// and 25.3.26). None when any evaluation is not finite (the point sits on a boundary).
// Index loops mirror the matrix formulas they implement.
#[allow(clippy::needless_range_loop)]
pub(crate) fn hessian<F: Fn(&[f64]) -> f64>(f: F, x: &[f64], h: &[f64]) -> Option<Vec<Vec<f64>>> {
    let n = x.len();
    let f0 = f(x);
    let mut p = x.to_vec();
    let eval = |p: &mut Vec<f64>, d: &[(usize, f64)]| -> Option<f64> {
        for &(i, s) in d {
            *p.get_mut(i)? += s;
        }
        let v = f(p);
        for &(i, s) in d {
            *p.get_mut(i)? -= s;
        }
        v.is_finite().then_some(v)
    };
    let mut out = vec![vec![0.0; n]; n];
    for i in 0..n {
        let hi = *h.get(i)?;
        let fp = eval(&mut p, &[(i, hi)])?;
        let fm = eval(&mut p, &[(i, -hi)])?;
        out[i][i] = (fp - 2.0 * f0 + fm) / (hi * hi);
        for j in 0..i {
            let hj = *h.get(j)?;
            let fpp = eval(&mut p, &[(i, hi), (j, hj)])?;
            let fpm = eval(&mut p, &[(i, hi), (j, -hj)])?;
            let fmp = eval(&mut p, &[(i, -hi), (j, hj)])?;
            let fmm = eval(&mut p, &[(i, -hi), (j, -hj)])?;
            let v = (fpp - fpm - fmp + fmm) / (4.0 * hi * hj);
            out[i][j] = v;
            out[j][i] = v;
        }
    }
    f0.is_finite().then_some(out)
}

/// Inverse of a symmetric positive-definite matrix by Cholesky factorisation (Golub & Van
/// Loan, Matrix Computations, §4.2). None when the matrix is not positive definite, which for
/// an observed information matrix means the fit is not at a proper maximum.
#[allow(clippy::needless_range_loop)]
pub(crate) fn inverse_spd(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let mut s = *a.get(i)?.get(j)?;
            for k in 0..j {
                s -= l[i][k] * l[j][k];
            }
            if i == j {
                if !above(s, 0.0) || !s.is_finite() {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    // Invert L (lower triangular), then A^-1 = L^-T L^-1.
    let mut li = vec![vec![0.0; n]; n];
    for i in 0..n {
        li[i][i] = 1.0 / l[i][i];
        for j in 0..i {
            let mut s = 0.0;
            for k in j..i {
                s -= l[i][k] * li[k][j];
            }
            li[i][j] = s / l[i][i];
        }
    }
    let mut inv = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..n {
            let mut s = 0.0;
            for k in i.max(j)..n {
                s += li[k][i] * li[k][j];
            }
            inv[i][j] = s;
        }
    }
    Some(inv)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nelder_mead_finds_rosenbrock_minimum() {
        // Rosenbrock's function has its minimum 0 at (1, 1) (Rosenbrock 1960).
        let f = |x: &[f64]| 100.0 * (x[1] - x[0] * x[0]).powi(2) + (1.0 - x[0]).powi(2);
        let m = nelder_mead(f, &[-1.2, 1.0], &[0.5, 0.5], 1e-15, 20_000).unwrap();
        assert!(
            (m.x[0] - 1.0).abs() < 1e-5 && (m.x[1] - 1.0).abs() < 1e-5,
            "{:?}",
            m.x
        );
    }

    #[test]
    fn nelder_mead_respects_infeasible_region() {
        // minimum of (x - 2)^2 restricted to x <= 1 is at the boundary x = 1
        let f = |x: &[f64]| {
            if x[0] > 1.0 {
                f64::INFINITY
            } else {
                (x[0] - 2.0).powi(2)
            }
        };
        let m = nelder_mead(f, &[0.0], &[0.3], 1e-14, 5_000).unwrap();
        assert!((m.x[0] - 1.0).abs() < 1e-5);
        assert!(nelder_mead(f, &[3.0], &[0.3], 1e-14, 5_000).is_none());
    }

    #[test]
    fn hessian_and_inverse_of_a_quadratic() {
        // f = x^T A x / 2 has Hessian A exactly; A^-1 for A = [[4,1],[1,3]] is
        // [[3,-1],[-1,4]] / 11 (2x2 inverse formula).
        let f = |x: &[f64]| 0.5 * (4.0 * x[0] * x[0] + 2.0 * x[0] * x[1] + 3.0 * x[1] * x[1]);
        let h = hessian(f, &[0.3, -0.2], &[1e-3, 1e-3]).unwrap();
        assert!((h[0][0] - 4.0).abs() < 1e-6 && (h[0][1] - 1.0).abs() < 1e-6);
        let inv = inverse_spd(&h).unwrap();
        assert!((inv[0][0] - 3.0 / 11.0).abs() < 1e-6);
        assert!((inv[0][1] + 1.0 / 11.0).abs() < 1e-6);
        assert!((inv[1][1] - 4.0 / 11.0).abs() < 1e-6);
        assert!(inverse_spd(&[vec![1.0, 2.0], vec![2.0, 1.0]]).is_none());
    }
}
