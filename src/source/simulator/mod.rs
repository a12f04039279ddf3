//! The simulated bench: a structure, a hammer and imperfect sensors, streamed as sample blocks.
//!
//! Everything is seeded so a run is reproducible; see `presets` for the demo scenario.

pub mod model;
pub mod presets;

use crate::error::Result;
use crate::rng::Rng;
use crate::signal::{Block, ChannelInfo, Role, StreamInfo};
use crate::source::Source;
use model::{Impact, ModalResponder, Mount, RigidBody, STANDARD_GRAVITY, SimMode};
use serde::{Deserialize, Serialize};

/// Hammer tip hardness: a harder tip gives a shorter pulse and excites a wider band.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, clap::ValueEnum)]
#[serde(rename_all = "snake_case")]
pub enum Tip {
    /// Steel tip, about 0.15 ms pulse.
    Hard,
    /// Plastic tip, about 0.5 ms pulse.
    Medium,
    /// Rubber tip, about 1.5 ms pulse.
    Soft,
}

impl Tip {
    /// Pulse width in seconds. Typical of small hammers on light parts (from memory).
    pub fn pulse_width_s(self) -> f64 {
        match self {
            Tip::Hard => 0.15e-3,
            Tip::Medium => 0.5e-3,
            Tip::Soft => 1.5e-3,
        }
    }
}

/// The hammer and how the operator swings it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HammerPlan {
    pub tip: Tip,
    /// Nominal peak force in N; each tap varies by +-`force_spread` (fraction).
    pub peak_n: f64,
    pub force_spread: f64,
    /// Mean time between taps in s; each gap varies by +-`gap_spread` (fraction).
    pub gap_s: f64,
    pub gap_spread: f64,
    /// Time of the first tap in s (leaves quiet lead-in for the noise floor).
    pub first_s: f64,
    /// Probability that a tap bounces into a second, weaker hit a few ms later.
    pub double_hit_chance: f64,
}

/// One sensor channel's imperfections.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SensorPlan {
    pub name: String,
    pub role: Role,
    /// "N" for the force channel, "g" for accelerometers.
    pub unit: String,
    /// White noise, RMS in `unit`.
    pub noise_rms: f64,
    /// Converter resolution in bits (signed).
    pub bits: u32,
    /// Full scale in `unit`: samples beyond it clip.
    pub full_scale: f64,
    /// Constant offset in `unit`.
    pub dc_offset: f64,
}

impl SensorPlan {
    /// Size of one converter step in `unit`.
    pub fn lsb(&self) -> f64 {
        self.full_scale / (1u64 << (self.bits - 1)) as f64
    }
}

/// Mains hum picked up by the response wiring.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HumPlan {
    pub frequency_hz: f64,
    /// Amplitude of the fundamental in the response unit; the 3rd harmonic gets a third of it.
    pub amplitude: f64,
}

/// A complete simulated bench.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BenchPlan {
    pub label: String,
    pub note: String,
    pub sample_rate: f64,
    /// Modes; `modal_constants[i]` belongs to the i-th non-force sensor.
    pub modes: Vec<SimMode>,
    pub hammer: HammerPlan,
    /// Sensors; the force sensor (if any) first.
    pub sensors: Vec<SensorPlan>,
    pub hum: Option<HumPlan>,
    /// A soft-mounted part, if one of the response points sits on a mount.
    #[serde(default)]
    pub mount: Option<Mount>,
    /// Rigid-body mass when the part rests free; `None` when it is clamped.
    #[serde(default)]
    pub rigid: Option<RigidBody>,
    pub seed: u64,
}

impl BenchPlan {
    pub fn stream_info(&self) -> StreamInfo {
        StreamInfo {
            source: format!("simulated bench '{}'", self.label),
            sample_rate: self.sample_rate,
            channels: self
                .sensors
                .iter()
                .map(|s| ChannelInfo {
                    name: s.name.clone(),
                    role: s.role,
                    unit: s.unit.clone(),
                    scale: s.lsb(),
                    full_scale: Some(s.full_scale),
                })
                .collect(),
        }
    }
}

/// What the simulator actually did, written beside its recording.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    pub plan: BenchPlan,
    pub impacts: Vec<Impact>,
}

/// Streams a `BenchPlan` as blocks; taps come on a schedule, on request, or both.
pub struct Simulator {
    plan: BenchPlan,
    info: StreamInfo,
    responder: ModalResponder,
    rng: Rng,
    next_sample: u64,
    /// Stop after this many samples (None = endless).
    length: Option<u64>,
    block_len: usize,
    auto_taps: bool,
    next_auto_s: f64,
    impacts: Vec<Impact>,
    accel: Vec<f64>,
    pace: Option<std::time::Instant>,
}

impl Simulator {
    pub fn new(plan: BenchPlan, seconds: Option<f64>, auto_taps: bool) -> Self {
        let info = plan.stream_info();
        let n_resp = plan
            .sensors
            .iter()
            .filter(|s| s.role != Role::Force)
            .count();
        let responder = ModalResponder::new(
            &plan.modes,
            plan.mount.as_ref(),
            plan.rigid,
            n_resp,
            plan.sample_rate,
        );
        Simulator {
            rng: Rng::new(plan.seed),
            next_auto_s: plan.hammer.first_s,
            length: seconds.map(|s| (s * plan.sample_rate).round() as u64),
            block_len: (plan.sample_rate / 50.0).ceil() as usize,
            plan,
            info,
            responder,
            next_sample: 0,
            auto_taps,
            impacts: Vec::new(),
            accel: vec![0.0; n_resp],
            pace: None,
        }
    }

    pub fn with_block_len(mut self, n: usize) -> Self {
        self.block_len = n.max(1);
        self
    }

    /// Produce blocks no faster than real time (for the live bench).
    pub fn real_time(mut self) -> Self {
        self.pace = Some(std::time::Instant::now());
        self
    }

    pub fn plan(&self) -> &BenchPlan {
        &self.plan
    }

    /// Schedule a tap a few milliseconds from the current stream position.
    pub fn tap_now(&mut self) {
        let t = self.next_sample as f64 / self.plan.sample_rate + 0.005;
        self.schedule_tap(t);
    }

    pub fn truth(&self) -> Truth {
        Truth {
            plan: self.plan.clone(),
            impacts: self.impacts.clone(),
        }
    }

    fn schedule_tap(&mut self, time_s: f64) {
        let h = self.plan.hammer.clone();
        let peak = h.peak_n * (1.0 + h.force_spread * self.rng.range(-1.0, 1.0));
        let width = h.tip.pulse_width_s() * self.rng.range(0.9, 1.1);
        self.push_impact(Impact {
            time_s,
            peak_n: peak,
            width_s: width,
        });
        if self.rng.uniform() < h.double_hit_chance {
            let delay = self.rng.range(0.003, 0.012);
            let second = Impact {
                time_s: time_s + width + delay,
                peak_n: peak * self.rng.range(0.3, 0.7),
                width_s: width,
            };
            self.push_impact(second);
        }
    }

    fn push_impact(&mut self, imp: Impact) {
        self.responder.add_impact(imp);
        self.impacts.push(imp);
    }

    fn digitise(&mut self, sensor: usize, value: f64) -> f64 {
        let s = &self.plan.sensors[sensor];
        let lsb = s.lsb();
        let v = value + s.dc_offset + s.noise_rms * self.rng.normal();
        let max_code = (1i64 << (s.bits - 1)) - 1;
        let code = (v / lsb)
            .round()
            .clamp(-(max_code as f64) - 1.0, max_code as f64);
        code * lsb
    }
}

impl Source for Simulator {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn tap(&mut self) {
        self.tap_now();
    }

    fn paced(&self) -> bool {
        self.pace.is_some()
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        if let Some(t0) = self.pace {
            // Real time: wait until the wall clock has caught up with the stream.
            let due =
                std::time::Duration::from_secs_f64(self.next_sample as f64 / self.plan.sample_rate);
            if let Some(wait) = due.checked_sub(t0.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        let mut n = self.block_len as u64;
        if let Some(len) = self.length {
            if self.next_sample >= len {
                return Ok(None);
            }
            n = n.min(len - self.next_sample);
        }
        let fs = self.plan.sample_rate;
        let start = self.next_sample;
        let n_ch = self.plan.sensors.len();
        let mut channels = vec![Vec::with_capacity(n as usize); n_ch];
        for k in 0..n {
            let idx = start + k;
            let t = idx as f64 / fs;
            while self.auto_taps && t + 0.002 >= self.next_auto_s {
                let at = self.next_auto_s;
                self.schedule_tap(at);
                let h = &self.plan.hammer;
                let gap = h.gap_s * (1.0 + h.gap_spread * self.rng.range(-1.0, 1.0));
                self.next_auto_s += gap;
            }
            let mut accel = std::mem::take(&mut self.accel);
            let force = self.responder.sample(idx, &mut accel);
            let hum = self.plan.hum.as_ref().map_or(0.0, |h| {
                let w = 2.0 * std::f64::consts::PI * h.frequency_hz * t;
                h.amplitude * (w.sin() + (3.0 * w).sin() / 3.0)
            });
            let mut resp_i = 0;
            for (c, chan) in channels.iter_mut().enumerate() {
                let sensor = &self.plan.sensors[c];
                let clean = if sensor.role == Role::Force {
                    force
                } else {
                    let a = accel[resp_i] / unit_per_mps2(&sensor.unit);
                    resp_i += 1;
                    a + hum
                };
                let v = self.digitise(c, clean);
                chan.push(v);
            }
            self.accel = accel;
        }
        self.next_sample += n;
        Ok(Some(Block { start, channels }))
    }
}

/// How many m/s^2 one unit of an acceleration channel is.
fn unit_per_mps2(unit: &str) -> f64 {
    if unit == "g" { STANDARD_GRAVITY } else { 1.0 }
}
