//! Ctrl-C during a batch, inside one long capture and in `demo`: the run stops, says how far
//! it got, exits 130 (128 + SIGINT, common practice) and leaves the earlier report folder as
//! it was; a second Ctrl-C ends `demo` at once.
#![cfg(unix)]

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn sample_shot() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures/zener/shot-01.csv")
}

/// Waits for the child at most `limit`, killing it past that.
fn wait_with_limit(child: &mut std::process::Child, limit: Duration) -> std::process::ExitStatus {
    let start = Instant::now();
    loop {
        if let Some(s) = child.try_wait().unwrap() {
            return s;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            panic!("kickscan did not stop within {limit:?} of Ctrl-C");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// kickscan with `args`, its output captured.
fn start(args: &[&std::ffi::OsStr]) -> std::process::Child {
    Command::new(assert_cmd::cargo::cargo_bin("kickscan"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// `kickscan measure INPUT --json --out OUT`.
fn start_measure(input: &Path, out: &Path) -> std::process::Child {
    start(&[
        "measure".as_ref(),
        input.as_os_str(),
        "--json".as_ref(),
        "--out".as_ref(),
        out.as_os_str(),
    ])
}

/// `kickscan demo --captures CAPTURES --out OUT`.
fn start_demo(captures: &Path, out: &Path) -> std::process::Child {
    start(&[
        "demo".as_ref(),
        "--captures".as_ref(),
        captures.as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
    ])
}

/// Sends Ctrl-C (SIGINT) to the child.
fn ctrl_c(child: &std::process::Child) {
    let sent = Command::new("kill")
        .arg("-INT")
        .arg(child.id().to_string())
        .status()
        .unwrap();
    assert!(sent.success());
}

/// The child's exit code (`None` when a signal ended it) and its standard output and
/// error, once it has stopped (at most `limit` after the signal).
fn finish(mut child: std::process::Child, limit: Duration) -> (Option<i32>, Vec<u8>, String) {
    let status = wait_with_limit(&mut child, limit);
    let output = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    (status.code(), output.stdout, stderr)
}

/// A report folder kickscan wrote earlier (its marker and a page), at `root/report`.
fn earlier_report(root: &Path) -> std::path::PathBuf {
    let out = root.join("report");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join(".kickscan-report"), "written by kickscan\n").unwrap();
    std::fs::write(out.join("report.html"), "the earlier report\n").unwrap();
    out
}

/// The numbers of the `interrupted: M of N files measured; no report written` line.
fn interrupted_counts(stderr: &str) -> (usize, usize) {
    let line = stderr
        .lines()
        .find(|l| l.starts_with("interrupted: "))
        .unwrap_or_else(|| panic!("no 'interrupted' line in: {stderr}"));
    assert!(
        line.ends_with(" files measured; no report written"),
        "{line}"
    );
    let mut words = line.trim_start_matches("interrupted: ").split(' ');
    let measured = words.next().unwrap().parse().unwrap();
    assert_eq!(words.next(), Some("of"), "{line}");
    let total = words.next().unwrap().parse().unwrap();
    (measured, total)
}

#[test]
fn ctrl_c_stops_the_batch_and_keeps_the_old_report() {
    let root = tempfile::tempdir().unwrap();
    let inputs = root.path().join("captures");
    std::fs::create_dir(&inputs).unwrap();
    let out = earlier_report(root.path());

    let mut n_files = 0;
    let (stdout, stderr) = interrupted_while_busy(
        |target| {
            while n_files < target {
                std::fs::copy(sample_shot(), inputs.join(format!("shot-{n_files:04}.csv")))
                    .unwrap();
                n_files += 1;
            }
        },
        || start_measure(&inputs, &out),
    );
    let (measured, total) = interrupted_counts(&stderr);
    assert_eq!(total, n_files, "{stderr}");
    assert!(measured < n_files, "{stderr}");
    assert!(stdout.is_empty(), "no half document on stdout");
    assert_old_report_kept(root.path(), &out);
}

/// Runs a batch grown by `grow(n)` to 120 files, then 240 and 480 on retries, with Ctrl-C
/// sent a moment after `start`, until a run is ended by it (exit 130): that run's standard
/// output and error. A retry comes when the run finished before the signal (a fast
/// machine) or the signal came before the handler was installed (a slow start on a loaded
/// machine: the default action ended it, no exit code); it then waits longer too.
fn interrupted_while_busy(
    mut grow: impl FnMut(usize),
    start: impl Fn() -> std::process::Child,
) -> (Vec<u8>, String) {
    for attempt in 0..3 {
        grow(120 << attempt);
        let child = start();
        // Past process start-up, so the handler is installed when the signal arrives.
        std::thread::sleep(Duration::from_millis(800 + 400 * attempt));
        ctrl_c(&child);
        let (code, stdout, stderr) = finish(child, Duration::from_secs(60));
        match code {
            Some(130) => return (stdout, stderr),
            Some(0) | None => continue,
            other => panic!("exit {other:?}; stderr: {stderr}"),
        }
    }
    panic!("the run always finished before Ctrl-C arrived, or it arrived before start-up");
}

/// Copies `from` (a folder of files and folders) into `to`.
fn copy_tree(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_tree(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// Whether the captures and the report folder are all the root holds, the report still the
/// earlier one: nothing half-written, no temporary folder left behind.
fn assert_old_report_kept(root: &Path, out: &Path) {
    assert_eq!(
        std::fs::read_to_string(out.join("report.html")).unwrap(),
        "the earlier report\n"
    );
    let mut names: Vec<String> = std::fs::read_dir(root)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["captures", "report"]);
}

/// `demo` on the bundled scenario with the zener folder padded out with copies of one shot,
/// so the run is still measuring when the signal comes: the first Ctrl-C ends it after the
/// files under way, with a line saying how far it got, exit 130 and the earlier report kept.
#[test]
fn ctrl_c_stops_the_demo_and_keeps_the_old_report() {
    let root = tempfile::tempdir().unwrap();
    let captures = root.path().join("captures");
    copy_tree(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures"),
        &captures,
    );
    let out = earlier_report(root.path());

    let mut n_copies = 0;
    let (stdout, stderr) = interrupted_while_busy(
        |target| {
            while n_copies < target {
                let copy = captures.join(format!("zener/copy-{n_copies:04}.csv"));
                std::fs::copy(sample_shot(), copy).unwrap();
                n_copies += 1;
            }
        },
        || start_demo(&captures, &out),
    );
    let (measured, total) = interrupted_counts(&stderr);
    // The scenario's captures (`ls sample-captures/*/` without the .json sidecars: 18 in
    // the variant and current folders, the bare/loaded pair) and the copies.
    assert_eq!(total, 20 + n_copies, "{stderr}");
    assert!(measured < total, "{stderr}");
    assert!(stdout.is_empty(), "no results on stdout: {stderr}");
    assert_old_report_kept(root.path(), &out);
}

/// Writes a mono 16-bit WAV of `n` samples at 1 MSa/s whose sample `k` is `volts(k)`
/// on 100 V full scale.
fn write_wav(path: &Path, n: usize, volts: impl Fn(usize) -> f64) {
    use std::io::Write;
    let mut w = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let data = (2 * n) as u32;
    w.write_all(b"RIFF").unwrap();
    w.write_all(&(36 + data).to_le_bytes()).unwrap();
    w.write_all(b"WAVEfmt ").unwrap();
    w.write_all(&16u32.to_le_bytes()).unwrap();
    w.write_all(&1u16.to_le_bytes()).unwrap(); // PCM
    w.write_all(&1u16.to_le_bytes()).unwrap(); // mono
    w.write_all(&1_000_000u32.to_le_bytes()).unwrap();
    w.write_all(&2_000_000u32.to_le_bytes()).unwrap();
    w.write_all(&2u16.to_le_bytes()).unwrap();
    w.write_all(&16u16.to_le_bytes()).unwrap();
    w.write_all(b"data").unwrap();
    w.write_all(&data.to_le_bytes()).unwrap();
    for k in 0..n {
        let code = (volts(k) / 100.0 * 32767.0).round() as i16;
        w.write_all(&code.to_le_bytes()).unwrap();
    }
}

/// A capture held whole in memory (with its sidecar: 100 V full scale, 1 MSa/s) of `n`
/// samples switching off every 5000 samples into a ringing 24 V level, with a little
/// deterministic wobble so the levels have a spread to measure. WAV reads fast, so a
/// signal sent a moment after start finds the run measuring it, a step that only ends when
/// done.
fn write_long_capture(path: &Path, n: usize) {
    write_wav(path, n, |k| {
        // Every 5000 samples: on for 1000, then a ring of 100-sample period decaying over
        // 800 samples (invented shape), which gives the model fit of each of the 200 events
        // real work.
        let x = k % 5000;
        let v = if x < 1000 {
            0.2
        } else {
            let t = (x - 1000) as f64;
            24.0 + 40.0 * (-t / 800.0).exp() * (std::f64::consts::TAU * t / 100.0).sin()
        };
        v + 0.01 * ((k % 7) as f64 - 3.0)
    });
    std::fs::write(
        path.with_extension("json"),
        r#"{"sample_rate_hz": 1e6, "t0_s": 0.0, "channels": [{"name": "v", "unit": "V",
            "volts_per_full_scale": 100.0, "offset_v": 0.0}]}"#,
    )
    .unwrap();
}

/// A second Ctrl-C ends the demo at once, in the middle of measuring a long capture: exit
/// 130 without the line a finished step prints, and the earlier report kept.
#[test]
fn a_second_ctrl_c_ends_the_demo_at_once() {
    let root = tempfile::tempdir().unwrap();
    let captures = root.path().join("captures");
    std::fs::create_dir_all(captures.join("long")).unwrap();
    std::fs::create_dir_all(captures.join("short")).unwrap();
    std::fs::copy(sample_shot(), captures.join("short/shot-01.csv")).unwrap();
    std::fs::write(
        captures.join("scenario.json"),
        r#"{"title": "one long capture", "supply_v": 24.0, "rating_v": 60.0,
            "inductance_h": null,
            "variants": [{"label": "long", "folder": "long"},
                         {"label": "short", "folder": "short"}]}"#,
    )
    .unwrap();
    let out = earlier_report(root.path());

    for attempt in 0..3 {
        // Held whole in memory (longer captures are streamed and stop at the first Ctrl-C).
        write_long_capture(&captures.join("long/long.wav"), 1_000_000);
        let child = start_demo(&captures, &out);
        std::thread::sleep(Duration::from_millis(800 + 400 * attempt));
        for _ in 0..2 {
            ctrl_c(&child);
            // Apart enough that the two signals are not merged into one pending signal.
            std::thread::sleep(Duration::from_millis(200));
        }
        let (code, stdout, stderr) = finish(child, Duration::from_secs(60));
        match code {
            Some(130) if !stderr.contains("interrupted: ") => {
                assert!(stdout.is_empty());
                assert_old_report_kept(root.path(), &out);
                return;
            }
            // The long capture was measured before the second signal came (a fast machine),
            // the run finished, or the signal beat the handler: again, longer.
            Some(130) | Some(0) | None => continue,
            other => panic!("exit {other:?}; stderr: {stderr}"),
        }
    }
    panic!("the second Ctrl-C never ended the demo while it measured the long capture");
}

/// A 16-bit WAV of `n` samples at 1 MSa/s: a turn-off every 100 000 samples (on at 0 V for
/// 20 000 samples, then 24 V plus a decaying 5 kHz ring), invented demo data.
fn write_ringing_wav(path: &Path, n: usize) {
    write_wav(path, n, |k| {
        let x = k % 100_000;
        if x < 20_000 {
            0.0
        } else {
            let t = (x - 20_000) as f64 * 1e-6;
            24.0 + 60.0 * (-t / 2e-4).exp() * (std::f64::consts::TAU * 5e3 * t).sin()
        }
    });
}

/// Ctrl-C while one long capture is being measured: the streaming passes poll the stop flag
/// between blocks, so the run stops inside the file, says no file was measured, writes no
/// report and exits 130.
#[test]
fn ctrl_c_inside_one_long_capture_stops_it() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("report");
    // Long enough that a debug build is still inside the file when the signal comes; longer
    // on a retry if a fast machine finished first.
    for (attempt, n) in [30_000_000usize, 120_000_000].into_iter().enumerate() {
        let wav = dir.path().join(format!("long-{attempt}.wav"));
        write_ringing_wav(&wav, n);
        let child = start_measure(&wav, &out);
        // Past process start-up, so the handler is installed when the signal arrives.
        std::thread::sleep(Duration::from_millis(700));
        ctrl_c(&child);
        let (code, stdout, stderr) = finish(child, Duration::from_secs(120));
        assert_eq!(code, Some(130), "stderr: {stderr}");
        assert!(stdout.is_empty(), "no results on stdout");
        assert!(!out.exists(), "no report folder");
        match interrupted_counts(&stderr) {
            (0, 1) => return,
            // The file was finished before the signal arrived: try a longer one.
            (1, 1) => std::fs::remove_file(&wav).unwrap(),
            other => panic!("{other:?}: {stderr}"),
        }
    }
    panic!("the capture was always measured before the signal arrived");
}
