//! Boxes drawn over the board: help, label entry, run picker, confirmations.

use super::*;
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

pub(super) fn draw_help(m: &Model, f: &mut Frame, area: Rect) {
    let r = centered(area, 78, 24);
    f.render_widget(Clear, r);
    let block = panel(Line::from(Span::styled(" Help: keys and safety ", bold())))
        .title_bottom(Line::from(" any key closes ").right_aligned());
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
    let [keys_area, safety_area] =
        Layout::vertical([Constraint::Min(4), Constraint::Length(safety_h)]).areas(inner);
    let keys: Vec<&(&str, crate::tui::model::Action, &str)> = KEYS
        .iter()
        .filter(|k| m.header.demo || !k.2.contains("(demo)"))
        .collect();
    let half = keys.len().div_ceil(2);
    let [c1, c2] = Layout::horizontal([Constraint::Percentage(50), Constraint::Percentage(50)])
        .areas(keys_area);
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
    f.render_widget(
        Paragraph::new(safety_lines).wrap(Wrap { trim: true }),
        safety_area,
    );
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
