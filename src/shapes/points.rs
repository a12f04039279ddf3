//! The multi-point test: a plan of named points (one WAV of averaged taps per point, the
//! same sensor throughout: roving hammer, or a fixed hammer point and a roving sensor), the
//! shapes found over all points, and the shape file.
//!
//! Plan file (text, one point a line, `#` starts a comment, fields separated by `|`):
//! ```text
//! # name                          | direction | recording
//! left front arm, motor mount     | z         | p1.wav
//! ```
//! Recordings are relative to the plan file. Every recording goes through the one pipeline
//! (`pipeline::analyse_source`) with the same settings; all must give FRFs on the same
//! frequency lines (same sample rate and record length).

use super::{Shape, fit_shared, shapes};
use crate::error::{Context, Result};
use crate::modes::fit::{Seed, complex_curve};
use crate::run::{atomic, safe_path};
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Tag of a shape file.
pub const KIND: &str = "tapmodes-shapes";

/// One measurement point.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Point {
    pub name: String,
    /// Free text: the direction of the tap or sensor at this point (x, y, z, radial, ...).
    pub direction: String,
    /// Recording, relative to the plan (as written in it).
    pub recording: String,
}

/// Read a plan file.
pub fn read_plan(path: &Path) -> Result<Vec<Point>> {
    safe_path::check_input(path)?;
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read the plan '{}'", path.display()))?;
    let mut points = Vec::new();
    for (n, line) in text.lines().enumerate() {
        let line = line.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let f: Vec<&str> = line.split('|').map(str::trim).collect();
        if f.len() != 3 || f.iter().any(|s| s.is_empty()) {
            crate::fail!(
                "line {} of the plan '{}' must be 'name | direction | recording.wav'",
                n + 1,
                path.display()
            );
        }
        points.push(Point {
            name: f[0].into(),
            direction: f[1].into(),
            recording: f[2].into(),
        });
    }
    if points.len() < 2 {
        crate::fail!(
            "the plan '{}' lists {} point(s); a shape needs at least two",
            path.display(),
            points.len()
        );
    }
    Ok(points)
}

/// Group seed frequencies into bands fitted together: modes closer than `gap` (fraction)
/// share a band.
pub fn group(seeds: &[Seed], gap: f64) -> Vec<Vec<Seed>> {
    let mut s = seeds.to_vec();
    s.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let mut out: Vec<Vec<Seed>> = Vec::new();
    for x in s {
        match out.last_mut() {
            Some(g) if x.frequency_hz <= g.last().unwrap().frequency_hz * (1.0 + gap) => g.push(x),
            _ => out.push(vec![x]),
        }
    }
    out
}

/// Seeds from the modes every point found: frequencies within 1.5 % are one mode (common
/// practice, no source); the mean frequency and the median damping.
pub fn seeds_from(per_point: &[Vec<(f64, f64)>]) -> Vec<Seed> {
    let mut all: Vec<(f64, f64)> = per_point.iter().flatten().copied().collect();
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut clusters: Vec<Vec<(f64, f64)>> = Vec::new();
    for m in all {
        match clusters.last_mut() {
            Some(c) if m.0 <= c[0].0 * 1.015 => c.push(m),
            _ => clusters.push(vec![m]),
        }
    }
    clusters
        .iter()
        .map(|c| {
            let mut z: Vec<f64> = c.iter().map(|m| m.1).collect();
            z.sort_by(f64::total_cmp);
            Seed {
                frequency_hz: c.iter().map(|m| m.0).sum::<f64>() / c.len() as f64,
                damping_ratio: z[z.len() / 2],
            }
        })
        .collect()
}

/// Shapes of all modes over all points. `freqs`: the common lines; `frfs[p]`: point p's
/// complex FRF; `seeds`: the modes to fit. Returns the shapes and notes of bands that
/// failed.
pub fn shapes_over_points(
    freqs: &[f64],
    frfs: &[Vec<Complex64>],
    seeds: &[Seed],
) -> (Vec<(Shape, f64)>, Vec<String>) {
    let mut out = Vec::new();
    let mut notes = Vec::new();
    for g in group(seeds, 0.15) {
        let lo = g[0].frequency_hz;
        let hi = g.last().unwrap().frequency_hz;
        let z = g.iter().map(|s| s.damping_ratio).fold(0.01f64, f64::max);
        let half = (4.0 * z * hi).max(0.03 * hi);
        let band = ((lo - half).max(0.0), hi + half);
        match fit_shared(freqs, frfs, band, &g) {
            Some(fit) => {
                for s in shapes(&fit) {
                    out.push((s, fit.error));
                }
            }
            None => notes.push(format!(
                "the shared-pole fit over {:.1}-{:.1} Hz failed: no shapes for the {} mode(s) there",
                band.0,
                band.1,
                g.len()
            )),
        }
    }
    (out, notes)
}

/// One mode of the shape file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShapeMode {
    #[serde(flatten)]
    pub shape: Shape,
    /// Normalised residual of the fit of this mode's band, over all points.
    pub fit_error: f64,
}

/// The shape file written by `tapmodes shapes --out`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShapeFile {
    pub kind: String,
    pub schema_version: u32,
    pub tool_version: String,
    pub created_utc: String,
    pub label: String,
    pub points: Vec<Point>,
    pub modes: Vec<ShapeMode>,
    pub notes: Vec<String>,
}

impl ShapeFile {
    pub fn save(&self, path: &Path) -> Result<()> {
        let text = serde_json::to_string_pretty(self)
            .map_err(|e| crate::error::Error::new(e.to_string()))?;
        atomic::write_atomic(path, text.as_bytes())
            .map_err(|e| e.context(format!("cannot write '{}'", path.display())))
    }

    pub fn load(path: &Path) -> Result<Self> {
        safe_path::check_input(path)?;
        if safe_path::kind_of(path) != Some(safe_path::FileKind::Json) {
            crate::fail!("'{}' is not a shape file", path.display());
        }
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read '{}'", path.display()))?;
        let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
            crate::error::Error::new(format!("'{}' is not JSON: {e}", path.display()))
        })?;
        if v.get("kind").and_then(|k| k.as_str()) != Some(KIND) {
            crate::fail!(
                "'{}' is not a shape file (written by `tapmodes shapes --out`)",
                path.display()
            );
        }
        serde_json::from_value(v).map_err(|e| {
            crate::error::Error::new(format!("'{}' is a damaged shape file: {e}", path.display()))
        })
    }
}

/// Analyse every point's recording and return the common lines, the FRFs and each point's
/// modes (frequency, apparent damping). Modes flagged for low coherence are not taken as
/// seeds (each one left out is named in `notes`).
#[allow(clippy::type_complexity)]
pub fn analyse_points(
    plan: &Path,
    points: &[Point],
    open: &dyn Fn(&Path) -> Result<crate::pipeline::Analysis>,
    notes: &mut Vec<String>,
) -> Result<(Vec<f64>, Vec<Vec<Complex64>>, Vec<Vec<(f64, f64)>>)> {
    let dir = plan.parent().unwrap_or(Path::new("."));
    let mut freqs: Option<Vec<f64>> = None;
    let mut frfs = Vec::new();
    let mut modes = Vec::new();
    for p in points {
        let wav: PathBuf = dir.join(&p.recording);
        let analysis = open(&wav).map_err(|e| e.context(format!("point '{}'", p.name)))?;
        let result = analysis.result();
        let Some(curve) = result.curve.as_ref() else {
            crate::fail!(
                "point '{}': no tap in '{}' was accepted",
                p.name,
                wav.display()
            );
        };
        let Some(h) =
            complex_curve(curve).filter(|_| matches!(curve.basis, crate::spectra::Basis::Frf(_)))
        else {
            crate::fail!(
                "point '{}': shapes need an FRF (a force channel) in '{}'",
                p.name,
                wav.display()
            );
        };
        match &freqs {
            None => freqs = Some(result.spectra.freqs.clone()),
            Some(f) if f.len() != result.spectra.freqs.len() => crate::fail!(
                "point '{}' has {} spectral lines, the first point {}: record every point with the same sample rate and record length",
                p.name,
                result.spectra.freqs.len(),
                f.len()
            ),
            Some(_) => {}
        }
        frfs.push(h);
        let mut kept = Vec::new();
        for m in result.modes() {
            if m.flags.contains(&crate::modes::Flag::LowCoherence) {
                notes.push(format!(
                    "point '{}': the {:.1} Hz peak has low coherence and is not taken as a mode to fit",
                    p.name, m.frequency_hz
                ));
                continue;
            }
            kept.push((
                m.frequency_hz,
                m.damping_ratio.unwrap_or(0.01).max(1e-3) + m.window_damping,
            ));
        }
        modes.push(kept);
    }
    Ok((freqs.unwrap_or_default(), frfs, modes))
}
