//! Axis arithmetic: thinning curves to the picture's columns, levels, round ticks and their
//! labels, and each panel's value range.

use super::{Figure, PlotOptions};

/// Thin a curve to about `cols` columns, keeping each column's lowest and highest point in
/// frequency order (peaks and notches survive).
pub(super) fn thin(
    freqs: &[f64],
    vals: &[f64],
    range: (f64, f64),
    log: bool,
    cols: usize,
) -> Vec<(f64, f64)> {
    let t = |f: f64| if log { f.log10() } else { f };
    let (a, b) = (t(range.0), t(range.1));
    let mut out: Vec<(f64, f64)> = Vec::new();
    let mut col = usize::MAX;
    let mut lo: Option<(f64, f64)> = None;
    let mut hi: Option<(f64, f64)> = None;
    let flush = |out: &mut Vec<(f64, f64)>, lo: Option<(f64, f64)>, hi: Option<(f64, f64)>| {
        if let (Some(l), Some(h)) = (lo, hi) {
            if l.0 <= h.0 {
                out.push(l);
                if h != l {
                    out.push(h);
                }
            } else {
                out.push(h);
                out.push(l);
            }
        }
    };
    for (&f, &v) in freqs.iter().zip(vals) {
        if !(f.is_finite() && v.is_finite()) || f < range.0 || f > range.1 || f <= 0.0 {
            continue;
        }
        let c = (((t(f) - a) / (b - a)) * cols as f64) as usize;
        if c != col {
            flush(&mut out, lo, hi);
            col = c;
            lo = Some((f, v));
            hi = Some((f, v));
        } else {
            if lo.is_none_or(|p| v < p.1) {
                lo = Some((f, v));
            }
            if hi.is_none_or(|p| v > p.1) {
                hi = Some((f, v));
            }
        }
    }
    flush(&mut out, lo, hi);
    out
}

pub(super) fn level(db: f64, in_db: bool) -> f64 {
    if in_db { db } else { 10f64.powf(db / 20.0) }
}

/// Value of a curve at a frequency (nearest line).
pub(super) fn value_at(freqs: &[f64], vals: &[f64], f: f64) -> Option<f64> {
    let k = freqs.partition_point(|&x| x < f);
    let cand = [k.checked_sub(1), Some(k)];
    cand.iter()
        .flatten()
        .filter(|&&i| i < freqs.len() && i < vals.len())
        .min_by(|&&i, &&j| (freqs[i] - f).abs().total_cmp(&(freqs[j] - f).abs()))
        .map(|&i| vals[i])
        .filter(|v| v.is_finite())
}

pub(super) fn nice_ticks(lo: f64, hi: f64, log: bool) -> Vec<f64> {
    if log {
        let mut v = Vec::new();
        let mut decade = 10f64.powf(lo.log10().floor());
        while decade <= hi {
            for m in [1.0, 2.0, 5.0] {
                let f = m * decade;
                if f >= lo && f <= hi {
                    v.push(f);
                }
            }
            decade *= 10.0;
        }
        return v;
    }
    let span = hi - lo;
    let raw = span / 8.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut f = (lo / step).ceil() * step;
    let mut v = Vec::new();
    while f <= hi + 1e-9 {
        v.push(f);
        f += step;
    }
    v
}

/// Labels of an axis's ticks, all in one format: in kHz with a `k` ("1k", "1.5k") when
/// every tick is 1000 Hz or more, else in Hz; with the fewest decimals (at most 3) that show
/// every tick exactly, the same count for all.
pub(super) fn fmt_ticks(ticks: &[f64]) -> Vec<String> {
    let kilo = !ticks.is_empty() && ticks.iter().all(|&f| f >= 1000.0);
    let scaled: Vec<f64> = ticks
        .iter()
        .map(|&f| if kilo { f / 1000.0 } else { f })
        .collect();
    let decimals = (0..=3)
        .find(|&d| {
            let m = 10f64.powi(d);
            scaled
                .iter()
                .all(|v| ((v * m).round() - v * m).abs() < 1e-6 * m.max(v.abs()))
        })
        .unwrap_or(3) as usize;
    scaled.iter().map(|v| fmt_hz(*v, decimals, kilo)).collect()
}

/// One tick label: `v` (Hz, or kHz when `kilo`) with `decimals` decimals.
pub(super) fn fmt_hz(v: f64, decimals: usize, kilo: bool) -> String {
    format!("{v:.decimals$}{}", if kilo { "k" } else { "" })
}

pub(super) fn y_range(fig: &Figure, name: &str, o: &PlotOptions, range: (f64, f64)) -> (f64, f64) {
    match name {
        "phase" => (-180.0, 180.0),
        "coherence" => (0.0, 1.05),
        "transmissibility" => {
            let mut hi = f64::NEG_INFINITY;
            let mut lo = f64::INFINITY;
            for m in &fig.mounts {
                if let Some((f, v)) = &m.measured {
                    for (p, q) in f.iter().zip(v) {
                        if *p >= range.0 && *p <= range.1 && q.is_finite() {
                            hi = hi.max(*q);
                            lo = lo.min(*q);
                        }
                    }
                }
                hi = hi.max(m.fit.model_db(m.fit.natural_frequency_hz));
                lo = lo.min(m.fit.model_db(range.1));
            }
            let hi = if hi.is_finite() { hi + 5.0 } else { 20.0 };
            let lo = if lo.is_finite() {
                lo.max(hi - 80.0) - 5.0
            } else {
                -40.0
            };
            (lo, hi.max(lo + 10.0))
        }
        _ => {
            let mut vals: Vec<f64> = Vec::new();
            for t in &fig.traces {
                for (k, (&f, &v)) in t.freqs.iter().zip(&t.magnitude_db).enumerate() {
                    if f >= range.0 && f <= range.1 && v.is_finite() {
                        let s = t
                            .spread_db
                            .as_ref()
                            .and_then(|s| s.get(k))
                            .copied()
                            .filter(|s| s.is_finite())
                            .unwrap_or(0.0);
                        vals.push(v + s);
                        vals.push(v - s);
                    }
                }
            }
            if vals.is_empty() {
                return if o.db { (-60.0, 0.0) } else { (0.0, 1.0) };
            }
            vals.sort_by(f64::total_cmp);
            let hi_db = vals[vals.len() - 1];
            let lo_db = vals[vals.len() / 100];
            if o.db {
                let lo = lo_db.max(hi_db - 90.0) - 3.0;
                // Room above the highest peak for the rows of mode frequencies.
                let rows = fig.traces.len().min(4) as f64;
                let hi = hi_db + (hi_db - lo) * (0.06 + 0.06 * rows);
                (lo, hi)
            } else {
                (
                    0.0,
                    level(hi_db, false) * (1.08 + 0.06 * fig.traces.len().min(4) as f64),
                )
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thinning_keeps_peaks_in_order() {
        let f: Vec<f64> = (1..=1000).map(|k| k as f64).collect();
        let v: Vec<f64> = f
            .iter()
            .map(|x| if *x == 500.0 { 10.0 } else { 0.0 })
            .collect();
        let p = thin(&f, &v, (1.0, 1000.0), false, 50);
        assert!(p.len() <= 101);
        assert!(p.iter().any(|q| q.1 == 10.0 && q.0 == 500.0));
        assert!(p.windows(2).all(|w| w[0].0 <= w[1].0));
    }

    #[test]
    fn ticks_are_round() {
        assert_eq!(
            nice_ticks(20.0, 3200.0, true)[..4],
            [20.0, 50.0, 100.0, 200.0]
        );
        assert_eq!(nice_ticks(0.0, 100.0, false)[..3], [0.0, 20.0, 40.0]);
    }

    #[test]
    fn tick_labels_share_one_format() {
        // Linear 200 Hz steps across 1 kHz: plain Hz throughout, never "800, 1k, 1200".
        assert_eq!(fmt_ticks(&[800.0, 1000.0, 1200.0]), ["800", "1000", "1200"]);
        assert_eq!(fmt_ticks(&[1000.0, 2000.0, 3000.0]), ["1k", "2k", "3k"]);
        assert_eq!(
            fmt_ticks(&[1000.0, 1500.0, 2000.0]),
            ["1.0k", "1.5k", "2.0k"]
        );
        assert_eq!(fmt_ticks(&[0.5, 1.0, 1.5]), ["0.5", "1.0", "1.5"]);
        // A log axis from 20 Hz to 2 kHz: Hz throughout.
        let t = nice_ticks(20.0, 2000.0, true);
        let labels = fmt_ticks(&t);
        assert!(labels.iter().all(|l| !l.ends_with('k')), "{labels:?}");
        assert_eq!(labels.last().map(String::as_str), Some("2000"));
    }
}
