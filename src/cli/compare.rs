//! `tapmodes compare`: mode shifts between variants.

use crate::error::Result;
use crate::run::RunFile;
use crate::run::compare::{compare, render_table};
use clap::Args;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Mode lists (run JSON files); the first is the baseline.
    #[arg(required = true, num_args = 2.., value_name = "RUN.json")]
    pub runs: Vec<PathBuf>,
    /// Largest frequency distance for two modes to count as the same mode, in percent.
    #[arg(long, default_value_t = 20.0, value_name = "PCT")]
    pub tolerance: f64,
    /// Print the comparison as JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &CompareArgs) -> Result<()> {
    let runs = a
        .runs
        .iter()
        .map(|p| Ok((p.display().to_string(), RunFile::load(p)?)))
        .collect::<Result<Vec<_>>>()?;
    let c = compare(&runs, a.tolerance / 100.0);
    if a.json {
        let text = serde_json::to_string_pretty(&c)
            .map_err(|e| crate::error::Error::new(format!("cannot encode the comparison: {e}")))?;
        println!("{text}");
    } else {
        print!("{}", render_table(&c));
    }
    Ok(())
}
