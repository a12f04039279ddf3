//! Command-line front end: argument definitions and dispatch to the library.

pub(crate) mod amend;
pub(crate) mod analyze;
pub(crate) mod args;
pub(crate) mod capture;
pub(crate) mod compare;
pub(crate) mod drive_args;
pub(crate) mod html_report;
pub mod plot;
pub(crate) mod ports;
pub(crate) mod progress;
pub(crate) mod report;
pub mod shapes;
pub(crate) mod simulate;
pub(crate) mod source_args;
pub(crate) mod strip;
pub(crate) mod tui;

use crate::error::Result;
use clap::{Parser, Subcommand};

pub(crate) const SAFETY: &str = "Safety: take the propellers off, disconnect the flight battery and secure the \
craft before tapping it; tap gently. This tool's findings do not replace the manufacturer's \
guidance, local rules or a careful first hover; the motor-band verdicts are estimates from \
nameplate values, guidance only. No motor is run.";

/// Bench tap-testing for multirotor frames and parts: tap a part, get its averaged
/// frequency response, coherence, modes and damping, and compare variants.
///
/// Run with no command to open the terminal app on the simulated bench.
#[derive(Debug, Parser)]
#[command(name = "tapmodes", version, after_help = SAFETY)]
pub struct Cli {
    #[command(subcommand)]
    pub(crate) command: Option<Command>,
}

#[derive(Debug, Subcommand)]
pub(crate) enum Command {
    /// The terminal app (the default): live bench view on any source.
    #[command(after_help = SAFETY)]
    Tui(Box<tui::TuiArgs>),
    /// Make a recording on the simulated bench (WAV plus the true modes as JSON).
    Simulate(simulate::SimulateArgs),
    /// Find hits and modes in a WAV (or re-analyse a run file) and write the mode list.
    #[command(after_help = SAFETY)]
    Analyze(Box<analyze::AnalyzeArgs>),
    /// Compare the mode lists of variants against the first one.
    Compare(compare::CompareArgs),
    /// Write a picture (SVG or PNG) of runs: FRF magnitude, phase, coherence, modes, bands.
    Plot(Box<plot::PlotArgs>),
    /// Write one self-contained HTML page: plot, comparison, setups, hits, notes, warnings.
    Report(Box<html_report::ReportArgs>),
    /// Change a run file's label, note or mass (grams) after the fact.
    Amend(amend::AmendArgs),
    /// Capture hits live (serial, sound card, replay or the simulated bench) without the app.
    #[command(after_help = SAFETY)]
    Capture(Box<capture::CaptureArgs>),
    /// List serial ports.
    Ports,
    /// List sound-card inputs (needs the audio feature).
    Devices,
    /// Young's and shear modulus of a free strip from its first flexural and torsional modes.
    Strip(Box<strip::StripArgs>),
    /// Compare strip files (E and G side by side, the first as baseline).
    StripCompare(strip::StripCompareArgs),
    /// Make a recording of taps on a simulated free-free strip of known E and G.
    StripDemo(strip::StripDemoArgs),
    /// Mode shapes from a plan of points (one recording per point), fitted with shared poles.
    Shapes(Box<shapes::ShapesArgs>),
    /// Pair the modes of two shape files by frequency order and shape (MAC).
    ShapesCompare(shapes::ShapesCompareArgs),
    /// Write a multi-point test of the simulated TM9 frame (plan and one recording per point).
    ShapesDemo(shapes::ShapesDemoArgs),
}

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Some(Command::Tui(a)) => tui::run(&a),
        Some(Command::Simulate(a)) => simulate::run(&a),
        Some(Command::Analyze(a)) => analyze::run(&a),
        Some(Command::Compare(a)) => compare::run(&a),
        Some(Command::Capture(a)) => capture::run(&a),
        Some(Command::Amend(a)) => amend::run(&a),
        Some(Command::Plot(a)) => plot::run(&a),
        Some(Command::Report(a)) => html_report::run(&a),
        Some(Command::Ports) => ports::ports(),
        Some(Command::Devices) => ports::devices(),
        Some(Command::Strip(a)) => strip::run(&a),
        Some(Command::StripCompare(a)) => strip::compare_run(&a),
        Some(Command::StripDemo(a)) => strip::demo_run(&a),
        Some(Command::Shapes(a)) => shapes::run(&a),
        Some(Command::ShapesCompare(a)) => shapes::compare_run(&a),
        Some(Command::ShapesDemo(a)) => shapes::demo_run(&a),
        None => {
            // No command: the app on the simulated bench, with every default.
            #[derive(Parser)]
            struct Defaults {
                #[command(flatten)]
                tui: tui::TuiArgs,
            }
            tui::run(&Defaults::parse_from(["tapmodes"]).tui)
        }
    }
}
