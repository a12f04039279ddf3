//! The app's file side: the recording (WAV) and the run files (JSON + CSV), written in the
//! order the engine asks. In the app it runs on its own thread so neither the acquisition
//! nor the analysis ever waits on a disk; tests run it inline.
//!
//! The engine prepares what a save writes (`RunFiles`: the mode search is done there) and
//! queues it behind the blocks it recorded, so each JSON describes a WAV that holds at least
//! as many frames as it says.

use super::messages::{Inbox, Update};
use crate::error::Result;
use crate::run::naming::{claim_stem, stem_for};
use crate::run::recording::{Encoding, RecordingWriter};
use crate::run::{RecordingNote, RunFiles};
use crate::signal::{Block, StreamInfo};
use crate::strip::compare::StripFile;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, Sender};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;

/// Encoding written into the run file when the recorder has failed and is gone.
const NO_RECORDER_ENCODING: Encoding = Encoding::Float32;

/// Work for the saver, carried out in order.
pub(crate) enum Job {
    Append(Block),
    Flush,
    /// Write the run files; `generation` is the engine's change count they describe.
    Write {
        files: Box<RunFiles>,
        generation: u64,
        auto: bool,
        /// Strip test: the strip file written beside the run files (`STEM.strip.json`).
        strip: Option<Box<StripFile>>,
    },
    /// Move this run's files to a stem for the new label, then (if the JSON was written
    /// before) write `files` so the JSON names the moved WAV.
    Rename {
        label: String,
        files: Box<RunFiles>,
        generation: u64,
    },
    /// Close this run's recording and start the next one under a stem for `label`, in
    /// `dir` when given (a point walk's next point), else in the same folder.
    NewRecording {
        dir: Option<PathBuf>,
        label: String,
    },
    /// Point walk: write this take's files once more, close its recording and make it
    /// point `index`'s recording `dir/stem.wav` (+ JSON and CSV) without replacing any
    /// file; the take's own files are removed only after that worked. Then nothing is
    /// recorded or written until the next `NewRecording`.
    Keep {
        index: usize,
        files: Box<RunFiles>,
        generation: u64,
        dir: PathBuf,
        stem: String,
    },
    /// Close the recording (valid WAV with its final header).
    Finish,
}

/// What the engine reads back from the saver (shared with the saver's thread).
#[derive(Debug, Clone, Default)]
pub(crate) struct SaverState {
    pub stem: String,
    pub recorded_frames: u64,
    /// The engine generation of the last run files written.
    pub written_generation: u64,
}

/// Owns the recording and the run-file names of the current run.
pub(crate) struct SaverCore {
    out_dir: PathBuf,
    info: StreamInfo,
    stem: String,
    recorder: Option<RecordingWriter>,
    /// The JSON of this run has been written at least once.
    wrote_json: bool,
    /// A write of this run's files was asked for (it may have failed: then the recording
    /// is kept whatever happens).
    asked_to_write: bool,
    state: Arc<Mutex<SaverState>>,
    /// A point was kept and the next take not started: nothing is written.
    parked: bool,
    /// Tests: how long each run-file write takes at least (a slow disk).
    #[cfg(test)]
    pub(crate) slow_writes: Option<std::time::Duration>,
}

impl SaverCore {
    /// Start the first run's recording in `out_dir` under a stem for `label`.
    pub fn start(out_dir: &Path, info: &StreamInfo, label: &str) -> Result<SaverCore> {
        let (recorder, stem) = RecordingWriter::create_fresh(out_dir, label, info)?;
        let state = Arc::new(Mutex::new(SaverState {
            stem: stem.clone(),
            ..SaverState::default()
        }));
        Ok(SaverCore {
            out_dir: out_dir.to_path_buf(),
            info: info.clone(),
            stem,
            recorder: Some(recorder),
            wrote_json: false,
            asked_to_write: false,
            parked: false,
            state,
            #[cfg(test)]
            slow_writes: None,
        })
    }

    pub fn state(&self) -> Arc<Mutex<SaverState>> {
        self.state.clone()
    }

    fn path(&self, ext: &str) -> PathBuf {
        self.out_dir.join(format!("{}.{ext}", self.stem))
    }

    fn publish(&self, written: Option<u64>) {
        let mut s = self.state.lock().unwrap_or_else(|p| p.into_inner());
        s.stem = self.stem.clone();
        s.recorded_frames = self.recorder.as_ref().map_or(0, |r| r.frames());
        if let Some(g) = written {
            s.written_generation = s.written_generation.max(g);
        }
    }

    /// Carry out one job; what the screen should hear about it.
    pub fn handle(&mut self, job: Job) -> Vec<Update> {
        let mut out = Vec::new();
        let mut written = None;
        match job {
            Job::Append(block) => {
                if let Some(r) = self.recorder.as_mut()
                    && let Err(e) = r.append(&block)
                {
                    out.push(Update::Problem(format!("recording stopped: {e}")));
                    self.recorder = None;
                }
            }
            Job::Flush => self.flush(&mut out),
            Job::Write { .. } | Job::Rename { .. } if self.parked => {}
            Job::Write {
                files,
                generation,
                auto,
                strip,
            } => {
                self.asked_to_write = true;
                if self.write(*files, auto, generation, &mut out) {
                    written = Some(generation);
                    if let Some(strip) = strip {
                        let path = self.path("strip.json");
                        if let Err(e) = strip.save(&path) {
                            out.push(Update::Problem(format!("strip file not written: {e}")));
                        }
                    }
                }
            }
            Job::Keep {
                index,
                files,
                generation,
                dir,
                stem,
            } => {
                self.asked_to_write = true;
                if self.keep(index, *files, generation, &dir, &stem, &mut out) {
                    written = Some(generation);
                }
            }
            Job::Rename {
                label,
                files,
                generation,
            } => {
                if self.rename(&label, &mut out)
                    && self.wrote_json
                    && self.write(*files, true, generation, &mut out)
                {
                    written = Some(generation);
                }
            }
            Job::NewRecording { dir, label } => {
                if let Err(e) = self.finish(&mut out) {
                    out.push(Update::Problem(format!("cannot start a new run: {e}")));
                } else {
                    let dir = dir.unwrap_or_else(|| self.out_dir.clone());
                    match RecordingWriter::create_fresh(&dir, &label, &self.info) {
                        Ok((recorder, stem)) => {
                            self.recorder = Some(recorder);
                            self.out_dir = dir;
                            self.stem = stem;
                            self.wrote_json = false;
                            self.asked_to_write = false;
                            self.parked = false;
                        }
                        Err(e) => out.push(Update::Problem(format!("cannot start a new run: {e}"))),
                    }
                }
            }
            Job::Finish => {
                if let Err(e) = self.finish(&mut out) {
                    out.push(Update::Problem(e.to_string()));
                }
            }
        }
        self.publish(written);
        out
    }

    fn flush(&mut self, out: &mut Vec<Update>) {
        if let Some(r) = self.recorder.as_mut()
            && let Err(e) = r.flush()
        {
            out.push(Update::Problem(format!("cannot flush the recording: {e}")));
        }
    }

    /// Flush the recording and write the run files; true when they were written.
    fn write(
        &mut self,
        files: RunFiles,
        auto: bool,
        generation: u64,
        out: &mut Vec<Update>,
    ) -> bool {
        #[cfg(test)]
        if let Some(d) = self.slow_writes {
            std::thread::sleep(d);
        }
        self.flush(out);
        let (json, wav) = (self.path("json"), self.path("wav"));
        let (encoding, gaps) = self.recording_form();
        let note = RecordingNote {
            wav: &wav,
            encoding,
            gaps: &gaps,
        };
        match files.write(&json, Some(note)) {
            Ok(run) => {
                self.wrote_json = true;
                out.push(Update::Saved {
                    json,
                    wav,
                    modes: run.modes.len(),
                    hits: run.hits_total,
                    auto,
                    generation,
                });
                true
            }
            Err(e) => {
                out.push(Update::Problem(format!("save failed: {e}")));
                false
            }
        }
    }

    /// How the open recording holds its samples, and the stretches lost before it.
    fn recording_form(&self) -> (crate::run::recording::Encoding, Vec<(u64, u64)>) {
        self.recorder.as_ref().map_or_else(
            || (NO_RECORDER_ENCODING, Vec::new()),
            |r| (r.encoding(), r.gaps().to_vec()),
        )
    }

    /// The take becomes point `index`'s recording (see `Job::Keep`); true when the point's
    /// files are written. On any failure the take's files stay as they are and say so.
    fn keep(
        &mut self,
        index: usize,
        files: RunFiles,
        generation: u64,
        dir: &Path,
        stem: &str,
        out: &mut Vec<Update>,
    ) -> bool {
        // The take's own files first: whatever happens next, they hold every tap.
        if !self.write(files.clone(), true, generation, out) {
            return false;
        }
        let (encoding, gaps) = self.recording_form();
        if let Some(r) = self.recorder.take()
            && let Err(e) = r.finish()
        {
            out.push(Update::Problem(format!(
                "cannot close the recording '{}': {e}; the point is not kept",
                self.path("wav").display()
            )));
            return false;
        }
        // From here nothing more goes into this take.
        self.parked = true;
        let take_wav = self.path("wav");
        let wav = dir.join(format!("{stem}.wav"));
        let json = dir.join(format!("{stem}.json"));
        let kept = |out: &mut Vec<Update>, why: String| {
            out.push(Update::Problem(format!(
                "{why}; the taps stay in '{}' (+ .json): take the point again after moving the old files away",
                take_wav.display()
            )));
            false
        };
        if crate::run::naming::stem_taken(dir, stem) {
            return kept(
                out,
                format!(
                    "'{}' exists already and is never overwritten",
                    wav.display()
                ),
            );
        }
        // A hard link claims the name exclusively; where links are not possible, an
        // exclusive copy.
        if let Err(e) = std::fs::hard_link(&take_wav, &wav) {
            if e.kind() == std::io::ErrorKind::AlreadyExists {
                return kept(
                    out,
                    format!(
                        "'{}' exists already and is never overwritten",
                        wav.display()
                    ),
                );
            }
            let copied = std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&wav)
                .and_then(|mut to| {
                    std::io::copy(&mut std::fs::File::open(&take_wav)?, &mut to)?;
                    to.sync_all()
                });
            if let Err(e) = copied {
                if e.kind() != std::io::ErrorKind::AlreadyExists {
                    let _ = std::fs::remove_file(&wav);
                }
                return kept(out, format!("cannot write '{}': {e}", wav.display()));
            }
        }
        let note = RecordingNote {
            wav: &wav,
            encoding,
            gaps: &gaps,
        };
        if let Err(e) = files.write(&json, Some(note)) {
            let _ = std::fs::remove_file(&wav);
            return kept(out, format!("cannot write '{}': {e}", json.display()));
        }
        for ext in ["wav", "json", "csv"] {
            let _ = std::fs::remove_file(self.path(ext));
        }
        self.out_dir = dir.to_path_buf();
        self.stem = stem.to_string();
        out.push(Update::PointKept { index, wav });
        true
    }

    /// Move this run's files to the first free stem for `label` (claimed exclusively);
    /// true when the files now carry the new stem.
    fn rename(&mut self, label: &str, out: &mut Vec<Update>) -> bool {
        if stem_for(label) == self.stem {
            return false;
        }
        let stem = match claim_stem(&self.out_dir, label) {
            Ok((stem, _placeholder)) => stem,
            Err(e) => {
                out.push(Update::Problem(format!(
                    "cannot rename the run: {e}; the files keep their names"
                )));
                return false;
            }
        };
        let new = |ext: &str| self.out_dir.join(format!("{stem}.{ext}"));
        for ext in ["wav", "json", "csv", "strip.json"] {
            let from = self.path(ext);
            let ours = ext == "wav" || self.wrote_json;
            if ours && from.exists() {
                // The claimed (empty) WAV is replaced by ours in one step.
                if let Err(e) = std::fs::rename(&from, new(ext)) {
                    if ext == "wav" {
                        let _ = std::fs::remove_file(new("wav"));
                    }
                    out.push(Update::Problem(format!(
                        "cannot rename '{}': {e}; the files keep their names",
                        from.display()
                    )));
                    return false;
                }
            }
        }
        self.stem = stem;
        true
    }

    /// Close the recording. A recording no run file describes and no save was asked for
    /// (no tap landed) is removed, and the screen told so: nothing is left without its
    /// JSON. A recording whose save failed is kept.
    fn finish(&mut self, out: &mut Vec<Update>) -> Result<()> {
        let Some(r) = self.recorder.take() else {
            return Ok(());
        };
        r.finish()?;
        if !self.wrote_json && !self.asked_to_write {
            let wav = self.path("wav");
            match std::fs::remove_file(&wav) {
                Ok(()) => out.push(Update::Problem(format!(
                    "no tap in this run: its recording '{}' was removed",
                    wav.display()
                ))),
                Err(e) => out.push(Update::Problem(format!(
                    "cannot remove the recording '{}' of a run without taps: {e}",
                    wav.display()
                ))),
            }
        }
        Ok(())
    }
}

/// The saver as the engine sees it: inline (tests, the bench) or on its own thread.
pub(crate) enum Saver {
    Inline(Box<SaverCore>),
    Threaded {
        jobs: Sender<Job>,
        thread: Option<JoinHandle<()>>,
    },
    /// Between moving the core to its thread and the thread being set up.
    Gone,
}

impl Saver {
    /// Queue a job; inline, it is done at once and its updates returned.
    pub fn submit(&mut self, job: Job) -> Vec<Update> {
        match self {
            Saver::Inline(core) => core.handle(job),
            Saver::Threaded { jobs, .. } => {
                if jobs.send(job).is_err() {
                    vec![Update::Problem("the file writer has stopped".into())]
                } else {
                    Vec::new()
                }
            }
            Saver::Gone => Vec::new(),
        }
    }

    /// Move the saver to its own thread; its updates go to `out`.
    pub fn detach(&mut self, out: Sender<Inbox>) {
        let Saver::Inline(core) = std::mem::replace(self, Saver::Gone) else {
            return;
        };
        let (tx, rx) = std::sync::mpsc::channel();
        let thread = std::thread::spawn(move || run(*core, rx, out));
        *self = Saver::Threaded {
            jobs: tx,
            thread: Some(thread),
        };
    }

    /// Close the recording and wait until every queued job is done.
    pub fn finish(&mut self) -> Vec<Update> {
        let out = self.submit(Job::Finish);
        if let Saver::Threaded { jobs, thread } = self {
            // Closing the queue ends the thread once it has done everything queued.
            drop(std::mem::replace(jobs, std::sync::mpsc::channel().0));
            if let Some(t) = thread.take() {
                let _ = t.join();
            }
        }
        out
    }
}

fn run(mut core: SaverCore, jobs: Receiver<Job>, out: Sender<Inbox>) {
    for job in jobs {
        for u in core.handle(job) {
            let _ = out.send(Inbox::Update(u));
        }
    }
}
