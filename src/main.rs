//! The `tapmodes` binary: parse arguments, run, and turn errors into one sentence and exit 1.
//!
//! The library's commands (`tapmodes::cli`) plus `bench`, which lives here, outside the
//! library: benchmarks are not part of what the library ships.

mod bench;

use clap::{Args, CommandFactory, FromArgMatches};

/// Name and help line of the benchmark command.
const BENCH: (&str, &str) = (
    "bench",
    "Benchmarks: speed and memory, decoder throughput, accuracy, app latency",
);

/// The library's command line with `bench` added.
fn command() -> clap::Command {
    tapmodes::cli::Cli::command().subcommand(bench::BenchArgs::augment_args(
        clap::Command::new(BENCH.0).about(BENCH.1),
    ))
}

fn run() -> tapmodes::error::Result<()> {
    let matches = command().get_matches();
    if let Some((_, sub)) = matches.subcommand().filter(|(n, _)| *n == BENCH.0) {
        let args = bench::BenchArgs::from_arg_matches(sub).unwrap_or_else(|e| e.exit());
        return bench::run(&args);
    }
    let cli = tapmodes::cli::Cli::from_arg_matches(&matches).unwrap_or_else(|e| e.exit());
    tapmodes::cli::run(cli)
}

fn main() {
    // Behave like other Unix tools when the reader of our output goes away (`| head`):
    // end quietly instead of failing on a broken pipe.
    #[cfg(unix)]
    // SAFETY: restoring the default action of one signal before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    if let Err(e) = run() {
        // Stderr may be gone (a hung-up terminal): exit 1 all the same, without a panic.
        let _ = std::io::Write::write_fmt(&mut std::io::stderr(), format_args!("tapmodes: {e}\n"));
        std::process::exit(1);
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn clap_accepts_the_whole_command_line() {
        super::command().debug_assert();
    }
}
