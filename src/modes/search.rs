//! The mode search (`search_modes`) in named stages: the tests every peak must pass, the
//! limit on the count, each peak's estimates, the band fit and the vetting of its modes,
//! and the notes on fits that explained too little or stopped at their work limit.

use super::leftout::describe_left_out;
use super::{
    Estimate, Flag, HalfPowerBand, LINE_DB, LOW_COHERENCE, LeftOut, LeftOutReason, MIN_DAMPING,
    MIN_LINES, Mode, ModeConfig, ModeSearch, OVER_BACKGROUND_DB, SearchContext, fit, halfpower,
    noise_coherence, peaks, powerfit,
};
use crate::spectra::{Basis, Curve, remove_window_damping};
use std::f64::consts::PI;

/// The quiet background on the curve's lines: the background and the taps' energy spectral
/// densities, the background in dB and its noise floor in dB.
type Background<'a> = (&'a [f64], &'a [f64], Vec<f64>, Vec<f64>);

/// What every stage reads: the curve in dB on the basis its modes are read on, and what may
/// vouch for a peak.
struct Reading<'a> {
    freqs: &'a [f64],
    curve: &'a Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    cfg: &'a ModeConfig,
    db: Vec<f64>,
    /// The curve is read as a mobility (velocity per force).
    mobility: bool,
    /// The curve has a coherence worth testing (more than one average).
    coherent: bool,
    /// The coherence, or without one the taps' agreement.
    vouch: Option<&'a [f64]>,
    background: Option<Background<'a>>,
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
    let reading = Reading::new(freqs, curve, resolution_hz, tau_s, cfg, ctx);
    let mut picked = reading.test_peaks(&mut out);
    apply_limit(&mut picked, freqs, cfg, &mut out);
    let peak_freqs: Vec<f64> = picked.iter().map(|p| freqs[p.index]).collect();
    let (mut modes, seeds): (Vec<Mode>, Vec<fit::Seed>) = picked
        .iter()
        .map(|p| reading.estimate(p, &peak_freqs))
        .unzip();
    let budget = fit::FitBudget::standard();
    let poor_fits = reading.band_fit(ctx, &mut modes, &seeds, &budget);
    reading.vet(&mut modes, &mut out);
    modes.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    out.left_out
        .sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    describe_left_out(&mut out, cfg);
    poor_fit_note(&mut out, &poor_fits, &modes);
    work_limit_notes(&mut out, &budget);
    out.modes = modes;
    out
}

impl<'a> Reading<'a> {
    fn new(
        freqs: &'a [f64],
        curve: &'a Curve,
        resolution_hz: f64,
        tau_s: Option<f64>,
        cfg: &'a ModeConfig,
        ctx: &SearchContext<'a>,
    ) -> Self {
        let power = match (curve.basis, cfg.response_sensor) {
            (Basis::Transmissibility, _) => 0,
            (_, Some(kind)) => kind.mobility_power(),
            (_, None) if cfg.acceleration_response => -1,
            _ => 0,
        };
        // After the weighting the curve is read as a mobility (velocity per force), where the
        // half-power relation is exact; a transmissibility is read as it is.
        let mobility = curve.basis != Basis::Transmissibility
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
        let background = ctx.background.map(|(bg, taps)| {
            let bg_db: Vec<f64> = bg.iter().map(|g| 10.0 * g.max(1e-300).log10()).collect();
            let floor = peaks::noise_floor(freqs, &bg_db, peaks::band_range(freqs, cfg.band_hz));
            (bg, taps, bg_db, floor)
        });
        Reading {
            freqs,
            curve,
            resolution_hz,
            tau_s,
            cfg,
            db,
            mobility,
            coherent,
            vouch,
            background,
        }
    }

    /// The peaks that pass every test of a mode (coherence above chance, a weak peak vouched
    /// for, width the windows allow, lift over the background); the others are counted or
    /// listed in `out`.
    fn test_peaks(&self, out: &mut ModeSearch) -> Vec<peaks::Peak> {
        let (freqs, db, curve, cfg) = (self.freqs, self.db.as_slice(), self.curve, self.cfg);
        let coherent = self.coherent;
        let pick_cfg = ModeConfig {
            min_above_floor_db: if coherent {
                cfg.min_above_floor_coherent_db
            } else {
                cfg.min_above_floor_db
            },
            min_prominence_db: if self.vouch.is_some() {
                cfg.min_prominence_coherent_db
            } else {
                cfg.min_prominence_db
            },
            ..cfg.clone()
        };
        let mut picked = Vec::new();
        for p in peaks::pick(freqs, db, &pick_cfg) {
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
                if self.vouch.is_some_and(|a| a[p.index] < needed) {
                    out.left_out.push(leave(LeftOutReason::Disagreeing));
                    continue;
                }
                // The taps vouch for the peak's phase, not for its width: without a coherence a
                // weak peak must show its own half-power band before it may seed a band fit.
                let r = halfpower::refine_peak(freqs, db, p.index);
                if halfpower::half_power(freqs, db, p.index, r.level_db).is_err() {
                    out.left_out.push(leave(LeftOutReason::Spike));
                    continue;
                }
            }
            // With an exponential window every structural peak is at least as wide as the
            // window's own half-power band, 1/(pi tau) Hz (its pole moved by 1/tau). A peak
            // under 0.8 of that is a noise or leakage spike; without a coherence to vouch for
            // the peak it must be 1.1 times as wide (noise under the window is about as wide as
            // the window itself): common practice, no source.
            if let Some(tau) = self.tau_s {
                let r = halfpower::refine_peak(freqs, db, p.index);
                let least = if coherent { 0.8 } else { 1.1 } / (PI * tau);
                if halfpower::half_power(freqs, db, p.index, r.level_db)
                    .is_ok_and(|b| b.1 - b.0 < least)
                {
                    out.left_out.push(leave(LeftOutReason::Spike));
                    continue;
                }
            }
            if let Some((bg, taps, bg_db, floor)) = &self.background {
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
        picked
    }

    /// One peak's mode from its half-power band (window damping removed, flags), and the
    /// seed it gives the band fit.
    fn estimate(&self, p: &peaks::Peak, peak_freqs: &[f64]) -> (Mode, fit::Seed) {
        let (freqs, db, curve, cfg) = (self.freqs, self.db.as_slice(), self.curve, self.cfg);
        let tau_s = self.tau_s;
        let refined = halfpower::refine_peak(freqs, db, p.index);
        let band = halfpower::half_power(freqs, db, p.index, refined.level_db);
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
                let (f_band, z_apparent) = if self.mobility {
                    halfpower::mobility_band(b.0, b.1)
                } else {
                    (f, halfpower::damping_from_band(b.0, b.1, f))
                };
                f = f_band;
                seed = fit::Seed {
                    frequency_hz: f,
                    damping_ratio: z_apparent.clamp(1e-4, 0.3),
                };
                let lines = (b.1 - b.0) / self.resolution_hz;
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
        let mode = Mode {
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
        };
        (mode, seed)
    }

    /// The MDOF band fit over the modes (response only on the taps' mean complex spectrum,
    /// then the energy-spectrum fit of what it did not explain). Returns the spectrum fits
    /// that explained too little, as (frequency, relative residual).
    fn band_fit(
        &self,
        ctx: &SearchContext,
        modes: &mut Vec<Mode>,
        seeds: &[fit::Seed],
        budget: &fit::FitBudget,
    ) -> Vec<(f64, f64)> {
        let (freqs, curve) = (self.freqs, self.curve);
        // Response only: the band fit runs on the taps' mean complex spectrum.
        let complex_response = (curve.basis == Basis::Autospectrum)
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
            self.resolution_hz,
            self.tau_s,
            modes,
            seeds,
            &fit::FitConfig::default(),
            budget,
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
        if curve.basis == Basis::Autospectrum {
            powerfit::fit_spectrum_modes(freqs, curve, self.resolution_hz, self.tau_s, modes)
        } else {
            Vec::new()
        }
    }

    /// Vets the modes after the band fit: those it added pass the same tests, and modes too
    /// sharp for a decaying structure, or that nothing vouches for, are set aside.
    fn vet(&self, modes: &mut Vec<Mode>, out: &mut ModeSearch) {
        let (freqs, curve, cfg, coherent) = (self.freqs, self.curve, self.cfg, self.coherent);
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
                let steady = self.background.as_ref().is_some_and(|(bg, taps, _, _)| {
                    taps[k] < bg[k] * 10f64.powf(OVER_BACKGROUND_DB / 10.0)
                });
                out.left_out.push(leave(if steady {
                    LeftOutReason::StationaryLine
                } else {
                    LeftOutReason::Spike
                }));
                return false;
            }
            if let Some((bg, taps, _, _)) = &self.background
                && taps[k] < bg[k] * 10f64.powf(OVER_BACKGROUND_DB / 10.0)
            {
                out.left_out.push(leave(LeftOutReason::StationaryLine));
                return false;
            }
            true
        });
    }
}

/// Keeps the `cfg.max_modes` most prominent peaks (in frequency order) and lists the rest.
fn apply_limit(
    picked: &mut Vec<peaks::Peak>,
    freqs: &[f64],
    cfg: &ModeConfig,
    out: &mut ModeSearch,
) {
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
}

/// The note on kept modes whose spectrum fit explained too little.
fn poor_fit_note(out: &mut ModeSearch, poor_fits: &[(f64, f64)], modes: &[Mode]) {
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
}

/// The notes on band fits and searches for more modes that stopped at their work limit.
fn work_limit_notes(out: &mut ModeSearch, budget: &fit::FitBudget) {
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
}
