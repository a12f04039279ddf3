//! The legends: one line per trace (label, mode count, spread) in the magnitude panel, and
//! the soft mounts' measured and fitted lines in the transmissibility panel.

use super::panel::rel;
use super::{FONT, Figure, Panel, TraceStyle, draw_err, trace_style};
use crate::error::Result;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

pub(super) fn draw_legend(
    area: &DrawingArea<SVGBackend, Shift>,
    panel: &Panel,
    fig: &Figure,
) -> Result<()> {
    let entries: Vec<(String, TraceStyle, bool)> = fig
        .traces
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let spread = if t.spread_db.is_some() {
                ", shade: hit-to-hit spread, 1 s.d."
            } else {
                ""
            };
            let n = t.modes_hz.len();
            let modes = if n == 1 {
                "1 mode".to_string()
            } else {
                format!("{n} modes")
            };
            (
                format!("{} ({modes}{spread})", t.label),
                trace_style(i),
                false,
            )
        })
        .collect();
    legend_box(area, panel, &entries, fig.traces.len().min(4))
}

pub(super) fn legend_box(
    area: &DrawingArea<SVGBackend, Shift>,
    panel: &Panel,
    entries: &[(String, TraceStyle, bool)],
    label_rows: usize,
) -> Result<()> {
    if entries.is_empty() {
        return Ok(());
    }
    let longest = entries.iter().map(|e| e.0.len()).max().unwrap_or(0) as i32;
    let w = 50 + 7 * longest;
    let h = 8 + 18 * entries.len() as i32;
    // Top right under the rows of mode frequencies; bottom left for the mounts (flat at
    // 0 dB below the mount frequency, falling above it: the lower left is free).
    let (x0, y0) = if panel.name == "transmissibility" {
        (panel.x_px.0 + 6, panel.y_px.1 - h - 6)
    } else {
        (
            (panel.x_px.1 - w - 6).max(panel.x_px.0 + 4),
            panel.y_px.0 + 6 + 13 * label_rows as i32,
        )
    };
    area.draw(&Rectangle::new(
        [rel(area, (x0, y0)), rel(area, (x0 + w, y0 + h))],
        WHITE.mix(0.9).filled(),
    ))
    .map_err(draw_err)?;
    area.draw(&Rectangle::new(
        [rel(area, (x0, y0)), rel(area, (x0 + w, y0 + h))],
        RGBColor(150, 150, 150).stroke_width(1),
    ))
    .map_err(draw_err)?;
    for (k, (text, st, thin_line)) in entries.iter().enumerate() {
        let y = y0 + 13 + 18 * k as i32;
        let pts = vec![rel(area, (x0 + 8, y)), rel(area, (x0 + 40, y))];
        let style = st.color.stroke_width(if *thin_line { 1 } else { 2 });
        match st.dash {
            None => area.draw(&PathElement::new(pts, style)),
            Some((on, off)) => area.draw(&DashedPathElement::new(pts, on, off, style)),
        }
        .map_err(draw_err)?;
        area.draw(&Text::new(
            text.clone(),
            rel(area, (x0 + 46, y - 7)),
            (FONT, 13).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
    }
    Ok(())
}
