//! The point walk's fit, carried out by the app shell once every point is recorded: each
//! point's recording analysed again through the one pipeline (through its run file when
//! there is one, so the operator's verdicts count; else the bare WAV with the session's
//! channels and settings), the library's shared-pole fit (`shapes::plan_fit`, the steps of
//! `tapmodes shapes`), and the shape file written beside the plan under a free name.

use crate::error::Result;
use crate::pipeline::{Analysis, AnalysisConfig, analyse_source};
use crate::run::RunFile;
use crate::shapes::plan_fit;
use crate::shapes::points::{Point, ShapeFile};
use crate::signal::Roles;
use crate::source::Source;
use crate::source::wav::WavSource;
use std::path::{Path, PathBuf};

/// Everything the fit needs, taken from the model and the launch.
#[derive(Debug, Clone)]
pub struct FitJob {
    pub plan: PathBuf,
    pub points: Vec<Point>,
    pub label: String,
    /// The session's channel roles and settings, for recordings without a run file.
    pub roles: Roles,
    pub config: AnalysisConfig,
}

/// One point's recording through the pipeline.
fn open(job: &FitJob, wav: &Path) -> Result<Analysis> {
    let json = wav.with_extension("json");
    if RunFile::load(&json).is_ok() {
        return crate::run::reopen::reanalyse(&json).map(|r| r.0);
    }
    let mut src = WavSource::open(wav)?;
    let n = src.info().channels.len();
    let r = job.roles;
    let need = 1 + r
        .response
        .max(r.force.unwrap_or(0))
        .max(r.base.unwrap_or(0));
    if n < need {
        crate::fail!(
            "'{}' has {n} channel(s) but this session's channels need {need}",
            wav.display()
        );
    }
    crate::run::validate::check_analysis(&job.config, src.info(), &r, "the session")?;
    analyse_source(&mut src, r, job.config.clone(), false)
}

/// Fit the shapes and write the shape file; returns it and where it went.
pub fn run(job: &FitJob) -> Result<(ShapeFile, PathBuf)> {
    let file = plan_fit::fit_plan(&job.plan, &job.points, &job.label, &|wav| open(job, wav))?;
    let path = plan_fit::claim_shape_path(&job.plan)?;
    if let Err(e) = file.save(&path) {
        let _ = std::fs::remove_file(&path);
        return Err(e);
    }
    Ok((file, path))
}
