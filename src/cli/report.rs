//! Plain-text reports printed by the commands.

use crate::modes::Mode;
use crate::pipeline::HitSummary;

/// The mode table: frequency, damping in percent, Q, coherence and flags.
pub fn mode_table(modes: &[Mode]) -> String {
    let mut s = format!(
        "{:>3} {:>10} {:>9} {:>7} {:>6} {:>7} {:>16}  {}\n",
        "#", "f Hz", "damping %", "Q", "coh", "prom dB", "95% f / z", "flags"
    );
    for (i, m) in modes.iter().enumerate() {
        let flags: Vec<&str> = m.flags.iter().map(|f| f.label()).collect();
        let ci = m.uncertainty.as_ref().map_or("-".to_string(), |u| {
            let hw = 0.5 * (u.frequency_hz.high - u.frequency_hz.low);
            let zw = u.damping_ratio.as_ref().map_or("-".to_string(), |z| {
                format!("{:.2}", 50.0 * (z.high - z.low))
            });
            format!("+-{hw:.2} / +-{zw}")
        });
        s += &format!(
            "{:>3} {:>10.2} {:>9} {:>7} {:>6} {:>7.1} {:>16}  {}\n",
            i + 1,
            m.frequency_hz,
            m.damping_ratio
                .map_or("-".into(), |z| format!("{:.2}", 100.0 * z)),
            m.q.map_or("-".into(), |q| format!("{q:.1}")),
            m.coherence.map_or("-".into(), |c| format!("{c:.3}")),
            m.prominence_db,
            ci,
            flags.join(", ")
        );
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
