//! Parametric fit of a mode on a response spectrum alone (no force, so no phase).
//!
//! Near one mode the response's energy spectrum is the squared magnitude of a single-pole
//! pair times a slowly varying numerator (the hammer's force spectrum and the sensor's
//! weighting: displacement, velocity, acceleration or a piezo's mix of them), on top of a
//! slowly varying background (the flanks of other modes, noise):
//!
//! `G(w) = (a0 + a1 x) / |w_a^2 - w^2 + 2j zeta_a w_a w|^2 + b0 + b1 x`, `x = (w - w_c) / w_c`
//!
//! (the SDOF receptance's squared magnitude, Ewins 2000, *Modal Testing*, 2nd ed., sec. 2.2;
//! from memory). `a0, a1, b0, b1` enter linearly and are solved for each trial pole
//! (variable projection, Golub & Pereyra 1973); the apparent pole `(w_a, zeta_a)` is found
//! by a Nelder-Mead search (Nelder & Mead 1965, *Computer Journal* 7(4)). Residuals are
//! relative (`(G - model) / G`): an averaged energy spectrum scatters in proportion to its
//! level. Unlike half-power on a sloped background, the slope and the sensor's weighting are
//! part of the model, so the frequency is not pulled toward the higher flank.

use super::Mode;
use crate::spectra::{Curve, remove_window_damping};
use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// One mode fitted on a response spectrum (apparent values: the window's damping is still
/// in; the caller removes it).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PowerFit {
    pub frequency_hz: f64,
    pub damping_ratio: f64,
    /// RMS of the relative residual over the band (0.05 = the model explains the spectrum
    /// to 5 % RMS).
    pub residual: f64,
    pub band_hz: (f64, f64),
    pub lines: usize,
}

/// Largest relative RMS residual for a fit to be used: common practice, no source.
pub const MAX_RESIDUAL: f64 = 0.25;

/// The linear part for a trial pole: residual RMS, or `None` when the solve fails or the
/// mode's own term comes out negative (not a peak).
fn projected(w: &[f64], g: &[f64], wc: f64, wa: f64, za: f64) -> Option<f64> {
    if !(wa > 0.0 && za > 0.0 && za < 0.5) {
        return None;
    }
    let n = w.len();
    let mut a = DMatrix::<f64>::zeros(n, 4);
    let mut b = DVector::<f64>::zeros(n);
    for (i, (&wi, &gi)) in w.iter().zip(g).enumerate() {
        let x = (wi - wc) / wc;
        let re = wa * wa - wi * wi;
        let im = 2.0 * za * wa * wi;
        // Scaled so the pole term is of order one at the peak.
        let p = (2.0 * za * wa * wa).powi(2) / (re * re + im * im);
        let inv = 1.0 / gi;
        a[(i, 0)] = p * inv;
        a[(i, 1)] = p * x * inv;
        a[(i, 2)] = inv;
        a[(i, 3)] = x * inv;
        b[i] = 1.0;
    }
    let svd = a.clone().svd(true, true);
    let c = svd.solve(&b, 1e-12).ok()?;
    if c[0] <= 0.0 {
        return None;
    }
    let r = &a * &c - &b;
    Some((r.norm_squared() / n as f64).sqrt())
}

/// Nelder-Mead on two parameters (log frequency, log damping).
fn minimise(f: impl Fn(f64, f64) -> f64, start: (f64, f64), step: (f64, f64)) -> (f64, f64, f64) {
    let mut pts = [
        (start.0, start.1),
        (start.0 + step.0, start.1),
        (start.0, start.1 + step.1),
    ];
    let mut val = pts.map(|p| f(p.0, p.1));
    for _ in 0..200 {
        let mut order = [0, 1, 2];
        order.sort_by(|&i, &j| val[i].total_cmp(&val[j]));
        let (best, mid, worst) = (order[0], order[1], order[2]);
        if (val[worst] - val[best]).abs() <= 1e-10 * val[best].abs().max(1e-12) {
            break;
        }
        let c = (
            0.5 * (pts[best].0 + pts[mid].0),
            0.5 * (pts[best].1 + pts[mid].1),
        );
        let along = |t: f64| {
            (
                c.0 + t * (pts[worst].0 - c.0),
                c.1 + t * (pts[worst].1 - c.1),
            )
        };
        let r = along(-1.0);
        let fr = f(r.0, r.1);
        if fr < val[best] {
            let e = along(-2.0);
            let fe = f(e.0, e.1);
            (pts[worst], val[worst]) = if fe < fr { (e, fe) } else { (r, fr) };
        } else if fr < val[mid] {
            (pts[worst], val[worst]) = (r, fr);
        } else {
            let k = along(0.5);
            let fk = f(k.0, k.1);
            if fk < val[worst] {
                (pts[worst], val[worst]) = (k, fk);
            } else {
                for i in [mid, worst] {
                    pts[i] = (
                        0.5 * (pts[i].0 + pts[best].0),
                        0.5 * (pts[i].1 + pts[best].1),
                    );
                    val[i] = f(pts[i].0, pts[i].1);
                }
            }
        }
    }
    let i = (0..3)
        .min_by(|&i, &j| val[i].total_cmp(&val[j]))
        .unwrap_or(0);
    (pts[i].0, pts[i].1, val[i])
}

/// Fit one mode of the energy spectrum `esd` (unit^2 s/Hz per line at `freqs`) within
/// `band_hz`, starting from apparent `(f_hz, zeta)`.
pub fn fit_peak(
    freqs: &[f64],
    esd: &[f64],
    band_hz: (f64, f64),
    seed: (f64, f64),
) -> Option<PowerFit> {
    let idx: Vec<usize> = (0..freqs.len())
        .filter(|&k| freqs[k] >= band_hz.0 && freqs[k] <= band_hz.1 && esd[k] > 0.0)
        .collect();
    if idx.len() < 8 {
        return None;
    }
    let w: Vec<f64> = idx.iter().map(|&k| 2.0 * PI * freqs[k]).collect();
    let g: Vec<f64> = idx.iter().map(|&k| esd[k]).collect();
    let wc = 2.0 * PI * seed.0;
    let cost =
        |lf: f64, lz: f64| projected(&w, &g, wc, wc * lf.exp(), lz.exp()).unwrap_or(f64::INFINITY);
    let z0 = seed.1.clamp(1e-4, 0.3);
    let (lf, lz, res) = minimise(cost, (0.0, z0.ln()), (0.3 * z0, 0.3));
    if !res.is_finite() {
        return None;
    }
    let f = seed.0 * lf.exp();
    if f < band_hz.0 || f > band_hz.1 {
        return None;
    }
    Some(PowerFit {
        frequency_hz: f,
        damping_ratio: lz.exp(),
        residual: res,
        band_hz,
        lines: idx.len(),
    })
}

/// Response-only: frequency and damping from the parametric fit of the energy spectrum
/// (`powerfit`) where it explains the peak and the band fit on the taps' mean complex
/// spectrum did not, half-power kept as the cross-check. The band is
/// +-3 apparent half-power bandwidths (at least 6 lines, at most 20 % of the frequency),
/// cut halfway to the neighbouring modes: common practice, no source. Returns the modes
/// (frequency, residual) the fit did not explain.
pub fn fit_spectrum_modes(
    freqs: &[f64],
    curve: &Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    modes: &mut [Mode],
) -> Vec<(f64, f64)> {
    let esd: Vec<f64> = curve.magnitude.iter().map(|m| m * m).collect();
    let centres: Vec<f64> = modes.iter().map(|m| m.frequency_hz).collect();
    let mut poor = Vec::new();
    for (i, m) in modes.iter_mut().enumerate() {
        // A mode the band fit explained (on the taps' mean complex spectrum) keeps it.
        if m.method == "fit" {
            continue;
        }
        // Seeds: the half-power values with the window's damping put back.
        let z_app = m.damping_ratio.unwrap_or(0.01) + m.window_damping;
        let f_app = m.frequency_hz;
        let half = (6.0 * z_app * f_app)
            .max(6.0 * resolution_hz)
            .min(0.2 * f_app);
        let mut lo = f_app - half;
        let mut hi = f_app + half;
        if i > 0 {
            lo = lo.max(0.5 * (centres[i - 1] + f_app));
        }
        if let Some(next) = centres.get(i + 1) {
            hi = hi.min(0.5 * (next + f_app));
        }
        let Some(fit) = fit_peak(freqs, &esd, (lo, hi), (f_app, z_app.max(1e-4))) else {
            continue;
        };
        if fit.residual > MAX_RESIDUAL {
            poor.push((m.frequency_hz, fit.residual));
            continue;
        }
        let (f, z) = remove_window_damping(fit.frequency_hz, fit.damping_ratio, tau_s);
        m.frequency_hz = f;
        m.window_damping = fit.damping_ratio - z;
        m.damping_ratio = (z > 0.0).then_some(z);
        m.q = m.damping_ratio.map(|z| 1.0 / (2.0 * z));
        m.method = "spectrum_fit".into();
        m.spectrum_fit = Some(fit);
    }
    poor
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Energy spectrum of a velocity sensor's response to a flat force: `w^2 / |D|^2`,
    /// riding on a sloped background of 30 % of the peak level at the low edge.
    fn velocity_spectrum(f0: f64, z: f64, freqs: &[f64]) -> Vec<f64> {
        let w0 = 2.0 * PI * f0;
        freqs
            .iter()
            .map(|&f| {
                let w = 2.0 * PI * f;
                let d = (w0 * w0 - w * w).powi(2) + (2.0 * z * w0 * w).powi(2);
                let peak = (w0 * w0) / (2.0 * z * w0 * w0).powi(2);
                w * w / d / peak + 0.3 * (1.0 - (f - f0) / f0)
            })
            .collect()
    }

    #[test]
    fn recovers_a_pole_on_a_sloped_background() {
        // The exact SDOF energy spectrum of a velocity response (Ewins 2000, sec. 2.2):
        // half-power on it is biased by the slope; the fit is not.
        let (f0, z) = (1330.7, 0.012);
        let freqs: Vec<f64> = (0..4000).map(|k| k as f64 * 0.5).collect();
        let g = velocity_spectrum(f0, z, &freqs);
        let fit = fit_peak(&freqs, &g, (f0 * 0.93, f0 * 1.07), (f0 * 1.004, 0.015)).unwrap();
        assert!((fit.frequency_hz - f0).abs() / f0 < 2e-4, "{fit:?}");
        assert!((fit.damping_ratio - z).abs() / z < 0.03, "{fit:?}");
        assert!(fit.residual < 0.02, "{fit:?}");
    }
}
