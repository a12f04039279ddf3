//! The status bar and the key hints.

use super::*;
use crate::hits::TriggerLevel;
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier};
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

pub(super) fn draw_status(m: &Model, f: &mut Frame, area: Rect) {
    let (acc, total) = m.counts();
    let live = m.live.as_ref();
    let lost = live
        .and_then(|l| l.link)
        .map_or(0, |c| c.packets_lost + c.packets_corrupt);
    let overrun = live.map_or(0, |l| l.overrun_frames);
    let armed = live.map_or(m.armed, |l| l.armed);
    let mut spans = vec![Span::styled(
        " tapmodes ",
        bold().add_modifier(Modifier::REVERSED),
    )];
    spans.push(if armed {
        Span::styled(" ARMED ", bold().fg(Color::Green))
    } else {
        Span::styled(" DISARMED ", bold().fg(Color::Red))
    });
    spans.push(Span::raw(format!("taps {acc}/{total} kept | ")));
    if m.unsaved() {
        spans.push(Span::styled("UNSAVED", bold().fg(Color::Red)));
    } else if total > 0 {
        spans.push(Span::raw("saved"));
    } else {
        spans.push(Span::raw("nothing to save"));
    }
    spans.push(Span::raw(format!(
        " | lost {lost} pkt, overrun {overrun} | {:.0} Hz | '{}'",
        m.header.sample_rate, m.label
    )));
    if m.header.demo && m.auto_tap_on {
        spans.push(Span::raw(format!(
            " | auto-tap {:.1} s",
            m.auto_tap_s.unwrap_or(0.0)
        )));
    }
    spans.push(Span::styled(format!(" | {}", m.header.source), dim()));
    f.render_widget(Paragraph::new(Line::from(spans)), area);
}

pub(super) fn draw_hints(m: &Model, f: &mut Frame, area: Rect) {
    let line = if let Some(n) = &m.notice {
        Line::from(vec![
            Span::styled("> ", bold()),
            Span::styled(n.clone(), bold()),
        ])
    } else if let Some(e) = &m.ended {
        Line::from(Span::styled(
            format!("> source stopped: {e} (s saves, q quits)"),
            bold().fg(Color::Red),
        ))
    } else {
        let mut v = vec![Span::styled("? help", bold())];
        let keys: &[(&str, &str)] = if m.header.demo {
            &[
                ("Space", "tap"),
                ("a", "arm"),
                ("+/-", "level"),
                ("y/x", "keep/drop"),
                ("e", "H1/H2"),
                ("v", "view"),
                ("i/o", "zoom"),
                ("s", "save"),
                ("p", "runs"),
                ("q", "quit"),
            ]
        } else {
            &[
                ("a", "arm"),
                ("+/-", "level"),
                ("y/x", "keep/drop"),
                ("e", "H1/H2"),
                ("v", "view"),
                ("i/o", "zoom"),
                ("l", "label"),
                ("s", "save"),
                ("p", "runs"),
                ("q", "quit"),
            ]
        };
        for (k, what) in keys {
            v.push(Span::raw("  "));
            v.push(Span::styled(*k, bold()));
            v.push(Span::raw(format!(" {what}")));
        }
        Line::from(v)
    };
    f.render_widget(Paragraph::new(line), area);
}

pub(super) fn level_text(m: &Model) -> String {
    match m.level {
        TriggerLevel::Absolute(v) => format!("{} abs", fmt_sig(v)),
        TriggerLevel::NoiseMultiple(k) => format!("{k:.1}x"),
    }
}
