//! The app's state and its update function: keys become actions, actions change the model
//! and produce effects (commands for the engine, file work for the app shell).

use super::engine::{AnalysisSnap, Cmd, LiveSnap, Update};
pub use super::keys::{Action, KEYS, SAFETY, action_for};
use super::task::Task;
use crate::hits::TriggerLevel;
use crate::run::RunFile;
use crate::run::compare::{VariantComparison, compare};
use crate::run::curve_read::SavedCurve;
use crate::signal::{ChannelInfo, Roles};
use crate::spectra::{Basis, Estimator};
use ratatui::crossterm::event::{KeyEvent, KeyEventKind};
use std::path::PathBuf;
use std::sync::Arc;

/// Relative frequency distance within which modes are paired in comparisons.
pub const MATCH_TOLERANCE: f64 = 0.2;
/// Trigger level step per key press (factor).
pub const LEVEL_STEP: f64 = 1.25;
/// Period of automatic taps when switched on without one given (s).
pub const DEFAULT_AUTO_TAP_S: f64 = 3.0;
/// Longest variant label accepted in the entry box.
pub const MAX_LABEL: usize = 40;

/// A saved run the operator picked, with its curve for the overlay.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadedRun {
    pub path: PathBuf,
    pub label: String,
    pub run: RunFile,
    pub curve: Option<SavedCurve>,
}

/// One line of the run picker.
#[derive(Debug, Clone, PartialEq)]
pub struct PickItem {
    pub path: PathBuf,
    pub chosen: bool,
}

/// What the keyboard is talking to.
#[derive(Debug, Clone, PartialEq)]
pub enum Mode {
    Normal,
    /// The help overlay at this page (`HELP_PAGES`; one page shows all on large screens).
    Help(usize),
    /// The selected tap in full: verdict, the whole reason, peaks.
    TapDetail,
    /// Typing a variant label.
    Label(String),
    Picker {
        items: Vec<PickItem>,
        cursor: usize,
    },
    ConfirmQuit,
    ConfirmNewRun,
    /// Point walk: leave the current point (its take has taps) for point `to`.
    ConfirmLeave {
        to: usize,
    },
}

/// The lower-right panel on screens too narrow for both tables.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Panel {
    Modes,
    Compare,
}

/// Work the update asks the shell to do.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    /// A command for the engine with its sequence number.
    Engine(u64, Cmd),
    /// List the saved runs that can be picked (then `Msg::Listed`).
    ListRuns,
    /// Load these runs (then `Msg::Loaded`).
    LoadRuns(Vec<PathBuf>),
    /// Write the current view's plot beside the run files (`plot::view`).
    WritePicture,
    /// Point walk: every point is recorded; fit the shapes and write the shape file (then
    /// `Update::Shapes`).
    FitShapes,
    Quit,
}

/// Everything that can happen to the model.
#[derive(Debug, Clone)]
pub enum Msg {
    Key(KeyEvent),
    Action(Action),
    Update(Update),
    Listed(Vec<PathBuf>),
    Loaded(Vec<std::result::Result<LoadedRun, String>>),
    Resize,
}

/// What does not change while the app runs.
#[derive(Debug, Clone, PartialEq)]
pub struct Header {
    pub source: String,
    pub sample_rate: f64,
    pub channels: Vec<ChannelInfo>,
    pub roles: Roles,
    pub demo: bool,
    pub out_dir: PathBuf,
    /// The curves these channels allow, in the order `v` cycles them.
    pub available: Vec<Basis>,
    /// Mode search band (the default frequency axis).
    pub band_hz: (f64, f64),
    pub resolution_hz: f64,
}

/// The whole state of the screen.
#[derive(Debug, Clone)]
pub struct Model {
    pub header: Header,
    pub live: Option<LiveSnap>,
    pub analysis: Option<Arc<AnalysisSnap>>,
    pub mode: Mode,
    pub armed: bool,
    pub level: TriggerLevel,
    pub estimator: Estimator,
    pub basis: Basis,
    pub label: String,
    /// Selected tap (index into the hit list).
    pub selected: Option<usize>,
    /// Selection follows the newest tap.
    pub follow: bool,
    /// Visible frequency range, Hz.
    pub view_hz: (f64, f64),
    pub cursor_hz: f64,
    /// The operator has moved the cursor (until then it sits on the first mode).
    pub cursor_moved: bool,
    pub panel: Panel,
    pub overlays: Vec<LoadedRun>,
    pub comparisons: Vec<VariantComparison>,
    pub auto_tap_s: Option<f64>,
    pub auto_tap_on: bool,
    /// Stream time of the next automatic tap, s.
    pub next_auto_tap: f64,
    /// Latest one-line message (cleared by the next key).
    pub notice: Option<String>,
    pub last_saved: Option<PathBuf>,
    pub ended: Option<String>,
    pub quit: bool,
    /// Sequence number of the last command sent, and of the last that changes the run.
    pub sent_seq: u64,
    pub change_seq: u64,
    /// Logarithmic frequency axis on the curve plot.
    pub log_freq: bool,
    /// The change count held by the last save the engine confirmed.
    pub saved_generation: u64,
    /// The motors' excitation bands drawn on the curve (see `drive`).
    pub drive: Option<crate::drive::Drive>,
    /// What the session is for: the free run, a strip test or a point walk.
    pub task: Task,
}

impl Model {
    pub fn new(header: Header, level: TriggerLevel, estimator: Estimator, basis: Basis) -> Self {
        let band = header.band_hz;
        Model {
            view_hz: band,
            cursor_hz: 0.5 * (band.0 + band.1),
            cursor_moved: false,
            header,
            live: None,
            analysis: None,
            mode: Mode::Normal,
            armed: true,
            level,
            estimator,
            basis,
            label: String::new(),
            selected: None,
            follow: true,
            panel: Panel::Modes,
            overlays: Vec::new(),
            comparisons: Vec::new(),
            auto_tap_s: None,
            auto_tap_on: false,
            next_auto_tap: 1.0,
            notice: None,
            last_saved: None,
            ended: None,
            quit: false,
            sent_seq: 0,
            change_seq: 0,
            log_freq: false,
            saved_generation: 0,
            drive: None,
            task: Task::Free,
        }
    }

    /// Taps so far (accepted, total).
    pub fn counts(&self) -> (usize, usize) {
        self.analysis
            .as_ref()
            .map_or((0, 0), |a| (a.accepted, a.hits.len()))
    }

    /// Whether the state differs from what is on disk.
    pub fn unsaved(&self) -> bool {
        let applied = self.live.as_ref().map_or(0, |l| l.applied_seq);
        // A live view older than the last confirmed save says nothing new.
        let engine = self
            .live
            .as_ref()
            .is_some_and(|l| l.unsaved && l.generation > self.saved_generation);
        let has_hits = self.counts().1 > 0;
        engine || (has_hits && self.change_seq > applied)
    }

    /// Stream time in seconds.
    pub fn stream_s(&self) -> f64 {
        self.live
            .as_ref()
            .map_or(0.0, |l| l.position as f64 / self.header.sample_rate)
    }

    /// The Nyquist frequency: the widest the axis may go.
    pub fn nyquist(&self) -> f64 {
        self.header.sample_rate / 2.0
    }

    pub(super) fn send(&mut self, cmd: Cmd, fx: &mut Vec<Effect>) {
        self.sent_seq += 1;
        if cmd.changes_run() {
            self.change_seq = self.sent_seq;
        }
        fx.push(Effect::Engine(self.sent_seq, cmd));
    }
}

/// Scale a trigger level by `factor`, keeping its kind.
pub fn scale_level(level: TriggerLevel, factor: f64) -> TriggerLevel {
    match level {
        TriggerLevel::Absolute(v) => TriggerLevel::Absolute(v * factor),
        TriggerLevel::NoiseMultiple(k) => TriggerLevel::NoiseMultiple((k * factor).max(1.0)),
    }
}

/// Apply one message; returns the effects for the shell to carry out.
pub fn update(m: &mut Model, msg: Msg) -> Vec<Effect> {
    let mut fx = Vec::new();
    match msg {
        Msg::Key(k) => {
            if k.kind == KeyEventKind::Press {
                super::modal::key(m, k, &mut fx);
            }
        }
        Msg::Action(a) => {
            m.notice = None;
            act(m, a, &mut fx);
        }
        Msg::Update(u) => on_update(m, u, &mut fx),
        Msg::Listed(paths) => {
            let own = m.last_saved.clone();
            let items: Vec<PickItem> = paths
                .into_iter()
                .filter(|p| own.as_ref() != Some(p))
                .map(|p| PickItem {
                    chosen: m.overlays.iter().any(|o| o.path == p),
                    path: p,
                })
                .collect();
            if items.is_empty() {
                m.notice = Some(format!(
                    "no saved runs in '{}' yet (save one with s)",
                    m.header.out_dir.display()
                ));
            } else {
                m.mode = Mode::Picker { items, cursor: 0 };
            }
        }
        Msg::Loaded(results) => {
            let mut problems = Vec::new();
            m.overlays.clear();
            for r in results {
                match r {
                    Ok(run) => m.overlays.push(run),
                    Err(e) => problems.push(e),
                }
            }
            if !problems.is_empty() {
                m.notice = Some(problems.join("; "));
            } else if !m.overlays.is_empty() {
                m.notice = Some(format!("{} saved run(s) overlaid", m.overlays.len()));
                m.panel = Panel::Compare;
            }
            recompare(m);
        }
        Msg::Resize => {}
    }
    fx
}

pub(super) fn act(m: &mut Model, a: Action, fx: &mut Vec<Effect>) {
    let span = m.view_hz.1 - m.view_hz.0;
    let n_hits = m.counts().1;
    match a {
        Action::Help => m.mode = Mode::Help(0),
        Action::TapDetail => {
            if n_hits == 0 {
                m.notice = Some("no tap to read yet".into());
            } else {
                m.selected = Some(m.selected.unwrap_or(n_hits - 1).min(n_hits - 1));
                m.mode = Mode::TapDetail;
            }
        }
        Action::Arm => {
            m.armed = !m.armed;
            m.send(Cmd::SetArmed(m.armed), fx);
        }
        Action::LevelUp | Action::LevelDown => {
            let f = if a == Action::LevelUp {
                LEVEL_STEP
            } else {
                1.0 / LEVEL_STEP
            };
            m.level = scale_level(m.level, f);
            m.send(Cmd::SetLevel(m.level), fx);
        }
        Action::Accept | Action::Reject => match m.selected.filter(|&i| i < n_hits) {
            Some(index) => {
                let accept = a == Action::Accept;
                m.send(Cmd::Decide { index, accept }, fx);
            }
            None => m.notice = Some("no tap to decide on yet".into()),
        },
        Action::SelectUp => {
            if n_hits > 0 {
                let cur = m.selected.unwrap_or(n_hits - 1);
                m.selected = Some(cur.saturating_sub(1));
                m.follow = false;
            }
        }
        Action::SelectDown => {
            if n_hits > 0 {
                let cur = m.selected.unwrap_or(n_hits - 1);
                let next = (cur + 1).min(n_hits - 1);
                m.selected = Some(next);
                m.follow = next == n_hits - 1;
            }
        }
        Action::SelectLatest => {
            m.follow = true;
            m.selected = n_hits.checked_sub(1);
        }
        Action::Estimator => {
            if m.header.roles.force.is_none() {
                m.notice = Some("no force channel: the estimator does not apply".into());
            } else {
                m.estimator = match m.estimator {
                    Estimator::H1 => Estimator::H2,
                    Estimator::H2 => Estimator::H1,
                };
                if let Basis::Frf(_) = m.basis {
                    m.basis = Basis::Frf(m.estimator);
                }
                m.send(Cmd::SetEstimator(m.estimator), fx);
            }
        }
        Action::View => {
            let av = &m.header.available;
            let same = |b: &Basis| std::mem::discriminant(b) == std::mem::discriminant(&m.basis);
            let i = av.iter().position(same).unwrap_or(0);
            let next = match av[(i + 1) % av.len()] {
                Basis::Frf(_) => Basis::Frf(m.estimator),
                b => b,
            };
            if next != m.basis {
                m.basis = next;
                m.send(Cmd::SetBasis(next), fx);
            } else {
                m.notice = Some(format!("only {} is available here", next.label()));
            }
        }
        Action::ZoomIn | Action::ZoomOut => {
            let factor = if a == Action::ZoomIn { 0.5 } else { 2.0 };
            let min_span = (10.0 * m.header.resolution_hz).max(1.0);
            let new_span = (span * factor).clamp(min_span, m.nyquist());
            let c = m.cursor_hz.clamp(m.view_hz.0, m.view_hz.1);
            let frac = if span > 0.0 {
                (c - m.view_hz.0) / span
            } else {
                0.5
            };
            let lo = c - frac * new_span;
            m.view_hz = clamp_range(lo, new_span, m.nyquist());
        }
        Action::LogAxis => m.log_freq = !m.log_freq,
        Action::ZoomReset => {
            m.view_hz = m.header.band_hz;
            m.cursor_hz = m.cursor_hz.clamp(m.view_hz.0, m.view_hz.1);
        }
        Action::PanLeft | Action::PanRight => {
            let d = if a == Action::PanLeft { -0.25 } else { 0.25 } * span;
            m.view_hz = clamp_range(m.view_hz.0 + d, span, m.nyquist());
            m.cursor_hz = m.cursor_hz.clamp(m.view_hz.0, m.view_hz.1);
        }
        Action::CursorLeft | Action::CursorRight => {
            m.cursor_moved = true;
            let d = if a == Action::CursorLeft { -1.0 } else { 1.0 } * span / 80.0;
            m.cursor_hz = (m.cursor_hz + d).clamp(m.view_hz.0, m.view_hz.1);
        }
        Action::NextMode => {
            let modes: Vec<f64> = m
                .analysis
                .as_ref()
                .map(|a| a.modes.iter().map(|x| x.frequency_hz).collect())
                .unwrap_or_default();
            let next = modes
                .iter()
                .copied()
                .filter(|&f| f > m.cursor_hz + 1e-9)
                .fold(None, |acc: Option<f64>, f| {
                    Some(acc.map_or(f, |a| a.min(f)))
                })
                .or_else(|| modes.iter().copied().reduce(f64::min));
            match next {
                Some(f) => {
                    m.cursor_moved = true;
                    m.cursor_hz = f;
                    if f < m.view_hz.0 || f > m.view_hz.1 {
                        m.view_hz = clamp_range(f - span / 2.0, span, m.nyquist());
                    }
                }
                None => m.notice = Some("no modes yet".into()),
            }
        }
        Action::Label if matches!(m.task, Task::Walk(_)) => {
            m.notice = Some("in a point walk the plan names the files".into());
        }
        Action::Label => m.mode = Mode::Label(m.label.clone()),
        Action::KeepPoint | Action::PointBack | Action::Retake | Action::NextShape => {
            super::task::act(m, a, fx)
        }
        Action::Save => {
            if n_hits == 0 {
                m.notice = Some("nothing to save yet: no taps".into());
            } else {
                m.send(Cmd::Save, fx);
            }
        }
        Action::Picker => fx.push(Effect::ListRuns),
        Action::Picture => fx.push(Effect::WritePicture),
        Action::Panel => {
            m.panel = match m.panel {
                Panel::Modes => Panel::Compare,
                Panel::Compare => Panel::Modes,
            }
        }
        Action::Tap => {
            if m.header.demo {
                m.send(Cmd::Tap, fx);
            } else {
                m.notice = Some("tap the part with the hammer (simulated taps: demo only)".into());
            }
        }
        Action::AutoTap => {
            if m.header.demo {
                m.auto_tap_on = !m.auto_tap_on;
                if m.auto_tap_on {
                    let p = *m.auto_tap_s.get_or_insert(DEFAULT_AUTO_TAP_S);
                    m.next_auto_tap = m.stream_s() + 0.2;
                    m.notice = Some(format!("automatic taps every {p:.1} s"));
                } else {
                    m.notice = Some("automatic taps off".into());
                }
            } else {
                m.notice = Some("automatic taps: demo only".into());
            }
        }
        Action::NewRun if matches!(m.task, Task::Walk(_)) => {
            m.notice = Some("in a point walk, r takes this point again".into());
        }
        Action::NewRun => {
            if m.unsaved() {
                m.mode = Mode::ConfirmNewRun;
            } else {
                super::modal::start_new_run(m, fx);
            }
        }
        Action::Quit => {
            if m.unsaved() {
                m.mode = Mode::ConfirmQuit;
            } else {
                m.quit = true;
                fx.push(Effect::Quit);
            }
        }
    }
}

fn clamp_range(lo: f64, span: f64, max: f64) -> (f64, f64) {
    let span = span.min(max);
    let lo = lo.clamp(0.0, max - span);
    (lo, lo + span)
}

fn on_update(m: &mut Model, u: Update, fx: &mut Vec<Effect>) {
    match u {
        Update::Live(l) => {
            m.live = Some(*l);
            let t = m.stream_s();
            if m.header.demo && m.auto_tap_on && m.armed && t >= m.next_auto_tap {
                m.next_auto_tap = t + m.auto_tap_s.unwrap_or(DEFAULT_AUTO_TAP_S);
                m.send(Cmd::Tap, fx);
            }
        }
        Update::Analysis(a) => {
            let n = a.hits.len();
            if m.follow || m.selected.is_some_and(|s| s >= n) {
                m.selected = n.checked_sub(1);
            }
            m.basis = a.basis;
            if !m.cursor_moved
                && let Some(first) = a.modes.first()
            {
                m.cursor_hz = first.frequency_hz;
            }
            m.analysis = Some(a);
            recompare(m);
        }
        Update::Saved {
            json,
            modes,
            hits,
            auto,
            generation,
            ..
        } => {
            m.saved_generation = m.saved_generation.max(generation);
            let name = json
                .file_name()
                .map_or(String::new(), |n| n.to_string_lossy().into_owned());
            m.notice = Some(if auto {
                format!("autosaved {name}: {hits} taps, {modes} modes")
            } else {
                format!("saved {name} (+ .csv, .wav): {hits} taps, {modes} modes")
            });
            m.last_saved = Some(json);
        }
        Update::Problem(p) => m.notice = Some(p),
        Update::Ended(e) => {
            m.ended = Some(e.unwrap_or_else(|| "the source ended".into()));
        }
        Update::PointKept { index, wav } => super::task::point_kept(m, index, &wav, fx),
        Update::Shapes(r) => super::task::shapes_done(m, r),
    }
}

/// Compare the current run against every loaded one.
fn recompare(m: &mut Model) {
    m.comparisons = match &m.analysis {
        Some(a) if !m.overlays.is_empty() => m
            .overlays
            .iter()
            .flat_map(|o| {
                let runs = [
                    (o.path.display().to_string(), o.run.clone()),
                    ("current".to_string(), a.run.clone()),
                ];
                compare(&runs, MATCH_TOLERANCE).variants
            })
            .collect(),
        _ => Vec::new(),
    };
}
