//! Trigger and check settings, and what the detector reports: one `Hit` with one `Verdict`.

use serde::{Deserialize, Serialize};

/// How the trigger level is set.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum TriggerLevel {
    /// Deviation from the baseline, in the trigger channel's unit.
    Absolute(f64),
    /// A multiple of the measured noise floor (RMS) of the trigger channel.
    NoiseMultiple(f64),
}

/// Trigger and record settings. Times in seconds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TriggerConfig {
    /// Channel the trigger watches (force if present, else response).
    pub channel: usize,
    pub level: TriggerLevel,
    pub pretrigger_s: f64,
    pub record_s: f64,
    /// Dead time after each record before the next trigger may fire.
    pub holdoff_s: f64,
}

/// Thresholds of the per-hit checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CheckConfig {
    /// A sample at or above this fraction of full scale counts as clipping.
    pub clip_fraction: f64,
    /// A second pulse above this fraction of the strongest, before or after it, is a
    /// double hit (force pulses, or bursts of the response's prediction error without a
    /// force channel; see `pulses`).
    pub double_fraction: f64,
    /// Largest response level (RMS of the last 5 % of the record, noise removed, over the
    /// peak) still counted as decayed.
    pub residual_limit: f64,
    /// Smallest response peak over the noise floor, in dB.
    pub min_snr_db: f64,
}

impl Default for CheckConfig {
    fn default() -> Self {
        CheckConfig {
            clip_fraction: 0.99,
            double_fraction: 0.1,
            residual_limit: 0.1,
            min_snr_db: 20.0,
        }
    }
}

/// The outcome of the checks on one hit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    Accepted,
    DoubleHit,
    Overload,
    NotDecayed,
    TooWeak,
    /// Rejected by the operator.
    Dropped,
    /// The trigger fired during the dead time after the previous record: no record taken.
    TooSoon,
    /// The stream ended before the record was complete.
    CutShort,
    /// Samples were lost (a link gap) in the middle of the record.
    Interrupted,
}

impl Verdict {
    pub fn is_accepted(self) -> bool {
        self == Verdict::Accepted
    }
    pub fn label(self) -> &'static str {
        match self {
            Verdict::Accepted => "accepted",
            Verdict::DoubleHit => "double hit",
            Verdict::Overload => "overload",
            Verdict::NotDecayed => "not decayed",
            Verdict::TooWeak => "too weak",
            Verdict::Dropped => "dropped",
            Verdict::TooSoon => "too soon",
            Verdict::CutShort => "cut short",
            Verdict::Interrupted => "interrupted",
        }
    }
    /// True when the hit has a complete record an operator could accept.
    pub fn has_record(self) -> bool {
        !matches!(
            self,
            Verdict::TooSoon | Verdict::CutShort | Verdict::Interrupted
        )
    }
}

/// One captured hit: the record (baseline removed, in channel units) and its verdict.
#[derive(Debug, Clone, PartialEq)]
pub struct Hit {
    /// 1-based count of hits in this stream.
    pub number: usize,
    /// Stream sample index of the record's first sample.
    pub start: u64,
    /// Stream sample index where the trigger fired.
    pub trigger: u64,
    /// One vector per stream channel, `record_len` samples each.
    pub record: Vec<Vec<f64>>,
    pub verdict: Verdict,
    pub reason: String,
    pub peak_force: Option<f64>,
    pub peak_response: f64,
    /// Response level at the end of the record relative to its peak (fraction).
    pub residual: f64,
    /// Response noise floor (RMS, channel unit) measured before the hit.
    pub noise_rms: f64,
}
