//! A scenario: the coil, the switch, the clamp, the switching pattern with its per-event
//! variation, and the digitiser. [`simulate`] turns it into a [`Capture`].

use std::path::PathBuf;

use crate::capture::{AdcRange, Capture, Channel, Format};

use super::circuit::{Circuit, Junction, Operating, Placed, Placement, Role, Snubber};
use super::noise::{Adc, Rng};
use super::solver::{self, Cycle, OffEnergy, Sampling, SolverOptions, SwitchModel};
use super::SimError;

/// Where the switch sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Side {
    /// Switch between the coil and ground: the node flies above the supply.
    #[default]
    Low,
    /// Switch between the supply and the coil: the node flies below ground.
    High,
}

/// The suppression fitted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Clamp {
    None,
    /// Freewheel diode across the coil.
    Diode,
    /// Diode in series with a zener across the coil.
    DiodeZener {
        zener_v: f64,
        zener_ohm: f64,
    },
    /// Unidirectional TVS across the switch.
    Tvs {
        breakdown_v: f64,
        dynamic_ohm: f64,
    },
    /// RC snubber across the switch.
    Snubber {
        r_ohm: f64,
        c_f: f64,
    },
    /// The switch's own avalanche breakdown.
    Avalanche {
        breakdown_v: f64,
        dynamic_ohm: f64,
    },
}

/// Per-event randomness. Spreads are relative standard deviations.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Variation {
    /// Spread of the turn-off time.
    pub turn_off_spread: f64,
    /// Amplitude of a supply ripple sampled at a random phase per event.
    pub supply_ripple_v: f64,
    /// Spread of the on time (timing randomness; changes I0 when the on time is short
    /// against L/R).
    pub on_time_spread: f64,
    /// Spread of the coil resistance (temperature, part tolerance), and so of I0.
    pub current_spread: f64,
}

/// Everything that defines a simulated capture.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    pub supply_v: f64,
    pub inductance_h: f64,
    pub resistance_ohm: f64,
    pub capacitance_f: f64,
    pub parallel_ohm: Option<f64>,
    pub side: Side,
    pub clamp: Clamp,
    /// The freewheel diode (and the diode of a diode plus zener clamp).
    pub diode: Junction,
    /// The switch's body diode conducts when the switch voltage reverses.
    pub body_diode: bool,
    pub r_on_ohm: f64,
    pub r_off_ohm: f64,
    pub turn_off_s: f64,
    pub turn_on_s: f64,
    pub events: usize,
    pub on_time_s: f64,
    pub off_time_s: f64,
    pub variation: Variation,
    /// Gaussian noise on the voltage channel (standard deviation).
    pub noise_v: f64,
    /// Gaussian noise on the current channels.
    pub noise_a: f64,
    pub adc: Option<Adc>,
    pub current_adc: Option<Adc>,
    pub dt_s: f64,
    pub seed: u64,
    pub with_coil_current: bool,
    pub with_switch_current: bool,
    pub solver: SolverOptions,
}

impl Default for Scenario {
    /// A small 12 V relay coil (160 ohm, 75 mA, 20 mH) on a low-side switch with 330 pF
    /// at the node: invented, but of the size found on relay driver boards.
    fn default() -> Self {
        Scenario {
            supply_v: 12.0,
            inductance_h: 20e-3,
            resistance_ohm: 160.0,
            capacitance_f: 330e-12,
            parallel_ohm: None,
            side: Side::Low,
            clamp: Clamp::None,
            diode: Junction::silicon(),
            body_diode: true,
            r_on_ohm: 0.1,
            r_off_ohm: 1e8,
            turn_off_s: 50e-9,
            turn_on_s: 50e-9,
            events: 4,
            on_time_s: 2e-3,
            off_time_s: 3e-3,
            variation: Variation::default(),
            noise_v: 0.0,
            noise_a: 0.0,
            adc: None,
            current_adc: None,
            dt_s: 100e-9,
            seed: 1,
            with_coil_current: false,
            with_switch_current: false,
            solver: SolverOptions::default(),
        }
    }
}

/// What the simulator knows about each event, before noise.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EventTruth {
    /// Start of the turn-off ramp.
    pub t_off_s: f64,
    pub turn_off_s: f64,
    pub supply_v: f64,
    pub coil_ohm: f64,
    /// Coil current when the turn-off starts.
    pub i0_a: f64,
    /// Largest voltage across the switch in the off phase (noise-free).
    pub switch_stress_v: f64,
    pub energy: OffEnergy,
}

/// A simulated capture with the truth behind it.
#[derive(Debug, Clone)]
pub struct Simulated {
    pub capture: Capture,
    pub events: Vec<EventTruth>,
    pub implicit_steps: usize,
    pub propagated_samples: usize,
}

/// Largest record accepted, to refuse typing mistakes (a 1 ps interval over seconds)
/// before they exhaust memory.
pub const MAX_SAMPLES: usize = 200_000_000;

fn check(name: &'static str, v: f64, ok: bool) -> Result<(), SimError> {
    if v.is_finite() && ok {
        Ok(())
    } else {
        Err(SimError::Invalid {
            name,
            message: format!("{v} is out of range"),
        })
    }
}

impl Scenario {
    fn validate(&self) -> Result<(), SimError> {
        check("supply", self.supply_v, self.supply_v > 0.0)?;
        check("inductance", self.inductance_h, self.inductance_h > 0.0)?;
        check("resistance", self.resistance_ohm, self.resistance_ohm > 0.0)?;
        check("capacitance", self.capacitance_f, self.capacitance_f > 0.0)?;
        if let Some(rp) = self.parallel_ohm {
            check("parallel-resistance", rp, rp > 0.0)?;
        }
        check("r-on", self.r_on_ohm, self.r_on_ohm > 0.0)?;
        check("r-off", self.r_off_ohm, self.r_off_ohm > self.r_on_ohm)?;
        check("turn-off", self.turn_off_s, self.turn_off_s >= 0.0)?;
        check("turn-on", self.turn_on_s, self.turn_on_s >= 0.0)?;
        check("on-time", self.on_time_s, self.on_time_s > 0.0)?;
        check("off-time", self.off_time_s, self.off_time_s > 0.0)?;
        check("dt", self.dt_s, self.dt_s > 0.0)?;
        check("noise", self.noise_v, self.noise_v >= 0.0)?;
        check("current-noise", self.noise_a, self.noise_a >= 0.0)?;
        let v = &self.variation;
        check(
            "turn-off-spread",
            v.turn_off_spread,
            v.turn_off_spread >= 0.0,
        )?;
        check("supply-ripple", v.supply_ripple_v, v.supply_ripple_v >= 0.0)?;
        check("on-time-spread", v.on_time_spread, v.on_time_spread >= 0.0)?;
        check("current-spread", v.current_spread, v.current_spread >= 0.0)?;
        if self.events == 0 {
            return Err(SimError::Invalid {
                name: "events",
                message: "at least one event is needed".into(),
            });
        }
        for adc in [self.adc, self.current_adc].into_iter().flatten() {
            check("adc-min", adc.min_v, adc.min_v < adc.max_v)?;
            check("adc-max", adc.max_v, adc.max_v > adc.min_v)?;
            if !(1..=32).contains(&adc.bits) {
                return Err(SimError::Invalid {
                    name: "adc-bits",
                    message: format!("{} bits; expected 1 to 32", adc.bits),
                });
            }
        }
        match self.clamp {
            Clamp::DiodeZener { zener_v, zener_ohm } => {
                check("zener-v", zener_v, zener_v > 0.0)?;
                check("zener-r", zener_ohm, zener_ohm >= 0.0)?;
            }
            Clamp::Tvs {
                breakdown_v,
                dynamic_ohm,
            } => {
                check("tvs-v", breakdown_v, breakdown_v > 0.0)?;
                check("tvs-r", dynamic_ohm, dynamic_ohm >= 0.0)?;
            }
            Clamp::Avalanche {
                breakdown_v,
                dynamic_ohm,
            } => {
                check("avalanche-v", breakdown_v, breakdown_v > 0.0)?;
                check("avalanche-r", dynamic_ohm, dynamic_ohm >= 0.0)?;
            }
            Clamp::Snubber { r_ohm, c_f } => {
                check("snubber-r", r_ohm, r_ohm > 0.0)?;
                check("snubber-c", c_f, c_f > 0.0)?;
            }
            Clamp::None | Clamp::Diode => {}
        }
        Ok(())
    }

    /// The circuit this scenario describes.
    pub fn circuit(&self) -> Circuit {
        let mut junctions = Vec::new();
        let mut snubber = None;
        match self.clamp {
            Clamp::None => {}
            Clamp::Diode => junctions.push(Placed {
                junction: self.diode,
                placement: Placement::AcrossCoil,
                role: Role::Clamp,
            }),
            Clamp::DiodeZener { zener_v, zener_ohm } => junctions.push(Placed {
                junction: Junction::in_series(self.diode, Junction::breakdown(zener_v, zener_ohm)),
                placement: Placement::AcrossCoil,
                role: Role::Clamp,
            }),
            Clamp::Tvs {
                breakdown_v,
                dynamic_ohm,
            } => {
                junctions.push(Placed {
                    junction: Junction::breakdown(breakdown_v, dynamic_ohm),
                    placement: Placement::AcrossSwitch,
                    role: Role::Clamp,
                });
                junctions.push(Placed {
                    junction: self.diode,
                    placement: Placement::AcrossSwitchReverse,
                    role: Role::Clamp,
                });
            }
            Clamp::Snubber { r_ohm, c_f } => snubber = Some(Snubber { r_ohm, c_f }),
            Clamp::Avalanche {
                breakdown_v,
                dynamic_ohm,
            } => junctions.push(Placed {
                junction: Junction::breakdown(breakdown_v, dynamic_ohm),
                placement: Placement::AcrossSwitch,
                role: Role::Switch,
            }),
        }
        if self.body_diode {
            junctions.push(Placed {
                junction: self.diode,
                placement: Placement::AcrossSwitchReverse,
                role: Role::Switch,
            });
        }
        Circuit {
            inductance_h: self.inductance_h,
            capacitance_f: self.capacitance_f,
            parallel_ohm: self.parallel_ohm,
            snubber,
            junctions,
        }
    }

    /// The switching cycles with their per-event draws, and the record's start and length.
    fn plan(&self, rng: &mut Rng) -> (Vec<Cycle>, f64, usize) {
        let v = self.variation;
        let mut cycles = Vec::with_capacity(self.events);
        let pre_s = self.on_time_s;
        let mut t_on = -pre_s - self.turn_on_s;
        for k in 0..self.events {
            let turn_off_s = self.turn_off_s * (1.0 + v.turn_off_spread * rng.gaussian()).max(0.1);
            let ripple = v.supply_ripple_v * (std::f64::consts::TAU * rng.uniform()).sin();
            let on_s = if k == 0 {
                pre_s + self.turn_on_s
            } else {
                self.on_time_s * (1.0 + v.on_time_spread * rng.gaussian()).max(0.1)
            };
            let coil_ohm = self.resistance_ohm * (1.0 + v.current_spread * rng.gaussian()).max(0.5);
            let t_off = t_on + on_s;
            cycles.push(Cycle {
                t_on_s: t_on,
                t_off_s: t_off,
                turn_on_s: self.turn_on_s,
                turn_off_s,
                op: Operating {
                    supply_v: (self.supply_v + ripple).max(0.0),
                    coil_ohm,
                },
            });
            t_on = t_off + self.off_time_s;
        }
        let t_start = -pre_s;
        // The small allowance keeps a record length that is a whole number of intervals from
        // losing its last sample to rounding.
        let n = ((t_on - t_start) / self.dt_s + 1e-6).floor() + 1.0;
        (cycles, t_start, n.max(1.0).min(usize::MAX as f64) as usize)
    }
}

/// Simulates a scenario into a capture with channels `v_sw` (volts) and, as asked,
/// `i_coil` and `i_switch` (amperes).
pub fn simulate(sc: &Scenario) -> Result<Simulated, SimError> {
    sc.validate()?;
    let mut rng = Rng::new(sc.seed);
    let (cycles, t_start, n) = sc.plan(&mut rng);
    if n > MAX_SAMPLES {
        return Err(SimError::Invalid {
            name: "dt",
            message: format!(
                "the record would hold {n} samples (more than {MAX_SAMPLES}); use a longer \
                 sample interval or fewer events"
            ),
        });
    }
    let circuit = sc.circuit();
    let tr = solver::run(
        &circuit,
        &cycles,
        SwitchModel {
            r_on_ohm: sc.r_on_ohm,
            r_off_ohm: sc.r_off_ohm,
        },
        Sampling {
            t_start_s: t_start,
            dt_s: sc.dt_s,
            n_samples: n,
            keep_switch_current: sc.with_switch_current,
        },
        sc.solver,
    )?;

    // Truth per event and the node voltage, cycle by cycle.
    let mut events = Vec::with_capacity(cycles.len());
    let mut v_node = tr.v_switch_v;
    let index_at = |t: f64| (((t - t_start) / sc.dt_s).ceil().max(0.0) as usize).min(n);
    for (k, c) in cycles.iter().enumerate() {
        let a = index_at(c.t_on_s);
        let b = cycles.get(k + 1).map_or(n, |nx| index_at(nx.t_on_s));
        let off = index_at(c.t_off_s).clamp(a, b);
        let stress = v_node
            .get(off..b)
            .map_or(0.0, |s| s.iter().fold(0.0f64, |m, v| m.max(v.abs())));
        events.push(EventTruth {
            t_off_s: c.t_off_s,
            turn_off_s: c.turn_off_s,
            supply_v: c.op.supply_v,
            coil_ohm: c.op.coil_ohm,
            i0_a: tr.off_energy.get(k).map_or(0.0, |e| e.i0_a),
            switch_stress_v: stress,
            energy: tr.off_energy.get(k).copied().unwrap_or_default(),
        });
        if sc.side == Side::High {
            if let Some(seg) = v_node.get_mut(a..b) {
                for v in seg {
                    *v = c.op.supply_v - *v;
                }
            }
        }
    }

    let mut channels = Vec::with_capacity(3);
    channels.push(finish_channel(
        "v_sw", "V", v_node, sc.noise_v, sc.adc, &mut rng,
    ));
    if sc.with_coil_current {
        channels.push(finish_channel(
            "i_coil",
            "A",
            tr.i_coil_a,
            sc.noise_a,
            sc.current_adc,
            &mut rng,
        ));
    }
    if sc.with_switch_current {
        channels.push(finish_channel(
            "i_switch",
            "A",
            tr.i_switch_a,
            sc.noise_a,
            sc.current_adc,
            &mut rng,
        ));
    }
    let clamp = match sc.clamp {
        Clamp::None => "none".to_string(),
        Clamp::Diode => "diode".to_string(),
        Clamp::DiodeZener { zener_v, .. } => format!("diode + {zener_v} V zener"),
        Clamp::Tvs { breakdown_v, .. } => format!("{breakdown_v} V TVS"),
        Clamp::Snubber { r_ohm, c_f } => format!("RC snubber {r_ohm} ohm, {c_f} F"),
        Clamp::Avalanche { breakdown_v, .. } => format!("switch avalanche at {breakdown_v} V"),
    };
    let metadata = vec![
        ("generator".to_string(), "kickscan simulate".to_string()),
        ("sample interval [s]".to_string(), format!("{:e}", sc.dt_s)),
        ("record length".to_string(), n.to_string()),
        ("supply [V]".to_string(), sc.supply_v.to_string()),
        (
            "inductance [H]".to_string(),
            format!("{:e}", sc.inductance_h),
        ),
        (
            "resistance [ohm]".to_string(),
            sc.resistance_ohm.to_string(),
        ),
        (
            "capacitance [F]".to_string(),
            format!("{:e}", sc.capacitance_f),
        ),
        ("clamp".to_string(), clamp),
        (
            "switch".to_string(),
            match sc.side {
                Side::Low => "low-side".to_string(),
                Side::High => "high-side".to_string(),
            },
        ),
        ("seed".to_string(), sc.seed.to_string()),
    ];
    Ok(Simulated {
        capture: Capture {
            source: PathBuf::from("simulated"),
            format: Format::Csv,
            sample_interval_s: sc.dt_s,
            t0_s: t_start,
            channels,
            metadata,
            notes: vec!["synthesized by kickscan simulate".to_string()],
            warnings: Vec::new(),
        },
        events,
        implicit_steps: tr.implicit_steps,
        propagated_samples: tr.propagated_samples,
    })
}

fn finish_channel(
    name: &str,
    unit: &str,
    mut samples: Vec<f64>,
    noise: f64,
    adc: Option<Adc>,
    rng: &mut Rng,
) -> Channel {
    if noise > 0.0 {
        for v in samples.iter_mut() {
            *v += noise * rng.gaussian();
        }
    }
    if let Some(a) = adc {
        for v in samples.iter_mut() {
            *v = a.quantize(*v);
        }
    }
    Channel {
        name: name.to_string(),
        unit: unit.to_string(),
        samples,
        adc: adc.map(|a| AdcRange {
            min_v: a.min_v,
            max_v: a.max_v,
            step_v: Some(a.step_v()),
        }),
    }
}
