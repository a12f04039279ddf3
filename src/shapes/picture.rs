//! A mode's deformed shape as an SVG picture (plotters' SVG backend): every point at rest
//! (hollow circle) and moved along its measured direction by the shape (filled circle, blue
//! for a positive amplitude, red for a negative one), joined by a line, in an oblique view.
//!
//! View: `u = (x - y) cos 30deg`, `v = (x + y) sin 30deg + z` (an isometric projection of the
//! plan's coordinates, z up; common practice, no source). The largest movement is drawn as
//! `DEFLECTION` of the points' extent, so shapes are comparable picture to picture.

use super::Shape;
use super::points::Point;
use crate::error::{Error, Result};
use plotters::prelude::*;

/// Largest drawn movement as a fraction of the points' extent.
pub const DEFLECTION: f64 = 0.15;
/// Picture size, pixels.
pub const SIZE: (u32, u32) = (640, 480);

/// The unit vector of a direction the pictures understand: `x`, `y`, `z`, with an optional
/// sign (`-z`). `None` for anything else (`radial`, say).
pub fn direction_vector(d: &str) -> Option<[f64; 3]> {
    let d = d.trim().to_ascii_lowercase();
    let (sign, axis) = match d.strip_prefix('-') {
        Some(a) => (-1.0, a),
        None => (1.0, d.strip_prefix('+').unwrap_or(&d)),
    };
    match axis {
        "x" => Some([sign, 0.0, 0.0]),
        "y" => Some([0.0, sign, 0.0]),
        "z" => Some([0.0, 0.0, sign]),
        _ => None,
    }
}

/// The oblique view of a point, in the picture's units (mm, v up).
pub fn project(p: [f64; 3]) -> (f64, f64) {
    let (c, s) = (30f64.to_radians().cos(), 30f64.to_radians().sin());
    ((p[0] - p[1]) * c, (p[0] + p[1]) * s + p[2])
}

/// One sentence when the points cannot be drawn: coordinates missing, or a direction that is
/// not an axis.
pub fn problem(points: &[Point]) -> Option<String> {
    if let Some(p) = points.iter().find(|p| p.coordinates_mm.is_none()) {
        return Some(format!(
            "point '{}' has no coordinates: a picture needs '| x, y, z' (mm) on every line of the plan",
            p.name
        ));
    }
    points
        .iter()
        .find(|p| direction_vector(&p.direction).is_none())
        .map(|p| {
            format!(
                "point '{}' has the direction '{}': a picture needs x, y or z (with an optional sign)",
                p.name, p.direction
            )
        })
}

/// A point in the view, mm (u right, v up).
pub type ViewPoint = (f64, f64);

/// The points at rest and moved, in the view (mm): `(rest, moved)` per point.
pub fn placed(points: &[Point], shape: &Shape) -> Result<Vec<(ViewPoint, ViewPoint)>> {
    if let Some(p) = problem(points) {
        return Err(Error::new(p));
    }
    let at: Vec<[f64; 3]> = points.iter().filter_map(|p| p.coordinates_mm).collect();
    let extent = (0..3)
        .map(|k| {
            let lo = at.iter().map(|c| c[k]).fold(f64::INFINITY, f64::min);
            let hi = at.iter().map(|c| c[k]).fold(f64::NEG_INFINITY, f64::max);
            hi - lo
        })
        .fold(0.0, f64::max)
        .max(1.0);
    Ok(points
        .iter()
        .zip(&at)
        .zip(&shape.amplitudes)
        .map(|((p, c), a)| {
            let d = direction_vector(&p.direction).unwrap_or([0.0; 3]);
            let m = DEFLECTION * extent * a;
            let moved = [c[0] + m * d[0], c[1] + m * d[1], c[2] + m * d[2]];
            (project(*c), project(moved))
        })
        .collect())
}

fn draw_err<E: std::fmt::Debug>(e: E) -> Error {
    Error::new(format!("cannot draw the shape picture: {e:?}"))
}

/// The picture of one shape as SVG text.
pub fn shape_svg(points: &[Point], shape: &Shape, title: &str) -> Result<String> {
    let xy = placed(points, shape)?;
    let all: Vec<(f64, f64)> = xy.iter().flat_map(|(a, b)| [*a, *b]).collect();
    let (u0, u1) = all.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |r, p| {
        (r.0.min(p.0), r.1.max(p.0))
    });
    let (v0, v1) = all.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |r, p| {
        (r.0.min(p.1), r.1.max(p.1))
    });
    let (w, h) = SIZE;
    let (left, top, bottom) = (40.0, 50.0, 40.0);
    let span_u = (u1 - u0).max(1e-9);
    let span_v = (v1 - v0).max(1e-9);
    let scale = ((w as f64 - 2.0 * left) / span_u).min((h as f64 - top - bottom) / span_v);
    let px = |p: (f64, f64)| -> (i32, i32) {
        let x = w as f64 / 2.0 + (p.0 - (u0 + u1) / 2.0) * scale;
        let y = top + (h as f64 - top - bottom) / 2.0 - (p.1 - (v0 + v1) / 2.0) * scale;
        (x.round() as i32, y.round() as i32)
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        root.draw(&Text::new(
            title.to_string(),
            (12, 10),
            ("sans-serif", 18).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
        for (i, ((rest, moved), a)) in xy.iter().zip(&shape.amplitudes).enumerate() {
            let (r, m) = (px(*rest), px(*moved));
            let colour = if *a >= 0.0 { BLUE } else { RED };
            root.draw(&PathElement::new(vec![r, m], BLACK.mix(0.4)))
                .map_err(draw_err)?;
            root.draw(&Circle::new(r, 5, BLACK.stroke_width(1)))
                .map_err(draw_err)?;
            root.draw(&Circle::new(m, 5, colour.filled()))
                .map_err(draw_err)?;
            root.draw(&Text::new(
                format!("{}", i + 1),
                (m.0 + 7, m.1 - 7),
                ("sans-serif", 12).into_font().color(&BLACK),
            ))
            .map_err(draw_err)?;
        }
        root.draw(&Text::new(
            format!(
                "hollow: points at rest; filled: moved by the shape (largest {:.0} % of the extent; blue +, red -); view x, y oblique, z up",
                100.0 * DEFLECTION
            ),
            (12, h as i32 - 24),
            ("sans-serif", 11).into_font().color(&BLACK),
        ))
        .map_err(draw_err)?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn directions_and_the_view() {
        assert_eq!(direction_vector("Z"), Some([0.0, 0.0, 1.0]));
        assert_eq!(direction_vector("-x"), Some([-1.0, 0.0, 0.0]));
        assert_eq!(direction_vector("radial"), None);
        // z goes straight up; the x axis goes up-right, the y axis up-left, both at 30 degrees.
        assert_eq!(project([0.0, 0.0, 2.0]), (0.0, 2.0));
        let (ux, vx) = project([1.0, 0.0, 0.0]);
        let (uy, vy) = project([0.0, 1.0, 0.0]);
        assert!((ux + uy).abs() < 1e-12 && (vx - vy).abs() < 1e-12 && (vx - 0.5).abs() < 1e-12);
    }
}
