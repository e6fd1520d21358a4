//! Every format `kickscan simulate` writes reads back with no options: the channel names,
//! the time base and the samples come back within what the format can hold.

use kickscan::capture::{read_capture, Capture, Format, ReadOptions};
use kickscan::simulate::{simulate, write_capture, OutputFormat, Scenario};

/// A short invented capture: one turn-off of the default relay coil, voltage and coil
/// current, with some noise so the samples are not smooth.
fn simulated() -> Capture {
    let sc = Scenario {
        events: 1,
        on_time_s: 100e-6,
        off_time_s: 200e-6,
        noise_v: 0.05,
        noise_a: 1e-4,
        with_coil_current: true,
        seed: 7,
        ..Scenario::default()
    };
    simulate(&sc)
        .expect("the default scenario simulates")
        .capture
}

/// Largest error a sample may have after the round trip, from how the format stores it.
fn tolerance(name: &str, truth: &[f64], read: &Capture, ch: usize, v: f64) -> f64 {
    let (lo, hi) = truth
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        });
    // Arithmetic slack of the scaling in f64.
    let slack = 1e-12 * lo.abs().max(hi.abs());
    match name {
        // Seven significant digits are printed: half a unit in the seventh digit.
        n if n.starts_with("csv") => 5.000_001e-7 * v.abs() + slack,
        // Integer codes: half a code step, the step the reader reports.
        "wav8" | "wav16" | "wav24" | "wav32" | "raw-i8" | "raw-i16" | "raw-i32" => {
            let step = read.channels[ch]
                .adc
                .and_then(|a| a.step_v)
                .expect("integer formats report their code step");
            0.5 * step * (1.0 + 1e-9) + slack
        }
        // A fraction of full scale (at most 1 in size) rounded to f32: half an ulp of 1,
        // 2^-24, times the full scale, which is about half the data range.
        "wavf32" => 2f64.powi(-24) * (hi - lo) + slack,
        // The value itself rounded to f32: half an ulp, at most 2^-24 of its size.
        "raw-f32" => 2f64.powi(-24) * v.abs(),
        "raw-f64" => 0.0,
        other => panic!("no tolerance for {other}"),
    }
}

fn file_name(format: &str) -> String {
    let ext = if format.starts_with("csv") {
        "csv"
    } else if format.starts_with("wav") {
        "wav"
    } else {
        "raw"
    };
    format!("{format}.{ext}")
}

#[test]
fn every_simulated_format_reads_back_without_options() {
    let truth = simulated();
    assert!(truth.t0_s < 0.0, "the capture has pre-trigger samples");
    let dir = tempfile::tempdir().unwrap();
    for &name in OutputFormat::NAMES {
        let format = OutputFormat::from_name(name).unwrap();
        let path = dir.path().join(file_name(name));
        write_capture(&truth, &path, &format).unwrap_or_else(|e| panic!("{name}: {e}"));
        let read =
            read_capture(&path, &ReadOptions::default()).unwrap_or_else(|e| panic!("{name}: {e}"));
        let expected_format = match name.split('-').next() {
            Some("csv") => Format::Csv,
            Some("raw") => Format::Raw,
            _ => Format::Wav,
        };
        assert_eq!(read.format, expected_format, "{name}");
        assert!(read.warnings.is_empty(), "{name}: {:?}", read.warnings);
        let names = |c: &Capture| {
            c.channels
                .iter()
                .map(|c| (c.name.clone(), c.unit.clone()))
                .collect::<Vec<_>>()
        };
        assert_eq!(names(&read), names(&truth), "{name}");
        let rel_dt =
            (read.sample_interval_s - truth.sample_interval_s).abs() / truth.sample_interval_s;
        assert!(
            rel_dt <= 1e-9,
            "{name}: sample interval {} vs {}",
            read.sample_interval_s,
            truth.sample_interval_s
        );
        // The first sample's time: a time column, the CSV preamble, or the sidecar.
        assert!(
            (read.t0_s - truth.t0_s).abs() <= 1e-9 * truth.t0_s.abs(),
            "{name}: t0 {} vs {}",
            read.t0_s,
            truth.t0_s
        );
        assert_eq!(read.n_samples(), truth.n_samples(), "{name}");
        if name.starts_with("csv") {
            // Each preamble line the writer emits is understood, not just kept as text.
            let stated = |what: &str| read.notes.iter().any(|n| n.contains(what));
            let n = truth.n_samples();
            assert!(
                stated(&format!("record length {n} stated")),
                "{name}: {:?}",
                read.notes
            );
            assert!(
                stated("sample interval 1e-7 s stated"),
                "{name}: {:?}",
                read.notes
            );
            assert!(
                stated("first sample at -1e-4 s stated"),
                "{name}: {:?}",
                read.notes
            );
        }
        let mut worst = 0.0f64;
        for (k, (r, t)) in read.channels.iter().zip(&truth.channels).enumerate() {
            for (j, (&x, &v)) in r.samples.iter().zip(&t.samples).enumerate() {
                let tol = tolerance(name, &t.samples, &read, k, v);
                assert!(
                    (x - v).abs() <= tol,
                    "{name}: channel {k}, sample {j}: {x} vs {v} (tolerance {tol:e})"
                );
                if tol > 0.0 {
                    worst = worst.max((x - v).abs() / tol);
                }
            }
        }
        println!("{name}: dt rel {rel_dt:.1e}, worst error {worst:.3} of tolerance");
    }
}

#[test]
fn raw_option_overrides_the_sidecar_sample_type_with_a_warning() {
    let truth = simulated();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("dump.raw");
    write_capture(&truth, &path, &OutputFormat::from_name("raw-f32").unwrap()).unwrap();
    let opts = ReadOptions {
        raw: Some(kickscan::capture::RawKind::I16),
        ..ReadOptions::default()
    };
    let read = read_capture(&path, &opts).unwrap();
    // Each f32 sample is read as two i16 samples, so twice the frames come back.
    assert_eq!(read.n_samples(), 2 * truth.n_samples());
    assert!(
        read.warnings
            .iter()
            .any(|w| w.contains("--raw i16 overrides the sidecar's sample_type f32")),
        "{:?}",
        read.warnings
    );
    // The same type as the sidecar's is no conflict.
    let opts = ReadOptions {
        raw: Some(kickscan::capture::RawKind::F32),
        ..ReadOptions::default()
    };
    let read = read_capture(&path, &opts).unwrap();
    assert!(read.warnings.is_empty(), "{:?}", read.warnings);
    assert_eq!(read.n_samples(), truth.n_samples());
}

#[test]
fn a_wav_sidecar_with_a_sample_type_is_refused() {
    let truth = simulated();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.wav");
    let files = write_capture(&truth, &path, &OutputFormat::from_name("wav16").unwrap()).unwrap();
    let side = std::fs::read_to_string(&files[1]).unwrap();
    let side = side.replacen('{', "{\"sample_type\": \"i16\",", 1);
    std::fs::write(&files[1], side).unwrap();
    let e = read_capture(&path, &ReadOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("run.json") && e.contains("'sample_type' is for raw dumps"),
        "{e}"
    );
}

#[test]
fn a_raw_dump_without_a_sample_type_names_both_ways_to_give_it() {
    let truth = simulated();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("dump.bin");
    let files = write_capture(&truth, &path, &OutputFormat::from_name("raw-f64").unwrap()).unwrap();
    let side: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&files[1]).unwrap()).unwrap();
    let mut side = side;
    side.as_object_mut().unwrap().remove("sample_type");
    std::fs::write(&files[1], side.to_string()).unwrap();
    // Without the field the sidecar no longer marks the file as raw; with --raw it reads.
    let opts = ReadOptions {
        raw: Some(kickscan::capture::RawKind::F64),
        ..ReadOptions::default()
    };
    let read = read_capture(&path, &opts).unwrap();
    assert_eq!(read.channels[1].samples, truth.channels[1].samples);
    assert!(read_capture(&path, &ReadOptions::default()).is_err());
}
