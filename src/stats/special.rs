//! Special functions needed by the tests of significance: log-gamma, the regularised
//! incomplete gamma function, erfc and the normal tail.

use super::above;

/// ln Γ(x) for x > 0 by the Lanczos approximation with g = 7 and nine coefficients
/// (Lanczos 1964; coefficients as tabulated by Godfrey, also in Press et al., Numerical
/// Recipes, 3rd ed., §6.1), with the reflection formula below 1/2. About 15 digits.
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const C: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if !x.is_finite() || x <= 0.0 {
        return f64::NAN;
    }
    if x < 0.5 {
        // Γ(x) Γ(1-x) = π / sin(πx)
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = C[0];
    let t = x + G + 0.5;
    for (i, c) in C.iter().enumerate().skip(1) {
        a += c / (x + i as f64);
    }
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

/// Regularised upper incomplete gamma function Q(a, x) = Γ(a, x) / Γ(a): by the power series
/// of P for x < a + 1 and by the modified-Lentz continued fraction otherwise (Press et al.,
/// Numerical Recipes, 3rd ed., §6.2).
pub fn gamma_q(a: f64, x: f64) -> f64 {
    if !above(a, 0.0) || x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x == f64::INFINITY {
        return 0.0;
    }
    let ln_prefactor = -x + a * x.ln() - ln_gamma(a);
    if x < a + 1.0 {
        let mut ap = a;
        let mut del = 1.0 / a;
        let mut sum = del;
        for _ in 0..1000 {
            ap += 1.0;
            del *= x / ap;
            sum += del;
            if del.abs() < sum.abs() * 1e-17 {
                break;
            }
        }
        1.0 - sum * ln_prefactor.exp()
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..1000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let del = d * c;
            h *= del;
            if (del - 1.0).abs() < 1e-16 {
                break;
            }
        }
        ln_prefactor.exp() * h
    }
}

/// Complementary error function: erfc(x) = Q(1/2, x²) for x ≥ 0 and 2 - erfc(-x) below
/// (Abramowitz & Stegun 7.1.2 and 6.5.17).
pub fn erfc(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x >= 0.0 {
        gamma_q(0.5, x * x)
    } else {
        2.0 - gamma_q(0.5, x * x)
    }
}

/// Upper tail of the standard normal distribution, P(Z > z) = erfc(z / √2) / 2.
pub fn normal_sf(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

/// Upper tail of the chi-squared distribution with one degree of freedom:
/// P(X > d) = P(|Z| > √d) = erfc(√(d/2)).
pub fn chi2_1_sf(d: f64) -> f64 {
    if d <= 0.0 {
        return 1.0;
    }
    erfc((0.5 * d).sqrt())
}

/// 0.975 quantile of the standard normal distribution (Abramowitz & Stegun table 26.5;
/// scipy.stats.norm.ppf(0.975) = 1.959963984540054).
pub const Z_975: f64 = 1.959_963_984_540_054;

/// 0.95 quantile of chi-squared with one degree of freedom, the square of `Z_975`
/// (scipy.stats.chi2.ppf(0.95, 1) = 3.841458820694124).
pub const CHI2_1_95: f64 = Z_975 * Z_975;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ln_gamma_known_values() {
        // Γ(1/2) = √π, Γ(5) = 24, Γ(1) = 1 (textbook identities).
        assert!((ln_gamma(0.5) - 0.5 * std::f64::consts::PI.ln()).abs() < 1e-13);
        assert!((ln_gamma(5.0) - 24f64.ln()).abs() < 1e-12);
        assert!(ln_gamma(1.0).abs() < 1e-13);
        // Γ(0.1) = 9.513507698668732 (scipy.special.gamma(0.1)), through the reflection.
        assert!((ln_gamma(0.1) - 9.513_507_698_668_732f64.ln()).abs() < 1e-12);
    }

    #[test]
    fn erfc_known_values() {
        // scipy.special.erfc: erfc(0.5) = 0.4795001221869535, erfc(2) = 0.004677734981047266,
        // erfc(5) = 1.5374597944280347e-12, erfc(-1) = 1.8427007929497148.
        let cases = [
            (0.5, 0.479_500_122_186_953_5),
            (2.0, 0.004_677_734_981_047_266),
            (5.0, 1.537_459_794_428_034_7e-12),
            (-1.0, 1.842_700_792_949_714_8),
            (0.0, 1.0),
        ];
        for (x, want) in cases {
            let got = erfc(x);
            assert!(
                ((got - want) / want).abs() < 1e-12,
                "erfc({x}) = {got}, want {want}"
            );
        }
    }

    #[test]
    fn normal_and_chi2_tails() {
        // P(Z > 1.959963984540054) = 0.025 by definition of the quantile.
        assert!((normal_sf(Z_975) - 0.025).abs() < 1e-14);
        // chi2(1) upper tail at its 95 % point is 0.05.
        assert!((chi2_1_sf(CHI2_1_95) - 0.05).abs() < 1e-14);
        // scipy.stats.norm.sf(3) = 0.0013498980316300933
        assert!((normal_sf(3.0) - 0.001_349_898_031_630_093_3).abs() < 1e-17);
    }
}
