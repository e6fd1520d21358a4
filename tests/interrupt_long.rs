//! Ctrl-C while one long capture is being measured: the run stops inside the file (the
//! streaming passes poll the stop flag between blocks), says that no file was measured,
//! writes no report and exits 130 (128 + SIGINT, common practice).
#![cfg(unix)]

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A 16-bit WAV of `n` samples at 1 MSa/s: a turn-off every 100 000 samples (on at 0 V for
/// 20 000 samples, then 24 V plus a decaying 5 kHz ring), invented demo data.
fn write_wav(path: &std::path::Path, n: usize) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let data = (2 * n) as u32;
    f.write_all(b"RIFF").unwrap();
    f.write_all(&(36 + data).to_le_bytes()).unwrap();
    f.write_all(b"WAVEfmt ").unwrap();
    f.write_all(&16u32.to_le_bytes()).unwrap();
    f.write_all(&1u16.to_le_bytes()).unwrap(); // PCM
    f.write_all(&1u16.to_le_bytes()).unwrap(); // mono
    f.write_all(&1_000_000u32.to_le_bytes()).unwrap();
    f.write_all(&2_000_000u32.to_le_bytes()).unwrap();
    f.write_all(&2u16.to_le_bytes()).unwrap();
    f.write_all(&16u16.to_le_bytes()).unwrap();
    f.write_all(b"data").unwrap();
    f.write_all(&data.to_le_bytes()).unwrap();
    let mut buf = Vec::with_capacity(1 << 16);
    for k in 0..n {
        let x = k % 100_000;
        let v = if x < 20_000 {
            0.0
        } else {
            let t = (x - 20_000) as f64 * 1e-6;
            24.0 + 60.0 * (-t / 2e-4).exp() * (std::f64::consts::TAU * 5e3 * t).sin()
        };
        // 100 V full scale.
        let code = (v / 100.0 * 32767.0).round() as i16;
        buf.extend_from_slice(&code.to_le_bytes());
        if buf.len() >= 1 << 16 {
            f.write_all(&buf).unwrap();
            buf.clear();
        }
    }
    f.write_all(&buf).unwrap();
}

#[test]
fn ctrl_c_inside_one_long_capture_stops_it() {
    let bin = assert_cmd::cargo::cargo_bin("kickscan");
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("report");
    // Long enough that a debug build is still inside the file when the signal comes; longer
    // on a retry if a fast machine finished first.
    for (attempt, n) in [30_000_000usize, 120_000_000].into_iter().enumerate() {
        let wav = dir.path().join(format!("long-{attempt}.wav"));
        write_wav(&wav, n);
        let mut child = Command::new(&bin)
            .arg("measure")
            .arg(&wav)
            .arg("--json")
            .arg("--out")
            .arg(&out)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Past process start-up, so the handler is installed when the signal arrives.
        std::thread::sleep(Duration::from_millis(700));
        let sent = Command::new("kill")
            .arg("-INT")
            .arg(child.id().to_string())
            .status()
            .unwrap();
        assert!(sent.success());
        let start = Instant::now();
        let status = loop {
            if let Some(s) = child.try_wait().unwrap() {
                break s;
            }
            if start.elapsed() > Duration::from_secs(120) {
                let _ = child.kill();
                panic!("kickscan did not stop after Ctrl-C");
            }
            std::thread::sleep(Duration::from_millis(20));
        };
        let output = child.wait_with_output().unwrap();
        let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
        assert_eq!(status.code(), Some(130), "stderr: {stderr}");
        assert!(output.stdout.is_empty(), "no results on stdout");
        assert!(!out.exists(), "no report folder");
        if stderr.contains("interrupted: 0 of 1 files measured") {
            return;
        }
        // The file was finished before the signal arrived: try a longer one.
        assert!(stderr.contains("interrupted: 1 of 1"), "stderr: {stderr}");
        std::fs::remove_file(&wav).unwrap();
    }
    panic!("the capture was always measured before the signal arrived");
}
