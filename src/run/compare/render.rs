//! The comparison as text: an 80-column table with a legend (the CSV is in `table_csv`).

use super::predicted::PredictionReport;
pub use super::table_csv::render_csv;
use super::{Comparison, MatchedMode, MountComparison, VariantComparison, Verdict};

/// Widest line of the table.
pub const WIDTH: usize = 80;

/// Longest label the table shows in full; longer ones end in "..." (the JSON and CSV keep
/// them whole).
pub const LABEL_CHARS: usize = 30;

/// Word-wrap `text` to `WIDTH`, first line prefixed by `first`, the rest by `rest`. A word
/// longer than a whole line is cut across lines.
pub(super) fn wrap(text: &str, first: &str, rest: &str) -> String {
    let mut out = String::new();
    let mut line = first.to_string();
    let mut empty = true;
    let flush = |out: &mut String, line: &mut String, empty: &mut bool| {
        *out += line.trim_end();
        out.push('\n');
        *line = rest.to_string();
        *empty = true;
    };
    for w in text.split_whitespace() {
        let mut w: Vec<char> = w.chars().collect();
        loop {
            let used = line.chars().count() + usize::from(!empty);
            if used + w.len() <= WIDTH {
                if !empty {
                    line.push(' ');
                }
                line.extend(w.iter());
                empty = false;
                break;
            }
            if !empty {
                flush(&mut out, &mut line, &mut empty);
                continue;
            }
            let room = WIDTH.saturating_sub(used).max(1);
            line.extend(w[..room].iter());
            w.drain(..room);
            flush(&mut out, &mut line, &mut empty);
            if w.is_empty() {
                break;
            }
        }
    }
    if !empty || out.is_empty() {
        out += line.trim_end();
        out.push('\n');
    }
    out
}

/// A label cut to `LABEL_CHARS` characters, ending in "..." when cut.
pub(super) fn short(label: &str) -> String {
    if label.chars().count() <= LABEL_CHARS {
        label.to_string()
    } else {
        let mut s: String = label.chars().take(LABEL_CHARS - 3).collect();
        s += "...";
        s
    }
}

fn pct(z: Option<f64>) -> String {
    z.map_or("-".into(), |z| format!("{:.2}", 100.0 * z))
}

fn verdict(v: Option<Verdict>) -> &'static str {
    v.map_or("-", Verdict::short)
}

const HEAD: &str = "   pair base Hz  var Hz   df %   k eq  k mass  zb %  zv % f      z      conf";

fn row(m: &MatchedMode) -> String {
    let pair = format!(
        "{}-{}{}",
        m.baseline_mode,
        m.variant_mode,
        m.pairing.short()
    );
    let conf = format!(
        "{:.2}{}",
        m.confidence,
        if m.residue_sign_agrees == Some(false) {
            "!"
        } else {
            ""
        }
    );
    let line = format!(
        "  {:>5} {:>7.1} {:>7.1} {:>+6.1} {:>6.3} {:>7} {:>5} {:>5} {:<6} {:<6} {:<5}",
        pair,
        m.baseline_hz,
        m.variant_hz,
        m.frequency_change_pct,
        m.stiffness_ratio,
        m.stiffness_ratio_mass_corrected
            .map_or("-".into(), |k| format!("{k:.3}")),
        pct(m.baseline_damping),
        pct(m.variant_damping),
        m.frequency_verdict.short(),
        verdict(m.damping_verdict),
        conf
    );
    format!("{}\n", line.trim_end())
}

fn mount_rows(c: &MountComparison, base: &str, var: &str) -> String {
    let mut s = String::new();
    if let (Some(a), Some(b)) = (&c.baseline, &c.variant) {
        let line = format!(
            "  {:>5} {:>7.1} {:>7.1} {:>+6.1} {:>6.3} {:>7} {:>5.2} {:>5.2} {:<6} {:<6}",
            "mount",
            a.natural_frequency_hz,
            b.natural_frequency_hz,
            c.frequency_change_pct.unwrap_or(0.0),
            c.stiffness_ratio.unwrap_or(0.0),
            "-",
            100.0 * a.damping_ratio,
            100.0 * b.damping_ratio,
            verdict(c.frequency_verdict),
            verdict(c.damping_verdict),
        );
        s += line.trim_end();
        s.push('\n');
        let poor = |e: f64| {
            if e <= crate::modes::softmount::DOUBTFUL_ERROR {
                ""
            } else {
                " (poor fit)"
            }
        };
        s += &wrap(
            &format!(
                "mount fit residual {:.2}{} in {base}, {:.2}{} in {var}; isolates above {:.0} -> {:.0} Hz",
                a.fit_error,
                poor(a.fit_error),
                b.fit_error,
                poor(b.fit_error),
                a.isolation_onset_hz,
                b.isolation_onset_hz
            ),
            "  ",
            "    ",
        );
    }
    if let Some(i) = &c.isolation {
        let band = if i.band_hz.0 == i.band_hz.1 {
            format!("{:.0} Hz", i.band_hz.0)
        } else {
            format!("{:.0}-{:.0} Hz", i.band_hz.0, i.band_hz.1)
        };
        let measured = match (i.baseline_measured_db, i.variant_measured_db) {
            (Some(a), Some(b)) => format!("; measured {a:+.1} -> {b:+.1} dB"),
            _ => String::new(),
        };
        s += &wrap(
            &format!(
                "transmissibility at {band}: model {:+.1} -> {:+.1} dB ({:+.1} dB){measured}",
                i.baseline_model_db, i.variant_model_db, i.model_change_db
            ),
            "  ",
            "    ",
        );
    }
    if let Some(d) = &c.doubt {
        s += &wrap(d, "  mount doubt: ", "    ");
    }
    if let Some(n) = &c.note {
        s += &wrap(n, "  mount: ", "    ");
    }
    s
}

fn variant_block(c: &Comparison, v: &VariantComparison) -> String {
    let (base, var) = (short(&c.baseline), short(&v.label));
    let mut s = format!("{base} -> {var}");
    if let (Some(a), Some(b)) = (c.baseline_mass_g, v.mass_g) {
        let mass = format!("(mass {a:.1} g -> {b:.1} g)");
        if s.chars().count() + 3 + mass.chars().count() <= WIDTH {
            s += &format!("   {mass}");
        } else {
            s += &format!("\n  {mass}");
        }
    }
    s.push('\n');
    if base != c.baseline || var != v.label {
        s += &wrap(
            &format!(
                "(labels over {LABEL_CHARS} characters are cut here; --json and --csv keep them whole)"
            ),
            "  ",
            "   ",
        );
    }
    s += HEAD;
    s.push('\n');
    for m in &v.matched {
        s += &row(m);
    }
    if let Some(mc) = &v.mount {
        s += &mount_rows(mc, &base, &var);
    }
    for (who, list) in [(&base, &v.unpaired_baseline), (&var, &v.unpaired_variant)] {
        for u in list {
            s += &wrap(
                &format!("mode {} at {:.1} Hz: {}", u.mode, u.frequency_hz, u.reason),
                &format!("  only in {who}: "),
                "    ",
            );
        }
    }
    let rules = |l: &[super::PairRule]| {
        l.iter()
            .map(|r| format!("{}={}", r.baseline_mode, r.variant_mode))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if !v.pins.is_empty() {
        s += &wrap(&rules(&v.pins), "  pinned by the user: ", "    ");
    }
    if !v.forbids.is_empty() {
        s += &wrap(&rules(&v.forbids), "  forbidden by the user: ", "    ");
    }
    for w in &v.warnings {
        s += &wrap(w, "  warning: ", "    ");
    }
    s += &wrap(&v.summary, "  => ", "     ");
    s
}

fn predictions_block(p: &PredictionReport) -> String {
    let mut s = String::new();
    for r in &p.runs {
        s += &wrap(
            &format!(
                "predicted ({}) vs {}: good = within {:.0} %, fair = within {:.0} %",
                p.source, r.run, p.good_within_pct, p.fair_within_pct
            ),
            "",
            "  ",
        );
        s += "   pred label        pred Hz  meas Hz  diff %  agree  zp %  zm %  conf\n";
        for q in &r.pairs {
            let label: String = q
                .label
                .clone()
                .unwrap_or_default()
                .chars()
                .take(12)
                .collect();
            s += &format!(
                "  {:>2}-{:<2} {:<12} {:>7.1} {:>8.1} {:>+7.1}  {:<5} {:>5} {:>5}  {:.2}\n",
                q.predicted_mode,
                q.measured_mode,
                label,
                q.predicted_hz,
                q.measured_hz,
                q.difference_pct,
                q.agreement.label(),
                pct(q.predicted_damping),
                pct(q.measured_damping),
                q.confidence
            );
        }
        if !r.not_seen.is_empty() {
            let list: Vec<String> = r
                .not_seen
                .iter()
                .map(|n| {
                    format!(
                        "{}{} {:.1} Hz",
                        n.predicted_mode,
                        n.label
                            .as_ref()
                            .map_or(String::new(), |l| format!(" ({l})")),
                        n.frequency_hz
                    )
                })
                .collect();
            s += &wrap(&list.join(", "), "  predicted, not seen: ", "    ");
        }
        if !r.not_predicted_hz.is_empty() {
            let list: Vec<String> = r
                .not_predicted_hz
                .iter()
                .map(|f| format!("{f:.1} Hz"))
                .collect();
            s += &wrap(&list.join(", "), "  measured, not predicted: ", "    ");
        }
    }
    s
}

/// The comparison as a plain-text table, at most `WIDTH` columns, with a legend.
pub fn render_table(c: &Comparison) -> String {
    let mut s = String::new();
    for v in &c.variants {
        s += &variant_block(c, v);
    }
    if let Some(p) = &c.predicted {
        s += &predictions_block(p);
    }
    if let Some(r) = &c.repeatability {
        s += &wrap(
            &format!(
                "{} pairs across the repeats: RMS change {:.2} %, largest {:.2} %{}",
                r.pairs,
                r.rms_frequency_change_pct,
                r.largest_frequency_change_pct,
                r.largest_damping_change_pct
                    .map_or(String::new(), |d| format!(" (damping: largest {d:.1} %)"))
            ),
            "repeatability: ",
            "  ",
        );
        s += &wrap(&r.advice, "  ", "  ");
    }
    let st = &c.settings;
    s += "legend:\n";
    s += "  pair = mode numbers base-variant (x crossed on residue sign, p pinned)\n";
    s += "  df % = (f_var / f_base - 1); k eq = (f_var / f_base)^2, stiffness ratio at\n";
    s += "    equal mass; k mass = (m_var / m_base)(f_var / f_base)^2 (k = m w^2)\n";
    s += "  zb %, zv % = damping ratio of base and variant, percent of critical\n";
    s += "  f, z = verdict on the frequency and damping change: real = beyond the\n";
    s += "    repeatability floor and the hit-to-hit spread (Welch test, 95 %);\n";
    s += "    real* = beyond the floor, no spread stored; spread = within the\n";
    s += "    hit-to-hit spread; floor = within the repeatability floor; doubt =\n";
    s += "    beyond the floor but a flagged estimate (low coherence, few lines...)\n";
    s += &format!(
        "    or a mount fit residual above {:.2} (poor fit)\n",
        crate::modes::softmount::DOUBTFUL_ERROR
    );
    s += &wrap(
        &format!(
            "floor: {:.1} % in frequency, {:.0} % of the damping ratio ({}); pairs within {:.0} % of each other",
            st.floor_frequency_pct, st.floor_damping_pct, st.floor_source, st.max_shift_pct
        ),
        "  ",
        "    ",
    );
    s += "  conf = pairing confidence, 0.5 (toss-up) to 1; ! = residue signs differ\n";
    if let Some(b) = &c.bands {
        s += &super::bands::render(b);
    }
    s
}

/// The snake_case name a unit-variant enum serialises to.
pub(super) fn ser<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default()
}
