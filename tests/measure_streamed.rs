//! A capture measured as it streams gives what the same capture measured whole gives.
//!
//! `Settings::stream_above` lowers the length beyond which a capture is streamed, so the
//! bundled sample captures (CSV, TSV and WAV, clamped and not, with and without a current
//! channel) go through both paths. While the thinned survey still holds every sample (these
//! captures are far shorter than its limit) the two paths do the same arithmetic, except
//! that times inside a window are interpolated from the window's first sample and then
//! offset: figures agree to 1e-9 relative (a few ulps in practice), counts and flags exactly.

use std::path::{Path, PathBuf};

use kickscan::pipeline::{measure_file, Settings};
use serde_json::Value;

fn sample(path: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-captures")
        .join(path)
}

fn close(a: &Value, b: &Value, at: &str) {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!(
                (x - y).abs() <= 1e-9 * x.abs().max(y.abs()),
                "{at}: {x} streamed, {y} whole"
            );
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: lengths");
            for (k, (p, q)) in x.iter().zip(y).enumerate() {
                close(p, q, &format!("{at}[{k}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: fields");
            for (k, p) in x {
                close(p, &y[k], &format!("{at}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

fn both(path: &Path, settings: Settings) {
    let (whole, whole_sketch) = measure_file(path, &settings, true).expect("measured whole");
    let streamed_settings = Settings {
        stream_above: Some(1000),
        ..settings
    };
    let (streamed, sketch) = measure_file(path, &streamed_settings, true).expect("streamed");
    assert!(!whole.events.is_empty(), "{}: no events", path.display());
    assert!(
        whole.n_samples > 1000,
        "{}: too short to stream",
        path.display()
    );
    close(
        &serde_json::to_value(&streamed).unwrap(),
        &serde_json::to_value(&whole).unwrap(),
        &path.display().to_string(),
    );
    // The report's pictures: the same envelope, event waves and fit plot.
    let (a, b) = (sketch.unwrap(), whole_sketch.unwrap());
    assert_eq!(a.n_samples, b.n_samples);
    assert_eq!(a.envelope.len(), b.envelope.len());
    for (p, q) in a.envelope.iter().zip(&b.envelope) {
        assert_eq!((p.min_v, p.max_v), (q.min_v, q.max_v));
    }
    assert_eq!(a.events.len(), b.events.len());
    for (p, q) in a.events.iter().zip(&b.events) {
        assert_eq!(p.v, q.v, "event {} wave", p.index);
    }
    assert_eq!(a.fit.is_some(), b.fit.is_some());
    if let (Some(p), Some(q)) = (&a.fit, &b.fit) {
        assert_eq!(p.title, q.title);
        assert_eq!(p.measured.len(), q.measured.len());
    }
}

#[test]
fn delimited_text_streamed_from_a_spill_matches_the_whole_capture() {
    for f in [
        "none/shot-01.csv",
        "diode/shot-02.tsv",
        "snubber/shot-03.csv",
    ] {
        both(&sample(f), Settings::default());
    }
}

#[test]
fn wav_streamed_by_reading_the_file_again_matches_the_whole_capture() {
    for f in ["none/run-22.wav", "zener/run-22.wav"] {
        both(&sample(f), Settings::default());
    }
}

#[test]
fn a_current_channel_streams_beside_the_voltage() {
    let path = sample("coil-current/zener-shot-01.csv");
    both(&path, Settings::default());
    let (doc, _) = measure_file(
        &path,
        &Settings {
            stream_above: Some(1000),
            ..Settings::default()
        },
        false,
    )
    .unwrap();
    assert!(doc.current.is_some());
    assert!(doc
        .events
        .iter()
        .all(|e| e.energy_j.is_some() || e.coil_energy_j.is_some()));
}

/// `--skew` moves channels while they are read, in blocks: a streamed capture with the
/// voltage late by 1.5 samples and the current early by 2.25 gives what it gives whole
/// (before, a skew made the capture be read whole whatever its length). A WAV, whose
/// later passes read the file itself again rather than a spill, is moved the same way on
/// every read: late by 2.5 samples of its 1 MS/s.
#[test]
fn skewed_channels_stream_as_they_read_whole() {
    for (file, skew) in [
        (
            "coil-current/zener-shot-01.csv",
            vec![
                ("v_sw".to_string(), 1.5e-6),
                ("i_coil".to_string(), -2.25e-6),
            ],
        ),
        ("zener/shot-03.wav", vec![("v_sw".to_string(), 2.5e-6)]),
    ] {
        let read = kickscan::capture::ReadOptions {
            skew,
            ..Default::default()
        };
        both(
            &sample(file),
            Settings {
                read,
                ..Settings::default()
            },
        );
    }
}

/// A mono 16-bit WAV of `n` samples at 10 MS/s (invented): on at code 0 for 20 000 samples,
/// then off at code 8000 after a decaying ring, over and over. Long enough to be read in
/// several runs, so the reader reads ahead.
fn long_wav(path: &Path, n: usize, seed: u32) {
    let mut data = Vec::with_capacity(2 * n);
    for k in 0..n {
        let x = k % 60_000;
        let code = if x < 20_000 {
            0.0
        } else {
            let t = (x - 20_000) as f64;
            8000.0 + 12_000.0 * (-t / 300.0).exp() * (t / (40.0 + f64::from(seed))).sin()
        };
        data.extend_from_slice(&(code.clamp(-32768.0, 32767.0) as i16).to_le_bytes());
    }
    let mut f = Vec::with_capacity(44 + data.len());
    f.extend_from_slice(b"RIFF");
    f.extend_from_slice(&(36 + data.len() as u32).to_le_bytes());
    f.extend_from_slice(b"WAVEfmt ");
    f.extend_from_slice(&16u32.to_le_bytes());
    f.extend_from_slice(&1u16.to_le_bytes());
    f.extend_from_slice(&1u16.to_le_bytes());
    f.extend_from_slice(&10_000_000u32.to_le_bytes());
    f.extend_from_slice(&20_000_000u32.to_le_bytes());
    f.extend_from_slice(&2u16.to_le_bytes());
    f.extend_from_slice(&16u16.to_le_bytes());
    f.extend_from_slice(b"data");
    f.extend_from_slice(&(data.len() as u32).to_le_bytes());
    f.extend_from_slice(&data);
    std::fs::write(path, f).unwrap();
}

/// Streamed captures measured side by side on a pool of two threads (a batch run on a
/// two-core machine): every file's read-ahead thread must get on without the pool, which
/// is busy with the files themselves. Each file gives what it gives alone. A hang would
/// be a deadlock: the run is given a minute.
#[test]
fn several_streamed_captures_at_once_do_not_wait_on_each_other() {
    use rayon::prelude::*;
    let dir = tempfile::tempdir().unwrap();
    let mut files: Vec<PathBuf> = (0..4)
        .map(|k| {
            let p = dir.path().join(format!("long-{k}.wav"));
            long_wav(&p, 1_500_000, k);
            p
        })
        .collect();
    files.extend(
        ["none/run-22.wav", "none/shot-01.csv"]
            .iter()
            .map(|f| sample(f)),
    );
    let settings = Settings {
        stream_above: Some(1000),
        ..Settings::default()
    };
    let alone: Vec<Value> = files
        .iter()
        .map(|f| serde_json::to_value(measure_file(f, &settings, false).unwrap().0).unwrap())
        .collect();
    let (tx, rx) = std::sync::mpsc::channel();
    let (files2, settings2) = (files.clone(), settings.clone());
    // The global pool, as a batch run uses it (its own threads are what a reader outside
    // it would wait on). nextest gives each test a process of its own, so two threads can
    // be asked for; under `cargo test` another test may have started the pool already.
    let _ = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build_global();
    std::thread::spawn(move || {
        let docs: Vec<Value> = files2
            .par_iter()
            .map(|f| serde_json::to_value(measure_file(f, &settings2, false).unwrap().0).unwrap())
            .collect();
        let _ = tx.send(docs);
    });
    let together = rx
        .recv_timeout(std::time::Duration::from_secs(60))
        .expect("the batch finished (no deadlock)");
    for (f, (a, b)) in files.iter().zip(alone.iter().zip(&together)) {
        close(a, b, &f.display().to_string());
    }
}

/// The rest of a long binary capture's first read is surveyed from its stored codes (the
/// range from the smallest and largest code, only the samples kept converted). A
/// two-channel WAV whose voltage is the second channel, stored with a negative full scale
/// and multiplied by a negative `--scale`, and a raw dump of 32-bit codes give what they
/// give whole. The codes are those of the bundled `zener/run-22.wav`, moved about.
#[test]
fn binary_captures_surveyed_from_their_codes_match_the_whole_capture() {
    let mut r = hound::WavReader::open(sample("zener/run-22.wav")).unwrap();
    // Three times over, so most samples come after the first block (held and decoded).
    let codes: Vec<i16> = r
        .samples::<i16>()
        .map(Result::unwrap)
        .collect::<Vec<_>>()
        .repeat(3);
    let dir = tempfile::tempdir().unwrap();

    let wav = dir.path().join("two.wav");
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 250_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(&wav, spec).unwrap();
    for &c in &codes {
        w.write_sample(c / 4).unwrap();
        w.write_sample(c).unwrap();
    }
    w.finalize().unwrap();
    std::fs::write(
        wav.with_extension("json"),
        r#"{"sample_rate_hz": 250000.0, "channels": [
            {"name": "i_coil", "unit": "A", "volts_per_full_scale": 2.0},
            {"name": "v_sw", "unit": "V", "volts_per_full_scale": -50.0, "offset_v": 45.0}]}"#,
    )
    .unwrap();
    let read = kickscan::capture::ReadOptions {
        scale: vec![("v_sw".to_string(), -2.0)],
        ..Default::default()
    };
    both(
        &wav,
        Settings {
            read,
            ..Settings::default()
        },
    );

    let raw = dir.path().join("dump.bin");
    let bytes: Vec<u8> = codes
        .iter()
        .flat_map(|&c| (i32::from(c) * 65_536 + 12_345).to_le_bytes())
        .collect();
    std::fs::write(&raw, bytes).unwrap();
    std::fs::write(
        raw.with_extension("json"),
        r#"{"sample_type": "i32", "sample_rate_hz": 250000.0, "channels": [
            {"name": "v_sw", "unit": "V", "volts_per_full_scale": 50.0, "offset_v": 45.0}]}"#,
    )
    .unwrap();
    both(&raw, Settings::default());
}
