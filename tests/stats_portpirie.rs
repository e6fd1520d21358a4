//! Extreme-value fits against the worked example of Coles (2001), An Introduction to
//! Statistical Modeling of Extreme Values, Springer, chapter 3: Port Pirie annual maximum sea
//! levels 1923-1987 (tests/data/portpirie.csv, 65 values).

use kickscan::stats::{extreme_value, fit_gev, fit_gumbel, p_exceed_per_event};

fn port_pirie() -> Vec<f64> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/portpirie.csv");
    let text = std::fs::read_to_string(path).expect("tests/data/portpirie.csv");
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            l.split(',')
                .nth(1)
                .and_then(|v| v.trim().parse().ok())
                .expect("year,level")
        })
        .collect()
}

fn close(got: f64, want: f64, tol: f64, what: &str) {
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got}, want {want} ± {tol}"
    );
}

#[test]
fn gev_fit_matches_coles_and_scipy() {
    let x = port_pirie();
    assert_eq!(x.len(), 65);
    let fit = fit_gev(&x).unwrap();
    // scipy 1.17.1 genextreme, refined by Nelder-Mead on the same likelihood:
    // mu = 3.8747498556, sigma = 0.1980439566, xi = -0.0501095349 (c = +0.0501),
    // log-likelihood 4.339058473679425. Coles (2001, §3.4.1): 3.87, 0.198, -0.050, ℓ = 4.34.
    close(fit.location, 3.874_749_855_6, 1e-5, "mu");
    close(fit.scale, 0.198_043_956_6, 1e-5, "sigma");
    close(fit.shape, -0.050_109_534_9, 1e-4, "xi");
    close(
        fit.log_likelihood,
        4.339_058_473_679_425,
        1e-8,
        "log-likelihood",
    );
    // Coles (2001, §3.4.1): standard errors 0.028, 0.020, 0.098.
    let se = fit.std_errors.unwrap();
    close(se[0], 0.028, 0.001, "se mu");
    close(se[1], 0.020, 0.001, "se sigma");
    close(se[2], 0.098, 0.002, "se xi");
    // ξ < 0: finite upper end point μ - σ/ξ.
    let end = fit.upper_end_point.unwrap();
    close(
        end,
        fit.location - fit.scale / fit.shape,
        1e-12,
        "end point",
    );

    // Return levels, m = 1, N = T years: scipy genextreme.ppf(1 - 1/T) = 4.29621193688708 and
    // 4.688403748172501; Coles: 4.30 and 4.69.
    let r10 = fit.return_level(10.0, 1).unwrap();
    let r100 = fit.return_level(100.0, 1).unwrap();
    close(r10.level, 4.296_211_936_887_08, 2e-5, "10-year level");
    close(r100.level, 4.688_403_748_172_501, 2e-5, "100-year level");
    // Coles (2001, §3.4.1): delta method [4.19, 4.40] and [4.38, 5.00]; profile likelihood
    // [4.21, 4.45] and [4.49, 5.26] (read from his fig. 3.3, so two decimals).
    close(r10.delta.lower.unwrap(), 4.19, 0.01, "10-year delta lower");
    close(r10.delta.upper.unwrap(), 4.40, 0.01, "10-year delta upper");
    close(
        r100.delta.lower.unwrap(),
        4.38,
        0.01,
        "100-year delta lower",
    );
    close(
        r100.delta.upper.unwrap(),
        5.00,
        0.01,
        "100-year delta upper",
    );
    let p10 = r10.profile.unwrap();
    let p100 = r100.profile.unwrap();
    assert_eq!(p10.method, "profile likelihood");
    close(p10.lower.unwrap(), 4.21, 0.015, "10-year profile lower");
    close(p10.upper.unwrap(), 4.45, 0.015, "10-year profile upper");
    close(p100.lower.unwrap(), 4.49, 0.015, "100-year profile lower");
    close(p100.upper.unwrap(), 5.26, 0.03, "100-year profile upper");
    // The same intervals computed once with numpy/scipy 1.17.1 (Nelder-Mead maximum, observed
    // information by central differences, profile by re-maximising over (σ, ξ) at fixed level
    // and brentq on the deviance): delta [4.188382, 4.404042] and [4.377121, 4.999686];
    // profile [4.2046113, 4.4450803] and [4.4904368, 5.2607046].
    close(
        r10.delta.lower.unwrap(),
        4.188_382,
        1e-4,
        "10-year delta lower (scipy)",
    );
    close(
        r10.delta.upper.unwrap(),
        4.404_042,
        1e-4,
        "10-year delta upper (scipy)",
    );
    close(
        r100.delta.lower.unwrap(),
        4.377_121,
        1e-4,
        "100-year delta lower (scipy)",
    );
    close(
        r100.delta.upper.unwrap(),
        4.999_686,
        1e-4,
        "100-year delta upper (scipy)",
    );
    close(
        p10.lower.unwrap(),
        4.204_611_3,
        1e-5,
        "10-year profile lower (scipy)",
    );
    close(
        p10.upper.unwrap(),
        4.445_080_3,
        1e-5,
        "10-year profile upper (scipy)",
    );
    close(
        p100.lower.unwrap(),
        4.490_436_8,
        1e-5,
        "100-year profile lower (scipy)",
    );
    close(
        p100.upper.unwrap(),
        5.260_704_6,
        1e-5,
        "100-year profile upper (scipy)",
    );
    eprintln!(
        "Port Pirie GEV: mu {:.5} sigma {:.5} xi {:.5} ll {:.5} se {:?} end {:.4}\n\
         10-yr {:.4} delta [{:.4}, {:.4}] profile [{:.4}, {:.4}]\n\
         100-yr {:.4} delta [{:.4}, {:.4}] profile [{:.4}, {:.4}]",
        fit.location,
        fit.scale,
        fit.shape,
        fit.log_likelihood,
        se,
        end,
        r10.level,
        r10.delta.lower.unwrap(),
        r10.delta.upper.unwrap(),
        p10.lower.unwrap(),
        p10.upper.unwrap(),
        r100.level,
        r100.delta.lower.unwrap(),
        r100.delta.upper.unwrap(),
        p100.lower.unwrap(),
        p100.upper.unwrap(),
    );

    // By definition the T-year level is exceeded with probability 1/T per year (m = 1).
    close(
        p_exceed_per_event(&fit, r100.level, 1).unwrap(),
        0.01,
        1e-12,
        "p at the 100-year level",
    );
    assert_eq!(p_exceed_per_event(&fit, end + 0.1, 1), Some(0.0));
    assert_eq!(p_exceed_per_event(&fit, 4.0, 0), None);
}

#[test]
fn gumbel_fit_matches_scipy() {
    let x = port_pirie();
    let fit = fit_gumbel(&x).unwrap();
    // scipy 1.17.1 gumbel_r.fit: loc = 3.8694435, scale = 0.1948894; log-likelihood
    // 4.217681896261781. Coles (2001, §3.4.1): ℓ = 4.22.
    close(fit.location, 3.869_443_544, 1e-5, "mu");
    close(fit.scale, 0.194_889_446, 1e-5, "beta");
    close(
        fit.log_likelihood,
        4.217_681_896_261_781,
        1e-8,
        "log-likelihood",
    );
    let r100 = fit.return_level(100.0, 1).unwrap();
    // Gumbel quantile μ - β ln(-ln 0.99) (NIST e-Handbook), -ln(-ln 0.99) = 4.600149226776579.
    close(
        r100.level,
        fit.location + 4.600_149_226_776_579 * fit.scale,
        1e-9,
        "100-year Gumbel",
    );
    eprintln!("Port Pirie Gumbel: mu {:.5} beta {:.5} ll {:.5}; 100-yr {:.4} delta [{:.4}, {:.4}] profile [{:.4}, {:.4}]",
        fit.location, fit.scale, fit.log_likelihood, r100.level,
        r100.delta.lower.unwrap(), r100.delta.upper.unwrap(),
        r100.profile.as_ref().unwrap().lower.unwrap(), r100.profile.as_ref().unwrap().upper.unwrap());
}

#[test]
fn report_prefers_gumbel_for_port_pirie() {
    // Deviance 2 (4.339058 - 4.217682) = 0.24275 (scipy values above; Coles §3.4.1 gives
    // 0.24), far below 3.84: the GEV does not improve significantly on Gumbel.
    let x = port_pirie();
    let r = extreme_value(&x, 1, &[10.0, 100.0], Some(4.8));
    assert_eq!(r.model, Some("gumbel"));
    close(
        r.model_choice.deviance.unwrap(),
        0.242_753_154_835_288,
        1e-6,
        "deviance",
    );
    // scipy chi2.sf(0.24275315, 1) = 0.6222246745834932
    close(
        r.model_choice.p_value.unwrap(),
        0.622_224_674_583_493_2,
        1e-6,
        "LR p-value",
    );
    assert_eq!(r.shape, Some(0.0));
    assert_eq!(r.n_blocks, 65);
    // 65 yearly values have a 90th percentile with only 7 above it: no POT fit.
    assert!(r.pot.is_none());
    let json = serde_json::to_value(&r).unwrap();
    assert!(json["return_levels"]["100"]["level"].as_f64().unwrap() > 4.5);
    assert_eq!(json["interval_method"], "profile likelihood");
    assert!(json["gev"]["upper_end_point"].as_f64().is_some());
    eprintln!("{}", serde_json::to_string_pretty(&json).unwrap());
}
