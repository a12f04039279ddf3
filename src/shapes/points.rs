//! The multi-point test: a plan of named points (one WAV of averaged taps per point, the
//! same sensor throughout: roving hammer, or a fixed hammer point and a roving sensor), the
//! shapes found over all points, and the shape file.
//!
//! Plan file (text, one point a line, `#` starts a comment, fields separated by `|`):
//! ```text
//! # name                          | direction | recording
//! left front arm, motor mount     | z         | p1.wav
//! ```
//! An optional fourth field gives the point's place, `x, y, z` in mm (every point or none),
//! for the pictures of the shapes (`picture`).
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
    /// Where the point is, mm (`x, y, z`), when the plan says (for the pictures).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coordinates_mm: Option<[f64; 3]>,
}

/// `x, y, z` in mm, each a finite number.
fn parse_coordinates(text: &str) -> Option<[f64; 3]> {
    let v: Vec<f64> = text
        .split(',')
        .map(|t| t.trim().parse::<f64>().ok().filter(|x| x.is_finite()))
        .collect::<Option<Vec<f64>>>()?;
    (v.len() == 3).then(|| [v[0], v[1], v[2]])
}

/// Read a plan file. Refuses a file that is not text (a WAV given as the plan, say), a line
/// without three fields, two lines naming the same recording, and two points with the same
/// name and direction.
pub fn read_plan(path: &Path) -> Result<Vec<Point>> {
    crate::strip::compare::check_readable(path)?;
    safe_path::check_input(path)?;
    let bytes = std::fs::read(path)
        .with_context(|| format!("cannot read the plan '{}'", path.display()))?;
    let text = match String::from_utf8(bytes) {
        Ok(t) if !t.contains('\0') => t,
        _ => crate::fail!(
            "'{}' is not a text plan (it holds binary data: a recording given as the plan?); the plan lists 'name | direction | recording.wav' lines",
            path.display()
        ),
    };
    let mut points: Vec<Point> = Vec::new();
    let mut lines: Vec<usize> = Vec::new();
    for (n, line) in text.lines().enumerate() {
        let line = line.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let f: Vec<&str> = line.split('|').map(str::trim).collect();
        if !(f.len() == 3 || f.len() == 4) || f.iter().any(|s| s.is_empty()) {
            crate::fail!(
                "line {} of the plan '{}' must be 'name | direction | recording.wav' (optionally '| x, y, z' in mm)",
                n + 1,
                path.display()
            );
        }
        let coordinates_mm = match f.get(3) {
            None => None,
            Some(t) => match parse_coordinates(t) {
                Some(c) => Some(c),
                None => crate::fail!(
                    "line {} of the plan '{}': the coordinates must be three numbers in mm, 'x, y, z' (got '{t}')",
                    n + 1,
                    path.display()
                ),
            },
        };
        if let Some(q) = points.first()
            && q.coordinates_mm.is_some() != coordinates_mm.is_some()
        {
            crate::fail!(
                "line {} of the plan '{}' {} coordinates and line {} {}: give them for every point or none",
                n + 1,
                path.display(),
                if coordinates_mm.is_some() {
                    "has"
                } else {
                    "has no"
                },
                lines[0],
                if q.coordinates_mm.is_some() {
                    "has"
                } else {
                    "has none"
                }
            );
        }
        let p = Point {
            name: f[0].into(),
            direction: f[1].into(),
            recording: f[2].into(),
            coordinates_mm,
        };
        let key = |r: &str| -> PathBuf {
            Path::new(r)
                .components()
                .filter(|c| !matches!(c, std::path::Component::CurDir))
                .collect()
        };
        if let Some(i) = points
            .iter()
            .position(|q| key(&q.recording) == key(&p.recording))
        {
            crate::fail!(
                "lines {} and {} of the plan '{}' name the same recording '{}': each point needs its own",
                lines[i],
                n + 1,
                path.display(),
                p.recording
            );
        }
        if let Some(i) = points
            .iter()
            .position(|q| q.name == p.name && q.direction == p.direction)
        {
            crate::fail!(
                "lines {} and {} of the plan '{}' name the same point '{} | {}': give each point its own name or direction",
                lines[i],
                n + 1,
                path.display(),
                p.name,
                p.direction
            );
        }
        points.push(p);
        lines.push(n + 1);
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

/// A mode to fit needs a peak at this many points at least: a peak at one point only is as
/// likely a local resonance (a loose part, the sensor's mount, a spike) as a mode of the
/// structure, and its shape would be that one point (common practice, no source).
pub const MIN_POINTS: usize = 2;

/// A candidate mode or a fitted shape set aside, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SetAside {
    pub frequency_hz: f64,
    /// The points (plan order, from 0) the peak was seen at, or that hold the shape's energy.
    pub points: Vec<usize>,
    pub reason: String,
}

/// Seeds from the modes the points found: frequencies within 1.5 % are one mode (common
/// practice, no source); the mean frequency and the median damping. A cluster seen at fewer
/// than `MIN_POINTS` points is set aside, with the reason.
/// `names` are the points' names (plan order) for the reasons.
pub fn seeds_from(per_point: &[Vec<(f64, f64)>], names: &[String]) -> (Vec<Seed>, Vec<SetAside>) {
    let mut all: Vec<(f64, f64, usize)> = per_point
        .iter()
        .enumerate()
        .flat_map(|(p, ms)| ms.iter().map(move |m| (m.0, m.1, p)))
        .collect();
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut clusters: Vec<Vec<(f64, f64, usize)>> = Vec::new();
    for m in all {
        match clusters.last_mut() {
            Some(c) if m.0 <= c[0].0 * 1.015 => c.push(m),
            _ => clusters.push(vec![m]),
        }
    }
    let mut seeds = Vec::new();
    let mut aside = Vec::new();
    for c in &clusters {
        let f = c.iter().map(|m| m.0).sum::<f64>() / c.len() as f64;
        let mut at: Vec<usize> = c.iter().map(|m| m.2).collect();
        at.sort_unstable();
        at.dedup();
        if at.len() < MIN_POINTS.min(per_point.len()) {
            aside.push(SetAside {
                frequency_hz: f,
                reason: format!(
                    "the {f:.1} Hz peak shows at {} of {} points only ({}); a mode to fit must show at {MIN_POINTS} or more, so it is taken for a local resonance and not fitted",
                    at.len(),
                    per_point.len(),
                    at.iter()
                        .map(|&p| point_name(names, p))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
                points: at,
            });
            continue;
        }
        let mut z: Vec<f64> = c.iter().map(|m| m.1).collect();
        z.sort_by(f64::total_cmp);
        seeds.push(Seed {
            frequency_hz: f,
            damping_ratio: z[z.len() / 2],
        });
    }
    (seeds, aside)
}

fn point_name(names: &[String], p: usize) -> String {
    match names.get(p) {
        Some(n) => format!("point {} '{n}'", p + 1),
        None => format!("point {}", p + 1),
    }
}

/// A shape below this realness whose energy sits at one point is set aside (common practice,
/// no source).
pub const DOUBTFUL_REALNESS: f64 = 0.9;
/// Share of a shape's squared residues at one point that makes it a one-point shape.
pub const ONE_POINT_SHARE: f64 = 0.8;

/// A shape set aside: low realness and its energy at one point (a local resonance or a poor
/// fit, not a mode of the structure). `None` keeps it.
pub fn doubtful_shape(s: &Shape, names: &[String]) -> Option<SetAside> {
    let e: Vec<f64> = s
        .residues
        .iter()
        .map(|r| r[0] * r[0] + r[1] * r[1])
        .collect();
    let total: f64 = e.iter().sum();
    let (top, big) = e
        .iter()
        .copied()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let share = if total > 0.0 { big / total } else { 0.0 };
    (s.realness < DOUBTFUL_REALNESS && share >= ONE_POINT_SHARE).then(|| SetAside {
        frequency_hz: s.frequency_hz,
        points: vec![top],
        reason: format!(
            "the {:.1} Hz shape is set aside: far from real (realness {:.2} < {DOUBTFUL_REALNESS}) with {:.0} % of its energy at {} alone, a local resonance or a poor fit rather than a mode of the structure",
            s.frequency_hz,
            s.realness,
            100.0 * share,
            point_name(names, top)
        ),
    })
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

/// Version of the shape file: 2 added `set_aside` and `frf` (version 1 files still load).
pub const SCHEMA_VERSION: u32 = 2;

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
    /// Peaks not fitted and shapes not kept, each with its reason.
    #[serde(default)]
    pub set_aside: Vec<SetAside>,
    pub notes: Vec<String>,
    /// Every point's averaged FRF over the band searched, so the shapes can be fitted again
    /// or plotted without the recordings (`None` in version 1 files).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub frf: Option<crate::shapes::frf::PointFrfs>,
}

impl ShapeFile {
    /// Written atomically; the FRF arrays one per line (see `frf::PointFrfs::to_json`), the
    /// rest indented.
    pub fn save(&self, path: &Path) -> Result<()> {
        let err = |e: serde_json::Error| crate::error::Error::new(e.to_string());
        let mut head = self.clone();
        let frf = head.frf.take();
        let mut text = serde_json::to_string_pretty(&head).map_err(err)?;
        if let Some(frf) = frf {
            // The pretty text of a non-empty object ends with "\n}".
            text.truncate(text.len() - 2);
            text += ",\n  \"frf\": ";
            text += &frf.to_json().map_err(err)?;
            text += "\n}";
        }
        text.push('\n');
        atomic::write_atomic(path, text.as_bytes())
            .map_err(|e| e.context(format!("cannot write '{}'", path.display())))
    }

    pub fn load(path: &Path) -> Result<Self> {
        crate::strip::compare::check_readable(path)?;
        safe_path::check_input(path)?;
        if safe_path::kind_of(path) != Some(safe_path::FileKind::Json) {
            crate::fail!(
                "'{}' is not a shape file (written by `tapmodes shapes --out`)",
                path.display()
            );
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
        let file: ShapeFile = serde_json::from_value(v).map_err(|e| {
            crate::error::Error::new(format!("'{}' is a damaged shape file: {e}", path.display()))
        })?;
        if let Some(p) = file.frf.as_ref().and_then(|f| f.problem(file.points.len())) {
            crate::fail!("'{}' is a damaged shape file: {p}", path.display());
        }
        Ok(file)
    }
}

/// What `analyse_points` gives back.
#[derive(Debug, Clone)]
pub struct PointData {
    /// The common spectral lines, Hz.
    pub freqs: Vec<f64>,
    /// Each point's complex FRF on `freqs`.
    pub frfs: Vec<Vec<Complex64>>,
    /// Each point's coherence on `freqs`.
    pub coherence: Vec<Vec<f64>>,
    /// Each point's modes (frequency, apparent damping).
    pub modes: Vec<Vec<(f64, f64)>>,
    /// The band the mode search covered (widest over the points), Hz.
    pub band_hz: (f64, f64),
    /// The FRF's unit (response unit per force unit).
    pub unit: String,
}

/// Analyse every point's recording and return the common lines, the FRFs, coherences and
/// each point's modes (frequency, apparent damping). Modes flagged for low coherence are not
/// taken as seeds (each one left out is named in `notes`).
pub fn analyse_points(
    plan: &Path,
    points: &[Point],
    open: &dyn Fn(&Path) -> Result<crate::pipeline::Analysis>,
    notes: &mut Vec<String>,
) -> Result<PointData> {
    let dir = plan.parent().unwrap_or(Path::new("."));
    let mut out = PointData {
        freqs: Vec::new(),
        frfs: Vec::new(),
        coherence: Vec::new(),
        modes: Vec::new(),
        band_hz: (f64::INFINITY, 0.0),
        unit: String::new(),
    };
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
        if out.frfs.is_empty() {
            out.freqs = result.spectra.freqs.clone();
            out.unit = curve.unit.clone();
        } else if out.freqs != result.spectra.freqs {
            crate::fail!(
                "point '{}' has other spectral lines ({} up to {:.1} Hz) than the first point ({} up to {:.1} Hz): record every point with the same sample rate and record length",
                p.name,
                result.spectra.freqs.len(),
                result.spectra.freqs.last().copied().unwrap_or(0.0),
                out.freqs.len(),
                out.freqs.last().copied().unwrap_or(0.0)
            );
        }
        out.band_hz.0 = out.band_hz.0.min(result.search.band_hz.0);
        out.band_hz.1 = out.band_hz.1.max(result.search.band_hz.1);
        out.coherence.push(
            curve
                .coherence
                .clone()
                .unwrap_or_else(|| vec![f64::NAN; h.len()]),
        );
        out.frfs.push(h);
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
        out.modes.push(kept);
    }
    if !out.band_hz.0.is_finite() {
        out.band_hz = (0.0, out.freqs.last().copied().unwrap_or(0.0));
    }
    Ok(out)
}
