//! Suppression advice, two jobs kept apart:
//!
//! 1. Damping the fast parasitic ring with an RC across the node: R = Z0 = sqrt(L / C_par)
//!    matches the ring's characteristic impedance, C_s = 3 to 4 x C_par makes the RC branch
//!    look resistive at the ring frequency (common snubber practice); the capacitor is
//!    charged and discharged every switching, so the resistor dissipates C_s V^2 f_sw.
//! 2. Absorbing the coil's energy with an RC across the switch sized to a peak limit Vmax:
//!    the coil current I0 into C_s must not charge it above Vmax, so C_s >= L I0^2 / Vmax^2;
//!    at the first instant the whole current flows through R, so R <= Vmax / I0; the coil's
//!    energy 1/2 L I0^2 ends in the resistor every switching, so at least 1/2 L I0^2 f_sw.
//!
//! And the clamp choices with their predicted peak and release time. With Vc the voltage
//! the clamp holds across the coil, the coil current obeys L di/dt = -(Vc + R i), so it
//! reaches zero after t0 = tau ln(1 + I0 R / Vc), tau = L / R (about L I0 / Vc when
//! Vc >> I0 R). Vc is Vf for a diode across the coil, Vz + Vf for a diode plus zener, and
//! V_clamp - Vs for a clamp across a low-side switch.

use serde::Serialize;

/// Ratio of snubber capacitance to node capacitance (common practice: 3 to 4).
pub const DAMPER_C_RATIO_MIN: f64 = 3.0;
pub const DAMPER_C_RATIO: f64 = 4.0;

/// The RC that damps the parasitic ring.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RingDamper {
    pub r_ohm: f64,
    /// Suggested capacitance, 4 x C_par.
    pub c_f: f64,
    /// Smallest useful capacitance, 3 x C_par.
    pub c_min_f: f64,
    /// C_s V^2 f_sw, with V the voltage the capacitor swings through each switching.
    pub power_w: Option<f64>,
}

/// Job 1: the RC across the node for a ring of characteristic impedance sqrt(L / C_par).
/// `swing_v` is the voltage the capacitor charges through each switching (the supply for a
/// low-side switch).
pub fn ring_damper(
    l_h: f64,
    c_par_f: f64,
    swing_v: Option<f64>,
    f_sw_hz: Option<f64>,
) -> Option<RingDamper> {
    if !(l_h > 0.0 && c_par_f > 0.0 && l_h.is_finite() && c_par_f.is_finite()) {
        return None;
    }
    let c = DAMPER_C_RATIO * c_par_f;
    Some(RingDamper {
        r_ohm: (l_h / c_par_f).sqrt(),
        c_f: c,
        c_min_f: DAMPER_C_RATIO_MIN * c_par_f,
        power_w: match (swing_v, f_sw_hz) {
            (Some(v), Some(f)) if f > 0.0 => Some(c * v * v * f),
            _ => None,
        },
    })
}

/// The RC across the switch that takes the coil's energy below a peak limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EnergyAbsorber {
    pub peak_limit_v: f64,
    /// L I0^2 / Vmax^2.
    pub c_min_f: f64,
    /// Vmax / I0.
    pub r_max_ohm: f64,
    pub coil_energy_j: f64,
    /// 1/2 L I0^2 f_sw: a lower bound, the capacitor's own C V^2 f_sw comes on top.
    pub power_min_w: Option<f64>,
}

/// Job 2: the RC across the switch for coil inductance `l_h`, current `i0_a`, limit `vmax_v`.
pub fn energy_absorber(
    l_h: f64,
    i0_a: f64,
    vmax_v: f64,
    f_sw_hz: Option<f64>,
) -> Option<EnergyAbsorber> {
    let i0 = i0_a.abs();
    if !(super::is_pos(l_h) && super::is_pos(i0) && super::is_pos(vmax_v)) {
        return None;
    }
    let e = 0.5 * l_h * i0 * i0;
    Some(EnergyAbsorber {
        peak_limit_v: vmax_v,
        c_min_f: l_h * i0 * i0 / (vmax_v * vmax_v),
        r_max_ohm: vmax_v / i0,
        coil_energy_j: e,
        power_min_w: f_sw_hz.filter(|f| *f > 0.0).map(|f| e * f),
    })
}

/// A clamp to consider.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "clamp", rename_all = "snake_case")]
pub enum Clamp {
    /// Freewheel diode across the coil.
    Diode { vf_v: f64 },
    /// Diode in series with a zener, across the coil.
    DiodeZener { vz_v: f64, vf_v: f64 },
    /// Clamp (TVS, avalanche) across a low-side switch, holding the switch at `v_clamp_v`.
    AcrossSwitch { v_clamp_v: f64 },
}

/// The coil and its drive.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Coil {
    pub l_h: f64,
    pub r_ohm: f64,
    pub supply_v: f64,
}

impl Coil {
    /// Steady on-state current Vs / R.
    pub fn current_a(&self) -> f64 {
        self.supply_v / self.r_ohm
    }
    /// L / R.
    pub fn tau_s(&self) -> f64 {
        self.l_h / self.r_ohm
    }
    /// 1/2 L I0^2.
    pub fn energy_j(&self) -> f64 {
        0.5 * self.l_h * self.current_a().powi(2)
    }
}

/// What a clamp does to the event.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClampPrediction {
    pub clamp: Clamp,
    /// Voltage the clamp holds across the coil while the current decays.
    pub holding_v: f64,
    /// Voltage across the (low-side) switch at the peak.
    pub switch_peak_v: f64,
    /// Time for the coil current to reach zero: tau ln(1 + I0 R / Vc).
    pub decay_time_s: f64,
    /// The approximation L I0 / Vc (good when Vc >> I0 R).
    pub decay_time_approx_s: f64,
    pub comment: String,
}

/// A duration in the unit a designer reads it in.
fn time_text(t_s: f64) -> String {
    crate::units::eng(t_s, "s")
}

/// t0 = tau ln(1 + I0 R / Vc), from L di/dt = -(Vc + R i) with i(0) = I0.
pub fn decay_time_s(l_h: f64, r_ohm: f64, i0_a: f64, holding_v: f64) -> Option<f64> {
    if !(l_h > 0.0 && i0_a > 0.0 && holding_v > 0.0 && r_ohm >= 0.0) {
        return None;
    }
    let t = if r_ohm > 0.0 {
        l_h / r_ohm * (1.0 + i0_a * r_ohm / holding_v).ln()
    } else {
        l_h * i0_a / holding_v
    };
    t.is_finite().then_some(t)
}

/// Predicted peak and release time for one clamp on a low-side switch.
pub fn predict_clamp(coil: &Coil, clamp: Clamp) -> Option<ClampPrediction> {
    let i0 = coil.current_a();
    let (holding_v, switch_peak_v) = match clamp {
        Clamp::Diode { vf_v } => (vf_v, coil.supply_v + vf_v),
        Clamp::DiodeZener { vz_v, vf_v } => (vz_v + vf_v, coil.supply_v + vz_v + vf_v),
        Clamp::AcrossSwitch { v_clamp_v } => (v_clamp_v - coil.supply_v, v_clamp_v),
    };
    if !super::is_pos(holding_v) {
        return None;
    }
    let t0 = decay_time_s(coil.l_h, coil.r_ohm, i0, holding_v)?;
    let unclamped_like = coil.l_h * i0 / holding_v;
    let slow = coil.tau_s();
    let comment = match clamp {
        Clamp::Diode { .. } => format!(
            "lowest spike, but the coil current circulates in the diode for {} ({:.1} x the coil's own L/R): the relay or valve releases late and the contacts open slowly",
            time_text(t0),
            t0 / slow
        ),
        Clamp::DiodeZener { .. } => format!(
            "the usual compromise: the switch sees {switch_peak_v:.1} V and the current dies in {}",
            time_text(t0)
        ),
        Clamp::AcrossSwitch { .. } => format!(
            "fast release ({}); the clamp across the switch absorbs the coil's {} every switching",
            time_text(t0),
            crate::units::eng(coil.energy_j(), "J")
        ),
    };
    Some(ClampPrediction {
        clamp,
        holding_v,
        switch_peak_v,
        decay_time_s: t0,
        decay_time_approx_s: unclamped_like,
        comment,
    })
}

/// Everything the advice can use; each part appears when its inputs are known.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct AdviceInputs {
    /// Inductance that rings with the node capacitance (the coil for a coil ring, a stray
    /// loop inductance for a fast parasitic ring).
    pub ring_l_h: Option<f64>,
    pub c_par_f: Option<f64>,
    /// Coil inductance and current at turn-off.
    pub coil_l_h: Option<f64>,
    pub coil_current_a: Option<f64>,
    pub supply_v: Option<f64>,
    pub switching_rate_hz: Option<f64>,
    /// Highest voltage the switch may see.
    pub peak_limit_v: Option<f64>,
}

/// Suppression advice: the two RC jobs kept apart, and the clamp choices.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Advice {
    pub ring_damper: Option<RingDamper>,
    pub energy_absorber: Option<EnergyAbsorber>,
    pub clamps: Vec<ClampPrediction>,
    pub notes: Vec<String>,
}

/// Builds the advice the inputs allow. Clamp predictions take the coil resistance as
/// supply / coil current (the steady on-state current of a low-side switched coil) and
/// consider a diode, a diode plus zener holding the switch at the peak limit, and a clamp
/// across the switch at the peak limit.
pub fn advise(a: &AdviceInputs) -> Advice {
    let mut out = Advice::default();
    if let (Some(l), Some(c)) = (a.ring_l_h, a.c_par_f) {
        out.ring_damper = ring_damper(l, c, a.supply_v, a.switching_rate_hz);
    }
    if let (Some(l), Some(i0), Some(vmax)) = (a.coil_l_h, a.coil_current_a, a.peak_limit_v) {
        out.energy_absorber = energy_absorber(l, i0, vmax, a.switching_rate_hz);
    }
    if let (Some(l), Some(i0), Some(vs)) = (a.coil_l_h, a.coil_current_a, a.supply_v) {
        if super::is_pos(i0) && super::is_pos(vs) && super::is_pos(l) {
            let coil = Coil {
                l_h: l,
                r_ohm: vs / i0,
                supply_v: vs,
            };
            let mut choices = vec![Clamp::Diode { vf_v: DIODE_VF_V }];
            if let Some(vmax) = a.peak_limit_v {
                choices.push(Clamp::DiodeZener {
                    vz_v: vmax - vs - DIODE_VF_V,
                    vf_v: DIODE_VF_V,
                });
                choices.push(Clamp::AcrossSwitch { v_clamp_v: vmax });
            }
            out.clamps = choices
                .into_iter()
                .filter_map(|c| predict_clamp(&coil, c))
                .collect();
            out.notes.push(format!(
                "clamp predictions take the coil resistance as supply / coil current = {:.1} ohm and a diode drop of {DIODE_VF_V} V",
                coil.r_ohm
            ));
        }
    }
    if out
        .ring_damper
        .as_ref()
        .is_some_and(|d| d.power_w.is_none())
    {
        out.notes
            .push("give the supply and the switching rate for the damper's dissipation".into());
    }
    out
}

/// Forward voltage assumed for a freewheel diode (common practice for a silicon rectifier
/// at coil currents).
pub const DIODE_VF_V: f64 = 0.7;

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        (a / b - 1.0).abs()
    }

    #[test]
    fn ring_damper_worked_case() {
        // From the added-capacitance case f0 = 50 MHz, C_par = 100 pF, L = 101.32 nH:
        // R = sqrt(L/C) = 31.83 ohm, C_s = 4 x 100 pF = 400 pF,
        // P = C_s V^2 f_sw = 400e-12 * 12^2 * 20e3 = 1.152 mW (by hand).
        let l = 1.0 / ((std::f64::consts::TAU * 50e6).powi(2) * 100e-12);
        let d = ring_damper(l, 100e-12, Some(12.0), Some(20e3)).unwrap();
        assert!(rel(d.r_ohm, 31.83) < 1e-4);
        assert!(rel(d.c_f, 400e-12) < 1e-12);
        assert!(rel(d.c_min_f, 300e-12) < 1e-12);
        assert!(rel(d.power_w.unwrap(), 1.152e-3) < 1e-9);
        assert!(ring_damper(0.0, 1e-12, None, None).is_none());
    }

    #[test]
    fn energy_absorber_sizing() {
        // 0.2 H, 75 mA, 100 V limit: C >= L I0^2 / V^2 = 0.2 * 0.005625 / 1e4 = 112.5 nF,
        // R <= 100 / 0.075 = 1333.3 ohm, P >= 0.5625 mJ * 10 Hz = 5.625 mW (by hand).
        let a = energy_absorber(0.2, 0.075, 100.0, Some(10.0)).unwrap();
        assert!(rel(a.c_min_f, 112.5e-9) < 1e-12);
        assert!(rel(a.r_max_ohm, 1_333.333_333) < 1e-9);
        assert!(rel(a.power_min_w.unwrap(), 5.625e-3) < 1e-12);
    }

    #[test]
    fn clamp_decay_times() {
        // 12 V coil, R = 160 ohm, L = 0.2 H: I0 = 75 mA, E = 1/2 L I0^2 = 0.5625 mJ,
        // tau = 1.25 ms; t0 = tau ln(1 + I0 R / Vc): 0.7 V diode -> 3.623 ms,
        // 24 V zener + 0.7 V diode -> 0.495 ms (the formula evaluated by hand).
        let coil = Coil {
            l_h: 0.2,
            r_ohm: 160.0,
            supply_v: 12.0,
        };
        assert!(rel(coil.current_a(), 0.075) < 1e-12);
        assert!(rel(coil.energy_j(), 0.5625e-3) < 1e-12);
        assert!(rel(coil.tau_s(), 1.25e-3) < 1e-12);
        let d = predict_clamp(&coil, Clamp::Diode { vf_v: 0.7 }).unwrap();
        assert!(
            (d.decay_time_s - 3.623e-3).abs() < 0.5e-6,
            "{}",
            d.decay_time_s
        );
        assert!(rel(d.switch_peak_v, 12.7) < 1e-12);
        assert!(d.comment.contains("releases late"));
        let z = predict_clamp(
            &coil,
            Clamp::DiodeZener {
                vz_v: 24.0,
                vf_v: 0.7,
            },
        )
        .unwrap();
        assert!(
            (z.decay_time_s - 0.495e-3).abs() < 0.5e-6,
            "{}",
            z.decay_time_s
        );
        assert!(rel(z.switch_peak_v, 36.7) < 1e-12);
        // A 60 V clamp across the switch holds 48 V across the coil.
        let t = predict_clamp(&coil, Clamp::AcrossSwitch { v_clamp_v: 60.0 }).unwrap();
        assert!(rel(t.holding_v, 48.0) < 1e-12);
        assert!(t.decay_time_s < z.decay_time_s);
        // A clamp below the supply holds nothing.
        assert!(predict_clamp(&coil, Clamp::AcrossSwitch { v_clamp_v: 10.0 }).is_none());
        // L I0 / Vc approaches t0 when Vc >> I0 R.
        assert!(rel(t.decay_time_approx_s, 0.2 * 0.075 / 48.0) < 1e-12);
    }

    #[test]
    fn advice_shows_what_the_inputs_allow() {
        let none = advise(&AdviceInputs::default());
        assert!(
            none.ring_damper.is_none() && none.energy_absorber.is_none() && none.clamps.is_empty()
        );
        let all = advise(&AdviceInputs {
            ring_l_h: Some(0.2),
            c_par_f: Some(100e-12),
            coil_l_h: Some(0.2),
            coil_current_a: Some(0.075),
            supply_v: Some(12.0),
            switching_rate_hz: Some(10.0),
            peak_limit_v: Some(36.7),
        });
        assert!(all.ring_damper.is_some() && all.energy_absorber.is_some());
        assert_eq!(all.clamps.len(), 3);
        // The diode + zener at a 36.7 V limit is the 24 V zener of the worked case above.
        assert!((all.clamps[1].decay_time_s - 0.495e-3).abs() < 0.5e-6);
    }
}
