//! No input may make a reader panic: random bytes, damaged text and damaged WAV files must
//! come back as `Ok` or as an error, never as a crash.

use kickscan::capture::{read_capture, RawKind, ReadOptions};
use proptest::prelude::*;

const SEED_CSV: &str = "Sample Interval;2,5e-9\nRecord Length: 8\nt [us];v_sw [V];i_coil (mA)\n\
-0,005;24,0;75\n-0,0025;24,5;75\n0,0;12,5;74\n0,0025;180,25;70\n0,005;61,5;61\n\
0,0075;24,0;50\n0,01;24,0;40\n0,0125;24,0;30\n";

fn seed_wav() -> Vec<u8> {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 1000,
        bits_per_sample: 24,
        sample_format: hound::SampleFormat::Int,
    };
    let mut cur = std::io::Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec).unwrap();
    for k in 0..64i32 {
        w.write_sample(k * 1000 - 30000).unwrap();
    }
    w.finalize().unwrap();
    cur.into_inner()
}

fn mutate(mut bytes: Vec<u8>, edits: &[(usize, u8, u8)]) -> Vec<u8> {
    for &(pos, byte, op) in edits {
        if bytes.is_empty() {
            bytes.push(byte);
            continue;
        }
        let k = pos % bytes.len();
        match op % 4 {
            0 => bytes[k] = byte,
            1 => bytes.insert(k, byte),
            2 => {
                bytes.remove(k);
            }
            _ => bytes.truncate(k),
        }
    }
    bytes
}

fn read_all_ways(bytes: &[u8], name: &str) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join(name);
    std::fs::write(&p, bytes).unwrap();
    let _ = read_capture(&p, &ReadOptions::default());
    let _ = read_capture(
        &p,
        &ReadOptions {
            dt_s: Some(1e-9),
            raw: Some(RawKind::I16),
            ..Default::default()
        },
    );
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..600)) {
        read_all_ways(&bytes, "random.csv");
        read_all_ways(&bytes, "random.wav");
    }

    #[test]
    fn damaged_text_never_panics(edits in prop::collection::vec((any::<usize>(), any::<u8>(), any::<u8>()), 1..6)) {
        let bytes = mutate(SEED_CSV.as_bytes().to_vec(), &edits);
        read_all_ways(&bytes, "damaged.csv");
    }

    #[test]
    fn damaged_wav_never_panics(edits in prop::collection::vec((any::<usize>(), any::<u8>(), any::<u8>()), 1..4)) {
        let bytes = mutate(seed_wav(), &edits);
        read_all_ways(&bytes, "damaged.wav");
    }
}

#[test]
fn the_undamaged_seeds_read() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("seed.csv");
    std::fs::write(&p, SEED_CSV).unwrap();
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    // 0,0025 us between rows, as the preamble states; 75 mA in A.
    assert!((cap.sample_interval_s - 2.5e-9).abs() < 1e-21);
    assert_eq!(cap.channels[1].samples[0], 0.075);
    assert!(cap.warnings.is_empty(), "{:?}", cap.warnings);
    let p = dir.path().join("seed.wav");
    std::fs::write(&p, seed_wav()).unwrap();
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(cap.n_samples(), 32);
    // Code -30000 of a 24-bit range: -30000 / 2^23.
    assert_eq!(cap.channels[0].samples[0], -30000.0 / 8388608.0);
}
