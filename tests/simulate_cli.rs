//! `kickscan simulate` end to end: options in, files out.

use assert_cmd::Command;
use predicates::prelude::*;

fn kickscan() -> Command {
    Command::cargo_bin("kickscan").unwrap()
}

#[test]
fn writes_a_csv_with_current_and_reports_each_event() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("zener.csv");
    kickscan()
        .args(["simulate", "-o"])
        .arg(&out)
        .args([
            "--clamp",
            "zener",
            "--zener-v",
            "33V",
            "--inductance",
            "200mH",
            "--events",
            "2",
            "--on-time",
            "1ms",
            "--off-time",
            "2ms",
            "--dt",
            "200ns",
            "--with-current",
            "--time-unit",
            "us",
        ])
        .assert()
        .success()
        .stdout(predicate::str::contains("event 1:"));
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(
        text.lines().any(|l| l == "t [us],v_sw [V],i_coil [A]"),
        "{text:.400}"
    );
    // 1 ms pre-trigger + 2 events x 2 ms + 1 ms on time between = 6 ms at 200 ns, plus the
    // first sample.
    let rows = text
        .lines()
        .filter(|l| l.starts_with(|c: char| c.is_ascii_digit() || c == '-'))
        .count();
    assert_eq!(rows, 30_001);
    // The zener clamp holds the node near 12 + 33 + 0.8 V (common practice).
    let peak = text
        .lines()
        .skip_while(|l| !l.starts_with("t ["))
        .skip(1)
        .filter_map(|l| l.split(',').nth(1)?.parse::<f64>().ok())
        .fold(f64::MIN, f64::max);
    assert!((peak - 45.8).abs() < 1.5, "{peak}");
}

#[test]
fn european_csv_and_wav_with_sidecar() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("eu.csv");
    kickscan()
        .args([
            "simulate",
            "-q",
            "--format",
            "csv-semicolon",
            "--events",
            "1",
            "-o",
        ])
        .arg(&csv)
        .assert()
        .success()
        .stdout(predicate::str::is_empty());
    let text = std::fs::read_to_string(&csv).unwrap();
    assert!(text.contains("t [s];v_sw [V]"));
    assert!(
        text.lines().any(|l| l.starts_with("-0,0019999;")),
        "{text:.600}"
    );
    let wav = dir.path().join("run.wav");
    kickscan()
        .args([
            "simulate",
            "--format",
            "wav24",
            "--adc-min",
            "-20",
            "--adc-max",
            "200",
            "--events",
            "1",
            "-o",
        ])
        .arg(&wav)
        .assert()
        .success();
    let side: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("run.json")).unwrap())
            .unwrap();
    assert_eq!(side["channels"][0]["name"], "v_sw");
    assert_eq!(side["channels"][0]["offset_v"].as_f64(), Some(90.0));
    let reader = hound::WavReader::open(&wav).unwrap();
    assert_eq!(reader.spec().bits_per_sample, 24);
}

#[test]
fn bad_values_are_refused_with_the_option_named() {
    let dir = tempfile::tempdir().unwrap();
    kickscan()
        .args(["simulate", "--inductance", "20 parsecs", "-o"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--inductance"));
    kickscan()
        .args(["simulate", "--capacitance=-1n", "-o"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("capacitance"));
    kickscan()
        .args(["simulate", "-o"])
        .arg(dir.path().join("x.xyz"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--format"));
    kickscan()
        .args(["simulate", "--adc-bits", "8", "-o"])
        .arg(dir.path().join("x.csv"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("rails"));
    assert!(
        std::fs::read_dir(dir.path()).unwrap().next().is_none(),
        "nothing written"
    );
}

#[test]
fn raw_and_value_only_outputs_read_back_with_no_options() {
    let dir = tempfile::tempdir().unwrap();
    for (format, file, detected) in [
        (
            "raw-i16",
            "dump.raw",
            "raw little-endian i16 samples (sidecar sample_type)",
        ),
        (
            "csv-values",
            "values.csv",
            "sample interval 1e-7 s stated on line 2",
        ),
    ] {
        let out = dir.path().join(file);
        kickscan()
            .args(["simulate", "-q", "--events", "1", "--format", format, "-o"])
            .arg(&out)
            .assert()
            .success();
        kickscan()
            .arg("inspect")
            .arg(&out)
            .assert()
            .success()
            .stdout(predicate::str::contains(detected))
            .stdout(predicate::str::contains("first sample at -2.00 ms"));
    }
}
