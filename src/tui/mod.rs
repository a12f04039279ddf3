//! The terminal app: model / update / view over the shared pipeline.
//!
//! - `engine`: owns the analysis and the files; runs on a worker thread in the app.
//! - `keys`: the operator's actions, the key map, help and safety text.
//! - `model`: state, `update(&mut Model, Msg) -> Vec<Effect>`.
//! - `view`: `view(&Model, &mut Frame)`, a pure drawing function.
//! - `app`: carries out effects, links model and engine, runs the terminal loop.

pub mod app;
pub mod drive_view;
pub mod engine;
pub mod keys;
mod modal;
pub mod model;
pub mod task;
pub mod view;
pub mod walk_fit;

use crate::error::{Error, Result};
use crate::pipeline::AnalysisConfig;
use crate::signal::Roles;
use crate::source::Source;
use engine::{Inbox, Update};
use ratatui::Terminal;
use ratatui::backend::CrosstermBackend;
use ratatui::crossterm::event::{self, Event, KeyEventKind};
use ratatui::crossterm::terminal::{
    EnterAlternateScreen, LeaveAlternateScreen, disable_raw_mode, enable_raw_mode,
};
use ratatui::crossterm::{cursor, execute};
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

pub use app::App;

/// Everything the app needs to start.
pub struct Launch {
    pub source: Box<dyn Source>,
    pub roles: Roles,
    pub config: AnalysisConfig,
    /// Folder the run files are saved in.
    pub out_dir: PathBuf,
    pub variant: String,
    /// Demo only: seconds between automatic taps (None = taps only on key).
    pub auto_tap_s: Option<f64>,
    /// True when the source is the simulated bench.
    pub demo: bool,
    /// Saved runs to load for overlay and comparison at start.
    pub compare_with: Vec<PathBuf>,
    /// The motors' excitation bands to draw and judge modes against.
    pub drive: Option<crate::drive::Drive>,
}

/// Put the terminal back as it was: cooked mode, main screen, visible cursor.
pub fn restore_terminal() {
    let _ = disable_raw_mode();
    let _ = execute!(std::io::stdout(), LeaveAlternateScreen, cursor::Show);
}

/// Restores the terminal when dropped (normal exit and errors); panics are covered by
/// the hook installed in `enter`.
struct TerminalGuard;

impl TerminalGuard {
    fn enter() -> Result<Self> {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            restore_terminal();
            previous(info);
        }));
        enable_raw_mode().map_err(|e| Error::new(format!("cannot set up the terminal: {e}")))?;
        let guard = TerminalGuard;
        execute!(std::io::stdout(), EnterAlternateScreen, cursor::Hide)
            .map_err(|e| Error::new(format!("cannot set up the terminal: {e}")))?;
        Ok(guard)
    }
}

impl Drop for TerminalGuard {
    fn drop(&mut self) {
        restore_terminal();
    }
}

/// Run the app in the terminal until the operator quits, or until SIGINT, SIGTERM or
/// SIGHUP (or a lost terminal) ends it from outside. Either way the terminal is restored
/// first and the files are finished after; ended from outside, the run files are written
/// over everything taken (see `App::stop_saving`) and the app exits 0.
pub fn run(launch: Launch) -> Result<()> {
    run_with(launch, task::Task::Free)
}

/// As `run`, for a strip test or a point walk.
pub fn run_with(launch: Launch, task: task::Task) -> Result<()> {
    let (tx, rx) = std::sync::mpsc::channel::<Inbox>();
    let signalled = Arc::new(AtomicBool::new(false));
    {
        let (flag, tx) = (signalled.clone(), tx.clone());
        // SIGINT, SIGTERM and SIGHUP (ctrlc's `termination` feature; in raw mode Ctrl-C is
        // a key, not SIGINT). A second handler cannot be installed in one process (tests);
        // ignore that.
        let _ = ctrlc::set_handler(move || {
            flag.store(true, Ordering::SeqCst);
            let _ = tx.send(Inbox::Signal);
        });
    }
    let mut app = App::threaded_with(launch, task, tx.clone())?;
    let started = std::cell::Cell::new(false);
    let result = (|| {
        let _guard = TerminalGuard::enter()?;
        let backend = CrosstermBackend::new(std::io::stdout());
        let mut terminal = Terminal::new(backend)
            .map_err(|e| Error::new(format!("cannot set up the terminal: {e}")))?;
        // Terminal input on its own thread, into the same inbox as the engine's updates,
        // so the loop wakes at once for either.
        std::thread::spawn(move || {
            loop {
                let m = match event::read() {
                    Ok(Event::Key(k)) if k.kind != KeyEventKind::Release => Inbox::Key(k),
                    Ok(Event::Resize(..)) => Inbox::Resize,
                    Ok(_) => continue,
                    Err(_) => return,
                };
                if tx.send(m).is_err() {
                    return;
                }
            }
        });
        // Set up: from here a failed loop keeps everything taken.
        started.set(true);
        let result = app::drive(&mut app, &mut terminal, &rx, |_, _| {
            signalled.load(Ordering::SeqCst)
        });
        // Dropped with a hidden cursor, ratatui's terminal shows it and prints (`eprintln!`,
        // which panics when stderr is a hung-up terminal) if that fails: show it here, and
        // on failure let the terminal go without its drop (the guard restores what can be).
        if terminal.show_cursor().is_err() {
            std::mem::forget(terminal);
        }
        result
    })();
    let by_signal = signalled.load(Ordering::SeqCst);
    if (app.model.quit && !by_signal) || !started.get() {
        // An operator's quit, or a terminal that could not be set up: the recording is
        // closed (and removed if no tap landed), never left empty.
        app.shutdown();
    } else {
        // Ended from outside, or the loop failed (a terminal that went away): keep
        // everything taken. After an operator's quit this finds the engine stopped already.
        app.stop_saving();
    }
    // The screen is gone at once; files still being written are finished before exit.
    // Stderr may be gone too (a hung-up terminal): what cannot be said is not an error.
    if app.finishing() {
        say("tapmodes: finishing the analysis and the run files...");
    }
    app.wait_for_files();
    // What the file side said after the screen was gone (a failed save, a removed
    // recording) goes to the terminal.
    while let Ok(m) = rx.try_recv() {
        if let Inbox::Update(Update::Problem(p)) = m {
            say(&format!("tapmodes: {p}"));
        }
    }
    if by_signal {
        say(
            "tapmodes: stopped by a signal (SIGINT, SIGTERM or SIGHUP); the run files hold everything taken",
        );
        return Ok(());
    }
    result
}

/// One line on stderr, ignoring failure (a terminal hung up).
fn say(line: &str) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr(), "{line}");
}

impl Launch {
    /// A launch on a simulated bench preset (the demo, tests and the bench use it).
    /// `seconds`: stream length (None = endless); `scheduled_taps`: the simulator taps on
    /// its own schedule; `real_time`: pace the blocks with the wall clock.
    pub fn simulated(
        preset: &str,
        seed: u64,
        seconds: Option<f64>,
        scheduled_taps: bool,
        real_time: bool,
        out_dir: PathBuf,
    ) -> Result<Launch> {
        use crate::source::simulator::{Simulator, presets};
        let plan = presets::preset(preset, seed)
            .ok_or_else(|| Error::new(format!("there is no preset '{preset}'")))?;
        let mut sim = Simulator::new(plan, seconds, scheduled_taps);
        if real_time {
            sim = sim.real_time();
        }
        let roles = crate::signal::RoleChoice::default().resolve(sim.info())?;
        Ok(Launch {
            source: Box::new(sim),
            roles,
            config: AnalysisConfig::default(),
            out_dir,
            variant: preset.to_string(),
            auto_tap_s: None,
            demo: true,
            compare_with: Vec::new(),
            drive: None,
        })
    }
}
