//! Reader throughput, in bytes of file per second: a two-column CSV and a 16-bit WAV with
//! its sidecar, read whole with `capture::read_capture` and streamed block by block through
//! `capture::open_blocks` (flat memory, the way long captures are read).

mod common;

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use kickscan::capture::{open_blocks, read_capture, Block, ReadOptions};

const N: usize = 1_000_000;

/// Streams a capture through `open_blocks`, one reused block; returns the samples read.
fn stream(path: &Path) -> u64 {
    let mut reader = open_blocks(path, &ReadOptions::default()).expect("open");
    let mut block = Block::default();
    while reader.next_block_into(&mut block).expect("read block") {
        std::hint::black_box(&block);
    }
    reader.samples_read()
}

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
    g.bench_function("two_columns_1M_rows_blocks", |b| b.iter(|| stream(&path)));
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
    g.bench_function("i16_mono_1M_samples_blocks", |b| b.iter(|| stream(&path)));
    g.finish();
}

/// A 16-bit WAV of 20 M samples (40 MB), streamed: long enough that reading, not opening,
/// is what is timed.
fn wav_reader_long(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("long.wav");
    let one = common::switch_node(N, 8);
    let v: Vec<f64> = one.iter().copied().cycle().take(20 * N).collect();
    common::write_wav(&path, &v);
    let bytes = std::fs::metadata(&path).expect("wav size").len();
    let mut g = c.benchmark_group("wav_reader");
    g.sample_size(10);
    g.throughput(Throughput::Bytes(bytes));
    g.bench_function("i16_mono_20M_samples_blocks", |b| b.iter(|| stream(&path)));
    g.finish();
}

criterion_group!(benches, csv_reader, wav_reader, wav_reader_long);
criterion_main!(benches);
