//! Mode finding: peaks above the noise floor, refined, with half-power damping and flags.

pub mod fit;
pub(crate) mod halfpower;
pub(crate) mod leftout;
pub(crate) mod peaks;
pub mod powerfit;
pub mod ringdown;
mod search;
pub mod softmount;
pub mod uncertainty;

use crate::spectra::Curve;
pub use leftout::{LeftOut, LeftOutReason, ModeSearch};
pub use search::search_modes;
use serde::{Deserialize, Serialize};

/// Why a mode's numbers deserve caution.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Flag {
    /// The half-power band spans fewer than `MIN_LINES` spectral lines.
    FewLines,
    /// Another peak lies close enough to bias the half-power band.
    Overlap,
    /// Coherence at the peak is below `LOW_COHERENCE`.
    LowCoherence,
    /// One or both half-power crossings were not found; damping unknown.
    NoHalfPower,
    /// The exponential window's added damping exceeds the measured damping.
    WindowDominated,
    /// Found by the band fit inside a neighbour's peak, with no peak of its own (close
    /// modes merged); its prominence is how far it stands over the fitted neighbours.
    FitOnly,
}

impl Flag {
    pub fn label(self) -> &'static str {
        match self {
            Flag::FewLines => "few lines",
            Flag::Overlap => "overlap",
            Flag::LowCoherence => "low coherence",
            Flag::NoHalfPower => "no half-power",
            Flag::WindowDominated => "window-dominated",
            Flag::FitOnly => "fit only",
        }
    }
    pub fn short(self) -> &'static str {
        match self {
            Flag::FewLines => "L",
            Flag::Overlap => "O",
            Flag::LowCoherence => "C",
            Flag::NoHalfPower => "H",
            Flag::WindowDominated => "W",
            Flag::FitOnly => "F",
        }
    }
}

/// Half-power bands narrower than this many true spectral lines are flagged (the
/// frequency-domain estimate becomes resolution-limited): common practice, no source.
pub const MIN_LINES: f64 = 4.0;
/// Coherence below this at a peak is flagged: common practice, no source.
pub const LOW_COHERENCE: f64 = 0.9;
/// Peaks with coherence below this are taken for noise and not reported: common practice,
/// no source.
pub const NOISE_COHERENCE: f64 = 0.5;

/// The coherence a pure-noise line exceeds with probability 1e-3 after `n` averages:
/// for independent Gaussian records `P(coh > x) = (1 - x)^(n - 1)` (Carter, Knapp &
/// Nuttall 1973, IEEE Trans. Audio Electroacoustics 21(4); from memory), so
/// `x = 1 - 1e-3^(1/(n-1))`, kept within [`NOISE_COHERENCE`, 0.95] (with two or three hits
/// the bound would also reject real modes). With few hits, chance coherence is high and
/// only clearly coherent peaks count as modes.
pub fn noise_coherence(n: usize) -> f64 {
    if n < 2 {
        return NOISE_COHERENCE;
    }
    (1.0 - 1e-3f64.powf(1.0 / (n - 1) as f64)).clamp(NOISE_COHERENCE, 0.95)
}

/// The half-power band of a mode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HalfPowerBand {
    pub low_hz: f64,
    pub high_hz: f64,
    /// Width in true spectral lines (fs / record length).
    pub lines: f64,
}

/// One identified mode, as written in the mode list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Mode {
    pub frequency_hz: f64,
    /// Viscous damping ratio, a fraction (0.012 = 1.2 %), with the window's share removed.
    pub damping_ratio: Option<f64>,
    /// Quality factor 1 / (2 damping_ratio).
    pub q: Option<f64>,
    /// Magnitude at the peak, in the curve's unit.
    pub magnitude: f64,
    pub phase_deg: Option<f64>,
    pub coherence: Option<f64>,
    /// How far the peak stands above its surroundings, dB.
    pub prominence_db: f64,
    pub half_power: Option<HalfPowerBand>,
    /// Damping ratio the exponential window added (already removed above).
    pub window_damping: f64,
    /// Which estimate the frequency and damping above are: "half_power" or "fit".
    pub method: String,
    pub flags: Vec<Flag>,
    /// The peak-and-half-power estimate, kept as a cross-check when the fit is reported.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub half_power_estimate: Option<Estimate>,
    /// The MDOF band fit (see `fit`), when one succeeded.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fit: Option<fit::FittedMode>,
    /// Hit-to-hit spread and 95 % intervals (see `uncertainty`), when per-hit curves were
    /// given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub uncertainty: Option<uncertainty::Uncertainty>,
    /// The parametric fit on a response spectrum (see `powerfit`), apparent values.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub spectrum_fit: Option<powerfit::PowerFit>,
    /// Ring-down damping from the response alone (see `ringdown`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ringdown: Option<ringdown::RingdownSummary>,
    /// Verdict against the motors' excitation bands (see `drive`), when a drive was given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub band: Option<crate::drive::BandVerdict>,
}

/// A frequency and damping pair from one method (window's damping removed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    pub frequency_hz: f64,
    pub damping_ratio: Option<f64>,
}

/// What the search knows besides the curve.
#[derive(Debug, Clone, Copy, Default)]
pub struct SearchContext<'a> {
    /// (background, taps): the response's energy spectral density without taps and
    /// averaged over the taps, on the curve's lines with the same windows. Peaks the taps
    /// do not lift 6 dB over the background are not modes.
    pub background: Option<(&'a [f64], &'a [f64])>,
    /// Response only: the mean of the taps' complex response spectra, each turned to a
    /// time origin at its trigger (see `pipeline::Analysis::search`). Near the modes it is
    /// the structure's response to one mean tap, `H(w) F(w)`, with a phase, so the band fit
    /// and its search for merged modes apply where the energy spectrum alone cannot
    /// separate them.
    pub response_complex: Option<&'a [realfft::num_complex::Complex64]>,
    /// Response only: how well the taps agree at each line once lined up on their onsets
    /// (see `pipeline::align`), 1 for a shared phase and shape, about 1/N for noise. It
    /// vouches for weak peaks as the coherence does on an FRF.
    pub tap_agreement: Option<&'a [f64]>,
}

/// Damping ratios under this (Q over 1000) are not taken for modes of a frame, arm or
/// mounted stack (bolted and bonded composite parts sit near 0.2-5 %): common practice, no
/// source.
pub const MIN_DAMPING: f64 = 5e-4;

/// The taps must lift the response this far over the background at a peak (dB): common
/// practice, no source.
pub const OVER_BACKGROUND_DB: f64 = 6.0;
/// A background line counts as stationary (hum, pickup) when it stands this far over the
/// background's own floor (dB): common practice, no source.
pub const LINE_DB: f64 = 10.0;

/// Settings of the mode finder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModeConfig {
    /// Search band in Hz.
    pub band_hz: (f64, f64),
    /// A peak must rise this far above its surroundings (dB).
    pub min_prominence_db: f64,
    /// ... and this far above the estimated noise floor (dB).
    pub min_above_floor_db: f64,
    /// The same for curves with a coherence (FRF, transmissibility): there the "floor" is
    /// mostly the neighbours' mass line, not noise, and noise peaks are caught by
    /// `NOISE_COHERENCE` instead (common practice, no source).
    #[serde(default = "coherent_floor_db")]
    pub min_above_floor_coherent_db: f64,
    /// The prominence needed on such curves (dB): a weak mode beside a strong one often
    /// stands only 3-5 dB out of its flank, and the coherence test already keeps noise
    /// out; finding it also keeps the band fit of its neighbour honest.
    #[serde(default = "coherent_prominence_db")]
    pub min_prominence_coherent_db: f64,
    /// Records averaged into the curve (0 = unknown); sets the coherence a noise line can
    /// reach by chance (see `noise_coherence`).
    #[serde(default)]
    pub averages: usize,
    pub max_modes: usize,
    /// The upper band edge was not given: it follows the data (the hammer's usable band,
    /// see `pipeline::Analysis::search`) below the anti-alias limit stored in `band_hz`.
    #[serde(default)]
    pub band_from_data: bool,
    /// The response is an acceleration (accelerometer, contact microphone): peaks are read
    /// on the curve divided by frequency, i.e. on mobility. For a viscous SDOF the mobility
    /// peaks exactly at fn and its half-power points satisfy f2 - f1 = 2 z fn and
    /// f1 f2 = fn^2 exactly (Ewins 2000, *Modal Testing*, ch. 2, mobility of an SDOF; from
    /// memory), where the accelerance peak sits at fn / sqrt(1 - 2 z^2).
    #[serde(default = "yes")]
    pub acceleration_response: bool,
    /// What the response sensor measures; when given it decides the weighting instead of
    /// `acceleration_response` (see `SensorKind::mobility_power`). Stored in the run file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub response_sensor: Option<crate::signal::SensorKind>,
}

fn yes() -> bool {
    true
}

fn coherent_floor_db() -> f64 {
    6.0
}

fn coherent_prominence_db() -> f64 {
    3.0
}

impl Default for ModeConfig {
    fn default() -> Self {
        ModeConfig {
            band_hz: (20.0, f64::INFINITY),
            min_prominence_db: 6.0,
            min_above_floor_db: 10.0,
            min_above_floor_coherent_db: coherent_floor_db(),
            min_prominence_coherent_db: coherent_prominence_db(),
            averages: 0,
            max_modes: 12,
            band_from_data: false,
            response_sensor: None,
            acceleration_response: true,
        }
    }
}

/// Find the modes on a curve. `freqs` in Hz; `resolution_hz` is the true line spacing.
pub fn find_modes(
    freqs: &[f64],
    curve: &Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    cfg: &ModeConfig,
) -> Vec<Mode> {
    search_modes(
        freqs,
        curve,
        resolution_hz,
        tau_s,
        cfg,
        &SearchContext::default(),
    )
    .modes
}
