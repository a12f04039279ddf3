//! The live signal and the last tap.

use super::status::level_text;
use super::*;
use crate::tui::engine::{Envelope, HitTraces};
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Canvas, Context, Line as CLine};
use ratatui::widgets::{Paragraph, Wrap};

pub(super) fn draw_signal(m: &Model, f: &mut Frame, area: Rect) {
    let live = m.live.as_ref();
    let th = live.and_then(|l| l.threshold);
    let trig_ch = live.map_or(0, |l| l.trigger_channel);
    let unit = m
        .header
        .channels
        .get(trig_ch)
        .map_or("", |c| c.unit.as_str());
    let trig = match th {
        Some(t) => format!(" trig +-{} {unit} ({}) ", fmt_sig(t), level_text(m)),
        None => " trig: measuring noise ".into(),
    };
    // Narrow panels keep the trigger level whole: tighter spacing first, then without
    // the panel's name.
    let room = area.width.saturating_sub(2) as usize;
    let n = trig.chars().count();
    let (name, trig) = if n + 7 <= room {
        (" Signal", trig)
    } else if n + 5 <= room {
        (" Signal", trig.trim_end().to_string())
    } else {
        ("", trig)
    };
    let title = Line::from(vec![
        Span::styled(name, bold()),
        Span::styled(trig, Style::default().fg(TRIGGER)),
    ]);
    let block = panel(title);
    let inner = block.inner(area);
    f.render_widget(block, area);
    let Some(live) = live else {
        f.render_widget(Paragraph::new("waiting for samples..."), inner);
        return;
    };
    let traces: Vec<_> = if inner.height >= 6 {
        live.traces.iter().collect()
    } else {
        live.traces.iter().take(1).collect()
    };
    if traces.is_empty() {
        return;
    }
    let rows = Layout::vertical(vec![
        Constraint::Ratio(1, traces.len() as u32);
        traces.len()
    ])
    .split(inner);
    for (t, r) in traces.iter().zip(rows.iter()) {
        let thr = (t.channel == live.trigger_channel).then_some(th).flatten();
        let label = format!("{} {} (last {:.1} s)", t.name, t.unit, t.envelope.span_s);
        draw_envelope(f, *r, &t.envelope, thr, &label, None);
    }
}

/// Draw a min/max envelope, symmetric about zero, with optional +-threshold lines and an
/// optional vertical marker at a fraction of the span.
pub(super) fn draw_envelope(
    f: &mut Frame,
    area: Rect,
    env: &Envelope,
    threshold: Option<f64>,
    label: &str,
    mark_at: Option<f64>,
) {
    let n = env.max.len().max(1) as f64;
    // Keep idle noise to about a third of the height: the range is at least four times
    // the mean half-width of the min/max columns.
    let half_width = env
        .min
        .iter()
        .zip(&env.max)
        .map(|(a, b)| 0.5 * (b - a))
        .sum::<f64>()
        / n;
    let peak = env
        .peak()
        .max(threshold.map_or(0.0, |t| 1.3 * t))
        .max(1e-12);
    let r = (1.1 * peak).max(4.0 * half_width);
    let label = if area.width as usize >= label.len() + 10 {
        format!("{label}  +-{}", fmt_sig(r))
    } else {
        label.to_string()
    };
    let canvas = Canvas::default()
        .marker(Marker::Braille)
        .x_bounds([0.0, n])
        .y_bounds([-r, r])
        .paint(move |ctx: &mut Context| {
            for (i, (lo, hi)) in env.min.iter().zip(&env.max).enumerate() {
                let x = i as f64 + 0.5;
                ctx.draw(&CLine::new(x, *lo, x, *hi, Color::Reset));
            }
            if let Some(t) = threshold {
                ctx.layer();
                for y in [t, -t] {
                    ctx.draw(&CLine::new(0.0, y, n, y, TRIGGER));
                }
            }
            if let Some(x) = mark_at {
                ctx.layer();
                ctx.draw(&CLine::new(x * n, -r, x * n, r, CURSOR));
            }
            ctx.layer();
            ctx.print(0.0, r, Span::styled(label.clone(), dim()));
        });
    f.render_widget(canvas, area);
}

/// The selected tap (the latest while the list follows): its verdict, reason and traces.
pub(super) fn draw_last_tap(m: &Model, f: &mut Frame, area: Rect) {
    let a = m.analysis.as_ref();
    let hits = a.map_or(&[][..], |a| &a.hits[..]);
    let sel = hits
        .len()
        .checked_sub(1)
        .map(|last| m.selected.unwrap_or(last).min(last));
    let title = match sel {
        Some(i) => {
            let latest = i + 1 == hits.len();
            let name = if latest {
                format!(" Last tap #{} ", hits[i].number)
            } else {
                format!(" Tap #{} of {} ", hits[i].number, hits.len())
            };
            Line::from(vec![
                Span::styled(name, bold()),
                verdict_span(hits[i].verdict),
                Span::raw(" "),
            ])
        }
        None => Line::from(Span::styled(" Last tap ", bold())),
    };
    let block = panel(title);
    let inner = block.inner(area);
    f.render_widget(block, area);
    let (Some(i), Some(a)) = (sel, a) else {
        let hint = if m.header.demo {
            "no tap yet: press Space for a simulated tap"
        } else {
            "no tap yet: tap the part gently"
        };
        f.render_widget(Paragraph::new(hint).wrap(Wrap { trim: true }), inner);
        return;
    };
    let h = &hits[i];
    let [text, plots] = Layout::vertical([Constraint::Length(2), Constraint::Min(1)]).areas(inner);
    let unit = |c: Option<usize>| {
        c.and_then(|c| m.header.channels.get(c))
            .map_or(String::new(), |c| c.unit.clone())
    };
    let (force_unit, response_unit) = (
        unit(m.header.roles.force),
        unit(Some(m.header.roles.response)),
    );
    let peak = match h.peak_force {
        Some(pf) => format!("peak {} {force_unit}, ", fmt_sig(pf)),
        None => String::new(),
    };
    let head = format!(
        "{peak}response {} {response_unit}: ",
        fmt_sig(h.peak_response)
    );
    // Two rows of text: a longer reason is cut with a pointer to the whole of it.
    let room = 2 * text.width as usize;
    let mut reason = h.reason.clone();
    if head.chars().count() + reason.chars().count() > room {
        let keep = room.saturating_sub(head.chars().count() + 16);
        reason = reason.chars().take(keep).collect::<String>() + "... (Enter: all)";
    }
    let info = Line::from(vec![
        Span::raw(head),
        Span::styled(reason, Style::default().fg(verdict_mark(h.verdict).1)),
    ]);
    f.render_widget(Paragraph::new(info).wrap(Wrap { trim: false }), text);
    match a.traces.get(i).and_then(|t| t.as_deref()) {
        Some(t) => draw_hit_plots(t, &force_unit, &response_unit, f, plots),
        None => f.render_widget(
            Paragraph::new("no record kept for this tap").style(dim()),
            plots,
        ),
    }
}

pub(super) fn draw_hit_plots(
    h: &HitTraces,
    force_unit: &str,
    response_unit: &str,
    f: &mut Frame,
    area: Rect,
) {
    match &h.force {
        Some(force) => {
            let [a, b] =
                Layout::horizontal([Constraint::Percentage(38), Constraint::Percentage(62)])
                    .areas(area);
            let mark = (force.span_s > 0.0).then(|| h.pretrigger_s / force.span_s);
            draw_envelope(
                f,
                a,
                force,
                None,
                &format!("F {} {:.0}ms", force_unit, 1000.0 * force.span_s),
                mark,
            );
            draw_envelope(
                f,
                b,
                &h.response,
                None,
                &format!("resp {} {:.1}s", response_unit, h.response.span_s),
                None,
            );
        }
        None => draw_envelope(
            f,
            area,
            &h.response,
            None,
            &format!("response {}, {:.1} s", response_unit, h.response.span_s),
            None,
        ),
    }
}
