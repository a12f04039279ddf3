//! Reading a saved curve CSV back (written by `write_curve_csv`), for overlays.

use crate::error::{Context, Error, Result};
use std::path::Path;

/// A curve read back from a run's CSV.
#[derive(Debug, Clone, PartialEq)]
pub struct SavedCurve {
    pub freqs: Vec<f64>,
    /// Magnitude in dB re 1 curve unit.
    pub magnitude_db: Vec<f64>,
    /// Coherence per line, when the CSV has it.
    pub coherence: Option<Vec<f64>>,
    /// Phase in degrees per line, when the CSV has it.
    pub phase_deg: Option<Vec<f64>>,
    /// Hit-to-hit spread in dB per line (response spectrum), when the CSV has it.
    pub spread_db: Option<Vec<f64>>,
    /// Unit of the magnitude, from the column name (e.g. "g/N").
    pub unit: String,
}

/// Read a curve CSV with the columns frequency_hz, magnitude_<unit>, magnitude_db,
/// phase_deg, coherence, spread_db (the last three may be empty).
pub fn read_curve_csv(path: &Path) -> Result<SavedCurve> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).with_context(|| format!("cannot read '{shown}'"))?;
    parse_curve_csv(&text).map_err(|e| e.context(format!("'{shown}'")))
}

/// Parse the text of a curve CSV.
pub fn parse_curve_csv(text: &str) -> Result<SavedCurve> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(text.as_bytes());
    let headers = r
        .headers()
        .map_err(|e| Error::new(format!("no header row: {e}")))?
        .clone();
    let col = |name: &str| headers.iter().position(|h| h == name);
    let f_col = col("frequency_hz").ok_or_else(|| Error::new("no frequency_hz column"))?;
    let db_col = col("magnitude_db").ok_or_else(|| Error::new("no magnitude_db column"))?;
    let coh_col = col("coherence");
    let mut optional = [Column::new(col("phase_deg")), Column::new(col("spread_db"))];
    let unit = headers
        .iter()
        .find_map(|h| h.strip_prefix("magnitude_").filter(|u| *u != "db"))
        .unwrap_or("")
        .to_string();
    let mut freqs = Vec::new();
    let mut magnitude_db = Vec::new();
    let mut coherence = Vec::new();
    let mut all_coherence = coh_col.is_some();
    for (i, rec) in r.records().enumerate() {
        let rec = rec.map_err(|e| Error::new(format!("row {}: {e}", i + 2)))?;
        let num = |c: usize| -> Result<f64> {
            let s = rec.get(c).unwrap_or("").trim();
            s.parse::<f64>()
                .map_err(|_| Error::new(format!("row {}: '{s}' is not a number", i + 2)))
        };
        freqs.push(num(f_col)?);
        magnitude_db.push(num(db_col)?);
        match coh_col.map(|c| rec.get(c).unwrap_or("").trim()) {
            Some(s) if !s.is_empty() && all_coherence => match s.parse::<f64>() {
                Ok(v) => coherence.push(v),
                Err(_) => all_coherence = false,
            },
            _ => all_coherence = false,
        }
        for c in &mut optional {
            c.take(&rec);
        }
    }
    let [phase, spread] = optional;
    if freqs.is_empty() {
        crate::fail!("the curve has no rows");
    }
    Ok(SavedCurve {
        freqs,
        magnitude_db,
        coherence: all_coherence.then_some(coherence),
        phase_deg: phase.finish(),
        spread_db: spread.finish(),
        unit,
    })
}

/// An optional numeric column: kept only when every row holds a number.
struct Column {
    index: Option<usize>,
    values: Vec<f64>,
}

impl Column {
    fn new(index: Option<usize>) -> Self {
        Column {
            index,
            values: Vec::new(),
        }
    }
    fn take(&mut self, rec: &csv::StringRecord) {
        let Some(i) = self.index else { return };
        match rec.get(i).unwrap_or("").trim().parse::<f64>() {
            Ok(v) if v.is_finite() => self.values.push(v),
            _ => self.index = None,
        }
    }
    fn finish(self) -> Option<Vec<f64>> {
        self.index.map(|_| self.values)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_frf_and_spectrum_tables() {
        let frf = "frequency_hz,magnitude_g/N,magnitude_db,phase_deg,coherence,spread_db\n\
                   20.0000,1.0e-1,-20.000,10.0,0.950000,\n\
                   20.5000,2.0e-1,-13.979,12.0,0.990000,\n";
        let c = parse_curve_csv(frf).unwrap();
        assert_eq!(c.freqs, vec![20.0, 20.5]);
        assert_eq!(c.magnitude_db, vec![-20.0, -13.979]);
        assert_eq!(c.coherence, Some(vec![0.95, 0.99]));
        assert_eq!(c.unit, "g/N");
        assert_eq!(c.phase_deg, Some(vec![10.0, 12.0]));
        assert_eq!(c.spread_db, None);
        let spec = "frequency_hz,magnitude_g/Hz,magnitude_db,phase_deg,coherence,spread_db\n\
                    20.0000,1.0e-3,-60.000,,,0.5\n";
        let c = parse_curve_csv(spec).unwrap();
        assert_eq!(c.coherence, None);
        assert_eq!(c.unit, "g/Hz");
        assert_eq!(c.spread_db, Some(vec![0.5]));
        assert_eq!(c.phase_deg, None);
        assert!(parse_curve_csv("a,b\n1,2\n").is_err());
        assert!(parse_curve_csv("frequency_hz,magnitude_db\n1,x\n").is_err());
    }
}
