//! Properties the measurements must have whatever the coil, on analytic captures: the series
//! RLC natural response of a low-side switch opening a coil (Nilsson & Riedel, Electric
//! Circuits, ch. 8; formula in common/waveforms.rs), troughs held at -0.7 V by the switch's
//! body diode (common practice), two events per capture at sub-sample instants.
//!
//! - scaling the voltage by k scales every voltage field by k and leaves times alone;
//! - shifting the time base shifts `t_edge_s` only;
//! - mirroring about the supply (v -> Vs - v) turns the low-side capture into a high-side
//!   one (polarity down) with the same switch stress, times and energies;
//! - adding a constant moves the levels and the peak by that constant, nothing else;
//! - sampling twice as fast keeps the ring frequency within 0.5 %.

mod common;

use common::waveforms::{train, Rlc, Rng};
use kickscan::measure::{
    measure_trace, CaptureMeasurement, CurrentThrough, Event, MeasureOptions, Polarity, Trace,
};
use proptest::prelude::*;

/// Forward drop of the switch's body diode (common practice: about 0.7 V for silicon).
const DIODE_V: f64 = 0.7;

/// A coil and how it is sampled.
#[derive(Debug, Clone, Copy)]
struct Case {
    coil: Rlc,
    samples_per_period: f64,
    seed: u64,
}

fn case() -> impl Strategy<Value = Case> {
    (
        12.0..48.0f64,
        0.05..0.5f64,
        1e-3..20e-3f64,
        100e-12..2e-9f64,
        0.03..0.2f64,
        30.0..60.0f64,
        any::<u64>(),
    )
        .prop_map(|(vs, i0, l, c, zeta, spp, seed)| {
            // R from the damping ratio: zeta = alpha / w0 = (R / 2L) sqrt(LC).
            let r = 2.0 * zeta * (l / c).sqrt();
            Case {
                coil: Rlc { vs, i0, l, r, c },
                samples_per_period: spp,
                seed,
            }
        })
}

/// Voltage and coil current of two events: 30 ring periods on at 0 V, 60 off.
struct Capture {
    v: Vec<f64>,
    i: Vec<f64>,
    dt_s: f64,
}

fn capture(c: &Case, dt_divisor: f64) -> Capture {
    let period = 1.0 / c.coil.ring_hz();
    let dt_s = period / c.samples_per_period / dt_divisor;
    let (on_s, off_s) = (30.0 * period, 60.0 * period);
    let coil = c.coil;
    let v = train(
        &|_, t| coil.v(t).max(-DIODE_V),
        2,
        on_s,
        off_s,
        dt_s,
        &mut Rng::new(c.seed),
    )
    .v;
    // The same seed gives the same opening instants.
    let i = train(
        &|_, t| coil.i(t),
        2,
        on_s,
        off_s,
        dt_s,
        &mut Rng::new(c.seed),
    )
    .v;
    Capture { v, i, dt_s }
}

fn measure(
    v: &[f64],
    i: &[f64],
    dt_s: f64,
    t0_s: f64,
    through: CurrentThrough,
) -> CaptureMeasurement {
    let trace = Trace {
        v,
        i: Some(i),
        dt_s,
        t0_s,
        adc: None,
    };
    let opts = MeasureOptions {
        current_through: through,
        ..MeasureOptions::default()
    };
    measure_trace(&trace, &opts).expect("an analytic capture measures")
}

/// Fields that are voltages (or voltage times something fixed): they scale with the signal.
fn scaled(e: &Event) -> Vec<(&'static str, Option<f64>)> {
    vec![
        ("v_on", Some(e.v_on)),
        ("v_off", Some(e.v_off)),
        ("peak_v", Some(e.peak_v)),
        ("switch_stress_v", Some(e.switch_stress_v)),
        ("overshoot_v", Some(e.overshoot_v)),
        ("slew_v_per_s", e.slew_v_per_s),
        ("volt_seconds", Some(e.volt_seconds)),
        ("settle_band_v", e.settle_band_v),
        ("energy_j", e.energy_j),
        ("clamp_energy_j", e.clamp_energy_j),
        ("energy_to_peak_j", e.energy_to_peak_j),
    ]
}

/// Fields that are times after the edge, frequencies, ratios: unchanged by scaling and
/// shifting the voltage or the time base.
fn invariant(e: &Event) -> Vec<(&'static str, Option<f64>)> {
    vec![
        ("t_peak_s", Some(e.t_peak_s)),
        ("rise_time_s", e.rise_time_s),
        ("spike_width_s", e.spike_width_s),
        ("decay_time_s", e.decay_time_s),
        ("ring_freq_hz", e.ring_freq_hz),
        ("damping_ratio", e.damping_ratio),
        ("settle_time_s", e.settle_time_s),
        ("overshoot_pct", e.overshoot_pct),
        ("window_s", Some(e.window_s)),
    ]
}

/// `a` and `b` agree to `rel` of their size (or `abs`), both present or both absent.
fn close(
    what: &str,
    a: Option<f64>,
    b: Option<f64>,
    rel: f64,
    abs: f64,
) -> Result<(), TestCaseError> {
    match (a, b) {
        (None, None) => Ok(()),
        (Some(x), Some(y)) => {
            let tol = rel * x.abs().max(y.abs()) + abs;
            prop_assert!((x - y).abs() <= tol, "{what}: {x} vs {y} (tolerance {tol})");
            Ok(())
        }
        _ => Err(TestCaseError::fail(format!("{what}: {a:?} vs {b:?}"))),
    }
}

fn same_events(a: &CaptureMeasurement, b: &CaptureMeasurement) -> Result<(), TestCaseError> {
    prop_assert_eq!(a.events.len(), b.events.len(), "event count");
    prop_assert_eq!(a.events.len(), 2, "two events");
    // The analytic ring is always there to find, so no field passes by being absent.
    for e in a.events.iter().chain(&b.events) {
        prop_assert!(
            e.ring_freq_hz.is_some() && e.damping_ratio.is_some(),
            "ring found"
        );
    }
    Ok(())
}

/// Relative tolerance of quantities that are the same computation on scaled numbers:
/// rounding only.
const REL: f64 = 1e-9;

proptest! {
    #![proptest_config(ProptestConfig { cases: 16, ..ProptestConfig::default() })]

    #[test]
    fn scaling_the_voltage_scales_voltages_only(c in case(), k in 0.1..20.0f64) {
        let cap = capture(&c, 1.0);
        let vk: Vec<f64> = cap.v.iter().map(|x| x * k).collect();
        let a = measure(&cap.v, &cap.i, cap.dt_s, 0.0, CurrentThrough::Switch);
        let b = measure(&vk, &cap.i, cap.dt_s, 0.0, CurrentThrough::Switch);
        same_events(&a, &b)?;
        for (ea, eb) in a.events.iter().zip(&b.events) {
            prop_assert_eq!(ea.polarity, eb.polarity);
            prop_assert_eq!((ea.clipped, ea.undersampled, ea.truncated), (eb.clipped, eb.undersampled, eb.truncated));
            close("t_edge_s", Some(ea.t_edge_s), Some(eb.t_edge_s), REL, 0.0)?;
            for ((name, x), (_, y)) in scaled(ea).into_iter().zip(scaled(eb)) {
                close(name, x.map(|x| x * k), y, REL, 1e-12)?;
            }
            for ((name, x), (_, y)) in invariant(ea).into_iter().zip(invariant(eb)) {
                close(name, x, y, REL, 0.0)?;
            }
        }
    }

    #[test]
    fn shifting_time_moves_the_edge_only(c in case(), shift_s in -1.0..1.0f64) {
        let cap = capture(&c, 1.0);
        let a = measure(&cap.v, &cap.i, cap.dt_s, 0.0, CurrentThrough::Switch);
        let b = measure(&cap.v, &cap.i, cap.dt_s, shift_s, CurrentThrough::Switch);
        same_events(&a, &b)?;
        for (ea, eb) in a.events.iter().zip(&b.events) {
            // The edge time carries the shift's rounding: 1e-15 of a second-sized number.
            close("t_edge_s", Some(ea.t_edge_s + shift_s), Some(eb.t_edge_s), 0.0, 1e-3 * cap.dt_s)?;
            for ((name, x), (_, y)) in scaled(ea).into_iter().zip(scaled(eb)) {
                close(name, x, y, REL, 0.0)?;
            }
            for ((name, x), (_, y)) in invariant(ea).into_iter().zip(invariant(eb)) {
                // Times after the edge are differences of shifted times: rounding of the
                // shift, far below a sample.
                close(name, x, y, REL, 1e-3 * cap.dt_s)?;
            }
        }
    }

    #[test]
    fn mirroring_about_the_supply_gives_the_high_side_event(c in case()) {
        let cap = capture(&c, 1.0);
        let vs = c.coil.vs;
        let mirrored: Vec<f64> = cap.v.iter().map(|x| vs - x).collect();
        for through in [CurrentThrough::Switch, CurrentThrough::Coil] {
            let a = measure(&cap.v, &cap.i, cap.dt_s, 0.0, through);
            let b = measure(&mirrored, &cap.i, cap.dt_s, 0.0, through);
            same_events(&a, &b)?;
            prop_assert_eq!(a.polarity, Polarity::Up);
            prop_assert_eq!(b.polarity, Polarity::Down);
            for (ea, eb) in a.events.iter().zip(&b.events) {
                // The histogram bins are laid from the bottom of the range up, so the
                // mirrored record's levels land elsewhere in their bins; measure_trace then
                // keeps a level that differs from the local one by less than 1e-4 of the step
                // (its refinement threshold on a noise-free record). Levels agree to that plus
                // one bin (1e-5 of the range), and level-relative figures inherit it.
                let step = (ea.v_off - ea.v_on).abs();
                let range = ea.peak_v + DIODE_V;
                let lv = 1e-4 * step + 1e-5 * range;
                close("v_on", Some(vs - ea.v_on), Some(eb.v_on), 0.0, lv)?;
                close("v_off", Some(vs - ea.v_off), Some(eb.v_off), 0.0, lv)?;
                close("peak_v", Some(vs - ea.peak_v), Some(eb.peak_v), 1e-12, 0.0)?;
                close("switch_stress_v", Some(ea.switch_stress_v), Some(eb.switch_stress_v), 0.0, lv)?;
                close("overshoot_v", Some(ea.overshoot_v), Some(eb.overshoot_v), 0.0, lv)?;
                close("slew_v_per_s", ea.slew_v_per_s, eb.slew_v_per_s, 1e-9, 0.0)?;
                // Signed as measured: the mirrored event's area is below its off level; an
                // off level moved by lv moves the area by lv over the window.
                close("volt_seconds", Some(-ea.volt_seconds), Some(eb.volt_seconds), 1e-9, lv * ea.window_s)?;
                for (name, x, y) in [
                    ("energy_j", ea.energy_j, eb.energy_j),
                    ("clamp_energy_j", ea.clamp_energy_j, eb.clamp_energy_j),
                    ("energy_to_peak_j", ea.energy_to_peak_j, eb.energy_to_peak_j),
                ] {
                    close(name, x, y, 1e-3, 1e-15)?;
                }
                close("t_edge_s", Some(ea.t_edge_s), Some(eb.t_edge_s), 0.0, 0.01 * cap.dt_s)?;
                for ((name, x), (_, y)) in invariant(ea).into_iter().zip(invariant(eb)) {
                    close(name, x, y, 1e-3, 0.05 * cap.dt_s)?;
                }
            }
        }
    }

    #[test]
    fn adding_a_constant_moves_levels_and_peak(c in case(), offset_v in -50.0..50.0f64) {
        let cap = capture(&c, 1.0);
        let moved: Vec<f64> = cap.v.iter().map(|x| x + offset_v).collect();
        let a = measure(&cap.v, &cap.i, cap.dt_s, 0.0, CurrentThrough::Coil);
        let b = measure(&moved, &cap.i, cap.dt_s, 0.0, CurrentThrough::Coil);
        same_events(&a, &b)?;
        for (ea, eb) in a.events.iter().zip(&b.events) {
            let tol = 1e-9 * (ea.switch_stress_v + offset_v.abs());
            close("v_on", Some(ea.v_on + offset_v), Some(eb.v_on), 0.0, tol)?;
            close("v_off", Some(ea.v_off + offset_v), Some(eb.v_off), 0.0, tol)?;
            close("peak_v", Some(ea.peak_v + offset_v), Some(eb.peak_v), 0.0, tol)?;
            close("overshoot_v", Some(ea.overshoot_v), Some(eb.overshoot_v), 0.0, tol)?;
            close("slew_v_per_s", ea.slew_v_per_s, eb.slew_v_per_s, 1e-9, 0.0)?;
            close("volt_seconds", Some(ea.volt_seconds), Some(eb.volt_seconds), 1e-9, tol * cap.dt_s)?;
            close("clamp_energy_j", ea.clamp_energy_j, eb.clamp_energy_j, 1e-9, 1e-18)?;
            close("t_edge_s", Some(ea.t_edge_s), Some(eb.t_edge_s), 0.0, 1e-6 * cap.dt_s)?;
            for ((name, x), (_, y)) in invariant(ea).into_iter().zip(invariant(eb)) {
                close(name, x, y, 1e-9, 1e-6 * cap.dt_s)?;
            }
        }
    }

    #[test]
    fn sampling_twice_as_fast_keeps_the_ring_frequency(c in case()) {
        let slow = capture(&c, 1.0);
        let fast = capture(&c, 2.0);
        let a = measure(&slow.v, &slow.i, slow.dt_s, 0.0, CurrentThrough::Switch);
        let b = measure(&fast.v, &fast.i, fast.dt_s, 0.0, CurrentThrough::Switch);
        same_events(&a, &b)?;
        for (ea, eb) in a.events.iter().zip(&b.events) {
            let (fa, fb) = (ea.ring_freq_hz, eb.ring_freq_hz);
            prop_assert!(fa.is_some() && fb.is_some(), "ring found: {fa:?} {fb:?}");
            close("ring_freq_hz", fa, fb, 0.005, 0.0)?;
            // And both near the analytic damped frequency (same tolerance).
            close("ring_freq_hz vs analytic", fa, Some(c.coil.ring_hz()), 0.005, 0.0)?;
        }
    }
}
