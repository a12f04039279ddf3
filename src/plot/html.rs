//! The comparison report: one self-contained HTML file (no scripts, no fetches, the plot
//! inline as SVG) with the overlay plot, the comparison table, each run's setup, hits,
//! modes and notes, and every warning. Written as well-formed XML so any XML parser can
//! check it, with print rules for A4 and Letter.

use crate::run::RunFile;
use crate::run::compare::Comparison;

/// Text made safe for HTML element content and attribute values.
pub fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c if (c as u32) < 0x20 && c != '\n' && c != '\t' => o.push(' '),
            c => o.push(c),
        }
    }
    o
}

const STYLE: &str = "
body { font-family: sans-serif; font-size: 11pt; color: #000; background: #fff; margin: 1.5em auto; max-width: 60em; padding: 0 1em; }
h1 { font-size: 16pt; } h2 { font-size: 13pt; margin-top: 1.6em; border-bottom: 1px solid #888; } h3 { font-size: 11.5pt; }
table { border-collapse: collapse; margin: 0.4em 0 1em 0; font-size: 9pt; }
th, td { border: 1px solid #999; padding: 2px 5px; text-align: left; vertical-align: top; }
th { background: #eee; }
pre { white-space: pre-wrap; font-size: 8pt; }
td.n { text-align: right; font-variant-numeric: tabular-nums; }
.figure svg { width: 100%; height: auto; }
.warn { border-left: 4px solid #000; padding-left: 0.6em; }
.small { font-size: 9pt; color: #333; }
@page { size: auto; margin: 12mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  .figure, table, .run-head { break-inside: avoid; page-break-inside: avoid; }
  .figure svg { max-height: 240mm; }
  .run { break-before: page; page-break-before: always; }
}
";

/// What goes into the report.
pub struct ReportInput<'a> {
    pub title: &'a str,
    /// (file as given, run).
    pub runs: &'a [(String, RunFile)],
    /// The overlay plot as SVG text.
    pub svg: &'a str,
    /// The comparison (two runs or more).
    pub comparison: Option<&'a Comparison>,
    /// The comparison as `compare` prints it (every section: mounts, bands, predictions).
    pub comparison_text: Option<&'a str>,
    /// Sentences the reader must see (runs not drawn, setup differences, ...).
    pub warnings: &'a [String],
    pub created_utc: &'a str,
    pub safety: &'a str,
}

fn kv_table(rows: &[(&str, String)]) -> String {
    let mut s = String::from("<table>\n");
    for (k, v) in rows {
        s += &format!("<tr><th>{}</th><td>{}</td></tr>\n", esc(k), esc(v));
    }
    s + "</table>\n"
}

fn run_section(file: &str, run: &RunFile) -> String {
    let st = &run.setup;
    let mut s = format!(
        "<section class=\"run\">\n<h2>Run: {}</h2>\n<div class=\"run-head\">\n",
        esc(&run.variant.label)
    );
    // Roles as the analysis used them (`setup.roles`), not as the source declared them: a
    // WAV declares none.
    let role = |i: usize| {
        if st.roles.force == Some(i) {
            "force"
        } else if st.roles.response == i {
            "response"
        } else if st.roles.base == Some(i) {
            "base"
        } else {
            "unused"
        }
    };
    let channels: Vec<String> = st
        .channels
        .iter()
        .enumerate()
        .map(|(i, c)| format!("{}: {} ({}, {})", i, c.name, c.unit, role(i)))
        .collect();
    let rows = vec![
        ("file", file.to_string()),
        ("note", run.variant.note.clone()),
        (
            "mass",
            run.variant
                .mass_g
                .map_or("not given".into(), |m| format!("{m:.1} g")),
        ),
        ("created (UTC)", run.created_utc.clone()),
        ("source", st.source.clone()),
        ("sample rate", format!("{:.0} Hz", st.sample_rate_hz)),
        ("channels", channels.join("; ")),
        ("curve", st.basis.label().to_string()),
        (
            "band searched",
            format!("{:.1} to {:.1} Hz", st.band_hz.0, st.band_hz.1),
        ),
        (
            "record",
            format!(
                "{} samples, FFT length {}, resolution {:.3} Hz, line spacing {:.3} Hz",
                st.fft.record_samples, st.fft.fft_len, st.fft.resolution_hz, st.fft.line_spacing_hz
            ),
        ),
        (
            "exponential window",
            st.exponential_tau_s
                .map_or("off".into(), |t| format!("tau {t:.4} s")),
        ),
        (
            "hits",
            format!("{} accepted of {}", run.hits_accepted, run.hits_total),
        ),
    ];
    s += &kv_table(&rows);
    s += "</div>\n";
    if let Some(d) = &run.drive {
        s += "<h3>Excitation bands</h3>\n<table>\n<tr><th>band</th><th>from Hz</th><th>to Hz</th></tr>\n";
        for b in &d.bands {
            s += &format!(
                "<tr><td>{}</td><td class=\"n\">{:.1}</td><td class=\"n\">{:.1}</td></tr>\n",
                esc(&b.name),
                b.hz.0,
                b.hz.1
            );
        }
        s += &format!(
            "</table>\n<p class=\"small\">{} (rotation {:.0} to {:.0} rpm)</p>\n",
            esc(&d.basis),
            d.rpm.0,
            d.rpm.1
        );
        let sagged = crate::drive::report::sagged_line(d);
        if !sagged.trim().is_empty() {
            s += &format!("<p class=\"small\">{}</p>\n", esc(sagged.trim()));
        }
    }
    if let Some(m) = &run.mount {
        s += &format!(
            "<h3>Soft mount</h3>\n<p>Mount frequency {:.1} Hz, damping {:.1} %{} ({} model), isolates above {:.0} Hz; fit residual {:.3} over {:.0} to {:.0} Hz ({} lines).</p>\n",
            m.natural_frequency_hz,
            100.0 * m.damping_ratio,
            esc(&m.second_text()),
            m.model_name(),
            m.isolation_onset_hz(),
            m.error,
            m.band_hz.0,
            m.band_hz.1,
            m.lines
        );
    }
    s += "<h3>Modes</h3>\n";
    if run.modes.is_empty() {
        s += "<p>No mode found.</p>\n";
    } else {
        s += "<table>\n<tr><th>#</th><th>frequency Hz</th><th>damping %</th><th>Q</th><th>coherence</th><th>prominence dB</th><th>95 % frequency Hz</th><th>method</th><th>flags</th><th>bands</th></tr>\n";
        for (i, m) in run.modes.iter().enumerate() {
            let ci = m.uncertainty.as_ref().map_or("-".to_string(), |u| {
                format!("{:.2} to {:.2}", u.frequency_hz.low, u.frequency_hz.high)
            });
            let flags: Vec<&str> = m.flags.iter().map(|f| f.label()).collect();
            let band = m.band.as_ref().map_or("-".to_string(), |b| {
                format!("{} {} ({:+.1} %)", b.verdict.label(), b.name, b.margin_pct)
            });
            s += &format!(
                "<tr><td class=\"n\">{}</td><td class=\"n\">{:.2}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{:.1}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                i + 1,
                m.frequency_hz,
                m.damping_ratio
                    .map_or("-".into(), |z| format!("{:.2}", 100.0 * z)),
                m.q.map_or("-".into(), |q| format!("{q:.1}")),
                m.coherence.map_or("-".into(), |c| format!("{c:.3}")),
                m.prominence_db,
                esc(&ci),
                esc(&m.method),
                esc(&flags.join(", ")),
                esc(&band)
            );
        }
        s += "</table>\n";
    }
    s += "<h3>Hits</h3>\n<table>\n<tr><th>#</th><th>time s</th><th>verdict</th><th>reason</th><th>peak force</th><th>peak response</th></tr>\n";
    for h in &run.hits {
        s += &format!(
            "<tr><td class=\"n\">{}</td><td class=\"n\">{:.3}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{:.4}</td></tr>\n",
            h.number,
            h.trigger_sample as f64 / st.sample_rate_hz,
            esc(h.verdict.label()),
            esc(&h.reason),
            h.peak_force.map_or("-".into(), |f| format!("{f:.3}")),
            h.peak_response
        );
    }
    s += "</table>\n";
    if !run.notes.is_empty() {
        s += "<h3>Notes</h3>\n<ul>\n";
        for n in &run.notes {
            s += &format!("<li>{}</li>\n", esc(n));
        }
        s += "</ul>\n";
    }
    s + "</section>\n"
}

/// The whole report as HTML text.
pub fn report_html(r: &ReportInput<'_>) -> String {
    let mut s =
        String::from("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n");
    s += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n";
    s += &format!(
        "<title>{}</title>\n<style>{}</style>\n</head>\n<body>\n",
        esc(r.title),
        STYLE
    );
    s += &format!("<h1>{}</h1>\n", esc(r.title));
    s += &format!(
        "<p class=\"small\">Made by tapmodes {} on {} from {} run file{}.</p>\n",
        env!("CARGO_PKG_VERSION"),
        esc(r.created_utc),
        r.runs.len(),
        if r.runs.len() == 1 { "" } else { "s" }
    );
    s += "<h2>Warnings</h2>\n";
    if r.warnings.is_empty() {
        s += "<p>None.</p>\n";
    } else {
        s += "<ul class=\"warn\">\n";
        for w in r.warnings {
            s += &format!("<li>{}</li>\n", esc(w));
        }
        s += "</ul>\n";
    }
    s += "<h2>Frequency response</h2>\n<div class=\"figure\">\n";
    s += strip_prolog(r.svg);
    s += "\n</div>\n";
    if let Some(c) = r.comparison {
        s += &format!("<h2>Comparison against {}</h2>\n", esc(&c.baseline));
        for v in &c.variants {
            s += &format!("<p><b>{}</b>: {}</p>\n", esc(&v.label), esc(&v.summary));
        }
        s += &super::html_compare::comparison_table(c);
        s += &format!(
            "<p class=\"small\">Pairing within {:.0} %; frequency floor {:.2} %, damping floor {:.0} % ({}).</p>\n",
            c.settings.max_shift_pct,
            c.settings.floor_frequency_pct,
            c.settings.floor_damping_pct,
            esc(&c.settings.floor_source)
        );
        if let Some(t) = r.comparison_text {
            s += &format!(
                "<h3>As printed by compare</h3>\n<pre class=\"small\">{}</pre>\n",
                esc(t)
            );
        }
    }
    for (file, run) in r.runs {
        s += &run_section(file, run);
    }
    s += &format!(
        "<p class=\"small\">{}</p>\n</body>\n</html>\n",
        esc(r.safety)
    );
    s
}

/// SVG text without an XML declaration (not allowed inside HTML).
fn strip_prolog(svg: &str) -> &str {
    let t = svg.trim_start();
    match t.strip_prefix("<?xml") {
        Some(rest) => rest.find("?>").map_or(t, |i| rest[i + 2..].trim_start()),
        None => t,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_and_prolog() {
        assert_eq!(
            esc("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;"
        );
        assert_eq!(strip_prolog("<?xml version=\"1.0\"?>\n<svg/>"), "<svg/>");
        assert_eq!(strip_prolog("<svg/>"), "<svg/>");
    }
}
