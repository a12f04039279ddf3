//! Mode finding: peaks above the noise floor, refined, with half-power damping and flags.

pub mod fit;
pub mod halfpower;
pub mod peaks;
pub mod ringdown;
pub mod softmount;
pub mod uncertainty;

use crate::spectra::{Curve, remove_window_damping};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

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
}

impl Flag {
    pub fn label(self) -> &'static str {
        match self {
            Flag::FewLines => "few lines",
            Flag::Overlap => "overlap",
            Flag::LowCoherence => "low coherence",
            Flag::NoHalfPower => "no half-power",
            Flag::WindowDominated => "window-dominated",
        }
    }
    pub fn short(self) -> &'static str {
        match self {
            Flag::FewLines => "L",
            Flag::Overlap => "O",
            Flag::LowCoherence => "C",
            Flag::NoHalfPower => "H",
            Flag::WindowDominated => "W",
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
    /// Ring-down damping from the response alone (see `ringdown`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ringdown: Option<ringdown::RingdownSummary>,
}

/// A frequency and damping pair from one method (window's damping removed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    pub frequency_hz: f64,
    pub damping_ratio: Option<f64>,
}

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
    /// Records averaged into the curve (0 = unknown); sets the coherence a noise line can
    /// reach by chance (see `noise_coherence`).
    #[serde(default)]
    pub averages: usize,
    pub max_modes: usize,
    /// The response is an acceleration (accelerometer, contact microphone): peaks are read
    /// on the curve divided by frequency, i.e. on mobility. For a viscous SDOF the mobility
    /// peaks exactly at fn and its half-power points satisfy f2 - f1 = 2 z fn and
    /// f1 f2 = fn^2 exactly (Ewins 2000, *Modal Testing*, ch. 2, mobility of an SDOF; from
    /// memory), where the accelerance peak sits at fn / sqrt(1 - 2 z^2).
    #[serde(default = "yes")]
    pub acceleration_response: bool,
}

fn yes() -> bool {
    true
}

fn coherent_floor_db() -> f64 {
    6.0
}

impl Default for ModeConfig {
    fn default() -> Self {
        ModeConfig {
            band_hz: (20.0, f64::INFINITY),
            min_prominence_db: 6.0,
            min_above_floor_db: 10.0,
            min_above_floor_coherent_db: coherent_floor_db(),
            averages: 0,
            max_modes: 12,
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
    let mobility =
        cfg.acceleration_response && curve.basis != crate::spectra::Basis::Transmissibility;
    let db: Vec<f64> = curve
        .magnitude
        .iter()
        .zip(freqs)
        .map(|(m, f)| {
            let m = if mobility { m / f.max(1e-9) } else { *m };
            20.0 * m.max(1e-300).log10()
        })
        .collect();
    // Peaks where the output is mostly noise (coherence under NOISE_COHERENCE) are noise
    // spikes, not modes: left out.
    let pick_cfg = ModeConfig {
        min_above_floor_db: if curve.coherence.is_some() {
            cfg.min_above_floor_coherent_db
        } else {
            cfg.min_above_floor_db
        },
        ..cfg.clone()
    };
    let picked: Vec<peaks::Peak> = peaks::pick(freqs, &db, &pick_cfg)
        .into_iter()
        .filter(|p| {
            curve
                .coherence
                .as_ref()
                .is_none_or(|c| c[p.index] >= noise_coherence(cfg.averages))
        })
        .collect();
    // With an exponential window every structural peak is at least as wide as the window's
    // own half-power band, 1/(pi tau) Hz (its pole moved by 1/tau); a peak under 0.8 of that
    // is a noise or leakage spike, not a mode.
    let picked: Vec<peaks::Peak> = match tau_s {
        Some(tau) => picked
            .into_iter()
            .filter(|p| {
                let r = halfpower::refine_peak(freqs, &db, p.index);
                halfpower::half_power(freqs, &db, p.index, r.level_db)
                    .map_or(true, |b| b.1 - b.0 >= 0.8 / (PI * tau))
            })
            .collect(),
        None => picked,
    };
    let peak_freqs: Vec<f64> = picked.iter().map(|p| freqs[p.index]).collect();
    let mut seeds = Vec::with_capacity(picked.len());
    let mut modes: Vec<Mode> = picked
        .iter()
        .map(|p| {
            let refined = halfpower::refine_peak(freqs, &db, p.index);
            let band = halfpower::half_power(freqs, &db, p.index, refined.level_db);
            let mut flags = Vec::new();
            let coherence = curve.coherence.as_ref().map(|c| c[p.index]);
            if coherence.is_some_and(|c| c < LOW_COHERENCE) {
                flags.push(Flag::LowCoherence);
            }
            let (mut f, mut zeta, mut hp) = (refined.frequency_hz, None, None);
            let mut window_damping = 0.0;
            // Seed of the band fit: apparent values; without a band, 1 % plus the window's.
            let mut seed = fit::Seed {
                frequency_hz: f,
                damping_ratio: 0.01 + tau_s.map_or(0.0, |t| 1.0 / (t * 2.0 * PI * f)),
            };
            match band {
                Ok(b) => {
                    let (f_band, z_apparent) = if mobility {
                        halfpower::mobility_band(b.0, b.1)
                    } else {
                        (f, halfpower::damping_from_band(b.0, b.1, f))
                    };
                    f = f_band;
                    seed = fit::Seed {
                        frequency_hz: f,
                        damping_ratio: z_apparent.clamp(1e-4, 0.3),
                    };
                    let lines = (b.1 - b.0) / resolution_hz;
                    if lines < MIN_LINES {
                        flags.push(Flag::FewLines);
                    }
                    let width = b.1 - b.0;
                    if peak_freqs
                        .iter()
                        .any(|&q| q != freqs[p.index] && (q - f).abs() < 2.0 * width)
                    {
                        flags.push(Flag::Overlap);
                    }
                    let (f_c, z_c) = remove_window_damping(f, z_apparent, tau_s);
                    window_damping = z_apparent - z_c;
                    if z_c <= 0.0 {
                        flags.push(Flag::WindowDominated);
                    } else {
                        zeta = Some(z_c);
                    }
                    f = f_c;
                    hp = Some(HalfPowerBand {
                        low_hz: b.0,
                        high_hz: b.1,
                        lines,
                    });
                }
                Err(halfpower::Blocked::Overlap) => {
                    flags.push(Flag::Overlap);
                    flags.push(Flag::NoHalfPower);
                }
                Err(halfpower::Blocked::Edge) => flags.push(Flag::NoHalfPower),
            }
            seeds.push(seed);
            Mode {
                frequency_hz: f,
                damping_ratio: zeta,
                q: zeta.map(|z| 1.0 / (2.0 * z)),
                magnitude: curve.magnitude[p.index],
                phase_deg: curve.phase_deg.as_ref().map(|ph| ph[p.index]),
                coherence,
                prominence_db: p.prominence_db,
                half_power: hp,
                window_damping,
                method: "half_power".into(),
                flags,
                half_power_estimate: Some(Estimate {
                    frequency_hz: f,
                    damping_ratio: zeta,
                }),
                fit: None,
                uncertainty: None,
                ringdown: None,
            }
        })
        .collect();
    fit::refine_modes(
        freqs,
        curve,
        resolution_hz,
        tau_s,
        &mut modes,
        &seeds,
        &fit::FitConfig::default(),
    );
    modes.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    modes
}
