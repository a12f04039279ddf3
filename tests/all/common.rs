//! Helpers shared by the integration tests: simulated recordings, WAV writers, scratch
//! folders and the built binary.
#![allow(dead_code)]

use tapmodes::source::Source;
use tapmodes::source::simulator::model::SimMode;
use tapmodes::source::simulator::presets::preset;
use tapmodes::source::simulator::{BenchPlan, Simulator};

/// All samples of a simulated run, per channel, in channel units, plus the plan.
pub fn simulate(plan: BenchPlan, seconds: f64) -> (Vec<Vec<f64>>, BenchPlan) {
    let mut sim = Simulator::new(plan.clone(), Some(seconds), true);
    let mut chans: Vec<Vec<f64>> = vec![Vec::new(); plan.sensors.len()];
    while let Some(b) = sim.next_block().unwrap() {
        for (c, x) in b.channels.into_iter().enumerate() {
            chans[c].extend(x);
        }
    }
    (chans, plan)
}

/// A preset with its modes replaced.
pub fn plan_with_modes(modes: &[(f64, f64, f64)], seed: u64) -> BenchPlan {
    let mut p = preset("tm9-arm-solid", seed).unwrap();
    p.modes = modes
        .iter()
        .map(|&(f, z, a)| SimMode {
            frequency_hz: f,
            damping_ratio: z,
            modal_constants: vec![a],
        })
        .collect();
    p
}

/// A fresh, empty scratch folder of this test process; `name` must be unique across the
/// test binary (prefix it with the test file's area, e.g. `tui-view-overlays`).
pub fn temp_dir(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("tapmodes-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Write channels as a WAV: `bits` 16/24/32 integer (values scaled by `gain` and rounded)
/// or 32-bit float (`float = true`).
pub fn write_wav(
    path: &std::path::Path,
    fs: u32,
    chans: &[Vec<f64>],
    bits: u16,
    float: bool,
    gain: f64,
) {
    let spec = hound::WavSpec {
        channels: chans.len() as u16,
        sample_rate: fs,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for k in 0..chans[0].len() {
        for c in chans {
            if float {
                w.write_sample((c[k] * gain) as f32).unwrap();
            } else {
                w.write_sample((c[k] * gain).round() as i32).unwrap();
            }
        }
    }
    w.finalize().unwrap();
}

/// Path of the built `tapmodes` binary.
pub fn bin_path() -> &'static str {
    env!("CARGO_BIN_EXE_tapmodes")
}

/// A command that runs the built `tapmodes` binary.
pub fn bin() -> std::process::Command {
    std::process::Command::new(bin_path())
}

/// Run the binary; returns (exit code, stdout, stderr).
pub fn tapmodes(args: &[&str]) -> (i32, String, String) {
    let out = bin().args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// The app, headless, on a simulated bench preset with taps on the simulator's schedule
/// (0.8 s, then every ~2.5 s): a `length` s stream of which the first `seconds` are read.
pub fn demo_app(
    preset_name: &str,
    length: f64,
    seconds: f64,
    dir: &std::path::Path,
) -> tapmodes::tui::App {
    let launch = tapmodes::tui::Launch::simulated(
        preset_name,
        1,
        Some(length),
        true,
        false,
        dir.to_path_buf(),
    )
    .unwrap();
    let mut app = tapmodes::tui::App::headless(launch).unwrap();
    app.pump_seconds(seconds);
    app
}
