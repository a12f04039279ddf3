//! Drawing of the motors' excitation bands: the frequency axis (linear or logarithmic), the
//! bands as shaded named columns over the curve, the band cell of the mode table and the
//! soft mount's isolation lines. Pure drawing over the model.

use super::engine::AnalysisSnap;
use super::model::Model;
use crate::drive::{BandVerdict, Drive, Verdict};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};

/// Background of each band's columns, in band order (rotation, 2x, 3x, blade pass).
pub const BAND_COLORS: [Color; 4] = [
    Color::Indexed(58),
    Color::Indexed(23),
    Color::Indexed(54),
    Color::Indexed(52),
];

/// Lowest frequency of a logarithmic axis, Hz (the axis cannot reach 0).
pub const LOG_FLOOR_HZ: f64 = 1.0;

/// The frequency axis of the curve plot: plot coordinate `x(f)` is `f` (linear) or
/// `log10 f` (logarithmic).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FreqAxis {
    pub lo_hz: f64,
    pub hi_hz: f64,
    pub log: bool,
}

impl FreqAxis {
    /// The model's view, logarithmic when chosen and the view lies above [`LOG_FLOOR_HZ`].
    pub fn of(m: &Model) -> FreqAxis {
        FreqAxis::new(m.view_hz, m.log_freq)
    }

    /// A view `(lo, hi)` in Hz, logarithmic when asked and the view lies above
    /// [`LOG_FLOOR_HZ`].
    pub fn new((lo, hi): (f64, f64), log: bool) -> FreqAxis {
        let log_lo = lo.max(LOG_FLOOR_HZ);
        if log && hi > log_lo {
            FreqAxis {
                lo_hz: log_lo,
                hi_hz: hi,
                log: true,
            }
        } else {
            FreqAxis {
                lo_hz: lo,
                hi_hz: hi,
                log: false,
            }
        }
    }

    pub fn x(&self, f_hz: f64) -> f64 {
        if self.log {
            f_hz.max(LOG_FLOOR_HZ * 0.5).log10()
        } else {
            f_hz
        }
    }

    /// Plot coordinates of a list of frequencies.
    pub fn xs(&self, freqs: &[f64]) -> Vec<f64> {
        freqs.iter().map(|f| self.x(*f)).collect()
    }

    /// The axis ends in plot coordinates.
    pub fn range(&self) -> (f64, f64) {
        (self.x(self.lo_hz), self.x(self.hi_hz))
    }

    /// The frequency at a fraction of the axis (0 = left end, 1 = right end).
    pub fn f_at(&self, frac: f64) -> f64 {
        let (a, b) = self.range();
        let x = a + frac * (b - a);
        if self.log { 10f64.powf(x) } else { x }
    }

    /// The column (from 0) of a frequency on a plot `width` cells wide; `None` off the plot.
    pub fn column(&self, f_hz: f64, width: u16) -> Option<u16> {
        let (a, b) = self.range();
        let t = (self.x(f_hz) - a) / (b - a);
        (t.is_finite() && (0.0..=1.0).contains(&t))
            .then(|| ((t * f64::from(width)).floor() as u16).min(width.saturating_sub(1)))
    }
}

/// Shade each band's columns of `plot` and write its name on its own row at the top.
pub fn shade_bands(drive: Option<&Drive>, buf: &mut Buffer, plot: Rect, axis: &FreqAxis) {
    let Some(drive) = drive else { return };
    if plot.width == 0 || plot.height == 0 {
        return;
    }
    for (i, b) in drive.bands().bands.iter().enumerate() {
        let (lo, hi) = b.hz;
        if hi < axis.lo_hz || lo > axis.hi_hz {
            continue;
        }
        let c0 = axis.column(lo.max(axis.lo_hz), plot.width).unwrap_or(0);
        let c1 = axis
            .column(hi.min(axis.hi_hz), plot.width)
            .unwrap_or(plot.width - 1);
        let color = BAND_COLORS[i % BAND_COLORS.len()];
        for y in plot.y..plot.y + plot.height {
            for c in c0..=c1 {
                if let Some(cell) = buf.cell_mut((plot.x + c, y)) {
                    cell.set_bg(color);
                }
            }
        }
        // The name on row i, inside the band when it fits, else from the band's left edge.
        let row = plot.y + (i as u16).min(plot.height - 1);
        let width = usize::from(c1 - c0 + 1);
        let name = if b.name.len() <= width {
            b.name.clone()
        } else {
            short_name(&b.name).to_string()
        };
        let start = plot.x + c0;
        let room = usize::from(plot.x + plot.width - start);
        buf.set_stringn(
            start,
            row,
            &name,
            room,
            Style::default()
                .bg(color)
                .fg(Color::White)
                .add_modifier(Modifier::BOLD),
        );
    }
}

/// A band's short name for narrow columns and the mode table.
pub fn short_name(name: &str) -> &str {
    match name {
        "rotation" => "rot",
        "2x rotation" => "2x",
        "3x rotation" => "3x",
        "blade pass" => "bp",
        other => other,
    }
}

/// The mode table's band cell: "in rot", "near 2x", "clear".
pub fn band_cell(v: Option<&BandVerdict>) -> Span<'static> {
    match v {
        None => Span::raw("-"),
        Some(b) => {
            let (text, color) = match b.verdict {
                Verdict::Inside => (format!("in {}", short_name(&b.name)), Color::Red),
                Verdict::Near => (format!("near {}", short_name(&b.name)), Color::Yellow),
                Verdict::Clear => ("clear".to_string(), Color::Green),
            };
            Span::styled(text, Style::default().fg(color))
        }
    }
}

/// The mount and its isolation over the bands, for a soft-mounted part: empty without a
/// fitted mount.
pub fn mount_lines(a: &AnalysisSnap) -> Vec<Line<'static>> {
    let Some(mf) = &a.run.mount else {
        return Vec::new();
    };
    // All of it from the pipeline's result (`AnalysisResult::mount`, `isolation`), as the
    // run file holds it: nothing is fitted here.
    let model = match &mf.second {
        Some(_) => "two-mode",
        None => mf.model_name(),
    };
    let doubtful = mf.error > crate::modes::softmount::DOUBTFUL_ERROR;
    // Lines of at most about 44 characters: they fit the narrow mode panel unwrapped.
    let mut out = vec![Line::from(vec![
        Span::styled("mount ", Style::default().add_modifier(Modifier::BOLD)),
        Span::raw(format!(
            "{:.1} Hz, damping {:.1} %",
            mf.natural_frequency_hz,
            100.0 * mf.damping_ratio,
        )),
    ])];
    if let Some(b) = &mf.second {
        out.push(Line::from(format!(
            "  and {:.1} Hz, damping {:.1} %",
            b.natural_frequency_hz,
            100.0 * b.damping_ratio
        )));
    }
    out.extend([
        Line::from(format!(
            "  isolates above {:.0} Hz",
            mf.isolation_onset_hz()
        )),
        Line::from(vec![
            Span::raw(format!(
                "  {model} fit, {:.0} % unexplained",
                100.0 * mf.error
            )),
            if doubtful {
                Span::styled(": doubtful", Style::default().fg(Color::Red))
            } else {
                Span::raw(": good")
            },
        ]),
    ]);
    let db = |v: Option<f64>| v.map_or("-".into(), |v| format!("{v:+.1}"));
    if let Some(i) = &a.run.isolation {
        out.push(Line::from(format!(
            "{:.0}-{:.0} Hz {} dB, model {}",
            i.band_hz.0,
            i.band_hz.1,
            db(i.measured_db),
            db(i.model_db)
        )));
    }
    for iso in a.run.drive.iter().flat_map(|d| &d.isolation) {
        out.push(Line::from(format!(
            "{} {:.0}-{:.0} Hz {} dB, model {}, coh min {}",
            short_name(&iso.band),
            iso.hz.0,
            iso.hz.1,
            db(iso.measured_db),
            db(iso.model_db),
            iso.coherence_min.map_or("-".into(), |c| format!("{c:.2}")),
        )));
        if iso.warning.is_some() {
            // The full sentence is in the run file and the analyze output.
            let text = match iso.low_coherence_pct {
                Some(p) if iso.measured_db.is_some() => format!(
                    "  ! coh < {} on {p:.0} % of lines: untrusted",
                    super::super::drive::isolation::MIN_TRUSTED_COHERENCE
                ),
                _ => "  ! no measured value here".to_string(),
            };
            out.push(Line::from(Span::styled(
                text,
                Style::default().fg(Color::Red),
            )));
        }
    }
    out
}
