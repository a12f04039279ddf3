//! The report's comparison table: the comparison's pairs, unpaired modes, mounts and band
//! verdicts as a readable HTML table (units in the headers, numbers rounded, damping in
//! percent). The CSV of `compare --csv` keeps every digit; this is for reading.

use super::html::esc;
use crate::run::compare::bands::BandChange;
use crate::run::compare::matching::How;
use crate::run::compare::{Comparison, Verdict};

fn verdict_words(v: Verdict) -> &'static str {
    match v {
        Verdict::Real => "real",
        Verdict::RealUntested => "real (no spread to test)",
        Verdict::WithinSpread => "within spread",
        Verdict::WithinFloor => "within floor",
        Verdict::Doubtful => "doubtful",
    }
}

fn how_words(h: How) -> &'static str {
    match h {
        How::InOrder => "in order",
        How::Crossed => "crossed",
        How::Pinned => "pinned",
    }
}

fn pct(z: Option<f64>) -> String {
    z.map_or("-".into(), |z| format!("{:.2}", 100.0 * z))
}

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map_or("-".into(), |v| format!("{v:+.digits$}"))
}

fn band_text(b: &BandChange) -> String {
    format!(
        "{} -> {} ({}; margin {:+.1} -> {:+.1} %, {:+.1} points)",
        b.baseline.verdict.label(),
        b.variant.verdict.label(),
        b.movement.label(),
        b.baseline.margin_pct,
        b.variant.margin_pct,
        b.margin_change_pct
    )
}

const HEAD: [&str; 12] = [
    "variant",
    "modes",
    "baseline Hz",
    "variant Hz",
    "change %",
    "baseline damping %",
    "variant damping %",
    "damping change %",
    "frequency verdict",
    "damping verdict",
    "pairing (confidence)",
    "note",
];

/// One table row: the cells after the first two (numbers right-aligned).
fn row(s: &mut String, cells: &[String]) {
    *s += "<tr>";
    for (i, c) in cells.iter().enumerate() {
        let num = (2..8).contains(&i) && c != "-";
        *s += &format!(
            "<td{}>{}</td>",
            if num { " class=\"n\"" } else { "" },
            esc(c)
        );
    }
    *s += "</tr>\n";
}

/// The comparison as a readable table; with a drive, a column of band verdicts before and
/// after (margin in percent of the band edge, change in percentage points).
pub fn comparison_table(c: &Comparison) -> String {
    let mut s = String::from("<table>\n<thead><tr>");
    let with_bands = c.bands.is_some();
    for h in HEAD {
        s += &format!("<th>{}</th>", esc(h));
    }
    if with_bands {
        s += "<th>motor bands before -&gt; after</th>";
    }
    s += "</tr></thead>\n<tbody>\n";
    let pad = |mut v: Vec<String>, band: String| {
        if with_bands {
            v.push(band);
        }
        v
    };
    for v in &c.variants {
        let bands = c.bands.as_ref().and_then(|b| b.of_variant(&v.label));
        for m in &v.matched {
            let band = bands
                .and_then(|b| b.change_of(m))
                .map_or("-".into(), band_text);
            let cells = vec![
                v.label.clone(),
                format!("{} - {}", m.baseline_mode, m.variant_mode),
                format!("{:.1}", m.baseline_hz),
                format!("{:.1}", m.variant_hz),
                format!("{:+.1}", m.frequency_change_pct),
                pct(m.baseline_damping),
                pct(m.variant_damping),
                opt(m.damping_change_pct, 0),
                verdict_words(m.frequency_verdict).into(),
                m.damping_verdict.map_or("-", verdict_words).into(),
                format!("{} ({:.2})", how_words(m.pairing), m.confidence),
                match m.residue_sign_agrees {
                    Some(false) => "residue signs differ".into(),
                    _ => String::new(),
                },
            ];
            row(&mut s, &pad(cells, band));
        }
        for (base_side, list) in [(true, &v.unpaired_baseline), (false, &v.unpaired_variant)] {
            for u in list {
                let f = format!("{:.1}", u.frequency_hz);
                let z = pct(u.damping_ratio);
                let (modes, bf, vf, bz, vz) = if base_side {
                    (format!("{} - none", u.mode), f, "-".into(), z, "-".into())
                } else {
                    (format!("none - {}", u.mode), "-".into(), f, "-".into(), z)
                };
                let band = bands
                    .filter(|_| !base_side)
                    .and_then(|b| b.unpaired_in_band.iter().find(|x| x.variant_mode == u.mode))
                    .map_or("-".into(), |x| {
                        format!(
                            "after: {} {} ({:+.1} %)",
                            x.verdict.verdict.label(),
                            x.verdict.name,
                            x.verdict.margin_pct
                        )
                    });
                let mut cells = vec![v.label.clone(), modes, bf, vf, "-".into(), bz, vz];
                cells.extend(["-", "-", "-", "unpaired"].map(String::from));
                cells.push(u.reason.clone());
                row(&mut s, &pad(cells, band));
            }
        }
        if let Some(mc) = &v.mount
            && let (Some(a), Some(b)) = (&mc.baseline, &mc.variant)
        {
            let cells = vec![
                v.label.clone(),
                "mount".into(),
                format!("{:.1}", a.natural_frequency_hz),
                format!("{:.1}", b.natural_frequency_hz),
                opt(mc.frequency_change_pct, 1),
                format!("{:.2}", 100.0 * a.damping_ratio),
                format!("{:.2}", 100.0 * b.damping_ratio),
                opt(
                    (a.damping_ratio > 0.0)
                        .then(|| 100.0 * (b.damping_ratio - a.damping_ratio) / a.damping_ratio),
                    0,
                ),
                mc.frequency_verdict.map_or("-", verdict_words).into(),
                mc.damping_verdict.map_or("-", verdict_words).into(),
                "-".into(),
                mc.doubt.clone().unwrap_or_default(),
            ];
            row(&mut s, &pad(cells, "-".into()));
        }
    }
    s += "</tbody>\n</table>\n";
    s += "<p class=\"small\">change % = (variant - baseline) / baseline in frequency; damping \
          as a percentage of critical; damping change % relative to the baseline's damping; \
          confidence of a pair from 0.5 (a toss-up) to 1. The full-precision table is \
          <code>compare --csv</code>.</p>\n";
    s
}
