//! `tapmodes compare`: mode shifts between variants, judged against a repeatability floor.

use crate::error::{Error, Result};
use crate::run::RunFile;
use crate::run::compare::predicted::read_predictions;
use crate::run::compare::render::{render_csv, render_table};
use crate::run::compare::{
    CompareOptions, DEFAULT_FLOOR_DAMPING_PCT, DEFAULT_FLOOR_FREQUENCY_PCT, DEFAULT_MAX_SHIFT,
    PairRule, compare_with,
};
use clap::Args;
use std::path::PathBuf;

/// Pairs modes in frequency order (two neighbours may cross only on residue-sign evidence),
/// says how sure each pair is, and calls a change real only beyond both the hit-to-hit
/// spread and a repeatability floor.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Mode lists (run JSON files), at least two; the first is the baseline. Options may
    /// stand between them.
    #[arg(num_args = 1.., value_name = "RUN.json")]
    pub runs: Vec<PathBuf>,
    /// Largest frequency shift for two modes to be paired, in percent.
    #[arg(long, alias = "tolerance", default_value_t = 100.0 * DEFAULT_MAX_SHIFT, value_name = "PCT")]
    pub max_shift: f64,
    /// Repeatability floor of frequencies, percent: smaller changes are never called real
    /// [default: 1.0, common practice; measure yours with --repeats].
    #[arg(long, value_name = "PCT")]
    pub floor: Option<f64>,
    /// Repeatability floor of damping ratios, percent of the baseline's value [default: 25].
    #[arg(long, value_name = "PCT")]
    pub floor_damping: Option<f64>,
    /// The runs are repeats of one part (remounted, re-clamped): report the floor they imply.
    #[arg(long)]
    pub repeats: bool,
    /// Pair baseline mode A with variant mode B (numbers from 1 in frequency order, as in
    /// the table); with several variants prefix the run's position: 3:A=B. Repeatable.
    #[arg(long, value_name = "[RUN:]A=B", value_parser = parse_rule)]
    pub pin: Vec<PairRule>,
    /// Never pair baseline mode A with variant mode B (same form as --pin). Repeatable.
    #[arg(long, value_name = "[RUN:]A=B", value_parser = parse_rule)]
    pub forbid: Vec<PairRule>,
    /// Band of interest for comparing mount isolation (the motors' excitation band), HZ or
    /// LO:HI [default: the band both run files stored with analyze --isolation].
    #[arg(long, value_name = "HZ|LO:HI", value_parser = super::args::parse_freq_or_band)]
    pub isolation: Option<(f64, f64)>,
    /// Predicted modes to check each run against: CSV with frequency_hz and optional label
    /// and damping_ratio (or damping_pct, not both) columns; one row per predicted mode.
    #[arg(long, value_name = "FILE.csv")]
    pub predicted: Option<PathBuf>,
    /// Print the comparison as JSON instead of a table.
    #[arg(long, conflicts_with = "csv", help_heading = "Outputs")]
    pub json: bool,
    /// Print the comparison as CSV (one row per pair, unpaired mode, mount and prediction).
    #[arg(long, help_heading = "Outputs")]
    pub csv: bool,
    /// Judge every run against this drive [default: the drive stored in the runs].
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
}

/// `A=B` or `RUN:A=B` with positive integers.
pub fn parse_rule(s: &str) -> std::result::Result<PairRule, String> {
    let bad = || {
        format!(
            "'{s}' is not a pairing; write A=B (baseline mode A, variant mode B, from 1) or RUN:A=B"
        )
    };
    let (run, pair) = match s.split_once(':') {
        Some((r, p)) => (Some(r), p),
        None => (None, s),
    };
    let (a, b) = pair.split_once('=').ok_or_else(bad)?;
    let num = |t: &str| t.trim().parse::<usize>().ok().filter(|n| *n >= 1);
    Ok(PairRule {
        run: match run {
            Some(r) => Some(num(r).ok_or_else(bad)?),
            None => None,
        },
        baseline_mode: num(a).ok_or_else(bad)?,
        variant_mode: num(b).ok_or_else(bad)?,
    })
}

fn percent(v: f64, what: &str, max: f64) -> Result<f64> {
    if v.is_finite() && v >= 0.0 && v <= max {
        Ok(v)
    } else {
        Err(Error::new(format!(
            "{what} must be a percentage from 0 to {max}, not {v}"
        )))
    }
}

pub fn run(a: &CompareArgs) -> Result<()> {
    if a.runs.len() < 2 {
        crate::fail!(
            "compare needs at least two run files, a baseline and a variant, but {} given",
            match a.runs.len() {
                0 => "none was".to_string(),
                n => format!("only {n} was"),
            }
        );
    }
    let runs = a
        .runs
        .iter()
        .map(|p| Ok((p.display().to_string(), RunFile::load(p)?)))
        .collect::<Result<Vec<_>>>()?;
    let max_shift = percent(a.max_shift, "--max-shift", 90.0)?;
    if max_shift == 0.0 {
        crate::fail!("--max-shift must be above 0 %");
    }
    let predicted = match &a.predicted {
        Some(p) => Some((p.display().to_string(), read_predictions(p)?)),
        None => None,
    };
    let o = CompareOptions {
        max_shift: max_shift / 100.0,
        floor_frequency_pct: percent(
            a.floor.unwrap_or(DEFAULT_FLOOR_FREQUENCY_PCT),
            "--floor",
            50.0,
        )?,
        floor_damping_pct: percent(
            a.floor_damping.unwrap_or(DEFAULT_FLOOR_DAMPING_PCT),
            "--floor-damping",
            500.0,
        )?,
        floor_from_user: a.floor.is_some() || a.floor_damping.is_some(),
        pins: a.pin.clone(),
        forbids: a.forbid.clone(),
        repeats: a.repeats,
        isolation_band: a.isolation,
        predicted,
        drive: a.drive.drive()?,
    };
    let c = compare_with(&runs, &o)?;
    if a.json {
        let text = serde_json::to_string_pretty(&c)
            .map_err(|e| Error::new(format!("cannot encode the comparison: {e}")))?;
        println!("{text}");
    } else if a.csv {
        print!("{}", render_csv(&c)?);
    } else {
        print!("{}", render_table(&c));
    }
    Ok(())
}
