//! The strip test's and the point walk's parts of the board: the task line (the point to
//! tap, or where to tap the strip), the strip panel (E and G with their uncertainties, the
//! modes taken, the guide) and the walk's shapes (signed bars per point, and a table).
//! Pure drawing over the model; every number comes from the engine or the shape fit.

use super::*;
use crate::shapes::points::ShapeFile;
use crate::strip::session::{BENCH_STEPS, StripOutcome};
use crate::tui::task::{Fit, Task, Walk};
use ratatui::layout::Rect;

/// Width of one mode's bar chart when several stand side by side.
const SHAPE_COLUMN: u16 = 44;

fn cut(text: &str, room: usize) -> String {
    if text.chars().count() <= room {
        text.to_string()
    } else {
        let mut s: String = text.chars().take(room.saturating_sub(1)).collect();
        s.push('~');
        s
    }
}

/// The task line above the board (strip test or point walk).
pub(super) fn draw_task_line(m: &Model, f: &mut Frame, area: Rect) {
    let room = area.width as usize;
    let line = match &m.task {
        Task::Free => return,
        Task::Strip(s) => {
            // The dimensions only where the whole guide still fits beside them.
            let head = if room >= 120 {
                format!(
                    "STRIP {:.0}x{:.1}x{:.2} mm {:.2} g  ",
                    s.strip.length_m * 1e3,
                    s.strip.width_m * 1e3,
                    s.strip.thickness_m * 1e3,
                    s.strip.mass_kg * 1e3
                )
            } else {
                "STRIP ".to_string()
            };
            let rest = if room >= 120 {
                "E: tap mid-face, sensor at one end on the centre line | G: tap a corner, sensor at a corner of the far end"
            } else {
                "E: tap mid-face, sensor end-centre | G: tap corner, sensor far corner"
            };
            Line::from(vec![
                Span::styled(head.clone(), bold().fg(Color::Cyan)),
                Span::raw(cut(rest, room.saturating_sub(head.len()))),
            ])
        }
        Task::Walk(w) => walk_line(w, room),
    };
    f.render_widget(Paragraph::new(line), area);
}

fn walk_line(w: &Walk, room: usize) -> Line<'static> {
    let n = w.points.len();
    let (head, text) = if w.complete {
        let state = match &w.fit {
            Fit::Waiting | Fit::Running => "fitting the shapes...".to_string(),
            Fit::Done(s, p) => format!(
                "{} mode(s) in {}",
                s.modes.len(),
                p.file_name()
                    .map_or(String::new(), |n| n.to_string_lossy().into_owned())
            ),
            Fit::Failed(e) => format!("no shapes: {e}"),
        };
        (
            format!("WALK {n}/{n} "),
            format!("every point recorded; {state}"),
        )
    } else {
        let p = w.point();
        (
            format!("WALK {}/{} ", w.recorded(), n),
            format!(
                "tap {} -> {}.wav{}",
                w.prompt(),
                p.stem,
                if p.done { " (on disk)" } else { "" }
            ),
        )
    };
    Line::from(vec![
        Span::styled(head.clone(), bold().fg(Color::Cyan)),
        Span::styled(cut(&text, room.saturating_sub(head.len())), bold()),
    ])
}

/// E, G and the modes taken, then as much of the guide as fits.
pub(super) fn draw_strip(m: &Model, f: &mut Frame, area: Rect) {
    let block = panel(Line::from(Span::styled(" Strip: E and G ", bold())));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let mut lines = Vec::new();
    let outcome = m.analysis.as_ref().and_then(|a| a.strip.as_ref());
    match outcome {
        None => lines.push(Line::from(Span::styled(
            "E and G show once a tap is kept",
            dim(),
        ))),
        Some(Err(e)) => lines.push(Line::from(Span::styled(e.clone(), dim()))),
        Some(Ok(o)) => {
            let modes = m.analysis.as_ref().map_or(&[][..], |a| &a.modes[..]);
            lines.extend(outcome_lines(o, modes));
        }
    }
    lines.push(Line::from(Span::styled("Where to tap", bold())));
    lines.extend(BENCH_STEPS.iter().map(|s| Line::from(*s)));
    f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: false }), inner);
}

fn outcome_lines(o: &StripOutcome, modes: &[crate::modes::Mode]) -> Vec<Line<'static>> {
    let r = &o.result;
    let gpa = |v: f64| v / 1e9;
    let mut v = vec![
        Line::from(vec![
            Span::styled("E ", bold()),
            Span::raw(format!(
                "{:.2} GPa +- {:.2} (k=2) at {} Hz",
                gpa(r.youngs.value_pa),
                gpa(r.youngs.expanded_uncertainty_pa),
                fmt_hz(r.flexural.hz)
            )),
        ]),
        Line::from(vec![
            Span::styled("G ", bold()),
            Span::raw(format!(
                "{:.3} GPa +- {:.3} (k=2) at {} Hz",
                gpa(r.shear.value_pa),
                gpa(r.shear.expanded_uncertainty_pa),
                fmt_hz(r.torsional.hz)
            )),
        ]),
        Line::from(match r.poisson_ratio {
            Some(mu) => format!("Poisson's ratio {mu:.3} (isotropic)"),
            None => format!(
                "E/G {:.2} (not isotropic: no Poisson's ratio)",
                r.youngs.value_pa / r.shear.value_pa
            ),
        }),
    ];
    for (i, (mode, role)) in modes.iter().zip(&o.identification.roles).enumerate() {
        let style = if i == o.identification.flexural || i == o.identification.torsional {
            bold()
        } else {
            dim()
        };
        v.push(Line::from(Span::styled(
            format!("{:>7} Hz  {role}", fmt_hz(mode.frequency_hz)),
            style,
        )));
    }
    v
}

/// The walk's shapes: bars of one mode or several side by side; or, before the fit, the
/// points and which are recorded.
pub(super) fn draw_shapes(w: &Walk, f: &mut Frame, area: Rect) {
    match &w.fit {
        Fit::Done(s, _) if !s.modes.is_empty() => {
            let cols = (area.width / SHAPE_COLUMN).clamp(1, s.modes.len() as u16);
            let parts = Layout::horizontal(vec![Constraint::Ratio(1, cols as u32); cols as usize])
                .split(area);
            for (k, r) in parts.iter().enumerate() {
                let i = (w.shown + k) % s.modes.len();
                draw_bars(s, i, f, *r);
            }
        }
        _ => draw_points(w, f, area),
    }
}

/// Each point: recorded or not, the one being tapped marked.
pub(super) fn draw_points(w: &Walk, f: &mut Frame, area: Rect) {
    let title = match &w.fit {
        Fit::Running => " Points: fitting the shapes... ".to_string(),
        Fit::Failed(_) => " Points: no shapes (see below) ".to_string(),
        _ => format!(" Points {} of {} recorded ", w.recorded(), w.points.len()),
    };
    let block = panel(Line::from(Span::styled(title, bold())));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let room = inner.width as usize;
    let mut lines: Vec<Line> = w
        .points
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let mark = if i == w.current && !w.complete {
                ">"
            } else {
                " "
            };
            let state = if p.done { "[kept]" } else { "[    ]" };
            let text = format!(
                "{mark}{:>2} {state} {}.wav {} ({})",
                i + 1,
                p.stem,
                p.point.name,
                p.point.direction
            );
            let style = if i == w.current && !w.complete {
                bold()
            } else {
                Style::default()
            };
            Line::from(Span::styled(cut(&text, room), style))
        })
        .collect();
    if let Fit::Failed(e) = &w.fit {
        lines.push(Line::from(Span::styled(e.clone(), bold().fg(Color::Red))));
    }
    f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: false }), inner);
}

/// One bar for an amplitude in -1..1: `half` cells each side of a centre line.
pub fn signed_bar(v: f64, half: usize) -> String {
    let n = (v.abs().min(1.0) * half as f64).round() as usize;
    let (l, r) = if v < 0.0 {
        (format!("{:>half$}", "#".repeat(n)), " ".repeat(half))
    } else {
        (" ".repeat(half), format!("{:<half$}", "#".repeat(n)))
    };
    format!("{l}|{r}")
}

fn draw_bars(s: &ShapeFile, i: usize, f: &mut Frame, area: Rect) {
    let m = &s.modes[i];
    let title = format!(
        " Shape {}/{}: {} Hz, {:.2} % ",
        i + 1,
        s.modes.len(),
        fmt_hz(m.shape.frequency_hz),
        100.0 * m.shape.damping_ratio
    );
    let block = panel(Line::from(Span::styled(title, bold())));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let w = inner.width as usize;
    // "NN name.. +0.00 " then the bars.
    let name_w = (w / 3).clamp(4, 24);
    let half = w.saturating_sub(name_w + 3 + 7 + 1) / 2;
    let mut lines: Vec<Line> = s
        .points
        .iter()
        .zip(&m.shape.amplitudes)
        .enumerate()
        .map(|(p, (pt, v))| {
            let name = cut(&format!("{} {}", pt.name, pt.direction), name_w);
            let color = if *v < 0.0 {
                Color::Magenta
            } else {
                Color::Green
            };
            Line::from(vec![
                Span::raw(format!("{:>2} {name:<name_w$} {v:>+6.2} ", p + 1)),
                Span::styled(signed_bar(*v, half), Style::default().fg(color)),
            ])
        })
        .collect();
    lines.push(Line::from(Span::styled(
        format!(
            "fit error {:.1} %, realness {:.3}{}",
            100.0 * m.fit_error,
            m.shape.realness,
            if m.shape.realness < crate::shapes::points::DOUBTFUL_REALNESS {
                " (signs doubtful)"
            } else {
                ""
            }
        ),
        dim(),
    )));
    f.render_widget(Paragraph::new(lines), inner);
}

/// The shapes as a table: one row per mode, the file's name in the title.
pub(super) fn draw_shape_table(w: &Walk, f: &mut Frame, area: Rect) {
    let Fit::Done(s, path) = &w.fit else {
        return draw_points(w, f, area);
    };
    let name = path
        .file_name()
        .map_or(String::new(), |n| n.to_string_lossy().into_owned());
    let block = panel(Line::from(vec![
        Span::styled(" Shapes ", bold()),
        Span::raw(format!("{name} ")),
    ]));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let mut lines = vec![Line::from(Span::styled(
        cut(
            "  #    f Hz  damp %  fit %  real  largest at",
            inner.width as usize,
        ),
        bold(),
    ))];
    for (i, m) in s.modes.iter().enumerate() {
        let top = m
            .shape
            .amplitudes
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
            .map_or(0, |x| x.0);
        let text = format!(
            "{:>3} {:>7} {:>7.2} {:>6.1} {:>5.2}  {}",
            i + 1,
            fmt_hz(m.shape.frequency_hz),
            100.0 * m.shape.damping_ratio,
            100.0 * m.fit_error,
            m.shape.realness,
            s.points.get(top).map_or("", |p| p.name.as_str())
        );
        let style = if i == w.shown {
            bold()
        } else {
            Style::default()
        };
        lines.push(Line::from(Span::styled(
            cut(&text, inner.width as usize),
            style,
        )));
    }
    for n in &s.notes {
        lines.push(Line::from(Span::styled(format!("note: {n}"), dim())));
    }
    f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: false }), inner);
}
