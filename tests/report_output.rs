//! The report rendered to bytes: HTML structure and escaping, CSV against JSON, plot files.

mod report_support;

use kickscan::report::{render_report, ReportInput};
use scraper::{Html, Selector};

fn render_all() -> Vec<(String, Vec<u8>)> {
    let f = report_support::fixture();
    let mut input = ReportInput::new(&f.doc, &f.settings, &f.sketches);
    input.fit = Some(&f.fit);
    input.variants = &f.variants;
    input.verdicts = &f.verdicts;
    render_report(&input).expect("report renders")
}

fn file<'a>(files: &'a [(String, Vec<u8>)], name: &str) -> &'a [u8] {
    files
        .iter()
        .find(|(n, _)| n == name)
        .map(|(_, b)| b.as_slice())
        .unwrap_or_else(|| panic!("no {name} in the report"))
}

fn sel(s: &str) -> Selector {
    Selector::parse(s).expect("selector")
}

#[test]
fn html_holds_every_plot_and_table_and_escapes_inputs() {
    let files = render_all();
    let html = String::from_utf8(file(&files, "report.html").to_vec()).expect("utf-8");
    let n_svg_files = files.iter().filter(|(n, _)| n.ends_with(".svg")).count();
    // 2 overviews, 1 overlay, histogram, return levels, fit, compare overlay and strips.
    assert_eq!(n_svg_files, 8);
    let page = Html::parse_document(&html);
    assert_eq!(page.select(&sel("figure > svg")).count(), n_svg_files);
    for id in [
        "inputs", "summary", "verdicts", "plots", "events", "method", "safety",
    ] {
        assert_eq!(
            page.select(&sel(&format!("section#{id}"))).count(),
            1,
            "section {id}"
        );
    }
    for class in ["inputs", "settings", "summary", "events"] {
        assert_eq!(
            page.select(&sel(&format!("table.{class}"))).count(),
            1,
            "table {class}"
        );
    }
    // 5 + 3 events, plus the header row; the worst row is marked.
    assert_eq!(page.select(&sel("table.events tr")).count(), 9);
    assert_eq!(page.select(&sel("table.events tr.worst")).count(), 1);
    // No script element anywhere, and the hostile names come through as text.
    assert_eq!(page.select(&sel("script")).count(), 0);
    assert_eq!(page.select(&sel("b")).count(), 0);
    assert!(!html.contains("<script>"));
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;.csv"));
    let cells: Vec<String> = page
        .select(&sel("table.inputs td"))
        .map(|td| td.text().collect())
        .collect();
    assert!(cells.iter().any(|c| c == report_support::NASTY_FILE));
    let title: String = page.select(&sel("title")).flat_map(|t| t.text()).collect();
    assert_eq!(title, "kickscan report: relay K3 <bare>");
    let text: String = page.root_element().text().collect();
    assert!(text.contains("IEEE Std 181-2011"));
    assert!(text.contains("Hyndman & Fan"));
    assert!(text.contains("Coles (2001)"));
    assert!(text.contains("hundreds of volts"));
    assert!(text.contains("bad&broken.csv: line 3"));
    assert!(text.contains("zener <28 V>: worst switch stress"));
    // Self-contained: nothing fetched, nothing run.
    assert!(!html.contains("<link"));
    assert!(!html.contains("src="));
    assert!(!html.contains("href=\"http"));
}

/// A minimal RFC 4180 reader for the test (quoted cells, doubled quotes).
fn parse_csv(text: &str) -> Vec<Vec<String>> {
    let mut rows = Vec::new();
    let mut row = Vec::new();
    let mut cell = String::new();
    let mut quoted = false;
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match (quoted, c) {
            (true, '"') if chars.peek() == Some(&'"') => {
                cell.push('"');
                chars.next();
            }
            (true, '"') => quoted = false,
            (true, c) => cell.push(c),
            (false, '"') => quoted = true,
            (false, ',') => row.push(std::mem::take(&mut cell)),
            (false, '\n') => {
                row.push(std::mem::take(&mut cell));
                rows.push(std::mem::take(&mut row));
            }
            (false, c) => cell.push(c),
        }
    }
    rows
}

#[test]
fn csv_has_the_rows_and_values_of_the_json() {
    let files = render_all();
    let json: serde_json::Value =
        serde_json::from_slice(file(&files, "summary.json")).expect("summary.json parses");
    assert_eq!(json["schema"], "kickscan.measure/1");
    let csv = parse_csv(std::str::from_utf8(file(&files, "events.csv")).expect("utf-8"));
    let header = &csv[0];
    assert_eq!(header[0], "file");
    let col = |name: &str| header.iter().position(|h| h == name).expect(name);
    let mut k = 1;
    for cap in json["captures"].as_array().expect("captures") {
        for ev in cap["events"].as_array().expect("events") {
            let row = &csv[k];
            assert_eq!(row.len(), header.len());
            assert_eq!(row[0], cap["file"].as_str().unwrap());
            for (name, value) in ev.as_object().unwrap() {
                let cell = &row[col(name)];
                match value {
                    serde_json::Value::Null => assert_eq!(cell, "", "{name}"),
                    serde_json::Value::Number(n) => {
                        // serde_json's default float parser may miss the last bit; the CSV
                        // cell is the exact shortest form.
                        let x: f64 = cell.parse().expect(name);
                        let y = n.as_f64().unwrap();
                        assert!(
                            (x - y).abs() <= 4.0 * f64::EPSILON * y.abs(),
                            "{name}: {x} vs {y}"
                        );
                    }
                    serde_json::Value::String(s) => assert_eq!(cell, s, "{name}"),
                    serde_json::Value::Bool(b) => assert_eq!(cell, &b.to_string(), "{name}"),
                    serde_json::Value::Array(a) => assert_eq!(cell.split(';').count(), a.len()),
                    serde_json::Value::Object(_) => panic!("nested object in an event"),
                }
            }
            k += 1;
        }
    }
    assert_eq!(csv.len(), k, "one CSV row per JSON event");
    assert_eq!(k - 1, 8);
}

#[test]
fn plots_are_png_and_svg_with_text() {
    let files = render_all();
    let pngs: Vec<_> = files.iter().filter(|(n, _)| n.ends_with(".png")).collect();
    assert_eq!(pngs.len(), 8);
    for (name, bytes) in pngs {
        // PNG signature (ISO/IEC 15948, section 5.2).
        assert!(
            bytes.starts_with(&[0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A]),
            "{name}"
        );
        assert!(bytes.len() > 5_000, "{name} is suspiciously small");
    }
    for (name, bytes) in files.iter().filter(|(n, _)| n.ends_with(".svg")) {
        let svg = std::str::from_utf8(bytes).expect("utf-8");
        assert!(svg.contains("<svg"), "{name}");
        assert!(svg.contains("<text"), "{name}: axis labels are text");
    }
    let overview = std::str::from_utf8(file(&files, "plots/overview-1.svg")).unwrap();
    // The capture spans 600 us, so the time axis is in microseconds.
    assert!(overview.contains("time [us]"), "time axis in us");
    assert!(overview.contains("switch node [V]"));
    assert!(overview.contains("rating 600 V"));
}

#[test]
fn output_is_deterministic() {
    let a = render_all();
    let b = render_all();
    assert_eq!(a.len(), b.len());
    for ((na, ba), (nb, bb)) in a.iter().zip(&b) {
        assert_eq!(na, nb);
        assert!(ba == bb, "{na} differs between two runs");
    }
}

#[test]
fn an_empty_run_still_renders() {
    let doc = kickscan::document::MeasureDoc {
        schema: kickscan::document::MEASURE_SCHEMA,
        captures: Vec::new(),
        summary: Default::default(),
        errors: Vec::new(),
    };
    let settings = kickscan::pipeline::Settings::default();
    let files = render_report(&ReportInput::new(&doc, &settings, &[])).expect("renders");
    let html = String::from_utf8(file(&files, "report.html").to_vec()).unwrap();
    assert!(html.contains("0 events in 0 captures"));
    assert_eq!(
        std::str::from_utf8(file(&files, "events.csv"))
            .unwrap()
            .lines()
            .count(),
        1
    );
}

#[test]
fn terminal_table_of_the_fixture_is_readable_at_100_columns() {
    let f = report_support::fixture();
    let text = kickscan::report::measure_text(&f.doc);
    println!("{text}");
    for line in text.lines() {
        assert!(line.chars().count() <= 100, "too wide: {line}");
    }
    // The worst event (the clipped 520 V spike, cut at the 400 V rail) is starred and flagged.
    let worst = text
        .lines()
        .find(|l| l.starts_with('*'))
        .expect("worst row");
    assert!(
        worst.contains("400 V") && worst.trim_end().ends_with('C'),
        "{worst}"
    );
    assert!(text.contains("projection: gev: switch stress expected once in 1e6 switchings: 470 V"));
    assert!(text.contains("rating 600 V (derating line 480 V)"));
}

#[test]
fn degenerate_and_non_finite_inputs_render_without_panic() {
    use kickscan::measure::Event;
    use kickscan::report::TraceSketch;
    let mut f = report_support::fixture();
    // Made-up broken values: a NaN peak, an infinite stress, an event with no samples.
    let bad = Event {
        index: 9,
        t_edge_s: f64::NAN,
        peak_v: f64::NAN,
        switch_stress_v: f64::INFINITY,
        decay_time_s: Some(f64::NAN),
        ..Event::default()
    };
    f.doc.captures[0].events.push(bad.clone());
    let flat = vec![24.0; 10];
    let sketch_flat = TraceSketch::build("flat.csv", &flat, 1e-6, 0.0, &[(3, 3)], &[bad], 100);
    let empty = TraceSketch::build("empty.csv", &[], 1e-6, 0.0, &[], &[], 100);
    let sketches = vec![sketch_flat, empty];
    f.doc.summary.extreme_value = Some(serde_json::json!({"return_levels": "not a map"}));
    let files = render_report(&ReportInput::new(&f.doc, &f.settings, &sketches)).expect("renders");
    let html = String::from_utf8(file(&files, "report.html").to_vec()).unwrap();
    assert!(
        !html.contains("NaN") && !html.contains("inf "),
        "no NaN in the page"
    );
    let json = std::str::from_utf8(file(&files, "summary.json")).unwrap();
    assert!(!json.contains("NaN"));
}
