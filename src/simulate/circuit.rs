//! The circuit equations: a coil (L with series R, optional parallel loss resistance) fed
//! from a supply, a switch whose conductance is scheduled in time, the switch node
//! capacitance to ground, and the clamp elements.
//!
//! The state is `[i_coil_a, v_switch_v, v_snubber_v]`: the inductor current, the voltage
//! across the switch, and the snubber capacitor voltage (held at zero without a snubber).
//! A high-side switch obeys the same equations in the voltage across the switch (the supply
//! is an AC ground); only the mapping to the node voltage differs, see [`Side`].

/// Thermal voltage kT/q at 300 K (textbook constant).
pub const THERMAL_VOLTAGE_V: f64 = 0.025_852;

/// Number of state variables.
pub const N_STATE: usize = 3;

/// State vector: coil current, voltage across the switch, snubber capacitor voltage.
pub type State = [f64; N_STATE];

/// A pn junction with series resistance (Shockley equation), shifted by `offset_v` so the
/// same element describes a plain diode (offset 0), a diode in series with a zener
/// (offset = zener voltage) and a breakdown (TVS, switch avalanche: offset = breakdown
/// voltage, the knee's sharpness set by the emission coefficient).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Junction {
    pub saturation_a: f64,
    pub emission: f64,
    pub series_ohm: f64,
    pub offset_v: f64,
}

impl Junction {
    /// A small-signal silicon switching diode (invented parameters: about 0.8 V at 75 mA).
    pub fn silicon() -> Self {
        Junction {
            saturation_a: 4e-9,
            emission: 1.8,
            series_ohm: 0.3,
            offset_v: 0.0,
        }
    }

    /// A breakdown knee at `breakdown_v` with dynamic resistance `dynamic_ohm`. The small
    /// saturation current and emission coefficient make the knee sharp (a few tens of mV
    /// per decade), which is what avalanche and zener knees look like on a current scale
    /// of milliamperes (common practice).
    pub fn breakdown(breakdown_v: f64, dynamic_ohm: f64) -> Self {
        Junction {
            saturation_a: 1e-12,
            emission: 1.0,
            series_ohm: dynamic_ohm,
            offset_v: breakdown_v,
        }
    }

    /// Two junctions in series carrying the same current, as one junction. Above a few
    /// saturation currents, `v = n1 Vt ln(i/Is1) + n2 Vt ln(i/Is2)`, which is a single
    /// exponential with `n = n1 + n2` and `ln Is = (n1 ln Is1 + n2 ln Is2) / n`.
    pub fn in_series(a: Junction, b: Junction) -> Junction {
        let n = a.emission + b.emission;
        let ln_is = (a.emission * a.saturation_a.ln() + b.emission * b.saturation_a.ln()) / n;
        Junction {
            saturation_a: ln_is.exp(),
            emission: n,
            series_ohm: a.series_ohm + b.series_ohm,
            offset_v: a.offset_v + b.offset_v,
        }
    }

    /// Current and small-signal conductance for an applied voltage (anode minus cathode).
    ///
    /// Solves `i = Is (exp(vd / n Vt) - 1)` with `vd = v - offset - i Rs` by Newton's
    /// method on `vd`. The residual is convex and increasing in `vd`, so starting above the
    /// root (both starting values are upper bounds of it) the iterates fall monotonically
    /// onto it without overshoot.
    pub fn current(&self, v_applied: f64) -> (f64, f64) {
        let nvt = self.emission * THERMAL_VOLTAGE_V;
        let is = self.saturation_a;
        let rs = self.series_ohm.max(1e-9);
        let v = v_applied - self.offset_v;
        let log_bound = nvt * (2.0 + v.max(0.0) / (rs * is)).ln();
        let mut vd = (v + is * rs).min(log_bound);
        for _ in 0..200 {
            let e = (vd / nvt).exp();
            let residual = is * (e - 1.0) - (v - vd) / rs;
            let slope = is * e / nvt + 1.0 / rs;
            let step = residual / slope;
            vd -= step;
            if step.abs() <= 1e-13 + 1e-12 * vd.abs() {
                break;
            }
        }
        let e = (vd / nvt).exp();
        let i = is * (vd / nvt).exp_m1();
        let gd = is * e / nvt;
        (i, gd / (1.0 + gd * rs))
    }
}

/// Where a junction sits and which way it conducts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Placement {
    /// Across the coil, anode on the switch node: conducts once the node rises above the
    /// supply (freewheel diode, diode plus zener).
    AcrossCoil,
    /// Across the switch, conducting when the switch voltage is positive (TVS, avalanche).
    AcrossSwitch,
    /// Across the switch, conducting when the switch voltage is negative (body diode).
    AcrossSwitchReverse,
}

/// Where the energy a junction dissipates is booked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    Clamp,
    Switch,
}

/// A junction in the circuit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placed {
    pub junction: Junction,
    pub placement: Placement,
    pub role: Role,
}

impl Placed {
    /// Voltage applied to the junction (anode minus cathode).
    fn applied(&self, v_switch_v: f64, supply_v: f64) -> f64 {
        match self.placement {
            Placement::AcrossCoil => v_switch_v - supply_v,
            Placement::AcrossSwitch => v_switch_v,
            Placement::AcrossSwitchReverse => -v_switch_v,
        }
    }
}

/// RC snubber across the switch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Snubber {
    pub r_ohm: f64,
    pub c_f: f64,
}

/// The fixed part of the circuit.
#[derive(Debug, Clone, PartialEq)]
pub struct Circuit {
    pub inductance_h: f64,
    pub capacitance_f: f64,
    /// Loss resistance across the coil terminals (core and eddy losses), if any.
    pub parallel_ohm: Option<f64>,
    pub snubber: Option<Snubber>,
    pub junctions: Vec<Placed>,
}

/// What changes from one switching cycle to the next.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Operating {
    pub supply_v: f64,
    pub coil_ohm: f64,
}

/// Instantaneous powers, for the energy ledger. Signs: all dissipations positive,
/// `supply_w` positive when the supply delivers energy.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Powers {
    pub supply_w: f64,
    pub coil_resistance_w: f64,
    pub parallel_w: f64,
    pub clamp_w: f64,
    pub switch_w: f64,
}

/// Currents the capture can show.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Currents {
    pub coil_a: f64,
    /// Into the switch's upper terminal: channel, avalanche, minus body diode.
    pub switch_a: f64,
}

impl Circuit {
    /// Time derivative of the state and, when `jac` is given, its Jacobian.
    pub fn derivative(
        &self,
        x: &State,
        g_switch_s: f64,
        op: &Operating,
        jac: Option<&mut [[f64; N_STATE]; N_STATE]>,
    ) -> State {
        let [i, v, vc] = *x;
        let l = self.inductance_h;
        let c = self.capacitance_f;
        let mut into_node = i - g_switch_s * v;
        let mut g_node = g_switch_s;
        if let Some(rp) = self.parallel_ohm {
            into_node += (op.supply_v - v) / rp;
            g_node += 1.0 / rp;
        }
        for p in &self.junctions {
            let (ij, gj) = p.junction.current(p.applied(v, op.supply_v));
            into_node += match p.placement {
                Placement::AcrossSwitchReverse => ij,
                _ => -ij,
            };
            g_node += gj;
        }
        let mut d_vc = 0.0;
        let mut snub = (0.0, 0.0);
        if let Some(s) = self.snubber {
            into_node -= (v - vc) / s.r_ohm;
            g_node += 1.0 / s.r_ohm;
            d_vc = (v - vc) / (s.r_ohm * s.c_f);
            snub = (1.0 / s.r_ohm, 1.0 / (s.r_ohm * s.c_f));
        }
        if let Some(j) = jac {
            *j = [
                [-op.coil_ohm / l, -1.0 / l, 0.0],
                [1.0 / c, -g_node / c, snub.0 / c],
                [0.0, snub.1, -snub.1],
            ];
        }
        [(op.supply_v - v - op.coil_ohm * i) / l, into_node / c, d_vc]
    }

    /// The linear part of the equations, `dx/dt = A x + b`, with every junction left out
    /// (valid while none conducts).
    pub fn linear(&self, g_switch_s: f64, op: &Operating) -> ([[f64; N_STATE]; N_STATE], State) {
        let mut a = [[0.0; N_STATE]; N_STATE];
        let lin = Circuit {
            junctions: Vec::new(),
            ..self.clone()
        };
        let x0 = [0.0; N_STATE];
        let b = lin.derivative(&x0, g_switch_s, op, Some(&mut a));
        (a, b)
    }

    /// Largest junction current at a state, against which "no junction conducts" is judged.
    pub fn max_junction_current(&self, x: &State, op: &Operating) -> f64 {
        self.junctions
            .iter()
            .map(|p| p.junction.current(p.applied(x[1], op.supply_v)).0.abs())
            .fold(0.0, f64::max)
    }

    /// Instantaneous powers at a state.
    pub fn powers(&self, x: &State, g_switch_s: f64, op: &Operating) -> Powers {
        let [i, v, vc] = *x;
        let mut p = Powers {
            coil_resistance_w: op.coil_ohm * i * i,
            switch_w: g_switch_s * v * v,
            ..Powers::default()
        };
        let mut supply_a = i;
        if let Some(rp) = self.parallel_ohm {
            let ip = (op.supply_v - v) / rp;
            supply_a += ip;
            p.parallel_w = ip * ip * rp;
        }
        for j in &self.junctions {
            let va = j.applied(v, op.supply_v);
            let (ij, _) = j.junction.current(va);
            if j.placement == Placement::AcrossCoil {
                supply_a -= ij;
            }
            match j.role {
                Role::Clamp => p.clamp_w += va * ij,
                Role::Switch => p.switch_w += va * ij,
            }
        }
        if let Some(s) = self.snubber {
            p.clamp_w += (v - vc) * (v - vc) / s.r_ohm;
        }
        p.supply_w = op.supply_v * supply_a;
        p
    }

    /// Energy stored in the inductor and the capacitors.
    pub fn stored_energy_j(&self, x: &State) -> f64 {
        let mut e = 0.5 * self.inductance_h * x[0] * x[0] + 0.5 * self.capacitance_f * x[1] * x[1];
        if let Some(s) = self.snubber {
            e += 0.5 * s.c_f * x[2] * x[2];
        }
        e
    }

    /// Coil and switch currents at a state.
    pub fn currents(&self, x: &State, g_switch_s: f64, op: &Operating) -> Currents {
        let mut sw = g_switch_s * x[1];
        for j in &self.junctions {
            if j.role == Role::Switch {
                let (ij, _) = j.junction.current(j.applied(x[1], op.supply_v));
                sw += match j.placement {
                    Placement::AcrossSwitchReverse => -ij,
                    _ => ij,
                };
            }
        }
        Currents {
            coil_a: x[0],
            switch_a: sw,
        }
    }

    /// DC operating point with the switch at conductance `g_switch_s` (no junction
    /// conducting, which holds in the on state).
    pub fn dc_state(&self, g_switch_s: f64, op: &Operating) -> State {
        let g_p = self.parallel_ohm.map_or(0.0, |r| 1.0 / r);
        let g_coil = 1.0 / op.coil_ohm.max(1e-12);
        let v = op.supply_v * (g_coil + g_p) / (g_coil + g_p + g_switch_s);
        [(op.supply_v - v) * g_coil, v, v]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn junction_obeys_shockley_with_series_resistance() {
        let j = Junction::silicon();
        for v in [-5.0, 0.0, 0.3, 0.7, 0.9, 2.0, 50.0] {
            let (i, g) = j.current(v);
            let vd = v - i * j.series_ohm;
            // Shockley equation (textbook), evaluated at the internal junction voltage.
            let expect = j.saturation_a * (vd / (j.emission * THERMAL_VOLTAGE_V)).exp_m1();
            assert!((i - expect).abs() <= 1e-9 * expect.abs() + 1e-18, "v={v}");
            assert!(g >= 0.0);
            let (i2, _) = j.current(v + 1e-6);
            let numeric = (i2 - i) / 1e-6;
            assert!(
                (numeric - g).abs() <= 1e-3 * g + 1e-15,
                "v={v} g={g} num={numeric}"
            );
        }
        // At 2 V the series resistance carries most of the drop: i ~ (2 - ~0.9)/0.3.
        let (i, _) = j.current(2.0);
        assert!(i > 3.0 && i < 4.0, "{i}");
    }

    #[test]
    fn forward_drop_of_the_default_diode_is_silicon_like() {
        // Common practice: a small silicon diode drops 0.6-1.0 V at tens of mA.
        let j = Junction::silicon();
        let mut lo = 0.0;
        let mut hi = 2.0;
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if j.current(mid).0 > 0.075 {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        assert!(lo > 0.6 && lo < 1.0, "{lo}");
    }

    #[test]
    fn series_junctions_add_their_drops() {
        let d = Junction::silicon();
        let z = Junction::breakdown(15.0, 2.0);
        let both = Junction::in_series(d, z);
        // At 50 mA the drops add (definition of a series connection).
        let drop = |j: &Junction| {
            let (mut lo, mut hi) = (-1.0, 100.0);
            for _ in 0..100 {
                let mid = 0.5 * (lo + hi);
                if j.current(mid).0 > 0.05 {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            lo
        };
        let sum = drop(&d) + drop(&z);
        assert!((drop(&both) - sum).abs() < 1e-6, "{} vs {sum}", drop(&both));
    }
}
