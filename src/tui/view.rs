//! Drawing: a pure function of the model. One screen ("bench board"): status bar, live
//! signal, last tap, averaged curve with coherence, tap list, mode table, comparison.
//!
//! Colours are an aid only: every state also has a word or a marker, and the main curves
//! use the terminal's default foreground, so the screen reads on dark and light themes.

use super::engine::{CurveSnap, Envelope, HitView};
use super::model::{KEYS, Mode, Model, Panel, SAFETY};
use crate::hits::{TriggerLevel, Verdict};
use crate::pipeline::HitSummary;
use crate::spectra::Basis;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Canvas, Context, Line as CLine};
use ratatui::widgets::{Block, Borders, Cell, Clear, Paragraph, Row, Table, Wrap};

/// Smallest usable screen.
pub const MIN_SIZE: (u16, u16) = (60, 16);
/// Colours of overlaid saved runs (the current run uses the default foreground).
const OVERLAY_COLORS: [Color; 4] = [Color::Blue, Color::Magenta, Color::Cyan, Color::LightRed];
const CURSOR: Color = Color::Red;
const MODE_MARK: Color = Color::Green;
const TRIGGER: Color = Color::Red;
/// Width of the left gutter holding axis labels.
const GUTTER: u16 = 6;

fn bold() -> Style {
    Style::default().add_modifier(Modifier::BOLD)
}

fn dim() -> Style {
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

fn verdict_span(v: Verdict) -> Span<'static> {
    let (mark, color) = verdict_mark(v);
    Span::styled(
        format!("{mark} {}", v.label()),
        Style::default().fg(color).add_modifier(Modifier::BOLD),
    )
}

fn panel(title: impl Into<Line<'static>>) -> Block<'static> {
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
    draw_status(m, f, status);
    draw_hints(m, f, hints);

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
    draw_signal(m, f, sig);
    draw_last_tap(m, f, last);
    draw_curve(m, f, right);

    if area.width >= 140 {
        let [taps, modes, cmp] = Layout::horizontal([
            Constraint::Percentage(30),
            Constraint::Percentage(34),
            Constraint::Percentage(36),
        ])
        .areas(bottom);
        draw_taps(m, f, taps);
        draw_modes(m, f, modes);
        draw_compare(m, f, cmp);
    } else {
        let [taps, rest] =
            Layout::horizontal([Constraint::Length(left_w), Constraint::Min(20)]).areas(bottom);
        draw_taps(m, f, taps);
        match m.panel {
            Panel::Modes => draw_modes(m, f, rest),
            Panel::Compare => draw_compare(m, f, rest),
        }
    }

    match &m.mode {
        Mode::Normal => {}
        Mode::Help => draw_help(m, f, area),
        Mode::Label(buf) => draw_label_entry(buf, f, area),
        Mode::Picker { items, cursor } => draw_picker(m, items, *cursor, f, area),
        Mode::ConfirmQuit => draw_confirm(
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
        Mode::ConfirmNewRun => draw_confirm(
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

fn draw_status(m: &Model, f: &mut Frame, area: Rect) {
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

fn draw_hints(m: &Model, f: &mut Frame, area: Rect) {
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

fn level_text(m: &Model) -> String {
    match m.level {
        TriggerLevel::Absolute(v) => format!("{} abs", fmt_sig(v)),
        TriggerLevel::NoiseMultiple(k) => format!("{k:.1}x"),
    }
}

fn draw_signal(m: &Model, f: &mut Frame, area: Rect) {
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
    let title = Line::from(vec![
        Span::styled(" Signal ", bold()),
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
fn draw_envelope(
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

fn draw_last_tap(m: &Model, f: &mut Frame, area: Rect) {
    let hit = m.analysis.as_ref().and_then(|a| a.last_hit.as_ref());
    let title = match hit {
        Some(h) => Line::from(vec![
            Span::styled(format!(" Last tap #{} ", h.number), bold()),
            verdict_span(h.verdict),
            Span::raw(" "),
        ]),
        None => Line::from(Span::styled(" Last tap ", bold())),
    };
    let block = panel(title);
    let inner = block.inner(area);
    f.render_widget(block, area);
    let Some(h) = hit else {
        let hint = if m.header.demo {
            "no tap yet: press Space for a simulated tap"
        } else {
            "no tap yet: tap the part gently"
        };
        f.render_widget(Paragraph::new(hint).wrap(Wrap { trim: true }), inner);
        return;
    };
    let [text, plots] = Layout::vertical([Constraint::Length(2), Constraint::Min(1)]).areas(inner);
    let peak = match (h.peak_force, &h.force_unit) {
        (Some(pf), u) => format!("peak {} {u}, ", fmt_sig(pf)),
        _ => String::new(),
    };
    let info = Line::from(vec![
        Span::raw(peak),
        Span::raw(format!(
            "response {} {}: ",
            fmt_sig(h.peak_response),
            h.response_unit
        )),
        Span::styled(
            h.reason.clone(),
            Style::default().fg(verdict_mark(h.verdict).1),
        ),
    ]);
    f.render_widget(Paragraph::new(info).wrap(Wrap { trim: true }), text);
    draw_hit_plots(h, f, plots);
}

fn draw_hit_plots(h: &HitView, f: &mut Frame, area: Rect) {
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
                &format!("F {} {:.0}ms", h.force_unit, 1000.0 * force.span_s),
                mark,
            );
            draw_envelope(
                f,
                b,
                &h.response,
                None,
                &format!("resp {} {:.1}s", h.response_unit, h.response.span_s),
                None,
            );
        }
        None => draw_envelope(
            f,
            area,
            &h.response,
            None,
            &format!("response {}, {:.1} s", h.response_unit, h.response.span_s),
            None,
        ),
    }
}

/// Points of `vals` over `freqs` within `[lo, hi]`, reduced to at most `buckets` points by
/// keeping the largest (or smallest) value of each bucket, so peaks (or dips) survive.
pub fn decimate(
    freqs: &[f64],
    vals: &[f64],
    (lo, hi): (f64, f64),
    buckets: usize,
    keep_max: bool,
) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(buckets + 2);
    let mut cur: Option<(usize, f64, f64)> = None;
    let span = (hi - lo).max(1e-12);
    let start = freqs.partition_point(|&f| f < lo).saturating_sub(1);
    for (k, (&f, &v)) in freqs.iter().zip(vals).enumerate().skip(start) {
        if !v.is_finite() {
            continue;
        }
        let b = (((f - lo) / span) * buckets as f64).floor().max(-1.0) as i64;
        let b = b.clamp(-1, buckets as i64) as usize;
        match cur {
            Some((cb, cf, cv)) if cb == b => {
                if (keep_max && v > cv) || (!keep_max && v < cv) {
                    cur = Some((b, f, v));
                } else {
                    cur = Some((cb, cf, cv));
                }
            }
            Some((_, cf, cv)) => {
                out.push((cf, cv));
                cur = Some((b, f, v));
            }
            None => cur = Some((b, f, v)),
        }
        if f > hi {
            let _ = k;
            break;
        }
    }
    if let Some((_, cf, cv)) = cur {
        out.push((cf, cv));
    }
    out
}

fn nearest(freqs: &[f64], f: f64) -> Option<usize> {
    if freqs.is_empty() {
        return None;
    }
    let i = freqs.partition_point(|&x| x < f).min(freqs.len() - 1);
    Some(
        if i > 0 && (f - freqs[i - 1]).abs() < (freqs[i] - f).abs() {
            i - 1
        } else {
            i
        },
    )
}

fn curve_title(m: &Model, c: Option<&CurveSnap>) -> Line<'static> {
    let basis = c.map_or(m.basis, |c| c.basis);
    let unit = c.map_or(String::new(), |c| format!("dB re 1 {}, ", c.unit));
    let n = m.analysis.as_ref().map_or(0, |a| a.accepted);
    let others: Vec<&str> = m
        .header
        .available
        .iter()
        .filter(|b| std::mem::discriminant(*b) != std::mem::discriminant(&basis))
        .map(|b| match b {
            Basis::Frf(_) => "FRF",
            Basis::Autospectrum => "spectrum",
            Basis::Transmissibility => "transmissibility",
        })
        .collect();
    let mut spans = vec![
        Span::styled(format!(" {} ", basis.label()), bold()),
        Span::raw(format!("{unit}{n} taps averaged ")),
    ];
    if !others.is_empty() {
        spans.push(Span::styled(format!("(v: {}) ", others.join(", ")), dim()));
    }
    Line::from(spans)
}

fn draw_curve(m: &Model, f: &mut Frame, area: Rect) {
    let curve = m.analysis.as_ref().and_then(|a| a.curve.as_ref());
    let block = panel(curve_title(m, curve));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let overlays: Vec<_> = m
        .overlays
        .iter()
        .filter_map(|o| o.curve.as_ref().map(|c| (o, c)))
        .collect();
    if curve.is_none() && overlays.is_empty() {
        let text = if m.counts().1 > 0 {
            "no tap kept yet: the average starts with the first accepted tap"
        } else {
            "the averaged curve appears after the first accepted tap"
        };
        f.render_widget(Paragraph::new(text).wrap(Wrap { trim: true }), inner);
        return;
    }
    let has_coh = curve.is_some_and(|c| c.coherence.is_some());
    let coh_h = if !has_coh {
        0
    } else if inner.height >= 20 {
        6
    } else {
        3
    };
    let legend_h = u16::from(!overlays.is_empty());
    let [plot, coh, xlab, readout, legend] = Layout::vertical([
        Constraint::Min(3),
        Constraint::Length(coh_h),
        Constraint::Length(1),
        Constraint::Length(1),
        Constraint::Length(legend_h),
    ])
    .areas(inner);
    let (lo, hi) = m.view_hz;
    let split = |r: Rect| {
        let [g, p] = Layout::horizontal([Constraint::Length(GUTTER), Constraint::Min(4)]).areas(r);
        (g, p)
    };
    let (pg, pp) = split(plot);
    let buckets = (pp.width as usize * 2).max(16);
    let axis = super::drive_view::FreqAxis::of(m);
    let (x0, x1) = axis.range();
    let cur_pts = curve.map(|c| decimate(&axis.xs(&c.freqs), &c.db, (x0, x1), buckets, true));
    let ov_pts: Vec<Vec<(f64, f64)>> = overlays
        .iter()
        .map(|(_, c)| decimate(&axis.xs(&c.freqs), &c.magnitude_db, (x0, x1), buckets, true))
        .collect();
    let in_view = |p: &&(f64, f64)| p.0 >= x0 && p.0 <= x1;
    let all = cur_pts.iter().flatten().chain(ov_pts.iter().flatten());
    let (mut ymin, mut ymax) = all
        .filter(in_view)
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.1), b.max(p.1))
        });
    if !ymin.is_finite() || !ymax.is_finite() {
        (ymin, ymax) = (-60.0, 0.0);
    }
    ymax = (ymax / 5.0).ceil() * 5.0 + 3.0;
    ymin = ymin.max(ymax - 90.0);
    ymin = (ymin / 5.0).floor() * 5.0 - 2.0;
    if ymax - ymin < 10.0 {
        ymin = ymax - 10.0;
    }
    let modes: Vec<(f64, f64)> = m.analysis.as_ref().map_or(Vec::new(), |a| {
        a.modes
            .iter()
            .filter(|x| x.frequency_hz >= lo && x.frequency_hz <= hi)
            .map(|x| {
                (
                    axis.x(x.frequency_hz),
                    20.0 * x.magnitude.max(1e-300).log10(),
                )
            })
            .collect()
    });
    let cursor = m.cursor_hz;
    let cx = axis.x(cursor);
    let canvas = Canvas::default()
        .marker(Marker::Braille)
        .x_bounds([x0, x1])
        .y_bounds([ymin, ymax])
        .paint(|ctx: &mut Context| {
            for (i, pts) in ov_pts.iter().enumerate() {
                let color = OVERLAY_COLORS[i % OVERLAY_COLORS.len()];
                for w in pts.windows(2) {
                    ctx.draw(&CLine::new(w[0].0, w[0].1, w[1].0, w[1].1, color));
                }
                ctx.layer();
            }
            if let Some(pts) = &cur_pts {
                for w in pts.windows(2) {
                    ctx.draw(&CLine::new(w[0].0, w[0].1, w[1].0, w[1].1, Color::Reset));
                }
                ctx.layer();
            }
            ctx.draw(&CLine::new(cx, ymin, cx, ymax, CURSOR));
            ctx.layer();
            for (fm, y) in &modes {
                ctx.print(
                    *fm,
                    (*y + 2.0).min(ymax),
                    Span::styled("v", bold().fg(MODE_MARK)),
                );
            }
        });
    f.render_widget(canvas, pp);
    super::drive_view::shade_bands(m, f, pp, &axis);
    let gut = vec![Line::from(format!("{:>5.0}", ymax)), Line::from(" dB")];
    f.render_widget(Paragraph::new(gut), pg);
    if pg.height >= 3 {
        let bottom = Rect::new(pg.x, pg.y + pg.height - 1, pg.width, 1);
        f.render_widget(Paragraph::new(format!("{:>5.0}", ymin)), bottom);
    }

    let coh_vals = curve.and_then(|c| c.coherence.as_ref().map(|v| (c, v)));
    if let Some((c, vals)) = coh_vals.filter(|_| coh_h > 0) {
        let (cg, cp) = split(coh);
        let pts = decimate(&axis.xs(&c.freqs), vals, (x0, x1), buckets, false);
        let canvas = Canvas::default()
            .marker(Marker::Braille)
            .x_bounds([x0, x1])
            .y_bounds([0.0, 1.0])
            .paint(|ctx: &mut Context| {
                for w in pts.windows(2) {
                    ctx.draw(&CLine::new(w[0].0, w[0].1, w[1].0, w[1].1, Color::Reset));
                }
                ctx.layer();
                ctx.draw(&CLine::new(cx, 0.0, cx, 1.0, CURSOR));
            });
        f.render_widget(
            Block::default().borders(Borders::TOP).border_style(dim()),
            cp,
        );
        let cp_inner = Rect::new(cp.x, cp.y + 1, cp.width, cp.height.saturating_sub(1));
        f.render_widget(canvas, cp_inner);
        let mut g = vec![Line::from("  coh"), Line::from("  1.0")];
        while g.len() + 1 < cg.height as usize {
            g.push(Line::from(""));
        }
        g.push(Line::from("  0.0"));
        f.render_widget(Paragraph::new(g), cg);
    }

    // Frequency labels under the plots.
    let (_, xp) = split(xlab);
    let w = xp.width as usize;
    let (l, mid, r) = (
        fmt_hz(axis.lo_hz),
        fmt_hz(axis.f_at(0.5)),
        format!("{} Hz{}", fmt_hz(hi), if axis.log { " log" } else { "" }),
    );
    let mut s = l.clone();
    let mid_at = (w / 2).saturating_sub(mid.len() / 2);
    while s.len() < mid_at {
        s.push(' ');
    }
    s.push_str(&mid);
    let r_at = w.saturating_sub(r.len());
    while s.len() < r_at {
        s.push(' ');
    }
    s.push_str(&r);
    f.render_widget(Paragraph::new(s), xp);

    // Cursor read-out.
    let mut spans = vec![Span::styled(
        format!("cursor {} Hz", fmt_hz(cursor)),
        bold().fg(CURSOR),
    )];
    if let Some(c) = curve
        && let Some(i) = nearest(&c.freqs, cursor)
    {
        spans.push(Span::raw(format!(
            "  {:.1} dB ({} {})",
            c.db[i],
            fmt_sig(c.magnitude[i]),
            c.unit
        )));
        if let Some(coh) = &c.coherence {
            spans.push(Span::raw(format!("  coh {:.3}", coh[i])));
        }
    }
    spans.push(Span::styled(
        format!("  view {}-{} Hz", fmt_hz(lo), fmt_hz(hi)),
        dim(),
    ));
    f.render_widget(Paragraph::new(Line::from(spans)), readout);

    if legend_h > 0 {
        let mut spans = vec![Span::raw("now: default colour")];
        for (i, (o, _)) in overlays.iter().enumerate() {
            spans.push(Span::raw("  "));
            spans.push(Span::styled(
                format!("~ {}", o.label),
                Style::default().fg(OVERLAY_COLORS[i % OVERLAY_COLORS.len()]),
            ));
        }
        f.render_widget(Paragraph::new(Line::from(spans)), legend);
    }
}

fn tap_row(h: &HitSummary, wide: bool, selected: bool) -> Row<'static> {
    let (mark, color) = verdict_mark(h.verdict);
    let who = if h.by_operator { "*" } else { "" };
    let mut cells = vec![
        Cell::from(format!("{}{}", if selected { ">" } else { " " }, h.number)),
        Cell::from(Span::styled(
            format!("{mark} {}{who}", h.verdict.label()),
            Style::default().fg(color),
        )),
        Cell::from(h.peak_force.map_or("-".into(), fmt_sig)),
    ];
    if wide {
        cells.push(Cell::from(h.reason.clone()));
    }
    let row = Row::new(cells);
    if selected {
        row.style(Style::default().add_modifier(Modifier::REVERSED))
    } else {
        row
    }
}

fn draw_taps(m: &Model, f: &mut Frame, area: Rect) {
    let hits: &[HitSummary] = m.analysis.as_ref().map_or(&[], |a| &a.hits);
    let (acc, total) = m.counts();
    let title = Line::from(vec![
        Span::styled(" Taps ", bold()),
        Span::raw(format!("{acc} kept of {total} ")),
        Span::styled(if m.follow { "(following) " } else { "" }, dim()),
    ]);
    let block = panel(title);
    let inner = block.inner(area);
    f.render_widget(block, area);
    if hits.is_empty() {
        f.render_widget(Paragraph::new("no taps yet").style(dim()), inner);
        return;
    }
    let wide = inner.width >= 40;
    // Rows for the table; the last line shows the selected tap's reason when narrow.
    let reason_h = u16::from(!wide && inner.height >= 4);
    let [table_area, reason_area] =
        Layout::vertical([Constraint::Min(2), Constraint::Length(reason_h)]).areas(inner);
    let visible = table_area.height.saturating_sub(1) as usize;
    let sel = m.selected.unwrap_or(hits.len() - 1).min(hits.len() - 1);
    let first = (sel + 1).saturating_sub(visible.max(1));
    let rows: Vec<Row> = hits
        .iter()
        .enumerate()
        .skip(first)
        .take(visible)
        .map(|(i, h)| tap_row(h, wide, i == sel))
        .collect();
    let force_unit = m
        .header
        .roles
        .force
        .and_then(|c| m.header.channels.get(c))
        .map_or("-".to_string(), |c| format!("F {}", c.unit));
    let mut header = vec!["#".to_string(), "verdict".into(), force_unit];
    let mut widths = vec![
        Constraint::Length(4),
        Constraint::Length(15),
        Constraint::Length(7),
    ];
    if wide {
        header.push("reason".into());
        widths.push(Constraint::Min(10));
    }
    let table = Table::new(rows, widths).header(Row::new(header).style(bold()));
    f.render_widget(table, table_area);
    if reason_h > 0 {
        let h = &hits[sel];
        f.render_widget(
            Paragraph::new(Line::from(vec![
                Span::styled(format!("#{}: ", h.number), bold()),
                Span::raw(h.reason.clone()),
            ])),
            reason_area,
        );
    }
}

fn draw_modes(m: &Model, f: &mut Frame, area: Rect) {
    let a = m.analysis.as_ref();
    let modes = a.map_or(&[][..], |a| &a.modes[..]);
    let title = Line::from(vec![
        Span::styled(" Modes ", bold()),
        Span::raw(format!(
            "{} found ({}) ",
            modes.len(),
            a.map_or(m.basis, |a| a.basis).label()
        )),
    ]);
    let block = panel(title);
    let inner = block.inner(area);
    f.render_widget(block, area);
    if modes.is_empty() {
        f.render_widget(
            Paragraph::new("no modes yet (they need accepted taps)").style(dim()),
            inner,
        );
        return;
    }
    let wide = inner.width >= 56;
    let near = modes
        .iter()
        .enumerate()
        .min_by(|x, y| {
            (x.1.frequency_hz - m.cursor_hz)
                .abs()
                .total_cmp(&(y.1.frequency_hz - m.cursor_hz).abs())
        })
        .map(|(i, _)| i);
    let rows: Vec<Row> = modes
        .iter()
        .enumerate()
        .map(|(i, md)| {
            let flags = if wide {
                md.flags
                    .iter()
                    .map(|f| f.label())
                    .collect::<Vec<_>>()
                    .join(", ")
            } else {
                md.flags
                    .iter()
                    .map(|f| f.short())
                    .collect::<Vec<_>>()
                    .join("")
            };
            let at = if Some(i) == near { ">" } else { " " };
            let band = a
                .and_then(|a| a.run.modes.get(i))
                .and_then(|x| x.band.as_ref());
            let mut cells = vec![
                Cell::from(format!("{at}{}", i + 1)),
                Cell::from(fmt_hz(md.frequency_hz)),
                Cell::from(
                    md.damping_ratio
                        .map_or("-".into(), |z| format!("{:.2}", 100.0 * z)),
                ),
                Cell::from(md.q.map_or("-".into(), |q| format!("{q:.0}"))),
                Cell::from(md.coherence.map_or("-".into(), |c| format!("{c:.3}"))),
            ];
            if m.drive.is_some() {
                cells.push(Cell::from(super::drive_view::band_cell(band)));
            }
            cells.push(Cell::from(Span::styled(
                flags,
                Style::default().fg(if md.flags.is_empty() {
                    Color::Reset
                } else {
                    Color::Red
                }),
            )));
            Row::new(cells)
        })
        .collect();
    let mut widths = vec![
        Constraint::Length(3),
        Constraint::Length(8),
        Constraint::Length(7),
        Constraint::Length(5),
        Constraint::Length(6),
    ];
    let mut head = vec!["", "f Hz", "damp %", "Q", "coh"];
    if m.drive.is_some() {
        widths.push(Constraint::Length(8));
        head.push("band");
    }
    widths.push(Constraint::Min(5));
    head.push("flags");
    let header = Row::new(head).style(bold());
    let mount = a.map_or_else(Vec::new, |a| super::drive_view::mount_lines(a));
    let mount_h = (mount.len() as u16).min(inner.height.saturating_sub(3));
    let legend_h = u16::from(!wide && inner.height as usize > modes.len() + 2 + mount.len());
    let [t, mt, l] = Layout::vertical([
        Constraint::Min(2),
        Constraint::Length(mount_h),
        Constraint::Length(legend_h),
    ])
    .areas(inner);
    f.render_widget(Table::new(rows, widths).header(header), t);
    if mount_h > 0 {
        f.render_widget(Paragraph::new(mount).wrap(Wrap { trim: false }), mt);
    }
    if legend_h > 0 {
        f.render_widget(
            Paragraph::new("L few lines O overlap C low coh H no half-power W window").style(dim()),
            l,
        );
    }
}

fn draw_compare(m: &Model, f: &mut Frame, area: Rect) {
    let block = panel(Line::from(Span::styled(" Compare: now vs saved ", bold())));
    let inner = block.inner(area);
    f.render_widget(block, area);
    if m.overlays.is_empty() {
        f.render_widget(
            Paragraph::new("no saved run loaded: press p to pick one").style(dim()),
            inner,
        );
        return;
    }
    if m.comparisons.is_empty() {
        f.render_widget(
            Paragraph::new("the comparison needs modes in the current run").style(dim()),
            inner,
        );
        return;
    }
    let mut lines = vec![Line::from(Span::styled(
        format!(
            "{:>9} {:>9} {:>7} {:>7} {:>8}",
            "saved Hz", "now Hz", "df %", "dz pts", "k ratio"
        ),
        bold(),
    ))];
    for (c, o) in m.comparisons.iter().zip(&m.overlays) {
        lines.push(Line::from(Span::styled(format!("vs {}", o.label), bold())));
        for mm in &c.matched {
            lines.push(Line::from(format!(
                "{:>9} {:>9} {:>+7.1} {:>7} {:>8.3}",
                fmt_hz(mm.baseline_hz),
                fmt_hz(mm.variant_hz),
                mm.frequency_change_pct,
                mm.damping_change
                    .map_or("-".into(), |d| format!("{:+.2}", 100.0 * d)),
                mm.stiffness_ratio
            )));
        }
        if !c.only_in_variant.is_empty() || !c.only_in_baseline.is_empty() {
            let list = |v: &[f64]| {
                if v.is_empty() {
                    "-".to_string()
                } else {
                    v.iter().map(|f| fmt_hz(*f)).collect::<Vec<_>>().join(" ")
                }
            };
            lines.push(Line::from(Span::styled(
                format!(
                    "unmatched: saved {} | now {}",
                    list(&c.only_in_baseline),
                    list(&c.only_in_variant)
                ),
                dim(),
            )));
        }
        for w in &c.warnings {
            lines.push(Line::from(Span::styled(
                format!("! {w}"),
                Style::default().fg(Color::Red),
            )));
        }
    }
    lines.push(Line::from(Span::styled(
        "k ratio = (f now / f saved)^2, stiffness ratio at equal mass",
        dim(),
    )));
    f.render_widget(Paragraph::new(lines), inner);
}

fn centered(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    )
}

fn draw_help(m: &Model, f: &mut Frame, area: Rect) {
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
    let keys: Vec<&(&str, super::model::Action, &str)> = KEYS
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

fn draw_label_entry(buf: &str, f: &mut Frame, area: Rect) {
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

fn draw_picker(
    m: &Model,
    items: &[super::model::PickItem],
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

fn draw_confirm(f: &mut Frame, area: Rect, title: &str, lines: &[&str]) {
    let r = centered(area, 52, lines.len() as u16 + 2);
    f.render_widget(Clear, r);
    let block = panel(Line::from(Span::styled(format!(" {title} "), bold())));
    let inner = block.inner(r);
    f.render_widget(block, r);
    let text: Vec<Line> = lines.iter().map(|l| Line::from(*l)).collect();
    f.render_widget(Paragraph::new(text), inner);
}
