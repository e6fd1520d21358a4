//! `report.html`: one self-contained page (inline CSS and SVG, no script, nothing fetched).
//! Every string that comes from an input passes through [`escape`]. No timestamps, so the
//! same inputs give the same bytes.

use std::fmt::Write as _;

use crate::document::MeasureDoc;
use crate::measure::CurrentThrough;
use crate::pipeline::Settings;

use super::digest;
use super::format::{count, eng, eng_opt, plain, MISSING};
use super::plots::Plot;

/// Most rows in the page's event table; the full table is `events.csv`.
pub const MAX_EVENT_ROWS: usize = 1000;

/// Escapes text for HTML element content and quoted attribute values.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

const STYLE: &str = "body{font-family:sans-serif;margin:0 auto;max-width:1100px;padding:0 16px 40px;color:#1a1a1a;line-height:1.4}\
h1{font-size:1.6em;margin-bottom:4px}h2{border-bottom:2px solid #333;padding-bottom:2px;margin-top:32px}\
.job{color:#444;margin-top:0}\
table{border-collapse:collapse;margin:8px 0;font-size:0.92em}\
th,td{border:1px solid #bbb;padding:3px 8px;text-align:right}\
th{background:#eee}td.l,th.l{text-align:left}\
tr.worst td{font-weight:bold;background:#f6dcd9}\
.warn li{color:#7a3d00}.verdict li{font-weight:bold}\
figure{margin:16px 0}figure svg{max-width:100%;height:auto;border:1px solid #ddd}\
figcaption{color:#333;font-size:0.95em}\
.caution{border:2px solid #7a3d00;background:#fff6ea;padding:8px 14px}\
dt{font-weight:bold;margin-top:8px}";

/// Everything the page shows besides the document.
pub struct Page<'a> {
    pub doc: &'a MeasureDoc,
    pub settings: &'a Settings,
    pub plots: &'a [Plot],
    pub verdicts: &'a [String],
    /// Lines about plots left out (too many captures), shown under the plots.
    pub plot_notes: &'a [String],
}

/// The whole page.
pub fn render_html(p: &Page) -> String {
    let doc = p.doc;
    let mut h = String::with_capacity(64 * 1024);
    let title = match &p.settings.label {
        Some(l) => format!("kickscan report: {}", escape(l)),
        None => "kickscan report".to_string(),
    };
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{title}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n"
    );
    let _ = writeln!(h, "<h1>{title}</h1>");
    let _ = writeln!(
        h,
        "<p class=\"job\">Inductive turn-off events measured by kickscan {}: {}.</p>",
        env!("CARGO_PKG_VERSION"),
        escape(&digest::counts_line(doc))
    );

    // What a reviewer needs first: the verdicts and the numbers, then the pictures; the
    // inputs, warnings and every event follow for whoever checks the work.
    verdict_section(&mut h, p.verdicts);
    summary_section(&mut h, doc);
    plots_section(&mut h, p.plots, p.plot_notes);
    warnings_section(&mut h, doc);
    inputs_section(&mut h, p);
    events_section(&mut h, doc);
    method_section(&mut h);
    safety_section(&mut h);
    h.push_str("</body>\n</html>\n");
    h
}

fn row(h: &mut String, key: &str, value: &str) {
    let _ = writeln!(
        h,
        "<tr><th class=\"l\">{}</th><td class=\"l\">{}</td></tr>",
        escape(key),
        escape(value)
    );
}

fn inputs_section(h: &mut String, p: &Page) {
    h.push_str("<section id=\"inputs\">\n<h2>Inputs and settings</h2>\n");
    if !p.doc.captures.is_empty() {
        h.push_str("<table class=\"inputs\">\n<tr><th class=\"l\">file</th><th class=\"l\">format</th><th>samples</th><th>sample interval</th><th class=\"l\">signal</th><th class=\"l\">current</th><th>polarity</th><th>on level</th><th>off level</th><th>events</th></tr>\n");
        for c in &p.doc.captures {
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&c.file),
                escape(&c.format),
                count(c.n_samples),
                eng(c.sample_interval_s, "s"),
                escape(&c.signal),
                escape(c.current.as_deref().unwrap_or(MISSING)),
                match c.polarity {
                    crate::measure::Polarity::Up => "up",
                    crate::measure::Polarity::Down => "down",
                },
                eng(c.v_on, "V"),
                eng(c.v_off, "V"),
                count(c.events.len())
            );
        }
        h.push_str("</table>\n");
    }
    let s = p.settings;
    let m = &s.measure;
    h.push_str("<table class=\"settings\">\n");
    row(h, "polarity", &format!("{:?}", m.polarity).to_lowercase());
    row(h, "supply (--supply)", &eng_opt(m.supply_v, "V"));
    row(h, "switch rating (--rating)", &eng_opt(m.rating_v, "V"));
    row(
        h,
        "coil inductance (--inductance)",
        &eng_opt(m.inductance_h, "H"),
    );
    row(
        h,
        "coil current at turn-off (--coil-current)",
        &eng_opt(m.coil_current_a, "A"),
    );
    row(
        h,
        "current probe (--current-through)",
        match m.current_through {
            CurrentThrough::Switch => "through the switch",
            CurrentThrough::Coil => "through the coil",
        },
    );
    row(
        h,
        "settle band (--settle-band)",
        &format!("{} % of the step", super::plots::tick(m.settle_band_pct)),
    );
    row(
        h,
        "longest event window (--max-window)",
        &eng_opt(m.max_window_s, "s"),
    );
    row(
        h,
        "on-state dwell before an edge (--min-on-time)",
        &m.min_on_time_s
            .map_or_else(|| "derived from the data".to_string(), |t| eng(t, "s")),
    );
    row(
        h,
        "switching rate (--switching-rate)",
        &eng_opt(s.switching_rate_hz, "Hz"),
    );
    row(
        h,
        "signal channel (--signal)",
        s.signal.as_deref().unwrap_or("first voltage channel"),
    );
    row(
        h,
        "current channel (--current)",
        s.current
            .as_deref()
            .unwrap_or("a channel in amperes, if any"),
    );
    if let Some(v) = s.fail_above_v {
        row(h, "fail above (--fail-above)", &eng(v, "V"));
    }
    if let Some(j) = s.fail_energy_j {
        row(h, "fail energy (--fail-energy)", &eng(j, "J"));
    }
    if s.no_fit {
        row(h, "model fit", "off (--no-fit)");
    }
    h.push_str("</table>\n</section>\n");
}

fn warnings_section(h: &mut String, doc: &MeasureDoc) {
    let warnings = digest::warnings(doc);
    if warnings.is_empty() && doc.errors.is_empty() {
        return;
    }
    h.push_str("<section id=\"warnings\">\n<h2>Warnings</h2>\n<ul class=\"warn\">\n");
    for w in &warnings {
        let _ = writeln!(h, "<li>{}</li>", escape(w));
    }
    for e in &doc.errors {
        let _ = writeln!(h, "<li>input failed: {}</li>", escape(&e.error));
    }
    h.push_str("</ul>\n</section>\n");
}

fn summary_section(h: &mut String, doc: &MeasureDoc) {
    h.push_str("<section id=\"summary\">\n<h2>Summary</h2>\n");
    let _ = writeln!(h, "<p>{}.</p>", escape(&digest::counts_line(doc)));
    let rows = digest::metric_rows(doc);
    if !rows.is_empty() {
        h.push_str("<table class=\"summary\">\n<tr><th class=\"l\">metric</th><th>events</th><th>min</th><th>median (p50)</th><th>p95</th><th>max</th></tr>\n");
        for r in &rows {
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                r.name, r.n, r.min, r.p50, r.p95, r.max
            );
        }
        h.push_str("</table>\n");
    }
    h.push_str("<ul>\n");
    if let Some(w) = digest::worst_line(doc) {
        let _ = writeln!(h, "<li>Worst: {}</li>", escape(&w));
    }
    if let Some(r) = digest::rating_line(doc) {
        let _ = writeln!(h, "<li>{}</li>", escape(&upper_first(&r)));
    }
    for l in digest::return_level_lines(doc) {
        let _ = writeln!(h, "<li>Projection, {}</li>", escape(&l));
    }
    h.push_str("</ul>\n</section>\n");
}

fn upper_first(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

fn verdict_section(h: &mut String, verdicts: &[String]) {
    if verdicts.is_empty() {
        return;
    }
    h.push_str("<section id=\"verdicts\">\n<h2>Verdict</h2>\n<ul class=\"verdict\">\n");
    for v in verdicts {
        let _ = writeln!(h, "<li>{}</li>", escape(v));
    }
    h.push_str("</ul>\n</section>\n");
}

fn plots_section(h: &mut String, plots: &[Plot], notes: &[String]) {
    if plots.is_empty() && notes.is_empty() {
        return;
    }
    h.push_str("<section id=\"plots\">\n<h2>Plots</h2>\n");
    for p in plots {
        let _ = writeln!(
            h,
            "<figure id=\"plot-{}\">\n{}\n<figcaption>{} (also <a href=\"plots/{}.png\">PNG</a> and <a href=\"plots/{}.svg\">SVG</a>)</figcaption>\n</figure>",
            escape(&p.name),
            svg_body(&p.svg),
            escape(&p.caption),
            escape(&p.name),
            escape(&p.name)
        );
    }
    for n in notes {
        let _ = writeln!(h, "<p>{}</p>", escape(n));
    }
    h.push_str("</section>\n");
}

/// The `<svg>` element of a plot, without any XML prolog (not allowed inside HTML).
fn svg_body(svg: &str) -> &str {
    svg.find("<svg").and_then(|k| svg.get(k..)).unwrap_or("")
}

fn events_section(h: &mut String, doc: &MeasureDoc) {
    let ranked = digest::ranked_events(doc);
    if ranked.is_empty() {
        return;
    }
    h.push_str("<section id=\"events\">\n<h2>Events, worst first</h2>\n");
    if ranked.len() > MAX_EVENT_ROWS {
        let _ = writeln!(
            h,
            "<p>The {MAX_EVENT_ROWS} events with the highest switch stress of {}; every event is in <a href=\"events.csv\">events.csv</a>.</p>",
            count(ranked.len())
        );
    }
    h.push_str("<table class=\"events\">\n<tr><th class=\"l\">file</th><th>event</th><th>edge time</th><th>switch stress</th><th>peak</th><th>overshoot</th><th>rise time</th><th>decay time</th><th>settle time</th><th>ring frequency</th><th>damping ratio</th><th>switch energy</th><th>clamp energy</th><th>flags</th></tr>\n");
    for (c, e) in ranked.iter().take(MAX_EVENT_ROWS) {
        let class = if digest::is_worst(doc, &c.file, e.index) {
            " class=\"worst\""
        } else {
            ""
        };
        let ring = match (e.ring_freq_hz, e.ring_kind) {
            (Some(f), Some(k)) => format!(
                "{} ({})",
                eng(f, "Hz"),
                match k {
                    crate::measure::RingKind::Parasitic => "parasitic",
                    crate::measure::RingKind::Coil => "coil",
                }
            ),
            (f, _) => eng_opt(f, "Hz"),
        };
        let _ = writeln!(
            h,
            "<tr{class}><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&c.file),
            e.index,
            eng(e.t_edge_s, "s"),
            eng(e.switch_stress_v, "V"),
            eng(e.peak_v, "V"),
            e.overshoot_pct.map_or_else(|| MISSING.into(), super::format::pct),
            eng_opt(e.rise_time_s, "s"),
            eng_opt(e.decay_time_s, "s"),
            eng_opt(e.settle_time_s, "s"),
            ring,
            e.damping_ratio.map_or_else(|| MISSING.into(), plain),
            eng_opt(e.energy_j, "J"),
            eng_opt(e.clamp_energy_j, "J"),
            digest::flags(e)
        );
    }
    h.push_str("</table>\n<p>Flags: C clipped (the peak sits on an ADC rail and is a lower bound), U undersampled (fewer than 10 samples across the main lobe or a ring period), T truncated (the capture or the window ends before the event settles).</p>\n</section>\n");
}

const METHOD: &str = r#"<section id="method">
<h2>Method notes</h2>
<dl>
<dt>State levels and reference levels</dt>
<dd>The on and off levels are state levels in the sense of IEEE Std 181-2011: modes of the histogram of the samples, with bins narrow enough to resolve the switching step, cross-checked against the level just before each edge and after the event has settled. The edge time is the crossing of the 50 % reference level between the two states.</dd>
<dt>Switch stress and overshoot</dt>
<dd>Switch stress is |peak &minus; rail|, the voltage across the switch at the peak, where the rail is ground for a low-side switch and the supply for a high-side one. Overshoot is |peak &minus; off level|, and as a percentage of the step it is the overshoot aberration of IEEE Std 181-2011.</dd>
<dt>Transition duration</dt>
<dd>Rise time is the 10 % to 90 % transition duration (IEEE Std 181-2011) from the on level toward the off level, on the peak's first crossing.</dd>
<dt>Ringing and damping</dt>
<dd>The ring frequency is the damped frequency of the ringing after the peak or after the clamp releases. The damping ratio comes from the logarithmic decrement &delta; of successive same-sign ring peaks, &zeta; = &delta; / &radic;(4&pi;&sup2; + &delta;&sup2;), refined by the damped-RLC model fit where it runs.</dd>
<dt>Decay and settle time</dt>
<dd>Decay time runs from the edge until the coil current has died (the end of the clamp plateau, or of the first lobe when nothing clamps); it is what delays a relay's release. Settle time runs until the signal stays within the settle band around the off level, judged on a smoothed envelope.</dd>
<dt>Percentiles</dt>
<dd>Percentiles (p50, p95, p99) use the linear interpolation of Hyndman &amp; Fan (1996), definition 7.</dd>
<dt>Extreme values</dt>
<dd>The projection to many switchings fits an extreme-value distribution to block maxima of the switch stress and reports return levels with their intervals, following Coles (2001), <i>An Introduction to Statistical Modeling of Extreme Values</i>. Observed events are plotted at the Weibull plotting position: the k-th largest of n is exceeded once in (n + 1) / k switchings.</dd>
<dt>Derating</dt>
<dd>The derating line is 80 % of the switch rating (common practice).</dd>
</dl>
</section>
"#;

fn method_section(h: &mut String) {
    h.push_str(METHOD);
}

const SAFETY: &str = r#"<section id="safety">
<h2>Safety</h2>
<p class="caution">Inductive turn-off spikes can reach hundreds of volts. Probes, oscilloscope inputs and bench supplies have voltage ratings: check them against the worst case above before you measure. Coils connected to the mains need isolated, rated equipment. Local electrical codes and qualified practice come first.</p>
</section>
"#;

fn safety_section(h: &mut String) {
    h.push_str(SAFETY);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_covers_markup_and_quotes() {
        assert_eq!(
            escape("<script>alert(1)</script>.csv"),
            "&lt;script&gt;alert(1)&lt;/script&gt;.csv"
        );
        assert_eq!(escape("a&b \"c\" 'd'"), "a&amp;b &quot;c&quot; &#39;d&#39;");
    }

    #[test]
    fn svg_prolog_is_dropped() {
        assert_eq!(
            svg_body("<?xml version=\"1.0\"?>\n<svg x=\"1\"></svg>"),
            "<svg x=\"1\"></svg>"
        );
        assert_eq!(svg_body("nothing"), "");
    }
}
