//! What the engine shows: the live view and the analysis snapshot, rendered from the
//! pipeline's one result (see `Analysis::result`).

use super::Engine;
use crate::run::{RunFile, Variant};
use crate::strip::session;
use crate::tui::engine::messages::*;
use std::sync::Arc;

impl Engine {
    pub fn live(&self) -> LiveSnap {
        let saved = self.saver_state();
        let fs = self.setup.info.sample_rate;
        let d = self.analysis.detector();
        let traces = self
            .tails
            .iter()
            .map(|t| {
                let base = d
                    .baseline(t.channel)
                    .unwrap_or_else(|| t.ring.iter().sum::<f64>() / t.ring.len().max(1) as f64);
                let x: Vec<f64> = t.ring.iter().map(|v| v - base).collect();
                let c = &self.setup.info.channels[t.channel];
                Trace {
                    channel: t.channel,
                    name: c.name.clone(),
                    unit: c.unit.clone(),
                    envelope: Envelope::of(&x, TAIL_BUCKETS, fs),
                }
            })
            .collect();
        LiveSnap {
            position: self.position,
            trigger_channel: d.trigger_config().channel,
            threshold: d.threshold(),
            traces,
            // A parked walk takes no taps: the status line says so.
            armed: self.armed && !self.parked,
            overrun_frames: self.overrun_frames,
            link: self.link,
            unsaved: self.dirty() && !self.analysis.hits().is_empty(),
            generation: self.generation,
            applied_seq: self.applied_seq,
            recorded_frames: saved.recorded_frames,
            recording: if self.armed {
                d.record_progress()
            } else {
                None
            },
            stem: saved.stem,
        }
    }

    /// Make the traces of hits that have none yet (each record is reduced once).
    fn update_traces(&mut self) {
        let a = &self.analysis;
        let fs = self.setup.info.sample_rate;
        let roles = a.roles();
        let pre = a.detector().pretrigger_len();
        for index in self.traces.len()..a.hits().len() {
            let t = a.record(index).map(|record| {
                let force = roles.force.map(|f| {
                    let end = (pre + (FORCE_VIEW_S * fs) as usize).min(record[f].len());
                    Envelope::of(&record[f][..end], HIT_BUCKETS, fs)
                });
                Arc::new(HitTraces {
                    number: a.hits()[index].number,
                    force,
                    response: Envelope::of(&record[roles.response], HIT_BUCKETS, fs),
                    pretrigger_s: pre as f64 / fs,
                })
            });
            self.traces.push(t);
        }
    }

    pub fn snapshot(&mut self) -> AnalysisSnap {
        self.version += 1;
        self.update_traces();
        let a = &self.analysis;
        // The pipeline's one result: the save that follows renders the same value.
        let result = a.result();
        let spectra = &result.spectra;
        let modes = result.modes().to_vec();
        let basis = result.basis;
        let curve = result.curve.clone().map(|c| CurveSnap {
            basis,
            db: c
                .magnitude
                .iter()
                .map(|m| 20.0 * m.max(1e-300).log10())
                .collect(),
            magnitude: c.magnitude,
            coherence: c.coherence,
            unit: c.unit,
            freqs: spectra.freqs.clone(),
        });
        let run = RunFile::from_analysis(
            a,
            &result,
            Variant {
                label: self.label.clone(),
                note: String::new(),
                mass_g: None,
            },
        );
        let strip = self
            .setup
            .strip
            .as_ref()
            .filter(|_| a.accepted() > 0)
            .map(|s| session::assess(s, &modes).map_err(|e| e.to_string()));
        AnalysisSnap {
            version: self.version,
            hits: a.hits().to_vec(),
            accepted: a.accepted(),
            traces: self.traces.clone(),
            basis,
            estimator: a.config().estimator,
            curve,
            modes,
            resolution_hz: spectra.resolution_hz,
            run,
            strip,
        }
    }
}
