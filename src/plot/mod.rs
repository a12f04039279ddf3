//! Pictures of runs: stacked FRF magnitude, phase and coherence (or the response spectrum
//! with its hit-to-hit spread), mode markers, the motors' excitation bands and a soft
//! mount's transmissibility with its fitted model, as SVG (plotters) or PNG (resvg).
//!
//! The plot only renders what the run files (`build`) and the app's analysis snapshot
//! (`view`) hold; it computes nothing of its own beyond axis ranges and thinning the curves
//! to the picture's resolution.

pub mod build;
mod figure;
pub mod html;
mod html_compare;
mod legend;
mod panel;
pub mod raster;
mod scale;
mod style;
pub mod view;

use crate::error::{Error, Result};
pub use figure::{Figure, MountTrace, Panel, PlotOptions, Rendered, Trace};
use plotters::prelude::*;
pub use style::{PALETTE, TraceStyle, trace_style};

pub(crate) const FONT: &str = "sans-serif";
pub(crate) const BAND_FILL: RGBColor = RGBColor(120, 120, 120);

pub(crate) fn draw_err<E: std::fmt::Debug>(e: E) -> Error {
    Error::new(format!("cannot draw the plot: {e:?}"))
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
    // A range that misses every curve would give empty panels: refused, naming the span.
    let in_range = |f: &f64| f.is_finite() && *f >= range.0 && *f <= range.1;
    let drawable = fig.traces.iter().any(|t| t.freqs.iter().any(in_range))
        || fig.mounts.iter().any(|m| match &m.measured {
            Some((f, _)) => f.iter().any(in_range),
            // A fitted mount model alone is drawn over any range.
            None => true,
        });
    if !drawable {
        let span = fig.data_range().map_or(String::new(), |(a, b)| {
            format!(" (the curves span {a:.1}-{b:.1} Hz)")
        });
        crate::fail!(
            "no curve has a line in {:.1}-{:.1} Hz{span}; choose a frequency range that overlaps them",
            range.0,
            range.1
        );
    }
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
            let p = panel::draw_panel(&this, name, fig, o, range, i == last)?;
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

/// A figure drawn and encoded as the picture kind asks, nothing written yet.
pub fn picture_bytes(
    fig: &Figure,
    o: &PlotOptions,
    kind: PictureKind,
) -> Result<(Rendered, Vec<u8>)> {
    let r = render_svg(fig, o)?;
    let bytes = match kind {
        PictureKind::Svg => r.svg.clone().into_bytes(),
        PictureKind::Png => raster::svg_to_png(&r.svg)?,
    };
    Ok((r, bytes))
}

/// Write a figure to `out` (SVG or PNG by its extension), atomically.
pub fn write_picture(fig: &Figure, o: &PlotOptions, out: &std::path::Path) -> Result<Rendered> {
    let (r, bytes) = picture_bytes(fig, o, PictureKind::of(out)?)?;
    crate::run::atomic::write_atomic(out, &bytes)?;
    Ok(r)
}
