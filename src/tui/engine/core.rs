//! The analysis side of the app: owns the `Analysis`, turns blocks and commands into
//! snapshots for the screen, and prepares saves for the saver (which owns the files).

use super::messages::*;
use super::saver::{Job, Saver, SaverCore, SaverState};
use crate::error::Result;
use crate::pipeline::{Analysis, AnalysisConfig};
use crate::run::{RunFiles, Variant};
use crate::signal::{Block, Roles, StreamInfo};
use crate::source::LinkCounters;
use crate::spectra::Basis;
use crate::strip::compare::StripFile;
use crate::strip::session::{self, StripSetup};
use std::collections::VecDeque;
use std::path::PathBuf;
use std::sync::mpsc::Sender;
use std::sync::{Arc, Mutex};

mod snapshots;

/// The recording is flushed at least this often (stream seconds) besides every hit.
const FLUSH_EVERY_S: f64 = 5.0;

/// What the engine is built from.
#[derive(Debug, Clone)]
pub struct EngineSetup {
    pub info: StreamInfo,
    pub roles: Roles,
    pub config: AnalysisConfig,
    pub out_dir: PathBuf,
    pub label: String,
    /// Bands for the modes' verdicts and the mount's isolation (see `drive`); goes into
    /// the analysis' configuration, whose result carries the verdicts.
    pub drive: Option<crate::drive::Drive>,
    /// Strip test: E and G in every snapshot and the strip file with every save.
    pub strip: Option<StripSetup>,
}

struct Tail {
    channel: usize,
    ring: VecDeque<f64>,
    cap: usize,
}

/// Owns the analysis and the files of one session.
pub struct Engine {
    setup: EngineSetup,
    analysis: Analysis,
    label: String,
    saver: Saver,
    /// The saver's stem, recorded frames and last written generation.
    saved: Arc<Mutex<SaverState>>,
    /// Counts changes to what a save would write (new hits, verdicts, settings, label).
    generation: u64,
    armed: bool,
    tails: Vec<Tail>,
    version: u64,
    applied_seq: u64,
    overrun_frames: u64,
    link: Option<LinkCounters>,
    last_flush: u64,
    /// Stream position (the analysis skips blocks while disarmed).
    position: u64,
    /// New hits are waiting to be saved.
    autosave_due: bool,
    /// Each tap's traces, made once (parallel to the analysis's hits).
    traces: Vec<Option<Arc<HitTraces>>>,
    /// Point walk: a point was kept and the next not opened yet; no taps are taken and
    /// nothing is saved.
    parked: bool,
    /// Point walk: the stream position where this take began. A take's analysis and
    /// recording count from there, so each point's files stand alone like a session's
    /// (frame 0 of the WAV is the take's first sample, with no lost stretch before it).
    origin: u64,
}

impl Engine {
    /// Create the engine and start this run's recording in the output folder.
    pub fn new(mut setup: EngineSetup) -> Result<Engine> {
        if setup.drive.is_some() {
            setup.config.drive = setup.drive.clone();
        }
        let analysis = Analysis::new(&setup.info, setup.roles, setup.config.clone(), true)?;
        std::fs::create_dir_all(&setup.out_dir).map_err(|e| {
            crate::error::Error::from(e).context(format!(
                "cannot create the output folder '{}'",
                setup.out_dir.display()
            ))
        })?;
        let core = SaverCore::start(&setup.out_dir, &setup.info, &setup.label)?;
        let saved = core.state();
        let fs = setup.info.sample_rate;
        let mut shown = vec![analysis.detector().trigger_config().channel];
        if !shown.contains(&setup.roles.response) {
            shown.push(setup.roles.response);
        }
        let cap = (TAIL_S * fs).round() as usize;
        let tails = shown
            .into_iter()
            .map(|channel| Tail {
                channel,
                ring: VecDeque::with_capacity(cap + 1),
                cap,
            })
            .collect();
        Ok(Engine {
            label: setup.label.clone(),
            setup,
            analysis,
            saver: Saver::Inline(Box::new(core)),
            saved,
            generation: 0,
            armed: true,
            tails,
            version: 0,
            applied_seq: 0,
            overrun_frames: 0,
            link: None,
            last_flush: 0,
            position: 0,
            autosave_due: false,
            traces: Vec::new(),
            parked: false,
            origin: 0,
        })
    }

    pub fn analysis(&self) -> &Analysis {
        &self.analysis
    }

    /// Point walk, every point recorded at the start: take no taps until a point is opened.
    pub fn park(&mut self) {
        self.parked = true;
    }

    /// Move the file side to its own thread (the app); its updates go to `out`.
    pub(crate) fn detach_saver(&mut self, out: Sender<Inbox>) {
        self.saver.detach(out);
    }

    /// Tests: make every run-file write take at least `d` (a slow disk).
    #[cfg(test)]
    pub(crate) fn slow_saves(&mut self, d: std::time::Duration) {
        if let Saver::Inline(core) = &mut self.saver {
            core.slow_writes = Some(d);
        }
    }

    fn saver_state(&self) -> SaverState {
        self.saved.lock().unwrap_or_else(|p| p.into_inner()).clone()
    }

    /// Something would be written by a save that is not on disk yet.
    fn dirty(&self) -> bool {
        self.saver_state().written_generation < self.generation
    }

    /// Note a change to what a save would write.
    fn changed(&mut self) {
        self.generation += 1;
    }

    pub fn set_health(&mut self, overrun_frames: u64, link: Option<LinkCounters>) {
        self.overrun_frames = overrun_frames;
        self.link = link;
    }

    /// Feed one block: record it, update the live view, search it for hits (when armed).
    pub fn push(&mut self, block: &Block) -> Vec<Update> {
        // One copy, counted from the take's origin: analysed here, then recorded.
        let mut own = block.clone();
        own.start = block.start.saturating_sub(self.origin);
        for t in &mut self.tails {
            if let Some(ch) = block.channels.get(t.channel) {
                for &x in ch {
                    if t.ring.len() == t.cap {
                        t.ring.pop_front();
                    }
                    t.ring.push_back(x);
                }
            }
        }
        self.position = block.start + block.len() as u64;
        let new = if self.armed && !self.parked {
            self.analysis.push(&own)
        } else {
            self.analysis.push_disarmed(&own)
        };
        let mut out = self.saver.submit(Job::Append(own));
        if new > 0 {
            self.changed();
            // Every new hit is saved as it lands (see `autosave`): the WAV is flushed
            // and the run files written, so nothing is lost if the app stops. The
            // screen gets the hit first.
            self.autosave_due = true;
            out.push(Update::Analysis(Arc::new(self.snapshot())));
        }
        let fs = self.setup.info.sample_rate;
        if self.position.saturating_sub(self.last_flush) as f64 >= FLUSH_EVERY_S * fs {
            self.flush_recording(&mut out);
        }
        out
    }

    /// Save the run files if hits arrived since the last save (call after handing the
    /// hit's snapshot to the screen).
    pub fn autosave(&mut self) -> Vec<Update> {
        if std::mem::take(&mut self.autosave_due) {
            self.save(true)
        } else {
            Vec::new()
        }
    }

    /// The source has ended: a record still being taken becomes a tap cut short (every
    /// trigger gets a verdict, and RECORDING does not stay on), the recording is flushed
    /// and a new verdict saved.
    pub fn end_of_stream(&mut self) -> Vec<Update> {
        let mut out = Vec::new();
        if self.analysis.finish() > 0 {
            self.changed();
            self.autosave_due = true;
            out.push(Update::Analysis(Arc::new(self.snapshot())));
            out.extend(self.autosave());
        }
        self.flush_recording(&mut out);
        out
    }

    pub(crate) fn flush_recording(&mut self, out: &mut Vec<Update>) {
        self.last_flush = self.position;
        out.extend(self.saver.submit(Job::Flush));
    }

    /// Apply a command; `seq` is echoed back in the live snapshots.
    pub fn command(&mut self, seq: u64, cmd: Cmd) -> Vec<Update> {
        let mut out = Vec::new();
        let has_hits = !self.analysis.hits().is_empty();
        match cmd {
            Cmd::Decide { index, accept } => {
                let before = self.analysis.hits().get(index).map(|h| h.verdict);
                if self.analysis.decide(index, accept) {
                    if before != self.analysis.hits().get(index).map(|h| h.verdict) {
                        self.changed();
                        out.push(Update::Analysis(Arc::new(self.snapshot())));
                    }
                } else {
                    // A tap without a record (too soon, cut short) cannot be averaged.
                    out.push(Update::Problem(match self.analysis.hits().get(index) {
                        Some(h) => format!(
                            "tap #{} has no record to average ({}): it cannot be kept",
                            index + 1,
                            h.verdict.label()
                        ),
                        None => format!("there is no tap #{}", index + 1),
                    }));
                }
            }
            Cmd::SetLevel(level) => {
                self.analysis.set_trigger_level(level);
                if has_hits {
                    self.changed();
                }
            }
            Cmd::SetEstimator(e) => {
                self.analysis.set_estimator(e);
                if has_hits {
                    self.changed();
                }
                out.push(Update::Analysis(Arc::new(self.snapshot())));
            }
            Cmd::SetBasis(b) => {
                let b = match b {
                    Basis::Frf(_) => Basis::Frf(self.analysis.config().estimator),
                    other => other,
                };
                self.analysis.set_basis(Some(b));
                if has_hits {
                    self.changed();
                }
                out.push(Update::Analysis(Arc::new(self.snapshot())));
            }
            Cmd::SetArmed(a) => self.armed = a,
            Cmd::SetLabel(label) => {
                let label = label.trim().to_string();
                if !label.is_empty() && label != self.label {
                    self.label = label;
                    if has_hits {
                        self.changed();
                    }
                    let files = Box::new(self.run_files());
                    out.extend(self.saver.submit(Job::Rename {
                        label: self.label.clone(),
                        files,
                        generation: self.generation,
                    }));
                    out.push(Update::Analysis(Arc::new(self.snapshot())));
                }
            }
            Cmd::Save if self.parked => out.push(Update::Problem(
                "every point is kept: nothing to save (open a point again with [ or r)".into(),
            )),
            Cmd::Save => out.extend(self.save(false)),
            Cmd::KeepPoint {
                index,
                dir,
                stem,
                label,
                note,
            } => {
                let variant = Variant {
                    label,
                    note: format!(
                        "{note}; recorded with the terminal app from {}",
                        self.setup.info.source
                    ),
                    mass_g: None,
                };
                self.keep_point(index, dir, stem, variant, &mut out)
            }
            Cmd::NewPoint { dir, label } => {
                self.label = label.clone();
                match self.fresh_analysis() {
                    Ok(()) => {
                        self.parked = false;
                        self.origin = self.position;
                        out.extend(self.saver.submit(Job::NewRecording {
                            dir: Some(dir),
                            label,
                        }));
                        self.settle_new_run();
                        out.push(Update::Analysis(Arc::new(self.snapshot())));
                    }
                    Err(e) => out.push(Update::Problem(format!("cannot open the point: {e}"))),
                }
            }
            Cmd::Tap => {}
            Cmd::NewRun => match self.new_run(&mut out) {
                Ok(()) => out.push(Update::Analysis(Arc::new(self.snapshot()))),
                Err(e) => out.push(Update::Problem(format!("cannot start a new run: {e}"))),
            },
            Cmd::Shutdown => out.extend(self.finish()),
            Cmd::SaveAndShutdown => {
                // The last save's modes are cached in the analysis when nothing changed
                // since, so this costs a write, not a fit.
                if !self.analysis.hits().is_empty() {
                    out.extend(self.save(true));
                }
                out.extend(self.finish());
            }
        }
        self.applied_seq = self.applied_seq.max(seq);
        out
    }

    fn new_run(&mut self, out: &mut Vec<Update>) -> Result<()> {
        if self.parked {
            crate::fail!("every point of the walk is kept; open a point again with [ or r");
        }
        self.fresh_analysis()?;
        out.extend(self.saver.submit(Job::NewRecording {
            dir: None,
            label: self.label.clone(),
        }));
        self.settle_new_run();
        Ok(())
    }

    /// An empty analysis with the operator's current level, estimator and view.
    fn fresh_analysis(&mut self) -> Result<()> {
        let mut cfg = self.setup.config.clone();
        cfg.trigger.level = self.analysis.config().trigger.level;
        cfg.estimator = self.analysis.config().estimator;
        cfg.basis = self.analysis.config().basis;
        self.analysis = Analysis::new(&self.setup.info, self.setup.roles, cfg, true)?;
        self.traces.clear();
        self.autosave_due = false;
        Ok(())
    }

    /// A new run has nothing to save yet.
    fn settle_new_run(&mut self) {
        self.changed();
        let mut s = self.saved.lock().unwrap_or_else(|p| p.into_inner());
        s.written_generation = s.written_generation.max(self.generation);
    }

    /// Point walk: hand the take to the saver as point `index`'s recording, unless there
    /// is nothing to keep or the point's files exist already (never replaced; the taps go
    /// on). The saver confirms with `Update::PointKept`.
    fn keep_point(
        &mut self,
        index: usize,
        dir: PathBuf,
        stem: String,
        variant: Variant,
        out: &mut Vec<Update>,
    ) {
        if self.parked {
            out.push(Update::Problem(
                "every point is kept: open a point again with [ or r first".into(),
            ));
            return;
        }
        if self.analysis.accepted() == 0 {
            out.push(Update::Problem(format!(
                "point {} has no accepted tap yet: nothing to keep",
                index + 1
            )));
            return;
        }
        if crate::run::naming::stem_taken(&dir, &stem) {
            out.push(Update::Problem(format!(
                "{stem}.wav exists: never overwritten; move its files ({stem}.wav, .json, .csv in '{}') away, then ] again; the taps go on into this take",
                dir.display()
            )));
            return;
        }
        let files = Box::new(RunFiles::of(&self.analysis, variant));
        out.extend(self.saver.submit(Job::Keep {
            index,
            files,
            generation: self.generation,
            dir,
            stem,
        }));
        self.parked = true;
        match self.fresh_analysis() {
            Ok(()) => {
                self.settle_new_run();
                out.push(Update::Analysis(Arc::new(self.snapshot())));
            }
            Err(e) => out.push(Update::Problem(e.to_string())),
        }
    }

    /// What a save writes now (the mode search is done here, not in the saver).
    fn run_files(&self) -> RunFiles {
        let variant = Variant {
            label: self.label.clone(),
            note: format!(
                "recorded with the terminal app from {}",
                self.setup.info.source
            ),
            mass_g: None,
        };
        RunFiles::of(&self.analysis, variant)
    }

    /// Flush the recording and write the run files (JSON + CSV). Inline, the files are
    /// on disk when this returns; with the saver on its thread they are queued.
    pub fn save(&mut self, auto: bool) -> Vec<Update> {
        let mut out = Vec::new();
        self.last_flush = self.position;
        if self.parked {
            return out;
        }
        let files = Box::new(self.run_files());
        let strip = self.strip_file();
        out.extend(self.saver.submit(Job::Write {
            files,
            generation: self.generation,
            auto,
            strip,
        }));
        out
    }

    /// Close the recording (valid WAV with its final header) after everything queued.
    pub fn finish(&mut self) -> Vec<Update> {
        self.saver.finish()
    }

    /// Strip test: the strip file of the current modes, when E and G can be had.
    fn strip_file(&self) -> Option<Box<StripFile>> {
        let setup = self.setup.strip.as_ref()?;
        if self.analysis.accepted() == 0 {
            return None;
        }
        let result = self.analysis.result();
        let outcome = session::assess(setup, result.modes()).ok()?;
        let recording = format!("{}.wav", self.saver_state().stem);
        Some(Box::new(session::strip_file(
            &self.label,
            &recording,
            &outcome,
            result.modes(),
            &result.notes,
        )))
    }
}
