//! Accuracy on synthetic captures with a known truth: 40 events each, noise 0.5 % of the
//! ADC range and an 8-bit grid (invented scenarios; truth from the formulas in
//! tests/common/waveforms.rs). Each test prints the worst errors it saw.

mod common;

use common::waveforms::{digitise, first_crossing, max_of, train, DiodeClamp, Rlc, Rng};
use kickscan::capture::AdcRange;
use kickscan::measure::{measure_trace, CaptureMeasurement, MeasureOptions, Trace};

const N_EVENTS: usize = 40;

fn measure(v: &[f64], dt: f64, adc: Option<AdcRange>) -> CaptureMeasurement {
    let trace = Trace {
        v,
        i: None,
        dt_s: dt,
        t0_s: 0.0,
        adc,
    };
    let m = measure_trace(&trace, &MeasureOptions::default()).expect("measurable");
    println!("warnings: {:?}", m.warnings);
    // None of these scenarios has two overlapping rings.
    assert!(
        !m.warnings.iter().any(|w| w.contains("two rings")),
        "{:?}",
        m.warnings
    );
    m
}

/// A small relay coil switched off with nothing across it; `scale[k]` sets event k's
/// coil current (spread so peaks differ).
fn relay(i0: f64) -> Rlc {
    Rlc {
        vs: 24.0,
        i0,
        l: 0.1,
        r: 200.0,
        c: 10e-9,
    }
}

fn currents(rng: &mut Rng) -> Vec<f64> {
    (0..N_EVENTS).map(|_| 0.08 + 0.04 * rng.uniform()).collect()
}

#[test]
fn unclamped_relay_noisy_8_bit() {
    let mut rng = Rng::new(2024);
    let i0s = currents(&mut rng);
    let dt = 1e-6;
    let mut tr = train(
        &|k, t| relay(i0s[k]).v(t),
        N_EVENTS,
        2e-3,
        6e-3,
        dt,
        &mut rng,
    );
    let (lo, hi) = (-40.0, 440.0);
    let sigma = 0.005 * (hi - lo);
    let step = digitise(&mut tr.v, sigma, 8, lo, hi, &mut rng);
    let m = measure(&tr.v, dt, None);
    assert_eq!(m.events.len(), N_EVENTS, "{:?}", m.warnings);
    let (mut e_peak, mut e_ring, mut e_edge) = (0f64, 0f64, 0f64);
    for (e, (&t_open, &i0)) in m.events.iter().zip(tr.t_open_s.iter().zip(&i0s)) {
        let rlc = relay(i0);
        let (_, peak) = max_of(&|t| rlc.v(t), 0.0, 2e-4, 2000);
        let allowed = (0.005 * peak).max(3.0 * sigma + step);
        assert!(
            (e.peak_v - peak).abs() <= allowed,
            "event {}: peak {} vs {peak}",
            e.index,
            e.peak_v
        );
        e_peak = e_peak.max((e.peak_v - peak).abs() / peak);
        let f = e.ring_freq_hz.expect("ring");
        e_ring = e_ring.max((f - rlc.ring_hz()).abs() / rlc.ring_hz());
        let t50 = t_open + first_crossing(&|t| rlc.v(t), 12.0, 0.0, 1e-4, 1000).unwrap();
        e_edge = e_edge.max((e.t_edge_s - t50).abs());
        assert!(!e.clipped);
    }
    println!(
        "unclamped noisy: worst peak error {:.3} %, ring {:.3} %, edge time {:.2e} s",
        e_peak * 100.0,
        e_ring * 100.0,
        e_edge
    );
    assert!(e_ring < 0.005, "ring frequency error {e_ring}");
}

#[test]
fn unclamped_relay_clean_settle_and_decay() {
    let mut rng = Rng::new(99);
    let i0s = currents(&mut rng);
    let dt = 1e-6;
    let tr = train(
        &|k, t| relay(i0s[k]).v(t),
        N_EVENTS,
        2e-3,
        9e-3,
        dt,
        &mut rng,
    );
    let m = measure(&tr.v, dt, None);
    assert_eq!(m.events.len(), N_EVENTS);
    let (mut e_settle, mut e_decay) = (0f64, 0f64);
    for (e, &i0) in m.events.iter().zip(&i0s) {
        let rlc = relay(i0);
        let t50 = first_crossing(&|t| rlc.v(t), 12.0, 0.0, 1e-4, 1000).unwrap();
        let decay = rlc.first_lobe_end_s() - t50;
        // Settled: the last time |v - Vs| exceeds 5 % of the 24 V step (found backwards).
        let band = 0.05 * 24.0;
        let mut t = 9e-3;
        while t > 0.0 && (rlc.v(t) - 24.0).abs() <= band {
            t -= 1e-7;
        }
        let settle = t - t50;
        e_settle = e_settle.max((e.settle_time_s.unwrap() - settle).abs() / settle);
        e_decay = e_decay.max((e.decay_time_s.unwrap() - decay).abs() / decay);
        assert!(!e.truncated);
    }
    println!(
        "unclamped clean: worst settle error {:.3} %, decay {:.3} %",
        e_settle * 100.0,
        e_decay * 100.0
    );
    assert!(e_settle < 0.02 && e_decay < 0.02);
}

#[test]
fn snubber_slow_ring_makes_no_false_events() {
    // RC-snubber-like slow ring: 100 nF at the node, period about 630 us, swinging far
    // through the on level many times.
    let rlc = Rlc {
        vs: 24.0,
        i0: 0.12,
        l: 0.1,
        r: 200.0,
        c: 100e-9,
    };
    assert!(1.0 / rlc.ring_hz() > 300e-6);
    let mut rng = Rng::new(5);
    let dt = 2e-6;
    let mut tr = train(&|_, t| rlc.v(t), N_EVENTS, 5e-3, 8e-3, dt, &mut rng);
    let (lo, hi) = (-120.0, 180.0);
    digitise(&mut tr.v, 0.005 * (hi - lo), 8, lo, hi, &mut rng);
    let m = measure(&tr.v, dt, None);
    assert_eq!(m.events.len(), N_EVENTS, "{:?}", m.warnings);
    let mut e_ring = 0f64;
    for e in &m.events {
        let f = e.ring_freq_hz.expect("ring");
        e_ring = e_ring.max((f - rlc.ring_hz()).abs() / rlc.ring_hz());
    }
    println!(
        "snubber ring: worst ring frequency error {:.3} %",
        e_ring * 100.0
    );
    assert!(e_ring < 0.005);
}

#[test]
fn clipped_flags_exact_with_and_without_a_known_range() {
    // Every third event's current is raised so its peak (about 380 V) runs into a 300 V
    // rail; the others peak near 190 V.
    let mut rng = Rng::new(77);
    let i0s: Vec<f64> = (0..N_EVENTS)
        .map(|k| if k % 3 == 0 { 0.12 } else { 0.06 })
        .collect();
    let dt = 1e-6;
    let mut tr = train(
        &|k, t| relay(i0s[k]).v(t),
        N_EVENTS,
        2e-3,
        6e-3,
        dt,
        &mut rng,
    );
    let (lo, hi) = (-20.0, 300.0);
    let step = digitise(&mut tr.v, 0.005 * (hi - lo), 8, lo, hi, &mut rng);
    let adc = AdcRange {
        min_v: lo,
        max_v: hi,
        step_v: Some(step),
    };
    for range in [Some(adc), None] {
        let m = measure(&tr.v, dt, range);
        assert_eq!(m.events.len(), N_EVENTS);
        for e in &m.events {
            assert_eq!(
                e.clipped,
                e.index % 3 == 0,
                "event {} (range known: {})",
                e.index,
                range.is_some()
            );
        }
        // One warning line counts the clipped events.
        let expected = format!("{} event(s) clipped", N_EVENTS.div_ceil(3));
        assert!(
            m.warnings.iter().any(|w| w.contains(&expected)),
            "{:?}",
            m.warnings
        );
    }
}

#[test]
fn diode_and_zener_clamped_decay_is_the_plateau() {
    // A diode (0.8 V) or a diode plus 23 V zener across the coil: the node sits that far
    // above the supply while the coil current decays (same formula, clamp voltage Vf).
    for (vf, hi) in [(0.8, 28.0), (23.0, 52.0)] {
        let d = DiodeClamp {
            vs: 24.0,
            vf,
            i0: 0.12,
            l: 0.1,
            r: 200.0,
            rise_s: 2e-6,
        };
        plateau_case(d, hi);
    }
}

fn plateau_case(d: DiodeClamp, hi: f64) {
    let dt = 1e-6;
    let t50 = d.rise_s * 12.0 / (d.vs + d.vf);
    let truth = d.rise_s + d.plateau_s() - t50;
    let lo = -2.0;
    for noisy in [false, true] {
        let mut rng = Rng::new(31);
        let mut tr = train(&|_, t| d.v(t), N_EVENTS, 2e-3, 3e-3, dt, &mut rng);
        if noisy {
            digitise(&mut tr.v, 0.005 * (hi - lo), 8, lo, hi, &mut rng);
        }
        let m = measure(&tr.v, dt, None);
        assert_eq!(m.events.len(), N_EVENTS, "{:?}", m.warnings);
        let mut worst = 0f64;
        for e in &m.events {
            let decay = e.decay_time_s.expect("decay");
            worst = worst.max((decay - truth).abs() / truth);
        }
        println!(
            "clamp {} V plateau (noisy {noisy}): worst decay error {:.3} %",
            d.vf,
            worst * 100.0
        );
        assert!(worst < 0.02);
    }
}
