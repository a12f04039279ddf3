//! Hit detection on a stream of blocks: trigger, pre-trigger ring, record capture, per-hit checks.
//!
//! The detector works sample by sample with state that never depends on block boundaries,
//! so a file read in one piece and a live stream in small blocks give identical hits.

mod floor;
mod judge;
pub mod pulses;
mod verdict;

use floor::{CHUNK, Floor};
use judge::{dev_at, first_above};
pub use verdict::{CheckConfig, Hit, TriggerConfig, TriggerLevel, Verdict};

use crate::signal::{Block, Roles, StreamInfo};

/// The smallest noise floor the trigger assumes for a channel: the quantisation noise of a
/// 16-bit converter at the channel's full scale (q / sqrt(12) with q = full scale / 2^15,
/// about -101 dBFS), none when the full scale is unknown (a float stream says nothing about
/// its resolution). Stretches of digital silence (exact zeros) are also left out of the
/// measured floor (see `Floor::add`), so the trigger recovers after them.
pub fn noise_lower_bound(channel: &crate::signal::ChannelInfo) -> f64 {
    match channel.full_scale {
        Some(fs) if fs > 0.0 && fs.is_finite() => fs / 32768.0 / 12f64.sqrt(),
        _ => 0.0,
    }
}

enum Phase {
    Idle,
    Recording {
        trigger: u64,
        start: u64,
    },
    /// Dead time: no record is taken, but a new onset above `guard` (the previous tap's
    /// remaining level, with a margin) is reported as a tap that came too soon. Until
    /// `learn_until` the guard follows the signal up instead (a tap's own rise).
    HoldOff {
        until: u64,
        guard: f64,
        learn_until: u64,
    },
}

/// Largest number of quiet records kept for the background spectrum.
pub const IDLE_RECORDS: usize = 8;

/// Turns a stream of blocks into hits.
pub struct HitDetector {
    trigger: TriggerConfig,
    checks: CheckConfig,
    roles: Roles,
    full_scale: Vec<Option<f64>>,
    /// Lower bound of each channel's noise floor (see `noise_lower_bound`).
    min_noise: Vec<f64>,
    sample_rate: f64,
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
    /// Envelope window of the response-only double-hit test (about 0.5 ms).
    onset_window: usize,
    hits: usize,
    /// Stream index of the previous trigger (for "too soon").
    last_trigger: Option<u64>,
    /// Response samples of the quiet stretch being collected, and finished quiet records
    /// waiting to be taken (see `take_idle`).
    idle: Vec<f64>,
    idle_done: Vec<Vec<f64>>,
    idle_taken: usize,
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
            min_noise: info.channels.iter().map(noise_lower_bound).collect(),
            sample_rate: fs,
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
            onset_window: ((0.0005 * fs).round() as usize).max(2),
            hits: 0,
            last_trigger: None,
            idle: Vec::new(),
            idle_done: Vec::new(),
            idle_taken: 0,
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

    /// While a record is being taken: the share of it filled so far (0..1); `None` when
    /// no record is open.
    pub fn record_progress(&self) -> Option<f64> {
        match self.phase {
            Phase::Recording { .. } => {
                let done = self.record.first().map_or(0, Vec::len) as f64;
                Some((done / self.record_len.max(1) as f64).clamp(0.0, 1.0))
            }
            _ => None,
        }
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
            TriggerLevel::NoiseMultiple(k) => k * self.noise_of(self.trigger.channel),
        })
    }

    /// Measured noise floor (RMS) of a channel, never below its lower bound.
    fn noise_of(&self, channel: usize) -> f64 {
        self.floors[channel].noise().max(self.min_noise[channel])
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

    /// Length of a quiet stretch for the background spectrum: half a record (taps a
    /// second or two apart leave little more between records and dead time).
    pub fn idle_len(&self) -> usize {
        (self.record_len / 2).max(self.pre_len + 16)
    }

    /// Quiet stretches (response channel, mean removed, `idle_len` samples) collected since
    /// the last call: stretches with no trigger, for the background spectrum. At most
    /// `IDLE_RECORDS` over the stream.
    pub fn take_idle(&mut self) -> Vec<Vec<f64>> {
        std::mem::take(&mut self.idle_done)
    }

    /// A hit without a usable record (too soon, cut short, interrupted).
    fn empty_hit(&mut self, start: u64, trigger: u64, verdict: Verdict, reason: String) -> Hit {
        self.hits += 1;
        self.last_trigger = Some(trigger);
        Hit {
            number: self.hits,
            start,
            trigger,
            record: vec![Vec::new(); self.ring.len()],
            verdict,
            reason,
            peak_force: None,
            peak_response: 0.0,
            residual: 0.0,
            noise_rms: self.frozen[self.roles.response].1,
        }
    }

    /// A gap in the stream: a record in progress is lost (reported as an interrupted hit)
    /// and the pre-trigger ring refills.
    fn skip_to(&mut self, position: u64, out: &mut Vec<Hit>) {
        let missing = position - self.seen;
        self.lost += missing;
        let why = format!("{missing} samples were lost (a link gap)");
        self.restart_at(position, &why, out);
    }

    /// Samples up to `position` are not searched for taps (the operator disarmed the
    /// trigger): as a gap, but nothing counts as lost.
    pub fn pause_until(&mut self, position: u64, out: &mut Vec<Hit>) {
        if position > self.seen {
            self.restart_at(position, "the trigger was disarmed", out);
        }
    }

    fn restart_at(&mut self, position: u64, why: &str, out: &mut Vec<Hit>) {
        if let Phase::Recording { trigger, start } = self.phase {
            self.interrupted += 1;
            let reason = format!(
                "{why} {:.2} s into the record: not usable",
                (self.seen - start) as f64 / self.fs()
            );
            let hit = self.empty_hit(start, trigger, Verdict::Interrupted, reason);
            out.push(hit);
        }
        self.seen = position;
        self.phase = Phase::Idle;
        self.idle.clear();
        for c in 0..self.ring.len() {
            self.ring[c].clear();
            self.record[c].clear();
            self.floors[c].discard_chunk();
        }
    }

    fn fs(&self) -> f64 {
        self.sample_rate
    }

    /// The end of the stream: a record still being taken becomes a hit cut short.
    pub fn finish(&mut self, out: &mut Vec<Hit>) {
        if let Phase::Recording { trigger, start } = self.phase {
            let reason = format!(
                "the recording ended {:.2} s into the record (it needs {:.2} s): not usable",
                (self.seen - start) as f64 / self.fs(),
                self.trigger.record_s
            );
            let hit = self.empty_hit(start, trigger, Verdict::CutShort, reason);
            out.push(hit);
            for r in &mut self.record {
                r.clear();
            }
            self.phase = Phase::Idle;
        }
    }

    pub fn push(&mut self, block: &Block, out: &mut Vec<Hit>) {
        if block.start > self.seen {
            self.skip_to(block.start, out);
        }
        let n_ch = self.ring.len();
        let n = block.len();
        let collect_idle = self.idle_taken < IDLE_RECORDS;
        let mut k = 0;
        while k < n {
            match self.phase {
                Phase::Idle => {
                    let tc = self.trigger.channel;
                    while k < n {
                        // The threshold changes only when the trigger channel completes a
                        // noise chunk, so up to that chunk's end it is fixed and the scan
                        // for a trigger is one comparison per sample, in bulk; the
                        // bookkeeping of the quiet samples before it is done in bulk too.
                        // Both give exactly what sample-by-sample processing gives.
                        let th = self.threshold();
                        let base = self.floors[tc].baseline();
                        let seg = (CHUNK - self.floors[tc].count).min(n - k);
                        // The pre-trigger ring must be full before the trigger may fire.
                        let wait = self.pre_len.saturating_sub(self.ring[0].len()).min(seg);
                        let fire = th.and_then(|t| {
                            first_above(&block.channels[tc][k + wait..k + seg], base, t)
                                .map(|j| j + wait)
                        });
                        let quiet = fire.unwrap_or(seg);
                        self.take_quiet(block, k, quiet, collect_idle);
                        k += quiet;
                        if fire.is_none() {
                            continue;
                        }
                        let idx = self.seen;
                        for c in 0..n_ch {
                            let f = &mut self.floors[c];
                            f.discard_chunk();
                            self.frozen[c] = (f.baseline(), f.noise().max(self.min_noise[c]));
                            self.record[c].clear();
                            self.record[c].extend(self.ring[c].drain(..));
                            self.record[c].push(block.channels[c][k]);
                        }
                        self.idle.clear();
                        self.seen += 1;
                        k += 1;
                        self.phase = Phase::Recording {
                            trigger: idx,
                            start: idx - self.pre_len as u64,
                        };
                        self.finish_if_full(out);
                        break;
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
                Phase::HoldOff {
                    until,
                    mut guard,
                    learn_until,
                } => {
                    let tc = self.trigger.channel;
                    let th = self.threshold().unwrap_or(f64::INFINITY);
                    let base = self.floors[tc].baseline();
                    let stop = (k + until.saturating_sub(self.seen) as usize).min(n);
                    let mut fired = None;
                    while k < stop {
                        let dev = (block.channels[tc][k] - base).abs();
                        if self.seen < learn_until {
                            guard = guard.max(dev);
                        } else if dev > th.max(guard) {
                            fired = Some(self.seen);
                        }
                        self.seen += 1;
                        k += 1;
                        if fired.is_some() {
                            break;
                        }
                    }
                    if let Some(at) = fired {
                        let since = self
                            .last_trigger
                            .map_or(0.0, |t| (at - t) as f64 / self.fs());
                        let reason = format!(
                            "came {since:.2} s after the previous tap, inside its record and dead time ({:.2} s): wait for the part to settle",
                            self.trigger.record_s - self.trigger.pretrigger_s
                                + self.trigger.holdoff_s
                        );
                        let hit = self.empty_hit(at, at, Verdict::TooSoon, reason);
                        out.push(hit);
                        // The early tap rings for a record too: dead time until then, and
                        // its own rise is learnt for 20 ms so it is reported once.
                        let tail = self.record_len as u64 - self.pre_len as u64;
                        self.phase = Phase::HoldOff {
                            until: at + tail + self.holdoff_len,
                            guard: 2.0 * dev_at(block, tc, k - 1, base),
                            learn_until: at + (0.02 * self.fs()) as u64,
                        };
                    } else if self.seen >= until {
                        self.phase = Phase::Idle;
                    } else {
                        self.phase = Phase::HoldOff {
                            until,
                            guard,
                            learn_until,
                        };
                    }
                }
            }
        }
    }

    /// Samples `k..k + m` of `block` hold no trigger: into the noise floors, the
    /// pre-trigger ring and (while wanted) the quiet stretch for the background spectrum.
    fn take_quiet(&mut self, block: &Block, k: usize, m: usize, collect_idle: bool) {
        if m == 0 {
            return;
        }
        if let ([fa, fb], [xa, xb]) = (&mut self.floors[..], &block.channels[..]) {
            Floor::add_all_pair(fa, fb, &xa[k..k + m], &xb[k..k + m]);
        } else {
            for (f, x) in self.floors.iter_mut().zip(&block.channels) {
                f.add_all(&x[k..k + m]);
            }
        }
        for c in 0..self.ring.len() {
            let x = &block.channels[c][k..k + m];
            if self.pre_len > 0 {
                let ring = &mut self.ring[c];
                if m >= self.pre_len {
                    ring.clear();
                    ring.extend(&x[m - self.pre_len..]);
                } else {
                    let excess = (ring.len() + m).saturating_sub(self.pre_len);
                    ring.drain(..excess);
                    ring.extend(x);
                }
            }
        }
        if collect_idle {
            let idle_len = self.idle_len();
            let mut rest = &block.channels[self.roles.response][k..k + m];
            while !rest.is_empty() && self.idle_taken < IDLE_RECORDS {
                let take = (idle_len - self.idle.len()).min(rest.len());
                self.idle.extend_from_slice(&rest[..take]);
                rest = &rest[take..];
                if self.idle.len() == idle_len {
                    let mut quiet = std::mem::take(&mut self.idle);
                    let mean = quiet.iter().sum::<f64>() / quiet.len() as f64;
                    quiet.iter_mut().for_each(|v| *v -= mean);
                    // Still ringing from the last tap (a lightly damped mode outlasts
                    // record and dead time): not a background. A background is steady:
                    // its first quarter holds no more than twice the energy of its last
                    // (3 dB).
                    let q = quiet.len() / 4;
                    let energy = |x: &[f64]| x.iter().map(|v| v * v).sum::<f64>();
                    if energy(&quiet[..q]) <= 2.0 * energy(&quiet[quiet.len() - q..]) {
                        self.idle_done.push(quiet);
                        self.idle_taken += 1;
                    }
                }
            }
        }
        self.seen += m as u64;
    }

    fn finish_if_full(&mut self, out: &mut Vec<Hit>) {
        let Phase::Recording { trigger, start } = self.phase else {
            return;
        };
        if self.record[0].len() < self.record_len {
            return;
        }
        let raw: Vec<Vec<f64>> = self.record.iter_mut().map(std::mem::take).collect();
        // The previous tap's remaining level on the trigger channel, over the last tenth of
        // the record: a later onset must rise 3 times over it to count as a new tap
        // (margin for beating of close modes: common practice, no source).
        let tc = self.trigger.channel;
        let tail = &raw[tc][raw[tc].len() - (raw[tc].len() / 10).max(1)..];
        let remaining = pulses::peak_deviation(tail, self.frozen[tc].0);
        self.hits += 1;
        let hit = self.judge(raw, start, trigger);
        self.last_trigger = Some(trigger);
        out.push(hit);
        for r in &mut self.record {
            r.reserve(self.record_len);
        }
        self.phase = if self.holdoff_len > 0 {
            Phase::HoldOff {
                until: self.seen + self.holdoff_len,
                guard: 3.0 * remaining,
                learn_until: self.seen,
            }
        } else {
            Phase::Idle
        };
    }
}

#[cfg(test)]
mod tests;
