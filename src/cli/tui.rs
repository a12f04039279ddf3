//! `tapmodes tui` (and `tapmodes` alone): the terminal app on any source.

use super::args::{AnalysisArgs, ChannelArgs};
use super::source_args::SourceArgs;
use crate::error::Result;
use crate::strip::session::StripSetup;
use crate::tui::task::{Task, Walk};
use clap::Args;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct TuiArgs {
    #[command(flatten)]
    pub source: SourceArgs,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
    /// Folder the run files are saved in (created if missing).
    #[arg(
        long,
        default_value = "runs",
        value_name = "DIR",
        help_heading = "Outputs"
    )]
    pub out: PathBuf,
    /// Variant label to start with (names the saved files).
    #[arg(
        long,
        default_value = "variant",
        value_name = "LABEL",
        help_heading = "Outputs"
    )]
    pub variant: String,
    /// Simulated bench only: fire a tap every SECONDS (toggle in the app).
    #[arg(long, value_name = "SECONDS", help_heading = "Source", value_parser = super::args::parse_positive)]
    pub auto_tap: Option<f64>,
    /// Saved runs to overlay and compare with from the start.
    #[arg(long, value_name = "RUN.json", help_heading = "Outputs")]
    pub compare: Vec<PathBuf>,
    /// Strip test: the free strip's length, width and thickness in mm; the app shows where
    /// to tap, then E and G with their uncertainties, and saves NAME.strip.json too.
    #[arg(
        long,
        value_name = "L:W:T",
        help_heading = "Tasks",
        requires = "strip_g",
        conflicts_with = "plan"
    )]
    pub strip_mm: Option<String>,
    /// Strip test: the strip's mass in g.
    #[arg(long, value_name = "G", help_heading = "Tasks", requires = "strip_mm")]
    pub strip_g: Option<f64>,
    /// Point walk: tap the plan's points one after the other (`name | direction |
    /// recording.wav` a line); each point's recording is written where the plan says
    /// (never over an existing file), then the shapes over all points.
    #[arg(
        long,
        value_name = "PLAN.txt",
        help_heading = "Tasks",
        conflicts_with_all = ["out", "variant"]
    )]
    pub plan: Option<PathBuf>,
}

/// The task from the options, checked before the terminal is taken over.
fn task(a: &TuiArgs) -> Result<Task> {
    if let Some(plan) = &a.plan {
        return Ok(Task::Walk(Walk::load(plan)?));
    }
    if let (Some(mm), Some(g)) = (&a.strip_mm, a.strip_g) {
        let v: Vec<f64> = mm
            .split(':')
            .map(|x| x.trim().parse::<f64>())
            .collect::<std::result::Result<_, _>>()
            .ok()
            .filter(|v: &Vec<f64>| v.len() == 3)
            .ok_or_else(|| {
                crate::error::Error::new(format!(
                    "--strip-mm must be length:width:thickness in mm, like 180:20:2 (got '{mm}')"
                ))
            })?;
        return Ok(Task::Strip(StripSetup::from_mm_g(v[0], v[1], v[2], g)?));
    }
    Ok(Task::Free)
}

pub fn run(a: &TuiArgs) -> Result<()> {
    let task = task(a)?;
    let config = a.analysis.config()?;
    let drive = a.drive.drive()?;
    let opened = a.source.open(&a.channels, false)?;
    crate::run::validate::check_analysis(
        &config,
        opened.source.info(),
        &opened.roles,
        "the command line",
    )?;
    crate::tui::run_with(
        crate::tui::Launch {
            source: opened.source,
            roles: opened.roles,
            config,
            out_dir: a.out.clone(),
            variant: crate::run::validate::clean_text(&a.variant, false),
            auto_tap_s: a.auto_tap,
            demo: opened.demo,
            compare_with: a.compare.clone(),
            drive,
        },
        task,
    )
}
