//! Ring frequency checked against ngspice: a coil (L, R) switched off by a voltage-
//! controlled switch, with a known node capacitance. Skips with a notice when the
//! `ngspice` binary is absent (CI installs it).

use std::f64::consts::PI;
use std::process::Command;

use kickscan::measure::{measure_trace, MeasureOptions, Trace};

const L_H: f64 = 0.1;
const R_OHM: f64 = 200.0;
const C_F: f64 = 10e-9;
const R_OFF_OHM: f64 = 1e9;
const DT_S: f64 = 0.1e-6;

fn netlist() -> String {
    format!(
        "* coil switched off by a voltage-controlled switch\n\
         V1 vs 0 DC 24\n\
         L1 vs nr {L_H}\n\
         R1 nr node {R_OHM}\n\
         C1 node 0 {C_F}\n\
         S1 node 0 ctrl 0 swmod\n\
         Vc ctrl 0 PWL(0 5 1m 5 1.0001m 0)\n\
         .model swmod SW(VT=2.5 VH=0.1 RON=0.1 ROFF={R_OFF_OHM})\n\
         .tran {DT_S} 4m 0 {DT_S}\n\
         .control\nrun\nwrdata out.txt v(node)\n.endc\n.end\n"
    )
}

/// Linear interpolation of `(t, v)` rows onto a uniform grid from 0 with step `dt`.
fn resample(rows: &[(f64, f64)], dt: f64) -> Vec<f64> {
    let Some(&(t_end, _)) = rows.last() else {
        return Vec::new();
    };
    let n = (t_end / dt).floor() as usize;
    let mut out = Vec::with_capacity(n);
    let mut j = 0;
    for k in 0..n {
        let t = k as f64 * dt;
        while j + 1 < rows.len() && rows[j + 1].0 < t {
            j += 1;
        }
        let (t0, v0) = rows[j];
        let (t1, v1) = rows.get(j + 1).copied().unwrap_or(rows[j]);
        out.push(if t1 > t0 {
            v0 + (v1 - v0) * (t - t0) / (t1 - t0)
        } else {
            v0
        });
    }
    out
}

/// Runs `netlist` (which writes `out.txt`) and returns v(node) on the `DT_S` grid; `None`
/// when ngspice is absent.
fn simulate(netlist: &str) -> Option<Vec<f64>> {
    if Command::new("ngspice").arg("--version").output().is_err() {
        println!("ngspice not found: skipping the ngspice ring check");
        return None;
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("coil.cir"), netlist).unwrap();
    let status = Command::new("ngspice")
        .args(["-b", "coil.cir"])
        .current_dir(dir.path())
        .output()
        .unwrap();
    // ngspice 39 in batch mode with a .control block exits with 1 even after a good run;
    // the written data file is what counts.
    let text = std::fs::read_to_string(dir.path().join("out.txt")).unwrap_or_else(|e| {
        panic!(
            "no output from ngspice ({e}): {}",
            String::from_utf8_lossy(&status.stderr)
        )
    });
    let rows: Vec<(f64, f64)> = text
        .lines()
        .filter_map(|l| {
            let mut it = l.split_whitespace().map(|x| x.parse::<f64>());
            Some((it.next()?.ok()?, it.next()?.ok()?))
        })
        .collect();
    assert!(rows.len() > 1000);
    Some(resample(&rows, DT_S))
}

#[test]
fn ring_frequency_matches_the_simulated_rlc() {
    let Some(v) = simulate(&netlist()) else {
        return;
    };
    let opts = MeasureOptions {
        inductance_h: Some(L_H),
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: None,
        dt_s: DT_S,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 1, "{:?}", m.warnings);
    let e = &m.events[0];
    // Series R with L, R_off across C: s^2 + (R/L + 1/(R_off C)) s + (1 + R/R_off)/(LC) = 0
    // (circuit analysis of the two-mesh network), so the damped frequency is
    // sqrt(w0^2 - alpha^2) / 2 pi, 1/(2 pi sqrt(LC)) corrected for damping.
    let w0_sq = (1.0 + R_OHM / R_OFF_OHM) / (L_H * C_F);
    let alpha = 0.5 * (R_OHM / L_H + 1.0 / (R_OFF_OHM * C_F));
    let f_truth = (w0_sq - alpha * alpha).sqrt() / (2.0 * PI);
    let f = e.ring_freq_hz.unwrap();
    println!(
        "ngspice ring: {f:.2} Hz vs {f_truth:.2} Hz ({:.4} %)",
        (f - f_truth) / f_truth * 100.0
    );
    assert!((f - f_truth).abs() / f_truth < 0.005);
    let zeta_truth = alpha / w0_sq.sqrt();
    let z = e.damping_ratio.unwrap();
    println!("ngspice damping: {z:.5} vs {zeta_truth:.5}");
    assert!((z - zeta_truth).abs() / zeta_truth < 0.05);
    let c = e.c_par_f.unwrap();
    println!("ngspice node capacitance: {c:.4e} F vs {C_F:.4e} F");
    assert!((c - C_F).abs() / C_F < 0.01);
    // This switch has no body diode: the ring swings hundreds of volts below ground, so the
    // fit must not cut it where a diode would clip (the pipeline's clip level for a low-side
    // switch). The damped sine fits it to a small fraction of a volt.
    let ctx = kickscan::model::ModelContext {
        inductance_h: Some(L_H),
        clip_level_v: Some(-kickscan::measure::BODY_DIODE_CLIP_V),
        ..kickscan::model::ModelContext::default()
    };
    let fit = kickscan::model::fit_event(&v, DT_S, 0.0, e, &ctx).unwrap();
    let mut fitted = e.clone();
    kickscan::model::apply_fit(&mut fitted, &fit, &ctx);
    let rms = fitted.fit_rms_v.unwrap();
    println!(
        "ngspice fit: {} with residuals {rms:.2e} V",
        fit.curve.name()
    );
    assert_eq!(fit.curve.name(), "damped_sine");
    assert!(rms < 1e-3 * e.peak_v, "{rms} V");
    // And from the spike on: cut at every trough, the ring could only be fitted where the
    // troughs no longer reach the clip level, many periods later.
    let periods_late = (fit.fit_start_s - e.t_edge_s) * f_truth;
    println!("ngspice fit starts {periods_late:.2} periods after the edge");
    assert!(periods_late < 1.0, "{periods_late} periods");
}

/// The same circuit with the switch's body diode (a silicon diode from ground to the node)
/// and the values of a small coil: 12 V, 2 mH, 160 ohm, 330 pF. The spike reaches about
/// I0 sqrt(L/C) = 185 V and the ring's troughs are clipped near -0.7 V while the diode
/// conducts. The ring frequency is the free ring's, f_d = sqrt(1/LC - (R/2L)^2) / 2 pi =
/// 195.8 kHz (series RLC, the two-mesh formula above with R_off's terms negligible): the
/// crossings alone counted the clipped troughs' time and gave 12 % less. One turn-off,
/// not a second one where the diode lets go.
#[test]
fn ring_frequency_with_the_body_diode_clipping_the_troughs() {
    let (l_h, r_ohm, c_f) = (2e-3, 160.0, 330e-12);
    let netlist = format!(
        "* small coil with the switch's body diode\n\
         V1 vs 0 DC 12\n\
         L1 vs nr {l_h}\n\
         R1 nr node {r_ohm}\n\
         C1 node 0 {c_f}\n\
         D1 0 node dbody\n\
         .model dbody D(IS=1e-12)\n\
         S1 node 0 ctrl 0 swmod\n\
         Vc ctrl 0 PWL(0 5 1m 5 1.0001m 0)\n\
         .model swmod SW(VT=2.5 VH=0.1 RON=0.1 ROFF={R_OFF_OHM})\n\
         .tran {DT_S} 2m 0 {DT_S}\n\
         .control\nrun\nwrdata out.txt v(node)\n.endc\n.end\n"
    );
    let Some(v) = simulate(&netlist) else {
        return;
    };
    let lowest = v.iter().copied().fold(f64::INFINITY, f64::min);
    assert!(
        lowest < -0.5 && lowest > -1.0,
        "the diode clips near -0.7 V: {lowest}"
    );
    let opts = MeasureOptions {
        inductance_h: Some(l_h),
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: None,
        dt_s: DT_S,
        t0_s: 0.0,
        adc: None,
    };
    let mut m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 1, "{:?}", m.warnings);
    let alpha = r_ohm / (2.0 * l_h);
    let f_truth = (1.0 / (l_h * c_f) - alpha * alpha).sqrt() / (2.0 * PI);
    // The fit refines the crossings' estimate, as the pipeline applies it.
    let ctx = kickscan::model::ModelContext {
        inductance_h: Some(l_h),
        clip_level_v: Some(-kickscan::measure::BODY_DIODE_CLIP_V),
        ..kickscan::model::ModelContext::default()
    };
    let fit = kickscan::model::fit_event(&v, DT_S, 0.0, &m.events[0], &ctx).unwrap();
    kickscan::model::apply_fit(&mut m.events[0], &fit, &ctx);
    let f = m.events[0].ring_freq_hz.unwrap();
    println!("ngspice clipped ring: {f:.1} Hz vs {f_truth:.1} Hz");
    assert!((f - f_truth).abs() / f_truth < 0.005, "{f} vs {f_truth}");
}
