//! Soft-mount analysis: the mount's natural frequency and damping from a measured
//! base-to-part transmissibility, and the isolation it gives.
//!
//! Model: a single-degree-of-freedom system driven through its base (viscous damping),
//! `T(r) = (1 + 2j zeta r) / (1 - r^2 + 2j zeta r)`, `r = f / f_n` (Rao, *Mechanical
//! Vibrations*, 5th ed., sec. 3.6 "Response of a damped system under the harmonic motion
//! of the base"; Inman, *Engineering Vibration*, 4th ed., sec. 2.4; section numbers from
//! memory). In the Laplace variable, `T(s) = (w_n^2 + 2 zeta w_n s) / (s^2 + 2 zeta w_n s +
//! w_n^2)`; a curve measured through the exponential window is `T(jw + 1/tau)`, which the
//! fit evaluates directly, so the window needs no separate correction.
//!
//! `|T| = 1` at `r = sqrt(2)` for every damping (same sources): isolation starts above
//! `sqrt(2) f_n`.
//!
//! The fit is nonlinear least squares in `(f_n, zeta)` by Levenberg-Marquardt (Marquardt
//! 1963), with a real gain solved in closed form at each step so that a sensitivity
//! mismatch between the two accelerometers does not bias the mount. With phase the
//! residual is complex; without phase it is the magnitude.

use crate::spectra::Curve;
use nalgebra::{DMatrix, DVector};
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Base-excitation transmissibility of the SDOF model at Laplace variable `s` (rad/s).
pub fn transmissibility_s(s: Complex64, fn_hz: f64, zeta: f64) -> Complex64 {
    let wn = 2.0 * PI * fn_hz;
    let num = Complex64::new(wn * wn, 0.0) + 2.0 * zeta * wn * s;
    num / (s * s + 2.0 * zeta * wn * s + wn * wn)
}

/// `T(r) = (1 + 2j zeta r) / (1 - r^2 + 2j zeta r)` at frequency ratio `r`.
pub fn transmissibility(r: f64, zeta: f64) -> Complex64 {
    Complex64::new(1.0, 2.0 * zeta * r) / Complex64::new(1.0 - r * r, 2.0 * zeta * r)
}

/// How the mount's damping is modelled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MountModel {
    /// A dashpot: force proportional to velocity (`T` above).
    #[default]
    Viscous,
    /// A complex stiffness `k (1 + j eta)` with a loss factor constant over frequency, the
    /// usual first model of an elastomer (Rao, *Mechanical Vibrations*, 5th ed., sec. 2.9
    /// "hysteretic damping"; from memory): `T(r) = (1 + j eta) / (1 - r^2 + j eta)`. Its
    /// `damping_ratio` is the equivalent `eta / 2` at resonance.
    Hysteretic,
}

/// Base-excitation transmissibility of a mount model at Laplace variable `s` (rad/s);
/// `zeta` is the damping ratio (viscous) or half the loss factor (hysteretic).
pub fn model_s(model: MountModel, s: Complex64, fn_hz: f64, zeta: f64) -> Complex64 {
    match model {
        MountModel::Viscous => transmissibility_s(s, fn_hz, zeta),
        MountModel::Hysteretic => {
            let wn = 2.0 * PI * fn_hz;
            let k = Complex64::new(wn * wn, 2.0 * zeta * wn * wn);
            k / (s * s + k)
        }
    }
}

/// A mount fit leaving more than this share of the transmissibility unexplained is
/// doubtful (two mount modes, a frequency-dependent elastomer, a poor base signal):
/// common practice, no source.
pub const DOUBTFUL_ERROR: f64 = 0.2;

/// The fitted mount.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MountFit {
    pub natural_frequency_hz: f64,
    pub damping_ratio: f64,
    /// Real gain between the curve and the model (1 for matched sensors).
    pub gain: f64,
    pub band_hz: (f64, f64),
    pub lines: usize,
    /// Normalised residual `||T - T_fit|| / ||T||` over the band.
    pub error: f64,
    /// True when the curve had no phase and only the magnitude was fitted.
    pub magnitude_only: bool,
    /// The damping model that explained the curve better (both are tried).
    #[serde(default)]
    pub model: MountModel,
    /// Loss factor of the hysteretic model (when it is the one kept).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub loss_factor: Option<f64>,
    /// Normalised residual of the other model, for comparison.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub other_model_error: Option<f64>,
    /// A second mount mode (bounce and pitch of a stack, say), when one mode does not
    /// explain the curve and two do (see `fit_two_modes`); the fields above are then the
    /// first mode's, and `error` the two-mode model's.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub second: Option<SecondMount>,
}

/// The second mode of a two-mode mount model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SecondMount {
    pub natural_frequency_hz: f64,
    pub damping_ratio: f64,
    /// Its share of the static transmissibility (the first mode has `1 - share`).
    pub share: f64,
    /// Normalised residual of the best one-mode model, for comparison.
    pub one_mode_error: f64,
}

impl MountFit {
    /// The model's name as shown: "viscous", "hysteretic" or "two viscous modes".
    pub fn model_name(&self) -> &'static str {
        match (&self.second, self.model) {
            (Some(_), _) => "two viscous modes",
            (None, MountModel::Viscous) => "viscous",
            (None, MountModel::Hysteretic) => "hysteretic",
        }
    }

    /// The second mode in words (`", and 172.6 Hz, damping 16.2 %"`), or nothing.
    pub fn second_text(&self) -> String {
        self.second.as_ref().map_or(String::new(), |b| {
            format!(
                ", and {:.1} Hz, damping {:.1} %",
                b.natural_frequency_hz,
                100.0 * b.damping_ratio
            )
        })
    }

    /// Frequency above which the mount isolates (`|T| < 1`): `sqrt(2) f_n` for one mode;
    /// with two, the highest frequency where the model's `|T|` is still 1 or more (scanned
    /// in steps of 0.1 % up to ten times the upper mode).
    pub fn isolation_onset_hz(&self) -> f64 {
        let Some(b) = &self.second else {
            return std::f64::consts::SQRT_2 * self.natural_frequency_hz;
        };
        let top = self.natural_frequency_hz.max(b.natural_frequency_hz);
        let mut f = 10.0 * top;
        while f > 0.1 * top {
            if self.model_at(Complex64::new(0.0, 2.0 * PI * f)).norm() >= 1.0 {
                return f;
            }
            f /= 1.001;
        }
        std::f64::consts::SQRT_2 * top
    }

    /// The model (one or two modes, unit gain) at Laplace variable `s` (rad/s).
    pub fn model_at(&self, s: Complex64) -> Complex64 {
        let first = model_s(self.model, s, self.natural_frequency_hz, self.damping_ratio);
        match &self.second {
            None => first,
            Some(b) => {
                let second = transmissibility_s(s, b.natural_frequency_hz, b.damping_ratio);
                first * (1.0 - b.share) + second * b.share
            }
        }
    }

    /// The model's `|T|` in dB at `f_hz` (no window, unit gain).
    pub fn model_db(&self, f_hz: f64) -> f64 {
        let s = Complex64::new(0.0, 2.0 * PI * f_hz);
        20.0 * self.model_at(s).norm().log10()
    }

    /// The model's power-averaged `|T|` in dB over a band (256 points, linear spacing).
    pub fn model_band_db(&self, band_hz: (f64, f64)) -> f64 {
        let n = 256;
        let mean = (0..n)
            .map(|i| {
                let f = band_hz.0 + (band_hz.1 - band_hz.0) * (i as f64 + 0.5) / n as f64;
                let s = Complex64::new(0.0, 2.0 * PI * f);
                self.model_at(s).norm_sqr()
            })
            .sum::<f64>()
            / n as f64;
        10.0 * mean.log10()
    }
}

/// The measured `|T|` in dB at `f_hz`, interpolated linearly in magnitude between lines.
pub fn isolation_db(freqs: &[f64], curve: &Curve, f_hz: f64) -> Option<f64> {
    let j = freqs.partition_point(|&f| f < f_hz);
    if j == 0 || j >= freqs.len() {
        return None;
    }
    let (f0, f1) = (freqs[j - 1], freqs[j]);
    let t = (f_hz - f0) / (f1 - f0);
    let m = curve.magnitude[j - 1] * (1.0 - t) + curve.magnitude[j] * t;
    Some(20.0 * m.max(1e-300).log10())
}

/// The measured `|T|` power-averaged over the lines in a band, in dB:
/// `10 log10(mean |T|^2)`.
pub fn isolation_band_db(freqs: &[f64], curve: &Curve, band_hz: (f64, f64)) -> Option<f64> {
    let vals: Vec<f64> = freqs
        .iter()
        .zip(&curve.magnitude)
        .filter(|(f, _)| **f >= band_hz.0 && **f <= band_hz.1)
        .map(|(_, m)| m * m)
        .collect();
    if vals.is_empty() {
        return None;
    }
    Some(10.0 * (vals.iter().sum::<f64>() / vals.len() as f64).log10())
}

/// Fit the mount model over `band_hz` (default: 0.3 to 3 times the frequency of the
/// highest `|T|` above 1 Hz). `tau_s` is the exponential window's time constant, if any.
pub fn fit_mount(
    freqs: &[f64],
    curve: &Curve,
    band_hz: Option<(f64, f64)>,
    tau_s: Option<f64>,
) -> Option<MountFit> {
    let viscous = fit_model(MountModel::Viscous, freqs, curve, band_hz, tau_s);
    let hysteretic = fit_model(MountModel::Hysteretic, freqs, curve, band_hz, tau_s);
    match (viscous, hysteretic) {
        (Some(v), Some(h)) => {
            // The hysteretic model is kept only when it explains clearly more (a tenth
            // less residual): the viscous one is the familiar default.
            let (mut keep, other) = if h.error < 0.9 * v.error {
                (h, v)
            } else {
                (v, h)
            };
            keep.other_model_error = Some(other.error);
            Some(two_if_better(keep, freqs, curve, tau_s))
        }
        (v, h) => v.or(h).map(|one| two_if_better(one, freqs, curve, tau_s)),
    }
}

/// Two viscous mount modes are kept instead of one when one leaves more than
/// `DOUBTFUL_ERROR` unexplained and two leave at most this fraction of that (the result
/// may still be doubtful, and says so): common practice, no source.
pub const TWO_MODES_RATIO: f64 = 0.8;

fn two_if_better(one: MountFit, freqs: &[f64], curve: &Curve, tau_s: Option<f64>) -> MountFit {
    if one.error <= DOUBTFUL_ERROR || one.magnitude_only {
        return one;
    }
    match fit_two_modes(&one, freqs, curve, tau_s) {
        Some(two) if two.error <= TWO_MODES_RATIO * one.error => two,
        _ => one,
    }
}

/// The two highest local maxima of `|T|` (over 5 lines) among `idx`, at least 15 % apart,
/// in frequency order.
fn two_peaks(idx: &[usize], freqs: &[f64], mag: &[f64]) -> Option<(f64, f64)> {
    let smooth = |j: usize| -> f64 {
        let lo = j.saturating_sub(2);
        let hi = (j + 3).min(idx.len());
        (lo..hi).map(|i| mag[idx[i]]).sum::<f64>() / (hi - lo) as f64
    };
    let level: Vec<f64> = (0..idx.len()).map(smooth).collect();
    let mut peaks: Vec<(f64, f64)> = (1..idx.len().saturating_sub(1))
        .filter(|&j| level[j] > level[j - 1] && level[j] >= level[j + 1])
        .map(|j| (level[j], freqs[idx[j]]))
        .collect();
    peaks.sort_by(|a, b| b.0.total_cmp(&a.0));
    let first = peaks.first()?.1;
    let second = peaks
        .iter()
        .map(|p| p.1)
        .find(|&f| (f / first).ln().abs() > 0.14)?;
    Some((first.min(second), first.max(second)))
}

/// Two viscous mount modes over the one-mode fit's band: `T = g [(1 - a) T_1 + a T_2]`
/// with `T_r` the base-excitation transmissibility of mode `r` (so `T(0) = g`, the sensor
/// gain), the two weights solved linearly for each trial pair of modes and the four
/// frequencies and dampings by Levenberg-Marquardt. Started from the two highest peaks of
/// `|T|` (else the one-mode fit's mode split to 0.8 and 1.25 times its frequency). The
/// modes must be 10 % apart, inside the band, the weights' sum (the gain) positive and the second weight
/// at least 5 % of it (either sign), or there are not two mount modes.
pub fn fit_two_modes(
    one: &MountFit,
    freqs: &[f64],
    curve: &Curve,
    tau_s: Option<f64>,
) -> Option<MountFit> {
    let ph = curve.phase_deg.as_ref()?;
    let band = one.band_hz;
    let idx: Vec<usize> = (0..freqs.len())
        .filter(|&k| freqs[k] > 0.0 && freqs[k] >= band.0 && freqs[k] <= band.1)
        .collect();
    if idx.len() < 12 {
        return None;
    }
    let sigma_w = tau_s.map_or(0.0, |t| 1.0 / t);
    let s: Vec<Complex64> = (idx.iter())
        .map(|&k| Complex64::new(sigma_w, 2.0 * PI * freqs[k]))
        .collect();
    let m: Vec<Complex64> = (idx.iter())
        .map(|&k| Complex64::from_polar(curve.magnitude[k], ph[k].to_radians()))
        .collect();
    let n = m.len();
    // Residual and the two weights for p = [ln f1, ln z1, ln f2, ln z2].
    let solve = |p: &[f64]| -> Option<(DVector<f64>, f64, f64)> {
        let mut a = DMatrix::<f64>::zeros(2 * n, 2);
        let mut y = DVector::<f64>::zeros(2 * n);
        for i in 0..n {
            let t1 = transmissibility_s(s[i], p[0].exp(), p[1].exp());
            let t2 = transmissibility_s(s[i], p[2].exp(), p[3].exp());
            (a[(i, 0)], a[(n + i, 0)]) = (t1.re, t1.im);
            (a[(i, 1)], a[(n + i, 1)]) = (t2.re, t2.im);
            (y[i], y[n + i]) = (m[i].re, m[i].im);
        }
        let c = a.clone().svd(true, true).solve(&y, 1e-12).ok()?;
        let r = y - a * &c;
        r.iter().all(|v| v.is_finite()).then_some((r, c[0], c[1]))
    };
    let (f0, z0) = (one.natural_frequency_hz, one.damping_ratio.clamp(0.01, 0.3));
    let (fa, fb) = two_peaks(&idx, freqs, &curve.magnitude).unwrap_or((0.8 * f0, 1.25 * f0));
    let p = levenberg_marquardt(vec![fa.ln(), z0.ln(), fb.ln(), z0.ln()], 200, |q| {
        solve(q).map(|(r, _, _)| r)
    })?;
    let (r, c1, c2) = solve(&p)?;
    let (mut a, mut b) = ((p[0].exp(), p[1].exp(), c1), (p[2].exp(), p[3].exp(), c2));
    if a.0 > b.0 {
        std::mem::swap(&mut a, &mut b);
    }
    let inside = |f: f64| f >= band.0 && f <= band.1;
    let plausible = |z: f64| z > 1e-3 && z < 0.5;
    // A pitch mode seen off its axis may enter with either sign; the bounce carries the
    // static transmissibility.
    let gain = c1 + c2;
    if gain <= 0.0
        || b.2.abs() < 0.05 * gain
        || b.0 < 1.1 * a.0
        || !inside(a.0)
        || !inside(b.0)
        || !plausible(a.1)
        || !plausible(b.1)
    {
        return None;
    }
    let norm: f64 = m.iter().map(|v| v.norm_sqr()).sum();
    Some(MountFit {
        natural_frequency_hz: a.0,
        damping_ratio: a.1,
        gain,
        band_hz: one.band_hz,
        lines: n,
        error: (r.norm_squared() / norm.max(f64::MIN_POSITIVE)).sqrt(),
        magnitude_only: false,
        model: MountModel::Viscous,
        loss_factor: None,
        other_model_error: None,
        second: Some(SecondMount {
            natural_frequency_hz: b.0,
            damping_ratio: b.1,
            share: b.2 / gain,
            one_mode_error: one.error,
        }),
    })
}

fn fit_model(
    model: MountModel,
    freqs: &[f64],
    curve: &Curve,
    band_hz: Option<(f64, f64)>,
    tau_s: Option<f64>,
) -> Option<MountFit> {
    let (ipk, _) = freqs
        .iter()
        .zip(&curve.magnitude)
        .enumerate()
        .filter(|(_, (f, _))| **f > 1.0 && band_hz.is_none_or(|b| **f >= b.0 && **f <= b.1))
        .max_by(|a, b| a.1.1.total_cmp(b.1.1))?;
    let f_pk = freqs[ipk];
    let band = band_hz.unwrap_or((0.3 * f_pk, 3.0 * f_pk));
    let idx: Vec<usize> = (0..freqs.len())
        .filter(|&k| freqs[k] > 0.0 && freqs[k] >= band.0 && freqs[k] <= band.1)
        .collect();
    if idx.len() < 8 {
        return None;
    }
    let sigma_w = tau_s.map_or(0.0, |t| 1.0 / t);
    let s: Vec<Complex64> = idx
        .iter()
        .map(|&k| Complex64::new(sigma_w, 2.0 * PI * freqs[k]))
        .collect();
    let meas: Option<Vec<Complex64>> = curve.phase_deg.as_ref().map(|ph| {
        idx.iter()
            .map(|&k| Complex64::from_polar(curve.magnitude[k], ph[k].to_radians()))
            .collect()
    });
    let mags: Vec<f64> = idx.iter().map(|&k| curve.magnitude[k]).collect();
    let magnitude_only = meas.is_none();
    // Residual for parameters p = [ln f_n, ln zeta], gain eliminated in closed form.
    let residual = |p: &[f64]| -> (DVector<f64>, f64) {
        let (fn_hz, zeta) = (p[0].exp(), p[1].exp());
        let model: Vec<Complex64> = s
            .iter()
            .map(|&si| model_s(model, si, fn_hz, zeta))
            .collect();
        match &meas {
            Some(m) => {
                let num: f64 = m.iter().zip(&model).map(|(a, b)| (a * b.conj()).re).sum();
                let den: f64 = model.iter().map(|b| b.norm_sqr()).sum();
                let g = num / den.max(f64::MIN_POSITIVE);
                let n = m.len();
                let mut r = DVector::zeros(2 * n);
                for i in 0..n {
                    let e = m[i] - g * model[i];
                    r[i] = e.re;
                    r[n + i] = e.im;
                }
                (r, g)
            }
            None => {
                let mm: Vec<f64> = model.iter().map(|b| b.norm()).collect();
                let num: f64 = mags.iter().zip(&mm).map(|(a, b)| a * b).sum();
                let den: f64 = mm.iter().map(|b| b * b).sum();
                let g = num / den.max(f64::MIN_POSITIVE);
                let r = DVector::from_iterator(
                    mags.len(),
                    mags.iter().zip(&mm).map(|(a, b)| a - g * b),
                );
                (r, g)
            }
        }
    };
    // Seeds: f_n at the peak, zeta from the peak height |T| ~ 1 / (2 zeta).
    let pk = curve.magnitude[ipk].max(1.0);
    let z0 = (0.5 / pk).clamp(0.01, 0.5);
    let p = levenberg_marquardt(vec![f_pk.ln(), z0.ln()], 100, |q| Some(residual(q).0))?;
    let (r, gain) = residual(&p);
    let norm: f64 = match &meas {
        Some(m) => m.iter().map(|v| v.norm_sqr()).sum::<f64>(),
        None => mags.iter().map(|v| v * v).sum::<f64>(),
    };
    Some(MountFit {
        natural_frequency_hz: p[0].exp(),
        damping_ratio: p[1].exp(),
        gain,
        band_hz: (freqs[idx[0]], freqs[idx[idx.len() - 1]]),
        lines: idx.len(),
        error: (r.norm_squared() / norm.max(f64::MIN_POSITIVE)).sqrt(),
        magnitude_only,
        model,
        loss_factor: (model == MountModel::Hysteretic).then(|| 2.0 * p[1].exp()),
        other_model_error: None,
        second: None,
    })
}

/// Levenberg-Marquardt (Marquardt 1963) on parameters that are logarithms (each kept under
/// 20 in size), with a central-difference Jacobian; `residual` is `None` where the model
/// cannot be evaluated. Returns the parameters, or `None` when the start cannot be.
fn levenberg_marquardt(
    mut p: Vec<f64>,
    iterations: usize,
    residual: impl Fn(&[f64]) -> Option<DVector<f64>>,
) -> Option<Vec<f64>> {
    let m = p.len();
    let mut r = residual(&p)?;
    let mut cost = r.norm_squared();
    let mut lambda = 1e-3;
    for _ in 0..iterations {
        let h = 1e-6;
        let mut jac = DMatrix::<f64>::zeros(r.len(), m);
        for j in 0..m {
            let mut pp = p.clone();
            let mut pm = p.clone();
            pp[j] += h;
            pm[j] -= h;
            let (Some(rp), Some(rm)) = (residual(&pp), residual(&pm)) else {
                return Some(p);
            };
            jac.set_column(j, &((rp - rm) / (2.0 * h)));
        }
        let jtj = jac.transpose() * &jac;
        let g = jac.transpose() * &r;
        let mut improved = false;
        while lambda < 1e12 {
            let mut a = jtj.clone();
            for d in 0..m {
                a[(d, d)] += lambda * jtj[(d, d)].max(1e-12);
            }
            let Some(step) = a.cholesky().map(|c| c.solve(&(-&g))) else {
                lambda *= 10.0;
                continue;
            };
            let trial: Vec<f64> = p.iter().zip(step.iter()).map(|(a, b)| a + b).collect();
            if trial.iter().all(|v| v.abs() < 20.0)
                && let Some(rt) = residual(&trial)
                && rt.norm_squared().is_finite()
                && rt.norm_squared() < cost
            {
                let c = rt.norm_squared();
                let gain = (cost - c) / cost.max(f64::MIN_POSITIVE);
                (p, r, cost) = (trial, rt, c);
                lambda = (lambda / 3.0).max(1e-12);
                improved = gain > 1e-14;
                break;
            }
            lambda *= 4.0;
        }
        if !improved {
            break;
        }
    }
    Some(p)
}

/// Transmissibility in dB at a frequency or over a band (negative = isolation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Isolation {
    pub band_hz: (f64, f64),
    /// Measured: |T| at the frequency, or 10 log10(mean |T|^2) over the band.
    pub measured_db: Option<f64>,
    /// The fitted mount model over the same band.
    pub model_db: Option<f64>,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `|T| = 1` at `r = sqrt(2)` for any damping (Rao, sec. 3.6).
    #[test]
    fn unit_transmissibility_at_root_two() {
        for z in [0.01, 0.1, 0.5] {
            let t = transmissibility(std::f64::consts::SQRT_2, z);
            assert!((t.norm() - 1.0).abs() < 1e-12);
        }
    }

    /// Two mount modes, the second entering with a negative weight (a pitch mode seen off
    /// its axis), through an exponential window and a sensor gain of 1.3: one mode does not
    /// explain the curve, two are recovered. The model is the base-excitation
    /// transmissibility above (Rao, sec. 3.6), summed; the data is made from it, so this
    /// checks the fit, not the model.
    #[test]
    fn two_mount_modes_are_recovered() {
        let (tau, gain) = (0.43, 1.3);
        let freqs: Vec<f64> = (0..600).map(|k| k as f64 * 0.5).collect();
        let (mags, phases): (Vec<f64>, Vec<f64>) = freqs
            .iter()
            .map(|&f| {
                let s = Complex64::new(1.0 / tau, 2.0 * PI * f);
                let t = gain
                    * (transmissibility_s(s, 95.0, 0.09) * 1.4
                        - transmissibility_s(s, 170.0, 0.1) * 0.4);
                (t.norm(), t.arg().to_degrees())
            })
            .unzip();
        let curve = Curve {
            basis: crate::spectra::Basis::Transmissibility,
            magnitude: mags,
            phase_deg: Some(phases),
            coherence: None,
            spread_db: None,
            unit: String::new(),
        };
        let fit = fit_mount(&freqs, &curve, None, Some(tau)).expect("a fit");
        let second = fit.second.as_ref().expect("two modes");
        assert!((fit.natural_frequency_hz - 95.0).abs() < 0.05, "{fit:?}");
        assert!((fit.damping_ratio - 0.09).abs() < 1e-3, "{fit:?}");
        assert!((second.natural_frequency_hz - 170.0).abs() < 0.1, "{fit:?}");
        assert!((second.share + 0.4).abs() < 1e-3, "{fit:?}");
        assert!(
            (fit.gain - gain).abs() < 1e-3 && fit.error < 1e-6,
            "{fit:?}"
        );
        assert!(second.one_mode_error > DOUBTFUL_ERROR, "{fit:?}");
    }

    #[test]
    fn laplace_form_matches_ratio_form() {
        let t1 = transmissibility(1.3, 0.07);
        let t2 = transmissibility_s(Complex64::new(0.0, 2.0 * PI * 130.0), 100.0, 0.07);
        assert!((t1 - t2).norm() < 1e-12);
    }
}
