//! The status bar and the key hints.

use super::*;
use crate::hits::TriggerLevel;
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

fn width(spans: &[Span]) -> usize {
    spans.iter().map(|s| s.content.chars().count()).sum()
}

/// Cut `text` to `room` characters, marking the cut with "~".
fn cut(text: &str, room: usize) -> String {
    if text.chars().count() <= room {
        text.to_string()
    } else if room == 0 {
        String::new()
    } else {
        text.chars().take(room - 1).collect::<String>() + "~"
    }
}

/// The status line: trigger and recording state, taps, save state, link health, rate,
/// label, source; what gives way on narrow screens is said below.
pub(super) fn draw_status(m: &Model, f: &mut Frame, area: Rect) {
    let (acc, total) = m.counts();
    let live = m.live.as_ref();
    let lost = live
        .and_then(|l| l.link)
        .map_or(0, |c| c.packets_lost + c.packets_corrupt);
    let overrun = live.map_or(0, |l| l.overrun_frames);
    let armed = live.map_or(m.armed, |l| l.armed);
    let mut spans = vec![if m.ended.is_some() {
        Span::styled(" SOURCE STOPPED ", bold().fg(Color::Red))
    } else if armed {
        Span::styled(" ARMED ", bold().fg(Color::Green))
    } else {
        Span::styled(" DISARMED ", bold().fg(Color::Red))
    }];
    if let Some(p) = live.and_then(|l| l.recording).filter(|_| m.ended.is_none()) {
        spans.push(Span::styled(
            format!("RECORDING {:>3.0} % ", 100.0 * p),
            bold().fg(Color::Yellow).add_modifier(Modifier::REVERSED),
        ));
        spans.push(Span::raw(" "));
    }
    spans.push(Span::raw(format!("taps {acc}/{total} kept | ")));
    if m.unsaved() {
        spans.push(Span::styled("UNSAVED", bold().fg(Color::Red)));
    } else if total > 0 {
        spans.push(Span::raw("saved"));
    } else {
        spans.push(Span::raw("nothing to save"));
    }
    let health = if lost > 0 || overrun > 0 {
        bold().fg(Color::Red)
    } else {
        Style::default()
    };
    spans.push(Span::raw(" | "));
    spans.push(Span::styled(
        format!("lost {lost} pkt, overrun {overrun}"),
        health,
    ));
    let rate = Span::raw(format!(" | {:.0} Hz", m.header.sample_rate));
    let mut tail = vec![Span::raw(format!(" | '{}'", m.label))];
    if m.header.demo && m.auto_tap_on {
        tail.push(Span::raw(format!(
            " | auto-tap {:.1} s",
            m.auto_tap_s.unwrap_or(0.0)
        )));
    }
    let room = area.width as usize;
    let badge = Span::styled(" tapmodes ", bold().add_modifier(Modifier::REVERSED));
    let source = format!(" | {}", m.header.source);
    // Narrow screens give up, in order: the name badge, the end of the source (cut text
    // is marked "~"), the sample rate, the rest of the source; the label is cut last
    // (marked "~"). The states and counters always stay.
    let fixed = width(&spans) + width(&tail);
    if fixed + rate.content.len() + 6 <= room {
        if fixed + rate.content.len() + badge.content.len() + source.chars().count() <= room {
            spans.insert(0, badge);
        }
        spans.push(rate);
        spans.extend(tail);
        let left = room.saturating_sub(width(&spans));
        spans.push(Span::styled(cut(&source, left), dim()));
    } else if fixed + 6 <= room {
        spans.extend(tail);
        let left = room.saturating_sub(width(&spans));
        spans.push(Span::styled(cut(&source, left), dim()));
    } else {
        let before = width(&spans);
        let label_room = room.saturating_sub(before);
        let joined: String = tail.iter().map(|s| s.content.as_ref()).collect();
        spans.push(Span::raw(cut(&joined, label_room)));
    }
    f.render_widget(Paragraph::new(Line::from(spans)), area);
}

/// The keys that must stay visible whatever the width (right-aligned).
const ALWAYS: [(&str, &str); 4] = [("s", "save"), ("p", "runs"), ("q", "quit"), ("?", "help")];

fn key_spans(keys: &[(&str, &str)]) -> Vec<Span<'static>> {
    let mut v = Vec::new();
    for (i, (k, what)) in keys.iter().enumerate() {
        if i > 0 {
            v.push(Span::raw("  "));
        }
        v.push(Span::styled(k.to_string(), bold()));
        v.push(Span::raw(format!(" {what}")));
    }
    v
}

/// The bottom line: a message or the most useful keys on the left, the keys for save,
/// saved runs, quit and help always on the right.
pub(super) fn draw_hints(m: &Model, f: &mut Frame, area: Rect) {
    let right = key_spans(&ALWAYS);
    let right_w = width(&right) as u16 + 1;
    let [left_area, right_area] =
        Layout::horizontal([Constraint::Min(0), Constraint::Length(right_w)]).areas(area);
    let room = left_area.width as usize;
    let line = if let Some(n) = &m.notice {
        Line::from(vec![
            Span::styled("> ", bold()),
            Span::styled(cut(n, room.saturating_sub(3)), bold()),
        ])
    } else if let Some(e) = &m.ended {
        Line::from(Span::styled(
            cut(&format!("> source stopped: {e}"), room.saturating_sub(1)),
            bold().fg(Color::Red),
        ))
    } else {
        // Most useful first; as many as fit.
        let walk = match &m.task {
            crate::tui::task::Task::Walk(w) => Some(w.complete),
            _ => None,
        };
        let keys: &[(&str, &str)] = if walk == Some(true) {
            &[("b", "next shape"), ("[", "back"), ("r", "point again")]
        } else if walk == Some(false) {
            if m.header.demo {
                &[
                    ("Space", "tap"),
                    ("]", "keep point"),
                    ("[", "back"),
                    ("r", "again"),
                    ("y/x", "keep/drop"),
                    ("Enter", "read tap"),
                ]
            } else {
                &[
                    ("]", "keep point"),
                    ("[", "back"),
                    ("r", "again"),
                    ("y/x", "keep/drop"),
                    ("Enter", "read tap"),
                    ("a", "arm"),
                ]
            }
        } else if m.header.demo {
            &[
                ("Space", "tap"),
                ("y/x", "keep/drop"),
                ("Enter", "read tap"),
                ("l", "label"),
                ("n", "next run"),
                ("v", "view"),
                ("a", "arm"),
                ("+/-", "level"),
                ("e", "H1/H2"),
                ("i/o", "zoom"),
            ]
        } else {
            &[
                ("y/x", "keep/drop"),
                ("Enter", "read tap"),
                ("l", "label"),
                ("n", "next run"),
                ("a", "arm"),
                ("+/-", "level"),
                ("v", "view"),
                ("e", "H1/H2"),
                ("i/o", "zoom"),
            ]
        };
        let mut n = keys.len();
        while n > 0 && width(&key_spans(&keys[..n])) >= room {
            n -= 1;
        }
        Line::from(key_spans(&keys[..n]))
    };
    f.render_widget(Paragraph::new(line), left_area);
    f.render_widget(
        Paragraph::new(Line::from(right)).right_aligned(),
        right_area,
    );
}

pub(super) fn level_text(m: &Model) -> String {
    match m.level {
        TriggerLevel::Absolute(v) => format!("{} abs", fmt_sig(v)),
        TriggerLevel::NoiseMultiple(k) => format!("{k:.1}x"),
    }
}
