//! Drawing: a pure function of the model. One screen ("bench board"): status bar, live
//! signal, last tap, averaged curve with coherence, tap list, mode table, comparison.
//!
//! Colours are an aid only: every state also has a word or a marker, and the main curves
//! use the terminal's default foreground, so the screen reads on dark and light themes.

mod overlays;
mod plot;
mod signal;
mod status;
mod tables;
mod task_view;

use crate::hits::Verdict;
use crate::tui::model::{Mode, Model, Panel};
use crate::tui::task::Task;
pub use plot::{CurvePlot, decimate};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};
pub use task_view::signed_bar;

/// Smallest usable screen.
pub const MIN_SIZE: (u16, u16) = (60, 16);
/// Colours of overlaid saved runs (the current run uses the default foreground).
pub(super) const OVERLAY_COLORS: [Color; 4] =
    [Color::Blue, Color::Magenta, Color::Cyan, Color::LightRed];
pub(super) const CURSOR: Color = Color::Red;
pub(super) const MODE_MARK: Color = Color::Green;
pub(super) const TRIGGER: Color = Color::Red;
/// Width of the left gutter holding axis labels.
pub(super) const GUTTER: u16 = 6;

pub(super) fn bold() -> Style {
    Style::default().add_modifier(Modifier::BOLD)
}

pub(super) fn dim() -> Style {
    Style::default().add_modifier(Modifier::DIM)
}

/// "148.2" below 1 kHz, "1185" above.
pub fn fmt_hz(f: f64) -> String {
    if f.abs() >= 1000.0 {
        format!("{f:.0}")
    } else {
        format!("{f:.1}")
    }
}

/// A value with about three significant digits.
pub fn fmt_sig(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 {
        "0".into()
    } else if a >= 100.0 {
        format!("{v:.0}")
    } else if a >= 10.0 {
        format!("{v:.1}")
    } else if a >= 1.0 {
        format!("{v:.2}")
    } else if a >= 0.01 {
        format!("{v:.3}")
    } else {
        format!("{v:.2e}")
    }
}

/// Marker and colour of a verdict: a tick for kept taps, a cross for the others.
pub fn verdict_mark(v: Verdict) -> (&'static str, Color) {
    if v.is_accepted() {
        ("+", Color::Green)
    } else {
        ("x", Color::Red)
    }
}

pub(super) fn verdict_span(v: Verdict) -> Span<'static> {
    let (mark, color) = verdict_mark(v);
    Span::styled(
        format!("{mark} {}", v.label()),
        Style::default().fg(color).add_modifier(Modifier::BOLD),
    )
}

pub(super) fn panel(title: impl Into<Line<'static>>) -> Block<'static> {
    Block::default().borders(Borders::ALL).title(title)
}

/// Draw the whole screen.
pub fn view(m: &Model, f: &mut Frame) {
    let area = f.area();
    if area.width < MIN_SIZE.0 || area.height < MIN_SIZE.1 {
        let p = Paragraph::new(format!(
            "tapmodes needs at least {}x{} characters (now {}x{}). Enlarge the window; q quits.",
            MIN_SIZE.0, MIN_SIZE.1, area.width, area.height
        ))
        .wrap(Wrap { trim: true });
        f.render_widget(p, area);
        return;
    }
    let [status, body, hints] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Min(8),
        Constraint::Length(1),
    ])
    .areas(area);
    status::draw_status(m, f, status);
    status::draw_hints(m, f, hints);
    // A strip test or a point walk says what to tap on a line of its own.
    let body = if matches!(m.task, Task::Free) {
        body
    } else {
        let [line, rest] =
            Layout::vertical([Constraint::Length(1), Constraint::Min(6)]).areas(body);
        task_view::draw_task_line(m, f, line);
        rest
    };

    let large = area.height >= 34;
    let bottom_h = if large {
        body.height * 2 / 5
    } else {
        (body.height / 2).clamp(6, 9)
    };
    let [top, bottom] =
        Layout::vertical([Constraint::Min(6), Constraint::Length(bottom_h)]).areas(body);
    let left_w = (top.width * 2 / 5).max(30);
    let [left, right] =
        Layout::horizontal([Constraint::Length(left_w), Constraint::Min(20)]).areas(top);
    let [sig, last] =
        Layout::vertical([Constraint::Percentage(45), Constraint::Percentage(55)]).areas(left);
    signal::draw_signal(m, f, sig);
    signal::draw_last_tap(m, f, last);
    // A walk whose points are all recorded shows the shapes where the curve was.
    let walk = match &m.task {
        Task::Walk(w) => Some(w),
        _ => None,
    };
    match walk {
        Some(w) if w.complete => task_view::draw_shapes(w, f, right),
        _ => plot::draw_curve(m, f, right),
    }
    // Strip test: E and G take the comparison's place (the modes' on narrow screens).
    // Point walk: the points, then the shapes' table.
    let task_panel = |f: &mut Frame, r| match &m.task {
        Task::Strip(_) => task_view::draw_strip(m, f, r),
        Task::Walk(w) => task_view::draw_shape_table(w, f, r),
        Task::Free => tables::draw_compare(m, f, r),
    };
    if area.width >= 140 {
        let [taps, modes, cmp] = Layout::horizontal([
            Constraint::Percentage(30),
            Constraint::Percentage(34),
            Constraint::Percentage(36),
        ])
        .areas(bottom);
        tables::draw_taps(m, f, taps);
        tables::draw_modes(m, f, modes);
        task_panel(f, cmp);
    } else {
        let [taps, rest] =
            Layout::horizontal([Constraint::Length(left_w), Constraint::Min(20)]).areas(bottom);
        tables::draw_taps(m, f, taps);
        match (&m.task, m.panel) {
            (Task::Strip(_), Panel::Modes) => task_panel(f, rest),
            (Task::Walk(w), Panel::Modes) if w.complete => task_panel(f, rest),
            (Task::Walk(_), Panel::Compare) => task_panel(f, rest),
            (_, Panel::Modes) => tables::draw_modes(m, f, rest),
            (_, Panel::Compare) => tables::draw_compare(m, f, rest),
        }
    }

    match &m.mode {
        Mode::Normal => {}
        Mode::Help(page) => overlays::draw_help(m, *page, f, area),
        Mode::TapDetail => overlays::draw_tap_detail(m, f, area),
        Mode::Label(buf) => overlays::draw_label_entry(buf, f, area),
        Mode::Picker { items, cursor } => overlays::draw_picker(m, items, *cursor, f, area),
        Mode::ConfirmQuit => overlays::draw_confirm(
            f,
            area,
            "Quit?",
            &[
                "There are changes that are not saved.",
                "s  save, then quit",
                "q  quit without saving (the recording is kept)",
                "Esc  stay",
            ],
        ),
        Mode::ConfirmLeave { to } => {
            let lines = [
                "This point's take has taps. They stay on disk in".to_string(),
                format!(
                    "'{}.wav' but are not the point's recording.",
                    m.live.as_ref().map_or("the take", |l| l.stem.as_str())
                ),
                format!("y  go to point {}", to + 1),
                "Esc  stay".to_string(),
            ];
            let refs: Vec<&str> = lines.iter().map(String::as_str).collect();
            overlays::draw_confirm(f, area, "Leave this point?", &refs)
        }
        Mode::ConfirmNewRun => overlays::draw_confirm(
            f,
            area,
            "New run?",
            &[
                "There are changes that are not saved.",
                "s  save, then start a new run",
                "n  start a new run without saving",
                "Esc  stay",
            ],
        ),
    }
}
