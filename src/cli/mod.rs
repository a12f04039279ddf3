//! Command-line front end: argument definitions and dispatch to the library.

pub mod amend;
pub mod analyze;
pub mod args;
pub mod bench;
pub mod capture;
pub mod compare;
pub mod drive_args;
pub mod ports;
pub mod progress;
pub mod report;
pub mod simulate;
pub mod source_args;
pub mod tui;

use crate::error::Result;
use clap::{Parser, Subcommand};

const SAFETY: &str = "Safety: take the propellers off, disconnect the flight battery and secure the \
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
    pub command: Option<Command>,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// The terminal app (the default): live bench view on any source.
    Tui(Box<tui::TuiArgs>),
    /// Make a recording on the simulated bench (WAV plus the true modes as JSON).
    Simulate(simulate::SimulateArgs),
    /// Find hits and modes in a WAV (or re-analyse a run file) and write the mode list.
    Analyze(Box<analyze::AnalyzeArgs>),
    /// Compare the mode lists of variants against the first one.
    Compare(compare::CompareArgs),
    /// Change a run file's label, note or mass (grams) after the fact.
    Amend(amend::AmendArgs),
    /// Capture hits live (serial, sound card, replay or the simulated bench) without the app.
    Capture(Box<capture::CaptureArgs>),
    /// List serial ports.
    Ports,
    /// List sound-card inputs (needs the audio feature).
    Devices,
    /// Benchmarks: speed and memory, decoder throughput, accuracy, app latency.
    Bench(bench::BenchArgs),
}

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Some(Command::Tui(a)) => tui::run(&a),
        Some(Command::Simulate(a)) => simulate::run(&a),
        Some(Command::Analyze(a)) => analyze::run(&a),
        Some(Command::Compare(a)) => compare::run(&a),
        Some(Command::Capture(a)) => capture::run(&a),
        Some(Command::Amend(a)) => amend::run(&a),
        Some(Command::Ports) => ports::ports(),
        Some(Command::Devices) => ports::devices(),
        Some(Command::Bench(a)) => bench::run(&a),
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
