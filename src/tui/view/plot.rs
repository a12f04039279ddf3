//! The averaged curve with coherence, overlays, mode marks and the cursor.

use super::*;
use crate::run::curve_read::SavedCurve;
use crate::spectra::Basis;
use crate::tui::drive_view::{FreqAxis, shade_bands};
use crate::tui::engine::CurveSnap;
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;
use ratatui::widgets::canvas::{Canvas, Context, Line as CLine};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

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

pub(super) fn nearest(freqs: &[f64], f: f64) -> Option<usize> {
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

pub(super) fn curve_title(m: &Model, c: Option<&CurveSnap>, room: usize) -> Line<'static> {
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
    // The hint to the other views only where it fits whole (the help has the v key).
    let hint = format!("(v: {}) ", others.join(", "));
    let used: usize = spans.iter().map(|s| s.content.chars().count()).sum();
    if !others.is_empty() && used + hint.len() <= room {
        spans.push(Span::styled(hint, dim()));
    }
    Line::from(spans)
}

pub(super) fn draw_curve(m: &Model, f: &mut Frame, area: Rect) {
    let curve = m.analysis.as_ref().and_then(|a| a.curve.as_ref());
    let room = area.width.saturating_sub(2) as usize;
    let block = panel(curve_title(m, curve, room));
    let inner = block.inner(area);
    f.render_widget(block, area);
    f.render_widget(CurvePlot::of(m), inner);
}

/// The averaged curve (dB) over a frequency view, with coherence below it, saved runs
/// overlaid, mode marks, the cursor and its read-out: a widget over plain data, so it can
/// be drawn and tested on its own.
#[derive(Debug, Clone)]
pub struct CurvePlot<'a> {
    pub curve: Option<&'a CurveSnap>,
    /// Saved runs to overlay: label and curve.
    pub overlays: Vec<(&'a str, &'a SavedCurve)>,
    /// Frequencies shown, Hz.
    pub view_hz: (f64, f64),
    pub cursor_hz: f64,
    /// Modes to mark: frequency (Hz) and magnitude (linear, the curve's unit).
    pub modes: Vec<(f64, f64)>,
    /// Shown instead when there is no curve and no overlay.
    pub empty_text: &'a str,
    /// Logarithmic frequency axis.
    pub log_freq: bool,
    /// The motors' excitation bands to shade (see `drive`).
    pub drive: Option<&'a crate::drive::Drive>,
}

impl<'a> CurvePlot<'a> {
    /// The plot of the model's current state.
    pub fn of(m: &'a Model) -> CurvePlot<'a> {
        CurvePlot {
            curve: m.analysis.as_ref().and_then(|a| a.curve.as_ref()),
            overlays: m
                .overlays
                .iter()
                .filter_map(|o| o.curve.as_ref().map(|c| (o.label.as_str(), c)))
                .collect(),
            view_hz: m.view_hz,
            cursor_hz: m.cursor_hz,
            modes: m.analysis.as_ref().map_or(Vec::new(), |a| {
                a.modes
                    .iter()
                    .map(|x| (x.frequency_hz, x.magnitude))
                    .collect()
            }),
            log_freq: m.log_freq,
            drive: m.drive.as_ref(),
            empty_text: if m.counts().1 > 0 {
                "no tap kept yet: the average starts with the first accepted tap"
            } else {
                "the averaged curve appears after the first accepted tap"
            },
        }
    }
}

impl Widget for CurvePlot<'_> {
    fn render(self, inner: Rect, buf: &mut Buffer) {
        let curve = self.curve;
        let overlays = &self.overlays;
        if curve.is_none() && overlays.is_empty() {
            Paragraph::new(self.empty_text)
                .wrap(Wrap { trim: true })
                .render(inner, buf);
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
        let (lo, hi) = self.view_hz;
        let split = |r: Rect| {
            let [g, p] =
                Layout::horizontal([Constraint::Length(GUTTER), Constraint::Min(4)]).areas(r);
            (g, p)
        };
        let (pg, pp) = split(plot);
        let buckets = (pp.width as usize * 2).max(16);
        let axis = FreqAxis::new(self.view_hz, self.log_freq);
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
        let modes: Vec<(f64, f64)> = self
            .modes
            .iter()
            .filter(|x| x.0 >= lo && x.0 <= hi)
            .map(|x| (axis.x(x.0), 20.0 * x.1.max(1e-300).log10()))
            .collect();
        let cursor = self.cursor_hz;
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
        canvas.render(pp, buf);
        shade_bands(self.drive, buf, pp, &axis);
        let gut = vec![Line::from(format!("{:>5.0}", ymax)), Line::from(" dB")];
        Paragraph::new(gut).render(pg, buf);
        if pg.height >= 3 {
            let bottom = Rect::new(pg.x, pg.y + pg.height - 1, pg.width, 1);
            Paragraph::new(format!("{:>5.0}", ymin)).render(bottom, buf);
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
            Block::default()
                .borders(Borders::TOP)
                .border_style(dim())
                .render(cp, buf);
            let cp_inner = Rect::new(cp.x, cp.y + 1, cp.width, cp.height.saturating_sub(1));
            canvas.render(cp_inner, buf);
            let mut g = vec![Line::from("  coh"), Line::from("  1.0")];
            while g.len() + 1 < cg.height as usize {
                g.push(Line::from(""));
            }
            g.push(Line::from("  0.0"));
            Paragraph::new(g).render(cg, buf);
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
        Paragraph::new(s).render(xp, buf);

        // Cursor read-out.
        let mut spans = vec![Span::styled(
            format!("cursor {} Hz", fmt_hz(cursor)),
            bold().fg(CURSOR),
        )];
        if let Some(c) = curve
            && let Some(i) = nearest(&c.freqs, cursor)
        {
            let mut parts = vec![format!(
                "{:.1} dB ({} {})",
                c.db[i],
                fmt_sig(c.magnitude[i]),
                c.unit
            )];
            if let Some(coh) = &c.coherence {
                parts.push(format!("coh {:.3}", coh[i]));
            }
            // Two blanks between the values where they fit, one where they would not.
            let wide: usize = parts.iter().map(|p| p.chars().count() + 2).sum();
            let gap = if spans[0].content.chars().count() + wide <= readout.width as usize {
                "  "
            } else {
                " "
            };
            for p in parts {
                spans.push(Span::raw(format!("{gap}{p}")));
            }
        }
        // The visible range is the first thing to go on a narrow plot (the axis shows it).
        let view = format!("  view {}-{} Hz", fmt_hz(lo), fmt_hz(hi));
        let used: usize = spans.iter().map(|s| s.content.chars().count()).sum();
        if used + view.len() <= readout.width as usize {
            spans.push(Span::styled(view, dim()));
        }
        Paragraph::new(Line::from(spans)).render(readout, buf);

        if legend_h > 0 {
            let mut spans = vec![Span::raw("now: default colour")];
            for (i, (o, _)) in overlays.iter().enumerate() {
                spans.push(Span::raw("  "));
                spans.push(Span::styled(
                    format!("~ {o}"),
                    Style::default().fg(OVERLAY_COLORS[i % OVERLAY_COLORS.len()]),
                ));
            }
            Paragraph::new(Line::from(spans)).render(legend, buf);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectra::Estimator;
    use ratatui::Terminal;
    use ratatui::backend::TestBackend;

    /// A single resonance at 200 Hz over 0..500 Hz, coherence 1 except near 400 Hz.
    fn resonance() -> CurveSnap {
        let freqs: Vec<f64> = (0..=500).map(f64::from).collect();
        let magnitude: Vec<f64> = freqs
            .iter()
            .map(|f| 1.0 / (1.0 + ((f - 200.0) / 5.0).powi(2)))
            .collect();
        CurveSnap {
            basis: Basis::Frf(Estimator::H1),
            db: magnitude.iter().map(|m| 20.0 * m.log10()).collect(),
            coherence: Some(
                freqs
                    .iter()
                    .map(|f| if (f - 400.0).abs() < 10.0 { 0.2 } else { 1.0 })
                    .collect(),
            ),
            magnitude,
            unit: "g/N".into(),
            freqs,
        }
    }

    fn draw(plot: CurvePlot<'_>, w: u16, h: u16) -> Vec<String> {
        let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
        t.draw(|f| f.render_widget(plot, f.area())).unwrap();
        let b = t.backend().buffer().clone();
        (0..h)
            .map(|y| (0..w).map(|x| b[(x, y)].symbol().to_string()).collect())
            .collect()
    }

    #[test]
    fn marks_the_mode_where_its_frequency_is_and_reads_the_cursor() {
        let c = resonance();
        let plot = CurvePlot {
            curve: Some(&c),
            overlays: Vec::new(),
            view_hz: (0.0, 500.0),
            cursor_hz: 200.0,
            modes: vec![(200.0, 1.0)],
            empty_text: "",
            log_freq: false,
            drive: None,
        };
        let rows = draw(plot, 66, 24);
        let text = rows.join("\n");
        // The mark sits above the peak: 200 of 500 Hz across the 60 plot columns after
        // the 6-column gutter, so near column 6 + 24.
        let col = rows
            .iter()
            .find_map(|r| r.chars().position(|ch| ch == 'v'))
            .expect("a mode mark");
        assert!((28..=32).contains(&col), "mark at column {col}\n{text}");
        assert!(
            text.contains("cursor 200.0 Hz  0.0 dB (1.00 g/N)  coh 1.000"),
            "{text}"
        );
        assert!(text.contains("coh"), "coherence strip drawn\n{text}");
        assert!(
            text.contains("250.0") && text.contains("500.0 Hz"),
            "frequency axis\n{text}"
        );
    }

    #[test]
    fn modes_outside_the_view_are_not_marked_and_an_empty_plot_says_why() {
        let c = resonance();
        let plot = CurvePlot {
            curve: Some(&c),
            overlays: Vec::new(),
            view_hz: (300.0, 500.0),
            cursor_hz: 450.0,
            modes: vec![(200.0, 1.0)],
            empty_text: "",
            log_freq: false,
            drive: None,
        };
        let rows = draw(plot, 66, 24);
        let text = rows.join("\n");
        let plot_rows = &rows[..rows.len() - 2];
        assert!(plot_rows.iter().all(|r| !r.contains('v')), "{text}");
        assert!(text.contains("cursor 450.0 Hz  -68.0 dB"), "{text}");
        let empty = CurvePlot {
            curve: None,
            overlays: Vec::new(),
            view_hz: (0.0, 500.0),
            cursor_hz: 0.0,
            modes: Vec::new(),
            empty_text: "nothing averaged yet",
            log_freq: false,
            drive: None,
        };
        assert!(draw(empty, 40, 5)[0].starts_with("nothing averaged yet"));
    }
}
