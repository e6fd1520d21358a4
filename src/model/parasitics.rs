//! Parasitic extraction: every estimate of the node capacitance (and the loop inductance)
//! that the inputs allow, side by side.
//!
//! 1. Known coil inductance: C = 1 / (omega_0^2 L). The undamped omega_0 =
//!    sqrt(omega_d^2 + alpha^2) is used, since omega_d alone puts C high by 1 / (1 - zeta^2)
//!    (about 4 % at zeta = 0.2). The decay gives the loss as an equivalent series
//!    resistance R_s = 2 alpha L (copper, for a series RLC) or an equivalent parallel
//!    resistance R_p = 1 / (2 alpha C) (core loss, a resistor across the node); the ring
//!    alone cannot tell which, so both are shown.
//! 2. Added capacitance: a known C_add across the node lowers the undamped frequency from
//!    f0 to f1; with the loop inductance unchanged, (f0 / f1)^2 = (C_par + C_add) / C_par, so
//!    C_par = C_add / ((f0 / f1)^2 - 1), L = 1 / ((2 pi f0)^2 C_par), Z0 = sqrt(L / C_par).
//!    Uncertainties are propagated to first order from those of f0 and f1 (taken as
//!    independent), with partial derivatives by central differences.
//! 3. Current channel: C = I0 / (dv/dt) on the rise after the switch has stopped conducting
//!    (the measurement stage fills `c_par_slope_f`; shown beside the others).

use serde::Serialize;

use super::ModelError;

const TWO_PI: f64 = std::f64::consts::TAU;

/// C = 1 / (omega_0^2 L); `None` for non-positive or non-finite inputs.
pub fn c_from_inductance(omega_0_rad_s: f64, l_h: f64) -> Option<f64> {
    let c = 1.0 / (omega_0_rad_s * omega_0_rad_s * l_h);
    (omega_0_rad_s > 0.0 && l_h > 0.0 && c.is_finite()).then_some(c)
}

/// C = I0 / (dv/dt): the whole coil current charges the node while the switch is off.
pub fn c_from_slope(i0_a: f64, dv_dt_v_per_s: f64) -> Option<f64> {
    let c = i0_a.abs() / dv_dt_v_per_s.abs();
    (c.is_finite() && c > 0.0).then_some(c)
}

/// Estimate 1: from the fitted ring and a known inductance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KnownInductanceEstimate {
    pub l_h: f64,
    pub f_0_hz: f64,
    pub c_par_f: f64,
    pub c_par_std_f: Option<f64>,
    pub z0_ohm: f64,
    /// 2 alpha L: the loss seen as a resistance in series with the coil.
    pub r_series_ohm: f64,
    /// 1 / (2 alpha C): the loss seen as a resistance across the node.
    pub r_parallel_ohm: f64,
    pub note: &'static str,
}

/// Estimate 1 from the undamped angular frequency (with its standard error) and the decay.
pub fn from_known_inductance(
    omega_0_rad_s: f64,
    omega_0_std_rad_s: Option<f64>,
    alpha_per_s: f64,
    l_h: f64,
) -> Result<KnownInductanceEstimate, ModelError> {
    let c = c_from_inductance(omega_0_rad_s, l_h).ok_or_else(|| {
        ModelError::Invalid(format!(
            "undamped frequency {omega_0_rad_s} rad/s and inductance {l_h} H must be positive"
        ))
    })?;
    Ok(KnownInductanceEstimate {
        l_h,
        f_0_hz: omega_0_rad_s / TWO_PI,
        c_par_f: c,
        // dC/C = -2 domega/omega.
        c_par_std_f: omega_0_std_rad_s.map(|s| 2.0 * c * s / omega_0_rad_s),
        z0_ohm: (l_h / c).sqrt(),
        r_series_ohm: 2.0 * alpha_per_s * l_h,
        r_parallel_ohm: 1.0 / (2.0 * alpha_per_s * c),
        note: "series resistance applies when the loss is in the winding; parallel when it is core loss or a resistor across the node",
    })
}

/// First-order standard errors of the added-capacitance results.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct AddedCapUncertainty {
    pub f_bare_std_hz: Option<f64>,
    pub f_loaded_std_hz: Option<f64>,
    pub c_par_std_f: Option<f64>,
    pub l_std_h: Option<f64>,
    pub z0_std_ohm: Option<f64>,
}

/// Estimate 2: the added-capacitance method.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AddedCapEstimate {
    pub f_bare_hz: f64,
    pub f_loaded_hz: f64,
    pub c_add_f: f64,
    pub c_par_f: f64,
    pub l_h: f64,
    pub z0_ohm: f64,
    pub uncertainty: AddedCapUncertainty,
}

fn added_cap_core(f0: f64, f1: f64, c_add: f64) -> [f64; 3] {
    let r = f0 / f1;
    let c_par = c_add / (r * r - 1.0);
    let l = 1.0 / ((TWO_PI * f0).powi(2) * c_par);
    [c_par, l, (l / c_par).sqrt()]
}

/// Estimate 2 from the undamped frequencies of the bare and loaded captures.
pub fn added_capacitance(
    f_bare_hz: f64,
    f_bare_std_hz: Option<f64>,
    f_loaded_hz: f64,
    f_loaded_std_hz: Option<f64>,
    c_add_f: f64,
) -> Result<AddedCapEstimate, ModelError> {
    if !(super::is_pos(f_bare_hz) && super::is_pos(f_loaded_hz) && super::is_pos(c_add_f)) {
        return Err(ModelError::Invalid(
            "frequencies and the added capacitance must be positive".into(),
        ));
    }
    if f_loaded_hz >= f_bare_hz {
        return Err(ModelError::Invalid(format!(
            "the loaded capture rings at {f_loaded_hz:.4e} Hz, not below the bare one at {f_bare_hz:.4e} Hz; adding capacitance must lower the frequency"
        )));
    }
    let [c_par, l, z0] = added_cap_core(f_bare_hz, f_loaded_hz, c_add_f);
    let grad = |k: usize| {
        let h0 = 1e-6 * f_bare_hz;
        let h1 = 1e-6 * f_loaded_hz;
        let d0 = (added_cap_core(f_bare_hz + h0, f_loaded_hz, c_add_f)[k]
            - added_cap_core(f_bare_hz - h0, f_loaded_hz, c_add_f)[k])
            / (2.0 * h0);
        let d1 = (added_cap_core(f_bare_hz, f_loaded_hz + h1, c_add_f)[k]
            - added_cap_core(f_bare_hz, f_loaded_hz - h1, c_add_f)[k])
            / (2.0 * h1);
        (d0, d1)
    };
    let spread = |k: usize| match (f_bare_std_hz, f_loaded_std_hz) {
        (None, None) => None,
        (s0, s1) => {
            let (d0, d1) = grad(k);
            let v = (d0 * s0.unwrap_or(0.0)).powi(2) + (d1 * s1.unwrap_or(0.0)).powi(2);
            v.is_finite().then(|| v.sqrt())
        }
    };
    Ok(AddedCapEstimate {
        f_bare_hz,
        f_loaded_hz,
        c_add_f,
        c_par_f: c_par,
        l_h: l,
        z0_ohm: z0,
        uncertainty: AddedCapUncertainty {
            f_bare_std_hz,
            f_loaded_std_hz,
            c_par_std_f: spread(0),
            l_std_h: spread(1),
            z0_std_ohm: spread(2),
        },
    })
}

/// How two capacitance estimates agree.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Agreement {
    pub a: String,
    pub b: String,
    /// a / b.
    pub ratio: f64,
    /// (a - b) / mean(a, b) * 100.
    pub difference_pct: f64,
}

/// Pairwise agreement of named estimates (every pair, in the given order).
pub fn agreement(estimates: &[(&str, f64)]) -> Vec<Agreement> {
    let mut out = Vec::new();
    for (i, (na, a)) in estimates.iter().enumerate() {
        for (nb, b) in estimates.iter().skip(i + 1) {
            let mean = 0.5 * (a + b);
            if *b != 0.0 && mean != 0.0 && a.is_finite() && b.is_finite() {
                out.push(Agreement {
                    a: na.to_string(),
                    b: nb.to_string(),
                    ratio: a / b,
                    difference_pct: (a - b) / mean * 100.0,
                });
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        (a / b - 1.0).abs()
    }

    #[test]
    fn added_capacitance_first_worked_case() {
        // From the method's formulas (module comment): f0 = 50 MHz, C_add = 300 pF,
        // f1 = 25 MHz: (f0/f1)^2 = 4, C_par = 300 / 3 = 100 pF,
        // L = 1 / ((2 pi 50e6)^2 100e-12) = 101.32 nH, Z0 = sqrt(L / C) = 31.83 ohm.
        let e = added_capacitance(50e6, None, 25e6, None, 300e-12).unwrap();
        assert!(rel(e.c_par_f, 100e-12) < 1e-9);
        assert!(rel(e.l_h, 101.32e-9) < 1e-4, "{}", e.l_h);
        assert!(rel(e.z0_ohm, 31.83) < 1e-4, "{}", e.z0_ohm);
        assert!(e.uncertainty.c_par_std_f.is_none());
    }

    #[test]
    fn added_capacitance_second_worked_case() {
        // f0 = 40 MHz, C_add = 220 pF, f1 = 28 MHz: (40/28)^2 - 1 = 1.040816,
        // C_par = 211.37 pF, L = 74.898 nH, Z0 = 18.824 ohm (the same formulas by hand).
        let e = added_capacitance(40e6, None, 28e6, None, 220e-12).unwrap();
        assert!(rel(e.c_par_f, 211.37e-12) < 1e-4, "{}", e.c_par_f);
        assert!(rel(e.l_h, 74.898e-9) < 1e-4, "{}", e.l_h);
        assert!(rel(e.z0_ohm, 18.824) < 1e-4, "{}", e.z0_ohm);
    }

    #[test]
    fn halving_rule_of_snubber_practice() {
        // Common practice: the ring frequency halves when the total capacitance quadruples,
        // so the added capacitor that halves it is 3 C_par.
        for c_add in [33e-12, 470e-12, 1e-9] {
            let e = added_capacitance(10e6, None, 5e6, None, c_add).unwrap();
            assert!(rel(e.c_par_f * 3.0, c_add) < 1e-12);
        }
    }

    #[test]
    fn uncertainty_matches_the_analytic_derivative() {
        // dC/df1 = C_add 2 r / (r^2 - 1)^2 * f0 / f1^2 with r = f0/f1 (differentiating the
        // method's formula by hand): at 50/25 MHz, C_add 300 pF this is 300e-12 * 4 / 9 *
        // 50e6 / 625e12 = 1.0667e-17 F/Hz; a 0.1 MHz error in f1 gives 1.0667 pF.
        let e = added_capacitance(50e6, None, 25e6, Some(0.1e6), 300e-12).unwrap();
        let s = e.uncertainty.c_par_std_f.unwrap();
        assert!(rel(s, 1.0667e-12) < 1e-3, "{s}");
    }

    #[test]
    fn refuses_a_loaded_frequency_that_is_not_lower() {
        assert!(added_capacitance(10e6, None, 12e6, None, 100e-12).is_err());
        assert!(added_capacitance(10e6, None, 5e6, None, -1.0).is_err());
    }

    #[test]
    fn known_inductance_uses_the_undamped_frequency() {
        // L = 10 mH, C = 100 pF: omega_0 = 1 / sqrt(LC) = 1e6 rad/s (exact by construction).
        let e = from_known_inductance(1e6, Some(1e3), 2e4, 10e-3).unwrap();
        assert!(rel(e.c_par_f, 100e-12) < 1e-12);
        // R_s = 2 alpha L = 400 ohm; R_p = 1 / (2 alpha C) = 250 kohm.
        assert!(rel(e.r_series_ohm, 400.0) < 1e-12);
        assert!(rel(e.r_parallel_ohm, 250e3) < 1e-9);
        assert!(rel(e.c_par_std_f.unwrap(), 0.2e-12) < 1e-9);
        assert!(from_known_inductance(0.0, None, 1.0, 1e-3).is_err());
    }

    #[test]
    fn agreement_reports_ratio_and_percent() {
        let a = agreement(&[("ring", 102e-12), ("added", 100e-12), ("slope", 98e-12)]);
        assert_eq!(a.len(), 3);
        assert!(rel(a[0].ratio, 1.02) < 1e-12);
        assert!((a[0].difference_pct - 2.0 / 1.01).abs() < 1e-9);
    }
}
