//! Ctrl-C during a batch: the run stops starting files, says how far it got, exits 130
//! (128 + SIGINT, common practice) and leaves the earlier report folder as it was.
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

#[test]
fn ctrl_c_stops_the_batch_and_keeps_the_old_report() {
    let bin = assert_cmd::cargo::cargo_bin("kickscan");
    let root = tempfile::tempdir().unwrap();
    let inputs = root.path().join("captures");
    std::fs::create_dir(&inputs).unwrap();
    // An earlier report: a folder kickscan wrote (its marker) with a page in it.
    let out = root.path().join("report");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join(".kickscan-report"), "written by kickscan\n").unwrap();
    std::fs::write(out.join("report.html"), "the earlier report\n").unwrap();

    // Enough files that the batch is still running when the signal comes; more on a retry
    // if a fast machine finished first.
    let mut n_files = 0;
    for attempt in 0..3 {
        let target = 120 << attempt;
        while n_files < target {
            std::fs::copy(sample_shot(), inputs.join(format!("shot-{n_files:04}.csv"))).unwrap();
            n_files += 1;
        }
        let mut child = Command::new(&bin)
            .arg("measure")
            .arg(&inputs)
            .arg("--json")
            .arg("--out")
            .arg(&out)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Past process start-up, so the handler is installed when the signal arrives.
        std::thread::sleep(Duration::from_millis(800 + 400 * attempt));
        let sent = Command::new("kill")
            .arg("-INT")
            .arg(child.id().to_string())
            .status()
            .unwrap();
        assert!(sent.success());
        let status = wait_with_limit(&mut child, Duration::from_secs(60));
        let output = child.wait_with_output().unwrap();
        let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
        match status.code() {
            Some(130) => {
                let line = stderr
                    .lines()
                    .find(|l| l.starts_with("interrupted: "))
                    .unwrap_or_else(|| panic!("no 'interrupted' line in: {stderr}"));
                let measured: usize = line
                    .trim_start_matches("interrupted: ")
                    .split(' ')
                    .next()
                    .unwrap()
                    .parse()
                    .unwrap();
                assert!(measured < n_files, "{line}");
                assert!(
                    line.ends_with(&format!(" of {n_files} files measured; no report written")),
                    "{line}"
                );
                assert!(output.stdout.is_empty(), "no half document on stdout");
                assert_eq!(
                    std::fs::read_to_string(out.join("report.html")).unwrap(),
                    "the earlier report\n"
                );
                // Nothing else beside the report: no temporary folder left behind.
                let mut names: Vec<String> = std::fs::read_dir(root.path())
                    .unwrap()
                    .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
                    .collect();
                names.sort();
                assert_eq!(names, ["captures", "report"]);
                return;
            }
            // Finished before the signal came: try again with more files.
            Some(0) => continue,
            // The signal came before the handler was installed (a slow start on a loaded
            // machine): the default action ended it. Try again, waiting longer.
            None => continue,
            other => panic!("exit {other:?} (status {status}); stderr: {stderr}"),
        }
    }
    panic!("the batch always finished before Ctrl-C arrived, or it arrived before start-up");
}
