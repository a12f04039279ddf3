//! Trace colours and line styles: told apart by dash pattern as well as colour, so the
//! picture survives grey printing and colour-blind reading.

use plotters::style::RGBColor;

/// Colour and dash pattern (dash, gap in pixels; `None` = solid) of one trace.
#[derive(Debug, Clone, PartialEq)]
pub struct TraceStyle {
    pub color: RGBColor,
    pub dash: Option<(u32, u32)>,
}

/// A colour-blind-safe palette (the widely used "colour universal design" set of eight
/// colours, values from memory), chosen to stay apart for the common colour-vision
/// deficiencies, ordered so that neighbours also differ in lightness (for grey printing).
pub const PALETTE: [RGBColor; 7] = [
    RGBColor(0, 114, 178),   // blue
    RGBColor(213, 94, 0),    // vermillion
    RGBColor(0, 158, 115),   // bluish green
    RGBColor(0, 0, 0),       // black
    RGBColor(204, 121, 167), // reddish purple
    RGBColor(230, 159, 0),   // orange
    RGBColor(86, 180, 233),  // sky blue
];

/// Dash patterns in the same rotation: solid, long dash, short dash, long-short.
const DASHES: [Option<(u32, u32)>; 4] = [None, Some((10, 5)), Some((3, 3)), Some((14, 4))];

/// The style of trace `i` (colours and dashes cycle with coprime periods, so the first 28
/// traces all differ).
pub fn trace_style(i: usize) -> TraceStyle {
    TraceStyle {
        color: PALETTE[i % PALETTE.len()],
        dash: DASHES[i % DASHES.len()],
    }
}
