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
