//! Round trips: random samples written in each format (with std and hound, here) read back
//! equal within the format's resolution.

use std::path::Path;

use kickscan::capture::{read_capture, RawKind, ReadOptions};
use proptest::prelude::*;

fn config() -> ProptestConfig {
    ProptestConfig {
        cases: 24,
        ..ProptestConfig::default()
    }
}

#[derive(Debug, Clone, Copy)]
enum Layout {
    Comma,
    SemicolonDecimalComma,
    Tab,
}

fn csv_text(
    layout: Layout,
    header: bool,
    time: Option<(f64, f64)>,
    columns: &[Vec<f64>],
) -> String {
    let d = match layout {
        Layout::Comma => ",",
        Layout::SemicolonDecimalComma => ";",
        Layout::Tab => "\t",
    };
    // `{:e}` prints the shortest form that reads back to the same double.
    let num = |x: f64| {
        let s = format!("{x:e}");
        match layout {
            Layout::SemicolonDecimalComma => s.replace('.', ","),
            _ => s,
        }
    };
    let mut out = String::new();
    if header {
        let mut names: Vec<String> = Vec::new();
        if time.is_some() {
            names.push("t [s]".into());
        }
        names.extend((0..columns.len()).map(|k| format!("probe_{k} [V]")));
        out.push_str(&names.join(d));
        out.push('\n');
    }
    let n = columns[0].len();
    for r in 0..n {
        let mut cells = Vec::new();
        if let Some((t0, dt)) = time {
            cells.push(num(t0 + r as f64 * dt));
        }
        cells.extend(columns.iter().map(|c| num(c[r])));
        out.push_str(&cells.join(d));
        out.push('\n');
    }
    out
}

fn columns_strategy() -> impl Strategy<Value = Vec<Vec<f64>>> {
    (1usize..4, 6usize..120).prop_flat_map(|(nch, n)| {
        prop::collection::vec(prop::collection::vec(-1e4f64..1e4, n), nch)
    })
}

fn layout_strategy() -> impl Strategy<Value = Layout> {
    prop_oneof![
        Just(Layout::Comma),
        Just(Layout::SemicolonDecimalComma),
        Just(Layout::Tab)
    ]
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn csv_round_trip(
        columns in columns_strategy(),
        layout in layout_strategy(),
        header in any::<bool>(),
        with_time in any::<bool>(),
        dt_exp in -12i32..-3,
        dt_mant in 1.0f64..9.0,
        t0_steps in -50i32..50,
    ) {
        let dt = dt_mant * 10f64.powi(dt_exp);
        let t0 = f64::from(t0_steps) * dt;
        let time = with_time.then_some((t0, dt));
        let text = csv_text(layout, header, time, &columns);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rt.csv");
        std::fs::write(&p, &text).unwrap();
        // One headerless column of `1,25` cells reads as two integer columns as well; only
        // the user can say which it is.
        let ambiguous = matches!(layout, Layout::SemicolonDecimalComma)
            && !header && columns.len() == 1 && !with_time;
        let opts = ReadOptions {
            dt_s: (!with_time).then_some(dt),
            decimal_comma: ambiguous.then_some(true),
            ..Default::default()
        };
        let cap = read_capture(&p, &opts).map_err(|e| TestCaseError::fail(format!("{e}\n{text}")))?;
        prop_assert_eq!(cap.channels.len(), columns.len());
        for (ch, col) in cap.channels.iter().zip(&columns) {
            prop_assert_eq!(&ch.samples, col);
        }
        prop_assert!(((cap.sample_interval_s - dt) / dt).abs() < 1e-9,
            "dt {} vs {}", cap.sample_interval_s, dt);
        if with_time {
            prop_assert!((cap.t0_s - t0).abs() <= 1e-9 * dt);
        }
        prop_assert!(cap.warnings.is_empty(), "{:?}", cap.warnings);
    }

    #[test]
    fn wav_integer_round_trip(
        bits in prop_oneof![Just(8u16), Just(16), Just(24), Just(32)],
        nch in 1u16..4,
        frames in 1usize..200,
        seed in any::<u64>(),
        vpfs in 0.5f64..1000.0,
    ) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rt.wav");
        let spec = hound::WavSpec {
            channels: nch,
            sample_rate: 250_000,
            bits_per_sample: bits,
            sample_format: hound::SampleFormat::Int,
        };
        let full = 1i64 << (bits - 1);
        let mut state = seed | 1;
        let mut codes = Vec::new();
        let mut w = hound::WavWriter::create(&p, spec).unwrap();
        for _ in 0..frames * usize::from(nch) {
            // xorshift64: reproducible codes over the whole range, both extremes included.
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let code = (state % (2 * full as u64)) as i64 - full;
            w.write_sample(code as i32).unwrap();
            codes.push(code);
        }
        w.finalize().unwrap();
        let names: Vec<String> = (0..nch)
            .map(|k| format!(r#"{{"name": "c{k}", "volts_per_full_scale": {vpfs}}}"#))
            .collect();
        std::fs::write(p.with_extension("json"), format!(r#"{{"channels": [{}]}}"#, names.join(","))).unwrap();
        let cap = read_capture(&p, &ReadOptions::default()).unwrap();
        prop_assert_eq!(cap.n_samples(), frames);
        prop_assert!((cap.sample_interval_s - 4e-6).abs() < 1e-18);
        let step = vpfs / full as f64;
        for (k, &code) in codes.iter().enumerate() {
            let ch = &cap.channels[k % usize::from(nch)];
            let got = ch.samples[k / usize::from(nch)];
            // Exact up to double rounding of code * step.
            prop_assert!((got - code as f64 * step).abs() <= 1e-12 * vpfs);
            let adc = ch.adc.unwrap();
            prop_assert!(got >= adc.min_v - 1e-12 * vpfs && got <= adc.max_v + 1e-12 * vpfs);
        }
    }

    #[test]
    fn wav_float_round_trip(values in prop::collection::vec(-4.0f32..4.0, 1..300)) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rt.wav");
        let spec = hound::WavSpec {
            channels: 1,
            sample_rate: 1_000_000,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Float,
        };
        let mut w = hound::WavWriter::create(&p, spec).unwrap();
        for &x in &values {
            w.write_sample(x).unwrap();
        }
        w.finalize().unwrap();
        let cap = read_capture(&p, &ReadOptions::default()).unwrap();
        let expected: Vec<f64> = values.iter().map(|&x| f64::from(x)).collect();
        prop_assert_eq!(&cap.channels[0].samples, &expected);
    }

    #[test]
    fn raw_round_trip(
        kind in prop_oneof![Just(RawKind::I8), Just(RawKind::I16), Just(RawKind::I32),
                            Just(RawKind::F32), Just(RawKind::F64)],
        nch in 1usize..4,
        frames in 1usize..150,
        seed in any::<u64>(),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rt.bin");
        let mut state = seed | 1;
        let mut bytes = Vec::new();
        let mut expected = Vec::new();
        for _ in 0..frames * nch {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let r = state;
            match kind {
                RawKind::I8 => { let c = r as i8; bytes.extend_from_slice(&c.to_le_bytes()); expected.push(f64::from(c) / 128.0); }
                RawKind::I16 => { let c = r as i16; bytes.extend_from_slice(&c.to_le_bytes()); expected.push(f64::from(c) / 32768.0); }
                RawKind::I32 => { let c = r as i32; bytes.extend_from_slice(&c.to_le_bytes()); expected.push(f64::from(c) / 2147483648.0); }
                RawKind::F32 => { let x = (r % 1_000_000) as f32 / 1000.0 - 500.0; bytes.extend_from_slice(&x.to_le_bytes()); expected.push(f64::from(x)); }
                RawKind::F64 => { let x = (r % 1_000_000_007) as f64 * 1e-3 - 5e5; bytes.extend_from_slice(&x.to_le_bytes()); expected.push(x); }
            }
        }
        std::fs::write(&p, &bytes).unwrap();
        let chans: Vec<String> = (0..nch)
            .map(|k| format!(r#"{{"name": "c{k}", "volts_per_full_scale": 1}}"#))
            .collect();
        write_sidecar(&p, &format!(r#"{{"sample_rate_hz": 5e6, "channels": [{}]}}"#, chans.join(",")));
        let cap = read_capture(&p, &ReadOptions { raw: Some(kind), ..Default::default() }).unwrap();
        prop_assert_eq!(cap.n_samples(), frames);
        for (k, &x) in expected.iter().enumerate() {
            prop_assert_eq!(cap.channels[k % nch].samples[k / nch], x);
        }
    }
}

fn write_sidecar(capture: &Path, json: &str) {
    std::fs::write(capture.with_extension("json"), json).unwrap();
}
