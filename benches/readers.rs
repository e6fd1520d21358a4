//! Reader throughput: a two-column CSV and a 16-bit WAV with its sidecar, read whole with
//! `capture::read_capture`, in bytes of file per second.

mod common;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use kickscan::capture::{read_capture, ReadOptions};

const N: usize = 1_000_000;

fn csv_reader(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("bench.csv");
    common::write_csv(&path, &common::switch_node(N, 8));
    let bytes = std::fs::metadata(&path).expect("csv size").len();
    let mut g = c.benchmark_group("csv_reader");
    g.sample_size(10);
    g.throughput(Throughput::Bytes(bytes));
    g.bench_function("two_columns_1M_rows", |b| {
        b.iter(|| read_capture(&path, &ReadOptions::default()).expect("read csv"))
    });
    g.finish();
}

fn wav_reader(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("bench.wav");
    common::write_wav(&path, &common::switch_node(N, 8));
    let bytes = std::fs::metadata(&path).expect("wav size").len();
    let mut g = c.benchmark_group("wav_reader");
    g.sample_size(10);
    g.throughput(Throughput::Bytes(bytes));
    g.bench_function("i16_mono_1M_samples", |b| {
        b.iter(|| read_capture(&path, &ReadOptions::default()).expect("read wav"))
    });
    g.finish();
}

criterion_group!(benches, csv_reader, wav_reader);
criterion_main!(benches);
