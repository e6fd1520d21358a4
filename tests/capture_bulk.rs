//! The bulk readers against independent references: WAV data decoded in runs of frames
//! gives what `hound`'s own per-sample reader gives (the reader kickscan used before), in
//! every sample layout, across block boundaries, and with the same errors; long CSV files
//! read in parallel pieces give the values written and exact line numbers.

use std::io::Cursor;
use std::path::{Path, PathBuf};

use kickscan::capture::{open_blocks, read_capture, Block, CaptureError, ReadOptions};

fn write(dir: &Path, name: &str, content: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, content).unwrap();
    p
}

/// An invented test pattern of codes for `bits`-bit samples: a ramp through the whole
/// range, both extremes included, and a few values near zero.
fn codes(n: usize, bits: u16) -> Vec<i32> {
    let top = (1i64 << (bits - 1)) - 1;
    let bottom = -(1i64 << (bits - 1));
    (0..n)
        .map(|k| match k % 7 {
            0 => top,
            1 => bottom,
            2 => -1,
            3 => 0,
            _ => bottom + ((k as i64 * 7919) % (top - bottom + 1)),
        } as i32)
        .collect()
}

/// A WAV of interleaved codes, `bytes` per stored sample (24-bit samples in 3 or 4).
fn int_wav(spec: hound::WavSpec, bytes: u16, samples: &[i32]) -> Vec<u8> {
    let mut cur = Cursor::new(Vec::new());
    let spec_ex = hound::WavSpecEx {
        spec,
        bytes_per_sample: bytes,
    };
    let mut w = hound::WavWriter::new_with_spec_ex(&mut cur, spec_ex).unwrap();
    for &s in samples {
        w.write_sample(s).unwrap();
    }
    w.finalize().unwrap();
    cur.into_inner()
}

/// Channels as `hound` reads them, each code as a fraction of full scale (code / 2^(bits-1),
/// as kickscan documents for WAV files without a sidecar).
fn hound_fractions(bytes: &[u8]) -> Vec<Vec<f64>> {
    let mut r = hound::WavReader::new(Cursor::new(bytes)).unwrap();
    let spec = r.spec();
    let nch = usize::from(spec.channels);
    let mut out = vec![Vec::new(); nch];
    match spec.sample_format {
        hound::SampleFormat::Int => {
            let scale = 0.5f64.powi(i32::from(spec.bits_per_sample) - 1);
            for (k, s) in r.samples::<i32>().enumerate() {
                out[k % nch].push(f64::from(s.unwrap()) * scale);
            }
        }
        hound::SampleFormat::Float => {
            for (k, s) in r.samples::<f32>().enumerate() {
                out[k % nch].push(f64::from(s.unwrap()));
            }
        }
    }
    out
}

/// Where the samples start: after the `data` chunk's 8-byte header (hound writes a longer
/// `fmt ` chunk for float and extensible files).
fn data_start(wav: &[u8]) -> usize {
    wav.windows(4).position(|w| w == b"data").unwrap() + 8
}

fn spec(channels: u16, bits: u16, float: bool) -> hound::WavSpec {
    hound::WavSpec {
        channels,
        sample_rate: 1_000_000,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    }
}

/// (bits, bytes per stored sample, channels): 8-bit unsigned, 16, 24 in 3 and in 4 bytes
/// (WAVE_FORMAT_EXTENSIBLE), 32.
const INTEGER_LAYOUTS: [(u16, u16, u16); 5] =
    [(8, 1, 1), (16, 2, 2), (24, 3, 3), (24, 4, 2), (32, 4, 1)];

/// Frames in each layout's test file: past one block of 65 536.
const LAYOUT_FRAMES: usize = 70_001;

/// A WAV of the test pattern in one layout, written to `dir`: its path and bytes.
fn layout_wav(dir: &Path, (bits, bytes, nch): (u16, u16, u16)) -> (PathBuf, Vec<u8>) {
    let wav = int_wav(
        spec(nch, bits, false),
        bytes,
        &codes(LAYOUT_FRAMES * nch as usize, bits),
    );
    (write(dir, &format!("i{bits}_{bytes}_{nch}.wav"), &wav), wav)
}

#[test]
fn every_integer_layout_reads_as_hound_reads_it() {
    let dir = tempfile::tempdir().unwrap();
    for (bits, bytes, nch) in INTEGER_LAYOUTS {
        let (p, wav) = layout_wav(dir.path(), (bits, bytes, nch));
        let cap = read_capture(&p, &ReadOptions::default()).unwrap();
        let want = hound_fractions(&wav);
        assert_eq!(cap.channels.len(), usize::from(nch));
        for (ch, w) in cap.channels.iter().zip(&want) {
            assert_eq!(ch.samples.len(), LAYOUT_FRAMES);
            assert!(
                ch.samples
                    .iter()
                    .zip(w)
                    .all(|(a, b)| a.to_bits() == b.to_bits()),
                "{bits}-bit in {bytes} bytes, channel {}",
                ch.name
            );
        }
    }
}

#[test]
fn float_samples_and_small_blocks_read_as_hound_reads_them() {
    let dir = tempfile::tempdir().unwrap();
    let mut cur = Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec(2, 32, true)).unwrap();
    for k in 0..20_000 {
        w.write_sample(((k as f32) * 0.37).sin() * 1.5).unwrap();
    }
    w.finalize().unwrap();
    let wav = cur.into_inner();
    let p = write(dir.path(), "f32.wav", &wav);
    let want = hound_fractions(&wav);
    // Blocks of 777 frames: every block boundary falls somewhere new in the data.
    let mut r = open_blocks(&p, &ReadOptions::default()).unwrap();
    r.set_block_len(777);
    let mut got = vec![Vec::new(), Vec::new()];
    let mut block = Block::default();
    while r.next_block_into(&mut block).unwrap() {
        assert!(block.len() <= 777);
        for (all, part) in got.iter_mut().zip(&block.channels) {
            all.extend_from_slice(part);
        }
    }
    assert_eq!(got, want);
}

#[test]
fn a_stored_nan_names_its_byte() {
    let dir = tempfile::tempdir().unwrap();
    let mut cur = Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec(1, 32, true)).unwrap();
    for k in 0..100 {
        w.write_sample(if k == 60 { f32::NAN } else { 0.5 })
            .unwrap();
    }
    w.finalize().unwrap();
    let wav = cur.into_inner();
    let p = write(dir.path(), "nan.wav", &wav);
    let e = read_capture(&p, &ReadOptions::default()).unwrap_err();
    // Sample 60 starts 240 bytes into the data.
    let CaptureError::Binary {
        offset, message, ..
    } = e
    else {
        panic!("expected a byte offset");
    };
    assert_eq!(offset, (data_start(&wav) + 60 * 4) as u64);
    assert!(
        message.contains("sample is NaN; expected a finite number"),
        "{message}"
    );
}

#[test]
fn a_wav_cut_inside_a_frame_counts_the_whole_frames() {
    let dir = tempfile::tempdir().unwrap();
    let mut wav = int_wav(spec(3, 16, false), 2, &codes(3 * 100_000, 16));
    let full = wav.len();
    // Cut 70 001 frames and 2 bytes in: 70 001 whole frames of 6 bytes after the header.
    wav.truncate(data_start(&wav) + 70_001 * 6 + 2);
    let p = write(dir.path(), "cut.wav", &wav);
    let e = read_capture(&p, &ReadOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains(&format!(
            "byte {}: the file ends inside the sample data: the header promises 100000 frames, only 70001 are complete",
            wav.len()
        )),
        "{e} (file was {full} bytes)"
    );
}

#[test]
fn a_long_csv_read_in_parallel_pieces_keeps_values_and_lines() {
    // 300 000 rows (about 7 MB: several chunks, each cut into pieces), blank lines and
    // CRLF ends sprinkled in; values are the ones written.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("time_s,v_sw,i_coil\r\n");
    let mut line = 2usize;
    let mut bad_line = 0;
    for k in 0..300_000usize {
        if k % 9_973 == 0 {
            text.push_str("\r\n");
            line += 1;
        }
        let v = (k % 1000) as f64 * 0.0625 - 20.0;
        text.push_str(&format!("{:.9e},{v:.4},{}\r\n", k as f64 * 2e-8, k % 13));
        if k == 299_000 {
            bad_line = line;
        }
        line += 1;
    }
    let p = write(dir.path(), "long.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    let v = &cap.channels[0].samples;
    assert_eq!(v.len(), 300_000);
    assert!(v
        .iter()
        .enumerate()
        .all(|(k, &x)| x == (k % 1000) as f64 * 0.0625 - 20.0));
    assert!(cap.channels[1]
        .samples
        .iter()
        .enumerate()
        .all(|(k, &x)| x == (k % 13) as f64));
    // The same file with one bad cell near its end: its line, counted through the blank
    // lines, in the last chunk.
    let broken = text.replacen(
        &format!("{:.9e},", 299_000.0 * 2e-8),
        &format!("{:.9e},x", 299_000.0 * 2e-8),
        1,
    );
    let p = write(dir.path(), "broken.csv", broken.as_bytes());
    let e = read_capture(&p, &ReadOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains(&format!("line {bad_line}, column 2: 'x")),
        "{e} (expected line {bad_line})"
    );
}

#[test]
fn jitter_across_pieces_is_counted_once_and_first_seen_first() {
    // 200 000 rows at 1 us, every 10 000th step 5 % long (then back on the grid): 19
    // jittered steps in pairs, spread over every piece; the first is row 10 000, line 10 002.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,v\n");
    for k in 0..200_000usize {
        let late = if k % 10_000 == 0 && k > 0 { 0.05 } else { 0.0 };
        text.push_str(&format!("{:.9e},1.5\n", (k as f64 + late) * 1e-6));
    }
    let p = write(dir.path(), "jitter.csv", text.as_bytes());
    let cap = read_capture(&p, &ReadOptions::default()).unwrap();
    let w = cap.warnings.join("\n");
    // Each late row makes two uneven steps (long, then short): 2 x 19.
    assert!(
        w.contains("at 38 of 199999 steps (first on line 10002"),
        "{w}"
    );
}

/// What [`BlockReader::next_coded`] hands over: every value, and each run's extremes beside
/// the smallest and largest of its values worked out here.
#[derive(Default)]
struct Coded {
    values: Vec<f64>,
    runs: usize,
}

impl kickscan::capture::TakeValues for Coded {
    fn take_values(
        &mut self,
        len: usize,
        extremes: Option<(f64, f64)>,
        value: impl Fn(usize) -> f64,
    ) {
        let run: Vec<f64> = (0..len).map(value).collect();
        let lo = run.iter().copied().reduce(f64::min);
        let hi = run.iter().copied().reduce(f64::max);
        assert_eq!(extremes, lo.zip(hi), "run {}", self.runs);
        self.values.extend(run);
        self.runs += 1;
    }
}

/// Every integer layout read as stored codes (the survey of a long binary capture's first
/// read) gives, channel by channel, what `hound` reads times the `--scale` factor, in
/// blocks of 777 frames that end anywhere; the reader then says the capture has ended.
#[test]
fn every_integer_layout_read_as_codes_gives_what_hound_reads() {
    let dir = tempfile::tempdir().unwrap();
    for (bits, bytes, nch) in INTEGER_LAYOUTS {
        let (p, wav) = layout_wav(dir.path(), (bits, bytes, nch));
        let want = hound_fractions(&wav);
        for ch in 0..usize::from(nch) {
            let factor = -2.5;
            let opts = ReadOptions {
                scale: vec![(format!("CH{}", ch + 1), factor)],
                ..Default::default()
            };
            let mut r = open_blocks(&p, &opts).unwrap();
            r.set_block_len(777);
            let mut got = Coded::default();
            let mut look = |c: &kickscan::capture::CodedChannel| c.hand_to(&mut got);
            while r.next_coded(ch, &mut look).unwrap() != Some(0) {}
            assert_eq!(r.samples_read(), LAYOUT_FRAMES as u64);
            let want: Vec<u64> = want[ch].iter().map(|x| (x * factor).to_bits()).collect();
            let bits_got: Vec<u64> = got.values.iter().map(|x| x.to_bits()).collect();
            assert!(
                bits_got == want,
                "{bits}-bit in {bytes} bytes, channel {ch}"
            );
            assert_eq!(got.runs, LAYOUT_FRAMES.div_ceil(777));
        }
    }
}

/// Float samples are not read as codes (their order is not kept by a comparison of
/// integers, and a NaN must be refused); a file cut short gives the error a block would.
#[test]
fn codes_are_refused_for_floats_and_a_cut_file_ends_as_blocks_do() {
    let dir = tempfile::tempdir().unwrap();
    let mut cur = Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec(1, 32, true)).unwrap();
    for k in 0..100 {
        w.write_sample(k as f32).unwrap();
    }
    w.finalize().unwrap();
    let p = write(dir.path(), "f32.wav", &cur.into_inner());
    let mut r = open_blocks(&p, &ReadOptions::default()).unwrap();
    assert!(r.next_coded(0, &mut |_| {}).unwrap().is_none());

    let mut wav = int_wav(spec(3, 16, false), 2, &codes(3 * 100_000, 16));
    wav.truncate(data_start(&wav) + 70_001 * 6 + 2);
    let p = write(dir.path(), "cut.wav", &wav);
    let mut r = open_blocks(&p, &ReadOptions::default()).unwrap();
    let e = loop {
        match r.next_coded(1, &mut |_| {}) {
            Ok(Some(n)) => assert!(n > 0, "ended without an error"),
            Ok(None) => panic!("16-bit codes refused"),
            Err(e) => break e.to_string(),
        }
    };
    assert!(
        e.contains(&format!(
            "byte {}: the file ends inside the sample data: the header promises 100000 frames, only 70001 are complete",
            wav.len()
        )),
        "{e}"
    );
}
