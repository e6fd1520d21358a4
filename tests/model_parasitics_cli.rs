//! `kickscan parasitics` end to end.

use std::process::Command as StdCommand;

use assert_cmd::Command;
use predicates::prelude::*;

#[test]
fn help_names_the_options() {
    Command::cargo_bin("kickscan")
        .unwrap()
        .args(["parasitics", "--help"])
        .assert()
        .success()
        .stdout(
            predicate::str::contains("--bare")
                .and(predicate::str::contains("--loaded"))
                .and(predicate::str::contains("--added"))
                .and(predicate::str::contains("--inductance"))
                .and(predicate::str::contains("--switching-rate")),
        );
}

#[test]
fn a_bad_capacitance_is_a_usage_error() {
    Command::cargo_bin("kickscan")
        .unwrap()
        .args([
            "parasitics",
            "--bare",
            "a.csv",
            "--loaded",
            "b.csv",
            "--added",
            "lots",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--added"));
}

/// Writes an ngspice run of a 10 mH coil with `c_f` at the node as a two-column CSV.
fn ngspice_csv(dir: &std::path::Path, name: &str, c_f: f64) -> Option<std::path::PathBuf> {
    let raw = dir.join(format!("{name}.txt"));
    let deck = format!(
        "* {name}
V1 sup 0 12
Rc sup a 200
Lc a sw 10m
Rp sup sw 100k
Cp sw 0 {c_f}
Bsw sw 0 I=V(sw)*(1e-9 + V(g))
Vg g 0 PWL(0 1 2u 1 2.05u 0)
.options method=gear
.tran 10n 80u 0 2n
.control
run
linearize v(sw)
set wr_singlescale
wrdata {} v(sw)
.endc
.end
",
        raw.display()
    );
    let cir = dir.join(format!("{name}.cir"));
    std::fs::write(&cir, deck).ok()?;
    StdCommand::new("ngspice")
        .arg("-b")
        .arg(&cir)
        .output()
        .ok()?;
    let text = std::fs::read_to_string(&raw).ok()?;
    let mut csv = String::from("time_s,v_sw\n");
    for line in text.lines() {
        let c: Vec<&str> = line.split_whitespace().collect();
        if c.len() >= 2 {
            csv.push_str(&format!("{},{}\n", c[0], c[1]));
        }
    }
    let path = dir.join(format!("{name}.csv"));
    std::fs::write(&path, csv).ok()?;
    Some(path)
}

#[test]

fn added_capacitance_from_two_csv_captures() {
    let dir = tempfile::tempdir().unwrap();
    let (Some(bare), Some(loaded)) = (
        ngspice_csv(dir.path(), "bare", 100e-12),
        ngspice_csv(dir.path(), "loaded", 320e-12),
    ) else {
        eprintln!("notice: ngspice not found; skipping");
        return;
    };
    let out = Command::cargo_bin("kickscan")
        .unwrap()
        .args([
            "parasitics",
            "--added",
            "220p",
            "--inductance",
            "10mH",
            "--supply",
            "12V",
        ])
        .args(["--switching-rate", "100Hz", "--json", "--bare"])
        .arg(&bare)
        .arg("--loaded")
        .arg(&loaded)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["schema"], "kickscan.parasitics/1");
    // Source: the netlists' 100 pF node and 10 mH coil.
    let c = doc["c_par_f"].as_f64().unwrap();
    let l = doc["l_h"].as_f64().unwrap();
    assert!((c / 100e-12 - 1.0).abs() < 0.05, "C_par {c}");
    assert!((l / 10e-3 - 1.0).abs() < 0.05, "L {l}");
    assert!(doc["snubber"]["power_w"].is_number());
}
