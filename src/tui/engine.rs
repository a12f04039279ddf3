//! The analysis side of the app. The engine owns the `Analysis` and the recording, turns
//! blocks and commands into snapshots for the screen, and saves the run files. In the app
//! it runs on its own thread (`spawn_worker`); tests drive it inline.

use crate::error::Result;
use crate::hits::{TriggerLevel, Verdict};
use crate::modes::Mode;
use crate::pipeline::{Analysis, AnalysisConfig, HitSummary};
use crate::run::recording::RecordingWriter;
use crate::run::{RunFile, Variant, write_run_files};
use crate::signal::{Block, Roles, StreamInfo};
use crate::source::LinkCounters;
use crate::source::live::{Feed, LiveFeed, Request};
use crate::spectra::{Basis, Estimator};
use std::collections::VecDeque;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender, TryRecvError};
use std::time::{Duration, Instant};

/// Seconds of live signal kept for the screen.
pub const TAIL_S: f64 = 2.0;
/// Columns of min/max pairs the live trace is reduced to.
pub const TAIL_BUCKETS: usize = 320;
/// Columns of min/max pairs a hit record is reduced to.
pub const HIT_BUCKETS: usize = 320;
/// How much of the force pulse the last-hit panel shows after the trigger.
pub const FORCE_VIEW_S: f64 = 0.02;
/// How the recording is encoded (written into the run file).
/// Encoding stored when no recorder is open (it failed); otherwise the recorder's own.
pub const WAV_ENCODING: &str = crate::run::recording::FLOAT_ENCODING;
/// The recording is flushed at least this often (stream seconds) besides every hit.
const FLUSH_EVERY_S: f64 = 5.0;

/// What the screen asks of the engine.
#[derive(Debug, Clone, PartialEq)]
pub enum Cmd {
    /// Operator verdict on hit `index` (0-based).
    Decide {
        index: usize,
        accept: bool,
    },
    SetLevel(TriggerLevel),
    SetEstimator(Estimator),
    SetBasis(Basis),
    /// While disarmed, blocks are recorded but not searched for hits.
    SetArmed(bool),
    SetLabel(String),
    Save,
    /// Fire a simulated tap (handled by whoever owns the source).
    Tap,
    /// Close this run's files and start a fresh analysis and recording.
    NewRun,
    Shutdown,
}

impl Cmd {
    /// Whether the command changes what a save would write.
    pub fn changes_run(&self) -> bool {
        matches!(
            self,
            Cmd::Decide { .. }
                | Cmd::SetLevel(_)
                | Cmd::SetEstimator(_)
                | Cmd::SetBasis(_)
                | Cmd::SetLabel(_)
                | Cmd::Save
        )
    }
}

/// A signal reduced to min/max pairs, one per screen column or so.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Envelope {
    pub min: Vec<f64>,
    pub max: Vec<f64>,
    /// Time the envelope spans, seconds.
    pub span_s: f64,
}

impl Envelope {
    pub fn of(x: &[f64], buckets: usize, fs: f64) -> Self {
        let n = x.len();
        let b = buckets.max(1).min(n.max(1));
        let (mut min, mut max) = (Vec::with_capacity(b), Vec::with_capacity(b));
        for i in 0..b {
            let (s, e) = (i * n / b, ((i + 1) * n / b).max(i * n / b + 1).min(n));
            let part = &x[s.min(n)..e];
            if part.is_empty() {
                break;
            }
            min.push(part.iter().copied().fold(f64::INFINITY, f64::min));
            max.push(part.iter().copied().fold(f64::NEG_INFINITY, f64::max));
        }
        Envelope {
            min,
            max,
            span_s: n as f64 / fs,
        }
    }

    /// Largest magnitude in the envelope.
    pub fn peak(&self) -> f64 {
        self.min
            .iter()
            .chain(&self.max)
            .fold(0.0_f64, |a, v| a.max(v.abs()))
    }
}

/// One channel of the live view.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    pub channel: usize,
    pub name: String,
    pub unit: String,
    /// Baseline removed.
    pub envelope: Envelope,
}

/// The fast-changing part: the live signal and the counters.
#[derive(Debug, Clone, PartialEq)]
pub struct LiveSnap {
    /// Samples seen since the stream began.
    pub position: u64,
    pub trigger_channel: usize,
    /// Trigger level (deviation from the baseline) in the trigger channel's unit.
    pub threshold: Option<f64>,
    pub traces: Vec<Trace>,
    pub armed: bool,
    pub overrun_frames: u64,
    pub link: Option<LinkCounters>,
    /// Something would be written by a save that is not on disk yet.
    pub unsaved: bool,
    /// Sequence number of the last command the engine has applied.
    pub applied_seq: u64,
    pub recorded_frames: u64,
    /// File stem of this run's files in the output folder.
    pub stem: String,
}

/// The last hit, ready to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct HitView {
    pub number: usize,
    pub verdict: Verdict,
    pub reason: String,
    pub peak_force: Option<f64>,
    pub peak_response: f64,
    /// Force from the record start to `FORCE_VIEW_S` after the trigger.
    pub force: Option<Envelope>,
    /// Response over the whole record.
    pub response: Envelope,
    pub pretrigger_s: f64,
    pub force_unit: String,
    pub response_unit: String,
}

/// A curve for the screen, in dB.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveSnap {
    pub basis: Basis,
    pub freqs: Vec<f64>,
    /// 20 log10 |magnitude|, dB re 1 `unit`.
    pub db: Vec<f64>,
    pub magnitude: Vec<f64>,
    pub coherence: Option<Vec<f64>>,
    pub unit: String,
}

/// The slow-changing part: everything the averaged analysis says.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisSnap {
    /// Increases with every snapshot.
    pub version: u64,
    pub hits: Vec<HitSummary>,
    pub accepted: usize,
    pub last_hit: Option<HitView>,
    pub basis: Basis,
    pub estimator: Estimator,
    pub curve: Option<CurveSnap>,
    pub modes: Vec<Mode>,
    pub resolution_hz: f64,
    /// The current state written as a run file (for comparisons).
    pub run: RunFile,
}

/// Messages from the engine to the screen.
#[derive(Debug, Clone)]
pub enum Update {
    Live(Box<LiveSnap>),
    Analysis(Arc<AnalysisSnap>),
    Saved {
        json: PathBuf,
        wav: PathBuf,
        modes: usize,
        hits: usize,
        /// True for the automatic save after a hit.
        auto: bool,
    },
    /// Something went wrong but the app goes on (a file could not be written...).
    Problem(String),
    /// The source ended (with the reason if it failed).
    Ended(Option<String>),
}

/// What the engine is built from.
#[derive(Debug, Clone)]
pub struct EngineSetup {
    pub info: StreamInfo,
    pub roles: Roles,
    pub config: AnalysisConfig,
    pub out_dir: PathBuf,
    pub label: String,
    /// Bands for the modes' verdicts and the mount's isolation (see `drive`).
    pub drive: Option<crate::drive::Drive>,
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
    stem: String,
    recorder: Option<RecordingWriter>,
    wav_path: PathBuf,
    /// The JSON of this run has been written at least once.
    wrote_json: bool,
    armed: bool,
    tails: Vec<Tail>,
    dirty: bool,
    version: u64,
    applied_seq: u64,
    overrun_frames: u64,
    link: Option<LinkCounters>,
    last_flush: u64,
    /// Stream position (the analysis skips blocks while disarmed).
    position: u64,
    /// New hits are waiting to be saved.
    autosave_due: bool,
}

/// Turn a variant label into a file name stem: letters, digits, '-', '_' and '.'.
pub fn sanitize_stem(label: &str) -> String {
    let s: String = label
        .trim()
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    let s = s.trim_matches('.').to_string();
    if s.is_empty() { "run".into() } else { s }
}

/// A stem for which no .wav, .json or .csv exists yet in `dir`.
pub fn free_stem(dir: &Path, label: &str) -> String {
    let base = sanitize_stem(label);
    let taken = |s: &str| {
        ["wav", "json", "csv"]
            .iter()
            .any(|e| dir.join(format!("{s}.{e}")).exists())
    };
    if !taken(&base) {
        return base;
    }
    (2..)
        .map(|i| format!("{base}-{i}"))
        .find(|s| !taken(s))
        .unwrap_or(base)
}

impl Engine {
    /// Create the engine and start this run's recording in the output folder.
    pub fn new(setup: EngineSetup) -> Result<Engine> {
        let analysis = Analysis::new(&setup.info, setup.roles, setup.config.clone(), true)?;
        std::fs::create_dir_all(&setup.out_dir).map_err(|e| {
            crate::error::Error::from(e).context(format!(
                "cannot create the output folder '{}'",
                setup.out_dir.display()
            ))
        })?;
        let (recorder, stem) = RecordingWriter::create_fresh(
            &setup.out_dir,
            &sanitize_stem(&setup.label),
            &setup.info,
        )?;
        let wav_path = setup.out_dir.join(format!("{stem}.wav"));
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
            stem,
            recorder: Some(recorder),
            wav_path,
            wrote_json: false,
            armed: true,
            tails,
            dirty: false,
            version: 0,
            applied_seq: 0,
            overrun_frames: 0,
            link: None,
            last_flush: 0,
            position: 0,
            autosave_due: false,
        })
    }

    pub fn analysis(&self) -> &Analysis {
        &self.analysis
    }

    pub fn json_path(&self) -> PathBuf {
        self.setup.out_dir.join(format!("{}.json", self.stem))
    }

    pub fn wav_path(&self) -> &Path {
        &self.wav_path
    }

    pub fn set_health(&mut self, overrun_frames: u64, link: Option<LinkCounters>) {
        self.overrun_frames = overrun_frames;
        self.link = link;
    }

    /// Feed one block: record it, update the live view, search it for hits (when armed).
    pub fn push(&mut self, block: &Block) -> Vec<Update> {
        let mut out = Vec::new();
        if let Some(r) = self.recorder.as_mut()
            && let Err(e) = r.append(block)
        {
            out.push(Update::Problem(format!("recording stopped: {e}")));
            self.recorder = None;
        }
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
        let new = if self.armed {
            self.analysis.push(block)
        } else {
            self.analysis.push_disarmed(block)
        };
        if new > 0 {
            self.dirty = true;
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

    fn flush_recording(&mut self, out: &mut Vec<Update>) {
        self.last_flush = self.position;
        if let Some(r) = self.recorder.as_mut()
            && let Err(e) = r.flush()
        {
            out.push(Update::Problem(format!("cannot flush the recording: {e}")));
        }
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
                        self.dirty = true;
                        out.push(Update::Analysis(Arc::new(self.snapshot())));
                    }
                } else {
                    out.push(Update::Problem(format!("there is no tap #{}", index + 1)));
                }
            }
            Cmd::SetLevel(level) => {
                self.analysis.set_trigger_level(level);
                self.dirty |= has_hits;
            }
            Cmd::SetEstimator(e) => {
                self.analysis.set_estimator(e);
                self.dirty |= has_hits;
                out.push(Update::Analysis(Arc::new(self.snapshot())));
            }
            Cmd::SetBasis(b) => {
                let b = match b {
                    Basis::Frf(_) => Basis::Frf(self.analysis.config().estimator),
                    other => other,
                };
                self.analysis.set_basis(Some(b));
                self.dirty |= has_hits;
                out.push(Update::Analysis(Arc::new(self.snapshot())));
            }
            Cmd::SetArmed(a) => self.armed = a,
            Cmd::SetLabel(label) => {
                let label = label.trim().to_string();
                if !label.is_empty() && label != self.label {
                    self.label = label;
                    self.dirty |= has_hits;
                    self.restem(&mut out);
                    out.push(Update::Analysis(Arc::new(self.snapshot())));
                }
            }
            Cmd::Save => out.extend(self.save(false)),
            Cmd::Tap => {}
            Cmd::NewRun => match self.new_run() {
                Ok(()) => out.push(Update::Analysis(Arc::new(self.snapshot()))),
                Err(e) => out.push(Update::Problem(format!("cannot start a new run: {e}"))),
            },
            Cmd::Shutdown => {
                if let Err(e) = self.finish() {
                    out.push(Update::Problem(e.to_string()));
                }
            }
        }
        self.applied_seq = self.applied_seq.max(seq);
        out
    }

    /// Move this run's files to a stem matching the new label.
    fn restem(&mut self, out: &mut Vec<Update>) {
        let dir = self.setup.out_dir.clone();
        if sanitize_stem(&self.label) == self.stem {
            return;
        }
        let stem = free_stem(&dir, &self.label);
        let mut moved = Vec::new();
        for ext in ["wav", "json", "csv"] {
            let (from, to) = (
                dir.join(format!("{}.{ext}", self.stem)),
                dir.join(format!("{stem}.{ext}")),
            );
            let ours = ext == "wav" || self.wrote_json;
            if ours && from.exists() {
                match std::fs::rename(&from, &to) {
                    Ok(()) => moved.push(ext),
                    Err(e) => {
                        out.push(Update::Problem(format!(
                            "cannot rename '{}': {e}; the files keep their names",
                            from.display()
                        )));
                        return;
                    }
                }
            }
        }
        self.stem = stem;
        self.wav_path = dir.join(format!("{}.wav", self.stem));
        if self.wrote_json {
            // The JSON names its recording: rewrite it so it points at the moved WAV.
            out.extend(self.save(true));
        }
    }

    fn new_run(&mut self) -> Result<()> {
        self.finish()?;
        let mut cfg = self.setup.config.clone();
        cfg.trigger.level = self.analysis.config().trigger.level;
        cfg.estimator = self.analysis.config().estimator;
        cfg.basis = self.analysis.config().basis;
        self.analysis = Analysis::new(&self.setup.info, self.setup.roles, cfg, true)?;
        let (recorder, stem) = RecordingWriter::create_fresh(
            &self.setup.out_dir,
            &sanitize_stem(&self.label),
            &self.setup.info,
        )?;
        self.stem = stem;
        self.wav_path = self.setup.out_dir.join(format!("{}.wav", self.stem));
        self.recorder = Some(recorder);
        self.wrote_json = false;
        self.dirty = false;
        Ok(())
    }

    /// Flush the recording and write the run files (JSON + CSV).
    pub fn save(&mut self, auto: bool) -> Vec<Update> {
        let mut out = Vec::new();
        self.flush_recording(&mut out);
        let json = self.json_path();
        let variant = Variant {
            label: self.label.clone(),
            note: format!(
                "recorded with the terminal app from {}",
                self.setup.info.source
            ),
            mass_g: None,
        };
        let wav = self.wav_path.clone();
        let encoding = self
            .recorder
            .as_ref()
            .map_or(WAV_ENCODING, |r| r.encoding());
        let gaps = self
            .recorder
            .as_ref()
            .map_or_else(Vec::new, |r| r.gaps().to_vec());
        let note = crate::run::RecordingNote {
            wav: &wav,
            encoding,
            gaps: &gaps,
        };
        match write_run_files(
            &self.analysis,
            variant,
            &json,
            Some(note),
            self.setup.drive.as_ref(),
        ) {
            Ok(run) => {
                self.wrote_json = true;
                self.dirty = false;
                out.push(Update::Saved {
                    json,
                    wav,
                    modes: run.modes.len(),
                    hits: run.hits_total,
                    auto,
                });
            }
            Err(e) => out.push(Update::Problem(format!("save failed: {e}"))),
        }
        out
    }

    /// Close the recording (valid WAV with its final header).
    pub fn finish(&mut self) -> Result<()> {
        match self.recorder.take() {
            Some(r) => r.finish(),
            None => Ok(()),
        }
    }

    pub fn live(&self) -> LiveSnap {
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
            armed: self.armed,
            overrun_frames: self.overrun_frames,
            link: self.link,
            unsaved: self.dirty && !self.analysis.hits().is_empty(),
            applied_seq: self.applied_seq,
            recorded_frames: self.recorder.as_ref().map_or(0, |r| r.frames()),
            stem: self.stem.clone(),
        }
    }

    pub fn snapshot(&mut self) -> AnalysisSnap {
        self.version += 1;
        let a = &self.analysis;
        // The pipeline's one result: the autosave that follows renders the same value.
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
        let fs = self.setup.info.sample_rate;
        let roles = a.roles();
        let info = a.info();
        let last_hit = a.last_hit().map(|h| {
            let pre = a.detector().pretrigger_len();
            let force = roles.force.map(|f| {
                let end = (pre + (FORCE_VIEW_S * fs) as usize).min(h.record[f].len());
                Envelope::of(&h.record[f][..end], HIT_BUCKETS, fs)
            });
            // The verdict may have changed since (operator decision): read it from the list.
            let summary = a.hits().iter().find(|s| s.number == h.number);
            HitView {
                number: h.number,
                verdict: summary.map_or(h.verdict, |s| s.verdict),
                reason: summary.map_or(h.reason.clone(), |s| s.reason.clone()),
                peak_force: h.peak_force,
                peak_response: h.peak_response,
                force,
                response: Envelope::of(&h.record[roles.response], HIT_BUCKETS, fs),
                pretrigger_s: pre as f64 / fs,
                force_unit: roles
                    .force
                    .map_or(String::new(), |f| info.channels[f].unit.clone()),
                response_unit: info.channels[roles.response].unit.clone(),
            }
        });
        let mut run = RunFile::from_analysis(
            a,
            &result,
            Variant {
                label: self.label.clone(),
                note: String::new(),
                mass_g: None,
            },
        );
        if let Some(d) = &self.setup.drive {
            crate::drive::annotate(&mut run, d, spectra);
        }
        AnalysisSnap {
            version: self.version,
            hits: a.hits().to_vec(),
            accepted: a.accepted(),
            last_hit,
            basis,
            estimator: a.config().estimator,
            curve,
            modes,
            resolution_hz: spectra.resolution_hz,
            run,
        }
    }
}

/// Everything the app's main loop waits on: engine updates and terminal input.
#[derive(Debug, Clone)]
pub enum Inbox {
    Update(Update),
    Key(ratatui::crossterm::event::KeyEvent),
    Resize,
}

/// How often the worker sends the live view.
pub const LIVE_EVERY: Duration = Duration::from_millis(40);

/// Run the engine on its own thread, fed by `feed`; commands come in on `cmds` (with their
/// sequence numbers) and updates go out on `out`. Ends on `Cmd::Shutdown` (after closing
/// the recording) or when the command channel closes.
pub fn spawn_worker(
    mut engine: Engine,
    feed: LiveFeed,
    cmds: Receiver<(u64, Cmd)>,
    out: Sender<Inbox>,
) -> std::thread::JoinHandle<()> {
    std::thread::spawn(move || {
        let send = |u: Update| out.send(Inbox::Update(u)).is_ok();
        let mut ended = false;
        let mut last_live = Instant::now() - LIVE_EVERY;
        loop {
            loop {
                match cmds.try_recv() {
                    Ok((seq, cmd)) => {
                        let stop = cmd == Cmd::Shutdown;
                        if cmd == Cmd::Tap {
                            feed.request(Request::Tap);
                        }
                        for u in engine.command(seq, cmd) {
                            send(u);
                        }
                        if stop {
                            send(Update::Live(Box::new(engine.live())));
                            return;
                        }
                    }
                    Err(TryRecvError::Empty) => break,
                    Err(TryRecvError::Disconnected) => {
                        let _ = engine.finish();
                        return;
                    }
                }
            }
            let mut fed = false;
            if ended {
                // Nothing more to read: wait for commands only.
                match cmds.recv_timeout(Duration::from_millis(100)) {
                    Ok((seq, cmd)) => {
                        let stop = cmd == Cmd::Shutdown;
                        for u in engine.command(seq, cmd) {
                            send(u);
                        }
                        fed = true;
                        if stop {
                            return;
                        }
                    }
                    Err(RecvTimeoutError::Timeout) => {}
                    Err(RecvTimeoutError::Disconnected) => {
                        let _ = engine.finish();
                        return;
                    }
                }
            } else if let Some(first) = feed.recv_timeout(Duration::from_millis(10)) {
                for f in std::iter::once(first).chain(feed.drain()) {
                    match f {
                        Feed::Block(b) => {
                            for u in engine.push(&b) {
                                send(u);
                            }
                            for u in engine.autosave() {
                                send(u);
                            }
                            fed = true;
                        }
                        Feed::Ended(e) => {
                            ended = true;
                            let mut sink = Vec::new();
                            engine.flush_recording(&mut sink);
                            for u in sink {
                                send(u);
                            }
                            send(Update::Ended(e.map(|e| e.to_string())));
                        }
                    }
                }
            }
            engine.set_health(feed.overrun_frames(), feed.link());
            if fed && last_live.elapsed() >= LIVE_EVERY || last_live.elapsed() >= LIVE_EVERY * 10 {
                last_live = Instant::now();
                if !send(Update::Live(Box::new(engine.live()))) {
                    let _ = engine.finish();
                    return;
                }
            }
        }
    })
}
