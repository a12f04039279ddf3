//! Plain-text reports printed by the commands.

use crate::modes::Mode;
use crate::pipeline::HitSummary;

/// The mode table (at most 80 columns before the flags), with units in the headers and a
/// legend of every abbreviation under it.
pub fn mode_table(modes: &[Mode]) -> String {
    let mut s = format!(
        "{:>3} {:>9} {:>7} {:>6} {:>5} {:>6} {:>7} {:>7} {:<8} {}\n",
        "#", "f Hz", "damp %", "Q", "coh", "prom", "+-f Hz", "+-d pt", "from", "flags"
    );
    for (i, m) in modes.iter().enumerate() {
        let flags: Vec<&str> = m.flags.iter().map(|f| f.label()).collect();
        let u = m.uncertainty.as_ref();
        let f_ci = u.map_or("-".to_string(), |u| {
            format!("{:.2}", 0.5 * (u.frequency_hz.high - u.frequency_hz.low))
        });
        let z_ci = u
            .and_then(|u| u.damping_ratio.as_ref())
            .map_or("-".to_string(), |z| {
                format!("{:.2}", 50.0 * (z.high - z.low))
            });
        let from = match m.method.as_str() {
            "fit" => "band fit",
            "spectrum_fit" => "spectrum",
            "half_power" => "half-pwr",
            other => other,
        };
        s += &format!(
            "{:>3} {:>9.2} {:>7} {:>6} {:>5} {:>6.1} {:>7} {:>7} {:<8} {}\n",
            i + 1,
            m.frequency_hz,
            m.damping_ratio
                .map_or("-".into(), |z| format!("{:.2}", 100.0 * z)),
            m.q.map_or("-".into(), |q| format!("{q:.1}")),
            m.coherence.map_or("-".into(), |c| format!("{c:.3}")),
            m.prominence_db,
            f_ci,
            z_ci,
            from,
            flags.join(", ")
        );
    }
    if !modes.is_empty() {
        for line in [
            "damp: damping ratio; Q = 1 / (2 damp); coh: coherence at the peak (- with one",
            "hit, or read from the response alone); prom: dB the peak stands above its",
            "surroundings; +-f, +-d: half-widths of the 95 % intervals from the hit-to-hit",
            "spread (damping in percentage points); from: band fit (several modes fitted",
            "together), spectrum (fit of the response spectrum) or half-pwr (peak and",
            "half-power band).",
        ] {
            s += &format!("    {line}\n");
        }
    }
    s
}

/// One line per hit with its verdict and reason.
pub fn hit_lines(hits: &[HitSummary], fs: f64) -> String {
    hits.iter()
        .map(|h| {
            format!(
                "hit {:>3} at {:>8.3} s: {} ({})\n",
                h.number,
                h.trigger_sample as f64 / fs,
                h.verdict.label(),
                h.reason
            )
        })
        .collect()
}

/// Counts of rejections by verdict, e.g. "2 overload, 1 double hit".
pub fn rejection_summary(hits: &[HitSummary]) -> String {
    let mut counts: Vec<(&str, usize)> = Vec::new();
    for h in hits.iter().filter(|h| !h.verdict.is_accepted()) {
        match counts.iter_mut().find(|c| c.0 == h.verdict.label()) {
            Some(c) => c.1 += 1,
            None => counts.push((h.verdict.label(), 1)),
        }
    }
    counts
        .iter()
        .map(|(l, n)| format!("{n} {l}"))
        .collect::<Vec<_>>()
        .join(", ")
}
