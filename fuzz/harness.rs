//! What each fuzz target does with its bytes, shared by the targets under `fuzz_targets/`
//! (cargo fuzz, nightly) and by `tests/fuzz_replay.rs`, which replays the committed corpus
//! on stable Rust. A panic anywhere is a failure; errors are fine. Results must hold no NaN
//! or infinity (DESIGN.md: nulls, never NaN).

#![allow(dead_code)] // each fuzz target uses one of these

use std::path::{Path, PathBuf};

use kickscan::capture::{read_capture, RawKind, ReadOptions};
use kickscan::pipeline::{measure_file, Settings, METRICS};

/// A scratch folder per process and thread (fuzzing runs one process per job; the corpus
/// replay may run its tests as threads of one process).
fn scratch_path() -> PathBuf {
    let thread = format!("{:?}", std::thread::current().id());
    let thread: String = thread.chars().filter(char::is_ascii_digit).collect();
    std::env::temp_dir().join(format!("kickscan-fuzz-{}-{thread}", std::process::id()))
}

fn scratch() -> PathBuf {
    let dir = scratch_path();
    let _ = std::fs::create_dir_all(&dir);
    dir
}

/// Removes this thread's scratch folder (the corpus replay calls it when done, so test
/// runs leave nothing in the temporary folder).
pub fn remove_scratch() {
    let _ = std::fs::remove_dir_all(scratch_path());
}

fn write(name: &str, bytes: &[u8]) -> PathBuf {
    let p = scratch().join(name);
    std::fs::write(&p, bytes).expect("scratch file");
    p
}

fn check_capture(p: &Path, opts: &ReadOptions) {
    if let Ok(cap) = read_capture(p, opts) {
        assert!(cap.sample_interval_s.is_finite() && cap.sample_interval_s > 0.0);
        assert!(cap.t0_s.is_finite());
        for ch in &cap.channels {
            assert!(
                ch.samples.iter().all(|x| x.is_finite()),
                "non-finite sample"
            );
        }
    }
}

/// Delimited text: the sniffer and the row reader, as sniffed and with a forced time base.
pub fn csv(bytes: &[u8]) {
    let p = write("in.csv", bytes);
    check_capture(&p, &ReadOptions::default());
    let opts = ReadOptions {
        dt_s: Some(1e-9),
        ..ReadOptions::default()
    };
    check_capture(&p, &opts);
}

/// A WAV file without a sidecar.
pub fn wav(bytes: &[u8]) {
    let _ = std::fs::remove_file(scratch().join("in.json"));
    let p = write("in.wav", bytes);
    check_capture(&p, &ReadOptions::default());
}

/// A valid 16-bit WAV of 64 frames with the bytes as its sidecar, and the same sidecar
/// beside a raw dump.
pub fn sidecar(bytes: &[u8]) {
    let mut wav = Vec::new();
    let fmt: [u16; 8] = [1, 1, 0x4240, 0x000F, 0x8480, 0x001E, 2, 16];
    let data: Vec<u8> = (0..64i16)
        .flat_map(|k| (k * 500 - 16000).to_le_bytes())
        .collect();
    wav.extend_from_slice(b"RIFF");
    wav.extend_from_slice(&(4 + 8 + 16 + 8 + data.len() as u32).to_le_bytes());
    wav.extend_from_slice(b"WAVEfmt ");
    wav.extend_from_slice(&16u32.to_le_bytes());
    for w in fmt {
        wav.extend_from_slice(&w.to_le_bytes());
    }
    wav.extend_from_slice(b"data");
    wav.extend_from_slice(&(data.len() as u32).to_le_bytes());
    wav.extend_from_slice(&data);
    write("side.json", bytes);
    let p = write("side.wav", &wav);
    check_capture(&p, &ReadOptions::default());
    let p = write("side.bin", &data);
    check_capture(&p, &ReadOptions::default());
}

/// `parse_si` with and without an expected unit: a value it accepts is finite.
pub fn si(bytes: &[u8]) {
    let text = String::from_utf8_lossy(bytes);
    for unit in [None, Some("V"), Some("Hz"), Some("s"), Some("ohm")] {
        if let Ok(x) = kickscan::units::parse_si(&text, unit) {
            assert!(x.is_finite(), "parse_si({text:?}) = {x}");
        }
    }
}

/// The whole measurement (levels, events, per-event figures, model fit, plot sketch) on the
/// bytes read as 16-bit samples 1 us apart; the first byte picks the options. Returns the
/// number of events measured.
pub fn measure(bytes: &[u8]) -> usize {
    let Some((&mode, samples)) = bytes.split_first() else {
        return 0;
    };
    let p = write("in.i16", samples);
    let mut settings = Settings {
        read: ReadOptions {
            dt_s: Some(1e-6),
            raw: Some(RawKind::I16),
            scale: vec![("1".to_string(), 100.0)],
            ..ReadOptions::default()
        },
        ..Settings::default()
    };
    if mode & 1 != 0 {
        settings.measure.supply_v = Some(24.0);
    }
    if mode & 2 != 0 {
        settings.measure.inductance_h = Some(1e-3);
        settings.measure.coil_current_a = Some(0.5);
    }
    if mode & 4 != 0 {
        settings.measure.max_window_s = Some(50e-6);
    }
    if mode & 8 != 0 {
        settings.no_fit = true;
    }
    let Ok((doc, _)) = measure_file(&p, &settings, mode & 16 != 0) else {
        return 0;
    };
    for e in &doc.events {
        for x in [
            e.t_edge_s,
            e.v_on,
            e.v_off,
            e.peak_v,
            e.switch_stress_v,
            e.overshoot_v,
            e.t_peak_s,
            e.volt_seconds,
            e.window_s,
        ] {
            assert!(x.is_finite(), "event {}: {e:?}", e.index);
        }
        for (name, get) in METRICS {
            if let Some(x) = get(e) {
                assert!(x.is_finite(), "event {}: {name} = {x}", e.index);
            }
        }
    }
    doc.events.len()
}
