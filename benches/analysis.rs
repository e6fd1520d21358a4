//! Analysis throughput on an in-memory record: edge finding, the whole measurement (levels,
//! edges, per-event metrics), the same measurement streamed in blocks (as long captures are)
//! and the per-event model fit, in samples per second.

mod common;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use kickscan::events::{scan_edges, EdgeParams};
use kickscan::measure::stream::{
    measure_stream, NoObserver, SliceReplay, StreamInfo, StreamLimits, Surveyor,
};
use kickscan::measure::{measure_trace, CaptureMeasurement, MeasureOptions, Polarity, Trace};
use kickscan::model::{fit_event, ModelContext};

const N: usize = 1_000_000;
const EVENTS: usize = 8;

fn trace(v: &[f64]) -> Trace<'_> {
    Trace {
        v,
        i: None,
        dt_s: common::DT_S,
        t0_s: 0.0,
        adc: None,
    }
}

fn event_finding(c: &mut Criterion) {
    let v = common::switch_node(N, EVENTS);
    let m = measure_trace(&trace(&v), &MeasureOptions::default()).expect("measure");
    let params = EdgeParams {
        v_on: m.v_on,
        v_off: m.v_off,
        hysteresis_f: 0.1,
        // The on state of the record lasts a fifth of each event period.
        dwell_samples: N / EVENTS / 10,
        floor_f: 0.04,
    };
    let mut g = c.benchmark_group("event_finding");
    g.throughput(Throughput::Elements(N as u64));
    g.bench_function("scan_edges_1M", |b| {
        b.iter(|| {
            let scan = scan_edges(&v, params);
            assert_eq!(scan.edges.len(), EVENTS);
            scan
        })
    });
    g.finish();
}

fn measurement(c: &mut Criterion) {
    let v = common::switch_node(N, EVENTS);
    let mut g = c.benchmark_group("measurement");
    g.sample_size(10);
    g.throughput(Throughput::Elements(N as u64));
    g.bench_function("measure_trace_1M", |b| {
        b.iter(|| measure_trace(&trace(&v), &MeasureOptions::default()).expect("measure"))
    });
    g.finish();
}

/// `v` measured as a long capture is: surveyed in blocks, then replayed.
fn measure_streamed(v: &[f64], events: usize) -> CaptureMeasurement {
    let mut survey = Surveyor::new(StreamLimits::default());
    for block in v.chunks(1 << 16) {
        survey.push(block);
    }
    let mut src = SliceReplay {
        v,
        i: None,
        block: 1 << 16,
    };
    let info = StreamInfo {
        dt_s: common::DT_S,
        t0_s: 0.0,
        adc: None,
    };
    let m = measure_stream(
        &mut src,
        survey,
        info,
        &MeasureOptions::default(),
        &mut NoObserver,
        &|| false,
    )
    .expect("measure");
    assert_eq!(m.events.len(), events);
    m
}

fn streamed_measurement(c: &mut Criterion) {
    // Four times the in-memory length, so the survey thins its copy as a long capture's does.
    let n = 4 * N;
    let v = common::switch_node(n, 4 * EVENTS);
    let mut g = c.benchmark_group("streamed_measurement");
    g.sample_size(10);
    g.throughput(Throughput::Elements(n as u64));
    g.bench_function("measure_stream_4M", |b| {
        b.iter(|| measure_streamed(&v, 4 * EVENTS))
    });
    // Events two million samples apart: every window is cut at the memory bound, and
    // settles in a small part of it (the long capture's case: the settled rest of each
    // window is proved inside the band without running sums, two windows measured at once).
    let n = 8 * N;
    let v = common::switch_node(n, 4);
    g.throughput(Throughput::Elements(n as u64));
    g.bench_function("measure_stream_8M_long_windows", |b| {
        b.iter(|| measure_streamed(&v, 4))
    });
    g.finish();
}

fn fit(c: &mut Criterion) {
    let v = common::switch_node(N, EVENTS);
    let m = measure_trace(&trace(&v), &MeasureOptions::default()).expect("measure");
    let ctx = ModelContext {
        // The body diode clips the ring below ground, as in the pipeline.
        clip_level_v: Some(match m.polarity {
            Polarity::Up => -0.4,
            Polarity::Down => m.v_on + 0.4,
        }),
        ..ModelContext::default()
    };
    let window_samples: usize = m.windows.iter().map(|(a, b)| b - a).sum();
    let mut g = c.benchmark_group("fit");
    g.sample_size(10);
    g.throughput(Throughput::Elements(window_samples as u64));
    g.bench_function("fit_event_all_windows", |b| {
        b.iter(|| {
            m.events
                .iter()
                .zip(&m.windows)
                .filter_map(|(e, &(start, end))| {
                    fit_event(
                        &v[start..end],
                        common::DT_S,
                        start as f64 * common::DT_S,
                        e,
                        &ctx,
                    )
                })
                .count()
        })
    });
    g.finish();
}

criterion_group!(
    benches,
    event_finding,
    measurement,
    streamed_measurement,
    fit
);
criterion_main!(benches);
