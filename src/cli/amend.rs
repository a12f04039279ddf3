//! `tapmodes amend`: change a run file's variant details (label, note, mass) after the fact.

use super::args::parse_mass;
use crate::error::Result;
use crate::run::RunFile;
use clap::Args;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct AmendArgs {
    /// The run file (JSON) to change in place.
    #[arg(value_name = "RUN.json")]
    pub run: PathBuf,
    /// Mass of the part as tested, in grams.
    #[arg(long, value_name = "GRAMS", value_parser = parse_mass, conflicts_with = "no_mass")]
    pub mass: Option<f64>,
    /// Remove a stored mass.
    #[arg(long)]
    pub no_mass: bool,
    /// New variant label.
    #[arg(long, value_name = "LABEL")]
    pub label: Option<String>,
    /// New free-text note.
    #[arg(long, value_name = "TEXT")]
    pub note: Option<String>,
}

pub fn run(a: &AmendArgs) -> Result<()> {
    if a.mass.is_none() && !a.no_mass && a.label.is_none() && a.note.is_none() {
        crate::fail!("nothing to change: give --mass, --no-mass, --label or --note");
    }
    let mut run = RunFile::load(&a.run)?;
    let v = &mut run.variant;
    if let Some(m) = a.mass {
        v.mass_g = Some(m);
    }
    if a.no_mass {
        v.mass_g = None;
    }
    if let Some(l) = &a.label {
        v.label = l.clone();
    }
    if let Some(n) = &a.note {
        v.note = n.clone();
    }
    run.save(&a.run)?;
    println!(
        "{}: variant '{}', mass {}, note '{}'",
        a.run.display(),
        run.variant.label,
        run.variant
            .mass_g
            .map_or("not given".to_string(), |m| format!("{m} g")),
        run.variant.note
    );
    Ok(())
}
