//! Per-event model fits on invented waveforms made from formulas: a free ring, a clamp
//! plateau that decays, a clipped spike of either polarity, and bad input.

use kickscan::capture::AdcRange;
use kickscan::measure::{Event, Polarity};
use kickscan::model::ringfit::damped_sine;
use kickscan::model::{apply_fit, fit_event, FitCurve, ModelContext};

const DT_S: f64 = 2e-9;

/// Deterministic, roughly Gaussian noise (LCG with Knuth's MMIX constants, 12 uniforms).
fn noise(n: usize, sigma: f64, seed: u64) -> Vec<f64> {
    let mut s = seed;
    (0..n)
        .map(|_| {
            let mut sum = 0.0;
            for _ in 0..12 {
                s = s
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                sum += (s >> 11) as f64 / (1u64 << 53) as f64;
            }
            sigma * (sum - 6.0)
        })
        .collect()
}

/// Natural response of a node with undamped frequency `f0_hz` and damping `zeta`, driven
/// by `i0_a` into `c_f` from `v_off` at t = 200 samples; on-state `v_on` before.
fn ring_event(
    v_on: f64,
    v_off: f64,
    f0_hz: f64,
    zeta: f64,
    i0_a: f64,
    c_f: f64,
    sign: f64,
) -> Vec<f64> {
    let w0 = std::f64::consts::TAU * f0_hz;
    let wd = w0 * (1.0 - zeta * zeta).sqrt();
    let b = sign * i0_a / (c_f * wd);
    let nz = noise(6000, 0.3, 42);
    (0..6000)
        .map(|i| {
            let t = (i as f64 - 200.0) * DT_S;
            let v = if t < 0.0 {
                v_on
            } else {
                damped_sine([0.0, b, zeta * w0, wd, v_off], t)
            };
            v + nz[i]
        })
        .collect()
}

fn event_for(v: &[f64], v_on: f64, v_off: f64, polarity: Polarity, clipped: bool) -> Event {
    let peak = match polarity {
        Polarity::Up => v.iter().copied().fold(f64::MIN, f64::max),
        Polarity::Down => v.iter().copied().fold(f64::MAX, f64::min),
    };
    Event {
        t_edge_s: 200.0 * DT_S,
        polarity,
        v_on,
        v_off,
        peak_v: peak,
        clipped,
        ..Event::default()
    }
}

#[test]
fn free_ring_gets_a_damped_sine_and_the_capacitance() {
    // f0 = 5 MHz, zeta = 0.08, C = 200 pF: with L = 1 / ((2 pi f0)^2 C) = 5.066 uH given,
    // the fit must return C within 1 % (the waveform is made from those values).
    let c = 200e-12;
    let f0 = 5e6;
    let l = 1.0 / ((std::f64::consts::TAU * f0).powi(2) * c);
    let v = ring_event(0.2, 24.0, f0, 0.08, 2.0, c, 1.0);
    let mut ev = event_for(&v, 0.2, 24.0, Polarity::Up, false);
    let ctx = ModelContext {
        inductance_h: Some(l),
        ..ModelContext::default()
    };
    let fit = fit_event(&v, DT_S, 0.0, &ev, &ctx).unwrap();
    apply_fit(&mut ev, &fit, &ctx);
    assert_eq!(ev.fit_model.as_deref(), Some("damped_sine"));
    assert!(
        (ev.damping_ratio.unwrap() - 0.08).abs() < 0.002,
        "{:?}",
        ev.damping_ratio
    );
    assert!(
        (ev.c_par_f.unwrap() / c - 1.0).abs() < 0.01,
        "{:?}",
        ev.c_par_f
    );
    assert!((ev.q_factor.unwrap() - 6.25).abs() < 0.2);
    assert!(ev.fit_rms_v.unwrap() < 0.4);
    assert!(
        ev.peak_v_est.is_none(),
        "no estimate for an unclipped event"
    );
}

/// A clamp that holds the troughs a few volts past the rail (flat at -4 V here, as a
/// diode at a large current or a zener might) is still a clamp: the fit leaves the flat
/// troughs out and follows the free ring between them. Taking any swing more than 1.6 V
/// past the body diode's clip level for a ring no diode holds, the fit ran through the
/// flat troughs (residuals of 17 V on a 250 V spike, found on the benchmark's captures).
/// The same ring with nothing holding its troughs (they reach -190 V) drops the clip level
/// and is fitted whole, from the spike on.
#[test]
fn troughs_held_a_few_volts_out_stay_clipped() {
    let c = 200e-12;
    let f0 = 5e6;
    let free = ring_event(0.2, 24.0, f0, 0.08, 2.0, c, 1.0);
    let lowest = free.iter().copied().fold(f64::INFINITY, f64::min);
    assert!(lowest < -150.0, "{lowest}");
    let held: Vec<f64> = free.iter().map(|&x| x.max(-4.0)).collect();
    let ctx = ModelContext {
        clip_level_v: Some(-0.4),
        ..ModelContext::default()
    };
    for (v, what) in [(&held, "held"), (&free, "free")] {
        let mut ev = event_for(v, 0.2, 24.0, Polarity::Up, false);
        let fit = fit_event(v, DT_S, 0.0, &ev, &ctx).unwrap();
        apply_fit(&mut ev, &fit, &ctx);
        assert_eq!(ev.fit_model.as_deref(), Some("damped_sine"), "{what}");
        // The noise is 0.3 V: a fit that follows the ring leaves about that.
        let rms = ev.fit_rms_v.unwrap();
        assert!(rms < 0.5, "{what}: residuals {rms} V");
        let f = ev.ring_freq_hz.unwrap();
        let fd = f0 * (1.0f64 - 0.08 * 0.08).sqrt();
        assert!((f / fd - 1.0).abs() < 0.01, "{what}: {f} Hz vs {fd}");
    }
}

#[test]
fn clamp_plateau_gets_an_exponential() {
    // A zener-like clamp: the node holds 36.7 V for 2 us, then falls to 24 V with a 300 ns
    // time constant and no ringing.
    let nz = noise(4000, 0.05, 3);
    let v: Vec<f64> = (0..4000)
        .map(|i| {
            let t = (i as f64 - 200.0) * DT_S;
            let x = if t < 0.0 {
                0.2
            } else if t < 2e-6 {
                36.7
            } else {
                24.0 + 12.7 * (-(t - 2e-6) / 300e-9).exp()
            };
            x + nz[i]
        })
        .collect();
    let mut ev = event_for(&v, 0.2, 24.0, Polarity::Up, false);
    let ctx = ModelContext::default();
    let fit = fit_event(&v, DT_S, 0.0, &ev, &ctx).unwrap();
    let FitCurve::Exponential(e) = &fit.curve else {
        panic!("expected an exponential, got {:?}", fit.curve)
    };
    assert!((e.tau_s / 300e-9 - 1.0).abs() < 0.05, "tau {}", e.tau_s);
    assert!(
        fit.fit_start_s >= 2.0e-6 + 200.0 * DT_S - 10.0 * DT_S,
        "fit starts after the plateau"
    );
    ev.damping_ratio = None;
    apply_fit(&mut ev, &fit, &ctx);
    assert_eq!(ev.fit_model.as_deref(), Some("exponential"));
    assert!(ev.damping_ratio.is_none() && ev.ring_alpha.is_none());
}

#[test]
fn clipped_spike_is_reconstructed_for_both_polarities() {
    for (sign, pol) in [(1.0, Polarity::Up), (-1.0, Polarity::Down)] {
        let (v_on, v_off) = if sign > 0.0 { (0.2, 24.0) } else { (23.8, 0.0) };
        let clean = ring_event(v_on, v_off, 2e6, 0.06, 1.5, 330e-12, sign);
        let true_peak = if sign > 0.0 {
            clean.iter().copied().fold(f64::MIN, f64::max)
        } else {
            clean.iter().copied().fold(f64::MAX, f64::min)
        };
        // The rail at 70 % of the spike; the body diode clips the opposite swing at
        // -0.7 V (low side) or supply + 0.7 V (high side).
        let rail = v_off + 0.7 * (true_peak - v_off);
        let body = if sign > 0.0 { -0.7 } else { 24.7 };
        let v: Vec<f64> = clean
            .iter()
            .map(|&x| {
                if sign > 0.0 {
                    x.min(rail).max(body)
                } else {
                    x.max(rail).min(body)
                }
            })
            .collect();
        let (lo, hi) = if sign > 0.0 {
            (-400.0, rail)
        } else {
            (rail, 400.0)
        };
        let ctx = ModelContext {
            adc: Some(AdcRange {
                min_v: lo,
                max_v: hi,
                step_v: None,
            }),
            clip_level_v: Some(if sign > 0.0 { -0.5 } else { 24.5 }),
            ..ModelContext::default()
        };
        let mut ev = event_for(&v, v_on, v_off, pol, true);
        let fit = fit_event(&v, DT_S, 0.0, &ev, &ctx).unwrap();
        apply_fit(&mut ev, &fit, &ctx);
        let est = ev.peak_v_est.unwrap();
        let err = (est - true_peak) / (true_peak - v_off);
        assert!(err.abs() < 0.03, "{pol:?}: estimate {est} vs {true_peak}");
        let (l, u) = (ev.peak_v_est_lower.unwrap(), ev.peak_v_est_upper.unwrap());
        assert!(l <= est && est <= u);
        assert!(fit.n_left_out > 0);
    }
}

#[test]
fn bad_input_gives_none_not_a_panic() {
    let ev = Event::default();
    let ctx = ModelContext::default();
    assert!(fit_event(&[], DT_S, 0.0, &ev, &ctx).is_none());
    assert!(fit_event(&[1.0; 100], 0.0, 0.0, &ev, &ctx).is_none());
    assert!(fit_event(&[f64::NAN; 100], DT_S, 0.0, &ev, &ctx).is_none());
    assert!(fit_event(&[5.0; 100], DT_S, 0.0, &ev, &ctx).is_none());
    let far = Event {
        t_edge_s: 1e9,
        clipped: true,
        ..Event::default()
    };
    let v: Vec<f64> = (0..500).map(|i| (i as f64 * 0.3).sin()).collect();
    let _ = fit_event(&v, DT_S, -1e9, &far, &ctx);
    let _ = fit_event(&v, f64::INFINITY, 0.0, &far, &ctx);
    let _ = kickscan::model::measure_ring(&[f64::NAN; 40], DT_S, &ctx);
}

mod fuzz {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(200))]
        /// Any window, edge time, polarity, clip flag and ranges: a result or None, never a
        /// panic, and never a NaN written into the event.
        #[test]
        fn fit_event_never_panics(
            v in proptest::collection::vec(prop_oneof![-1e3f64..1e3, Just(f64::NAN), Just(5.0)], 0..400),
            t_edge in -1e-6f64..2e-6,
            up in any::<bool>(),
            clipped in any::<bool>(),
            rail in proptest::option::of(-10f64..500.0),
            clip_level in proptest::option::of(-5f64..5.0),
        ) {
            let ev = Event {
                t_edge_s: t_edge,
                polarity: if up { Polarity::Up } else { Polarity::Down },
                v_off: 12.0,
                clipped,
                ..Event::default()
            };
            let ctx = ModelContext {
                inductance_h: Some(1e-3),
                adc: rail.map(|r| AdcRange { min_v: -r.abs() - 1.0, max_v: r, step_v: None }),
                clip_level_v: clip_level,
                body_diode_v: None,
            };
            if let Some(fit) = fit_event(&v, 5e-9, 0.0, &ev, &ctx) {
                let mut e = ev.clone();
                apply_fit(&mut e, &fit, &ctx);
                for x in [e.ring_alpha, e.damping_ratio, e.q_factor, e.fit_rms_v, e.c_par_f, e.peak_v_est, e.peak_v_est_lower, e.peak_v_est_upper].into_iter().flatten() {
                    prop_assert!(!x.is_nan());
                }
            }
            let _ = kickscan::model::measure_ring(&v, 5e-9, &ctx);
        }

        /// Rings of any frequency, damping and clip fraction: no panic, no NaN.
        #[test]
        fn fit_event_on_rings_never_panics(
            f0 in 1e4f64..5e7,
            zeta in 0.0f64..1.5,
            amp in 0.1f64..1e3,
            frac in 0.3f64..1.2,
            seed in any::<u64>(),
        ) {
            let w0 = std::f64::consts::TAU * f0;
            let wd = w0 * (1.0 - zeta.min(0.999) * zeta.min(0.999)).sqrt();
            let nz = noise(3000, 0.01 * amp, seed);
            let rail = 12.0 + frac * amp;
            let v: Vec<f64> = (0..3000)
                .map(|i| {
                    let t = (i as f64 - 100.0) * DT_S;
                    let x = if t < 0.0 { 0.1 } else { damped_sine([0.0, amp, zeta * w0, wd, 12.0], t) };
                    (x + nz[i]).min(rail)
                })
                .collect();
            let ev = Event { t_edge_s: 100.0 * DT_S, v_off: 12.0, clipped: frac < 1.0, ..Event::default() };
            let ctx = ModelContext {
                adc: Some(AdcRange { min_v: -1e4, max_v: rail, step_v: None }),
                ..ModelContext::default()
            };
            if let Some(fit) = fit_event(&v, DT_S, 0.0, &ev, &ctx) {
                let mut e = ev.clone();
                apply_fit(&mut e, &fit, &ctx);
                for x in [e.ring_alpha, e.damping_ratio, e.q_factor, e.fit_rms_v, e.peak_v_est, e.peak_v_est_lower, e.peak_v_est_upper].into_iter().flatten() {
                    prop_assert!(x.is_finite());
                }
            }
        }
    }
}
