//! `tapmodes tui` (and `tapmodes` alone): the terminal app on any source.

use super::args::{AnalysisArgs, ChannelArgs};
use super::source_args::SourceArgs;
use crate::error::Result;
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
}

pub fn run(a: &TuiArgs) -> Result<()> {
    let config = a.analysis.config()?;
    let drive = a.drive.drive()?;
    let opened = a.source.open(&a.channels, false)?;
    crate::run::validate::check_analysis(
        &config,
        opened.source.info(),
        &opened.roles,
        "the command line",
    )?;
    crate::tui::run(crate::tui::Launch {
        source: opened.source,
        roles: opened.roles,
        config,
        out_dir: a.out.clone(),
        variant: crate::run::validate::clean_text(&a.variant, false),
        auto_tap_s: a.auto_tap,
        demo: opened.demo,
        compare_with: a.compare.clone(),
        drive,
    })
}
