//! The `tapmodes` binary: parse arguments, run, and turn errors into one sentence and exit 1.

use clap::Parser;

fn main() {
    let cli = tapmodes::cli::Cli::parse();
    if let Err(e) = tapmodes::cli::run(cli) {
        eprintln!("tapmodes: {e}");
        std::process::exit(1);
    }
}
