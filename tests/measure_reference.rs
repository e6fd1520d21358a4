//! Measurements checked against outside references: IEEE Std 181-2011 definitions, the
//! textbook series RLC natural response, the logarithmic decrement, and facts of the trade.

mod common;

use common::waveforms::{first_crossing, max_of, train, DiodeClamp, Rlc, Rng};
use kickscan::measure::{measure_trace, CaptureMeasurement, MeasureOptions, Trace};

fn measure(v: &[f64], dt: f64, opts: &MeasureOptions) -> CaptureMeasurement {
    let trace = Trace {
        v,
        i: None,
        dt_s: dt,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, opts).expect("measurable");
    println!("warnings: {:?}", m.warnings);
    // None of these scenarios has two overlapping rings.
    assert!(
        !m.warnings.iter().any(|w| w.contains("two rings")),
        "{:?}",
        m.warnings
    );
    m
}

#[test]
fn ieee181_transition_duration_of_a_linear_ramp() {
    // IEEE Std 181-2011 formulas: a 0 to 12 V linear ramp over 100 ns has a 10-90 %
    // transition duration of 80 ns, and its 50 % instant is half-way up the ramp.
    let dt = 1e-9;
    let mut v = vec![0.0; 300];
    v.extend((0..100).map(|k| 12.0 * k as f64 / 100.0));
    v.extend(std::iter::repeat_n(12.0, 600));
    let m = measure(&v, dt, &MeasureOptions::default());
    assert_eq!(m.events.len(), 1);
    let e = &m.events[0];
    assert!((m.v_on - 0.0).abs() < 1e-9 && (m.v_off - 12.0).abs() < 1e-9);
    let rise = e.rise_time_s.unwrap();
    assert!((rise - 80e-9).abs() < 1e-12, "rise {rise}");
    assert!((e.t_edge_s - 350e-9).abs() < 1e-12, "edge {}", e.t_edge_s);
}

#[test]
fn ieee181_overshoot_of_a_30_v_peak_over_a_12_v_step() {
    // IEEE Std 181-2011 overshoot aberration: base 0 V, top 12 V, peak 30 V -> 150 %.
    let dt = 1e-9;
    let mut v = vec![0.0; 300];
    v.extend((0..10).map(|k| 30.0 * k as f64 / 9.0));
    v.extend((1..900).map(|k| 12.0 + 18.0 * (-(k as f64) / 20.0).exp()));
    let m = measure(&v, dt, &MeasureOptions::default());
    assert_eq!(m.events.len(), 1);
    let e = &m.events[0];
    assert!((e.peak_v - 30.0).abs() < 1e-9);
    assert!(
        (e.overshoot_pct.unwrap() - 150.0).abs() < 0.01,
        "{:?}",
        e.overshoot_pct
    );
}

/// Three events of a series RLC natural response; returns the worst relative errors of
/// ring frequency, damping ratio and parasitic capacitance.
fn rlc_errors(rlc: Rlc, off_s: f64, dt: f64) -> (f64, f64, f64) {
    let mut rng = Rng::new(7);
    let tr = train(&|_, t| rlc.v(t), 3, 0.02, off_s, dt, &mut rng);
    let opts = MeasureOptions {
        inductance_h: Some(rlc.l),
        ..MeasureOptions::default()
    };
    let m = measure(&tr.v, dt, &opts);
    assert_eq!(m.events.len(), 3, "{:?}", m.warnings);
    let (mut ef, mut ez, mut ec) = (0f64, 0f64, 0f64);
    for e in &m.events {
        let f = e.ring_freq_hz.expect("ring");
        let z = e.damping_ratio.expect("damping");
        let c = e.c_par_f.expect("capacitance");
        ef = ef.max((f - rlc.ring_hz()).abs() / rlc.ring_hz());
        ez = ez.max((z - rlc.zeta()).abs() / rlc.zeta());
        ec = ec.max((c - rlc.c).abs() / rlc.c);
    }
    (ef, ez, ec)
}

#[test]
fn textbook_series_rlc_ring_frequency_and_damping() {
    // Nilsson & Riedel, Electric Circuits, underdamped series RLC example (from memory):
    // alpha = 200 1/s, omega_d = 979.80 rad/s, i.e. omega_0 = 1000 rad/s, zeta = 0.2.
    // Realised with L = 0.1 H, R = 40 ohm, C = 10 uF.
    let rlc = Rlc {
        vs: 24.0,
        i0: 0.6,
        l: 0.1,
        r: 40.0,
        c: 10e-6,
    };
    assert!((rlc.alpha() - 200.0).abs() < 1e-9);
    assert!(
        (rlc.wd() - 979.80).abs() < 0.01,
        "formula gives {}",
        rlc.wd()
    );
    let (ef, ez, ec) = rlc_errors(rlc, 0.06, 10e-6);
    println!("textbook RLC: ring freq error {ef:.2e}, damping error {ez:.2e}, C error {ec:.2e}");
    assert!(ef < 0.002, "ring frequency error {ef}");
    assert!(ez < 0.02, "damping ratio error {ez}");
    assert!(ec < 0.02, "capacitance error {ec}");
}

#[test]
fn logarithmic_decrement_for_zeta_005_and_02() {
    // delta = 2 pi zeta / sqrt(1 - zeta^2) (Thomson & Dahleh, Theory of Vibration); the
    // analytic response has exactly that decrement, so zeta must come back.
    for zeta in [0.05, 0.2] {
        let l: f64 = 0.1;
        let c = 10e-6;
        let w0 = 1.0 / (l * c).sqrt();
        let r = 2.0 * l * zeta * w0;
        let rlc = Rlc {
            vs: 24.0,
            i0: 24.0 / r,
            l,
            r,
            c,
        };
        let off = (rlc.i0 * 100.0 / 1.2).ln() / rlc.alpha() * 2.5;
        let (ef, ez, _) = rlc_errors(rlc, off, 10e-6);
        println!("zeta {zeta}: ring freq error {ef:.2e}, damping error {ez:.2e}");
        assert!(ez < 0.02, "zeta {zeta}: damping error {ez}");
        assert!(ef < 0.002, "zeta {zeta}: frequency error {ef}");
    }
}

#[test]
fn diode_clamp_holds_the_node_a_forward_drop_above_the_supply() {
    // Common practice: a silicon diode across the coil keeps the peak 0.6-1.2 V above the
    // supply, and the coil current takes (L/R) ln(1 + I0 R / Vf) to die (formula in
    // waveforms.rs): 1.717 ms for 0.1 H, 200 ohm, 0.12 A, 0.8 V.
    let d = DiodeClamp {
        vs: 24.0,
        vf: 0.8,
        i0: 0.12,
        l: 0.1,
        r: 200.0,
        rise_s: 2e-6,
    };
    assert!((d.plateau_s() - 1.717e-3).abs() < 1e-6);
    let dt = 1e-6;
    let mut rng = Rng::new(11);
    let tr = train(&|_, t| d.v(t), 4, 2e-3, 4e-3, dt, &mut rng);
    let m = measure(&tr.v, dt, &MeasureOptions::default());
    assert_eq!(m.events.len(), 4, "{:?}", m.warnings);
    for (e, &t_open) in m.events.iter().zip(&tr.t_open_s) {
        let above = e.peak_v - m.v_off;
        assert!(
            (0.6..=1.2).contains(&above),
            "peak {above} V above the supply"
        );
        let t50 = t_open + d.rise_s * 12.0 / 24.8;
        let truth = t_open + d.rise_s + d.plateau_s() - t50;
        let decay = e.decay_time_s.unwrap();
        assert!(
            (decay - truth).abs() / truth < 0.02,
            "decay {decay} vs {truth}"
        );
        assert_eq!(e.damping_ratio, None);
        // A flat plateau at the record's top is not a clipped peak.
        assert!(!e.clipped);
    }
}

#[test]
fn unclamped_relay_spike_is_hundreds_of_volts_tens_of_microseconds_wide() {
    // Common practice: a small relay coil (0.1 H, 200 ohm at 24 V) with about 10 nF at the
    // node flies to hundreds of volts for tens of microseconds.
    let rlc = Rlc {
        vs: 24.0,
        i0: 0.12,
        l: 0.1,
        r: 200.0,
        c: 10e-9,
    };
    let dt = 0.5e-6;
    let mut rng = Rng::new(3);
    let tr = train(&|_, t| rlc.v(t), 2, 2e-3, 8e-3, dt, &mut rng);
    let m = measure(&tr.v, dt, &MeasureOptions::default());
    assert_eq!(m.events.len(), 2);
    let (_, peak_truth) = max_of(&|t| rlc.v(t), 0.0, 2e-4, 2000);
    for e in &m.events {
        assert!(e.peak_v > 100.0 && e.peak_v < 1000.0, "peak {}", e.peak_v);
        assert!((e.peak_v - peak_truth).abs() / peak_truth < 0.005);
        let w = e.spike_width_s.unwrap();
        assert!(w > 10e-6 && w < 100e-6, "width {w}");
        // The first lobe ends where the node comes back through the supply.
        let t50 = first_crossing(&|t| rlc.v(t), 12.0, 0.0, 1e-4, 1000).unwrap();
        let truth = rlc.first_lobe_end_s() - t50;
        let decay = e.decay_time_s.unwrap();
        assert!(
            (decay - truth).abs() / truth < 0.02,
            "decay {decay} vs {truth}"
        );
    }
}

#[test]
fn parasitic_ring_on_a_diode_plateau_is_kept_apart() {
    // Invented scenario: a diode plateau with a fast ring (2 MHz, 5 V, decaying in 2 us)
    // where the node meets the clamp; the fast ring dominates, so it is the one reported
    // and named parasitic, and the plateau still sets the decay.
    let d = DiodeClamp {
        vs: 24.0,
        vf: 0.8,
        i0: 0.12,
        l: 0.1,
        r: 200.0,
        rise_s: 0.1e-6,
    };
    let f_par = 2e6;
    let shape = |t: f64| {
        let base = d.v(t);
        if t > d.rise_s {
            let s = t - d.rise_s;
            base + 5.0 * (-s / 2e-6).exp() * (2.0 * std::f64::consts::PI * f_par * s).sin()
        } else {
            base
        }
    };
    let dt = 10e-9;
    let mut rng = Rng::new(17);
    let tr = train(&|_, t| shape(t), 3, 1e-3, 2.5e-3, dt, &mut rng);
    let m = measure(&tr.v, dt, &MeasureOptions::default());
    assert_eq!(m.events.len(), 3, "{:?}", m.warnings);
    let t50 = d.rise_s * 12.0 / 24.8;
    let truth = d.rise_s + d.plateau_s() - t50;
    for e in &m.events {
        assert_eq!(
            e.ring_kind,
            Some(kickscan::measure::RingKind::Parasitic),
            "{e:?}"
        );
        let f = e.ring_freq_hz.unwrap();
        assert!((f - f_par).abs() / f_par < 0.005, "ring {f}");
        let decay = e.decay_time_s.unwrap();
        assert!(
            (decay - truth).abs() / truth < 0.02,
            "decay {decay} vs {truth}"
        );
    }
}
