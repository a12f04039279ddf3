//! Traces from what the tool already holds: run files with their curve tables.

use super::{MountTrace, Trace};
use crate::drive::Band;
use crate::run::RunFile;
use crate::run::curve_read::SavedCurve;
use crate::spectra::Curve;

/// Decibels re 1 unit of a magnitude (floored far below any measurement).
fn db(m: f64) -> f64 {
    20.0 * m.max(1e-300).log10()
}

/// One run's trace from its run file and its curve table.
pub fn trace_from_run(run: &RunFile, curve: &SavedCurve) -> Trace {
    Trace {
        label: run.variant.label.clone(),
        kind: run.setup.basis.label().to_string(),
        unit: curve.unit.clone(),
        freqs: curve.freqs.clone(),
        magnitude_db: curve.magnitude_db.clone(),
        phase_deg: curve.phase_deg.clone(),
        coherence: curve.coherence.clone(),
        spread_db: curve.spread_db.clone(),
        modes_hz: run.modes.iter().map(|m| m.frequency_hz).collect(),
    }
}

/// A soft mount's panel entry: the measured transmissibility when a curve of it is at hand.
pub fn mount_trace(
    label: &str,
    run: &RunFile,
    measured: Option<(&[f64], &Curve)>,
) -> Option<MountTrace> {
    let fit = run.mount.clone()?;
    Some(MountTrace {
        label: label.to_string(),
        measured: measured.map(|(f, c)| (f.to_vec(), c.magnitude.iter().map(|&m| db(m)).collect())),
        fit,
    })
}

/// The bands of the runs' drive sections, each band once (same name and edges), names
/// cleaned, bands with edges that are not numbers left out.
pub fn bands_of<'a>(runs: impl IntoIterator<Item = &'a RunFile>) -> Vec<Band> {
    let mut out: Vec<Band> = Vec::new();
    for r in runs {
        for b in r.drive.iter().flat_map(|d| d.bands.iter()) {
            // Names from an untrusted file: cleaned of control characters like the run's
            // other texts (they end up in SVG and HTML).
            let b = Band {
                name: crate::run::validate::clean_text(&b.name, false),
                hz: b.hz,
            };
            if b.hz.0.is_finite() && b.hz.1.is_finite() && !out.contains(&b) {
                out.push(b);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn band_names_from_files_are_cleaned_and_kept_once() {
        let text = std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/recordings/arm-solid.json"
        ))
        .unwrap();
        let mut run = RunFile::from_json(&text, "arm-solid.json").unwrap();
        let drive = crate::drive::Drive::from_rpm((6000.0, 24000.0), 2).unwrap();
        let mut section = drive.section();
        section.bands[0].name = "rot\u{1b}[31mation".into();
        run.drive = Some(section);
        let bands = bands_of([&run, &run]);
        assert_eq!(bands.len(), run.drive.as_ref().unwrap().bands.len());
        assert!(bands.iter().all(|b| !b.name.chars().any(char::is_control)));
    }
}
