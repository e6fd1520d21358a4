//! End-to-end tests of the capture readers on files written here, one per layout.
//! Every file is an invented bench scenario (a 24 V coil switched off); expected values are
//! the numbers written into the file, converted by hand.

use std::path::{Path, PathBuf};

use kickscan::capture::{
    open_blocks, read_capture, select_channel, Capture, Format, RawKind, ReadOptions,
};

fn write(dir: &Path, name: &str, content: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, content).unwrap();
    p
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1e-300)
}

fn assert_close(a: f64, b: f64) {
    assert!(close(a, b), "{a} != {b}");
}

fn has_note(cap: &Capture, text: &str) -> bool {
    cap.notes.iter().any(|n| n.contains(text))
}

fn names(cap: &Capture) -> Vec<&str> {
    cap.channels.iter().map(|c| c.name.as_str()).collect()
}

#[test]
fn csv_comma_preamble_header_units_negative_time() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "valve3.csv",
        b"Bench log: valve V3 turn-off\nRecord Length: 6\nUnits,V\nProbe factor,10x\n\
t [us],v_sw [V],i_coil (A)\n-0.004,24.0,0.075\n-0.002,24.0,0.075\n0.000,12.5,0.074\n\
0.002,180.25,0.070\n0.004,61.5,0.061\n0.006,24.0,0.050\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(cap.format, Format::Csv);
    assert_eq!(names(&cap), ["v_sw", "i_coil"]);
    assert_eq!(cap.channels[0].unit, "V");
    assert_eq!(cap.channels[1].unit, "A");
    // 0.002 us between rows; the first row at -0.004 us.
    assert_close(cap.sample_interval_s, 2e-9);
    assert_close(cap.t0_s, -4e-9);
    assert_eq!(
        cap.channels[0].samples,
        [24.0, 24.0, 12.5, 180.25, 61.5, 24.0]
    );
    assert_eq!(cap.channels[1].samples[3], 0.070);
    assert!(has_note(&cap, "delimiter ',' (sniffed)"), "{:?}", cap.notes);
    assert!(has_note(&cap, "time column in us"), "{:?}", cap.notes);
    assert!(
        has_note(&cap, "sample interval 2e-9 s from the time column 't'"),
        "{:?}",
        cap.notes
    );
    assert!(has_note(&cap, "record length 6 stated on line 2"));
    assert!(has_note(&cap, "probe factor 10"));
    assert!(cap
        .metadata
        .contains(&("Record Length".to_string(), "6".to_string())));
    assert!(cap.warnings.is_empty(), "{:?}", cap.warnings);
}

#[test]
fn csv_semicolon_decimal_comma_values_only_interval_in_preamble() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "relay_k2.csv",
        b"# sample interval = 2,5 ns\n1,25;3,5\n1,5;-3,75\n2,0E+1;4,0\n-7,5e-1;0\n3;1,125\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1", "CH2"]);
    assert_close(cap.sample_interval_s, 2.5e-9);
    assert_eq!(cap.t0_s, 0.0);
    assert_eq!(cap.channels[0].samples, [1.25, 1.5, 20.0, -0.75, 3.0]);
    assert_eq!(cap.channels[1].samples, [3.5, -3.75, 4.0, 0.0, 1.125]);
    assert!(has_note(&cap, "delimiter ';' (sniffed)"), "{:?}", cap.notes);
    assert!(has_note(&cap, "decimal comma (sniffed)"), "{:?}", cap.notes);
    assert!(has_note(&cap, "no header row"));
}

/// A spreadsheet's export with decimal commas inside quoted cells and a comma between
/// them: the quotes keep each number whole (invented values).
#[test]
fn csv_comma_delimited_quoted_decimal_comma_cells() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "quoted.csv",
        b"\"Time [us]\",\"Switch node [V]\"\n\"0,0\",\"0,25\"\n\"0,5\",\"24,5\"\n\"1,0\",\"-3,75\"\n\"1,5\",\"1,125\"\n\"2,0\",\"0\"\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["Switch node"]);
    assert_close(cap.sample_interval_s, 0.5e-6);
    assert_eq!(cap.channels[0].samples, [0.25, 24.5, -3.75, 1.125, 0.0]);
    assert!(has_note(&cap, "delimiter ',' (sniffed)"), "{:?}", cap.notes);
    assert!(has_note(&cap, "decimal comma (sniffed)"), "{:?}", cap.notes);
}

#[test]
fn csv_tab_time_in_ms_and_millivolt_column() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "solenoid.txt",
        b"Time (ms)\tCH1 (mV)\tCH2\n0.0\t500\t1.5\n0.5\t750\t1.5\n1.0\t-250\t1.25\n1.5\t0\t1.0\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1", "CH2"]);
    assert_close(cap.sample_interval_s, 0.5e-3);
    assert_eq!(cap.channels[0].unit, "V");
    // mV scaled to V.
    assert_eq!(cap.channels[0].samples, [0.5, 0.75, -0.25, 0.0]);
    assert!(has_note(&cap, "delimiter tab (sniffed)"), "{:?}", cap.notes);
    assert!(has_note(&cap, "time column in ms"));
    assert!(has_note(&cap, "'CH1' in mV"));
}

#[test]
fn csv_spaces_time_suffix_unit_and_current_named_column() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "logger.dat",
        b"time_s   v_sw   i_coil\n 1e-6   24   0.1\n 2e-6   30   0.09\n 3e-6   60   0.08\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["v_sw", "i_coil"]);
    assert_close(cap.sample_interval_s, 1e-6);
    assert_close(cap.t0_s, 1e-6);
    assert_eq!(cap.channels[1].unit, "A");
    assert_eq!(cap.channels[1].samples, [0.1, 0.09, 0.08]);
    assert!(
        has_note(&cap, "delimiter spaces (sniffed)"),
        "{:?}",
        cap.notes
    );
    assert!(has_note(&cap, "taken as A from its name"));
}

#[test]
fn csv_no_header_first_column_sniffed_as_time() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "noheader.csv",
        b"-2.0e-9,0.1,5\n0.0e-9,0.2,6\n2.0e-9,0.3,7\n4.0e-9,0.4,8\n6.0e-9,0.5,9\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1", "CH2"]);
    assert_close(cap.sample_interval_s, 2e-9);
    assert_close(cap.t0_s, -2e-9);
    assert_eq!(cap.channels[1].samples, [5.0, 6.0, 7.0, 8.0, 9.0]);
    assert!(has_note(&cap, "taken as time (sniffed)"), "{:?}", cap.notes);
}

#[test]
fn csv_units_row_under_the_header() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "two_rows.csv",
        b"Time,Drain,Coil\n(us),(V),(mA)\n0,24,150\n0.1,25,140\n0.2,26,130\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["Drain", "Coil"]);
    assert_close(cap.sample_interval_s, 1e-7);
    assert_eq!(cap.channels[1].unit, "A");
    assert_close(cap.channels[1].samples[0], 0.15);
    assert!(has_note(&cap, "units row on line 2"));
}

#[test]
fn csv_single_column_with_dt_option_and_overrides() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "one.csv", b"0.5\n0.7\n-1.5e1\n2\n");
    let opts = ReadOptions {
        dt_s: Some(1e-8),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(names(&cap), ["CH1"]);
    assert_eq!(cap.sample_interval_s, 1e-8);
    assert_eq!(cap.channels[0].samples, [0.5, 0.7, -15.0, 2.0]);
    assert!(has_note(&cap, "from --dt/--sample-rate"));

    // Forced delimiter and decimal mark: '1,5' is one number in a semicolon file.
    let p = write(dir.path(), "forced.csv", b"t;v\n0;1,5\n1;2,5\n2;3,5\n");
    let opts = ReadOptions {
        delimiter: Some(b';'),
        decimal_comma: Some(true),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.channels[0].samples, [1.5, 2.5, 3.5]);
    assert!(has_note(&cap, "delimiter ';' (given)"));
    assert!(has_note(&cap, "decimal comma (given)"));
}

#[test]
fn csv_rails_and_code_step_seen_in_data() {
    // An invented clipped event on a 0.25 V grid; the top rail 50 V holds 4 samples.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,v\n");
    let vals = [
        24.0, 24.25, 24.0, 23.75, 35.5, 50.0, 50.0, 50.0, 50.0, 40.5, 30.25, 25.0, 24.5, 24.0,
        23.75, 24.0, 24.0, 24.25, 24.0, 23.75, 24.0,
    ];
    for (k, v) in vals.iter().enumerate() {
        text.push_str(&format!("{},{}\n", k as f64 * 1e-9, v));
    }
    let p = write(dir.path(), "clipped.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    let adc = cap.channels[0].adc.expect("rails");
    assert_eq!(adc.max_v, 50.0);
    assert_eq!(adc.min_v, f64::NEG_INFINITY);
    assert_eq!(adc.step_v, Some(0.25));
    assert!(has_note(&cap, "upper rail 50 V"), "{:?}", cap.notes);
}

#[test]
fn csv_jittered_time_steps_warn_and_use_the_median_step() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t [ns],v\n");
    // Every fourth step is 5 % long and the next 5 % short: 1 ns on average.
    let mut t = 0.0;
    for k in 0..40 {
        text.push_str(&format!("{t:.3},{}\n", k % 7));
        t += match k % 4 {
            2 => 1.05,
            3 => 0.95,
            _ => 1.0,
        };
    }
    let p = write(dir.path(), "jitter.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_close(cap.sample_interval_s, 1e-9);
    assert_eq!(cap.warnings.len(), 1, "{:?}", cap.warnings);
    assert!(
        cap.warnings[0].contains("first on line 5") && cap.warnings[0].contains("median step"),
        "{}",
        cap.warnings[0]
    );
}

#[test]
fn csv_scale_option_and_difference_channel() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "diff.csv",
        b"t,drain,source\n0,2.4,0.1\n1e-9,2.5,0.2\n2e-9,18.0,0.5\n",
    );
    let opts = ReadOptions {
        scale: vec![("drain".into(), 10.0)],
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.channels[0].samples, [24.0, 25.0, 180.0]);
    let d = select_channel(&cap, "DRAIN-2").unwrap();
    assert_eq!(d.name, "drain-source");
    assert_eq!(d.samples, [23.9, 24.8, 179.5]);
}

#[test]
fn blocks_stream_a_capture_in_bounded_pieces() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,a,b\n");
    for k in 0..10 {
        text.push_str(&format!("{},{},{}\n", k, k * 2, k * 3));
    }
    let p = write(dir.path(), "stream.csv", text.as_bytes());
    let mut r = open_blocks(&p, &ReadOptions::default()).unwrap();
    assert_eq!(r.header().n_samples(), 0);
    assert_eq!(r.header().sample_interval_s, 1.0);
    r.set_block_len(3);
    let mut lens = Vec::new();
    let mut firsts = Vec::new();
    let mut b_values = Vec::new();
    while let Some(b) = r.next_block().unwrap() {
        lens.push(b.len());
        firsts.push(b.first_sample);
        b_values.extend_from_slice(&b.channels[1]);
    }
    assert_eq!(lens, [3, 3, 3, 1]);
    assert_eq!(firsts, [0, 3, 6, 9]);
    assert_eq!(b_values[9], 27.0);
    assert_eq!(r.samples_read(), 10);
}

/// `--skew` while streaming in blocks of 3 and 4 samples: every block holds all channels
/// for the same samples, the record keeps its length, and the values are the definition's
/// (value at `k + S/dt`, linearly interpolated, ends held), worked by hand for a ramp:
/// `a` (late by 1.5 s at 1 s sampling) reads 2 (k + 1.5) up to the held last value 18,
/// `b` (early by 2 s) reads 3 (k - 2) from the held first value 0; `c` does not move.
#[test]
fn skewed_channels_stream_in_step() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,a,b,c\n");
    for k in 0..10 {
        text.push_str(&format!("{},{},{},{}\n", k, k * 2, k * 3, k));
    }
    let p = write(dir.path(), "skew.csv", text.as_bytes());
    let opts = ReadOptions {
        skew: vec![("a".into(), 1.0), ("A".into(), 0.5), ("b".into(), -2.0)],
        ..Default::default()
    };
    let a_want = [3.0, 5.0, 7.0, 9.0, 11.0, 13.0, 15.0, 17.0, 18.0, 18.0];
    let b_want = [0.0, 0.0, 0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0];
    for len in [3, 4, 1000] {
        let mut r = open_blocks(&p, &opts).unwrap();
        r.set_block_len(len);
        let (mut a, mut b, mut c) = (vec![], vec![], vec![]);
        while let Some(block) = r.next_block().unwrap() {
            assert!(block.len() <= len);
            assert!(block.channels.iter().all(|ch| ch.len() == block.len()));
            // Each block starts where the samples handed out so far end.
            assert_eq!(block.first_sample, a.len() as u64, "blocks of {len}");
            a.extend_from_slice(&block.channels[0]);
            b.extend_from_slice(&block.channels[1]);
            c.extend_from_slice(&block.channels[2]);
        }
        assert_eq!(a, a_want, "blocks of {len}");
        assert_eq!(b, b_want, "blocks of {len}");
        assert_eq!(c, (0..10).map(f64::from).collect::<Vec<_>>());
        assert_eq!(r.samples_read(), 10);
        let note = "'a' moved earlier by 1.5e0 s (1.5 samples, --skew)";
        assert!(r.finish().notes.iter().any(|n| n == note), "{note}");
    }
    assert_eq!(read_capture(&p, &opts).unwrap().channels[0].samples, a_want);
}

fn wav_spec(channels: u16, bits: u16, float: bool) -> hound::WavSpec {
    hound::WavSpec {
        channels,
        sample_rate: 48_000,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    }
}

/// Writes a two-channel integer WAV with codes at half and minus quarter full scale.
fn int_wav(dir: &Path, bits: u16) -> PathBuf {
    let p = dir.join(format!("run{bits}.wav"));
    let mut w = hound::WavWriter::create(&p, wav_spec(2, bits, false)).unwrap();
    let half = 1i32 << (bits - 2);
    let quarter = 1i32 << (bits - 3);
    for (a, b) in [(half, -quarter), (0, quarter), (-half, 0)] {
        w.write_sample(a).unwrap();
        w.write_sample(b).unwrap();
    }
    w.finalize().unwrap();
    p
}

#[test]
fn wav_integer_widths_without_sidecar_are_fractions_of_full_scale() {
    let dir = tempfile::tempdir().unwrap();
    for bits in [8u16, 16, 24, 32] {
        let p = int_wav(dir.path(), bits);
        let cap = read_capture(&p, &ReadOptions::default()).unwrap();
        assert_eq!(cap.format, Format::Wav);
        assert_eq!(names(&cap), ["CH1", "CH2"]);
        assert_close(cap.sample_interval_s, 1.0 / 48_000.0);
        assert_eq!(cap.channels[0].samples, [0.5, 0.0, -0.5], "{bits} bits");
        assert_eq!(cap.channels[1].samples, [-0.25, 0.25, 0.0], "{bits} bits");
        let adc = cap.channels[0].adc.unwrap();
        // Full scale: -1 to one code below +1 (code / 2^(bits-1)).
        let step = 0.5f64.powi(i32::from(bits) - 1);
        assert_eq!(adc.min_v, -1.0);
        assert_close(adc.max_v, 1.0 - step);
        assert_eq!(adc.step_v, Some(step));
        // Without --scale the volts are fractions of full scale: `measure` must say so.
        assert!(
            cap.warnings.iter().any(|w| w.contains("no sidecar")),
            "{bits} bits"
        );
        assert!(!has_note(&cap, "no sidecar"));
        // With --scale the user has given the volts; the guess is only noted.
        let scaled = ReadOptions {
            scale: vec![("CH1".to_string(), 100.0)],
            ..ReadOptions::default()
        };
        let cap = read_capture(&p, &scaled).unwrap();
        assert!(has_note(&cap, "no sidecar"));
        assert!(cap.warnings.iter().all(|w| !w.contains("no sidecar")));
    }
}

#[test]
fn wav_with_sidecar_scales_names_and_overrides_the_rate() {
    let dir = tempfile::tempdir().unwrap();
    let p = int_wav(dir.path(), 16);
    let stem = p.with_extension("json");
    std::fs::write(
        &stem,
        r#"{"sample_rate_hz": 1e9, "t0_s": -1e-6, "channels": [
            {"name": "v_sw", "unit": "V", "volts_per_full_scale": 500, "offset_v": 10},
            {"name": "i_coil", "unit": "A", "volts_per_full_scale": 2}]}"#,
    )
    .unwrap();
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["v_sw", "i_coil"]);
    assert_eq!(cap.sample_interval_s, 1e-9);
    assert_eq!(cap.t0_s, -1e-6);
    // 0.5 FS * 500 V + 10 V.
    assert_eq!(cap.channels[0].samples, [260.0, 10.0, -240.0]);
    assert_eq!(cap.channels[1].unit, "A");
    assert_eq!(cap.channels[1].samples, [-0.5, 0.5, 0.0]);
    let adc = cap.channels[0].adc.unwrap();
    assert_eq!(adc.min_v, -490.0);
    assert_close(adc.max_v, 10.0 + 500.0 * (1.0 - 1.0 / 32768.0));
    assert!(has_note(
        &cap,
        "sample rate 1e9 Hz from the sidecar (the header says 48000 Hz)"
    ));
}

#[test]
fn wav_float_and_scale_option() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("float.wav");
    let mut w = hound::WavWriter::create(&p, wav_spec(1, 32, true)).unwrap();
    for x in [0.25f32, -0.5, 0.125] {
        w.write_sample(x).unwrap();
    }
    w.finalize().unwrap();
    let opts = ReadOptions {
        scale: vec![("CH1".into(), 400.0)],
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.channels[0].samples, [100.0, -200.0, 50.0]);
    assert_eq!(cap.channels[0].adc, None);
}

#[test]
fn raw_dumps_with_sidecar_and_with_dt() {
    let dir = tempfile::tempdir().unwrap();
    // Two interleaved i16 channels, a 4-byte header to skip, then half a frame left over.
    let mut bytes = vec![0xAA, 0xBB, 0xCC, 0xDD];
    for (a, b) in [(16384i16, -8192i16), (-32768, 32767)] {
        bytes.extend_from_slice(&a.to_le_bytes());
        bytes.extend_from_slice(&b.to_le_bytes());
    }
    bytes.extend_from_slice(&[1, 2]);
    let p = write(dir.path(), "dump.bin", &bytes);
    std::fs::write(
        dir.path().join("dump.json"),
        r#"{"sample_rate_hz": 2e8, "data_offset_bytes": 4, "channels": [
            {"name": "v", "volts_per_full_scale": 100},
            {"name": "i", "unit": "A", "volts_per_full_scale": 1, "offset_v": 0.5}]}"#,
    )
    .unwrap();
    let opts = ReadOptions {
        raw: Some(RawKind::I16),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.format, Format::Raw);
    assert_eq!(cap.sample_interval_s, 5e-9);
    assert_eq!(cap.channels[0].samples, [50.0, -100.0]);
    assert_close(cap.channels[1].samples[0], 0.25);
    assert_close(cap.channels[1].samples[1], 0.5 + 32767.0 / 32768.0);
    assert_eq!(cap.warnings.len(), 1);
    assert!(cap.warnings[0].starts_with("byte 12: the file ends inside a frame"));

    let mut f64s = Vec::new();
    for x in [1.5f64, -2.25, 1e-3] {
        f64s.extend_from_slice(&x.to_le_bytes());
    }
    let p = write(dir.path(), "plain.f64", &f64s);
    let opts = ReadOptions {
        raw: Some(RawKind::F64),
        dt_s: Some(1e-9),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(names(&cap), ["CH1"]);
    assert_eq!(cap.channels[0].samples, [1.5, -2.25, 1e-3]);
}

#[test]
fn csv_with_a_byte_order_mark_and_crlf_lines() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "bom.csv",
        b"\xEF\xBB\xBFTime,CH1\r\n0,1.5\r\n1e-6,2.5\r\n2e-6,3.5\r\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1"]);
    assert_close(cap.sample_interval_s, 1e-6);
    assert_eq!(cap.channels[0].samples, [1.5, 2.5, 3.5]);
    assert!(has_note(&cap, "byte-order mark skipped"));
    // Headerless: the mark must not spoil the first number either.
    let p = write(dir.path(), "bom2.csv", b"\xEF\xBB\xBF0.5\n0.75\n1\n");
    let opts = ReadOptions {
        dt_s: Some(1e-9),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.channels[0].samples, [0.5, 0.75, 1.0]);
}

#[test]
fn csv_coarsely_printed_long_time_column_reads_without_false_errors() {
    // Six significant digits (C's %g) at 1 ns steps: from 1 ms on, times round to 10 ns,
    // so steps print as 0 or 10 ns. That is rounding, not time running backwards.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,v\n");
    for k in 0..3000u32 {
        let t = 1e-3 + f64::from(k) * 1e-9;
        text.push_str(&format!("{:.5e},{}\n", t, k % 5));
    }
    let p = write(dir.path(), "coarse.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(cap.n_samples(), 3000);
    // The mean step over 3000 rows: within 10 ns / 2999 of 1 ns.
    assert!(
        (cap.sample_interval_s - 1e-9).abs() < 1e-11,
        "{}",
        cap.sample_interval_s
    );
    assert!(
        has_note(&cap, "checked only that closely"),
        "{:?}",
        cap.notes
    );
}

#[test]
fn csv_preamble_line_right_above_headerless_rows_is_not_a_header() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "units_above.csv",
        b"Sample rate: 500 MS/s\nUnits,mV,mV,mV\n1,2,3,4\n5,6,7,8\n9,10,11,12\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1", "CH2", "CH3", "CH4"]);
    assert_close(cap.sample_interval_s, 2e-9);
    // 'Units' line applies: mV scaled to V.
    assert_close(cap.channels[3].samples[2], 0.012);
    assert!(
        has_note(&cap, "sample rate 5e8 Hz stated on line 1"),
        "{:?}",
        cap.notes
    );
}

#[test]
fn csv_dt_option_overrides_the_time_column() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "override.csv",
        b"t,v
0,1
1,2
2,3
3,4
",
    );
    let opts = ReadOptions {
        dt_s: Some(1e-9),
        ..Default::default()
    };
    let cap = read_capture(&p, &opts).unwrap();
    assert_eq!(cap.sample_interval_s, 1e-9);
    assert_eq!(cap.channels[0].samples, [1.0, 2.0, 3.0, 4.0]);
    assert_eq!(cap.warnings.len(), 1, "{:?}", cap.warnings);
    assert!(cap.warnings[0].contains("the option is used"));
}

#[test]
fn csv_index_column_and_record_length_mismatch() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "indexed.csv",
        b"Points = 6\nInterval = 4 ns\nIndex,CH1\n0,1.5\n1,1.25\n2,1.0\n3,0.75\n4,0.5\n",
    );
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    assert_eq!(names(&cap), ["CH1"]);
    assert_close(cap.sample_interval_s, 4e-9);
    assert_eq!(cap.channels[0].samples, [1.5, 1.25, 1.0, 0.75, 0.5]);
    assert!(has_note(&cap, "column 'Index' counts samples; left out"));
    assert_eq!(
        cap.warnings,
        ["the file states a record length of 6, but 5 rows were read"]
    );
}
