//! Predicted modes (from a finite-element model or an earlier test) against measured ones.
//!
//! The predictions are a CSV: with a header, the columns `frequency_hz` (required), `label`,
//! `damping_ratio` (fraction) or `damping_pct`, in any order; without one, the columns are
//! frequency in Hz, then optionally a label and a damping ratio (fraction). Blank lines and
//! lines starting with `#` are skipped. A measured mode within 5 % of its prediction is what
//! practitioners call good agreement for a frame model (fact of the trade, no source); within
//! 10 % is called fair here (this tool's choice, common practice, no source).

use super::matching::{Candidate, MatchRules, pair_modes};
use crate::error::{Error, Result};
use crate::run::RunFile;
use serde::Serialize;
use std::path::Path;

/// Agreement within this (percent) is "good".
pub const GOOD_PCT: f64 = 5.0;
/// Agreement within this (percent) is "fair"; beyond it, "poor".
pub const FAIR_PCT: f64 = 10.0;

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PredictedMode {
    pub frequency_hz: f64,
    pub label: Option<String>,
    /// Damping ratio, a fraction.
    pub damping_ratio: Option<f64>,
}

/// Read a prediction CSV. Any error names the file and line in one sentence.
pub fn read_predictions(path: &Path) -> Result<Vec<PredictedMode>> {
    let shown = path.display();
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::new(format!("cannot read '{shown}': {e}")))?;
    parse_predictions(&text, &shown.to_string())
}

/// Parse the text of a prediction CSV (`name` is used in messages).
pub fn parse_predictions(text: &str, name: &str) -> Result<Vec<PredictedMode>> {
    let mut rows: Vec<(usize, Vec<String>)> = Vec::new();
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    for rec in rdr.records() {
        let rec = rec.map_err(|e| Error::new(format!("'{name}' is not a readable CSV: {e}")))?;
        let line = rec.position().map_or(0, |p| p.line() as usize);
        let fields: Vec<String> = rec.iter().map(str::to_string).collect();
        if fields.iter().all(|f| f.is_empty()) {
            continue;
        }
        rows.push((line, fields));
    }
    let Some(first) = rows.first() else {
        crate::fail!("'{name}' lists no predicted modes");
    };
    // Column positions: frequency, label, damping (and whether damping is in percent).
    let (mut fcol, mut lcol, mut zcol, mut zpct) = (Some(0), Some(1), Some(2), false);
    let header = first.1[0].parse::<f64>().is_err();
    if header {
        let find = |n: &str| first.1.iter().position(|h| h.eq_ignore_ascii_case(n));
        fcol = find("frequency_hz");
        lcol = find("label");
        zcol = find("damping_ratio");
        let zpct_col = find("damping_pct");
        if zcol.is_some() && zpct_col.is_some() {
            crate::fail!(
                "'{name}' line {}: the header has both 'damping_ratio' and 'damping_pct'; keep one of the two",
                first.0
            );
        }
        if zcol.is_none() {
            zcol = zpct_col;
            zpct = zcol.is_some();
        }
        if fcol.is_none() {
            crate::fail!(
                "'{name}' line {}: the header has no 'frequency_hz' column (columns: frequency_hz, label, damping_ratio or damping_pct)",
                first.0
            );
        }
    }
    // Fields a row may have: the header's, or frequency, label and damping without one.
    let width = if header { first.1.len() } else { 3 };
    let mut out = Vec::new();
    let mut lines = Vec::new();
    for (line, f) in rows.iter().skip(usize::from(header)) {
        if f.len() > width {
            crate::fail!(
                "'{name}' line {line} has {} fields but {}",
                f.len(),
                if header {
                    format!("the header names {width}")
                } else {
                    "a file without a header has at most 3 (frequency, label, damping ratio)"
                        .to_string()
                }
            );
        }
        let get = |c: Option<usize>| c.and_then(|c| f.get(c)).filter(|s| !s.is_empty());
        let fs =
            get(fcol).ok_or_else(|| Error::new(format!("'{name}' line {line}: no frequency")))?;
        let hz = fs
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && *v > 0.0)
            .ok_or_else(|| {
                Error::new(format!(
                    "'{name}' line {line}: '{fs}' is not a frequency in Hz (a positive number)"
                ))
            })?;
        let damping = match get(zcol) {
            None => None,
            Some(zs) => {
                let v = zs
                    .parse::<f64>()
                    .ok()
                    .filter(|v| v.is_finite() && *v >= 0.0);
                let v = v.map(|v| if zpct { v / 100.0 } else { v });
                match v {
                    Some(z) if z < 1.0 => Some(z),
                    _ => crate::fail!(
                        "'{name}' line {line}: '{zs}' is not a damping {} (write 0.02 for 2 %)",
                        if zpct {
                            "in percent below 100"
                        } else {
                            "ratio: a fraction below 1"
                        }
                    ),
                }
            }
        };
        out.push(PredictedMode {
            frequency_hz: hz,
            label: get(lcol).cloned(),
            damping_ratio: damping,
        });
        lines.push(*line);
    }
    if out.is_empty() {
        crate::fail!("'{name}' lists no predicted modes");
    }
    let mut order: Vec<usize> = (0..out.len()).collect();
    order.sort_by(|&a, &b| out[a].frequency_hz.total_cmp(&out[b].frequency_hz));
    for w in order.windows(2) {
        if out[w[0]].frequency_hz == out[w[1]].frequency_hz {
            let (l0, l1) = (lines[w[0]].min(lines[w[1]]), lines[w[0]].max(lines[w[1]]));
            crate::fail!(
                "'{name}' lines {l0} and {l1} both predict a mode at {} Hz; one prediction per mode (remove or merge the duplicate)",
                out[w[0]].frequency_hz
            );
        }
    }
    out.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    Ok(out)
}

/// How well a measured mode agrees with its prediction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Agreement {
    Good,
    Fair,
    Poor,
}

impl Agreement {
    pub fn of(diff_pct: f64) -> Agreement {
        match diff_pct.abs() {
            d if d <= GOOD_PCT => Agreement::Good,
            d if d <= FAIR_PCT => Agreement::Fair,
            _ => Agreement::Poor,
        }
    }
    pub fn label(self) -> &'static str {
        match self {
            Agreement::Good => "good",
            Agreement::Fair => "fair",
            Agreement::Poor => "poor",
        }
    }
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PredictedPair {
    /// Number of the predicted mode (from 1, in frequency order).
    pub predicted_mode: usize,
    pub label: Option<String>,
    pub predicted_hz: f64,
    pub measured_mode: usize,
    pub measured_hz: f64,
    /// (measured - predicted) / predicted, percent.
    pub difference_pct: f64,
    pub agreement: Agreement,
    pub predicted_damping: Option<f64>,
    pub measured_damping: Option<f64>,
    pub confidence: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NotSeen {
    pub predicted_mode: usize,
    pub label: Option<String>,
    pub frequency_hz: f64,
}

/// One run against the predictions.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunVsPrediction {
    pub run: String,
    pub pairs: Vec<PredictedPair>,
    /// Predicted modes with no measured partner.
    pub not_seen: Vec<NotSeen>,
    /// Measured modes nothing predicted, Hz.
    pub not_predicted_hz: Vec<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PredictionReport {
    pub source: String,
    pub good_within_pct: f64,
    pub fair_within_pct: f64,
    pub runs: Vec<RunVsPrediction>,
}

/// Pair each run's modes with the predictions (the same order-preserving matcher, without
/// residue evidence).
pub fn report(
    source: &str,
    pred: &[PredictedMode],
    runs: &[(String, RunFile)],
    max_shift: f64,
) -> PredictionReport {
    let ca: Vec<Candidate> = pred
        .iter()
        .map(|p| Candidate {
            frequency_hz: p.frequency_hz,
            sign: None,
            magnitude: None,
            shape: None,
        })
        .collect();
    let rules = MatchRules {
        max_shift,
        ..Default::default()
    };
    let runs = runs
        .iter()
        .map(|(_, run)| {
            let cb: Vec<Candidate> = run
                .modes
                .iter()
                .map(|m| Candidate {
                    frequency_hz: m.frequency_hz,
                    sign: None,
                    magnitude: None,
                    shape: None,
                })
                .collect();
            let pairs = pair_modes(&ca, &cb, &rules);
            let out: Vec<PredictedPair> = pairs
                .iter()
                .map(|p| {
                    let (pm, mm) = (&pred[p.a], &run.modes[p.b]);
                    let d = 100.0 * (mm.frequency_hz / pm.frequency_hz - 1.0);
                    PredictedPair {
                        predicted_mode: p.a + 1,
                        label: pm.label.clone(),
                        predicted_hz: pm.frequency_hz,
                        measured_mode: p.b + 1,
                        measured_hz: mm.frequency_hz,
                        difference_pct: d,
                        agreement: Agreement::of(d),
                        predicted_damping: pm.damping_ratio,
                        measured_damping: mm.damping_ratio,
                        confidence: p.confidence,
                    }
                })
                .collect();
            RunVsPrediction {
                run: run.variant.label.clone(),
                not_seen: (0..pred.len())
                    .filter(|i| !pairs.iter().any(|p| p.a == *i))
                    .map(|i| NotSeen {
                        predicted_mode: i + 1,
                        label: pred[i].label.clone(),
                        frequency_hz: pred[i].frequency_hz,
                    })
                    .collect(),
                not_predicted_hz: (0..run.modes.len())
                    .filter(|j| !pairs.iter().any(|p| p.b == *j))
                    .map(|j| run.modes[j].frequency_hz)
                    .collect(),
                pairs: out,
            }
        })
        .collect();
    PredictionReport {
        source: source.to_string(),
        good_within_pct: GOOD_PCT,
        fair_within_pct: FAIR_PCT,
        runs,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_and_plain_forms_read_alike() {
        let a = parse_predictions(
            "label,frequency_hz,damping_pct\nbend 1,140,1.5\n# note\n\ntwist,210,\n",
            "p.csv",
        )
        .unwrap();
        let b = parse_predictions("140,bend 1,0.015\n210,twist\n", "p.csv").unwrap();
        assert_eq!(a.len(), 2);
        assert_eq!(a[0].label.as_deref(), Some("bend 1"));
        assert!((a[0].damping_ratio.unwrap() - 0.015).abs() < 1e-12);
        assert_eq!(a[1].damping_ratio, None);
        assert_eq!(a, b);
    }

    #[test]
    fn bad_rows_are_named() {
        let e = parse_predictions("140\nabc\n", "p.csv")
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 2") && e.contains("'abc'"), "{e}");
        let e = parse_predictions("label,hz\nx,1\n", "p.csv")
            .unwrap_err()
            .to_string();
        assert!(e.contains("frequency_hz"), "{e}");
        let e = parse_predictions("140,a,1.5\n", "p.csv")
            .unwrap_err()
            .to_string();
        assert!(e.contains("0.02 for 2 %"), "{e}");
        let e = parse_predictions("# nothing\n", "p.csv")
            .unwrap_err()
            .to_string();
        assert!(e.contains("no predicted modes"), "{e}");
        let e = parse_predictions("-5\n", "p.csv").unwrap_err().to_string();
        assert!(e.contains("'-5'"), "{e}");
    }

    #[test]
    fn extra_fields_double_damping_and_duplicates_are_refused() {
        let one_sentence = |text: &str, needle: &str| {
            let e = parse_predictions(text, "p.csv").unwrap_err().to_string();
            assert!(e.contains(needle) && !e.contains('\n'), "{e}");
        };
        one_sentence(
            "frequency_hz,label\n140,bend\n210,twist,0.02\n",
            "line 3 has 3 fields but the header names 2",
        );
        one_sentence("140,bend,0.01,extra\n", "line 1 has 4 fields");
        one_sentence(
            "frequency_hz,damping_ratio,damping_pct\n140,0.01,1\n",
            "both 'damping_ratio' and 'damping_pct'",
        );
        one_sentence(
            "frequency_hz,label\n210,a\n140,b\n140.0,c\n",
            "lines 3 and 4 both predict a mode at 140 Hz",
        );
        // Fewer fields than the header are still fine (an empty damping).
        assert_eq!(
            parse_predictions("frequency_hz,label,damping_pct\n140,a\n", "p.csv")
                .unwrap()
                .len(),
            1
        );
    }

    #[test]
    fn agreement_bands() {
        assert_eq!(Agreement::of(-4.9), Agreement::Good);
        assert_eq!(Agreement::of(7.0), Agreement::Fair);
        assert_eq!(Agreement::of(-12.0), Agreement::Poor);
    }
}
