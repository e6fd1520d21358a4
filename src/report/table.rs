//! Terminal text: the per-event table and summary of `measure`, and the account of what
//! `inspect` understood. Rows fit in 100 columns.

use std::fmt::Write as _;

use crate::document::{CaptureDoc, InspectDoc, InspectFile, MeasureDoc};
use crate::measure::Event;

use super::digest;
use super::format::{count, eng, eng_opt, plain, MISSING};

/// One column of the event table: header (with unit) and width.
struct Column {
    header: &'static str,
    width: usize,
    cell: fn(&Event) -> String,
}

/// Which energy a capture's events carry decides the energy column.
fn energy_column(c: &CaptureDoc) -> Option<Column> {
    if c.events.iter().any(|e| e.energy_j.is_some()) {
        Some(Column {
            header: "Esw [J]",
            width: 8,
            cell: |e| eng_opt(e.energy_j, "J"),
        })
    } else if c.events.iter().any(|e| e.clamp_energy_j.is_some()) {
        Some(Column {
            header: "Eclamp [J]",
            width: 10,
            cell: |e| eng_opt(e.clamp_energy_j, "J"),
        })
    } else {
        None
    }
}

fn columns(c: &CaptureDoc) -> Vec<Column> {
    let mut cols = vec![
        Column {
            header: "edge [s]",
            width: 8,
            cell: |e| eng(e.t_edge_s, "s"),
        },
        Column {
            header: "stress [V]",
            width: 10,
            cell: |e| eng(e.switch_stress_v, "V"),
        },
        Column {
            header: "peak [V]",
            width: 8,
            cell: |e| eng(e.peak_v, "V"),
        },
        Column {
            header: "rise [s]",
            width: 8,
            cell: |e| eng_opt(e.rise_time_s, "s"),
        },
        Column {
            header: "decay [s]",
            width: 9,
            cell: |e| eng_opt(e.decay_time_s, "s"),
        },
        Column {
            header: "settle [s]",
            width: 10,
            cell: |e| eng_opt(e.settle_time_s, "s"),
        },
        Column {
            header: "ring [Hz]",
            width: 9,
            cell: |e| eng_opt(e.ring_freq_hz, "Hz"),
        },
        Column {
            header: "zeta",
            width: 6,
            cell: |e| e.damping_ratio.map_or_else(|| MISSING.into(), plain),
        },
    ];
    cols.extend(energy_column(c));
    cols
}

/// Terminal table of every event, grouped by capture, then the summary block.
pub fn measure_text(doc: &MeasureDoc) -> String {
    let mut s = String::new();
    for c in &doc.captures {
        let _ = writeln!(
            s,
            "{}\n  {}, {} samples every {}, {} event{}, spikes {}, on level {}, off level {}",
            c.file,
            c.format,
            count(c.n_samples),
            eng(c.sample_interval_s, "s"),
            count(c.events.len()),
            if c.events.len() == 1 { "" } else { "s" },
            match c.polarity {
                crate::measure::Polarity::Up => "up",
                crate::measure::Polarity::Down => "down",
            },
            eng(c.v_on, "V"),
            eng(c.v_off, "V"),
        );
        if c.events.is_empty() {
            s.push_str("  no turn-off events found\n\n");
            continue;
        }
        let cols = columns(c);
        let _ = write!(s, "  {:>4}", "#");
        for col in &cols {
            let _ = write!(s, " {:>w$}", col.header, w = col.width);
        }
        s.push_str(" flags\n");
        for e in &c.events {
            let mark = if digest::is_worst(doc, &c.file, e.index) {
                '*'
            } else {
                ' '
            };
            let _ = write!(s, "{mark} {:>4}", e.index);
            for col in &cols {
                let _ = write!(s, " {:>w$}", (col.cell)(e), w = col.width);
            }
            let _ = writeln!(s, " {}", digest::flags(e));
            trim_line_end(&mut s);
        }
        s.push('\n');
    }
    if doc.captures.iter().any(|c| !c.events.is_empty()) {
        s.push_str(
            "* worst switch stress. edge: time of the 50 % crossing; stress: |peak - rail|; \
             zeta: damping ratio\n  Esw: energy into the switch; Eclamp: energy into the clamp\n  \
             flags: C clipped (peak is a lower bound), U undersampled, T truncated\n\n",
        );
    }
    summary_text(doc, &mut s);
    s
}

/// The summary block of [`measure_text`] alone (counts, metrics, worst event, rating,
/// projection, warnings, failed inputs), for runs where a per-event table would not help.
pub fn measure_summary_text(doc: &MeasureDoc) -> String {
    let mut s = String::new();
    summary_text(doc, &mut s);
    s
}

fn summary_text(doc: &MeasureDoc, s: &mut String) {
    let _ = writeln!(s, "summary: {}", digest::counts_line(doc));
    let rows = digest::metric_rows(doc);
    if !rows.is_empty() {
        let _ = writeln!(
            s,
            "  {:<17} {:>7} {:>10} {:>10} {:>10} {:>10}",
            "metric", "n", "min", "p50", "p95", "max"
        );
        for r in &rows {
            let _ = writeln!(
                s,
                "  {:<17} {:>7} {:>10} {:>10} {:>10} {:>10}",
                r.name, r.n, r.min, r.p50, r.p95, r.max
            );
        }
    }
    if let Some(w) = digest::worst_line(doc) {
        wrap_into(s, &format!("worst: {w}"), "  ");
    }
    if let Some(r) = digest::rating_line(doc) {
        wrap_into(s, &r, "  ");
    }
    for l in digest::return_level_lines(doc) {
        wrap_into(s, &format!("projection: {l}"), "  ");
    }
    let warnings = digest::warnings(doc);
    if !warnings.is_empty() {
        s.push_str("warnings:\n");
        for w in warnings {
            wrap_into(s, &format!("  {w}"), "    ");
        }
    }
    if !doc.errors.is_empty() {
        s.push_str("inputs that failed:\n");
        for e in &doc.errors {
            wrap_into(s, &format!("  {}", e.error), "    ");
        }
    }
}

/// Width the terminal text keeps to.
const WIDTH: usize = 100;

/// Appends `text` wrapped at spaces to [`WIDTH`] columns, continuation lines indented. A
/// single word longer than a line (a long path) is left whole.
fn wrap_into(s: &mut String, text: &str, indent: &str) {
    let body = text.trim_start_matches(' ');
    let mut line = text[..text.len() - body.len()].to_string();
    let mut fresh = true;
    for word in body.split(' ').filter(|w| !w.is_empty()) {
        if !fresh && line.chars().count() + 1 + word.chars().count() > WIDTH {
            s.push_str(&line);
            s.push('\n');
            line = indent.to_string();
            fresh = true;
        }
        if !fresh {
            line.push(' ');
        }
        line.push_str(word);
        fresh = false;
    }
    s.push_str(&line);
    s.push('\n');
}

/// Drops trailing spaces of the line just written (an empty flags cell).
fn trim_line_end(s: &mut String) {
    if s.ends_with('\n') {
        s.pop();
        let keep = s.trim_end_matches(' ').len();
        s.truncate(keep);
        s.push('\n');
    }
}

/// What `inspect` understood, one block per file.
pub fn inspect_text(doc: &InspectDoc) -> String {
    let mut s = String::new();
    for f in &doc.files {
        inspect_file(f, &mut s);
        s.push('\n');
    }
    if !doc.errors.is_empty() {
        s.push_str("inputs that failed:\n");
        for e in &doc.errors {
            let _ = writeln!(s, "  {}", e.error);
        }
    }
    s
}

fn inspect_file(f: &InspectFile, s: &mut String) {
    let _ = writeln!(s, "{}", f.file);
    let _ = writeln!(s, "  format            {}", f.format);
    let span = f.sample_interval_s * f.n_samples as f64;
    let _ = writeln!(
        s,
        "  record            {} samples over {}, first sample at {}",
        count(f.n_samples),
        eng(span, "s"),
        eng(f.t0_s, "s")
    );
    let rate = if f.sample_interval_s > 0.0 {
        format!(" ({})", eng(1.0 / f.sample_interval_s, "Sa/s"))
    } else {
        String::new()
    };
    let _ = writeln!(
        s,
        "  sample interval   {}{rate}",
        eng(f.sample_interval_s, "s")
    );
    if !f.channels.is_empty() {
        s.push_str("  channels\n");
        for (k, c) in f.channels.iter().enumerate() {
            let unit = c.unit.as_str();
            let _ = write!(
                s,
                "    {:>2} {} [{}]  min {}  max {}",
                k + 1,
                c.name,
                unit,
                eng_opt(c.min, unit),
                eng_opt(c.max, unit)
            );
            if c.adc_min_v.is_some() || c.adc_max_v.is_some() {
                let _ = write!(
                    s,
                    "  ADC rails seen: {} / {}",
                    eng_opt(c.adc_min_v, unit),
                    eng_opt(c.adc_max_v, unit)
                );
            }
            s.push('\n');
        }
    }
    if !f.metadata.is_empty() {
        s.push_str("  metadata\n");
        for (k, v) in &f.metadata {
            let _ = writeln!(s, "    {k}: {v}");
        }
    }
    if !f.notes.is_empty() {
        s.push_str("  detected (override with the options named)\n");
        for n in &f.notes {
            let _ = writeln!(s, "    {n}");
        }
    }
    if !f.warnings.is_empty() {
        s.push_str("  warnings\n");
        for w in &f.warnings {
            let _ = writeln!(s, "    {w}");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::document::{InspectChannel, Summary, Worst, INSPECT_SCHEMA, MEASURE_SCHEMA};

    fn capture(events: Vec<Event>) -> CaptureDoc {
        CaptureDoc {
            label: None,
            file: "bench/run1.csv".into(),
            format: "csv".into(),
            sample_interval_s: 1e-8,
            n_samples: 1_000_000,
            t0_s: 0.0,
            signal: "CH1".into(),
            current: None,
            polarity: crate::measure::Polarity::Up,
            v_on: 0.2,
            v_off: 24.0,
            warnings: vec!["probe range is tight".into()],
            events,
        }
    }

    #[test]
    fn measure_table_fits_100_columns_and_marks_the_worst() {
        let evs = vec![
            Event {
                index: 0,
                t_edge_s: 1.2e-3,
                switch_stress_v: 98.5,
                peak_v: 98.5,
                rise_time_s: Some(3.5e-8),
                decay_time_s: Some(2.6e-4),
                settle_time_s: Some(1.4e-3),
                ring_freq_hz: Some(1.24e6),
                damping_ratio: Some(0.052),
                energy_j: Some(5.6e-4),
                ..Event::default()
            },
            Event {
                index: 1,
                t_edge_s: 11.2e-3,
                switch_stress_v: -412.0,
                peak_v: -412.0,
                clipped: true,
                ..Event::default()
            },
        ];
        let doc = MeasureDoc {
            schema: MEASURE_SCHEMA,
            captures: vec![capture(evs)],
            summary: Summary {
                n_events: 2,
                n_clipped: 1,
                worst: Some(Worst {
                    file: "bench/run1.csv".into(),
                    index: 0,
                    t_edge_s: 1.2e-3,
                    peak_v: 98.5,
                    switch_stress_v: 98.5,
                }),
                ..Summary::default()
            },
            errors: Vec::new(),
        };
        let text = measure_text(&doc);
        for line in text.lines() {
            assert!(line.chars().count() <= 100, "too wide: {line}");
        }
        let worst_row = text
            .lines()
            .find(|l| l.starts_with('*'))
            .expect("worst row");
        assert!(worst_row.contains("98.5 V"), "{worst_row}");
        assert!(worst_row.contains("35.0 ns"), "{worst_row}");
        assert!(worst_row.contains("1.24 MHz"), "{worst_row}");
        assert!(worst_row.contains("560 uJ"), "{worst_row}");
        assert!(text.contains("stress [V]"));
        assert!(text.contains("2 events in 1 capture, 1 clipped"));
        assert!(text.contains("worst: bench/run1.csv event 0 at 1.20 ms"));
        assert!(text.contains("bench/run1.csv: probe range is tight"));
        let clipped_row = text.lines().find(|l| l.contains("-412 V")).unwrap();
        assert!(clipped_row.trim_end().ends_with('C'), "{clipped_row}");
    }

    #[test]
    fn long_lines_wrap_at_spaces() {
        let mut s = String::new();
        let words = vec!["word"; 30].join(" ");
        wrap_into(&mut s, &words, "  ");
        let lines: Vec<&str> = s.lines().collect();
        assert_eq!(lines.len(), 2);
        assert!(lines.iter().all(|l| l.chars().count() <= WIDTH));
        assert!(lines[1].starts_with("  word"));
        let mut s = String::new();
        let long = "x".repeat(150);
        wrap_into(&mut s, &format!("a {long} b"), "  ");
        assert_eq!(s, format!("a\n  {long}\n  b\n"));
    }

    #[test]
    fn inspect_text_shows_interval_channels_rails_and_notes() {
        let doc = InspectDoc {
            schema: INSPECT_SCHEMA,
            files: vec![InspectFile {
                file: "scope.csv".into(),
                format: "csv".into(),
                sample_interval_s: 2e-9,
                n_samples: 500_000,
                t0_s: -1e-4,
                channels: vec![InspectChannel {
                    name: "CH2".into(),
                    unit: "V".into(),
                    min: Some(-0.4),
                    max: Some(512.0),
                    adc_min_v: None,
                    adc_max_v: Some(512.0),
                }],
                metadata: vec![("Record Length".into(), "500000".into())],
                notes: vec!["delimiter ';' (sniffed)".into()],
                warnings: vec!["time steps jitter".into()],
            }],
            errors: Vec::new(),
        };
        let t = inspect_text(&doc);
        assert!(t.contains("sample interval   2.00 ns (500 MSa/s)"), "{t}");
        assert!(t.contains("500 000 samples over 1.00 ms"), "{t}");
        assert!(t.contains("CH2 [V]  min -400 mV  max 512 V"), "{t}");
        assert!(t.contains("ADC rails seen: - / 512 V"), "{t}");
        assert!(t.contains("delimiter ';' (sniffed)"));
        assert!(t.contains("Record Length: 500000"));
        assert!(t.contains("time steps jitter"));
    }
}
