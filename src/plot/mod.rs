//! Pictures of runs: stacked FRF magnitude, phase and coherence (or the response spectrum
//! with its hit-to-hit spread), mode markers, the motors' excitation bands and a soft
//! mount's transmissibility with its fitted model, as SVG (plotters) or PNG (resvg).
//!
//! The plot only renders what the run files (`build`) and the app's analysis snapshot
//! (`view`) hold; it computes nothing of its own beyond axis ranges and thinning the curves
//! to the picture's resolution.

pub mod build;
pub mod html;
pub mod raster;
mod style;
pub mod view;

use crate::drive::Band;
use crate::error::{Error, Result};
use crate::modes::softmount::MountFit;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
pub use style::{PALETTE, TraceStyle, trace_style};

/// One run's curve, as drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    pub label: String,
    /// What the curve is ("FRF H1", "response spectrum", ...).
    pub kind: String,
    /// Unit of the magnitude (e.g. "g/N").
    pub unit: String,
    pub freqs: Vec<f64>,
    /// Magnitude in dB re 1 unit.
    pub magnitude_db: Vec<f64>,
    pub phase_deg: Option<Vec<f64>>,
    pub coherence: Option<Vec<f64>>,
    /// Hit-to-hit standard deviation of the level, dB (response spectrum).
    pub spread_db: Option<Vec<f64>>,
    /// Mode frequencies, Hz.
    pub modes_hz: Vec<f64>,
}

/// A soft mount: the measured transmissibility (when the recording could be read) and the
/// fitted model.
#[derive(Debug, Clone, PartialEq)]
pub struct MountTrace {
    pub label: String,
    /// (frequency Hz, |T| dB).
    pub measured: Option<(Vec<f64>, Vec<f64>)>,
    pub fit: MountFit,
}

/// Everything one picture shows.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Figure {
    pub traces: Vec<Trace>,
    pub mounts: Vec<MountTrace>,
    /// Excitation bands, shaded and named in every panel.
    pub bands: Vec<Band>,
    /// Sentences shown under the plot (runs not drawn and why, and the like).
    pub notes: Vec<String>,
}

/// How to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotOptions {
    pub width: u32,
    pub height: u32,
    /// Magnitude in dB (else linear, in the curve's unit).
    pub db: bool,
    /// Logarithmic frequency axis.
    pub log_frequency: bool,
    /// Frequency range [default: the curves' range].
    pub range_hz: Option<(f64, f64)>,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            width: 1000,
            height: 0,
            db: true,
            log_frequency: false,
            range_hz: None,
        }
    }
}

/// Where a panel landed in the picture, for checks and for readers of the picture.
#[derive(Debug, Clone, PartialEq)]
pub struct Panel {
    pub name: &'static str,
    /// Plotting area in pixels: x from `x_px.0` to `x_px.1`, y from top `y_px.0` to bottom.
    pub x_px: (i32, i32),
    pub y_px: (i32, i32),
    pub range_hz: (f64, f64),
    pub log_frequency: bool,
    /// Value at the bottom and at the top of the area.
    pub y_range: (f64, f64),
}

impl Panel {
    /// Pixel column of a frequency.
    pub fn x_of(&self, f_hz: f64) -> f64 {
        let t = |f: f64| if self.log_frequency { f.log10() } else { f };
        let (a, b) = (t(self.range_hz.0), t(self.range_hz.1));
        self.x_px.0 as f64 + (t(f_hz) - a) / (b - a) * (self.x_px.1 - self.x_px.0) as f64
    }
    /// Pixel row of a value.
    pub fn y_of(&self, v: f64) -> f64 {
        let (lo, hi) = self.y_range;
        self.y_px.1 as f64 - (v - lo) / (hi - lo) * (self.y_px.1 - self.y_px.0) as f64
    }
}

/// An SVG picture and the layout of its panels.
#[derive(Debug, Clone)]
pub struct Rendered {
    pub svg: String,
    pub width: u32,
    pub height: u32,
    pub panels: Vec<Panel>,
}

impl Rendered {
    pub fn panel(&self, name: &str) -> Option<&Panel> {
        self.panels.iter().find(|p| p.name == name)
    }
}

const FONT: &str = "sans-serif";
const BAND_FILL: RGBColor = RGBColor(120, 120, 120);

fn draw_err<E: std::fmt::Debug>(e: E) -> Error {
    Error::new(format!("cannot draw the plot: {e:?}"))
}

impl Figure {
    fn has_phase(&self) -> bool {
        self.traces.iter().any(|t| t.phase_deg.is_some())
    }
    fn has_coherence(&self) -> bool {
        self.traces.iter().any(|t| t.coherence.is_some())
    }

    /// The frequency range covered by the curves (the mounts' range when there is no curve:
    /// a re-analysed transmissibility spans the whole spectrum, the curves the band searched).
    fn data_range(&self) -> Option<(f64, f64)> {
        let from_traces = self.traces.iter().flat_map(|t| t.freqs.iter());
        let from_mounts = self
            .mounts
            .iter()
            .filter_map(|m| m.measured.as_ref())
            .flat_map(|m| m.0.iter());
        let all: Vec<f64> = if self.traces.is_empty() {
            from_mounts.copied().collect()
        } else {
            from_traces.copied().collect()
        };
        let (lo, hi) = all
            .into_iter()
            .filter(|f| f.is_finite() && *f > 0.0)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), f| {
                (a.min(f), b.max(f))
            });
        (lo < hi).then_some((lo, hi))
    }
}

/// Draw a figure as SVG.
pub fn render_svg(fig: &Figure, o: &PlotOptions) -> Result<Rendered> {
    if fig.traces.is_empty() && fig.mounts.is_empty() {
        crate::fail!("nothing to plot: no run has a curve");
    }
    let range = match o.range_hz {
        Some((lo, hi)) if lo.is_finite() && hi.is_finite() && lo > 0.0 && lo < hi => (lo, hi),
        Some((lo, hi)) => crate::fail!("the frequency range {lo}:{hi} Hz is empty or not positive"),
        None => fig
            .data_range()
            .ok_or_else(|| Error::new("the curves hold no positive frequencies to plot"))?,
    };
    let mut panels: Vec<(&'static str, u32)> = vec![("magnitude", 5)];
    if fig.has_phase() {
        panels.push(("phase", 2));
    }
    if fig.has_coherence() {
        panels.push(("coherence", 2));
    }
    if !fig.mounts.is_empty() {
        panels.push(("transmissibility", 4));
    }
    let weights: u32 = panels.iter().map(|p| p.1).sum();
    let header = 40u32;
    let footer = 30 + 16 * fig.notes.len() as u32;
    let height = if o.height > 0 {
        o.height
    } else {
        header + footer + 70 * weights + 10
    };
    let width = o.width.max(400);
    let mut svg = String::new();
    let mut placed = Vec::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let title = title_of(fig);
        root.draw(&Text::new(
            title,
            (12, 10),
            (FONT, 18).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
        let body_h = height.saturating_sub(header + footer);
        let (_, rest) = root.split_vertically(header);
        let (body, foot) = rest.split_vertically(body_h);
        let sizes: Vec<u32> = panels
            .iter()
            .map(|p| body_h * p.1 / weights)
            .collect::<Vec<_>>();
        let mut area = body;
        let last = panels.len() - 1;
        for (i, (name, _)) in panels.iter().enumerate() {
            let (this, next) = if i < last {
                area.split_vertically(sizes[i])
            } else {
                let h = area.dim_in_pixel().1;
                area.split_vertically(h)
            };
            let p = draw_panel(&this, name, fig, o, range, i == last)?;
            placed.push(p);
            area = next;
        }
        for (i, n) in fig.notes.iter().enumerate() {
            foot.draw(&Text::new(
                n.clone(),
                (12, 8 + 16 * i as i32),
                (FONT, 13).into_font().color(&BLACK),
            ))
            .map_err(draw_err)?;
        }
        root.present().map_err(draw_err)?;
    }
    Ok(Rendered {
        svg,
        width,
        height,
        panels: placed,
    })
}

fn title_of(fig: &Figure) -> String {
    let mut kinds: Vec<&str> = fig.traces.iter().map(|t| t.kind.as_str()).collect();
    kinds.dedup();
    let what = if kinds.is_empty() {
        "transmissibility".to_string()
    } else {
        kinds.join(" / ")
    };
    let labels: Vec<&str> = fig.traces.iter().map(|t| t.label.as_str()).collect();
    let labels = if labels.is_empty() {
        fig.mounts.iter().map(|m| m.label.as_str()).collect()
    } else {
        labels
    };
    format!("{what}: {}", labels.join(", "))
}

/// Thin a curve to about `cols` columns, keeping each column's lowest and highest point in
/// frequency order (peaks and notches survive).
fn thin(freqs: &[f64], vals: &[f64], range: (f64, f64), log: bool, cols: usize) -> Vec<(f64, f64)> {
    let t = |f: f64| if log { f.log10() } else { f };
    let (a, b) = (t(range.0), t(range.1));
    let mut out: Vec<(f64, f64)> = Vec::new();
    let mut col = usize::MAX;
    let mut lo: Option<(f64, f64)> = None;
    let mut hi: Option<(f64, f64)> = None;
    let flush = |out: &mut Vec<(f64, f64)>, lo: Option<(f64, f64)>, hi: Option<(f64, f64)>| {
        if let (Some(l), Some(h)) = (lo, hi) {
            if l.0 <= h.0 {
                out.push(l);
                if h != l {
                    out.push(h);
                }
            } else {
                out.push(h);
                out.push(l);
            }
        }
    };
    for (&f, &v) in freqs.iter().zip(vals) {
        if !(f.is_finite() && v.is_finite()) || f < range.0 || f > range.1 || f <= 0.0 {
            continue;
        }
        let c = (((t(f) - a) / (b - a)) * cols as f64) as usize;
        if c != col {
            flush(&mut out, lo, hi);
            col = c;
            lo = Some((f, v));
            hi = Some((f, v));
        } else {
            if lo.is_none_or(|p| v < p.1) {
                lo = Some((f, v));
            }
            if hi.is_none_or(|p| v > p.1) {
                hi = Some((f, v));
            }
        }
    }
    flush(&mut out, lo, hi);
    out
}

fn level(db: f64, in_db: bool) -> f64 {
    if in_db { db } else { 10f64.powf(db / 20.0) }
}

/// Value of a curve at a frequency (nearest line).
fn value_at(freqs: &[f64], vals: &[f64], f: f64) -> Option<f64> {
    let k = freqs.partition_point(|&x| x < f);
    let cand = [k.checked_sub(1), Some(k)];
    cand.iter()
        .flatten()
        .filter(|&&i| i < freqs.len() && i < vals.len())
        .min_by(|&&i, &&j| (freqs[i] - f).abs().total_cmp(&(freqs[j] - f).abs()))
        .map(|&i| vals[i])
        .filter(|v| v.is_finite())
}

fn nice_ticks(lo: f64, hi: f64, log: bool) -> Vec<f64> {
    if log {
        let mut v = Vec::new();
        let mut decade = 10f64.powf(lo.log10().floor());
        while decade <= hi {
            for m in [1.0, 2.0, 5.0] {
                let f = m * decade;
                if f >= lo && f <= hi {
                    v.push(f);
                }
            }
            decade *= 10.0;
        }
        return v;
    }
    let span = hi - lo;
    let raw = span / 8.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut f = (lo / step).ceil() * step;
    let mut v = Vec::new();
    while f <= hi + 1e-9 {
        v.push(f);
        f += step;
    }
    v
}

fn fmt_hz(f: f64) -> String {
    if f >= 1000.0 && (f / 1000.0).fract() == 0.0 {
        format!("{}k", f / 1000.0)
    } else if f.fract() == 0.0 {
        format!("{f:.0}")
    } else {
        format!("{f:.1}")
    }
}

fn y_range(fig: &Figure, name: &str, o: &PlotOptions, range: (f64, f64)) -> (f64, f64) {
    match name {
        "phase" => (-180.0, 180.0),
        "coherence" => (0.0, 1.05),
        "transmissibility" => {
            let mut hi = f64::NEG_INFINITY;
            let mut lo = f64::INFINITY;
            for m in &fig.mounts {
                if let Some((f, v)) = &m.measured {
                    for (p, q) in f.iter().zip(v) {
                        if *p >= range.0 && *p <= range.1 && q.is_finite() {
                            hi = hi.max(*q);
                            lo = lo.min(*q);
                        }
                    }
                }
                hi = hi.max(m.fit.model_db(m.fit.natural_frequency_hz));
                lo = lo.min(m.fit.model_db(range.1));
            }
            let hi = if hi.is_finite() { hi + 5.0 } else { 20.0 };
            let lo = if lo.is_finite() {
                lo.max(hi - 80.0) - 5.0
            } else {
                -40.0
            };
            (lo, hi.max(lo + 10.0))
        }
        _ => {
            let mut vals: Vec<f64> = Vec::new();
            for t in &fig.traces {
                for (k, (&f, &v)) in t.freqs.iter().zip(&t.magnitude_db).enumerate() {
                    if f >= range.0 && f <= range.1 && v.is_finite() {
                        let s = t
                            .spread_db
                            .as_ref()
                            .and_then(|s| s.get(k))
                            .copied()
                            .filter(|s| s.is_finite())
                            .unwrap_or(0.0);
                        vals.push(v + s);
                        vals.push(v - s);
                    }
                }
            }
            if vals.is_empty() {
                return if o.db { (-60.0, 0.0) } else { (0.0, 1.0) };
            }
            vals.sort_by(f64::total_cmp);
            let hi_db = vals[vals.len() - 1];
            let lo_db = vals[vals.len() / 100];
            if o.db {
                let lo = lo_db.max(hi_db - 90.0) - 3.0;
                // Room above the highest peak for the rows of mode frequencies.
                let rows = fig.traces.len().min(4) as f64;
                let hi = hi_db + (hi_db - lo) * (0.06 + 0.06 * rows);
                (lo, hi)
            } else {
                (
                    0.0,
                    level(hi_db, false) * (1.08 + 0.06 * fig.traces.len().min(4) as f64),
                )
            }
        }
    }
}

fn draw_panel(
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
    for f in nice_ticks(range.0, range.1, log) {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(t(f), yr.0), (t(f), yr.1)],
                RGBColor(215, 215, 215),
            )))
            .map_err(draw_err)?;
        let x = panel.x_of(f) as i32;
        area.draw(&Text::new(
            fmt_hz(f),
            rel(area, (x - 4 * fmt_hz(f).len() as i32, panel.y_px.1 + 4)),
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

type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

fn draw_line(
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
fn rel(area: &DrawingArea<SVGBackend, Shift>, p: (i32, i32)) -> (i32, i32) {
    let b = area.get_base_pixel();
    (p.0 - b.0, p.1 - b.1)
}

/// Pixel row (top of the text) of trace `i`'s mode frequencies.
fn label_row(panel: &Panel, i: usize) -> i32 {
    panel.y_px.0 + 3 + 13 * (i % 4) as i32
}

fn draw_legend(area: &DrawingArea<SVGBackend, Shift>, panel: &Panel, fig: &Figure) -> Result<()> {
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

fn legend_box(
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

/// What kind of picture a path asks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PictureKind {
    Svg,
    Png,
}

impl PictureKind {
    pub fn of(path: &std::path::Path) -> Result<PictureKind> {
        match path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase())
            .as_deref()
        {
            Some("svg") => Ok(PictureKind::Svg),
            Some("png") => Ok(PictureKind::Png),
            _ => crate::fail!(
                "'{}' must end in .svg or .png (the picture's kind comes from its name)",
                path.display()
            ),
        }
    }
}

/// Write a figure to `out` (SVG or PNG by its extension), atomically.
pub fn write_picture(fig: &Figure, o: &PlotOptions, out: &std::path::Path) -> Result<Rendered> {
    let kind = PictureKind::of(out)?;
    let r = render_svg(fig, o)?;
    let bytes = match kind {
        PictureKind::Svg => r.svg.clone().into_bytes(),
        PictureKind::Png => raster::svg_to_png(&r.svg)?,
    };
    crate::run::atomic::write_atomic(out, &bytes)?;
    Ok(r)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thinning_keeps_peaks_in_order() {
        let f: Vec<f64> = (1..=1000).map(|k| k as f64).collect();
        let v: Vec<f64> = f
            .iter()
            .map(|x| if *x == 500.0 { 10.0 } else { 0.0 })
            .collect();
        let p = thin(&f, &v, (1.0, 1000.0), false, 50);
        assert!(p.len() <= 101);
        assert!(p.iter().any(|q| q.1 == 10.0 && q.0 == 500.0));
        assert!(p.windows(2).all(|w| w[0].0 <= w[1].0));
    }

    #[test]
    fn ticks_are_round() {
        assert_eq!(
            nice_ticks(20.0, 3200.0, true)[..4],
            [20.0, 50.0, 100.0, 200.0]
        );
        assert_eq!(nice_ticks(0.0, 100.0, false)[..3], [0.0, 20.0, 40.0]);
    }
}
