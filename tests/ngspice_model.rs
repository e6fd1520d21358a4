//! The model against ngspice: coils with known L, R and node capacitance are simulated,
//! and the capacitance, inductance and a clipped peak are recovered from the waveforms.
//! Skips with a notice only when the `ngspice` binary is absent.

use std::path::Path;
use std::process::Command;

use kickscan::capture::AdcRange;
use kickscan::measure::{Event, Polarity};
use kickscan::model::{self, parasitics, FitCurve, ModelContext};

const L_H: f64 = 10e-3;
const R_COIL_OHM: f64 = 200.0;
const R_CORE_OHM: f64 = 100e3;
const SUPPLY_V: f64 = 12.0;
const DT_S: f64 = 10e-9;
const T_OFF_S: f64 = 2e-6;

struct Sim {
    v: Vec<f64>,
    i_switch: Vec<f64>,
}

fn have_ngspice() -> bool {
    match Command::new("ngspice").arg("-v").output() {
        Ok(_) => true,
        Err(_) => {
            eprintln!("notice: ngspice not found; skipping the ngspice model checks");
            false
        }
    }
}

/// A 12 V coil (10 mH, 200 ohm, 100 kohm core-loss resistance across it) switched off at
/// 2 us by a low-side switch whose conductance ramps from 1 S to zero in 50 ns, with
/// `c_node_f` from the switch node to ground and a 0 V source as the current probe.
fn simulate(dir: &Path, name: &str, c_node_f: f64, l_h: f64) -> Sim {
    simulate_with(dir, name, c_node_f, l_h, "")
}

/// As [`simulate`], with extra netlist lines (a body diode, a clamp).
fn simulate_with(dir: &Path, name: &str, c_node_f: f64, l_h: f64, extra: &str) -> Sim {
    let out = dir.join(format!("{name}.txt"));
    let cir = dir.join(format!("{name}.cir"));
    let netlist = format!(
        "* {name}: low-side switched coil
V1 sup 0 {SUPPLY_V}
Rc sup a {R_COIL_OHM}
Lc a sw {l_h}
Rp sup sw {R_CORE_OHM}
Cp sw 0 {c_node_f}
Vprobe sw swp 0
Bsw swp 0 I=V(swp)*(1e-9 + V(g))
Vg g 0 PWL(0 1 {T_OFF_S} 1 {t_end_ramp} 0)
{extra}
.options method=gear
.tran {DT_S} 80u 0 2n
.control
run
linearize v(sw) i(vprobe)
set wr_singlescale
set wr_vecnames
wrdata {out} v(sw) i(vprobe)
.endc
.end
",
        t_end_ramp = T_OFF_S + 50e-9,
        out = out.display()
    );
    std::fs::write(&cir, netlist).unwrap();
    // ngspice 39 exits with 1 in batch mode after a `.control` run ("no simulations run"
    // refers to the deck's own analyses), so the written data is the test of success.
    let run = Command::new("ngspice")
        .arg("-b")
        .arg(&cir)
        .output()
        .expect("ngspice runs");
    let text = std::fs::read_to_string(&out).unwrap_or_else(|e| {
        panic!(
            "ngspice wrote no data for {name} ({e}): {}",
            String::from_utf8_lossy(&run.stdout)
        )
    });
    let mut v = Vec::new();
    let mut i_switch = Vec::new();
    for line in text.lines().skip(1) {
        let cols: Vec<f64> = line
            .split_whitespace()
            .filter_map(|c| c.parse().ok())
            .collect();
        if cols.len() >= 3 {
            v.push(cols[1]);
            i_switch.push(cols[2]);
        }
    }
    assert!(v.len() > 1000, "{name}: {} samples", v.len());
    Sim { v, i_switch }
}

/// Adds deterministic, roughly Gaussian noise (a 64-bit linear congruential generator with
/// Knuth's MMIX constants, 12 uniforms summed) of standard deviation `sigma_v`.
fn noisy(v: &[f64], sigma_v: f64, seed: u64) -> Vec<f64> {
    let mut state = seed;
    let mut uniform = move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    v.iter()
        .map(|x| x + sigma_v * ((0..12).map(|_| uniform()).sum::<f64>() - 6.0))
        .collect()
}

fn pct(est: f64, truth: f64) -> f64 {
    (est / truth - 1.0) * 100.0
}

#[test]
fn capacitance_from_known_inductance() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    // Two nodes: 100 pF and 47 pF on the 10 mH coil, and 220 pF on a 2.2 mH coil.
    for (k, (c, l)) in [(100e-12, L_H), (47e-12, L_H), (220e-12, 2.2e-3)]
        .into_iter()
        .enumerate()
    {
        let sim = simulate(dir.path(), &format!("known{k}"), c, l);
        let v = noisy(&sim.v, 0.5, 11 + k as u64);
        let ring = model::measure_ring(&v, DT_S, &ModelContext::default()).unwrap();
        let est = parasitics::from_known_inductance(
            ring.fit.omega_0_rad_s,
            ring.fit.std_err.omega_0_rad_s,
            ring.fit.alpha_per_s,
            l,
        )
        .unwrap();
        let err = pct(est.c_par_f, c);
        println!(
            "known L {l:.2e} H, C {c:.3e} F: estimated {:.4e} F ({err:+.2} %), f0 {:.1} Hz",
            est.c_par_f, est.f_0_hz
        );
        // Source: the capacitor value in the ngspice netlist.
        assert!(err.abs() < 3.0, "C from known L off by {err:.2} %");
    }
}

#[test]
fn capacitance_and_inductance_by_added_capacitance() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let c_par = 100e-12;
    let c_add = 220e-12;
    let bare = simulate(dir.path(), "bare", c_par, L_H);
    let loaded = simulate(dir.path(), "loaded", c_par + c_add, L_H);
    let ctx = ModelContext::default();
    let rb = model::measure_ring(&noisy(&bare.v, 0.5, 1), DT_S, &ctx).unwrap();
    let rl = model::measure_ring(&noisy(&loaded.v, 0.5, 2), DT_S, &ctx).unwrap();
    let e = parasitics::added_capacitance(
        rb.fit.f_0_hz,
        rb.fit.std_err.f_0_hz,
        rl.fit.f_0_hz,
        rl.fit.std_err.f_0_hz,
        c_add,
    )
    .unwrap();
    let (ec, el) = (pct(e.c_par_f, c_par), pct(e.l_h, L_H));
    println!(
        "added-capacitance: C_par {:.4e} F ({ec:+.2} %), L {:.4e} H ({el:+.2} %), Z0 {:.1} ohm, C std {:?}",
        e.c_par_f, e.l_h, e.z0_ohm, e.uncertainty.c_par_std_f
    );
    // Source: the netlist values (100 pF node, 10 mH coil).
    assert!(ec.abs() < 5.0, "C_par off by {ec:.2} %");
    assert!(el.abs() < 5.0, "L off by {el:.2} %");
}

#[test]
fn capacitance_from_the_current_and_the_slope() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let c = 100e-12;
    let sim = simulate(dir.path(), "slope", c, L_H);
    let k_off = (T_OFF_S / DT_S) as usize;
    // I0: the switch current just before turn-off.
    let i0 = sim.i_switch[k_off - 5];
    // The rise after the switch has stopped conducting: first sample where the switch
    // carries under 1 % of I0, slope by a least-squares line over the next 10 samples
    // (100 ns, a sixtieth of the ring period, where the rise is still straight).
    let k = (k_off..sim.v.len() - 1)
        .find(|&k| sim.i_switch[k].abs() < 0.01 * i0)
        .unwrap();
    let pts: Vec<(f64, f64)> = (k..k + 10).map(|j| (j as f64 * DT_S, sim.v[j])).collect();
    let n = pts.len() as f64;
    let mt = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let mv = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let dv_dt = pts.iter().map(|p| (p.0 - mt) * (p.1 - mv)).sum::<f64>()
        / pts.iter().map(|p| (p.0 - mt).powi(2)).sum::<f64>();
    let est = parasitics::c_from_slope(i0, dv_dt).unwrap();
    let err = pct(est, c);
    println!(
        "I0 {i0:.4e} A, dv/dt {dv_dt:.4e} V/s at {:.3} V: C {est:.4e} F ({err:+.2} %)",
        sim.v[k]
    );
    assert!(err.abs() < 5.0, "C from I0/(dv/dt) off by {err:.2} %");
}

fn edge_time(v: &[f64], level: f64) -> f64 {
    let k = v.iter().position(|&x| x > level).unwrap();
    let frac = (level - v[k - 1]) / (v[k] - v[k - 1]);
    (k as f64 - 1.0 + frac) * DT_S
}

#[test]
fn event_fit_refines_damping_and_capacitance() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let c = 100e-12;
    let sim = simulate(dir.path(), "event", c, L_H);
    let v = noisy(&sim.v, 0.5, 9);
    let v_on = sim.v[0];
    let peak = sim.v.iter().copied().fold(f64::MIN, f64::max);
    let event = Event {
        t_edge_s: edge_time(&sim.v, 0.5 * (v_on + SUPPLY_V)),
        polarity: Polarity::Up,
        v_on,
        v_off: SUPPLY_V,
        peak_v: peak,
        ring_freq_hz: None,
        ..Event::default()
    };
    let ctx = ModelContext {
        inductance_h: Some(L_H),
        ..ModelContext::default()
    };
    let fit = model::fit_event(&v, DT_S, 0.0, &event, &ctx).unwrap();
    let mut ev = event.clone();
    model::apply_fit(&mut ev, &fit, &ctx);
    assert_eq!(ev.fit_model.as_deref(), Some("damped_sine"));
    // Characteristic equation of the coil (R in series with L) across C || R_p:
    // s^2 + s (R/L + 1/(R_p C)) + (1 + R/R_p)/(L C) = 0, so alpha = (R/L + 1/(R_p C)) / 2
    // = 6e4 1/s and omega_0 = sqrt(1.002e12) rad/s, zeta = 0.05994 (by hand).
    let zeta_true = 6e4 / (1.002e12f64).sqrt();
    let zeta = ev.damping_ratio.unwrap();
    let c_est = ev.c_par_f.unwrap();
    println!(
        "event fit: zeta {zeta:.5} ({:+.2} %), C {c_est:.4e} F ({:+.2} %), rms {:.3} V",
        pct(zeta, zeta_true),
        pct(c_est, c),
        ev.fit_rms_v.unwrap()
    );
    assert!(pct(zeta, zeta_true).abs() < 5.0);
    assert!(pct(c_est, c).abs() < 3.0);
}

#[test]
fn clipped_peak_is_reconstructed() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    for (k, c) in [100e-12, 47e-12].into_iter().enumerate() {
        let sim = simulate(dir.path(), &format!("clip{k}"), c, L_H);
        let true_peak = sim.v.iter().copied().fold(f64::MIN, f64::max);
        // An 8-bit digitiser spanning +-rail, with 1 V of noise ahead of it.
        let rail = 0.7 * true_peak;
        let step = 2.0 * rail / 256.0;
        let clipped: Vec<f64> = noisy(&sim.v, 1.0, 5 + k as u64)
            .iter()
            .map(|&x| ((x / step).round() * step).clamp(-rail, rail))
            .collect();
        let v_on = clipped[0];
        let event = Event {
            t_edge_s: edge_time(&clipped, 0.5 * (v_on + SUPPLY_V)),
            polarity: Polarity::Up,
            v_on,
            v_off: SUPPLY_V,
            peak_v: rail,
            clipped: true,
            ..Event::default()
        };
        let ctx = ModelContext {
            adc: Some(AdcRange {
                min_v: -rail,
                max_v: rail,
                step_v: Some(step),
            }),
            ..ModelContext::default()
        };
        let fit = model::fit_event(&clipped, DT_S, 0.0, &event, &ctx).unwrap();
        assert!(matches!(fit.curve, FitCurve::DampedSine(_)));
        let p = fit.peak.as_ref().unwrap();
        let err = pct(p.peak_v, true_peak);
        println!(
            "clipped at {rail:.1} V (70 % of {true_peak:.1} V): estimate {:.1} V ({err:+.2} %), interval [{:.1}, {:.1}] V",
            p.peak_v, p.lower_v, p.upper_v
        );
        // Source: the unclipped ngspice waveform's maximum.
        assert!(err.abs() < 10.0, "peak off by {err:.2} %");
        assert!(p.lower_v >= rail && p.upper_v >= p.peak_v);
        let mut ev = event.clone();
        model::apply_fit(&mut ev, &fit, &ctx);
        assert_eq!(ev.peak_v_est, Some(p.peak_v));
    }
}

/// The switch's body diode: the ring's troughs stop at about -0.7 V. Stored charge kept
/// small (TT = 100 ns) so ngspice 39 does not stall.
const BODY_DIODE: &str = "Dbody 0 sw DBODY\n.model DBODY D(IS=1e-12 RS=0.05 TT=100n)";

#[test]
fn body_diode_clipped_troughs_are_left_out() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let c = 100e-12;
    let sim = simulate_with(dir.path(), "body", c, L_H, BODY_DIODE);
    let v = noisy(&sim.v, 0.2, 21);
    let v_on = sim.v[0];
    let min = v.iter().copied().fold(f64::MAX, f64::min);
    assert!(
        min > -2.0,
        "the body diode clips the trough (min {min:.2} V)"
    );
    let event = Event {
        t_edge_s: edge_time(&sim.v, 0.5 * (v_on + SUPPLY_V)),
        polarity: Polarity::Up,
        v_on,
        v_off: SUPPLY_V,
        peak_v: v.iter().copied().fold(f64::MIN, f64::max),
        ..Event::default()
    };
    let ctx = ModelContext {
        inductance_h: Some(L_H),
        clip_level_v: Some(-0.3),
        ..ModelContext::default()
    };
    let fit = model::fit_event(&v, DT_S, 0.0, &event, &ctx).unwrap();
    let mut ev = event.clone();
    model::apply_fit(&mut ev, &fit, &ctx);
    let c_est = ev.c_par_f.unwrap();
    let err = pct(c_est, c);
    println!(
        "body diode: fit {:?} from {:.3} us, C {c_est:.4e} F ({err:+.2} %)",
        ev.fit_model,
        fit.fit_start_s * 1e6
    );
    // Source: the netlist's 100 pF.
    assert!(err.abs() < 3.0, "C off by {err:.2} %");

    // The same capture clipped at 70 % of its peak by an 8-bit digitiser.
    let true_peak = sim.v.iter().copied().fold(f64::MIN, f64::max);
    let rail = 0.7 * true_peak;
    let step = (rail + 50.0) / 256.0;
    let clipped: Vec<f64> = v
        .iter()
        .map(|&x| ((x / step).round() * step).clamp(-50.0, rail))
        .collect();
    let ev_c = Event {
        clipped: true,
        peak_v: rail,
        ..event
    };
    let ctx_c = ModelContext {
        adc: Some(AdcRange {
            min_v: -50.0,
            max_v: rail,
            step_v: Some(step),
        }),
        ..ctx
    };
    let fit = model::fit_event(&clipped, DT_S, 0.0, &ev_c, &ctx_c).unwrap();
    let p = fit.peak.as_ref().unwrap();
    let err = pct(p.peak_v, true_peak);
    println!(
        "body diode, clipped at {rail:.1} V: estimate {:.1} V vs {true_peak:.1} V ({err:+.2} %), interval [{:.1}, {:.1}] V",
        p.peak_v, p.lower_v, p.upper_v
    );
    assert!(err.abs() < 10.0, "peak off by {err:.2} %");
}

/// Runs a netlist body (with `{out}` for the data file) and returns columns 1 and 2.
fn run_deck(dir: &Path, name: &str, body: &str) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let out = dir.join(format!("{name}.txt"));
    let cir = dir.join(format!("{name}.cir"));
    std::fs::write(&cir, body.replace("{out}", &out.display().to_string())).unwrap();
    let run = Command::new("ngspice")
        .arg("-b")
        .arg(&cir)
        .output()
        .unwrap();
    let text = std::fs::read_to_string(&out).unwrap_or_else(|e| {
        panic!(
            "ngspice wrote no data for {name} ({e}): {}",
            String::from_utf8_lossy(&run.stdout)
        )
    });
    let (mut t, mut a, mut b) = (Vec::new(), Vec::new(), Vec::new());
    for line in text.lines().skip(1) {
        let c: Vec<f64> = line
            .split_whitespace()
            .filter_map(|x| x.parse().ok())
            .collect();
        if c.len() >= 3 {
            t.push(c[0]);
            a.push(c[1]);
            b.push(c[2]);
        }
    }
    (t, a, b)
}

#[test]
fn clamp_decay_time_matches_the_formula() {
    if !have_ngspice() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    // 12 V coil, 0.2 H, 160 ohm, switched off at 10 us; a diode alone, or a diode plus a
    // 24 V zener, across the coil. The coil current is probed by a 0 V source.
    for (name, clamp, t_end) in [
        ("diode", "Dc sw sup DCL", "6m"),
        ("zener", "Dc sw k DCL\nDz sup k DZ", "1.5m"),
    ] {
        let deck = format!(
            "* {name} clamp
V1 sup 0 12
Vi sup s1 0
Rc s1 a 160
Lc a sw 0.2
Cp sw 0 100p
{clamp}
.model DCL D(IS=1e-12 RS=0.05 TT=100n)
.model DZ D(IS=1e-12 RS=0.5 BV=24 IBV=1m)
Bsw sw 0 I=V(sw)*(1e-9 + V(g))
Vg g 0 PWL(0 1 10u 1 10.05u 0)
.options method=gear
.tran 1u {t_end} 0 0.2u
.control
run
linearize v(sw) i(vi)
set wr_singlescale
set wr_vecnames
wrdata {{out}} v(sw) i(vi)
.endc
.end
"
        );
        let (t, v, i) = run_deck(dir.path(), name, &deck);
        let i0 = i[0];
        // The voltage the clamp held across the coil, averaged while the current fell
        // from 90 % to 10 % of I0.
        let held: Vec<f64> = (0..t.len())
            .filter(|&k| t[k] > 10.1e-6 && i[k] < 0.9 * i0 && i[k] > 0.1 * i0)
            .map(|k| v[k] - 12.0)
            .collect();
        let vc = held.iter().sum::<f64>() / held.len() as f64;
        let k_zero = (0..t.len())
            .find(|&k| t[k] > 10.1e-6 && i[k] < 1e-3 * i0)
            .unwrap();
        let t0_sim = t[k_zero] - 10e-6;
        let t0 = model::advice::decay_time_s(0.2, 160.0, i0, vc).unwrap();
        let err = pct(t0, t0_sim);
        println!(
            "{name}: I0 {i0:.4e} A, holding {vc:.3} V, decay {:.4} ms (ngspice) vs {:.4} ms (formula) ({err:+.2} %)",
            t0_sim * 1e3,
            t0 * 1e3
        );
        // Source: ngspice's coil current reaching 0.1 % of I0.
        assert!(err.abs() < 3.0, "{name}: decay time off by {err:.2} %");
    }
}
