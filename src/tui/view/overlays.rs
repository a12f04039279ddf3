//! Boxes drawn over the board: help, label entry, run picker, confirmations.

use super::*;
use crate::tui::keys::{TASKS, WORDS_BOARD, WORDS_CURVE, WORKFLOW};
use crate::tui::model::{KEYS, Model, SAFETY};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Clear, Paragraph, Wrap};

pub(super) fn centered(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    )
}

/// Titles of the help pages (`keys::HELP_PAGES` of them).
const HELP_TITLES: [&str; crate::tui::keys::HELP_PAGES] = [
    "keys",
    "words on the curve and modes",
    "words on the status line, taps, comparison",
    "how a bench session goes",
    "strip test and point walk",
];

pub(super) fn draw_help(m: &Model, page: usize, f: &mut Frame, area: Rect) {
    let page = page.min(HELP_TITLES.len() - 1);
    let r = centered(area, 78, 24);
    f.render_widget(Clear, r);
    let title = format!(
        " Help {}/{}: {} ",
        page + 1,
        HELP_TITLES.len(),
        HELP_TITLES[page]
    );
    let bottom = if page + 1 < HELP_TITLES.len() {
        " ? next page, Left back, any other key closes "
    } else {
        " Left back, any other key closes "
    };
    let block = panel(Line::from(Span::styled(title, bold())))
        .title_bottom(Line::from(bottom).right_aligned());
    let inner = block.inner(r);
    f.render_widget(block, r);
    let safety_lines: Vec<Line> =
        std::iter::once(Line::from(Span::styled("SAFETY", bold().fg(Color::Red))))
            .chain(SAFETY.iter().map(|s| Line::from(format!("- {s}"))))
            .collect();
    let w = inner.width.max(1) as usize;
    let safety_h = 1 + SAFETY
        .iter()
        .map(|s| (s.len() + 12).div_ceil(w) as u16)
        .sum::<u16>();
    let [top, safety_area] =
        Layout::vertical([Constraint::Min(4), Constraint::Length(safety_h)]).areas(inner);
    match page {
        0 => draw_key_columns(m, f, top),
        1 => draw_words(WORDS_CURVE, f, top),
        2 => draw_words(WORDS_BOARD, f, top),
        3 => {
            let lines: Vec<Line> = WORKFLOW.iter().map(|l| Line::from(*l)).collect();
            f.render_widget(Paragraph::new(lines), top);
        }
        _ => {
            let lines: Vec<Line> = TASKS.iter().map(|l| Line::from(*l)).collect();
            f.render_widget(Paragraph::new(lines), top);
        }
    }
    f.render_widget(
        Paragraph::new(safety_lines).wrap(Wrap { trim: true }),
        safety_area,
    );
}

fn draw_key_columns(m: &Model, f: &mut Frame, area: Rect) {
    let keys: Vec<&(&str, crate::tui::model::Action, &str)> = KEYS
        .iter()
        .filter(|k| m.header.demo || !k.2.contains("(demo)"))
        .collect();
    let half = keys.len().div_ceil(2);
    let [c1, c2] =
        Layout::horizontal([Constraint::Percentage(50), Constraint::Percentage(50)]).areas(area);
    for (col, part) in [(c1, &keys[..half]), (c2, &keys[half..])] {
        let lines: Vec<Line> = part
            .iter()
            .map(|(k, _, what)| {
                Line::from(vec![
                    Span::styled(format!("{k:>10} "), bold()),
                    Span::raw(*what),
                ])
            })
            .collect();
        f.render_widget(Paragraph::new(lines), col);
    }
}

fn draw_words(words: &[(&str, &str)], f: &mut Frame, area: Rect) {
    let lines: Vec<Line> = words
        .iter()
        .map(|(term, meaning)| {
            Line::from(vec![
                Span::styled(format!("{term:>12}  "), bold()),
                Span::raw(*meaning),
            ])
        })
        .collect();
    f.render_widget(Paragraph::new(lines), area);
}

/// The selected tap in full: what the list and the tap panel may have to cut.
pub(super) fn draw_tap_detail(m: &Model, f: &mut Frame, area: Rect) {
    let Some(a) = m.analysis.as_ref() else {
        return;
    };
    let Some(i) = m.selected.filter(|&i| i < a.hits.len()) else {
        return;
    };
    let h = &a.hits[i];
    let fs = m.header.sample_rate;
    let unit = |c: Option<usize>| {
        c.and_then(|c| m.header.channels.get(c))
            .map_or(String::new(), |c| c.unit.clone())
    };
    let mut lines = vec![Line::from(format!(
        "trigger at {:.2} s into the stream",
        h.trigger_sample as f64 / fs
    ))];
    if let Some(pf) = h.peak_force {
        lines.push(Line::from(format!(
            "peak force {} {}",
            fmt_sig(pf),
            unit(m.header.roles.force)
        )));
    }
    lines.push(Line::from(format!(
        "peak response {} {}, left at the record end {:.1} % of it",
        fmt_sig(h.peak_response),
        unit(Some(m.header.roles.response)),
        100.0 * h.residual
    )));
    lines.push(Line::from(""));
    lines.push(Line::from(Span::styled("why:", bold())));
    lines.push(Line::from(Span::styled(
        h.reason.clone(),
        Style::default().fg(verdict_mark(h.verdict).1),
    )));
    if a.traces.get(i).is_some_and(|t| t.is_none()) {
        lines.push(Line::from(Span::styled(
            "no record kept for this tap: it cannot be kept",
            dim(),
        )));
    }
    // As tall as the text (the reason wrapped at the box's width), within the screen.
    let reason_rows = h.reason.chars().count().div_ceil(68).max(1);
    let r = centered(area, 72, (lines.len() + reason_rows + 1) as u16);
    f.render_widget(Clear, r);
    let block = panel(Line::from(vec![
        Span::styled(format!(" Tap #{} of {} ", h.number, a.hits.len()), bold()),
        verdict_span(h.verdict),
        Span::raw(if h.by_operator {
            " (your decision) "
        } else {
            " "
        }),
    ]))
    .title_bottom(Line::from(" y keep  x drop  Up/Down other taps  Esc closes ").right_aligned());
    let inner = block.inner(r);
    f.render_widget(block, r);
    f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: true }), inner);
}

pub(super) fn draw_label_entry(buf: &str, f: &mut Frame, area: Rect) {
    let r = centered(area, 56, 5);
    f.render_widget(Clear, r);
    let block = panel(Line::from(Span::styled(" Variant label ", bold())));
    let inner = block.inner(r);
    f.render_widget(block, r);
    let lines = vec![
        Line::from(vec![
            Span::raw("> "),
            Span::styled(format!("{buf}_"), bold()),
        ]),
        Line::from(Span::styled(
            "Enter keeps it, Esc cancels; files are named after it",
            dim(),
        )),
    ];
    f.render_widget(Paragraph::new(lines), inner);
}

pub(super) fn draw_picker(
    m: &Model,
    items: &[crate::tui::model::PickItem],
    cursor: usize,
    f: &mut Frame,
    area: Rect,
) {
    let h = (items.len() as u16 + 4)
        .min(area.height.saturating_sub(2))
        .max(6);
    let r = centered(area, 72, h);
    f.render_widget(Clear, r);
    let block = panel(Line::from(Span::styled(" Saved runs to overlay ", bold())))
        .title_bottom(Line::from(" Space marks, Enter loads, Esc cancels ").right_aligned());
    let inner = block.inner(r);
    f.render_widget(block, r);
    let visible = inner.height.max(1) as usize;
    let first = (cursor + 1).saturating_sub(visible);
    let lines: Vec<Line> = items
        .iter()
        .enumerate()
        .skip(first)
        .take(visible)
        .map(|(i, it)| {
            let shown = it
                .path
                .strip_prefix(&m.header.out_dir)
                .unwrap_or(&it.path)
                .display()
                .to_string();
            let text = format!(
                "{} [{}] {shown}",
                if i == cursor { ">" } else { " " },
                if it.chosen { "x" } else { " " }
            );
            if i == cursor {
                Line::from(Span::styled(
                    text,
                    Style::default().add_modifier(Modifier::REVERSED),
                ))
            } else {
                Line::from(text)
            }
        })
        .collect();
    f.render_widget(Paragraph::new(lines), inner);
}

pub(super) fn draw_confirm(f: &mut Frame, area: Rect, title: &str, lines: &[&str]) {
    let r = centered(area, 52, lines.len() as u16 + 2);
    f.render_widget(Clear, r);
    let block = panel(Line::from(Span::styled(format!(" {title} "), bold())));
    let inner = block.inner(r);
    f.render_widget(block, r);
    let text: Vec<Line> = lines.iter().map(|l| Line::from(*l)).collect();
    f.render_widget(Paragraph::new(text), inner);
}
