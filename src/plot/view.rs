//! The app's picture key: the current view (live curve, overlaid runs, the visible range,
//! the axis kind, the drive's bands) written as SVG beside the run files.

use super::build::{bands_of, trace_from_run};
use super::{Figure, MountTrace, PlotOptions, Trace};
use crate::error::Result;
use crate::spectra::Basis;
use crate::tui::model::Model;
use std::path::PathBuf;

/// A file-name-safe form of a label ("arm solid/2" -> "arm-solid-2").
fn file_stem(label: &str) -> String {
    let s: String = label
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '_' {
                c
            } else {
                '-'
            }
        })
        .collect();
    let s = s.trim_matches('-').to_string();
    if s.is_empty() { "live".into() } else { s }
}

/// The figure the app shows now.
pub fn view_figure(m: &Model) -> Figure {
    let label = if m.label.is_empty() {
        "live"
    } else {
        m.label.as_str()
    };
    let mut fig = Figure::default();
    if let Some(a) = &m.analysis {
        match &a.curve {
            Some(c) => fig.traces.push(Trace {
                label: label.to_string(),
                kind: c.basis.label().to_string(),
                unit: c.unit.clone(),
                freqs: c.freqs.clone(),
                magnitude_db: c.db.clone(),
                phase_deg: None,
                coherence: c.coherence.clone(),
                spread_db: None,
                modes_hz: a.modes.iter().map(|m| m.frequency_hz).collect(),
            }),
            None => fig
                .notes
                .push(format!("{label}: no curve yet (no accepted tap)")),
        }
        if let Some(fit) = &a.run.mount {
            let measured = a
                .curve
                .as_ref()
                .filter(|c| c.basis == Basis::Transmissibility)
                .map(|c| (c.freqs.clone(), c.db.clone()));
            fig.mounts.push(MountTrace {
                label: label.to_string(),
                measured,
                fit: fit.clone(),
            });
        }
    }
    for o in &m.overlays {
        match &o.curve {
            Some(c) => {
                let mut t = trace_from_run(&o.run, c);
                t.label = o.label.clone();
                fig.traces.push(t);
            }
            None => fig
                .notes
                .push(format!("{} is not drawn: no curve table", o.label)),
        }
    }
    fig.bands = match &m.drive {
        Some(d) => d.bands().bands,
        None => bands_of(m.overlays.iter().map(|o| &o.run)),
    };
    fig
}

/// Write the current view beside the run files as `LABEL-view.svg` (or `-2`, `-3`, ...:
/// never over an existing file). Returns the path written.
pub fn write_view(m: &Model) -> Result<PathBuf> {
    let fig = view_figure(m);
    if fig.traces.is_empty() && fig.mounts.is_empty() {
        crate::fail!("no picture written: nothing to plot yet (tap first)");
    }
    let dir = &m.header.out_dir;
    if !dir.is_dir() {
        crate::fail!(
            "no picture written: the run folder '{}' does not exist yet (save a run first)",
            dir.display()
        );
    }
    let label = if m.label.is_empty() {
        "live"
    } else {
        m.label.as_str()
    };
    let path = crate::run::safe_path::free_name(dir, &format!("{}-view", file_stem(label)), "svg");
    let o = PlotOptions {
        log_frequency: m.log_freq,
        range_hz: Some(m.view_hz),
        ..PlotOptions::default()
    };
    super::write_picture(&fig, &o, &path)?;
    Ok(path)
}

#[cfg(test)]
mod tests {
    use super::file_stem;

    #[test]
    fn stems_are_safe() {
        assert_eq!(file_stem("arm solid/2"), "arm-solid-2");
        assert_eq!(file_stem("../.."), "live");
        assert_eq!(file_stem("tm9_arm"), "tm9_arm");
    }
}
