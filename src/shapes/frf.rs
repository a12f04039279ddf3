//! Each point's averaged FRF and coherence kept in the shape file, so the shapes can be
//! fitted again or plotted without the recordings.
//!
//! Layout (`frf` in the shape file): `unit`, the frequency axis once (`frequency_hz`, the
//! lines of the band the mode search covered), then per point in plan order `re`, `im`
//! (the complex FRF) and `coherence`, each one array on one line. Values are stored as 32-bit
//! floats (about 7 significant digits, far finer than an averaged FRF's own scatter), which
//! keeps the file near 10 bytes per value: 8 points of 2000 lines make about 0.5 MB.

use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// The FRFs of all points on one frequency axis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PointFrfs {
    /// Unit of the FRF (response unit per force unit).
    pub unit: String,
    /// The lines kept, Hz, shared by every point.
    pub frequency_hz: Vec<f64>,
    /// Per point, plan order.
    pub points: Vec<PointFrf>,
}

/// One point's FRF.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PointFrf {
    pub re: Vec<f32>,
    pub im: Vec<f32>,
    /// Coherence 0..1 per line.
    pub coherence: Vec<f32>,
}

impl PointFrfs {
    /// The lines of `freqs` inside `band_hz` of every point's FRF and coherence. Values that
    /// are not finite (JSON has no such numbers) are stored as 0 and counted in the notes.
    pub fn build(
        freqs: &[f64],
        frfs: &[Vec<Complex64>],
        coherence: &[Vec<f64>],
        band_hz: (f64, f64),
        unit: &str,
        names: &[String],
    ) -> (Self, Vec<String>) {
        let keep: Vec<usize> = (0..freqs.len())
            .filter(|&k| freqs[k] >= band_hz.0 && freqs[k] <= band_hz.1)
            .collect();
        let mut notes = Vec::new();
        let points = frfs
            .iter()
            .zip(coherence)
            .enumerate()
            .map(|(p, (h, c))| {
                let mut bad = 0usize;
                let mut put = |v: f64| -> f32 {
                    let x = v as f32;
                    if x.is_finite() {
                        x
                    } else {
                        bad += 1;
                        0.0
                    }
                };
                let frf = PointFrf {
                    re: keep.iter().map(|&k| put(h[k].re)).collect(),
                    im: keep.iter().map(|&k| put(h[k].im)).collect(),
                    coherence: keep
                        .iter()
                        .map(|&k| put(c.get(k).copied().unwrap_or(f64::NAN)))
                        .collect(),
                };
                if bad > 0 {
                    notes.push(format!(
                        "point '{}': {bad} FRF or coherence values were not finite numbers and are stored as 0 in the shape file",
                        names.get(p).map_or("?", |s| s.as_str())
                    ));
                }
                frf
            })
            .collect();
        (
            PointFrfs {
                unit: unit.to_string(),
                frequency_hz: keep.iter().map(|&k| freqs[k]).collect(),
                points,
            },
            notes,
        )
    }

    /// Point `p`'s complex FRF on `frequency_hz`.
    pub fn complex(&self, p: usize) -> Vec<Complex64> {
        let f = &self.points[p];
        f.re.iter()
            .zip(&f.im)
            .map(|(r, i)| Complex64::new(*r as f64, *i as f64))
            .collect()
    }

    /// One sentence when the block does not fit its file (`n_points` points, one length).
    pub fn problem(&self, n_points: usize) -> Option<String> {
        let n = self.frequency_hz.len();
        if self.points.len() != n_points {
            return Some(format!(
                "its FRFs are for {} points, its plan has {n_points}",
                self.points.len()
            ));
        }
        if !self.frequency_hz.windows(2).all(|w| w[0] < w[1]) {
            return Some("its FRF frequency axis is not increasing".into());
        }
        for (p, f) in self.points.iter().enumerate() {
            if f.re.len() != n || f.im.len() != n || f.coherence.len() != n {
                return Some(format!(
                    "point {}'s FRF does not have the {n} lines of the frequency axis",
                    p + 1
                ));
            }
        }
        None
    }

    /// The block as JSON text indented for the shape file: one array a line.
    pub fn to_json(&self) -> serde_json::Result<String> {
        let mut s = String::from("{\n");
        s += &format!("    \"unit\": {},\n", serde_json::to_string(&self.unit)?);
        s += &format!(
            "    \"frequency_hz\": {},\n",
            serde_json::to_string(&self.frequency_hz)?
        );
        s += "    \"points\": [";
        for (i, p) in self.points.iter().enumerate() {
            s += if i == 0 { "\n" } else { ",\n" };
            s += &format!(
                "      {{\n        \"re\": {},\n        \"im\": {},\n        \"coherence\": {}\n      }}",
                serde_json::to_string(&p.re)?,
                serde_json::to_string(&p.im)?,
                serde_json::to_string(&p.coherence)?
            );
        }
        s += "\n    ]\n  }";
        Ok(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_block_reads_back_to_f32_precision_and_keeps_the_band() {
        let freqs: Vec<f64> = (0..50).map(|k| k as f64 * 0.5).collect();
        let frfs: Vec<Vec<Complex64>> = (0..3)
            .map(|p| {
                freqs
                    .iter()
                    .map(|f| Complex64::new((f * 0.37 + p as f64).sin() * 1e-3, f.cos() * 3.3))
                    .collect()
            })
            .collect();
        let mut coh = vec![vec![0.97; 50]; 3];
        coh[2][20] = f64::NAN;
        let names: Vec<String> = ["a", "b", "c"].iter().map(|s| s.to_string()).collect();
        let (b, notes) = PointFrfs::build(&freqs, &frfs, &coh, (5.0, 12.0), "g/N", &names);
        assert_eq!(b.frequency_hz.first(), Some(&5.0));
        assert_eq!(b.frequency_hz.last(), Some(&12.0));
        assert_eq!(b.frequency_hz.len(), 15);
        assert_eq!(notes.len(), 1, "{notes:?}");
        assert!(notes[0].contains("point 'c': 1 FRF"), "{notes:?}");
        let text = b.to_json().unwrap();
        let back: PointFrfs = serde_json::from_str(&text).unwrap();
        assert_eq!(back.problem(3), None);
        assert_eq!(back.frequency_hz, b.frequency_hz);
        for (p, frf) in frfs.iter().enumerate() {
            for (k, h) in back.complex(p).iter().enumerate() {
                let want = frf[10 + k];
                assert!(
                    (h - want).norm() <= 1e-7 * want.norm().max(1e-30),
                    "{h} {want}"
                );
            }
        }
        assert_eq!(back.points[2].coherence[10], 0.0);
        assert!(back.problem(4).is_some());
        let mut short = back.clone();
        short.points[1].im.pop();
        assert!(short.problem(3).unwrap().contains("point 2"));
    }
}
