//! The per-hit checks (`HitDetector::judge`) and the trigger's sample scans.

use super::pulses;
use super::{Hit, HitDetector, Verdict};
use crate::signal::Block;

impl HitDetector {
    pub(super) fn judge(&self, raw: Vec<Vec<f64>>, start: u64, trigger: u64) -> Hit {
        let c = &self.checks;
        let mut verdict = Verdict::Accepted;
        let mut reason = String::from("all checks passed");
        // Overload on any channel, judged on raw values against full scale.
        for (ch, x) in raw.iter().enumerate() {
            let Some(fs) = self.full_scale[ch] else {
                continue;
            };
            let peak = pulses::peak_deviation(x, 0.0);
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
        let peak_response = pulses::peak_deviation(resp, 0.0);
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
            .map(|f| pulses::peak_deviation(&record[f], 0.0));
        if verdict == Verdict::Accepted {
            let fs = self.fs();
            let second = match self.roles.force {
                Some(f) => pulses::second_force_pulse(
                    &record[f],
                    c.double_fraction,
                    5.0 * self.frozen[f].1,
                )
                .map(|p| p.describe(fs, "force")),
                None => {
                    pulses::second_response_pulse(resp, c.double_fraction, self.onset_window, fs)
                        .map(|p| p.describe(fs, "size (response prediction error)"))
                }
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
                "response still at {:.1} % of its peak at the end of the record (limit {:.1} %): lengthen the record (--record-s)",
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

/// Index of the first sample deviating from `base` by more than `threshold`. Scanned in
/// runs of 64 without an early exit inside a run (branch-free, vectorisable).
pub(super) fn first_above(x: &[f64], base: f64, threshold: f64) -> Option<usize> {
    const RUN: usize = 64;
    let mut at = 0;
    for run in x.chunks(RUN) {
        let any = run
            .iter()
            .fold(false, |a, &v| a | ((v - base).abs() > threshold));
        if any {
            return run
                .iter()
                .position(|&v| (v - base).abs() > threshold)
                .map(|j| at + j);
        }
        at += run.len();
    }
    None
}

pub(super) fn dev_at(block: &Block, channel: usize, k: usize, base: f64) -> f64 {
    (block.channels[channel][k] - base).abs()
}
