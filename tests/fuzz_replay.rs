//! Replays the committed fuzz corpus (`fuzz/corpus/<target>/`) through the same harness the
//! fuzz targets use (`fuzz/harness.rs`), on stable Rust: every input must come back without
//! a panic and without NaN in a result.

#[path = "../fuzz/harness.rs"]
mod harness;

use std::path::Path;

fn replay(target: &str, run: fn(&[u8])) {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz/corpus")
        .join(target);
    let mut n = 0;
    for entry in std::fs::read_dir(&dir).unwrap() {
        let p = entry.unwrap().path();
        let bytes = std::fs::read(&p).unwrap();
        eprintln!("{}", p.display());
        run(&bytes);
        n += 1;
    }
    harness::remove_scratch();
    assert!(n > 0, "{}: empty corpus", dir.display());
}

#[test]
fn csv_corpus() {
    replay("csv", harness::csv);
}

#[test]
fn wav_corpus() {
    replay("wav", harness::wav);
}

#[test]
fn sidecar_corpus() {
    replay("sidecar", harness::sidecar);
}

#[test]
fn si_corpus() {
    replay("si", harness::si);
}

#[test]
fn measure_corpus() {
    replay("measure", |b| {
        harness::measure(b);
    });
}

/// The measure seed (two events drawn by formula, see fuzz/README.md) is measured, so the
/// harness is not refusing everything before measuring.
#[test]
fn the_measure_seed_reaches_the_measurement() {
    let bytes =
        std::fs::read(Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/corpus/measure/two-events"))
            .unwrap();
    assert_eq!(harness::measure(&bytes), 2);
    harness::remove_scratch();
}
