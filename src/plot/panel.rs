//! One panel of the picture: its axes and frequency ticks, the shaded bands, the curves
//! with their mode marks, and a soft mount's transmissibility with its fitted model.

use super::legend::{draw_legend, legend_box};
use super::scale::{fmt_ticks, level, nice_ticks, thin, value_at, y_range};
use super::{BAND_FILL, FONT, Figure, Panel, PlotOptions, TraceStyle, draw_err, trace_style};
use crate::error::Result;
use plotters::coord::Shift;
use plotters::prelude::*;

pub(super) fn draw_panel(
    area: &DrawingArea<SVGBackend, Shift>,
    name: &'static str,
    fig: &Figure,
    o: &PlotOptions,
    range: (f64, f64),
    bottom: bool,
) -> Result<Panel> {
    let log = o.log_frequency;
    let t = |f: f64| if log { f.log10() } else { f };
    let yr = y_range(fig, name, o, range);
    let units: Vec<&str> = {
        let mut u: Vec<&str> = fig.traces.iter().map(|t| t.unit.as_str()).collect();
        u.dedup();
        u
    };
    let y_desc = match name {
        "magnitude" if o.db => format!("magnitude, dB re 1 {}", units.join(" / ")),
        "magnitude" => format!("magnitude, {}", units.join(" / ")),
        "phase" => "phase, deg".into(),
        "coherence" => "coherence".into(),
        _ => "transmissibility, dB".into(),
    };
    let mut chart = ChartBuilder::on(area)
        .margin_left(10)
        .margin_right(20)
        .margin_top(6)
        .margin_bottom(4)
        .x_label_area_size(if bottom { 40 } else { 20 })
        .y_label_area_size(64)
        .build_cartesian_2d(t(range.0)..t(range.1), yr.0..yr.1)
        .map_err(draw_err)?;
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(0)
        .y_labels(if name == "magnitude" || name == "transmissibility" {
            8
        } else {
            4
        })
        .y_desc(y_desc)
        .y_label_formatter(&|v: &f64| {
            if name == "coherence" || (name == "magnitude" && !o.db) {
                format!("{v:.2}")
            } else {
                format!("{v:.0}")
            }
        })
        .label_style((FONT, 13))
        .axis_desc_style((FONT, 13))
        .max_light_lines(1)
        .light_line_style(RGBColor(240, 240, 240))
        .bold_line_style(RGBColor(215, 215, 215))
        .draw()
        .map_err(draw_err)?;
    let (xpx, ypx) = chart.plotting_area().get_pixel_range();
    let panel = Panel {
        name,
        x_px: (xpx.start, xpx.end),
        y_px: (ypx.start, ypx.end),
        range_hz: range,
        log_frequency: log,
        y_range: yr,
    };
    // Frequency grid and labels of our own (round numbers on either axis).
    let ticks = nice_ticks(range.0, range.1, log);
    for (f, label) in ticks.iter().copied().zip(fmt_ticks(&ticks)) {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(t(f), yr.0), (t(f), yr.1)],
                RGBColor(215, 215, 215),
            )))
            .map_err(draw_err)?;
        let x = panel.x_of(f) as i32;
        let w = 4 * label.len() as i32;
        area.draw(&Text::new(
            label,
            rel(area, (x - w, panel.y_px.1 + 4)),
            (FONT, 12).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
    }
    if bottom {
        area.draw(&Text::new(
            "frequency, Hz",
            rel(
                area,
                ((panel.x_px.0 + panel.x_px.1) / 2 - 40, panel.y_px.1 + 22),
            ),
            (FONT, 13).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
    }
    // Excitation bands: shaded in every panel, named in the first.
    for (i, b) in fig.bands.iter().enumerate() {
        let (lo, hi) = (b.hz.0.max(range.0), b.hz.1.min(range.1));
        if lo >= hi {
            continue;
        }
        let shade = BAND_FILL.mix(0.10 + 0.06 * (i % 2) as f64);
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(t(lo), yr.0), (t(hi), yr.1)],
                shade.filled(),
            )))
            .map_err(draw_err)?;
    }
    let cols = (panel.x_px.1 - panel.x_px.0).max(100) as usize;
    match name {
        "transmissibility" => draw_mounts(&mut chart, &panel, area, fig, range, cols)?,
        _ => {
            for (i, tr) in fig.traces.iter().enumerate() {
                let st = trace_style(i);
                let vals: Option<Vec<f64>> = match name {
                    "magnitude" => Some(tr.magnitude_db.iter().map(|v| level(*v, o.db)).collect()),
                    "phase" => tr.phase_deg.clone(),
                    _ => tr.coherence.clone(),
                };
                let Some(vals) = vals else { continue };
                if name == "magnitude"
                    && let Some(sp) = &tr.spread_db
                {
                    let up: Vec<f64> = tr
                        .magnitude_db
                        .iter()
                        .zip(sp)
                        .map(|(m, s)| level(m + s, o.db))
                        .collect();
                    let dn: Vec<f64> = tr
                        .magnitude_db
                        .iter()
                        .zip(sp)
                        .map(|(m, s)| level(m - s, o.db))
                        .collect();
                    let a = thin(&tr.freqs, &up, range, log, cols);
                    let b = thin(&tr.freqs, &dn, range, log, cols);
                    let mut poly: Vec<(f64, f64)> = a.iter().map(|p| (t(p.0), p.1)).collect();
                    poly.extend(b.iter().rev().map(|p| (t(p.0), p.1.max(yr.0))));
                    chart
                        .draw_series(std::iter::once(Polygon::new(
                            poly,
                            st.color.mix(0.22).filled(),
                        )))
                        .map_err(draw_err)?;
                }
                let pts: Vec<(f64, f64)> = thin(&tr.freqs, &vals, range, log, cols)
                    .into_iter()
                    .map(|(f, v)| (t(f), v.clamp(yr.0, yr.1)))
                    .collect();
                draw_line(&mut chart, pts, &st, 2)?;
                if name == "magnitude" {
                    for &fm in &tr.modes_hz {
                        if fm < range.0 || fm > range.1 {
                            continue;
                        }
                        let Some(v) = value_at(&tr.freqs, &vals, fm) else {
                            continue;
                        };
                        let v = v.clamp(yr.0, yr.1);
                        chart
                            .draw_series(std::iter::once(TriangleMarker::new(
                                (t(fm), v),
                                6,
                                st.color.filled(),
                            )))
                            .map_err(draw_err)?;
                        // Frequencies in one row per trace at the top, in the trace's colour.
                        let x = panel.x_of(fm) as i32;
                        let text = format!("{fm:.0}");
                        area.draw(&Text::new(
                            text.clone(),
                            rel(area, (x - 3 * text.len() as i32, label_row(&panel, i))),
                            (FONT, 12).into_font().color(&st.color),
                        ))
                        .map_err(draw_err)?;
                    }
                }
            }
            if name == "magnitude" {
                draw_legend(area, &panel, fig)?;
            }
        }
    }
    // Band names last, on a light ground so curves do not hide them, staggered in rows.
    if name == "magnitude" {
        for (i, b) in fig.bands.iter().enumerate() {
            let (lo, hi) = (b.hz.0.max(range.0), b.hz.1.min(range.1));
            if lo >= hi {
                continue;
            }
            let x = panel.x_of(lo) as i32 + 3;
            let y = panel.y_px.1 - 18 - 15 * (i as i32 % 3);
            let w = 6 * b.name.chars().count() as i32 + 6;
            area.draw(&Rectangle::new(
                [rel(area, (x - 2, y - 1)), rel(area, (x + w, y + 14))],
                WHITE.mix(0.8).filled(),
            ))
            .map_err(draw_err)?;
            area.draw(&Text::new(
                b.name.clone(),
                rel(area, (x, y)),
                (FONT, 12).into_font().color(&RGBColor(40, 40, 40)),
            ))
            .map_err(draw_err)?;
        }
    }
    Ok(panel)
}

pub(super) type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

pub(super) fn draw_line(
    chart: &mut Chart<'_, '_>,
    pts: Vec<(f64, f64)>,
    st: &TraceStyle,
    w: u32,
) -> Result<()> {
    let style = st.color.stroke_width(w);
    match st.dash {
        None => chart
            .draw_series(LineSeries::new(pts, style))
            .map(|_| ())
            .map_err(draw_err),
        Some((on, off)) => chart
            .draw_series(DashedLineSeries::new(pts, on, off, style))
            .map(|_| ())
            .map_err(draw_err),
    }
}

fn draw_mounts(
    chart: &mut Chart<'_, '_>,
    panel: &Panel,
    area: &DrawingArea<SVGBackend, Shift>,
    fig: &Figure,
    range: (f64, f64),
    cols: usize,
) -> Result<()> {
    let log = panel.log_frequency;
    let t = |f: f64| if log { f.log10() } else { f };
    let yr = panel.y_range;
    if yr.0 < 0.0 && yr.1 > 0.0 {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(t(range.0), 0.0), (t(range.1), 0.0)],
                BLACK.stroke_width(1),
            )))
            .map_err(draw_err)?;
    }
    let mut entries: Vec<(String, TraceStyle, bool)> = Vec::new();
    for (i, m) in fig.mounts.iter().enumerate() {
        let st = trace_style(i);
        if let Some((f, v)) = &m.measured {
            let pts: Vec<(f64, f64)> = thin(f, v, range, log, cols)
                .into_iter()
                .map(|(f, v)| (t(f), v.clamp(yr.0, yr.1)))
                .collect();
            draw_line(chart, pts, &st, 2)?;
            entries.push((format!("{} measured", m.label), st.clone(), false));
        }
        let n = cols.max(200);
        let fit: Vec<(f64, f64)> = (0..=n)
            .map(|k| {
                let x = t(range.0) + (t(range.1) - t(range.0)) * k as f64 / n as f64;
                let f = if log { 10f64.powf(x) } else { x };
                (x, m.fit.model_db(f).clamp(yr.0, yr.1))
            })
            .collect();
        let fit_style = TraceStyle {
            color: BLACK,
            dash: st.dash.or(Some((2, 3))),
        };
        draw_line(chart, fit, &fit_style, 1)?;
        let fn_hz = m.fit.natural_frequency_hz;
        if fn_hz >= range.0 && fn_hz <= range.1 {
            chart
                .draw_series(std::iter::once(TriangleMarker::new(
                    (t(fn_hz), m.fit.model_db(fn_hz).clamp(yr.0, yr.1)),
                    6,
                    st.color.filled(),
                )))
                .map_err(draw_err)?;
        }
        entries.push((
            format!(
                "{} fit: mount {:.1} Hz, damping {:.1} %, isolates above {:.0} Hz",
                m.label,
                fn_hz,
                100.0 * m.fit.damping_ratio,
                m.fit.isolation_onset_hz()
            ),
            fit_style,
            true,
        ));
    }
    legend_box(area, panel, &entries, 0)
}

/// Picture pixel coordinates relative to a drawing area (whose own origin is elsewhere).
pub(super) fn rel(area: &DrawingArea<SVGBackend, Shift>, p: (i32, i32)) -> (i32, i32) {
    let b = area.get_base_pixel();
    (p.0 - b.0, p.1 - b.1)
}

/// Pixel row (top of the text) of trace `i`'s mode frequencies.
pub(super) fn label_row(panel: &Panel, i: usize) -> i32 {
    panel.y_px.0 + 3 + 13 * (i % 4) as i32
}
