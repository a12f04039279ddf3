//! The one pipeline both front ends drive: blocks -> hits -> averaged spectra -> modes.

use crate::error::Result;
use crate::hits::{CheckConfig, Hit, HitDetector, TriggerConfig, TriggerLevel, Verdict};
pub mod align;
mod drain;
pub(crate) mod offload;
pub mod result;

use crate::modes::ModeConfig;
pub use drain::{Progress, analyse_source, drain_into, drain_with_progress};
pub use result::AnalysisResult;

/// How far the force spectrum may fall below its low-frequency level before the search
/// band ends there (dB); see `Analysis::band`.
pub const FORCE_BAND_DB: f64 = 20.0;
/// The band never goes on past where the force spectrum is this far down (dB), however
/// coherent the curve: common practice, no source.
pub const FORCE_BAND_MAX_DB: f64 = 40.0;
/// Lines over which the coherence's median decides whether the band goes on past
/// `FORCE_BAND_DB`.
pub const COHERENT_SPAN: usize = 64;
use crate::signal::{Block, Roles, StreamInfo};
use crate::spectra::{Basis, Estimator, HitSpectra, Spectra, SpectraConfig, SpectralAverager};
use serde::{Deserialize, Serialize};

/// Trigger settings before the channel is resolved against a stream.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TriggerChoice {
    /// `None`: the force channel, or the response channel without one.
    pub channel: Option<usize>,
    pub level: TriggerLevel,
    pub pretrigger_s: f64,
    pub record_s: f64,
    pub holdoff_s: f64,
}

impl Default for TriggerChoice {
    fn default() -> Self {
        TriggerChoice {
            channel: None,
            level: TriggerLevel::NoiseMultiple(10.0),
            pretrigger_s: 0.01,
            record_s: 1.0,
            holdoff_s: 0.2,
        }
    }
}

/// Everything that decides what the analysis computes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct AnalysisConfig {
    pub trigger: TriggerChoice,
    pub checks: CheckConfig,
    pub spectra: SpectraConfig,
    pub modes: ModeConfig,
    pub estimator: Estimator,
    /// `None`: FRF when there is a force channel, else the response spectrum.
    pub basis: Option<Basis>,
    /// Report the mount's isolation (transmissibility in dB) over this band, Hz (a single
    /// frequency when both ends are equal).
    #[serde(default)]
    pub isolation_band: Option<(f64, f64)>,
    /// The motors' drive: each mode gets its band verdict, a soft mount its isolation over
    /// the bands (see `drive`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drive: Option<crate::drive::Drive>,
}

/// What is kept of each hit for the run file and the hit list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HitSummary {
    pub number: usize,
    pub start_sample: u64,
    pub trigger_sample: u64,
    pub verdict: Verdict,
    pub reason: String,
    /// True when the operator overrode the automatic verdict.
    pub by_operator: bool,
    /// Peak force in the force unit (absent without a force channel).
    pub peak_force: Option<f64>,
    pub peak_response: f64,
    /// Response level at the record end over its peak (fraction).
    pub residual: f64,
}

impl HitSummary {
    fn of(hit: &Hit) -> Self {
        HitSummary {
            number: hit.number,
            start_sample: hit.start,
            trigger_sample: hit.trigger,
            verdict: hit.verdict,
            reason: hit.reason.clone(),
            by_operator: false,
            peak_force: hit.peak_force,
            peak_response: hit.peak_response,
            residual: hit.residual,
        }
    }
}

/// Accepted records a streaming analysis keeps for the hit-to-hit uncertainty.
pub const SPREAD_RECORDS: usize = 16;

/// A running analysis of one stream.
pub struct Analysis {
    info: StreamInfo,
    roles: Roles,
    cfg: AnalysisConfig,
    detector: HitDetector,
    averager: SpectralAverager,
    hits: Vec<HitSummary>,
    /// Records kept for re-averaging after an operator decision (only if retained).
    records: Vec<Option<Vec<Vec<f64>>>>,
    retain: bool,
    last: Option<Hit>,
    /// Stream ranges `[start, end)` in samples not searched for taps (the operator had
    /// disarmed the trigger); stored in the run file and honoured on re-analysis.
    disarmed: Vec<(u64, u64)>,
    /// The result, once computed, until hits, verdicts or settings change.
    cache: std::sync::Mutex<Option<std::sync::Arc<AnalysisResult>>>,
    /// Per-hit transforms of the first `SPREAD_RECORDS` kept accepted records (parallel to
    /// `hits`): made once for the average and reused by the per-hit uncertainty.
    hit_spectra: Vec<Option<HitSpectra>>,
    /// Accepted records being transformed on other threads while reading goes on; only
    /// `drain_into` sets it up, and it waits for them before it returns, so the averages
    /// seen from outside are always complete.
    offload: Option<offload::Offload>,
}

impl Analysis {
    /// `retain` keeps every record in memory so verdicts can be changed later; streaming
    /// analysis of long files leaves it off and stays flat in memory.
    pub fn new(
        info: &StreamInfo,
        roles: Roles,
        mut cfg: AnalysisConfig,
        retain: bool,
    ) -> Result<Self> {
        let fs = info.sample_rate;
        if !(fs > 0.0 && fs.is_finite()) {
            crate::fail!("the sample rate {fs} Hz is not usable");
        }
        let nyquist = fs / 2.0;
        let (lo, hi) = cfg.modes.band_hz;
        // Without a given upper limit, stop at 0.4 fs, below where anti-alias filters roll
        // off (common practice, no source).
        let hi = if hi.is_finite() {
            hi.min(nyquist)
        } else {
            cfg.modes.band_from_data = true;
            0.4 * fs
        };
        cfg.modes.band_hz = (lo.max(0.0), hi);
        if cfg.modes.band_hz.0 >= cfg.modes.band_hz.1 {
            crate::fail!(
                "the band {lo}:{hi} Hz is empty for a sample rate of {fs} Hz (Nyquist {nyquist} Hz)"
            );
        }
        let t = &cfg.trigger;
        if !(t.record_s > 0.0 && t.pretrigger_s >= 0.0 && t.pretrigger_s < t.record_s) {
            crate::fail!("the record must be longer than the pre-trigger and both positive");
        }
        let trigger_channel = t.channel.unwrap_or(roles.force.unwrap_or(roles.response));
        if trigger_channel >= info.channels.len() {
            crate::fail!("the trigger channel {trigger_channel} does not exist");
        }
        if cfg.basis == Some(Basis::Transmissibility) && roles.base.is_none() {
            crate::fail!("transmissibility needs a base channel (give --base-channel)");
        }
        if matches!(cfg.basis, Some(Basis::Frf(_))) && roles.force.is_none() {
            crate::fail!("an FRF needs a force channel");
        }
        let trigger = TriggerConfig {
            channel: trigger_channel,
            level: t.level,
            pretrigger_s: t.pretrigger_s,
            record_s: t.record_s,
            holdoff_s: t.holdoff_s,
        };
        let detector = HitDetector::new(info, roles, trigger, cfg.checks.clone());
        let units = (
            roles
                .force
                .map_or("-".to_string(), |f| info.channels[f].unit.clone()),
            info.channels[roles.response].unit.clone(),
        );
        let averager = SpectralAverager::new(
            roles,
            detector.record_len(),
            detector.pretrigger_len(),
            fs,
            &cfg.spectra,
            units,
            retain || roles.force.is_none(),
        );
        Ok(Analysis {
            info: info.clone(),
            roles,
            cfg,
            detector,
            averager,
            hits: Vec::new(),
            records: Vec::new(),
            retain,
            last: None,
            disarmed: Vec::new(),
            cache: std::sync::Mutex::new(None),
            hit_spectra: Vec::new(),
            offload: None,
        })
    }

    pub fn info(&self) -> &StreamInfo {
        &self.info
    }
    pub fn roles(&self) -> Roles {
        self.roles
    }
    pub fn config(&self) -> &AnalysisConfig {
        &self.cfg
    }
    pub fn detector(&self) -> &HitDetector {
        &self.detector
    }
    pub fn hits(&self) -> &[HitSummary] {
        &self.hits
    }
    /// The most recent hit with its record.
    pub fn last_hit(&self) -> Option<&Hit> {
        self.last.as_ref()
    }
    pub fn accepted(&self) -> usize {
        self.averager.count()
    }

    /// Feed one block; returns how many new hits it completed. Parts of the block inside a
    /// disarmed range (see `set_disarmed`) are skipped as `push_disarmed` would.
    pub fn push(&mut self, block: &Block) -> usize {
        let (b0, b1) = (block.start, block.start + block.len() as u64);
        if !self.disarmed.iter().any(|&(a, b)| a < b1 && b > b0) {
            return self.push_armed(block);
        }
        let mut cuts: Vec<u64> = vec![b0, b1];
        for &(a, b) in &self.disarmed {
            cuts.extend([a, b].into_iter().filter(|&c| c > b0 && c < b1));
        }
        cuts.sort_unstable();
        cuts.dedup();
        let mut n = 0;
        for w in cuts.windows(2) {
            let part = Block {
                start: w[0],
                channels: (block.channels.iter())
                    .map(|c| c[(w[0] - b0) as usize..(w[1] - b0) as usize].to_vec())
                    .collect(),
            };
            if self.disarmed.iter().any(|&(a, b)| a <= w[0] && w[1] <= b) {
                let mut found = Vec::new();
                self.detector.pause_until(w[1], &mut found);
                n += self.take_hits(found);
            } else {
                n += self.push_armed(&part);
            }
        }
        n
    }

    /// A block seen while the operator had the trigger disarmed: recorded in the run as a
    /// disarmed range, not searched for taps.
    pub fn push_disarmed(&mut self, block: &Block) -> usize {
        let (a, b) = (block.start, block.start + block.len() as u64);
        match self.disarmed.last_mut() {
            Some(last) if last.1 == a => last.1 = b,
            _ => self.disarmed.push((a, b)),
        }
        let mut found = Vec::new();
        self.detector.pause_until(b, &mut found);
        self.take_hits(found)
    }

    /// Disarmed ranges to honour (re-analysis of a run).
    pub fn set_disarmed(&mut self, ranges: Vec<(u64, u64)>) {
        self.invalidate();
        self.disarmed = ranges;
    }

    pub fn disarmed(&self) -> &[(u64, u64)] {
        &self.disarmed
    }

    fn push_armed(&mut self, block: &Block) -> usize {
        let mut found = Vec::new();
        self.detector.push(block, &mut found);
        for quiet in self.detector.take_idle() {
            self.averager.add_background(&quiet);
            self.invalidate();
        }
        self.take_hits(found)
    }

    /// The end of the stream: a record still being taken becomes a hit cut short (every
    /// trigger gets a verdict). Returns how many hits that added.
    pub fn finish(&mut self) -> usize {
        let mut found = Vec::new();
        self.detector.finish(&mut found);
        let n = self.take_hits(found);
        if let Some(mut off) = self.offload.take() {
            while let Some(job) = off.take(true) {
                self.add_job(&mut off, job);
            }
            self.offload = Some(off);
        }
        n
    }

    fn take_hits(&mut self, found: Vec<Hit>) -> usize {
        let n = found.len();
        if n > 0 {
            self.invalidate();
        }
        for mut hit in found {
            let index = self.hits.len();
            self.hits.push(HitSummary::of(&hit));
            self.hit_spectra.push(None);
            // Streaming analysis keeps the first few accepted records for the per-hit
            // uncertainty (memory stays bounded); retained analyses keep every record.
            let keep = hit.verdict.has_record()
                && (self.retain
                    || (hit.verdict.is_accepted() && self.kept_for_spread() < SPREAD_RECORDS));
            self.records.push(keep.then(|| hit.record.clone()));
            if hit.verdict.is_accepted() {
                if let Some(mut off) = self.offload.take() {
                    // Transformed on another thread; `add_job` gives the record back to
                    // `last` if this is still the most recent hit.
                    while off.full()
                        && let Some(job) = off.take(true)
                    {
                        self.add_job(&mut off, job);
                    }
                    off.submit(index, std::mem::take(&mut hit.record));
                    self.offload = Some(off);
                } else {
                    let hs = self.averager.transform(&hit.record);
                    self.add_hit_spectra(index, hs);
                }
            }
            if hit.verdict.has_record() {
                self.last = Some(hit);
            }
        }
        // Transforms done on other threads are added as they come, in stream order.
        if let Some(mut off) = self.offload.take() {
            while let Some(job) = off.take(false) {
                self.add_job(&mut off, job);
            }
            self.offload = Some(off);
        }
        n
    }

    /// Add a record transformed on another thread; its buffers go back for reuse unless
    /// they are kept for the uncertainty.
    fn add_job(&mut self, off: &mut offload::Offload, job: offload::Job) {
        if let Some(spare) = self.add_hit_spectra(job.index, job.spectra) {
            off.recycle(spare);
        }
        if let Some(last) = self.last.as_mut()
            && last.number == self.hits[job.index].number
        {
            last.record = job.record;
        }
    }

    /// Add an accepted hit's transforms to the average; keep them for the uncertainty
    /// while its record is kept and fewer than `SPREAD_RECORDS` are stored (else they
    /// are given back).
    fn add_hit_spectra(&mut self, index: usize, hs: HitSpectra) -> Option<HitSpectra> {
        // The average changes: a result computed before it is stale.
        self.invalidate();
        self.averager.add_spectra(&hs);
        let stored = self.hit_spectra.iter().filter(|h| h.is_some()).count();
        if self.records[index].is_some() && stored < SPREAD_RECORDS {
            self.hit_spectra[index] = Some(hs);
            None
        } else {
            Some(hs)
        }
    }

    /// Change the trigger level from now on.
    pub fn set_trigger_level(&mut self, level: TriggerLevel) {
        self.cfg.trigger.level = level;
        self.detector.set_level(level);
    }

    /// Report the mount's isolation over a band from now on (see `AnalysisConfig`).
    pub fn set_isolation_band(&mut self, band: Option<(f64, f64)>) {
        self.invalidate();
        self.cfg.isolation_band = band;
    }

    /// Judge the modes against this drive's bands from now on (see `AnalysisConfig`).
    pub fn set_drive(&mut self, drive: Option<crate::drive::Drive>) {
        self.invalidate();
        self.cfg.drive = drive;
    }

    /// Operator decision on hit `index` (0-based): accept or drop, then re-average.
    /// Needs retained records; returns false if the hit's record is not available.
    pub fn decide(&mut self, index: usize, accept: bool) -> bool {
        if index >= self.hits.len() || self.records[index].is_none() {
            return false;
        }
        let h = &mut self.hits[index];
        let was = h.verdict;
        if accept == was.is_accepted() {
            return true;
        }
        if accept {
            h.verdict = Verdict::Accepted;
            h.reason = format!("accepted by the operator (was: {})", was.label());
        } else {
            h.verdict = Verdict::Dropped;
            h.reason = format!("dropped by the operator (was: {})", was.label());
        }
        h.by_operator = true;
        self.reaverage();
        true
    }

    /// Apply verdicts decided elsewhere (a run file being re-analysed).
    pub fn apply_verdicts(&mut self, saved: &[HitSummary]) {
        for s in saved.iter().filter(|s| s.by_operator) {
            if let Some(i) = self
                .hits
                .iter()
                .position(|h| h.trigger_sample == s.trigger_sample)
            {
                self.hits[i].verdict = s.verdict;
                self.hits[i].reason = s.reason.clone();
                self.hits[i].by_operator = true;
            }
        }
        self.reaverage();
    }

    fn reaverage(&mut self) {
        let d = &self.detector;
        let mut avg = SpectralAverager::new(
            self.roles,
            d.record_len(),
            d.pretrigger_len(),
            self.info.sample_rate,
            &self.cfg.spectra,
            self.averager.spectra().units(),
            self.retain || self.roles.force.is_none(),
        );
        for hs in self.accepted_hit_spectra() {
            avg.add_spectra(&hs);
        }
        avg.take_background(&mut self.averager);
        self.averager = avg;
        self.invalidate();
    }

    pub fn set_estimator(&mut self, e: Estimator) {
        self.invalidate();
        self.cfg.estimator = e;
        if let Some(Basis::Frf(_)) = self.cfg.basis {
            self.cfg.basis = Some(Basis::Frf(e));
        }
    }

    pub fn set_basis(&mut self, b: Option<Basis>) {
        self.invalidate();
        self.cfg.basis = b;
    }

    pub fn spectra(&self) -> Spectra {
        self.averager.spectra()
    }

    pub fn windows(&self) -> &crate::spectra::Windows {
        self.averager.windows()
    }

    /// The basis modes are read from.
    pub fn basis(&self) -> Basis {
        self.cfg.basis.unwrap_or(if self.roles.force.is_some() {
            Basis::Frf(self.cfg.estimator)
        } else {
            Basis::Autospectrum
        })
    }

    fn kept_for_spread(&self) -> usize {
        self.records.iter().filter(|r| r.is_some()).count()
    }

    /// The transforms of the accepted records still in memory, in the order of
    /// `accepted_records`: the stored ones, the others made now on all cores.
    pub fn accepted_hit_spectra(&self) -> Vec<std::borrow::Cow<'_, HitSpectra>> {
        use std::borrow::Cow;
        let accepted: Vec<(usize, &[Vec<f64>])> = (self.hits.iter().zip(&self.records))
            .enumerate()
            .filter(|(_, (h, _))| h.verdict.is_accepted())
            .filter_map(|(i, (_, r))| Some((i, r.as_deref()?)))
            .collect();
        let missing: Vec<&[Vec<f64>]> = (accepted.iter())
            .filter(|(i, _)| self.hit_spectra[*i].is_none())
            .map(|(_, r)| *r)
            .collect();
        let mut made = self.averager.transform_all(&missing).into_iter();
        accepted
            .iter()
            .filter_map(|(i, _)| match &self.hit_spectra[*i] {
                Some(hs) => Some(Cow::Borrowed(hs)),
                None => made.next().map(Cow::Owned),
            })
            .collect()
    }

    /// The record of hit `index` when it is in memory (every hit with a record when
    /// retained; none for taps that came too soon, were cut short or interrupted).
    pub fn record(&self, index: usize) -> Option<&[Vec<f64>]> {
        self.records.get(index).and_then(|r| r.as_deref())
    }

    /// Accepted records still in memory (all of them when retained).
    pub fn accepted_records(&self) -> Vec<&[Vec<f64>]> {
        self.hits
            .iter()
            .zip(&self.records)
            .filter(|(h, _)| h.verdict.is_accepted())
            .filter_map(|(_, r)| r.as_deref())
            .collect()
    }
}
