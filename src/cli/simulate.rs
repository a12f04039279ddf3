//! `tapmodes simulate`: a recording from the simulated bench, with the truth beside it.

use crate::error::{Error, Result};
use crate::run::atomic::write_atomic;
use crate::run::recording::write_counts_wav;
use crate::signal::Role;
use crate::source::Source;
use crate::source::simulator::presets::{PRESETS, preset};
use crate::source::simulator::{BenchPlan, Simulator, Tip};
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// Bench preset (see --list).
    #[arg(long, default_value = "tm9-arm-solid", value_name = "NAME")]
    pub preset: String,
    /// List the presets and exit.
    #[arg(long)]
    pub list: bool,
    /// Number of taps to record.
    #[arg(long, default_value_t = 8, value_name = "N")]
    pub taps: usize,
    /// Seed of the random taps and noise (same seed, same recording).
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub seed: u64,
    /// Output WAV; the truth goes beside it as NAME.truth.json.
    #[arg(long, short, default_value = "simulated.wav", value_name = "FILE.wav")]
    pub out: PathBuf,
    /// Hammer tip (harder tip, shorter pulse, wider band).
    #[arg(long, value_enum)]
    pub tip: Option<Tip>,
    /// Nominal peak tap force in N.
    #[arg(long, value_name = "N", value_parser = super::args::parse_positive)]
    pub force: Option<f64>,
    /// Multiply every sensor's noise by this factor.
    #[arg(long, default_value_t = 1.0, value_name = "X", value_parser = super::args::parse_non_negative)]
    pub noise: f64,
    /// Chance (0..1) that a tap bounces into a double hit.
    #[arg(long, value_name = "P", value_parser = super::args::parse_probability)]
    pub double_hits: Option<f64>,
    /// Add mains hum at this frequency (Hz) on the response channels.
    #[arg(long, value_name = "HZ", value_parser = super::args::parse_positive)]
    pub hum: Option<f64>,
    /// Drop the force channel (a response-only test).
    #[arg(long)]
    pub no_force: bool,
}

/// Apply the command-line tweaks to a preset.
pub fn plan_from(a: &SimulateArgs) -> Result<BenchPlan> {
    let mut p = preset(&a.preset, a.seed).ok_or_else(|| {
        let names: Vec<&str> = PRESETS.iter().map(|p| p.0).collect();
        Error::new(format!(
            "there is no preset '{}'; choose one of: {}",
            a.preset,
            names.join(", ")
        ))
    })?;
    if let Some(t) = a.tip {
        p.hammer.tip = t;
    }
    if let Some(f) = a.force {
        p.hammer.peak_n = f;
    }
    if let Some(d) = a.double_hits {
        p.hammer.double_hit_chance = d;
    }
    if let Some(h) = a.hum {
        p.hum = Some(crate::source::simulator::HumPlan {
            frequency_hz: h,
            amplitude: 0.004,
        });
    }
    for s in &mut p.sensors {
        s.noise_rms *= a.noise;
    }
    if a.no_force {
        p.sensors.retain(|s| s.role != Role::Force);
    }
    Ok(p)
}

pub fn run(a: &SimulateArgs) -> Result<()> {
    if a.list {
        for (name, what) in PRESETS {
            println!("{name:<16} {what}");
        }
        return Ok(());
    }
    let plan = plan_from(a)?;
    let seconds = plan.hammer.first_s + plan.hammer.gap_s * a.taps as f64 + 0.5;
    let (truth, counts) = record(plan, seconds)?;
    let bits = truth
        .plan
        .sensors
        .iter()
        .map(|s| s.bits)
        .max()
        .unwrap_or(16) as u16;
    write_counts_wav(&a.out, truth.plan.sample_rate, bits.max(16), &counts)?;
    let truth_path = truth_path(&a.out);
    let text = serde_json::to_string_pretty(&truth)
        .map_err(|e| Error::new(format!("cannot encode the truth: {e}")))?;
    write_atomic(&truth_path, format!("{text}\n").as_bytes())?;
    println!(
        "wrote {} ({:.1} s, {} taps, {} channels at {} Hz) and {}",
        a.out.display(),
        seconds,
        truth.impacts.len(),
        counts.len(),
        truth.plan.sample_rate,
        truth_path.display()
    );
    println!("true modes:");
    for m in &truth.plan.modes {
        println!(
            "  {:>8.2} Hz  damping {:.2} %",
            m.frequency_hz,
            100.0 * m.damping_ratio
        );
    }
    println!(
        "analyse with: tapmodes analyze {}{}",
        a.out.display(),
        analyze_hint(&truth.plan)
    );
    Ok(())
}

/// Channel options `analyze` needs for this plan (beyond the defaults) and its calibration.
pub fn analyze_hint(p: &BenchPlan) -> String {
    let mut s = String::new();
    let pos = |r: Role| p.sensors.iter().position(|x| x.role == r);
    match pos(Role::Force) {
        Some(f) => s += &format!(" --force-scale {} --force-unit N", p.sensors[f].lsb()),
        None => s += " --no-force",
    }
    if let Some(r) = pos(Role::Response) {
        if r != 1 || pos(Role::Force).is_none() {
            s += &format!(" --response-channel {r}");
        }
        s += &format!(
            " --response-scale {} --response-unit {}",
            p.sensors[r].lsb(),
            p.sensors[r].unit
        );
    }
    if let Some(b) = pos(Role::Base) {
        s += &format!(" --base-channel {b}");
    }
    s
}

/// Run the simulator to the end; returns the truth and the converter codes per channel.
pub fn record(
    plan: BenchPlan,
    seconds: f64,
) -> Result<(crate::source::simulator::Truth, Vec<Vec<i32>>)> {
    let lsb: Vec<f64> = plan.sensors.iter().map(|s| s.lsb()).collect();
    let mut sim = Simulator::new(plan, Some(seconds), true);
    let mut counts = vec![Vec::new(); lsb.len()];
    while let Some(b) = sim.next_block()? {
        for (c, ch) in b.channels.iter().enumerate() {
            counts[c].extend(ch.iter().map(|v| (v / lsb[c]).round() as i32));
        }
    }
    Ok((sim.truth(), counts))
}

pub fn truth_path(wav: &Path) -> PathBuf {
    let stem = wav
        .file_stem()
        .map_or("simulated".into(), |s| s.to_string_lossy().into_owned());
    wav.with_file_name(format!("{stem}.truth.json"))
}
