//! tapmodes: bench tap-testing of frames and parts, from samples to compared mode lists.
//!
//! Data flow: `source` -> `hits` -> `spectra` -> `modes` -> `run`, driven by `pipeline`.

pub mod cli; // command-line front end over the library
pub mod drive; // the motors' excitation bands and each mode's verdict against them
pub mod error; // errors as values: one sentence with context
pub mod hits; // trigger, pre-trigger ring, per-hit verdicts
pub mod modes; // peak picking, half-power damping, flags
pub mod parallel; // order-preserving parallel map on the machine's cores
pub mod pipeline; // the one pipeline every front end drives
pub mod plot; // pictures (SVG, PNG) and the HTML report of runs
pub mod rng; // seeded random numbers for the simulator
pub mod run; // run files (WAV, JSON, CSV), atomic writes, comparison
pub mod shapes; // mode shapes over several points: shared-pole fit, MAC
pub mod signal; // channels, roles, units and sample blocks
pub mod source; // WAV replay, simulator (later: serial, audio)
pub mod spectra; // windows, FFT, averaged spectra, H1/H2/coherence
pub mod strip; // E and G of a free strip (ASTM E1876), strip files and their comparison
pub mod tui; // the terminal app: model, update, view
