//! A saved run analysed again: its recording opened as the run describes it (calibration,
//! full scale, roles, lost stretches) and its settings and operator verdicts applied.

use super::{RunFile, Variant};
use crate::error::{Error, Result};
use crate::pipeline::Analysis;
use crate::source::Source;
use crate::source::wav::WavSource;
use std::path::{Path, PathBuf};

/// A saved run analysed again, with what a new run file of it must carry over.
pub struct Reopened {
    pub analysis: Analysis,
    /// The recording's path.
    pub wav: PathBuf,
    pub variant: Variant,
    /// The drive stored with the run (also in the analysis' configuration).
    pub drive: Option<crate::drive::Drive>,
    /// How the recording holds its samples and the stretches lost before it, as the run
    /// recorded them (a new run file of the same recording says the same).
    pub encoding: super::recording::Encoding,
    pub gaps: Vec<(u64, u64)>,
}

/// Re-run a saved run (see `reopen`): the analysis, the recording's path, the variant and
/// the stored drive.
pub fn reanalyse(json: &Path) -> Result<(Analysis, PathBuf, Variant, Option<crate::drive::Drive>)> {
    let r = reopen(json)?;
    Ok((r.analysis, r.wav, r.variant, r.drive))
}

/// Re-run a saved run: same recording, same settings, same operator verdicts. The run
/// file is checked like command-line settings, its recording must lie in its folder and
/// match it (channels, rate, length), and the recording's own calibration and full scale
/// are taken from the run, so re-analysis reproduces the capture.
pub fn reopen(json: &Path) -> Result<Reopened> {
    let saved = RunFile::load(json)?;
    let shown = json.display();
    let wav = saved
        .wav_path(json)
        .ok_or_else(|| Error::new(format!("'{shown}' does not name a recording")))??;
    let mut src = WavSource::open(&wav)?;
    if let Some(n) = src.note() {
        eprintln!("{}", crate::run::validate::clean_text(&n, false));
    }
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
    let encoding = rec.map_or_else(
        || super::recording::Encoding::of_external(src.info()),
        |r| r.encoding,
    );
    let gaps = rec.map(|r| r.gaps.clone()).unwrap_or_default();
    let cfg = saved.analysis_config();
    let mut analysis = Analysis::new(&src.info().clone(), s.roles, cfg, true)?;
    analysis.set_disarmed(saved.disarmed.clone());
    let mut analysis = crate::pipeline::drain_into(&mut src, analysis)?;
    analysis.apply_verdicts(&saved.hits);
    let drive = saved.drive.map(|d| d.description);
    if let Some(d) = &drive {
        d.check()
            .map_err(|e| e.context(format!("the drive stored in '{}'", json.display())))?;
    }
    Ok(Reopened {
        analysis,
        wav,
        variant: saved.variant,
        drive,
        encoding,
        gaps,
    })
}

#[cfg(test)]
mod tests {
    use crate::pipeline::{AnalysisConfig, analyse_source};
    use crate::run::{RunFile, Variant};
    use crate::signal::RoleChoice;
    use crate::source::Source;
    use crate::source::simulator::{Simulator, presets::preset};
    use crate::spectra::{Basis, Estimator};

    /// Configuration -> analysis -> run-file setup -> configuration gives back every setting
    /// (the trigger channel given, as a run file always stores the one used).
    #[test]
    fn setup_and_configuration_round_trip() {
        let mut sim = Simulator::new(preset("tm9-arm-solid", 3).unwrap(), Some(4.0), true);
        let roles = RoleChoice::default().resolve(sim.info()).unwrap();
        let mut cfg = AnalysisConfig::default();
        cfg.trigger.channel = roles.force;
        cfg.trigger.record_s = 0.5;
        cfg.trigger.holdoff_s = 0.3;
        cfg.checks.min_snr_db = 15.0;
        cfg.spectra.pad = 4;
        cfg.spectra.windows.exponential_end = 0.2;
        cfg.modes.max_modes = 7;
        cfg.modes.band_hz = (40.0, 3000.0);
        cfg.estimator = Estimator::H2;
        cfg.basis = Some(Basis::Frf(Estimator::H2));
        let a = analyse_source(&mut sim, roles, cfg.clone(), false).unwrap();
        assert!(a.accepted() > 0, "the run has taps to describe");
        let variant = Variant {
            label: "round trip".into(),
            note: String::new(),
            mass_g: None,
        };
        let run = RunFile::from_analysis(&a, &a.result(), variant);
        assert_eq!(run.analysis_config(), cfg);
    }
}
