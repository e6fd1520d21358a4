//! The JSON documents keep the field names DESIGN.md gives them (the interface contract):
//! `kickscan.measure/1`, `kickscan.inspect/1`, `kickscan.compare/1`, `kickscan.parasitics/1`,
//! checked end to end on the bundled sample captures.

use assert_cmd::Command;
use serde_json::Value;

fn run_json(args: &[&str]) -> Value {
    let out = Command::cargo_bin("kickscan")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(args)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    serde_json::from_slice(&out).expect("a JSON document on stdout")
}

fn has(v: &Value, keys: &[&str], what: &str) {
    for k in keys {
        assert!(v.get(*k).is_some(), "{what} lacks '{k}': {v}");
    }
}

#[test]
fn measure_document_has_the_contract_fields() {
    let doc = run_json(&[
        "measure",
        "sample-captures/zener",
        "--supply",
        "24V",
        "--rating",
        "60V",
        "--inductance",
        "200mH",
        "--json",
    ]);
    assert_eq!(doc["schema"], "kickscan.measure/1");
    has(&doc, &["captures", "summary", "errors"], "document");
    let cap = &doc["captures"][0];
    has(
        cap,
        &[
            "file",
            "format",
            "sample_interval_s",
            "n_samples",
            "signal",
            "current",
            "warnings",
            "events",
        ],
        "capture",
    );
    let ev = &cap["events"][0];
    has(
        ev,
        &[
            "index",
            "t_edge_s",
            "polarity",
            "v_on",
            "v_off",
            "peak_v",
            "switch_stress_v",
            "overshoot_v",
            "overshoot_pct",
            "t_peak_s",
            "rise_time_s",
            "slew_v_per_s",
            "spike_width_s",
            "decay_time_s",
            "ring_freq_hz",
            "damping_ratio",
            "settle_time_s",
            "volt_seconds",
            "energy_j",
            "clamp_energy_j",
            "energy_to_peak_j",
            "coil_energy_j",
            "c_par_f",
            "c_par_slope_f",
            "clipped",
            "undersampled",
            "truncated",
            "ring_alpha",
            "q_factor",
            "fit_rms_v",
            "peak_v_est",
        ],
        "event",
    );
    let s = &doc["summary"];
    has(
        s,
        &[
            "n_events",
            "n_clipped",
            "metrics",
            "worst",
            "extreme_value",
            "rating",
        ],
        "summary",
    );
    has(
        &s["metrics"]["switch_stress_v"],
        &["min", "max", "mean", "std", "p50", "p95", "p99"],
        "metric",
    );
    has(
        &s["worst"],
        &["file", "index", "peak_v", "switch_stress_v"],
        "worst",
    );
    has(
        &s["extreme_value"],
        &[
            "model",
            "location",
            "scale",
            "shape",
            "events_per_block",
            "return_levels",
        ],
        "extreme_value",
    );
    has(
        &s["rating"],
        &[
            "rating_v",
            "derated_v",
            "max_fraction",
            "n_over",
            "n_over_derated",
            "p_over_per_event",
        ],
        "rating",
    );
    // Nulls, never NaN: serde_json would have refused to parse NaN above.
    assert_eq!(s["n_events"], 25);
}

#[test]
fn inspect_document_has_the_contract_fields() {
    let doc = run_json(&["inspect", "sample-captures/diode/shot-01.csv", "--json"]);
    assert_eq!(doc["schema"], "kickscan.inspect/1");
    let f = &doc["files"][0];
    has(
        f,
        &[
            "file",
            "format",
            "sample_interval_s",
            "n_samples",
            "t0_s",
            "channels",
            "notes",
        ],
        "file",
    );
    has(
        &f["channels"][0],
        &["name", "unit", "min", "max"],
        "channel",
    );
    // The sample captures are written at 1 MS/s (sample-captures/generate.sh).
    assert!((f["sample_interval_s"].as_f64().unwrap() - 1e-6).abs() < 1e-15);
}

#[test]
fn compare_document_has_the_contract_fields() {
    let doc = run_json(&[
        "compare",
        "none=sample-captures/none",
        "zener=sample-captures/zener",
        "--supply",
        "24V",
        "--json",
    ]);
    assert_eq!(doc["schema"], "kickscan.compare/1");
    has(&doc, &["variants", "differences", "verdicts"], "document");
    has(
        &doc["variants"][0],
        &["label", "n_events", "metrics"],
        "variant",
    );
    has(
        &doc["differences"][0],
        &["metric", "a", "b", "median_a", "median_b", "p_value"],
        "difference",
    );
    let verdict = doc["verdicts"][0].as_str().unwrap();
    assert!(
        verdict.starts_with("zener: worst switch stress"),
        "{verdict}"
    );
}

#[test]
fn parasitics_document_has_the_contract_fields() {
    let doc = run_json(&[
        "parasitics",
        "--bare",
        "sample-captures/ringdown/bare.csv",
        "--loaded",
        "sample-captures/ringdown/loaded.csv",
        "--added",
        "1nF",
        "--json",
    ]);
    assert_eq!(doc["schema"], "kickscan.parasitics/1");
    has(
        &doc,
        &[
            "f_bare_hz",
            "f_loaded_hz",
            "c_add_f",
            "c_par_f",
            "l_h",
            "z0_ohm",
            "uncertainty",
            "snubber",
        ],
        "document",
    );
    // The pair was simulated with a 470 pF node and a 200 mH coil (sample-captures/README.md).
    let c = doc["c_par_f"].as_f64().unwrap();
    assert!((c - 470e-12).abs() < 0.03 * 470e-12, "c_par_f {c}");
    let l = doc["l_h"].as_f64().unwrap();
    assert!((l - 0.2).abs() < 0.03 * 0.2, "l_h {l}");
}
