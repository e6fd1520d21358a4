//! `events.parquet` and `measure --from-table` (the `parquet` feature): the table holds the
//! rows and values of the JSON document, and summarising tables gives the summary of
//! measuring the captures themselves.

use assert_cmd::Command;

fn kickscan() -> Command {
    Command::cargo_bin("kickscan").expect("the kickscan binary is built")
}

#[cfg(not(feature = "parquet"))]
#[test]
fn from_table_without_the_feature_says_how_to_get_it() {
    let out = kickscan()
        .args(["measure", "--from-table", "events.parquet"])
        .output()
        .expect("runs");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("without the `parquet` feature"), "{err}");
    assert!(err.contains("--features parquet"), "{err}");
}

#[cfg(feature = "parquet")]
mod report_support;

#[cfg(feature = "parquet")]
mod with_feature {
    use std::io::Cursor;
    use std::path::Path;

    use polars::prelude::*;
    use serde_json::Value;

    use assert_cmd::Command;

    use super::{kickscan, report_support};
    use kickscan::report::{render_report, ReportInput};

    #[test]
    fn report_table_has_the_rows_and_values_of_the_json() {
        let f = report_support::fixture();
        let input = ReportInput::new(&f.doc, &f.settings, &f.sketches);
        let files = render_report(&input).expect("report renders");
        let get = |name: &str| {
            files
                .iter()
                .find(|(n, _)| n == name)
                .map(|(_, b)| b.clone())
                .unwrap_or_else(|| panic!("no {name} in the report"))
        };
        let json: Value = serde_json::to_value(&f.doc).expect("document serialises");
        let bytes = get("events.parquet");
        let frame = ParquetReader::new(Cursor::new(bytes.as_slice()))
            .finish()
            .expect("polars reads events.parquet");

        // Same columns, in the same order, as events.csv.
        let csv = String::from_utf8(get("events.csv")).expect("utf-8");
        let header: Vec<&str> = csv.lines().next().expect("header").split(',').collect();
        let names: Vec<&str> = frame
            .get_column_names()
            .into_iter()
            .map(|n| n.as_str())
            .collect();
        assert_eq!(names, header);

        let mut row = 0;
        for cap in json["captures"].as_array().expect("captures") {
            for ev in cap["events"].as_array().expect("events") {
                let file = frame.column("file").unwrap().str().unwrap().get(row);
                assert_eq!(file, cap["file"].as_str());
                for (name, value) in ev.as_object().expect("event object") {
                    let c = frame.column(name).expect(name);
                    let cell = c.get(row).expect("cell");
                    match value {
                        Value::Null => assert!(cell.is_null(), "{name} row {row}: {cell:?}"),
                        Value::Number(n) => {
                            let x = cell.extract::<f64>().expect(name);
                            // Both come from the same f64: equal to the bit.
                            assert_eq!(x, n.as_f64().unwrap(), "{name} row {row}");
                        }
                        Value::Bool(b) => {
                            assert_eq!(cell, AnyValue::Boolean(*b), "{name} row {row}")
                        }
                        Value::String(s) => {
                            assert_eq!(cell.get_str(), Some(s.as_str()), "{name} row {row}")
                        }
                        Value::Array(a) => {
                            let list = c.list().unwrap().get_as_series(row).expect(name);
                            let got: Vec<Option<f64>> = list.f64().unwrap().iter().collect();
                            let want: Vec<Option<f64>> = a.iter().map(Value::as_f64).collect();
                            assert_eq!(got, want, "{name} row {row}");
                        }
                        Value::Object(_) => panic!("nested object in an event"),
                    }
                }
                row += 1;
            }
        }
        assert_eq!(frame.height(), row, "one row per JSON event");
        assert_eq!(row, 8);
    }

    fn manifest() -> &'static Path {
        Path::new(env!("CARGO_MANIFEST_DIR"))
    }

    fn json_of(cmd: &mut Command) -> Value {
        let out = cmd.output().expect("runs");
        assert!(
            out.status.success(),
            "exit {:?}: {}",
            out.status.code(),
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).expect("JSON on stdout")
    }

    #[test]
    fn from_table_summarises_as_the_captures_do() {
        let tmp = tempfile::tempdir().expect("tempdir");
        let report = tmp.path().join("zener-report");
        let captures = manifest().join("sample-captures/zener");
        // One run: the document of the captures on stdout, the report with its table on disk.
        let direct = json_of(
            kickscan()
                .current_dir(manifest())
                .args(["measure", "--quiet", "--json", "--out"])
                .arg(&report)
                .arg(&captures),
        );
        let table = report.join("events.parquet");
        assert!(table.is_file(), "the report holds events.parquet");

        let from = json_of(
            kickscan()
                .args(["measure", "--from-table", "--json"])
                .arg(&table),
        );
        assert_eq!(from["schema"], "kickscan.measure/1");
        let n = direct["summary"]["n_events"].as_u64().expect("n_events");
        assert!(n >= 3, "the zener captures hold events ({n})");
        assert_eq!(from["summary"]["n_events"], direct["summary"]["n_events"]);
        assert_eq!(
            from["summary"]["worst"]["switch_stress_v"],
            direct["summary"]["worst"]["switch_stress_v"]
        );
        assert_eq!(from["summary"]["worst"], direct["summary"]["worst"]);
        // The same events give the same summary, metric by metric and the projection too.
        assert_eq!(from["summary"], direct["summary"]);
        assert_eq!(from["captures"], direct["captures"]);

        // The grouped query: one line per file with events, counts adding up.
        let groups = from["tables"].as_array().expect("tables");
        let grouped: u64 = groups.iter().map(|g| g["n_events"].as_u64().unwrap()).sum();
        assert_eq!(grouped, n);
        let top = groups
            .iter()
            .filter_map(|g| g["max_switch_stress_v"].as_f64())
            .fold(f64::NEG_INFINITY, f64::max);
        assert_eq!(
            Some(top),
            direct["summary"]["worst"]["switch_stress_v"].as_f64()
        );
    }

    #[test]
    fn tables_from_two_machines_add_up() {
        let tmp = tempfile::tempdir().expect("tempdir");
        let captures = manifest().join("sample-captures/zener/shot-01.csv");
        let a = tmp.path().join("bench-a");
        kickscan()
            .args(["measure", "--quiet", "--out"])
            .arg(&a)
            .arg(&captures)
            .assert()
            .success();
        // The second machine's table: the same file name, measured again.
        let b = tmp.path().join("bench-b");
        std::fs::create_dir(&b).expect("folder");
        std::fs::copy(a.join("events.parquet"), b.join("events.parquet")).expect("copied");

        let one = json_of(
            kickscan()
                .args(["measure", "--from-table", "--json"])
                .arg(a.join("events.parquet")),
        );
        // Folders are searched for tables.
        let out_dir = tmp.path().join("merged");
        let both = json_of(
            kickscan()
                .args(["measure", "--from-table", "--json", "--out"])
                .arg(&out_dir)
                .arg(&a)
                .arg(&b),
        );
        let n1 = one["summary"]["n_events"].as_u64().expect("n");
        assert!(n1 >= 1);
        assert_eq!(both["summary"]["n_events"].as_u64(), Some(2 * n1));
        let files: Vec<&str> = both["captures"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["file"].as_str().unwrap())
            .collect();
        assert_eq!(files.len(), 2);
        assert!(
            files[0].contains("[from ") && files[0] != files[1],
            "{files:?}"
        );
        // A report of tables: the tables and the page, no capture plots (no samples).
        assert!(out_dir.join("report.html").is_file());
        assert!(out_dir.join("events.parquet").is_file());
        assert!(!out_dir.join("plots/overview-1.svg").exists());

        // Text output: the per-file block then the summary.
        let text = kickscan()
            .args(["measure", "--from-table"])
            .arg(&a)
            .output()
            .expect("runs");
        let text = String::from_utf8_lossy(&text.stdout);
        assert!(text.contains("max stress"), "{text}");
        assert!(text.contains("summary:"), "{text}");
    }

    #[test]
    fn a_bad_table_is_listed_and_the_others_summarised() {
        let tmp = tempfile::tempdir().expect("tempdir");
        let bad = tmp.path().join("broken.parquet");
        std::fs::write(&bad, b"PAR1 not really PAR1").expect("written");
        let out = kickscan()
            .args(["measure", "--from-table", "--json"])
            .arg(&bad)
            .output()
            .expect("runs");
        assert_eq!(out.status.code(), Some(1), "an input failed");
        let doc: Value = serde_json::from_slice(&out.stdout).expect("JSON");
        assert_eq!(doc["summary"]["n_events"], 0);
        let err = doc["errors"][0]["error"].as_str().expect("error");
        assert!(err.contains("broken.parquet"), "{err}");
    }
}
