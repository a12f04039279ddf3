//! The shell around model / update / view: carries out effects, talks to the engine (inline
//! for tests, on a worker thread for the app) and runs the terminal loop.

use super::Launch;
use super::engine::{Cmd, Engine, EngineSetup, Inbox, Update, Worker, spawn_worker};
use super::model::{Effect, Header, LoadedRun, Model, Msg, update};
use super::task::{Fit, Task};
use super::view::view;
use super::walk_fit::{self, FitJob};
use crate::error::{Error, Result};
use crate::run::RunFile;
use crate::run::curve_read::read_curve_csv;
use crate::source::Source;
use crate::source::live::LiveFeed;
use crate::spectra::Basis;
use ratatui::Terminal;
use ratatui::backend::{Backend, TestBackend};
use ratatui::buffer::Buffer;
use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender};
use std::time::{Duration, Instant};

/// Shortest time between two frames (about 30 frames per second at most).
pub const MIN_FRAME: Duration = Duration::from_millis(33);
/// Longest wait without a redraw (keeps the clock-driven parts fresh).
pub const IDLE_FRAME: Duration = Duration::from_millis(500);

enum Link {
    /// Tests and the bench: the engine runs in the caller's thread, fed by `pump`.
    Inline {
        engine: Box<Engine>,
        source: Box<dyn Source>,
        ended: bool,
    },
    /// The app: the engine runs on a worker thread fed by the acquisition thread.
    Threaded {
        cmds: Sender<(u64, Cmd)>,
        worker: Worker,
    },
}

/// The app: its model plus the way to the engine.
pub struct App {
    pub model: Model,
    link: Link,
    compare_with: Vec<PathBuf>,
    /// The session's channel roles and settings (the point walk's fit needs them).
    fit_with: (crate::signal::Roles, crate::pipeline::AnalysisConfig),
    /// Threaded: where work done off the loop (the shape fit) reports.
    inbox: Option<Sender<Inbox>>,
}

fn prepare(launch: &Launch, task: Task) -> Result<(Engine, Model)> {
    let info = launch.source.info().clone();
    let mut label = if launch.variant.trim().is_empty() {
        "run".to_string()
    } else {
        launch.variant.trim().to_string()
    };
    let mut out_dir = launch.out_dir.clone();
    let mut header_dir = launch.out_dir.clone();
    let mut strip = None;
    let mut parked = false;
    match &task {
        Task::Free => {}
        Task::Strip(s) => strip = Some(*s),
        Task::Walk(w) => {
            // A take of the current point, recorded beside the plan's recording.
            out_dir = w.point().dir.clone();
            label = w.point().take_label();
            header_dir = w.plan.parent().unwrap_or(Path::new(".")).to_path_buf();
            parked = w.complete;
        }
    }
    let mut engine = Engine::new(EngineSetup {
        info: info.clone(),
        roles: launch.roles,
        config: launch.config.clone(),
        out_dir,
        label: label.clone(),
        drive: launch.drive.clone(),
        strip,
    })?;
    if parked {
        engine.park();
    }
    let a = engine.analysis();
    let mut available = Vec::new();
    if launch.roles.force.is_some() {
        available.push(Basis::Frf(a.config().estimator));
    }
    available.push(Basis::Autospectrum);
    if launch.roles.base.is_some() {
        available.push(Basis::Transmissibility);
    }
    let header = Header {
        source: info.source.clone(),
        sample_rate: info.sample_rate,
        channels: info.channels.clone(),
        roles: launch.roles,
        demo: launch.demo,
        out_dir: header_dir,
        available,
        band_hz: a.config().modes.band_hz,
        resolution_hz: info.sample_rate / a.detector().record_len() as f64,
    };
    let mut model = Model::new(
        header,
        a.config().trigger.level,
        a.config().estimator,
        a.basis(),
    );
    model.label = label;
    model.auto_tap_s = launch.auto_tap_s.filter(|s| *s > 0.0);
    model.auto_tap_on = launch.demo && model.auto_tap_s.is_some();
    model.drive = launch.drive.clone();
    model.task = task;
    Ok((engine, model))
}

impl App {
    /// An app whose engine runs inline; feed it with `pump`. No terminal, no threads.
    pub fn headless(launch: Launch) -> Result<App> {
        Self::headless_with(launch, Task::Free)
    }

    /// As `headless`, for a strip test or a point walk.
    pub fn headless_with(launch: Launch, task: Task) -> Result<App> {
        let (engine, model) = prepare(&launch, task)?;
        let mut app = App {
            fit_with: (launch.roles, launch.config.clone()),
            inbox: None,
            model,
            link: Link::Inline {
                engine: Box::new(engine),
                source: launch.source,
                ended: false,
            },
            compare_with: launch.compare_with,
        };
        app.load_initial();
        Ok(app)
    }

    /// An app whose engine runs on a worker thread fed by a live acquisition thread;
    /// updates arrive on `inbox` (feed them to `inbox_msg`).
    pub fn threaded(launch: Launch, inbox: Sender<Inbox>) -> Result<App> {
        Self::threaded_with(launch, Task::Free, inbox)
    }

    /// As `threaded`, for a strip test or a point walk.
    pub fn threaded_with(launch: Launch, task: Task, inbox: Sender<Inbox>) -> Result<App> {
        let (engine, model) = prepare(&launch, task)?;
        let fit_with = (launch.roles, launch.config.clone());
        let feed = LiveFeed::start(launch.source);
        let (tx, rx) = std::sync::mpsc::channel();
        let worker = spawn_worker(engine, feed, rx, inbox.clone());
        let mut app = App {
            fit_with,
            inbox: Some(inbox),
            model,
            link: Link::Threaded { cmds: tx, worker },
            compare_with: launch.compare_with,
        };
        app.load_initial();
        Ok(app)
    }

    fn load_initial(&mut self) {
        if !self.compare_with.is_empty() {
            let paths = self.compare_with.clone();
            self.effect(Effect::LoadRuns(paths));
        }
        // A walk whose points were all recorded before: straight to the shapes.
        if let Task::Walk(w) = &mut self.model.task
            && w.complete
        {
            w.fit = Fit::Running;
            self.model.notice = Some(format!(
                "every point of '{}' has its recording: fitting the shapes...",
                w.plan.display()
            ));
            self.effect(Effect::FitShapes);
        }
    }

    /// Fit the walk's shapes: on a thread of its own in the app (the screen goes on), at
    /// once inline.
    fn fit_shapes(&mut self) {
        let Task::Walk(w) = &self.model.task else {
            return;
        };
        let job = FitJob {
            plan: w.plan.clone(),
            points: w.points.iter().map(|p| p.point.clone()).collect(),
            label: w.label.clone(),
            roles: self.fit_with.0,
            config: self.fit_with.1.clone(),
        };
        let work = move || {
            walk_fit::run(&job)
                .map(|(f, p)| (std::sync::Arc::new(f), p))
                .map_err(|e| e.to_string())
        };
        match &self.inbox {
            Some(tx) => {
                let tx = tx.clone();
                std::thread::spawn(move || {
                    let _ = tx.send(Inbox::Update(Update::Shapes(work())));
                });
            }
            None => self.dispatch(Msg::Update(Update::Shapes(work()))),
        }
    }

    /// Apply a message and carry out everything it asks for.
    pub fn dispatch(&mut self, msg: Msg) {
        for fx in update(&mut self.model, msg) {
            self.effect(fx);
        }
    }

    /// Something from the app's inbox (engine update or terminal input).
    pub fn inbox_msg(&mut self, m: Inbox) {
        match m {
            Inbox::Update(u) => self.dispatch(Msg::Update(u)),
            Inbox::Key(k) => self.dispatch(Msg::Key(k)),
            Inbox::Resize => self.dispatch(Msg::Resize),
            // Only wakes the loop; the caller of `drive` decides how to end.
            Inbox::Signal => {}
        }
    }

    /// Press a key (no modifiers).
    pub fn key(&mut self, code: KeyCode) {
        self.dispatch(Msg::Key(KeyEvent::new(code, KeyModifiers::NONE)));
    }

    /// Type a character key.
    pub fn press(&mut self, c: char) {
        self.key(KeyCode::Char(c));
    }

    fn effect(&mut self, fx: Effect) {
        match fx {
            Effect::Engine(seq, cmd) => self.engine_cmd(seq, cmd),
            Effect::ListRuns => {
                let paths = list_runs(&self.model.header.out_dir, &self.compare_with);
                self.dispatch(Msg::Listed(paths));
            }
            Effect::LoadRuns(paths) => {
                let loaded = paths.iter().map(|p| load_run(p)).collect();
                self.dispatch(Msg::Loaded(loaded));
            }
            Effect::WritePicture => {
                self.model.notice = Some(match crate::plot::view::write_view(&self.model) {
                    Ok(path) => format!("wrote {}", path.display()),
                    Err(e) => e.to_string(),
                });
            }
            Effect::FitShapes => self.fit_shapes(),
            Effect::Quit => self.shutdown(),
        }
    }

    fn engine_cmd(&mut self, seq: u64, cmd: Cmd) {
        match &mut self.link {
            Link::Inline { engine, source, .. } => {
                if cmd == Cmd::Tap {
                    source.tap();
                }
                let mut updates = engine.command(seq, cmd);
                updates.push(Update::Live(Box::new(engine.live())));
                for u in updates {
                    self.dispatch(Msg::Update(u));
                }
            }
            Link::Threaded { cmds, .. } => {
                if cmds.send((seq, cmd)).is_err() {
                    self.model.notice = Some("the analysis has stopped".into());
                }
            }
        }
    }

    /// Inline only: read up to `max_blocks` blocks from the source into the engine.
    /// Returns how many were read (fewer when the source ended).
    pub fn pump(&mut self, max_blocks: usize) -> usize {
        let mut updates = Vec::new();
        let mut n = 0;
        if let Link::Inline {
            engine,
            source,
            ended,
        } = &mut self.link
        {
            while n < max_blocks && !*ended {
                match source.next_block() {
                    Ok(Some(b)) => {
                        updates.extend(engine.push(&b));
                        updates.extend(engine.autosave());
                        n += 1;
                    }
                    Ok(None) => {
                        *ended = true;
                        updates.extend(engine.end_of_stream());
                        updates.push(Update::Ended(None));
                    }
                    Err(e) => {
                        *ended = true;
                        updates.extend(engine.end_of_stream());
                        updates.push(Update::Ended(Some(e.to_string())));
                    }
                }
            }
            updates.push(Update::Live(Box::new(engine.live())));
        }
        for u in updates {
            self.dispatch(Msg::Update(u));
        }
        n
    }

    /// Inline only: read about `seconds` of stream, one block at a time (so that the
    /// model sees every live update, as in the app).
    pub fn pump_seconds(&mut self, seconds: f64) {
        let target = self.model.stream_s() + seconds;
        while self.model.stream_s() < target - 1e-9 {
            if self.pump(1) == 0 {
                break;
            }
        }
    }

    /// Inline only: the engine (for tests that look at files).
    pub fn engine(&self) -> Option<&Engine> {
        match &self.link {
            Link::Inline { engine, .. } => Some(engine),
            Link::Threaded { .. } => None,
        }
    }

    /// Draw the current model into a test backend of the given size.
    pub fn render(&self, width: u16, height: u16) -> Buffer {
        let mut t = Terminal::new(TestBackend::new(width, height)).expect("test backend");
        t.draw(|f| view(&self.model, f)).expect("draw");
        t.backend().buffer().clone()
    }

    /// The rendered screen as text, one line per row.
    pub fn screen(&self, width: u16, height: u16) -> String {
        buffer_text(&self.render(width, height))
    }

    /// Whether the worker thread is still running (always true inline).
    pub fn engine_alive(&self) -> bool {
        match &self.link {
            Link::Inline { .. } => true,
            Link::Threaded { worker, .. } => worker.alive(),
        }
    }

    /// Stop the engine: acquisition stops at once; the recording is closed after every
    /// block taken so far is analysed and every save asked for (sent before) is written.
    /// Threaded, this returns as soon as the acquisition has stopped: `wait_for_files`
    /// waits for the rest.
    pub fn shutdown(&mut self) {
        self.end(Cmd::Shutdown);
    }

    /// Stop the engine when the app is ended from outside (a signal, a lost terminal):
    /// as `shutdown`, but the run files are written first over everything taken (when the
    /// run has taps), so the JSON covers exactly what the WAV holds. Unsaved verdicts,
    /// level or label are kept, as the save-and-quit choice would keep them.
    pub fn stop_saving(&mut self) {
        self.end(Cmd::SaveAndShutdown);
    }

    fn end(&mut self, cmd: Cmd) {
        let seq = self.model.sent_seq + 1;
        match &mut self.link {
            Link::Inline { engine, .. } => {
                // What closing the files says (a recording removed) reaches the model.
                for u in engine.command(seq, cmd) {
                    self.dispatch(Msg::Update(u));
                }
            }
            Link::Threaded { cmds, worker } => {
                let _ = cmds.send((seq, cmd));
                worker.stop_pump();
            }
        }
    }

    /// Threaded: whether analysis or file writing is still finishing after `shutdown`.
    pub fn finishing(&self) -> bool {
        match &self.link {
            Link::Inline { .. } => false,
            Link::Threaded { worker, .. } => worker.finishing(),
        }
    }

    /// Wait until everything taken is analysed and written and the recording is closed.
    pub fn wait_for_files(&mut self) {
        if let Link::Threaded { worker, .. } = &mut self.link {
            worker.wait();
        }
    }
}

/// Text of a buffer, one line per row (trailing spaces kept).
pub fn buffer_text(b: &Buffer) -> String {
    let mut s = String::new();
    for y in 0..b.area.height {
        for x in 0..b.area.width {
            s.push_str(b[(x, y)].symbol());
        }
        s.push('\n');
    }
    s
}

/// Saved runs that can be picked: the given ones, then every *.json in the output folder.
pub fn list_runs(out_dir: &Path, given: &[PathBuf]) -> Vec<PathBuf> {
    let mut found: Vec<PathBuf> = std::fs::read_dir(out_dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.extension().is_some_and(|e| e == "json"))
                .filter(|p| {
                    !p.file_name().is_some_and(|n| {
                        // Simulator truth, strip files and shape files are not runs.
                        let n = n.to_string_lossy();
                        [".truth.json", ".strip.json", ".shapes.json"]
                            .iter()
                            .any(|e| n.ends_with(e))
                    })
                })
                .collect()
        })
        .unwrap_or_default();
    found.sort();
    let mut out: Vec<PathBuf> = given.to_vec();
    for p in found {
        if !out.contains(&p) {
            out.push(p);
        }
    }
    out
}

/// Load a run file and its curve CSV (the curve is optional: a run without one still
/// takes part in the comparison).
pub fn load_run(path: &Path) -> std::result::Result<LoadedRun, String> {
    let run = RunFile::load(path).map_err(|e| e.to_string())?;
    // The CSV path comes from the run file: confined to its folder and to regular files.
    let curve = run
        .csv_path(path)
        .and_then(|p| p.ok())
        .and_then(|p| read_curve_csv(&p).ok());
    let label = if run.variant.label.is_empty() {
        path.file_stem()
            .map_or("run".into(), |s| s.to_string_lossy().into_owned())
    } else {
        run.variant.label.clone()
    };
    Ok(LoadedRun {
        path: path.to_path_buf(),
        label,
        run,
        curve,
    })
}

/// The app's loop over any backend: wait for input or engine updates, apply them, draw at
/// most every `MIN_FRAME`. Returns when the model asks to quit, `stop` says so, or the
/// engine has died. `stop` is asked right after each turn with whether a frame was just
/// drawn (then the frame shows the model as `stop` sees it).
pub fn drive<B: Backend>(
    app: &mut App,
    terminal: &mut Terminal<B>,
    inbox: &Receiver<Inbox>,
    mut stop: impl FnMut(&App, bool) -> bool,
) -> Result<()> {
    let mut dirty = true;
    // Keys and new analysis results are drawn at once; the live trace waits for the cap.
    let mut urgent = false;
    let mut last_draw = Instant::now() - MIN_FRAME;
    loop {
        let mut drew = false;
        if dirty && (urgent || last_draw.elapsed() >= MIN_FRAME)
            || last_draw.elapsed() >= IDLE_FRAME
        {
            terminal
                .draw(|f| view(&app.model, f))
                .map_err(|e| Error::new(format!("cannot draw the screen: {e}")))?;
            last_draw = Instant::now();
            dirty = false;
            urgent = false;
            drew = true;
        }
        if app.model.quit || stop(app, drew) {
            return Ok(());
        }
        if !app.engine_alive() {
            crate::fail!("the analysis thread stopped unexpectedly");
        }
        let wait = if dirty {
            MIN_FRAME.saturating_sub(last_draw.elapsed())
        } else {
            IDLE_FRAME.saturating_sub(last_draw.elapsed())
        };
        match inbox.recv_timeout(wait.max(Duration::from_millis(1))) {
            Ok(m) => {
                let is_urgent = |m: &Inbox| {
                    matches!(
                        m,
                        Inbox::Key(_) | Inbox::Resize | Inbox::Update(Update::Analysis(_))
                    )
                };
                urgent |= is_urgent(&m);
                app.inbox_msg(m);
                while let Ok(m) = inbox.try_recv() {
                    urgent |= is_urgent(&m);
                    app.inbox_msg(m);
                }
                dirty = true;
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => return Ok(()),
        }
    }
}
