//! `tapmodes report`: one self-contained HTML page with the overlay plot, the comparison,
//! each run's setup, hits, modes and notes, and the warnings.

use super::plot::{LookArgs, check_picture_out, load, nothing_drawn};
use crate::error::Result;
use crate::plot::html::{ReportInput, report_html};
use crate::run::compare::render::render_table;
use crate::run::compare::{CompareOptions, compare_with};
use clap::Args;
use std::path::PathBuf;

/// The first run is the baseline of the comparison (as in `compare`, with its default
/// pairing and floors).
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// Run files (JSON); the first is the baseline.
    #[arg(required = true, value_name = "RUN.json")]
    pub runs: Vec<PathBuf>,
    /// The page to write (.html).
    #[arg(long, short, value_name = "FILE.html")]
    pub out: PathBuf,
    /// Title of the page [default: the run labels].
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    #[command(flatten)]
    pub look: LookArgs,
    /// Judge every run against this drive and shade its bands [default: the drive stored
    /// in the runs].
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
}

pub fn run(a: &ReportArgs) -> Result<()> {
    if !a
        .out
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("html") || e.eq_ignore_ascii_case("htm"))
    {
        crate::fail!("--out must end in .html (not '{}')", a.out.display());
    }
    let drive = a.drive.drive()?;
    let loaded = load(&a.runs, a.look.fit_only, drive.clone())?;
    check_picture_out(
        &a.out,
        &loaded.inputs,
        "an HTML page",
        &[b"<!DOCTYPE html", b"<!doctype html", b"<html"],
    )?;
    if let Some(e) = nothing_drawn(&loaded.figure) {
        return Err(e);
    }
    let mut warnings = loaded.figure.notes.clone();
    let (comparison, text) = if loaded.runs.len() >= 2 {
        let o = CompareOptions {
            drive,
            ..CompareOptions::default()
        };
        let c = compare_with(&loaded.runs, &o)?;
        for v in &c.variants {
            for w in &v.warnings {
                warnings.push(format!("{} against {}: {w}", v.label, c.baseline));
            }
        }
        let text = render_table(&c);
        (Some(c), Some(text))
    } else {
        warnings.push("one run: no comparison (give two runs or more)".into());
        (None, None)
    };
    for (_, r) in &loaded.runs {
        for n in &r.notes {
            warnings.push(format!("{}: {n}", r.variant.label));
        }
    }
    let rendered = crate::plot::render_svg(&loaded.figure, &a.look.options())?;
    let labels: Vec<&str> = loaded
        .runs
        .iter()
        .map(|r| r.1.variant.label.as_str())
        .collect();
    let title = a
        .title
        .as_ref()
        .map(|t| crate::run::validate::clean_text(t, false))
        .unwrap_or_else(|| format!("Tap test: {}", labels.join(", ")));
    let created = crate::run::now_rfc3339();
    let html = report_html(&ReportInput {
        title: &title,
        runs: &loaded.runs,
        svg: &rendered.svg,
        comparison: comparison.as_ref(),
        comparison_text: text.as_deref(),
        warnings: &warnings,
        created_utc: &created,
        safety: super::SAFETY,
    });
    crate::run::atomic::write_atomic(&a.out, html.as_bytes())?;
    println!(
        "wrote {} ({} run{}, {} warning{})",
        a.out.display(),
        loaded.runs.len(),
        if loaded.runs.len() == 1 { "" } else { "s" },
        warnings.len(),
        if warnings.len() == 1 { "" } else { "s" }
    );
    Ok(())
}
