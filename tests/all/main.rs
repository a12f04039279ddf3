//! Every integration test in one binary: the crate is linked once instead of once per
//! file. One module per former test file; `common` and `hostile` are the shared helpers.
//! Run one part with a filter, e.g. `cargo test --test all tui_update::`.

mod common;
mod hostile;

mod analysis_checks;
mod cli_contract;
mod compare_cli;
mod compare_pairing;
mod drive_bands;
mod drive_view;
mod fit_analytic;
mod fit_ringdown;
mod fit_softmount;
mod fit_uncertainty;
mod hostile_fuzz;
mod hostile_kill;
mod hostile_outputs;
mod hostile_runs;
mod hostile_serial;
mod hostile_wavs;
mod independent_recordings;
mod plot_commands;
mod plot_pictures;
mod serial_pty;
mod shapes;
mod strip;
mod tui_screens;
mod tui_tasks;
mod tui_tmux;
mod tui_update;
mod tui_view;
