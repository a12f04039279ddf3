//! The shapes of a whole plan in one call: every point's recording analysed (through the
//! caller's `open`, which drives the one pipeline), seeds from the points' modes, the
//! shared-pole fit, the doubtful shapes named, and the shape file. `tapmodes shapes` does
//! the same steps; the terminal app's point walk ends here so it renders only the outcome.

use super::points::{self, KIND, Point, ShapeFile, ShapeMode};
use crate::error::Result;
use crate::pipeline::Analysis;
use std::path::{Path, PathBuf};

/// Realness below which a shape's signs are called doubtful (as `tapmodes shapes` does).
pub const DOUBTFUL_REALNESS: f64 = 0.9;

/// Fit the shapes of every mode over the plan's points and build the shape file.
pub fn fit_plan(
    plan: &Path,
    points: &[Point],
    label: &str,
    open: &dyn Fn(&Path) -> Result<Analysis>,
) -> Result<ShapeFile> {
    let mut seed_notes = Vec::new();
    let (freqs, frfs, per_point) = points::analyse_points(plan, points, open, &mut seed_notes)?;
    let seeds = points::seeds_from(&per_point);
    if seeds.is_empty() {
        crate::fail!("no point's recording showed a mode, so there are no shapes to fit");
    }
    let (found, mut notes) = points::shapes_over_points(&freqs, &frfs, &seeds);
    notes.splice(0..0, seed_notes);
    if found.is_empty() {
        crate::fail!(
            "the shared-pole fit failed in every band: {}",
            notes.join("; ")
        );
    }
    for (s, _) in &found {
        if s.realness < DOUBTFUL_REALNESS {
            notes.push(format!(
                "the {:.1} Hz shape is far from real (realness {:.2}): a non-proportionally damped mode or a poor fit; its signs are doubtful",
                s.frequency_hz, s.realness
            ));
        }
    }
    Ok(ShapeFile {
        kind: KIND.into(),
        schema_version: 1,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: crate::run::now_rfc3339(),
        label: label.into(),
        points: points.to_vec(),
        modes: found
            .into_iter()
            .map(|(shape, fit_error)| ShapeMode { shape, fit_error })
            .collect(),
        notes,
    })
}

/// Claim a name for a plan's shape file beside it, never over an existing file:
/// `STEM.shapes.json`, then `STEM-2.shapes.json`, ... (the name is taken by creating the
/// file exclusively; `ShapeFile::save` then replaces our own empty file).
pub fn claim_shape_path(plan: &Path) -> Result<PathBuf> {
    let dir = plan.parent().unwrap_or(Path::new("."));
    let stem = crate::run::naming::stem_for(
        &plan
            .file_stem()
            .map_or("shapes".into(), |s| s.to_string_lossy().into_owned()),
    );
    for i in 1..=9_999u32 {
        let name = if i == 1 {
            format!("{stem}.shapes.json")
        } else {
            format!("{stem}-{i}.shapes.json")
        };
        let path = dir.join(name);
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
        {
            Ok(_) => return Ok(path),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => {
                return Err(crate::error::Error::from(e)
                    .context(format!("cannot create '{}'", path.display())));
            }
        }
    }
    crate::fail!(
        "every shape-file name from '{stem}.shapes.json' on is taken in '{}'",
        dir.display()
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shape_files_never_replace_one_another() {
        let dir =
            std::env::temp_dir().join(format!("tapmodes-claim-shapes-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let plan = dir.join("walk plan.txt");
        let a = claim_shape_path(&plan).unwrap();
        let b = claim_shape_path(&plan).unwrap();
        assert_eq!(a.file_name().unwrap(), "walk_plan.shapes.json");
        assert_eq!(b.file_name().unwrap(), "walk_plan-2.shapes.json");
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
