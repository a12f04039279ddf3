//! What the screen and the engine say to each other: commands, snapshots, updates.

use crate::hits::TriggerLevel;
use crate::modes::Mode;
use crate::pipeline::HitSummary;
use crate::run::RunFile;
use crate::shapes::points::ShapeFile;
use crate::source::LinkCounters;
use crate::spectra::{Basis, Estimator};
use crate::strip::session::StripOutcome;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

/// Seconds of live signal kept for the screen.
pub const TAIL_S: f64 = 2.0;
/// Columns of min/max pairs the live trace is reduced to.
pub const TAIL_BUCKETS: usize = 320;
/// Columns of min/max pairs a hit record is reduced to.
pub const HIT_BUCKETS: usize = 320;
/// How much of the force pulse the last-hit panel shows after the trigger.
pub const FORCE_VIEW_S: f64 = 0.02;

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
    /// Point walk: make this take the recording of point `index` (`dir/stem.wav` with its
    /// JSON and CSV), never over an existing file; then take no taps until `NewPoint`.
    KeepPoint {
        index: usize,
        dir: PathBuf,
        stem: String,
        /// The point as the run file names it: its name, and where it sits in the plan.
        label: String,
        note: String,
    },
    /// Point walk: a fresh analysis and a new take recorded in `dir` under `label`.
    NewPoint {
        dir: PathBuf,
        label: String,
    },
    /// Close the recording after everything taken so far is analysed and every save asked
    /// for is written (the operator quit).
    Shutdown,
    /// The app is ended from outside (SIGINT, SIGTERM, SIGHUP, a lost terminal): as
    /// `Shutdown`, but first the run files are written over everything taken, when the run
    /// has taps, so the JSON covers exactly the frames and gaps the WAV holds.
    SaveAndShutdown,
}

impl Cmd {
    /// Whether the command ends the engine (nothing after it is carried out).
    pub fn ends(&self) -> bool {
        matches!(self, Cmd::Shutdown | Cmd::SaveAndShutdown)
    }

    /// Whether the command changes what a save would write.
    pub fn changes_run(&self) -> bool {
        matches!(
            self,
            Cmd::Decide { .. }
                | Cmd::SetLevel(_)
                | Cmd::SetEstimator(_)
                | Cmd::SetBasis(_)
                | Cmd::SetLabel(_)
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
    /// Count of changes to the analysis so far: the screen compares it with the count a
    /// `Saved` carries, so a save confirmed before the next live view is not taken for
    /// unsaved changes (one source for the save state).
    pub generation: u64,
    /// Sequence number of the last command the engine has applied.
    pub applied_seq: u64,
    pub recorded_frames: u64,
    /// A tap's record is being taken: the share filled so far (0..1).
    pub recording: Option<f64>,
    /// File stem of this run's files in the output folder.
    pub stem: String,
}

/// The traces of one tap's record, ready to draw (its verdict and numbers are in the
/// `HitSummary` at the same index, which follows the operator's decisions).
#[derive(Debug, Clone, PartialEq)]
pub struct HitTraces {
    pub number: usize,
    /// Force from the record start to `FORCE_VIEW_S` after the trigger.
    pub force: Option<Envelope>,
    /// Response over the whole record.
    pub response: Envelope,
    pub pretrigger_s: f64,
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
    /// Each tap's traces, parallel to `hits`; `None` for taps without a record (too
    /// soon, cut short, interrupted).
    pub traces: Vec<Option<Arc<HitTraces>>>,
    pub basis: Basis,
    pub estimator: Estimator,
    pub curve: Option<CurveSnap>,
    pub modes: Vec<Mode>,
    pub resolution_hz: f64,
    /// The current state written as a run file (for comparisons).
    pub run: RunFile,
    /// Strip test only, once a tap is accepted: E and G and which mode is which, or why
    /// not yet (one sentence).
    pub strip: Option<std::result::Result<StripOutcome, String>>,
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
        /// The engine's change count the files hold (see `LiveSnap::generation`).
        generation: u64,
    },
    /// Something went wrong but the app goes on (a file could not be written...).
    Problem(String),
    /// The source ended (with the reason if it failed).
    Ended(Option<String>),
    /// Point walk: the take is now point `index`'s recording.
    PointKept {
        index: usize,
        wav: PathBuf,
    },
    /// Point walk: the shapes over all points and the file written, or why not.
    Shapes(std::result::Result<(Arc<ShapeFile>, PathBuf), String>),
}

/// Everything the app's main loop waits on: engine updates and terminal input.
#[derive(Debug, Clone)]
pub enum Inbox {
    Update(Update),
    Key(ratatui::crossterm::event::KeyEvent),
    Resize,
    /// SIGINT, SIGTERM or SIGHUP arrived: wakes the loop, which then ends the app.
    Signal,
}

/// How often the worker sends the live view.
pub const LIVE_EVERY: Duration = Duration::from_millis(40);
