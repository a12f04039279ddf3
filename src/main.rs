//! The `tapmodes` binary: parse arguments, run, and turn errors into one sentence and exit 1.

use clap::Parser;

fn main() {
    // Behave like other Unix tools when the reader of our output goes away (`| head`):
    // end quietly instead of failing on a broken pipe.
    #[cfg(unix)]
    // SAFETY: restoring the default action of one signal before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let cli = tapmodes::cli::Cli::parse();
    if let Err(e) = tapmodes::cli::run(cli) {
        eprintln!("tapmodes: {e}");
        std::process::exit(1);
    }
}
