//! Options and channels that change what is measured: a current channel (energies, I0,
//! the slope capacitance), a high-side switch, supply and rating warnings, the window
//! limit. Waveforms are the analytic series RLC response of tests/common/waveforms.rs.

mod common;

use common::waveforms::{max_of, Rlc, Rng};
use kickscan::measure::{measure_trace, CurrentThrough, MeasureOptions, Polarity, RingKind, Trace};

const DT: f64 = 0.5e-6;

fn relay() -> Rlc {
    Rlc {
        vs: 24.0,
        i0: 0.12,
        l: 0.1,
        r: 200.0,
        c: 10e-9,
    }
}

/// Two events of `relay()`: voltage and coil current (the switch current is I0 while on,
/// zero once open).
fn two_events(switch_probe: bool) -> (Vec<f64>, Vec<f64>) {
    let rlc = relay();
    let mut rng = Rng::new(1);
    let on = 2e-3;
    let off = 8e-3;
    let period = on + off;
    let n = ((2.0 * period + on) / DT) as usize;
    let opens: Vec<f64> = (0..2)
        .map(|k| k as f64 * period + on + rng.uniform() * DT)
        .collect();
    let (mut v, mut i) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for j in 0..n {
        let t = j as f64 * DT;
        let k = opens.partition_point(|&o| o <= t);
        let since = if k == 0 { -1.0 } else { t - opens[k - 1] };
        let (vv, ii) = if since < 0.0 || since >= off {
            (0.0, rlc.i0)
        } else if switch_probe {
            (rlc.v(since), 0.0)
        } else {
            (rlc.v(since), rlc.i(since))
        };
        v.push(vv);
        i.push(ii);
    }
    (v, i)
}

#[test]
fn coil_probe_gives_i0_energies_and_slope_capacitance() {
    let rlc = relay();
    let (v, i) = two_events(false);
    let opts = MeasureOptions {
        inductance_h: Some(rlc.l),
        current_through: CurrentThrough::Coil,
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: Some(&i),
        dt_s: DT,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 2);
    let (_, peak) = max_of(&|t| rlc.v(t), 0.0, 2e-4, 2000);
    for e in &m.events {
        assert!((e.i0_a.unwrap() - 0.12).abs() < 1e-9);
        // 1/2 L I0^2 = 0.5 * 0.1 * 0.12^2 = 0.72 mJ.
        assert!((e.coil_energy_j.unwrap() - 0.72e-3).abs() < 1e-9);
        // With i = C dv/dt, the integral of v i from the 50 % instant (12 V) to the peak is
        // C (Vpk^2 - 12^2) / 2 (energy in a capacitor).
        let want = 0.5 * rlc.c * (peak * peak - 144.0);
        let got = e.energy_to_peak_j.unwrap();
        assert!(
            (got - want).abs() / want < 0.01,
            "energy to peak {got} vs {want}"
        );
        assert!(e.clamp_energy_j.is_some() && e.energy_j.is_none());
        // Volt-seconds: the integral of v - Vs from the 50 % instant over the event
        // (trapezoid rule on the formula, 0.1 us steps).
        let t50 = common::waveforms::first_crossing(&|t| rlc.v(t), 12.0, 0.0, 1e-4, 1000).unwrap();
        let h = 1e-7;
        let steps = ((8e-3 - t50) / h) as usize;
        let vs_truth: f64 = (0..steps)
            .map(|k| {
                let t = t50 + k as f64 * h;
                0.5 * (rlc.v(t) + rlc.v(t + h)) - 24.0
            })
            .sum::<f64>()
            * h;
        assert!(
            (e.volt_seconds - vs_truth).abs() / vs_truth.abs() < 0.01,
            "{} vs {vs_truth}",
            e.volt_seconds
        );
        let c = e.c_par_slope_f.unwrap();
        assert!((c - rlc.c).abs() / rlc.c < 0.01, "slope capacitance {c}");
        let [lo, hi] = e.c_par_slope_range_v.unwrap();
        assert!(lo < hi && hi <= peak);
        let c_ring = e.c_par_f.unwrap();
        assert!(
            (c_ring - rlc.c).abs() / rlc.c < 0.01,
            "ring capacitance {c_ring}"
        );
        assert_eq!(e.ring_kind, Some(RingKind::Coil));
    }
}

/// A clamped event: the coil's current I0 charges the node capacitance C in a straight ramp
/// until the clamp takes it at Vc, and the node then sits on a noisy plateau while the
/// current runs down. The energy the first lobe put into the node capacitance is the
/// capacitor's, C (Vc^2 - V50^2) / 2 from the 50 % instant (textbook energy of a charged
/// capacitor; i = C dv/dt on the ramp): 4.0 uJ here. Integrated to the largest sample, a
/// noise maximum somewhere on the plateau, it counted the clamp's energy too (tens to
/// hundreds of microjoules, different on every shot).
#[test]
fn energy_to_peak_of_a_clamped_event_stops_where_the_clamp_takes_over() {
    // 4.7 nF: a ramp of 200 samples, so the sum's steps stay well inside the tolerance.
    let (c, i0, vc, vs): (f64, f64, f64, f64) = (4.7e-9, 0.1, 43.0, 24.0);
    let dt = 10e-9;
    let mut rng = Rng::new(7);
    let (mut v, mut i) = (Vec::new(), Vec::new());
    for _ in 0..2 {
        for _ in 0..100_000 {
            v.push(0.04 * rng.normal());
            i.push(i0);
        }
        let ramp = (vc * c / i0 / dt).ceil() as usize;
        for k in 0..ramp {
            v.push(i0 * k as f64 * dt / c);
            i.push(i0);
        }
        let plateau = 30_000;
        for k in 0..plateau {
            v.push(vc + 0.04 * rng.normal());
            i.push(i0 * (1.0 - k as f64 / plateau as f64));
        }
        for _ in 0..80_000 {
            v.push(vs + 0.04 * rng.normal());
            i.push(0.0);
        }
    }
    let opts = MeasureOptions {
        current_through: CurrentThrough::Coil,
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: Some(&i),
        dt_s: dt,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 2, "{:?}", m.warnings);
    let want = 0.5 * c * (vc * vc - (vs / 2.0) * (vs / 2.0));
    for e in &m.events {
        let got = e.energy_to_peak_j.unwrap();
        // 2 %: the sum's steps on the ramp (0.2 V each) and the first plateau sample.
        assert!((got - want).abs() < 0.02 * want, "{got} vs {want}");
    }
}

/// With `--supply`, the states are ground and the supply, and a stretch a conducting diode
/// holds past a rail is neither: a freewheel diode across the coil keeps the node about
/// 0.7 V above the supply until the coil current has gone, and in a short record that
/// stretch outnumbers the settled off state. Taken into the level near the supply it moved
/// the off level to 24.5 V, and with it the sign of the volt-seconds and most of the clamp
/// energy. Invented record: 3000 samples of diode tail (24.7 V falling to 24.45 V as the
/// current dies), 1500 settled at 24 V, 10 mV of noise.
#[test]
fn a_diode_tail_past_the_supply_is_not_the_off_level() {
    let mut rng = Rng::new(11);
    let mut v = Vec::new();
    for _ in 0..2 {
        v.extend((0..2000).map(|_| 0.01 * rng.normal()));
        v.extend((0..3000).map(|k| 24.7 - 0.25 * k as f64 / 3000.0 + 0.01 * rng.normal()));
        v.extend((0..1500).map(|_| 24.0 + 0.01 * rng.normal()));
    }
    let trace = Trace {
        v: &v,
        i: None,
        dt_s: 1e-6,
        t0_s: 0.0,
        adc: None,
    };
    let opts = MeasureOptions {
        supply_v: Some(24.0),
        ..MeasureOptions::default()
    };
    let m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 2, "{:?}", m.warnings);
    assert!((m.v_off - 24.0).abs() < 0.01, "off level {}", m.v_off);
    assert!(m.v_on.abs() < 0.01, "on level {}", m.v_on);
    // Found at once, not corrected afterwards by where the events settled (which a short
    // record need not show).
    assert!(
        m.warnings.iter().all(|w| !w.contains("off level")),
        "{:?}",
        m.warnings
    );
}

/// The slope capacitance from a coil probe at 40 samples a ring period, the switch opening
/// between two samples (12 V, 20 mH, 160 ohm, 330 pF: the analytic series RLC response,
/// common/waveforms.rs). Counting the current of the step the switch opened in, and
/// summing by rectangles, gave 363 pF; from the first sample past the crossing by the
/// trapezoid rule it is within 1 % of the 330 pF the waveform was made with.
#[test]
fn slope_capacitance_at_coarse_sampling() {
    let rlc = Rlc {
        vs: 12.0,
        i0: 0.075,
        l: 20e-3,
        r: 160.0,
        c: 330e-12,
    };
    let dt = 1.0 / rlc.ring_hz() / 40.0;
    let (on, off) = (1e-3, 3e-3);
    let period = on + off;
    let n = (2.0 * period / dt) as usize;
    let opens = [on + 0.3 * dt, period + on + 0.7 * dt];
    let (mut v, mut i) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for j in 0..n {
        let t = j as f64 * dt;
        // On for the first `on` of each period, then the response since the opening.
        let since = match opens.iter().rev().find(|&&o| o <= t) {
            Some(&o) if t - o < off - dt => t - o,
            _ => -1.0,
        };
        v.push(rlc.v(since));
        i.push(rlc.i(since));
    }
    let opts = MeasureOptions {
        inductance_h: Some(rlc.l),
        current_through: CurrentThrough::Coil,
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: Some(&i),
        dt_s: dt,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &opts).unwrap();
    assert_eq!(m.events.len(), 2, "{:?}", m.warnings);
    for e in &m.events {
        let c = e.c_par_slope_f.unwrap();
        assert!((c - rlc.c).abs() / rlc.c < 0.01, "slope capacitance {c}");
    }
}

#[test]
fn switch_probe_gives_the_switch_energy() {
    let (v, i) = two_events(true);
    let opts = MeasureOptions {
        current_through: CurrentThrough::Switch,
        ..MeasureOptions::default()
    };
    let trace = Trace {
        v: &v,
        i: Some(&i),
        dt_s: DT,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_trace(&trace, &opts).unwrap();
    for e in &m.events {
        // The switch carries nothing once open, so it absorbs (almost) nothing.
        assert!(e.energy_j.unwrap().abs() < 1e-9);
        assert!(e.clamp_energy_j.is_none());
        // Slope capacitance with I0 taken as the coil current over the first third of
        // the rise: the coil current falls by under 5 % there, so within 5 %.
        let c = e.c_par_slope_f.unwrap();
        assert!((c - 10e-9).abs() / 10e-9 < 0.05, "slope capacitance {c}");
    }
}

#[test]
fn high_side_switch_flies_below_ground() {
    // Mirror of the low-side case: the node sits at the supply while on, and 24 V minus the
    // low-side response once open.
    let rlc = relay();
    let (v_low, _) = two_events(false);
    let v: Vec<f64> = v_low.iter().map(|x| 24.0 - x).collect();
    let m = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: DT,
            t0_s: 0.0,
            adc: None,
        },
        &MeasureOptions::default(),
    )
    .unwrap();
    assert_eq!(m.polarity, Polarity::Down);
    assert_eq!(m.events.len(), 2);
    let (_, peak) = max_of(&|t| rlc.v(t), 0.0, 2e-4, 2000);
    for e in &m.events {
        assert!(
            (e.v_on - 24.0).abs() < 1e-3 && e.v_off.abs() < 1e-3,
            "{} {} {:?}",
            e.v_on,
            e.v_off,
            m.warnings
        );
        assert!((e.peak_v - (24.0 - peak)).abs() < 0.005 * peak);
        // Rail of a high-side switch is the supply: stress = |peak - 24|.
        assert!((e.switch_stress_v - peak).abs() < 0.005 * peak);
        assert!((e.ring_freq_hz.unwrap() - rlc.ring_hz()).abs() / rlc.ring_hz() < 0.002);
    }
}

#[test]
fn supply_and_rating_warnings_and_the_window_limit() {
    let (v, _) = two_events(false);
    let opts = MeasureOptions {
        supply_v: Some(27.0),
        rating_v: Some(60.0),
        max_window_s: Some(1e-3),
        ..MeasureOptions::default()
    };
    let m = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: DT,
            t0_s: 0.0,
            adc: None,
        },
        &opts,
    )
    .unwrap();
    assert!(
        m.warnings
            .iter()
            .any(|w| w.contains("differs from --supply 27 V")),
        "{:?}",
        m.warnings
    );
    // One line for the capture, counting the events over the rating.
    assert!(
        m.warnings
            .iter()
            .any(|w| w.contains("2 of 2 events exceed the rating 60 V")),
        "{:?}",
        m.warnings
    );
    for (e, &(a, b)) in m.events.iter().zip(&m.windows) {
        assert!(e.truncated);
        assert!((b - a) as f64 * DT <= 1e-3 + e.t_edge_s - a as f64 * DT + DT);
    }
}

#[test]
fn min_on_time_overrides_the_derived_dwell() {
    // The on states last 2 ms: a 1 ms dwell keeps both edges, a 3 ms one none.
    let (v, _) = two_events(false);
    let run = |t: f64| {
        let opts = MeasureOptions {
            min_on_time_s: Some(t),
            ..MeasureOptions::default()
        };
        measure_trace(
            &Trace {
                v: &v,
                i: None,
                dt_s: DT,
                t0_s: 0.0,
                adc: None,
            },
            &opts,
        )
        .unwrap()
        .events
        .len()
    };
    assert_eq!(run(1e-3), 2);
    assert_eq!(run(3e-3), 0);
}

#[test]
fn coarse_sampling_and_short_records_are_flagged() {
    // 20 us samples on a 200 us ring period give 10 per period but only about 3 across the
    // 66 us main lobe: undersampled (DESIGN.md: fewer than 10 across the lobe or a period).
    let rlc = relay();
    let dt = 20e-6;
    let mut v = vec![0.0; 200];
    v.extend((0..400).map(|k| rlc.v(k as f64 * dt + 0.3 * dt)));
    let m = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: dt,
            t0_s: 0.0,
            adc: None,
        },
        &MeasureOptions::default(),
    )
    .unwrap();
    assert_eq!(m.events.len(), 1);
    assert!(m.events[0].undersampled);
    // The record stops 1 ms after the opening, while the ring is still far outside the
    // settle band (380 V * exp(-1000 * 1 ms) = 140 V): truncated, no settle time. No off
    // state is in such a record, so the supply is given.
    let dt = 0.5e-6;
    let mut v = vec![0.0; 2000];
    v.extend((0..2000).map(|k| rlc.v(k as f64 * dt)));
    let opts = MeasureOptions {
        supply_v: Some(24.0),
        ..MeasureOptions::default()
    };
    let m = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: dt,
            t0_s: 0.0,
            adc: None,
        },
        &opts,
    )
    .unwrap();
    // Without the supply the record has no off state to find, and says so.
    let m0 = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: dt,
            t0_s: 0.0,
            adc: None,
        },
        &MeasureOptions::default(),
    )
    .unwrap();
    assert!(
        m0.warnings.iter().any(|w| w.contains("give --supply")),
        "{:?}",
        m0.warnings
    );
    // The ring's centre line puts the off level back on the supply.
    assert!((m.v_off - 24.0).abs() < 0.5, "{} {:?}", m.v_off, m.warnings);
    assert_eq!(m.events.len(), 1);
    assert!(m.events[0].truncated && m.events[0].settle_time_s.is_none());
    assert!(!m.events[0].undersampled);
}

#[test]
fn flat_signal_is_an_error_not_a_panic() {
    let v = vec![3.0; 1000];
    let r = measure_trace(
        &Trace {
            v: &v,
            i: None,
            dt_s: 1e-6,
            t0_s: 0.0,
            adc: None,
        },
        &MeasureOptions::default(),
    );
    assert!(r.is_err());
    let nan = vec![f64::NAN; 100];
    assert!(measure_trace(
        &Trace {
            v: &nan,
            i: None,
            dt_s: 1e-6,
            t0_s: 0.0,
            adc: None
        },
        &MeasureOptions::default()
    )
    .is_err());
}

mod no_panics {
    use kickscan::capture::AdcRange;
    use kickscan::measure::{measure_trace, CurrentThrough, MeasureOptions, Trace};
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(200))]

        #[test]
        fn any_samples_give_a_result_or_an_error(
            v in prop::collection::vec(any::<f64>(), 0..300),
            dt in any::<f64>(),
            window in prop::option::of(any::<f64>()),
            dwell in prop::option::of(any::<f64>()),
        ) {
            let i: Vec<f64> = v.iter().map(|x| x * 0.01).collect();
            let opts = MeasureOptions {
                max_window_s: window,
                min_on_time_s: dwell,
                inductance_h: Some(0.1),
                current_through: CurrentThrough::Coil,
                ..MeasureOptions::default()
            };
            let trace = Trace { v: &v, i: Some(&i), dt_s: dt, t0_s: 0.0, adc: None };
            let _ = measure_trace(&trace, &opts);
        }

        #[test]
        fn square_waves_with_spikes_and_noise_never_panic(
            levels in (-50.0f64..50.0, -50.0f64..50.0),
            spikes in prop::collection::vec((0usize..2000, -500.0f64..500.0), 0..20),
            noise in prop::collection::vec(-1.0f64..1.0, 2000),
            period in 4usize..400,
            step in prop::option::of(0.01f64..2.0),
        ) {
            let mut v: Vec<f64> = (0..2000)
                .map(|k| if (k / period) % 2 == 0 { levels.0 } else { levels.1 } + noise[k])
                .collect();
            for (k, s) in spikes {
                v[k] += s;
            }
            let adc = step.map(|s| AdcRange { min_v: -100.0, max_v: 100.0, step_v: Some(s) });
            let trace = Trace { v: &v, i: None, dt_s: 1e-6, t0_s: 0.0, adc };
            if let Ok(m) = measure_trace(&trace, &MeasureOptions::default()) {
                for e in &m.events {
                    // Nulls, never NaN.
                    prop_assert!(e.peak_v.is_finite() && e.t_edge_s.is_finite());
                    for x in [e.rise_time_s, e.settle_time_s, e.decay_time_s, e.ring_freq_hz,
                              e.damping_ratio, e.spike_width_s, e.slew_v_per_s, e.overshoot_pct]
                        .into_iter()
                        .flatten()
                    {
                        prop_assert!(x.is_finite(), "{e:?}");
                    }
                }
                prop_assert_eq!(m.windows.len(), m.events.len());
            }
        }
    }
}
