//! Hit detection on a stream of blocks: trigger, pre-trigger ring, record capture, per-hit checks.
//!
//! The detector works sample by sample with state that never depends on block boundaries,
//! so a file read in one piece and a live stream in small blocks give identical hits.

use crate::signal::{Block, Roles, StreamInfo};
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
    /// A second force pulse above this fraction of the first is a double hit.
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
        }
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

const CHUNK: usize = 256;
const CHUNK_HISTORY: usize = 32;

/// Running idle statistics of one channel: median of per-chunk mean and RMS.
#[derive(Debug, Clone, Default)]
struct Floor {
    sum: f64,
    sum_sq: f64,
    count: usize,
    means: std::collections::VecDeque<f64>,
    rmss: std::collections::VecDeque<f64>,
    /// Medians, recomputed once per completed chunk (not per sample).
    base: f64,
    noise: f64,
}

impl Floor {
    /// Add a sample; true when it completed a chunk (the medians changed).
    fn add(&mut self, x: f64) -> bool {
        self.sum += x;
        self.sum_sq += x * x;
        self.count += 1;
        if self.count == CHUNK {
            let mean = self.sum / CHUNK as f64;
            let var = (self.sum_sq / CHUNK as f64 - mean * mean).max(0.0);
            if self.means.len() == CHUNK_HISTORY {
                self.means.pop_front();
                self.rmss.pop_front();
            }
            self.means.push_back(mean);
            self.rmss.push_back(var.sqrt());
            self.base = median(self.means.iter().copied());
            self.noise = median(self.rmss.iter().copied());
            self.discard_chunk();
            return true;
        }
        false
    }
    fn discard_chunk(&mut self) {
        self.sum = 0.0;
        self.sum_sq = 0.0;
        self.count = 0;
    }
    fn ready(&self) -> bool {
        !self.means.is_empty()
    }
    fn baseline(&self) -> f64 {
        self.base
    }
    fn noise(&self) -> f64 {
        self.noise
    }
}

fn median(values: impl Iterator<Item = f64>) -> f64 {
    let mut v: Vec<f64> = values.collect();
    if v.is_empty() {
        return 0.0;
    }
    let m = v.len() / 2;
    let odd = v.len() % 2 == 1;
    let (low, mid, _) = v.select_nth_unstable_by(m, f64::total_cmp);
    let upper = *mid;
    if odd {
        upper
    } else {
        let lower = low.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + upper)
    }
}

enum Phase {
    Idle,
    Recording { trigger: u64, start: u64 },
    HoldOff { until: u64 },
}

/// Turns a stream of blocks into hits.
pub struct HitDetector {
    trigger: TriggerConfig,
    checks: CheckConfig,
    roles: Roles,
    full_scale: Vec<Option<f64>>,
    pre_len: usize,
    record_len: usize,
    holdoff_len: u64,
    /// Pre-trigger ring, one per channel (raw values).
    ring: Vec<std::collections::VecDeque<f64>>,
    floors: Vec<Floor>,
    /// Baselines and noise frozen at the trigger.
    frozen: Vec<(f64, f64)>,
    record: Vec<Vec<f64>>,
    phase: Phase,
    seen: u64,
    lost: u64,
    /// Records abandoned because samples went missing in the middle of them.
    interrupted: usize,
    onset_window: usize,
    hits: usize,
}

impl HitDetector {
    pub fn new(
        info: &StreamInfo,
        roles: Roles,
        trigger: TriggerConfig,
        checks: CheckConfig,
    ) -> Self {
        let fs = info.sample_rate;
        let n = info.channels.len();
        let pre_len = (trigger.pretrigger_s * fs).round() as usize;
        let record_len = ((trigger.record_s * fs).round() as usize).max(pre_len + 16);
        HitDetector {
            full_scale: info.channels.iter().map(|c| c.full_scale).collect(),
            pre_len,
            record_len,
            holdoff_len: (trigger.holdoff_s * fs).round() as u64,
            ring: vec![std::collections::VecDeque::with_capacity(pre_len + 1); n],
            floors: vec![Floor::default(); n],
            frozen: vec![(0.0, 0.0); n],
            record: vec![Vec::with_capacity(record_len); n],
            phase: Phase::Idle,
            seen: 0,
            lost: 0,
            interrupted: 0,
            onset_window: ((0.001 * fs).round() as usize).max(2),
            hits: 0,
            trigger,
            checks,
            roles,
        }
    }

    pub fn record_len(&self) -> usize {
        self.record_len
    }

    pub fn pretrigger_len(&self) -> usize {
        self.pre_len
    }

    /// Current trigger threshold (deviation from baseline) in the trigger channel's unit,
    /// or `None` while the noise floor is still being measured.
    pub fn threshold(&self) -> Option<f64> {
        let f = &self.floors[self.trigger.channel];
        if !f.ready() {
            return None;
        }
        Some(match self.trigger.level {
            TriggerLevel::Absolute(v) => v,
            TriggerLevel::NoiseMultiple(k) => k * f.noise(),
        })
    }

    /// Baseline (idle mean) of a channel, if measured.
    pub fn baseline(&self, channel: usize) -> Option<f64> {
        self.floors
            .get(channel)
            .filter(|f| f.ready())
            .map(Floor::baseline)
    }

    pub fn set_level(&mut self, level: TriggerLevel) {
        self.trigger.level = level;
    }

    pub fn trigger_config(&self) -> &TriggerConfig {
        &self.trigger
    }

    /// Samples consumed so far.
    pub fn position(&self) -> u64 {
        self.seen
    }

    /// Records abandoned because samples were lost in the middle of them.
    pub fn interrupted_records(&self) -> usize {
        self.interrupted
    }

    /// Samples lost upstream (overruns) so far, seen as gaps in the block positions.
    pub fn lost_samples(&self) -> u64 {
        self.lost
    }

    /// A gap in the stream: a record in progress is lost and the pre-trigger ring refills.
    fn skip_to(&mut self, position: u64) {
        self.lost += position - self.seen;
        if matches!(self.phase, Phase::Recording { .. }) {
            self.interrupted += 1;
        }
        self.seen = position;
        self.phase = Phase::Idle;
        for c in 0..self.ring.len() {
            self.ring[c].clear();
            self.record[c].clear();
            self.floors[c].discard_chunk();
        }
    }

    pub fn push(&mut self, block: &Block, out: &mut Vec<Hit>) {
        if block.start > self.seen {
            self.skip_to(block.start);
        }
        let n_ch = self.ring.len();
        let n = block.len();
        let mut k = 0;
        while k < n {
            match self.phase {
                Phase::Idle => {
                    let tc = self.trigger.channel;
                    let mut th = self.threshold();
                    let mut base = self.floors[tc].baseline();
                    while k < n {
                        let x = block.channels[tc][k];
                        let fired = th.is_some_and(|t| (x - base).abs() > t)
                            && self.ring[0].len() >= self.pre_len;
                        if fired {
                            let idx = self.seen;
                            for c in 0..n_ch {
                                let f = &mut self.floors[c];
                                f.discard_chunk();
                                self.frozen[c] = (f.baseline(), f.noise());
                                self.record[c].clear();
                                self.record[c].extend(self.ring[c].drain(..));
                                self.record[c].push(block.channels[c][k]);
                            }
                            self.seen += 1;
                            k += 1;
                            self.phase = Phase::Recording {
                                trigger: idx,
                                start: idx - self.pre_len as u64,
                            };
                            self.finish_if_full(out);
                            break;
                        }
                        for c in 0..n_ch {
                            let v = block.channels[c][k];
                            if self.floors[c].add(v) && c == tc {
                                th = self.threshold();
                                base = self.floors[tc].baseline();
                            }
                            if self.pre_len > 0 {
                                let ring = &mut self.ring[c];
                                if ring.len() == self.pre_len {
                                    ring.pop_front();
                                }
                                ring.push_back(v);
                            }
                        }
                        self.seen += 1;
                        k += 1;
                    }
                }
                Phase::Recording { .. } => {
                    let take = (self.record_len - self.record[0].len()).min(n - k);
                    for c in 0..n_ch {
                        self.record[c].extend_from_slice(&block.channels[c][k..k + take]);
                    }
                    self.seen += take as u64;
                    k += take;
                    self.finish_if_full(out);
                }
                Phase::HoldOff { until } => {
                    let skip = (until.saturating_sub(self.seen) as usize).min(n - k);
                    self.seen += skip as u64;
                    k += skip;
                    if self.seen >= until {
                        self.phase = Phase::Idle;
                    }
                }
            }
        }
    }

    fn finish_if_full(&mut self, out: &mut Vec<Hit>) {
        let Phase::Recording { trigger, start } = self.phase else {
            return;
        };
        if self.record[0].len() < self.record_len {
            return;
        }
        let raw: Vec<Vec<f64>> = self.record.iter_mut().map(std::mem::take).collect();
        self.hits += 1;
        let hit = self.judge(raw, start, trigger);
        out.push(hit);
        for r in &mut self.record {
            r.reserve(self.record_len);
        }
        self.phase = if self.holdoff_len > 0 {
            Phase::HoldOff {
                until: self.seen + self.holdoff_len,
            }
        } else {
            Phase::Idle
        };
    }

    fn judge(&self, raw: Vec<Vec<f64>>, start: u64, trigger: u64) -> Hit {
        let c = &self.checks;
        let mut verdict = Verdict::Accepted;
        let mut reason = String::from("all checks passed");
        // Overload on any channel, judged on raw values against full scale.
        for (ch, x) in raw.iter().enumerate() {
            let Some(fs) = self.full_scale[ch] else {
                continue;
            };
            let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            if peak >= c.clip_fraction * fs {
                verdict = Verdict::Overload;
                reason = format!(
                    "channel {ch} reached {:.0} % of full scale: clipped, tap more gently",
                    100.0 * peak / fs
                );
                break;
            }
        }
        let record: Vec<Vec<f64>> = raw
            .into_iter()
            .zip(&self.frozen)
            .map(|(x, &(base, _))| x.into_iter().map(|v| v - base).collect())
            .collect();
        let resp = &record[self.roles.response];
        let noise = self.frozen[self.roles.response].1;
        let peak_response = resp.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let tail_len = (resp.len() / 20).max(1);
        let tail = &resp[resp.len() - tail_len..];
        let tail_ms = tail.iter().map(|v| v * v).sum::<f64>() / tail_len as f64;
        let residual = if peak_response > 0.0 {
            (tail_ms - noise * noise).max(0.0).sqrt() / peak_response
        } else {
            0.0
        };
        let peak_force = self
            .roles
            .force
            .map(|f| record[f].iter().fold(0.0f64, |m, v| m.max(v.abs())));
        if verdict == Verdict::Accepted {
            let second = match self.roles.force {
                Some(f) => second_pulse(&record[f], c.double_fraction, 5.0 * self.frozen[f].1),
                None => second_onset(resp, self.pre_len, self.onset_window),
            };
            if let Some(found) = second {
                verdict = Verdict::DoubleHit;
                reason = found;
            }
        }
        if verdict == Verdict::Accepted {
            let snr_db = 20.0 * (peak_response / noise.max(f64::MIN_POSITIVE)).log10();
            if snr_db < c.min_snr_db {
                verdict = Verdict::TooWeak;
                reason = format!(
                    "response peak only {snr_db:.0} dB above the noise floor (needs {:.0} dB): tap harder",
                    c.min_snr_db
                );
            }
        }
        if verdict == Verdict::Accepted && residual > c.residual_limit {
            verdict = Verdict::NotDecayed;
            reason = format!(
                "response still at {:.1} % of its peak at the end of the record (limit {:.1} %): lengthen the record",
                100.0 * residual,
                100.0 * c.residual_limit
            );
        }
        Hit {
            number: self.hits,
            start,
            trigger,
            record,
            verdict,
            reason,
            peak_force,
            peak_response,
            residual,
            noise_rms: noise,
        }
    }
}

/// A second force pulse after the first has ended: returns a description if found.
fn second_pulse(force: &[f64], fraction: f64, noise_limit: f64) -> Option<String> {
    let (p_idx, peak) =
        force.iter().enumerate().fold(
            (0, 0.0f64),
            |(i, m), (j, v)| if v.abs() > m { (j, v.abs()) } else { (i, m) },
        );
    if peak <= 0.0 {
        return None;
    }
    let end_level = 0.05 * peak;
    let end = p_idx + force[p_idx..].iter().position(|v| v.abs() < end_level)?;
    let limit = (fraction * peak).max(noise_limit);
    let (q_off, q) = force[end..]
        .iter()
        .enumerate()
        .fold(
            (0, 0.0f64),
            |(i, m), (j, v)| if v.abs() > m { (j, v.abs()) } else { (i, m) },
        );
    (q > limit).then(|| {
        format!(
            "second impact {} samples after the first at {:.0} % of its force",
            end + q_off - p_idx,
            100.0 * q / peak
        )
    })
}

/// Without a force channel: a second impact shows as a new sharp onset. The first difference
/// of the response stresses the impulsive part; its peak level in windows of about 1 ms must
/// jump by half over the window before and stand above a fifth of the first onset
/// (common practice, no source). Without a force channel this catches clear bounces only.
fn second_onset(resp: &[f64], from: usize, win: usize) -> Option<String> {
    let start = from.min(resp.len().saturating_sub(1));
    let env: Vec<f64> = resp[start..]
        .windows(2)
        .map(|w| (w[1] - w[0]).abs())
        .collect::<Vec<_>>()
        .chunks(win)
        .map(|w| w.iter().fold(0.0f64, |m, v| m.max(*v)))
        .collect();
    let (p, peak) = env.iter().enumerate().fold(
        (0, 0.0f64),
        |(i, m), (j, &v)| if v > m { (j, v) } else { (i, m) },
    );
    for k in p + 2..env.len() {
        if env[k] > 1.5 * env[k - 1] && env[k] > peak / 5.0 {
            return Some(format!(
                "the response rose again sharply {} samples after its peak",
                (k - p) * win
            ));
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::RoleChoice;
    use crate::source::Source;
    use crate::source::simulator::Simulator;
    use crate::source::simulator::presets::preset;

    /// All hits of a simulated run with the default trigger on the force (or response).
    fn detect(plan: crate::source::simulator::BenchPlan, seconds: f64) -> Vec<Hit> {
        let mut sim = Simulator::new(plan, Some(seconds), true);
        let info = sim.info().clone();
        let roles = RoleChoice::default().resolve(&info).unwrap();
        let trig = TriggerConfig {
            channel: roles.force.unwrap_or(roles.response),
            level: TriggerLevel::NoiseMultiple(10.0),
            pretrigger_s: 0.01,
            record_s: 1.0,
            holdoff_s: 0.2,
        };
        let mut d = HitDetector::new(&info, roles, trig, CheckConfig::default());
        let mut hits = Vec::new();
        while let Some(b) = sim.next_block().unwrap() {
            d.push(&b, &mut hits);
        }
        hits
    }

    fn verdicts(no_force: bool, double_chance: f64) -> Vec<Verdict> {
        let mut plan = preset("tm9-arm-solid", 8).unwrap();
        plan.hammer.double_hit_chance = double_chance;
        if no_force {
            plan.sensors.remove(0);
        }
        detect(plan, 14.0).iter().map(|h| h.verdict).collect()
    }

    #[test]
    fn clean_taps_are_accepted_with_and_without_force() {
        for no_force in [false, true] {
            let v = verdicts(no_force, 0.0);
            assert!(v.len() >= 5, "{v:?}");
            assert!(
                v.iter().all(|v| *v == Verdict::Accepted),
                "no_force={no_force}: {v:?}"
            );
        }
    }

    #[test]
    fn bounced_taps_are_double_hits_with_and_without_force() {
        for no_force in [false, true] {
            let v = verdicts(no_force, 1.0);
            let doubles = v.iter().filter(|v| **v == Verdict::DoubleHit).count();
            assert!(doubles * 10 >= v.len() * 8, "no_force={no_force}: {v:?}");
        }
    }

    #[test]
    fn clipping_is_overload() {
        let mut plan = preset("tm9-arm-solid", 8).unwrap();
        plan.hammer.peak_n = 60.0;
        let hits = detect(plan, 5.0);
        assert!(!hits.is_empty());
        assert!(
            hits.iter().all(|h| h.verdict == Verdict::Overload),
            "{:?}",
            hits.iter().map(|h| &h.reason).collect::<Vec<_>>()
        );
        assert!(hits[0].reason.contains("full scale"));
    }
}
