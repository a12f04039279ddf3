//! The shapes of a whole plan in one call: every point's recording analysed (through the
//! caller's `open`, which drives the one pipeline), seeds from the points' modes, the
//! shared-pole fit, the doubtful shapes named, and the shape file. `tapmodes shapes` does
//! the same steps; the terminal app's point walk ends here so it renders only the outcome.

use super::frf::PointFrfs;
use super::points::{self, Point, ShapeFile, ShapeMode};
use crate::error::Result;
use crate::pipeline::Analysis;
use std::path::{Path, PathBuf};

/// Fit the shapes of every mode over the plan's points and build the shape file: seeds from
/// modes seen at `points::MIN_POINTS` points or more (the others set aside), the shared-pole
/// fit, one-point shapes far from real set aside, doubtful signs named, every point's FRF
/// kept. `tapmodes shapes` and the app's point walk both end here.
pub fn fit_plan(
    plan: &Path,
    points: &[Point],
    label: &str,
    open: &dyn Fn(&Path) -> Result<Analysis>,
) -> Result<ShapeFile> {
    let mut seed_notes = Vec::new();
    let data = points::analyse_points(plan, points, open, &mut seed_notes)?;
    let names: Vec<String> = points.iter().map(|p| p.name.clone()).collect();
    let (seeds, mut set_aside) = points::seeds_from(&data.modes, &names);
    if seeds.is_empty() {
        let why: Vec<String> = set_aside.iter().map(|s| s.reason.clone()).collect();
        crate::fail!(
            "no mode showed at {} or more points, so there are no shapes to fit{}",
            points::MIN_POINTS,
            if why.is_empty() {
                String::new()
            } else {
                format!(": {}", why.join("; "))
            }
        );
    }
    let (fitted, mut notes) = points::shapes_over_points(&data.freqs, &data.frfs, &seeds);
    notes.splice(0..0, seed_notes);
    let mut found = Vec::new();
    for (s, err) in fitted {
        match points::doubtful_shape(&s, &names) {
            Some(aside) => set_aside.push(aside),
            None => found.push((s, err)),
        }
    }
    if found.is_empty() {
        let mut why = notes.clone();
        why.extend(set_aside.iter().map(|s| s.reason.clone()));
        crate::fail!("no shape could be kept: {}", why.join("; "));
    }
    for (s, _) in &found {
        if s.realness < points::DOUBTFUL_REALNESS {
            notes.push(format!(
                "the {:.1} Hz shape is far from real (realness {:.2}): a non-proportionally damped mode or a poor fit; its signs are doubtful",
                s.frequency_hz, s.realness
            ));
        }
    }
    set_aside.sort_by(|x, y| x.frequency_hz.total_cmp(&y.frequency_hz));
    let (frf, frf_notes) = PointFrfs::build(
        &data.freqs,
        &data.frfs,
        &data.coherence,
        data.band_hz,
        &data.unit,
        &names,
    );
    notes.extend(frf_notes);
    Ok(ShapeFile {
        kind: points::KIND.into(),
        schema_version: points::SCHEMA_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: crate::run::now_rfc3339(),
        label: label.into(),
        points: points.to_vec(),
        modes: found
            .into_iter()
            .map(|(shape, fit_error)| ShapeMode { shape, fit_error })
            .collect(),
        set_aside,
        notes,
        frf: Some(frf),
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
