//! What a picture shows (`Figure`: traces, soft mounts, bands, notes), how it is drawn
//! (`PlotOptions`), and where its panels landed (`Panel`, `Rendered`).

use crate::drive::Band;
use crate::modes::softmount::MountFit;

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

impl Figure {
    pub(super) fn has_phase(&self) -> bool {
        self.traces.iter().any(|t| t.phase_deg.is_some())
    }
    pub(super) fn has_coherence(&self) -> bool {
        self.traces.iter().any(|t| t.coherence.is_some())
    }

    /// The frequency range covered by the curves (the mounts' range when there is no curve:
    /// a re-analysed transmissibility spans the whole spectrum, the curves the band searched).
    pub(super) fn data_range(&self) -> Option<(f64, f64)> {
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
