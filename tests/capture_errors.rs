//! Bad inputs: each must give one clear error naming the file and the place, never a panic.

use std::path::{Path, PathBuf};

use kickscan::capture::{read_capture, select_channel, RawKind, ReadOptions};

fn write(dir: &Path, name: &str, content: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, content).unwrap();
    p
}

/// Reads a file that must fail; the message must name it and contain every `parts`.
fn fails(path: &Path, opts: &ReadOptions, parts: &[&str]) -> String {
    let e = read_capture(path, opts)
        .expect_err("this input must be refused")
        .to_string();
    assert!(
        e.starts_with(&path.display().to_string()),
        "the message must start with the file name: {e}"
    );
    for p in parts {
        assert!(e.contains(p), "'{p}' missing from: {e}");
    }
    assert!(!e.contains('\n'), "one line: {e}");
    e
}

// Times printed with a fixed format, as a scope writes them: resolution 1 ps.
const GOOD_ROWS: &str = "t,v,i\n0.000e-9,1,2\n1.000e-9,1,2\n2.000e-9,1,2\n3.000e-9,1,2\n\
4.000e-9,1,2\n5.000e-9,1,2\n";

#[test]
fn empty_file() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "empty.csv", b"");
    fails(&p, &ReadOptions::default(), &["the file is empty"]);
    let p = write(dir.path(), "blank.csv", b"\n \r\n\n");
    fails(&p, &ReadOptions::default(), &["the file is empty"]);
}

#[test]
fn header_only() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "header.csv", b"t [us],v_sw [V]\n");
    fails(
        &p,
        &ReadOptions::default(),
        &["no rows of numbers in lines 1 to 1", "a header alone"],
    );
}

#[test]
fn text_cell_in_a_number_column() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("{GOOD_ROWS}6.000e-9,1,2\n7.000e-9,open,2\n");
    let p = write(dir.path(), "text.csv", text.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 9, column 2", "'open' is not a number"],
    );
}

/// Free text after the last row (a note some loggers append) is skipped and named in a
/// warning; text followed by more rows, too much of it, or a bad cell in a row of numbers
/// at the end stays an error.
#[test]
fn text_after_the_last_row() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("{GOOD_ROWS}6.000e-9,1,2\n\nEnd of record\r\n# 7 rows\n");
    let p = write(dir.path(), "footer.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).expect("the rows before the text");
    // Seven rows written above (GOOD_ROWS has six).
    assert_eq!(cap.channels[0].samples.len(), 7);
    assert!(
        cap.warnings
            .iter()
            .any(|w| w
                .contains("2 line(s) of text after the last row (from line 10: 'End of record')")),
        "{:?}",
        cap.warnings
    );
    let more_rows = format!("{GOOD_ROWS}note\n6.000e-9,1,2\n");
    let p = write(dir.path(), "middle.csv", more_rows.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8, column 1", "'note' is not a number"],
    );
    let long: String = (0..33).map(|k| format!("note {k}\n")).collect();
    let p = write(
        dir.path(),
        "long.csv",
        format!("{GOOD_ROWS}{long}").as_bytes(),
    );
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8, column 1", "'note 0'"],
    );
}

#[test]
fn nan_and_infinite_cells() {
    let dir = tempfile::tempdir().unwrap();
    for (name, cell) in [("nan.csv", "NaN"), ("inf.csv", "-inf")] {
        let text = format!("{GOOD_ROWS}6.000e-9,1,{cell}\n");
        let p = write(dir.path(), name, text.as_bytes());
        fails(
            &p,
            &ReadOptions::default(),
            &["line 8, column 3", "is not a finite number"],
        );
    }
}

#[test]
fn ragged_rows() {
    let dir = tempfile::tempdir().unwrap();
    let short = format!("{GOOD_ROWS}6.000e-9,1\n");
    let p = write(dir.path(), "short.csv", short.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8", "row has 2 cells; expected 3"],
    );
    let long = format!("{GOOD_ROWS}6.000e-9,1,2,3\n");
    let p = write(dir.path(), "long.csv", long.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8", "row has 4 cells; expected 3"],
    );
}

#[test]
fn time_going_backwards() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("{GOOD_ROWS}4.000e-9,1,2\n");
    let p = write(dir.path(), "back.csv", text.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8, column 1", "time goes backwards"],
    );
}

#[test]
fn a_gap_in_the_time_column() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("{GOOD_ROWS}9.000e-9,1,2\n");
    let p = write(dir.path(), "gap.csv", text.as_bytes());
    fails(
        &p,
        &ReadOptions::default(),
        &["line 8, column 1", "gap in the time column", "4e-9 s"],
    );
}

#[test]
fn no_time_base_at_all() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "values.csv", b"v\n1.5\n2.5\n3.5\n");
    fails(&p, &ReadOptions::default(), &["no time column", "--dt"]);
}

#[test]
fn binary_file_given_as_csv() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = b"12,13\n".to_vec();
    bytes.extend_from_slice(&[0x00, 0x9f, 0x42, 0x11, 0xff, 0x00]);
    let p = write(dir.path(), "scope.csv", &bytes);
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 6", "looks like a binary file"],
    );
    let noise: Vec<u8> = (0..4096u32).map(|k| (k * 97 % 251) as u8 | 0x80).collect();
    let p = write(dir.path(), "noise.txt", &noise);
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 0", "looks like a binary file"],
    );
}

#[test]
fn a_single_enormous_line() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = b"t,v\n".to_vec();
    text.extend(std::iter::repeat_n(b'7', 3 << 20));
    let p = write(dir.path(), "huge.csv", &text);
    fails(&p, &ReadOptions::default(), &["line 2", "longer than"]);
    // The same line after many good rows is met by the streaming reader.
    let mut text = GOOD_ROWS.as_bytes().to_vec();
    for k in 6..40_000 {
        text.extend_from_slice(format!("{k}.000e-9,1,2\n").as_bytes());
    }
    text.extend(std::iter::repeat_n(b'7', 2 << 20));
    let p = write(dir.path(), "late.csv", &text);
    fails(&p, &ReadOptions::default(), &["line 40002", "longer than"]);
}

fn wav_16(path: &Path, frames: usize) {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 1000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for k in 0..frames * 2 {
        w.write_sample(k as i16).unwrap();
    }
    w.finalize().unwrap();
}

#[test]
fn a_wav_cut_short() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("cut.wav");
    wav_16(&p, 100);
    let bytes = std::fs::read(&p).unwrap();
    // 44-byte header + 100 frames of 4 bytes; keep 10 frames and a half.
    let cut = &bytes[..44 + 42];
    std::fs::write(&p, cut).unwrap();
    fails(
        &p,
        &ReadOptions::default(),
        &[
            "byte 86",
            "promises 100 frames, only 10 are complete",
            "cut short",
        ],
    );
}

#[test]
fn a_wav_claiming_four_gigabytes_allocates_nothing_like_it() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("liar.wav");
    wav_16(&p, 4);
    let mut bytes = std::fs::read(&p).unwrap();
    // The data chunk's size field sits at bytes 40..44 of a canonical header.
    bytes[40..44].copy_from_slice(&0xFFFF_FFF0u32.to_le_bytes());
    bytes[4..8].copy_from_slice(&0xFFFF_FFF8u32.to_le_bytes());
    std::fs::write(&p, &bytes).unwrap();
    fails(&p, &ReadOptions::default(), &["cut short"]);
}

/// A WAV header the reader cannot take names the chunk and its byte, found by walking the
/// chunks (RIFF: an id, a 32-bit length, the bytes, a pad byte after an odd length), instead
/// of a bare "failed to read" at byte 0: cut inside the `fmt ` chunk, cut before `data`, an
/// odd-length chunk before `data`, and an empty file.
#[test]
fn a_wav_header_that_goes_wrong_names_its_chunk() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("h.wav");
    wav_16(&p, 4);
    let good = std::fs::read(&p).unwrap();
    // Canonical layout: RIFF header 0..12, 'fmt ' chunk at 12 (16 bytes), 'data' at 36.
    std::fs::write(&p, &good[..30]).unwrap();
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 12", "'fmt ' claims 16 bytes, but only 10 follow"],
    );
    std::fs::write(&p, &good[..36]).unwrap();
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 36", "without a 'data' chunk", "'fmt '"],
    );
    let mut odd = good[..36].to_vec();
    odd.extend_from_slice(b"LIST\x05\x00\x00\x00abcde\x00");
    odd.extend_from_slice(&good[36..]);
    let riff = (odd.len() - 8) as u32;
    odd[4..8].copy_from_slice(&riff.to_le_bytes());
    std::fs::write(&p, &odd).unwrap();
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 36", "chunk 'LIST' has an odd length (5 bytes)"],
    );
    std::fs::write(&p, b"").unwrap();
    fails(
        &p,
        &ReadOptions::default(),
        &["byte 0", "the file is empty"],
    );
}

/// Every cell written with its unit (`-0.004s,23.4V`): no delimiter makes rows of numbers of
/// it, and the message says why, naming the line and the cell.
#[test]
fn numbers_written_with_their_units() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "units.csv",
        b"t,v\n-0.004s,-0.018V\n-0.003999s,0.079V\n",
    );
    fails(
        &p,
        &ReadOptions::default(),
        &["line 2: '-0.004s' is a number with its unit after it"],
    );
}

#[test]
fn a_wav_extension_on_something_else() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "fake.wav", b"t,v\n0,1\n");
    fails(&p, &ReadOptions::default(), &["byte 0", "RIFF/WAVE"]);
}

#[test]
fn sidecar_with_a_missing_or_wrong_field() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("run7.wav");
    wav_16(&p, 4);
    let side = dir.path().join("run7.json");
    let opts = ReadOptions::default();
    let check = |json: &str, parts: &[&str]| {
        std::fs::write(&side, json).unwrap();
        let e = read_capture(&p, &opts).unwrap_err().to_string();
        assert!(
            e.starts_with(&side.display().to_string()),
            "names the sidecar: {e}"
        );
        for part in parts {
            assert!(e.contains(part), "'{part}' missing from: {e}");
        }
    };
    check(
        r#"{"channels": [{"name": "a"}, {"name": "b", "volts_per_full_scale": 1}]}"#,
        &["missing field `volts_per_full_scale`", "line 1"],
    );
    check(
        r#"{"channels": [{"name": "a", "volts_per_full_scale": "ten"},
                         {"name": "b", "volts_per_full_scale": 1}]}"#,
        &["invalid type", "line 1"],
    );
    check(
        r#"{"channels": [{"name": "a", "volts_per_full_scale": 1}]}"#,
        &["describes 1 channels but", "has 2"],
    );
    check(
        r#"{"sample_rate": 1e9, "channels": []}"#,
        &["unknown field `sample_rate`"],
    );
}

#[test]
fn raw_dump_without_rate_or_frames() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "dump.bin", &[1, 2, 3, 4]);
    let opts = ReadOptions {
        raw: Some(RawKind::I16),
        ..Default::default()
    };
    fails(&p, &opts, &["no sample rate", "dump.json"]);
    let p = write(dir.path(), "tiny.bin", &[1]);
    let opts = ReadOptions {
        raw: Some(RawKind::F32),
        dt_s: Some(1e-9),
        ..Default::default()
    };
    fails(&p, &opts, &["byte 0", "no complete frame"]);
    let mut nan = Vec::new();
    nan.extend_from_slice(&1.0f32.to_le_bytes());
    nan.extend_from_slice(&f32::NAN.to_le_bytes());
    let p = write(dir.path(), "nan.f32", &nan);
    fails(&p, &opts, &["byte 4", "expected a finite number"]);
}

#[test]
fn a_channel_that_does_not_exist() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "ok.csv", GOOD_ROWS.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    let e = select_channel(&cap, "v_gate").unwrap_err().to_string();
    assert_eq!(
        e,
        format!(
            "{}: no channel 'v_gate'; the channels are: v (1), i (2)",
            p.display()
        )
    );
    let opts = ReadOptions {
        scale: vec![("CH7".into(), 10.0)],
        ..Default::default()
    };
    fails(&p, &opts, &["no channel 'CH7'", "v (1), i (2)"]);
}
