//! The tap list, the mode table and the comparison with saved runs.

use super::*;
use crate::pipeline::HitSummary;
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Cell, Paragraph, Row, Table, Wrap};

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

pub(super) fn draw_taps(m: &Model, f: &mut Frame, area: Rect) {
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

pub(super) fn draw_modes(m: &Model, f: &mut Frame, area: Rect) {
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
        let said = if a.is_some_and(|a| a.accepted > 0) {
            "no peak passed the mode tests (the run file's notes say why)"
        } else {
            "no modes yet (they need accepted taps)"
        };
        // A soft mount is shown whether or not the curve has modes.
        let mut lines = vec![Line::from(Span::styled(said, dim()))];
        lines.extend(a.map_or_else(Vec::new, |a| crate::tui::drive_view::mount_lines(a)));
        f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: false }), inner);
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
                cells.push(Cell::from(crate::tui::drive_view::band_cell(band)));
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
    let mount = a.map_or_else(Vec::new, |a| crate::tui::drive_view::mount_lines(a));
    // In the transmissibility view the mount comes first: the table keeps its header and
    // one row; elsewhere the table keeps three rows.
    let trans = a.is_some_and(|a| a.basis == crate::spectra::Basis::Transmissibility);
    let table_min = if trans { 2 } else { 3 };
    let mount_h = (mount.len() as u16).min(inner.height.saturating_sub(table_min));
    // On narrow panels the flags are letters: name the ones shown (the help names all).
    let mut shown: Vec<crate::modes::Flag> = modes.iter().flat_map(|md| md.flags.clone()).collect();
    shown.sort_by_key(|f| f.short());
    shown.dedup();
    let legend = shown
        .iter()
        .map(|f| format!("{} {}", f.short(), f.label()))
        .collect::<Vec<_>>()
        .join(", ");
    let legend_h = u16::from(
        !wide && !shown.is_empty() && inner.height as usize > modes.len() + 2 + mount.len(),
    );
    let [mut t, mut mt, l] = Layout::vertical([
        Constraint::Min(2),
        Constraint::Length(mount_h),
        Constraint::Length(legend_h),
    ])
    .areas(inner);
    if trans {
        // Mount above the table.
        let [top, rest] =
            Layout::vertical([Constraint::Length(mount_h), Constraint::Min(2)]).areas(t.union(mt));
        (mt, t) = (top, rest);
    }
    f.render_widget(Table::new(rows, widths).header(header), t);
    if mount_h > 0 {
        f.render_widget(Paragraph::new(mount).wrap(Wrap { trim: false }), mt);
    }
    if legend_h > 0 {
        f.render_widget(Paragraph::new(legend).style(dim()), l);
    }
}

pub(super) fn draw_compare(m: &Model, f: &mut Frame, area: Rect) {
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
