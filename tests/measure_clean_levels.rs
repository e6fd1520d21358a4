//! State levels of clean captures with few events, where a body diode holds the ring's
//! troughs just below ground: the clip level is flat while the off state is approached
//! along a decaying ring, so the two most populated histogram modes are the on level and
//! the clip level. The right levels, event count and per-event figures must come back.

mod common;

use common::waveforms::{digitise, first_crossing, max_of, Rlc, Rng};
use kickscan::measure::{measure_trace, CaptureMeasurement, MeasureOptions, Polarity, Trace};

/// 24 V coil (L 50 mH, R 2000 ohm) switched off from 40 mA by a low-side switch with 1 nF on
/// the node: alpha = R/2L = 20 000 1/s, w0 = 1/sqrt(LC) = 141 421 rad/s, zeta = 0.1414,
/// wd = 140 000 rad/s (22 281.7 Hz). Series RLC natural response, Nilsson & Riedel,
/// Electric Circuits, ch. 8 (formula in common/waveforms.rs).
const COIL: Rlc = Rlc {
    vs: 24.0,
    i0: 0.04,
    l: 0.05,
    r: 2000.0,
    c: 1e-9,
};
const DT_S: f64 = 20e-9;
const ON_S: f64 = 100e-6;
const OFF_S: f64 = 400e-6;
/// Forward drop of the switch's body diode, which holds the troughs below ground (common
/// practice: a silicon body diode conducts at about 0.7 V).
const DIODE_V: f64 = 0.7;

/// `n` cycles of 100 us on at 0 V then 400 us off, the node following the RLC response
/// with its troughs clipped at -0.7 V; the record ends with the last off time.
fn clean_record(n: usize) -> Vec<f64> {
    let per_cycle = ((ON_S + OFF_S) / DT_S).round() as usize;
    let on = (ON_S / DT_S).round() as usize;
    (0..n * per_cycle)
        .map(|j| {
            let k = j % per_cycle;
            if k < on {
                0.0
            } else {
                COIL.v((k - on) as f64 * DT_S).max(-DIODE_V)
            }
        })
        .collect()
}

/// Printed with 4 decimals, as a scope export of a simulated record would be.
fn four_decimals(v: &mut [f64]) {
    for x in v.iter_mut() {
        *x = (*x * 1e4).round() / 1e4;
    }
}

fn measure(v: &[f64]) -> CaptureMeasurement {
    let trace = Trace {
        v,
        i: None,
        dt_s: DT_S,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &MeasureOptions::default()).expect("measurable");
    println!("warnings: {:?}", m.warnings);
    m
}

/// Envelope of the ring left at the end of an off time, `sqrt(A^2 + B^2) exp(-alpha t)`
/// (same formula): the settled level cannot be pinned closer to the supply than this.
fn residual_ring_v() -> f64 {
    let a = -COIL.vs;
    let b = (COIL.i0 / COIL.c - COIL.alpha() * COIL.vs) / COIL.wd();
    (a * a + b * b).sqrt() * (-COIL.alpha() * OFF_S).exp()
}

/// Checks count, levels and per-event figures against the formulas; `level_tol_v` and
/// `peak_tol_v` allow for noise where there is some, `jitter_v` (3 sigma plus a code) moves
/// the 50 % crossing by `jitter_v / (dv/dt)`, with dv/dt = I0 / C at the opening
/// (the capacitor takes the coil current).
fn check(m: &CaptureMeasurement, n: usize, level_tol_v: f64, peak_tol_v: f64, jitter_v: f64) {
    assert_eq!(m.events.len(), n, "{:?}", m.warnings);
    assert_eq!(m.polarity, Polarity::Up);
    assert!(m.v_on.abs() <= level_tol_v, "on level {}", m.v_on);
    let off_tol = residual_ring_v() + level_tol_v;
    assert!(
        (m.v_off - COIL.vs).abs() <= off_tol,
        "off level {} vs {} (+- {off_tol})",
        m.v_off,
        COIL.vs
    );
    // Truth from the formula: the 50 % crossing of the measured levels, and the peak.
    let mid = 0.5 * (m.v_on + m.v_off);
    let t50 = first_crossing(&|t| COIL.v(t), mid, 0.0, 5e-6, 5000).unwrap();
    let (_, peak) = max_of(&|t| COIL.v(t), 0.0, 50e-6, 5000);
    let f_truth = COIL.ring_hz();
    let (mut e_edge, mut e_peak, mut e_f, mut e_z) = (0f64, 0f64, 0f64, 0f64);
    for (k, e) in m.events.iter().enumerate() {
        let t_open = k as f64 * (ON_S + OFF_S) + ON_S;
        e_edge = e_edge.max((e.t_edge_s - t_open - t50).abs());
        e_peak = e_peak.max((e.peak_v - peak).abs());
        let f = e.ring_freq_hz.expect("ring frequency");
        e_f = e_f.max((f - f_truth).abs() / f_truth);
        let z = e.damping_ratio.expect("damping ratio");
        e_z = e_z.max((z - COIL.zeta()).abs() / COIL.zeta());
    }
    println!(
        "{n} events: on {:.4} V, off {:.4} V; edge error {:.2e} s, peak error {:.3e} V, ring frequency error {:.2e}, damping error {:.2e}",
        m.v_on, m.v_off, e_edge, e_peak, e_f, e_z
    );
    let edge_tol = DT_S + jitter_v / (COIL.i0 / COIL.c);
    assert!(e_edge <= edge_tol, "edge error {e_edge} s (+- {edge_tol})");
    assert!(
        e_peak <= (0.005 * peak).max(peak_tol_v),
        "peak error {e_peak} V"
    );
    assert!(e_f < 0.005, "ring frequency error {e_f}");
    assert!(e_z < 0.05, "damping ratio error {e_z}");
}

#[test]
fn two_clean_events_with_diode_clipped_troughs() {
    let mut v = clean_record(2);
    four_decimals(&mut v);
    let m = measure(&v);
    // Noise-free: levels to the printing resolution, peak to a sampling step's curvature.
    check(&m, 2, 1e-3, 1e-3, 0.0);
    // The damping ratio from the ring's same-sign peaks (Nilsson & Riedel formula above).
    assert!((m.events[0].damping_ratio.unwrap() - 0.141_421).abs() < 0.002);
}

#[test]
fn three_clean_events_with_diode_clipped_troughs() {
    let mut v = clean_record(3);
    four_decimals(&mut v);
    check(&measure(&v), 3, 1e-3, 1e-3, 0.0);
}

#[test]
fn clipped_troughs_with_half_a_percent_of_noise() {
    // Noise 0.5 % of the record's range (about 250 V): 1.25 V standard deviation, which
    // buries the 0.7 V clip in the on state's noise. Levels are medians of thousands of
    // samples (a fraction of sigma); the peak within 3 sigma, as the accuracy tests allow.
    let mut rng = Rng::new(11);
    let mut v = clean_record(2);
    let sigma = 0.005 * 250.0;
    for x in v.iter_mut() {
        *x += sigma * rng.normal();
    }
    check(&measure(&v), 2, 0.5 * sigma, 3.0 * sigma, 3.0 * sigma);
}

#[test]
fn clipped_troughs_noisy_on_an_8_bit_grid() {
    // 8-bit digitiser over -10..300 V (1.22 V code) with noise 0.5 % of the range: the peak
    // within 3 sigma plus one code (the accuracy target of the measure stage).
    let mut rng = Rng::new(5);
    let mut v = clean_record(3);
    let sigma = 0.005 * 310.0;
    let code = digitise(&mut v, sigma, 8, -10.0, 300.0, &mut rng);
    let noise = 3.0 * sigma + code;
    check(&measure(&v), 3, 0.5 * sigma + code, noise, noise);
}
