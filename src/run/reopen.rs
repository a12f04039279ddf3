//! A saved run analysed again: its recording opened as the run describes it (calibration,
//! full scale, roles, lost stretches) and its settings and operator verdicts applied.

use super::{RunFile, Variant};
use crate::error::{Error, Result};
use crate::pipeline::Analysis;
use crate::source::Source;
use crate::source::wav::WavSource;
use std::path::{Path, PathBuf};

/// Re-run a saved run: same recording, same settings, same operator verdicts. The run
/// file is checked like command-line settings, its recording must lie in its folder and
/// match it (channels, rate, length), and the recording's own calibration and full scale
/// are taken from the run, so re-analysis reproduces the capture.
pub fn reanalyse(json: &Path) -> Result<(Analysis, PathBuf, Variant)> {
    let saved = RunFile::load(json)?;
    let shown = json.display();
    let wav = saved
        .wav_path(json)
        .ok_or_else(|| Error::new(format!("'{shown}' does not name a recording")))??;
    let mut src = WavSource::open(&wav)?;
    let s = &saved.setup;
    let (n_run, n_wav) = (s.channels.len(), src.info().channels.len());
    if n_run != n_wav {
        crate::fail!(
            "'{}' has {n_wav} channels but the run '{shown}' was made with {n_run}: it is not this run's recording",
            wav.display()
        );
    }
    if (src.info().sample_rate - s.sample_rate_hz.round()).abs() > 0.5 {
        crate::fail!(
            "'{}' is sampled at {} Hz but the run '{shown}' at {} Hz: it is not this run's recording",
            wav.display(),
            src.info().sample_rate,
            s.sample_rate_hz
        );
    }
    let rec = saved.recording.as_ref();
    let counts = rec.is_some_and(|r| r.encoding.is_counts());
    for (i, c) in s.channels.iter().enumerate() {
        src.calibrate(i, &c.unit, if counts { c.scale } else { 1.0 });
        src.set_full_scale(i, c.full_scale);
        src.set_channel(i, &c.name, c.role);
    }
    if let Some(r) = rec {
        let lost: u64 = r.gaps.iter().map(|g| g.1).sum();
        let needed = r.frames - lost;
        if src.frames() < needed {
            crate::fail!(
                "'{}' holds {} frames but the run '{shown}' covers {needed}: the recording is shorter than its run",
                wav.display(),
                src.frames()
            );
        }
        if src.frames() > needed {
            eprintln!(
                "note: '{}' goes on {} frames past the run (a capture that ended without its last save); analysing the first {needed} as the run did",
                wav.display(),
                src.frames() - needed
            );
            src.limit_frames(needed);
        }
        src.skip_gaps(&r.gaps);
    }
    let cfg = saved.analysis_config();
    let mut analysis = Analysis::new(&src.info().clone(), s.roles, cfg, true)?;
    analysis.set_disarmed(saved.disarmed.clone());
    let mut analysis = crate::pipeline::drain_into(&mut src, analysis)?;
    analysis.apply_verdicts(&saved.hits);
    Ok((analysis, wav, saved.variant))
}
