//! Mode finding: peaks above the noise floor, refined, with half-power damping and flags.

pub mod fit;
pub mod halfpower;
pub mod leftout;
pub mod peaks;
pub mod powerfit;
pub mod ringdown;
pub mod softmount;
pub mod uncertainty;

use crate::spectra::{Curve, remove_window_damping};
use leftout::describe_left_out;
pub use leftout::{LeftOut, LeftOutReason, ModeSearch};
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

/// Find the modes on a curve, saying what was set aside. Every test that decides whether a
/// peak is a mode (coherence above chance, prominence, width the windows allow, lift over
/// the background) runs before the limit on the count, so noise spikes and hum lines
/// cannot crowd real modes out; what the limit still drops is listed.
pub fn search_modes(
    freqs: &[f64],
    curve: &Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    cfg: &ModeConfig,
    ctx: &SearchContext,
) -> ModeSearch {
    let mut out = ModeSearch {
        band_hz: cfg.band_hz,
        ..ModeSearch::default()
    };
    let power = match (curve.basis, cfg.response_sensor) {
        (crate::spectra::Basis::Transmissibility, _) => 0,
        (_, Some(kind)) => kind.mobility_power(),
        (_, None) if cfg.acceleration_response => -1,
        _ => 0,
    };
    // After the weighting the curve is read as a mobility (velocity per force), where the
    // half-power relation is exact; a transmissibility is read as it is.
    let mobility = curve.basis != crate::spectra::Basis::Transmissibility
        && (cfg.response_sensor.is_some() || cfg.acceleration_response);
    let db: Vec<f64> = curve
        .magnitude
        .iter()
        .zip(freqs)
        .map(|(m, f)| {
            let m = m * f.max(1e-9).powi(power);
            20.0 * m.max(1e-300).log10()
        })
        .collect();
    // With one average there is no coherence to test (it is 1 at every line).
    let coherent = curve.coherence.is_some() && cfg.averages != 1;
    // What vouches for a weak peak: the coherence, or without one the taps' agreement
    // (three taps at least: with two, half of all noise lines agree better than 0.5).
    let vouch: Option<&[f64]> = if coherent {
        curve.coherence.as_deref()
    } else {
        ctx.tap_agreement.filter(|_| cfg.averages >= 3)
    };
    let pick_cfg = ModeConfig {
        min_above_floor_db: if coherent {
            cfg.min_above_floor_coherent_db
        } else {
            cfg.min_above_floor_db
        },
        min_prominence_db: if vouch.is_some() {
            cfg.min_prominence_coherent_db
        } else {
            cfg.min_prominence_db
        },
        ..cfg.clone()
    };
    let mut picked = Vec::new();
    let background = ctx.background.map(|(bg, taps)| {
        let bg_db: Vec<f64> = bg.iter().map(|g| 10.0 * g.max(1e-300).log10()).collect();
        let floor = peaks::noise_floor(freqs, &bg_db, peaks::band_range(freqs, cfg.band_hz));
        (bg, taps, bg_db, floor)
    });
    for p in peaks::pick(freqs, &db, &pick_cfg) {
        let leave = |reason| LeftOut {
            frequency_hz: freqs[p.index],
            prominence_db: p.prominence_db,
            reason,
        };
        // Peaks where the output is mostly noise (coherence under the chance level for
        // this many averages) are noise, not modes.
        // A weak peak (under the prominence asked of curves without coherence) needs a
        // coherence that vouches for it, not only one above chance.
        let needed = if p.prominence_db < cfg.min_prominence_db {
            LOW_COHERENCE.max(noise_coherence(cfg.averages))
        } else {
            noise_coherence(cfg.averages)
        };
        if coherent
            && curve
                .coherence
                .as_ref()
                .is_some_and(|c| c[p.index] < needed)
        {
            out.incoherent_peaks += 1;
            continue;
        }
        if !coherent && p.prominence_db < cfg.min_prominence_db {
            if vouch.is_some_and(|a| a[p.index] < needed) {
                out.left_out.push(leave(LeftOutReason::Disagreeing));
                continue;
            }
            // The taps vouch for the peak's phase, not for its width: without a coherence a
            // weak peak must show its own half-power band before it may seed a band fit.
            let r = halfpower::refine_peak(freqs, &db, p.index);
            if halfpower::half_power(freqs, &db, p.index, r.level_db).is_err() {
                out.left_out.push(leave(LeftOutReason::Spike));
                continue;
            }
        }
        // With an exponential window every structural peak is at least as wide as the
        // window's own half-power band, 1/(pi tau) Hz (its pole moved by 1/tau). A peak
        // under 0.8 of that is a noise or leakage spike; without a coherence to vouch for
        // the peak it must be 1.1 times as wide (noise under the window is about as wide as
        // the window itself): common practice, no source.
        if let Some(tau) = tau_s {
            let r = halfpower::refine_peak(freqs, &db, p.index);
            let least = if coherent { 0.8 } else { 1.1 } / (PI * tau);
            if halfpower::half_power(freqs, &db, p.index, r.level_db)
                .is_ok_and(|b| b.1 - b.0 < least)
            {
                out.left_out.push(leave(LeftOutReason::Spike));
                continue;
            }
        }
        if let Some((bg, taps, bg_db, floor)) = &background {
            let k = p.index;
            if taps[k] < bg[k] * 10f64.powf(OVER_BACKGROUND_DB / 10.0) {
                let lo = k.saturating_sub(2);
                let hi = (k + 3).min(bg.len());
                let line = (lo..hi).any(|j| bg_db[j] - floor[j] >= LINE_DB);
                out.left_out.push(leave(if line {
                    LeftOutReason::StationaryLine
                } else {
                    LeftOutReason::Background
                }));
                continue;
            }
        }
        picked.push(p);
    }
    if picked.len() > cfg.max_modes {
        picked.sort_by(|a, b| b.prominence_db.total_cmp(&a.prominence_db));
        for p in picked.drain(cfg.max_modes..) {
            out.left_out.push(LeftOut {
                frequency_hz: freqs[p.index],
                prominence_db: p.prominence_db,
                reason: LeftOutReason::Limit,
            });
        }
        picked.sort_by_key(|p| p.index);
    }
    let peak_freqs: Vec<f64> = picked.iter().map(|p| freqs[p.index]).collect();
    let mut seeds = Vec::with_capacity(picked.len());
    let mut modes: Vec<Mode> = picked
        .iter()
        .map(|p| {
            let refined = halfpower::refine_peak(freqs, &db, p.index);
            let band = halfpower::half_power(freqs, &db, p.index, refined.level_db);
            let mut flags = Vec::new();
            let coherence = curve
                .coherence
                .as_ref()
                .filter(|_| cfg.averages != 1)
                .map(|c| c[p.index]);
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
                spectrum_fit: None,
                uncertainty: None,
                ringdown: None,
                band: None,
            }
        })
        .collect();
    let budget = fit::FitBudget::standard();
    // Response only: the band fit runs on the taps' mean complex spectrum.
    let complex_response = (curve.basis == crate::spectra::Basis::Autospectrum)
        .then_some(ctx.response_complex)
        .flatten()
        .map(|h| Curve {
            basis: curve.basis,
            magnitude: h.iter().map(|v| v.norm()).collect(),
            phase_deg: Some(h.iter().map(|v| v.arg().to_degrees()).collect()),
            coherence: None,
            spread_db: None,
            unit: curve.unit.clone(),
        });
    fit::refine_modes(
        freqs,
        complex_response.as_ref().unwrap_or(curve),
        resolution_hz,
        tau_s,
        &mut modes,
        &seeds,
        &fit::FitConfig::default(),
        &budget,
    );
    if complex_response.is_some() {
        // Modes the fit added are read on the energy spectrum like the others.
        for m in modes
            .iter_mut()
            .filter(|m| m.flags.contains(&Flag::FitOnly))
        {
            let k = freqs
                .partition_point(|&f| f < m.frequency_hz)
                .min(freqs.len() - 1);
            m.magnitude = curve.magnitude[k];
        }
    }
    let poor_fits = if curve.basis == crate::spectra::Basis::Autospectrum {
        powerfit::fit_spectrum_modes(freqs, curve, resolution_hz, tau_s, &mut modes)
    } else {
        Vec::new()
    };
    // The band fit may add a mode (a peak split in two): it passes the same tests. And a
    // mode whose own damping is under a tenth of the window's is as narrow as a steady sine
    // seen through the window: hum, pickup or noise, not a decaying structure (a real
    // lightly damped mode at 0.1 % and 70 Hz still has a fifth of a 1 s record's window
    // damping): common practice, no source.
    let k_of = |f: f64| freqs.partition_point(|&x| x < f).min(freqs.len() - 1);
    modes.retain(|m| {
        let k = k_of(m.frequency_hz);
        let leave = |reason| LeftOut {
            frequency_hz: m.frequency_hz,
            prominence_db: m.prominence_db,
            reason,
        };
        if coherent
            && curve
                .coherence
                .as_ref()
                .is_some_and(|c| c[k] < noise_coherence(cfg.averages))
        {
            out.incoherent_peaks += 1;
            return false;
        }
        // Without a coherence and without a half-power band or fit nothing vouches for a
        // peak's width: it is not confirmed as a mode. And no built-up frame or arm has
        // a Q over 1000 (damping under MIN_DAMPING).
        // A weak peak (allowed on coherent curves) must show its own half-power band.
        // A mode the fit found inside a neighbour's peak is vouched for by the fit (it explains
        // the band, and the mode makes a quarter of the curve at its frequency), not by a peak.
        let weak = m.prominence_db < cfg.min_prominence_db
            && m.half_power.is_none()
            && !m.flags.contains(&Flag::FitOnly);
        let unconfirmed = weak || (!coherent && m.half_power.is_none() && m.fit.is_none());
        let too_sharp = m.damping_ratio.is_some_and(|z| z < MIN_DAMPING);
        if unconfirmed
            || too_sharp
            || (m.window_damping > 0.0
                && m.damping_ratio.is_none_or(|z| z < 0.1 * m.window_damping))
        {
            let steady = background.as_ref().is_some_and(|(bg, taps, _, _)| {
                taps[k] < bg[k] * 10f64.powf(OVER_BACKGROUND_DB / 10.0)
            });
            out.left_out.push(leave(if steady {
                LeftOutReason::StationaryLine
            } else {
                LeftOutReason::Spike
            }));
            return false;
        }
        if let Some((bg, taps, _, _)) = &background
            && taps[k] < bg[k] * 10f64.powf(OVER_BACKGROUND_DB / 10.0)
        {
            out.left_out.push(leave(LeftOutReason::StationaryLine));
            return false;
        }
        true
    });
    modes.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    out.left_out
        .sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    describe_left_out(&mut out, cfg);
    let poor: Vec<String> = poor_fits
        .iter()
        .filter(|(f, _)| modes.iter().any(|m| m.frequency_hz == *f))
        .map(|(f, r)| format!("{f:.1} Hz ({:.0} %)", 100.0 * r))
        .collect();
    if !poor.is_empty() {
        out.notes.push(format!(
            "the spectrum fit does not explain the peaks at {} (relative residual over {:.0} %): their half-power values are kept",
            poor.join(", "),
            100.0 * powerfit::MAX_RESIDUAL
        ));
    }
    let refused = budget.refused();
    if !refused.is_empty() {
        let bands: Vec<String> = (refused.iter())
            .map(|((lo, hi), n)| format!("{lo:.0}-{hi:.0} Hz ({n} modes)"))
            .collect();
        out.notes.push(format!(
            "band fits stopped at their work limit: {}; their modes keep their half-power values",
            bands.join(", ")
        ));
    }
    let stopped = budget.trials_stopped();
    if !stopped.is_empty() {
        let bands: Vec<String> = (stopped.iter())
            .map(|((lo, hi), _)| format!("{lo:.0}-{hi:.0} Hz"))
            .collect();
        out.notes.push(format!(
            "the search for more modes than the peaks show stopped at its work limit in {}: close modes there may be missing",
            bands.join(", ")
        ));
    }
    out.modes = modes;
    out
}
