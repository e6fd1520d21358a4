//! The bad-input corpus (`tests/bad-inputs/`, written by its `generate.py`) through the
//! binary: no panic (exit 1 for a refused input, never 101), one message naming the file and
//! the place, and exactly the message fragments README.md's "Troubleshooting" table shows.

use std::path::{Path, PathBuf};
use std::process::Output;
use std::time::Duration;

use assert_cmd::Command;

fn corpus() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad-inputs")
}

fn kickscan(args: &[&str]) -> Output {
    Command::cargo_bin("kickscan")
        .unwrap()
        .args(args)
        .timeout(Duration::from_secs(120))
        .output()
        .unwrap()
}

fn code(o: &Output) -> i32 {
    let c = o.status.code().expect("killed by a signal (a crash?)");
    assert_ne!(c, 101, "panic: {}", String::from_utf8_lossy(&o.stderr));
    c
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// The string field `key` of every item of a JSON array (files measured, errors).
fn strings_at<'a>(items: &'a serde_json::Value, key: &str) -> Vec<&'a str> {
    items
        .as_array()
        .unwrap()
        .iter()
        .map(|item| item[key].as_str().unwrap())
        .collect()
}

/// One row of README.md's troubleshooting table.
struct Row {
    file: String,
    exit: i32,
    fragment: Option<String>,
}

/// The rows of the table under "## Troubleshooting" whose first cell is a corpus file.
fn readme_rows() -> Vec<Row> {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let section = readme
        .split("## Troubleshooting")
        .nth(1)
        .expect("README.md has a Troubleshooting section");
    let section = section.split("\n## ").next().unwrap_or(section);
    let mut rows = Vec::new();
    for line in section.lines().filter(|l| l.starts_with("| `")) {
        let cells: Vec<&str> = line.trim_matches('|').split(" | ").map(str::trim).collect();
        assert_eq!(cells.len(), 4, "table row with 4 cells: {line}");
        let unquote = |c: &str| c.trim_matches('`').trim().to_string();
        let fragment = cells[3].starts_with('`').then(|| unquote(cells[3]));
        rows.push(Row {
            file: unquote(cells[0]),
            exit: cells[2].parse().expect("exit code cell"),
            fragment,
        });
    }
    rows
}

/// Files measured without a read error: `inspect` reads them.
const READABLE: &[&str] = &["flat.csv", "no-turn-off.csv", "starts-mid-spike.csv"];

#[test]
fn every_corpus_file_is_in_the_table_and_gives_its_message() {
    let rows = readme_rows();
    let mut listed: Vec<&str> = rows.iter().map(|r| r.file.as_str()).collect();
    listed.sort();
    let mut on_disk: Vec<String> = std::fs::read_dir(corpus())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !n.ends_with(".json") && !n.ends_with(".py"))
        .collect();
    on_disk.sort();
    assert_eq!(listed, on_disk, "README table and tests/bad-inputs/ differ");

    for row in &rows {
        let path = corpus().join(&row.file);
        let p = path.to_str().unwrap();
        let m = kickscan(&["measure", p, "--json"]);
        let err = stderr(&m);
        assert_eq!(code(&m), row.exit, "{}: exit code; stderr: {err}", row.file);
        let doc: serde_json::Value = serde_json::from_slice(&m.stdout)
            .unwrap_or_else(|e| panic!("{}: --json output is JSON: {e}", row.file));
        let errors = doc["errors"].as_array().unwrap();
        let warnings: Vec<String> = doc["captures"]
            .as_array()
            .unwrap()
            .iter()
            .flat_map(|c| c["warnings"].as_array().unwrap().clone())
            .map(|w| w.as_str().unwrap().to_string())
            .collect();
        if row.exit == 1 {
            let fragment = row
                .fragment
                .as_deref()
                .expect("a refused file has a message");
            // The message names the file (or, for a sidecar, the sidecar beside it).
            let stem = row.file.split('.').next().unwrap();
            let line = err
                .lines()
                .find(|l| l.contains(fragment))
                .unwrap_or_else(|| panic!("{}: '{fragment}' not in: {err}", row.file));
            assert!(line.starts_with("error: "), "{line}");
            assert!(line.contains(stem), "{}: file not named: {line}", row.file);
            assert_eq!(errors.len(), 1, "{}: one error listed", row.file);
            assert_eq!(errors[0]["file"].as_str().unwrap(), p);
            assert!(errors[0]["error"].as_str().unwrap().contains(fragment));
        } else {
            assert!(errors.is_empty(), "{}: {errors:?}", row.file);
            if let Some(fragment) = &row.fragment {
                assert!(
                    warnings.iter().any(|w| w.contains(fragment.as_str())),
                    "{}: warning '{fragment}' not in {warnings:?}",
                    row.file
                );
            } else {
                assert!(warnings.is_empty(), "{}: {warnings:?}", row.file);
            }
        }

        let i = kickscan(&["inspect", p]);
        if READABLE.contains(&row.file.as_str()) {
            assert_eq!(
                code(&i),
                0,
                "{}: inspect reads it: {}",
                row.file,
                stderr(&i)
            );
        } else {
            assert_eq!(code(&i), 1, "{}: inspect refuses it", row.file);
            let fragment = row.fragment.as_deref().unwrap();
            assert!(
                stderr(&i).contains(fragment),
                "{}: {}",
                row.file,
                stderr(&i)
            );
        }
    }
}

/// A place is always given for read errors: a line and column, or a byte offset, except for
/// an empty file (which has no place) and sidecar errors (serde's "line L column C").
#[test]
fn read_errors_name_a_place() {
    for row in readme_rows() {
        let Some(f) = row.fragment else { continue };
        if row.exit != 1 || f.starts_with("channel ") || row.file == "empty.csv" {
            continue;
        }
        assert!(
            f.contains("line ") || f.contains("lines ") || f.contains("byte "),
            "{}: no place in '{f}'",
            row.file
        );
    }
}

/// The analytic event of `generate.py` (0.2 V on, 24 V supply, 180 V sine term, 1 MHz,
/// alpha 4e5/s, edge at 3.5 us): its continuous maximum is 187.249 V at 0.2608 us after the
/// edge (the formula evaluated on a 10 ps grid, once); 10 ns sampling loses 0.002 V.
#[test]
fn a_record_starting_mid_spike_measures_only_the_whole_event() {
    let p = corpus().join("starts-mid-spike.csv");
    let m = kickscan(&["measure", p.to_str().unwrap(), "--json"]);
    assert_eq!(code(&m), 0, "{}", stderr(&m));
    let doc: serde_json::Value = serde_json::from_slice(&m.stdout).unwrap();
    let events = doc["captures"][0]["events"].as_array().unwrap();
    assert_eq!(events.len(), 1, "the partial spike is not an event");
    let e = &events[0];
    let t_edge = e["t_edge_s"].as_f64().unwrap();
    assert!((t_edge - 3.5e-6).abs() < 0.05e-6, "t_edge_s {t_edge}");
    let peak = e["peak_v"].as_f64().unwrap();
    assert!((peak - 187.249).abs() < 0.01, "peak_v {peak}");
    let f = e["ring_freq_hz"].as_f64().unwrap();
    assert!((f - 1e6).abs() < 0.01e6, "ring_freq_hz {f}");
}

#[test]
fn a_flat_record_reads_but_does_not_measure() {
    let p = corpus().join("flat.csv");
    let i = kickscan(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_eq!(code(&i), 0);
    let doc: serde_json::Value = serde_json::from_slice(&i.stdout).unwrap();
    let ch = &doc["files"][0]["channels"][0];
    // Every sample of flat.csv is 12.0000 (generate.py).
    assert_eq!(ch["min"].as_f64(), Some(12.0));
    assert_eq!(ch["max"].as_f64(), Some(12.0));
}

/// A 20 MB line, made here rather than committed: refused at the line cap, quickly, without
/// reading it whole.
#[test]
fn one_very_long_line() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("one-line.csv");
    let mut text = String::from("t,v\n");
    text.push_str(&"0.5,".repeat(5 * 1024 * 1024));
    text.push('\n');
    std::fs::write(&p, text).unwrap();
    for cmd in ["measure", "inspect"] {
        let o = kickscan(&[cmd, p.to_str().unwrap()]);
        assert_eq!(code(&o), 1);
        let err = stderr(&o);
        assert!(err.contains("one-line.csv: line 2, column 1: line is longer than 1024 KiB"));
    }
}

/// The 4 GB claim of `huge-claim.wav` under a 1 GiB address-space limit: a reader that sized
/// a buffer from the header (2^31 frames) would abort instead of giving the error.
#[cfg(target_os = "linux")]
#[test]
fn a_huge_size_claim_allocates_nothing() {
    let bin = assert_cmd::cargo::cargo_bin("kickscan");
    let p = corpus().join("huge-claim.wav");
    let o = std::process::Command::new("sh")
        .arg("-c")
        .arg("ulimit -v 1048576 && exec \"$0\" measure \"$1\" --json")
        .arg(&bin)
        .arg(&p)
        .output()
        .unwrap();
    assert_eq!(code(&o), 1, "{}", stderr(&o));
    assert!(stderr(&o).contains("the header promises 2147483640 frames"));
}

/// A folder holding a link to itself, one to its parent and one to nothing: each real file
/// is measured once, each loop reported once, the dangling link reported with its reason.
#[cfg(unix)]
#[test]
fn folder_with_symlink_loops_and_a_dangling_link() {
    use std::os::unix::fs::symlink;
    let root = tempfile::tempdir().unwrap();
    let d = root.path().join("d");
    std::fs::create_dir(&d).unwrap();
    std::fs::copy(corpus().join("no-turn-off.csv"), d.join("a.csv")).unwrap();
    symlink(".", d.join("self")).unwrap();
    symlink("..", d.join("up")).unwrap();
    symlink(root.path().join("gone"), d.join("gone.csv")).unwrap();
    let o = kickscan(&["measure", d.to_str().unwrap(), "--json"]);
    assert_eq!(code(&o), 1);
    let doc: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let files = strings_at(&doc["captures"], "file");
    assert_eq!(files, [d.join("a.csv").to_str().unwrap()]);
    let errors = strings_at(&doc["errors"], "error");
    assert_eq!(errors.len(), 3, "{errors:?}");
    assert!(errors[0].contains("gone.csv: No such file or directory"));
    assert!(errors[1].contains("self: symlink loop"));
    assert!(errors[2].contains("up/d: symlink loop"));
}

/// A file removed between listing and reading. The binary lists and reads in one call, so
/// the race cannot be timed from outside; the library's two steps are driven here instead,
/// which is the same code path the binary takes.
#[test]
fn a_file_removed_after_listing() {
    use kickscan::pipeline::{collect_inputs, measure_file, Settings};
    let dir = tempfile::tempdir().unwrap();
    for name in ["a.csv", "b.csv"] {
        std::fs::copy(corpus().join("no-turn-off.csv"), dir.path().join(name)).unwrap();
    }
    let (files, errors) = collect_inputs(&[dir.path().to_path_buf()]);
    assert!(errors.is_empty());
    assert_eq!(files.len(), 2);
    std::fs::remove_file(&files[0]).unwrap();
    let settings = Settings::default();
    let e = measure_file(&files[0], &settings, false).unwrap_err();
    assert!(e.starts_with(&files[0].display().to_string()), "{e}");
    assert!(e.contains("No such file or directory"), "{e}");
    assert!(measure_file(&files[1], &settings, false).is_ok());
}

/// A named pipe among captures, and one given by itself. Before the check, reading one hung
/// `measure` (the reader's second open waits for a writer that is gone) and `inspect` failed
/// with the system's "Illegal seek"; now it is refused by name at once and the capture beside
/// it is still measured. No writer is ever attached: a reader that opened the pipe would
/// block, and the two-minute timeout of `kickscan()` would fail the test.
#[test]
fn a_pipe_is_refused_by_name_without_waiting() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(corpus().join("no-turn-off.csv"), dir.path().join("a.csv")).unwrap();
    let pipe = dir.path().join("b.csv");
    let made = std::process::Command::new("mkfifo").arg(&pipe).status();
    if !made.is_ok_and(|s| s.success()) {
        eprintln!("skipped: mkfifo is not available here");
        return;
    }
    let expected = "a pipe (FIFO or process substitution), not a regular file";
    let o = kickscan(&["measure", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code(&o), 1, "{}", stderr(&o));
    let doc: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let files = strings_at(&doc["captures"], "file");
    assert_eq!(files, [dir.path().join("a.csv").to_str().unwrap()]);
    let error = doc["errors"][0]["error"].as_str().unwrap();
    assert!(error.starts_with(pipe.to_str().unwrap()), "{error}");
    assert!(error.contains(expected), "{error}");

    let o = kickscan(&["inspect", pipe.to_str().unwrap()]);
    assert_eq!(code(&o), 1);
    assert!(stderr(&o).contains(expected), "{}", stderr(&o));
}

/// A long capture is measured from a temporary copy of its samples in `TMPDIR`; when that
/// copy cannot be made, the message names the folder and the way out. The capture is just
/// over the in-memory limit (2^20 samples per channel), so the copy is the first thing
/// the streaming path needs.
#[test]
fn a_missing_temporary_folder_is_named_with_the_way_out() {
    use std::fmt::Write as _;
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("t,v\n");
    for k in 0..1_100_000u32 {
        writeln!(text, "{k}e-6,{}", if k % 1000 < 500 { 0 } else { 24 }).unwrap();
    }
    let file = dir.path().join("long.csv");
    std::fs::write(&file, text).unwrap();
    let missing = dir.path().join("no-such-folder");
    let o = Command::cargo_bin("kickscan")
        .unwrap()
        .env("TMPDIR", &missing)
        .args(["measure", file.to_str().unwrap(), "--json"])
        .timeout(Duration::from_secs(120))
        .output()
        .unwrap();
    assert_eq!(code(&o), 1, "{}", stderr(&o));
    let doc: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let error = strings_at(&doc["errors"], "error")[0];
    let place = format!("could not be created in {}", missing.display());
    assert!(error.contains(&place), "{error}");
    assert!(
        error.contains("point TMPDIR at a folder with room"),
        "{error}"
    );
}
