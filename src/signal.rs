//! The shared vocabulary of the pipeline: channels, their roles and units, and sample blocks.

use serde::{Deserialize, Serialize};

/// What a channel measures in a tap test.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// Hammer force (the FRF's input).
    Force,
    /// Response of the part under test (the FRF's output).
    Response,
    /// Motion of the base a soft-mounted part sits on (transmissibility input).
    Base,
    /// Recorded but not analysed.
    Unused,
}

impl Role {
    pub fn label(self) -> &'static str {
        match self {
            Role::Force => "force",
            Role::Response => "response",
            Role::Base => "base",
            Role::Unused => "unused",
        }
    }
}

/// What a response sensor measures: it decides how a spectrum is weighted before modes
/// are read from it (peaks are read on mobility, velocity per force, where an SDOF's
/// half-power relation is exact; see `modes::ModeConfig`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, clap::ValueEnum)]
#[serde(rename_all = "snake_case")]
pub enum SensorKind {
    /// Accelerometer (MEMS or piezo-electric): divided by frequency.
    Accelerometer,
    /// Velocity pickup or laser vibrometer: read as is.
    Velocity,
    /// Displacement probe: multiplied by frequency.
    Displacement,
    /// Piezo contact disc (strain- and velocity-like, AC-coupled): read as is; the
    /// parametric fit of a response spectrum models the weighting locally.
    Piezo,
    /// Microphone near the part (pressure): read as is.
    Microphone,
}

impl SensorKind {
    /// Power of frequency the magnitude is multiplied by to read it on mobility.
    pub fn mobility_power(self) -> i32 {
        match self {
            SensorKind::Accelerometer => -1,
            SensorKind::Displacement => 1,
            SensorKind::Velocity | SensorKind::Piezo | SensorKind::Microphone => 0,
        }
    }
}

/// One channel of a stream. Samples reaching the pipeline are already in `unit`
/// (raw value x `scale`); `full_scale` is the clipping level in the same unit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelInfo {
    pub name: String,
    pub role: Role,
    /// Physical unit after scaling: "N", "g", "m/s^2", or "counts" when uncalibrated.
    pub unit: String,
    /// Unit per raw count (1.0 when uncalibrated).
    pub scale: f64,
    /// Largest magnitude the converter can represent, in `unit` (`None` if unknown).
    pub full_scale: Option<f64>,
}

/// What a source produces: rate and channel layout, fixed for the life of the stream.
#[derive(Debug, Clone, PartialEq)]
pub struct StreamInfo {
    /// Human-readable description of the source (e.g. "wav bench.wav", "serial /dev/ttyACM0").
    pub source: String,
    pub sample_rate: f64,
    pub channels: Vec<ChannelInfo>,
}

impl StreamInfo {
    pub fn channel_with_role(&self, role: Role) -> Option<usize> {
        self.channels.iter().position(|c| c.role == role)
    }
}

/// A run of consecutive samples, one vector per channel, all the same length.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Block {
    /// Index of the first sample of this block since the stream began.
    pub start: u64,
    pub channels: Vec<Vec<f64>>,
}

impl Block {
    pub fn len(&self) -> usize {
        self.channels.first().map_or(0, Vec::len)
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Which channel plays which part in the analysis, resolved from the source and user options.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Roles {
    /// Hammer force channel; `None` for a response-only test.
    pub force: Option<usize>,
    /// The response channel the modes are read from.
    pub response: usize,
    /// Base channel for transmissibility, if any.
    pub base: Option<usize>,
}

/// The user's say on channel roles; unset fields fall back to the source, then to defaults.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RoleChoice {
    pub force: Option<usize>,
    pub response: Option<usize>,
    pub base: Option<usize>,
    pub no_force: bool,
}

impl RoleChoice {
    /// Resolve roles for a stream: explicit choices first, then the roles the source
    /// declared, then the defaults (channel 0 force and channel 1 response; mono means
    /// response only).
    pub fn resolve(&self, info: &StreamInfo) -> crate::error::Result<Roles> {
        let n = info.channels.len();
        if n == 0 {
            crate::fail!("the stream has no channels");
        }
        let check = |what: &str, i: usize| -> crate::error::Result<usize> {
            if i >= n {
                crate::fail!(
                    "the {what} channel {i} does not exist (the input has {n} channel{}, numbered from 0)",
                    if n == 1 { "" } else { "s" }
                );
            }
            Ok(i)
        };
        let declared_force = info.channel_with_role(Role::Force);
        let declared_resp = info.channel_with_role(Role::Response);
        let declared_base = info.channel_with_role(Role::Base);
        let force = if self.no_force {
            None
        } else if let Some(f) = self.force {
            Some(check("force", f)?)
        } else if declared_force.is_some() || declared_resp.is_some() {
            declared_force
        } else if n >= 2 {
            Some(0)
        } else {
            None
        };
        let response = match self.response {
            Some(r) => check("response", r)?,
            None => match declared_resp {
                Some(r) => r,
                None => match force {
                    Some(0) if n >= 2 => 1,
                    Some(_) => (0..n).find(|&i| Some(i) != force).unwrap_or(0),
                    // Channel 1 stays the response when the force channel is ignored.
                    None => usize::from(n >= 2),
                },
            },
        };
        let base = match self.base {
            Some(b) => Some(check("base", b)?),
            None => declared_base,
        };
        if force == Some(response) {
            crate::fail!("the force and response channels are both channel {response}");
        }
        if base == Some(response) {
            crate::fail!("the base and response channels are both channel {response}");
        }
        Ok(Roles {
            force,
            response,
            base,
        })
    }
}
