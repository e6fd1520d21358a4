//! The binary's contract at its edges: exit codes and messages for usage errors (DESIGN.md:
//! 2 for usage, 1 when an input failed).

use assert_cmd::Command;
use predicates::prelude::*;

fn kickscan() -> Command {
    Command::cargo_bin("kickscan").expect("the kickscan binary is built")
}

#[test]
fn help_lists_the_commands_and_exit_codes() {
    kickscan()
        .arg("--help")
        .assert()
        .success()
        .stdout(predicate::str::contains("measure"))
        .stdout(predicate::str::contains("compare"))
        .stdout(predicate::str::contains("demo"))
        .stdout(predicate::str::contains("Exit codes"));
}

#[test]
fn unknown_option_is_a_usage_error() {
    kickscan()
        .args(["measure", "x.csv", "--no-such-option"])
        .assert()
        .code(2);
}

#[test]
fn nonsense_value_is_a_usage_error_naming_the_option() {
    kickscan()
        .args(["measure", "x.csv", "--supply", "5 parsecs"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--supply"))
        .stderr(predicate::str::contains("parsecs"));
}

/// Event tables hold events already measured: options that act on samples would be
/// silently unused, so they are a usage error naming each one (the summary's own options,
/// here --rating and --block, are accepted alongside). The check comes before the tables
/// are opened, so it holds with or without the `parquet` feature.
#[test]
fn from_table_refuses_options_that_act_on_samples() {
    kickscan()
        .args([
            "measure",
            "--from-table",
            "events.parquet",
            "--rating",
            "60V",
        ])
        .args([
            "--block",
            "10",
            "--supply",
            "24V",
            "--no-fit",
            "--settle-band",
            "2",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--from-table: --supply, --settle-band, --no-fit cannot apply to event tables",
        ))
        .stderr(predicate::str::contains("--rating").count(1));
}

/// An option given is refused however its value is written, even when it names the
/// default: `--settle-band 5%` (the default band, written with its percent sign) and
/// `--polarity auto` once slipped through because they were compared with the defaults'
/// spellings.
#[test]
fn from_table_refuses_options_given_at_their_defaults() {
    kickscan()
        .args(["measure", "--from-table", "events.parquet"])
        .args(["--settle-band", "5%", "--polarity", "auto"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--from-table: --polarity, --settle-band cannot apply to event tables",
        ));
}
#[test]
fn compare_needs_two_labels() {
    kickscan()
        .args(["compare", "only=a.csv"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("at least two variants"));
}

#[test]
fn missing_input_fails_with_exit_1_and_names_it() {
    kickscan()
        .args(["measure", "no/such/file.csv", "--quiet"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("no/such/file.csv"));
}

#[test]
fn missing_input_json_lists_it_under_errors() {
    let out = kickscan()
        .args(["measure", "no/such/file.csv", "--json"])
        .assert()
        .code(1)
        .get_output()
        .stdout
        .clone();
    let doc: serde_json::Value = serde_json::from_slice(&out).expect("JSON on stdout");
    assert_eq!(doc["schema"], "kickscan.measure/1");
    assert_eq!(doc["errors"][0]["file"], "no/such/file.csv");
    assert_eq!(doc["summary"]["n_events"], 0);
}

/// A value that cannot be meant (a negative rating or limit, a zero window or rate) is a
/// usage error naming the option, written with or without `=`: a leading minus must reach
/// the check rather than be taken for an option of its own.
#[test]
fn impossible_values_are_usage_errors_naming_the_option() {
    for args in [
        &["--rating", "-5V"][..],
        &["--rating=-5V"],
        &["--rating", "0V"],
        &["--fail-above", "-1V"],
        &["--fail-energy", "0J"],
        &["--max-window", "0"],
        &["--min-on-time", "-1ms"],
        &["--inductance", "-200mH"],
        &["--sample-rate", "0"],
        &["--dt", "-1us"],
    ] {
        let option = args[0].split('=').next().unwrap();
        kickscan()
            .args(["measure", "x.csv"])
            .args(args)
            .assert()
            .code(2)
            .stderr(predicate::str::contains(option))
            .stderr(predicate::str::contains("expected a positive value"));
    }
}

/// `--baseline` naming no variant would compare against the first one silently; `--label`
/// has no place where every variant is named by its own label.
#[test]
fn compare_refuses_an_unknown_baseline_and_a_label() {
    kickscan()
        .args(["compare", "a=x.csv", "b=y.csv", "--baseline", "zener"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--baseline zener"))
        .stderr(predicate::str::contains("a, b"));
    kickscan()
        .args(["compare", "a=x.csv", "b=y.csv", "--label", "rev2"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--label"));
}

/// A folder with no capture in it (only a sidecar here) is an input that failed: a rig whose
/// captures went missing must not pass its `--fail-above` check with exit 0.
#[test]
fn an_empty_folder_is_an_input_failure() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("notes.md"), "nothing captured today\n").unwrap();
    let folder = dir.path().display().to_string();
    for cmd in ["measure", "inspect"] {
        let mut c = kickscan();
        c.args([cmd, &folder]);
        if cmd == "measure" {
            c.args(["--fail-above", "48V", "--quiet"]);
        }
        c.assert()
            .code(1)
            .stderr(predicate::str::contains("no capture files in this folder"));
    }
}

/// `parasitics` on a file it cannot read fails as an input (exit 1), as `measure` does;
/// only its options are usage errors (exit 2).
#[test]
fn parasitics_input_failure_is_exit_1() {
    kickscan()
        .args(["parasitics", "--bare", "no/such/bare.csv"])
        .args(["--loaded", "no/such/loaded.csv", "--added", "1nF"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("no/such/bare.csv"));
    kickscan()
        .args(["parasitics", "--bare", "a.csv", "--loaded", "b.csv"])
        .args(["--added", "1nF", "--inductance", "-10mH"])
        .assert()
        .code(2);
}
