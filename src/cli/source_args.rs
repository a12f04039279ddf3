//! Source options shared by `capture` and the terminal app, and opening the chosen source.

use super::args::ChannelArgs;
use crate::error::Result;
use crate::signal::{RoleChoice, Roles};
use crate::source::Source;
use crate::source::serial::SerialSource;
use crate::source::simulator::Simulator;
use crate::source::simulator::presets::preset;
use clap::Args;
use std::path::PathBuf;

#[derive(Debug, Clone, Args)]
pub struct SourceArgs {
    /// Serial port of an accelerometer streamer (protocol: firmware-notes/protocol.md).
    #[arg(long, value_name = "PATH", group = "src", help_heading = "Source")]
    pub serial: Option<String>,
    /// Baud rate for --serial (native USB ports ignore it).
    #[arg(
        long,
        default_value_t = 921_600,
        value_name = "N",
        value_parser = clap::value_parser!(u32).range(1..),
        requires = "serial",
        conflicts_with_all = ["audio", "replay", "demo"],
        help_heading = "Source"
    )]
    pub baud: u32,
    /// For --serial devices that print bare numbers and no header: the columns of each line,
    /// e.g. `t@us,force,accel_z`; a column marked @us or @ms is a timestamp (the rate is then
    /// measured and samples are placed by time). Fields may be separated by commas,
    /// semicolons, tabs or spaces.
    #[arg(
        long,
        value_name = "NAMES",
        requires = "serial",
        help_heading = "Source"
    )]
    pub columns: Option<String>,
    /// Sample rate of a headerless stream, Hz: needed without a timestamp column (then it is
    /// trusted as given); with one it sets the grid and the measured rate is reported.
    #[arg(long, value_name = "HZ", requires = "columns", help_heading = "Source")]
    pub rate: Option<f64>,
    /// Sound-card input (optionally its name; see `tapmodes devices`). Needs the audio feature.
    #[arg(long, value_name = "NAME", num_args = 0..=1, default_missing_value = "", group = "src", help_heading = "Source")]
    pub audio: Option<String>,
    /// Sample rate to ask of the sound card, Hz (with --audio).
    #[arg(
        long,
        default_value_t = 48_000,
        value_name = "HZ",
        value_parser = clap::value_parser!(u32).range(1..),
        requires = "audio",
        conflicts_with_all = ["serial", "replay", "demo"],
        help_heading = "Source"
    )]
    pub audio_rate: u32,
    /// Replay a WAV recording as if it were live.
    #[arg(long, value_name = "FILE.wav", group = "src", help_heading = "Source")]
    pub replay: Option<PathBuf>,
    /// The simulated bench (optionally a preset; see `tapmodes simulate --list`).
    #[arg(long, value_name = "PRESET", num_args = 0..=1, default_missing_value = "tm9-arm-solid", group = "src", help_heading = "Source")]
    pub demo: Option<String>,
    /// Seed of the simulated bench (not with another source).
    #[arg(
        long,
        default_value_t = 1,
        value_name = "N",
        conflicts_with_all = ["serial", "audio", "replay"],
        help_heading = "Source"
    )]
    pub seed: u64,
    /// Replay and simulate as fast as possible instead of in real time (not with a live
    /// source).
    #[arg(long, conflicts_with_all = ["serial", "audio"], help_heading = "Source")]
    pub fast: bool,
}

/// An opened source with the roles it will be analysed with.
pub struct Opened {
    pub source: Box<dyn Source>,
    pub roles: Roles,
    pub demo: bool,
}

impl SourceArgs {
    /// Open the chosen source (the simulated bench when none is chosen).
    pub fn open(&self, ch: &ChannelArgs, auto_taps: bool) -> Result<Opened> {
        let choice: RoleChoice = ch.role_choice();
        if let Some(path) = &self.serial {
            let mut src = match &self.columns {
                Some(spec) => {
                    let columns = crate::source::serial::headerless::Columns::parse(spec)?;
                    if let Some(r) = self.rate
                        && !(r.is_finite() && r > 0.0)
                    {
                        crate::fail!("--rate must be a positive number of Hz, not {r}");
                    }
                    SerialSource::open_headerless(path, self.baud, self.rate, &columns)?
                }
                None => SerialSource::open(path, self.baud)?,
            };
            apply_calibration(&mut src.info_mut().channels, ch, &choice)?;
            let roles = choice.resolve(src.info())?;
            return Ok(Opened {
                source: Box::new(src),
                roles,
                demo: false,
            });
        }
        if let Some(name) = &self.audio {
            return open_audio(name, self.audio_rate, ch, &choice);
        }
        if let Some(path) = &self.replay {
            let src = super::analyze::open_wav(path, ch, &choice)?;
            let roles = choice.resolve(src.info())?;
            let src = if self.fast { src } else { src.real_time() };
            return Ok(Opened {
                source: Box::new(src),
                roles,
                demo: false,
            });
        }
        let name = self.demo.clone().unwrap_or_else(|| "tm9-arm-solid".into());
        let plan = preset(&name, self.seed).ok_or_else(|| {
            crate::error::Error::new(format!(
                "there is no preset '{name}'; see `tapmodes simulate --list`"
            ))
        })?;
        let sim = Simulator::new(plan, None, auto_taps);
        let sim = if self.fast { sim } else { sim.real_time() };
        let roles = choice.resolve(sim.info())?;
        Ok(Opened {
            source: Box::new(sim),
            roles,
            demo: true,
        })
    }
}

/// Scales and units from the command line for a live source whose channels are known only
/// once it is open.
fn apply_calibration(
    channels: &mut [crate::signal::ChannelInfo],
    ch: &ChannelArgs,
    choice: &RoleChoice,
) -> Result<()> {
    let info = crate::signal::StreamInfo {
        source: String::new(),
        sample_rate: 1.0,
        channels: channels.to_vec(),
    };
    let roles = choice.resolve(&info)?;
    let mut set = |i: usize, unit: Option<&String>, scale: Option<f64>, default_unit: &str| {
        let c = &mut channels[i];
        if let Some(s) = scale {
            c.scale *= s;
            c.unit = unit.cloned().unwrap_or_else(|| default_unit.into());
        } else if let Some(u) = unit {
            c.unit = u.clone();
        }
    };
    if let Some(f) = roles.force {
        set(f, ch.force_unit.as_ref(), ch.force_scale, "N");
    }
    for r in std::iter::once(roles.response).chain(roles.base) {
        set(r, ch.response_unit.as_ref(), ch.response_scale, "g");
    }
    Ok(())
}

#[cfg(feature = "audio")]
fn open_audio(name: &str, rate: u32, ch: &ChannelArgs, choice: &RoleChoice) -> Result<Opened> {
    let mut src = crate::source::audio::AudioSource::open(name, rate)?;
    apply_calibration(&mut src.info_mut().channels, ch, choice)?;
    let roles = choice.resolve(src.info())?;
    Ok(Opened {
        source: Box::new(src),
        roles,
        demo: false,
    })
}

#[cfg(not(feature = "audio"))]
fn open_audio(_: &str, _: u32, _: &ChannelArgs, _: &RoleChoice) -> Result<Opened> {
    crate::fail!(
        "this build has no sound-card support; rebuild with `cargo build --release --features audio`"
    )
}
