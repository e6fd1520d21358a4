//! Invented test data for the report tests: a 24 V coil switched off by a low-side switch,
//! spikes made by a formula (a damped sine on top of the off level), with one event clipped
//! at a 400 V digitiser rail. The numbers are test data, not claims about any circuit.

#![allow(dead_code)]

use std::collections::BTreeMap;

use kickscan::document::{CaptureDoc, MeasureDoc, RatingMargin, Summary, Worst, MEASURE_SCHEMA};
use kickscan::measure::{Event, Polarity, RingKind};
use kickscan::pipeline::Settings;
use kickscan::report::{FitPlot, PeakEstimate, TraceSketch, VariantData};
use kickscan::stats::MetricSummary;

pub const DT_S: f64 = 20e-9;
pub const V_ON: f64 = 0.2;
pub const V_OFF: f64 = 24.0;
pub const RAIL_CLIP_V: f64 = 400.0;
const RING_HZ: f64 = 1.0e6;
const ALPHA_PER_S: f64 = 2.0e5;
const PERIOD_S: f64 = 200e-6;
const PRE_S: f64 = 5e-6;
const WINDOW_S: f64 = 40e-6;

/// A hostile file name: it must come out escaped in the HTML.
pub const NASTY_FILE: &str = "<script>alert(1)</script>.csv";

fn spike(t: f64, amp: f64) -> f64 {
    if t < 0.0 {
        V_ON
    } else {
        V_OFF + amp * (-ALPHA_PER_S * t).exp() * (2.0 * std::f64::consts::PI * RING_HZ * t).sin()
            - (V_OFF - V_ON) * (-t / 20e-9).exp()
    }
}

/// One capture of `amps.len()` events; returns samples, windows and events.
pub fn capture(amps: &[f64], clip: bool) -> (Vec<f64>, Vec<(usize, usize)>, Vec<Event>) {
    let n = ((amps.len() as f64 * PERIOD_S) / DT_S) as usize;
    let mut v = vec![V_ON; n];
    let mut windows = Vec::new();
    let mut events = Vec::new();
    for (k, &amp) in amps.iter().enumerate() {
        let t_edge = 20e-6 + k as f64 * PERIOD_S;
        let start = ((t_edge - PRE_S) / DT_S) as usize;
        let end = (((t_edge + WINDOW_S) / DT_S) as usize).min(n);
        let mut peak = f64::MIN;
        let mut t_peak = 0.0;
        for (i, x) in v.iter_mut().enumerate().take(end).skip(start) {
            let t = i as f64 * DT_S - t_edge;
            let mut y = spike(t, amp);
            if clip {
                y = y.min(RAIL_CLIP_V);
            }
            *x = y;
            if y > peak {
                peak = y;
                t_peak = t;
            }
        }
        // After the window the node sits at the off level until the next switch-on.
        let next_on = ((t_edge + PERIOD_S * 0.5) / DT_S) as usize;
        for x in v.iter_mut().take(next_on.min(n)).skip(end) {
            *x = V_OFF;
        }
        windows.push((start, end));
        events.push(Event {
            index: k,
            t_edge_s: t_edge,
            polarity: Polarity::Up,
            v_on: V_ON,
            v_off: V_OFF,
            peak_v: peak,
            switch_stress_v: peak,
            overshoot_v: peak - V_OFF,
            overshoot_pct: Some((peak - V_OFF) / (V_OFF - V_ON) * 100.0),
            t_peak_s: t_peak,
            rise_time_s: Some(60e-9),
            slew_v_per_s: Some(2.5e9),
            spike_width_s: Some(0.3e-6),
            decay_time_s: Some(0.5e-6),
            ring_freq_hz: Some(RING_HZ),
            ring_kind: Some(RingKind::Parasitic),
            damping_ratio: Some(ALPHA_PER_S / (2.0 * std::f64::consts::PI * RING_HZ)),
            settle_time_s: Some(18e-6),
            volt_seconds: 1.1e-4,
            clamp_energy_j: Some(3.0e-4),
            c_par_slope_range_v: Some([30.0, 200.0]),
            clipped: clip && peak >= RAIL_CLIP_V,
            window_s: WINDOW_S + PRE_S,
            ..Event::default()
        });
    }
    (v, windows, events)
}

fn capture_doc(file: &str, events: Vec<Event>, warnings: Vec<String>) -> CaptureDoc {
    CaptureDoc {
        label: None,
        file: file.into(),
        format: "csv".into(),
        sample_interval_s: DT_S,
        n_samples: 0,
        t0_s: 0.0,
        signal: "CH1".into(),
        current: None,
        polarity: Polarity::Up,
        v_on: V_ON,
        v_off: V_OFF,
        warnings,
        events,
    }
}

fn metric(values: &[f64]) -> MetricSummary {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    MetricSummary {
        n: v.len(),
        min: v.first().copied(),
        max: v.last().copied(),
        mean: Some(v.iter().sum::<f64>() / v.len() as f64),
        std: None,
        p50: v.get(v.len() / 2).copied(),
        p95: v.last().copied(),
        p99: v.last().copied(),
    }
}

/// Everything a report needs, made up.
pub struct Fixture {
    pub doc: MeasureDoc,
    pub settings: Settings,
    pub sketches: Vec<TraceSketch>,
    pub fit: FitPlot,
    pub variants: Vec<VariantData>,
    pub verdicts: Vec<String>,
}

pub fn fixture() -> Fixture {
    let amps_a = [300.0, 340.0, 320.0, 360.0, 310.0];
    let amps_b = [330.0, 520.0, 350.0];
    let (va, wa, ea) = capture(&amps_a, false);
    let (vb, wb, eb) = capture(&amps_b, true);
    let sk_a = TraceSketch::build("bench/run1.csv", &va, DT_S, 0.0, &wa, &ea, 1000);
    let sk_b = TraceSketch::build(NASTY_FILE, &vb, DT_S, 0.0, &wb, &eb, 1000);

    let mut ca = capture_doc("bench/run1.csv", ea.clone(), vec![]);
    ca.n_samples = va.len();
    let mut cb = capture_doc(
        NASTY_FILE,
        eb.clone(),
        vec!["peak on the ADC rail in 1 event: <b>not</b> bold".into()],
    );
    cb.n_samples = vb.len();

    let all: Vec<&Event> = ea.iter().chain(eb.iter()).collect();
    let (worst_file, worst) = std::iter::repeat_n("bench/run1.csv", ea.len())
        .chain(std::iter::repeat_n(NASTY_FILE, eb.len()))
        .zip(all.iter())
        .max_by(|a, b| a.1.switch_stress_v.total_cmp(&b.1.switch_stress_v))
        .expect("events");
    let mut metrics = BTreeMap::new();
    metrics.insert(
        "switch_stress_v".to_string(),
        metric(&all.iter().map(|e| e.switch_stress_v).collect::<Vec<_>>()),
    );
    metrics.insert(
        "decay_time_s".to_string(),
        metric(
            &all.iter()
                .filter_map(|e| e.decay_time_s)
                .collect::<Vec<_>>(),
        ),
    );
    let summary = Summary {
        n_events: all.len(),
        n_clipped: all.iter().filter(|e| e.clipped).count(),
        metrics,
        worst: Some(Worst {
            file: worst_file.to_string(),
            index: worst.index,
            t_edge_s: worst.t_edge_s,
            peak_v: worst.peak_v,
            switch_stress_v: worst.switch_stress_v,
        }),
        extreme_value: Some(serde_json::json!({
            "model": "gev", "location": 330.0, "scale": 25.0, "shape": -0.1,
            "events_per_block": 2,
            "return_levels": {
                "10": {"level": 360.0, "lower": 340.0, "upper": 385.0},
                "1000": {"level": 420.0, "lower": 380.0, "upper": 470.0},
                "1000000": {"level": 470.0, "lower": 400.0, "upper": 560.0}
            }
        })),
        rating: Some(RatingMargin {
            rating_v: 600.0,
            derated_v: 480.0,
            max_fraction: 400.0 / 600.0,
            n_over: 0,
            n_over_derated: 0,
            p_over_per_event: Some(1.0e-9),
        }),
    };
    let doc = MeasureDoc {
        schema: MEASURE_SCHEMA,
        captures: vec![ca, cb],
        summary,
        errors: vec![kickscan::document::FileError {
            file: "bad&broken.csv".into(),
            error: "bad&broken.csv: line 3, column 2: expected a number".into(),
        }],
    };
    let mut settings = Settings::default();
    settings.measure.rating_v = Some(600.0);
    settings.measure.supply_v = Some(24.0);
    settings.label = Some("relay K3 <bare>".into());

    // The clipped event: model is the unclipped formula, measured the clipped samples.
    let amp = amps_b[1];
    let t: Vec<f64> = (0..600).map(|i| -1e-6 + i as f64 * DT_S).collect();
    let model: Vec<(f64, f64)> = t.iter().map(|&t| (t, spike(t, amp))).collect();
    let measured: Vec<(f64, f64)> = model
        .iter()
        .step_by(2)
        .map(|&(t, v)| (t, v.min(RAIL_CLIP_V)))
        .collect();
    let over: Vec<f64> = model
        .iter()
        .filter(|p| p.1 > RAIL_CLIP_V)
        .map(|p| p.0)
        .collect();
    let (peak_t, peak_v) = model
        .iter()
        .copied()
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .expect("model");
    let fit = FitPlot {
        title: "Worst event: model fit through the clipped peak".into(),
        measured,
        model,
        model_name: "damped RLC".into(),
        clipped_spans: vec![(
            over.first().copied().unwrap_or(0.0),
            over.last().copied().unwrap_or(0.0),
        )],
        peak_est: Some(PeakEstimate {
            t_s: peak_t,
            v: peak_v,
            lower_v: Some(peak_v - 20.0),
            upper_v: Some(peak_v + 25.0),
        }),
    };

    let median = |sk: &TraceSketch| {
        let w = sk.median_event().expect("events");
        (w.t_s.clone(), w.v.clone())
    };
    let (ta, vma) = median(&sk_a);
    let clamp_t: Vec<f64> = (0..500).map(|i| -2e-6 + i as f64 * 0.1e-6).collect();
    let clamp_v: Vec<f64> = clamp_t
        .iter()
        .map(|&t| {
            if t < 0.0 {
                V_ON
            } else if t < 20e-6 {
                V_OFF + 28.0
            } else {
                V_OFF
            }
        })
        .collect();
    let variants = vec![
        VariantData {
            label: "bare".into(),
            median_t_s: ta,
            median_v: vma,
            stress_v: ea.iter().map(|e| e.switch_stress_v).collect(),
            decay_s: ea.iter().filter_map(|e| e.decay_time_s).collect(),
        },
        VariantData {
            label: "zener <28 V>".into(),
            median_t_s: clamp_t,
            median_v: clamp_v,
            stress_v: vec![52.1, 52.3, 52.0, 52.4],
            decay_s: vec![20e-6, 21e-6, 20.5e-6, 19.8e-6],
        },
    ];
    let verdicts =
        vec!["zener <28 V>: worst switch stress 52.4 V vs 360 V bare (-85 %)".to_string()];
    Fixture {
        doc,
        settings,
        sketches: vec![sk_a, sk_b],
        fit,
        variants,
        verdicts,
    }
}
