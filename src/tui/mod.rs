//! The terminal app: model / update / view over the shared pipeline.

use crate::error::Result;
use crate::pipeline::AnalysisConfig;
use crate::signal::Roles;
use crate::source::Source;
use std::path::PathBuf;

/// Everything the app needs to start.
pub struct Launch {
    pub source: Box<dyn Source>,
    pub roles: Roles,
    pub config: AnalysisConfig,
    /// Folder the run files are saved in.
    pub out_dir: PathBuf,
    pub variant: String,
    /// Demo only: seconds between automatic taps (None = taps only on key).
    pub auto_tap_s: Option<f64>,
    /// True when the source is the simulated bench.
    pub demo: bool,
    /// Saved runs to load for overlay and comparison at start.
    pub compare_with: Vec<PathBuf>,
}

pub fn run(_launch: Launch) -> Result<()> {
    crate::fail!("the terminal app is still being built")
}
