//! Peaks the mode search set aside, why, and the notes that say so.

use super::{Mode, ModeConfig, OVER_BACKGROUND_DB};
use serde::{Deserialize, Serialize};

/// Why a peak of the curve is not listed as a mode.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LeftOutReason {
    /// More candidates passed every test than `max_modes`: the least prominent are left out.
    Limit,
    /// A narrow line already present before the taps at the same level (mains hum and its
    /// harmonics, electrical pickup, a fan).
    StationaryLine,
    /// The taps do not lift the response here above what it holds without a tap.
    Background,
    /// Narrower than the windows allow a structural peak to be: noise or leakage.
    Spike,
    /// Response only: a weak peak (under the prominence asked without a coherence) where
    /// the taps, lined up on their onsets, do not agree well enough to vouch for it.
    Disagreeing,
}

impl LeftOutReason {
    pub fn label(self) -> &'static str {
        match self {
            LeftOutReason::Limit => "over the mode limit",
            LeftOutReason::StationaryLine => "stationary line (there before the taps)",
            LeftOutReason::Background => "not above the background without taps",
            LeftOutReason::Spike => "too narrow for a mode, or width not measurable",
            LeftOutReason::Disagreeing => "weak, and the taps do not agree there",
        }
    }
}

/// A peak that is not listed as a mode, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LeftOut {
    pub frequency_hz: f64,
    pub prominence_db: f64,
    pub reason: LeftOutReason,
}

/// What the mode search found and what it set aside.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ModeSearch {
    pub modes: Vec<Mode>,
    /// Peaks set aside, each with its reason (peaks of noise below chance coherence are
    /// only counted, in `incoherent_peaks`).
    pub left_out: Vec<LeftOut>,
    pub incoherent_peaks: usize,
    /// The band searched, Hz.
    pub band_hz: (f64, f64),
    /// Sentences for the reader: what was dropped or is doubtful, and why.
    pub notes: Vec<String>,
}

/// Notes for the reader about what was set aside.
pub(super) fn describe_left_out(out: &mut ModeSearch, cfg: &ModeConfig) {
    let list = |reason: LeftOutReason| -> Vec<String> {
        out.left_out
            .iter()
            .filter(|l| l.reason == reason)
            .map(|l| format!("{:.1}", l.frequency_hz))
            .collect()
    };
    let limit = list(LeftOutReason::Limit);
    if !limit.is_empty() {
        out.notes.push(format!(
            "{} peaks that passed every test were left out by the limit of {} modes (the least prominent): {} Hz; raise --max-modes or narrow --band to see them",
            limit.len(),
            cfg.max_modes,
            limit.join(", ")
        ));
    }
    let lines = list(LeftOutReason::StationaryLine);
    if !lines.is_empty() {
        out.notes.push(format!(
            "peaks at {} Hz were already there before the taps at the same level (mains hum, pickup or a fan): not modes",
            lines.join(", ")
        ));
    }
    let bg = list(LeftOutReason::Background);
    if !bg.is_empty() {
        out.notes.push(format!(
            "peaks at {} Hz are not lifted {OVER_BACKGROUND_DB:.0} dB over the response without taps: not modes",
            bg.join(", ")
        ));
    }
    if out.incoherent_peaks > 0 {
        out.notes.push(format!(
            "{} peaks with coherence below what noise reaches by chance after {} averages were set aside as noise",
            out.incoherent_peaks, cfg.averages
        ));
    }
    let disagreeing = list(LeftOutReason::Disagreeing);
    if !disagreeing.is_empty() {
        out.notes.push(format!(
            "{} weak peaks (under {:.0} dB prominence) where the taps, each turned to its trigger, do not agree were set aside as noise",
            disagreeing.len(),
            cfg.min_prominence_db
        ));
    }
    let spikes = list(LeftOutReason::Spike);
    if !spikes.is_empty() {
        out.notes.push(format!(
            "{} peaks narrower than a mode can be (under the windows' own width, Q over 1000, or no measurable width without a coherence) were set aside as noise or leakage",
            spikes.len()
        ));
    }
}
