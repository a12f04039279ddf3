//! The mode lists of runs as one CSV table for spreadsheets, units in the header.

use super::RunFile;
use crate::error::{Error, Result};

/// Columns: run label, run file, mode number (from 1, frequency order), frequency (Hz),
/// damping (percent, window's share removed), Q, coherence at the peak, prominence (dB),
/// 95 % interval of frequency (Hz) and damping (percent), method, flags, band verdict and
/// the margin to the nearest band edge (percent of that edge; positive outside, negative
/// inside, see `drive::BandVerdict`).
/// Empty cells where a value does not exist.
pub fn modes_csv(runs: &[(String, RunFile)]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let enc = |e: csv::Error| Error::new(format!("cannot encode the mode table: {e}"));
    w.write_record([
        "run",
        "file",
        "mode",
        "frequency_hz",
        "damping_pct",
        "q",
        "coherence",
        "prominence_db",
        "frequency_low_95_hz",
        "frequency_high_95_hz",
        "damping_low_95_pct",
        "damping_high_95_pct",
        "method",
        "flags",
        "band_verdict",
        "band_margin_pct",
    ])
    .map_err(enc)?;
    let opt = |v: Option<f64>, digits: usize| v.map_or(String::new(), |v| format!("{v:.digits$}"));
    for (file, run) in runs {
        for (i, m) in run.modes.iter().enumerate() {
            let u = m.uncertainty.as_ref();
            let zi = u.and_then(|u| u.damping_ratio.as_ref());
            let flags: Vec<&str> = m.flags.iter().map(|f| f.label()).collect();
            let band = m.band.as_ref().map_or(String::new(), |b| {
                if b.name.is_empty() {
                    b.verdict.label().to_string()
                } else {
                    format!("{} {}", b.verdict.label(), b.name)
                }
            });
            w.write_record([
                run.variant.label.clone(),
                file.clone(),
                (i + 1).to_string(),
                format!("{:.3}", m.frequency_hz),
                opt(m.damping_ratio.map(|z| 100.0 * z), 3),
                opt(m.q, 1),
                opt(m.coherence, 4),
                format!("{:.1}", m.prominence_db),
                opt(u.map(|u| u.frequency_hz.low), 3),
                opt(u.map(|u| u.frequency_hz.high), 3),
                opt(zi.map(|z| 100.0 * z.low), 3),
                opt(zi.map(|z| 100.0 * z.high), 3),
                m.method.clone(),
                flags.join("; "),
                band,
                opt(m.band.as_ref().map(|b| b.margin_pct), 2),
            ])
            .map_err(enc)?;
        }
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::new(format!("cannot encode the mode table: {e}")))?;
    String::from_utf8(bytes).map_err(|e| Error::new(format!("cannot encode the mode table: {e}")))
}
