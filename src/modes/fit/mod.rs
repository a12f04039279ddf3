//! MDOF curve fit of a complex FRF over a band, seeded by the peak picker.
//!
//! Model (pole-residue form with residual terms, Ewins 2000, *Modal Testing*, 2nd ed.,
//! sec. 2.6 (modal sum) and sec. 4.4 (residual terms); Maia & Silva 1997, *Theoretical and
//! Experimental Modal Analysis*, sec. 4.4):
//!
//! `H(w) = sum_r [ R_r / (jw - s_r) + conj(R_r) / (jw - conj(s_r)) ] + L + U (w / w_c)^2`
//!
//! with poles `s_r = -sigma_r + j w_d,r` and complex residues `R_r`. `L` is the lower
//! residual (modes below the band: for an accelerance their mass lines are constant) and
//! `U (w/w_c)^2` the upper residual (modes above the band: for an accelerance their
//! stiffness lines grow with `w^2`). Both are complex so that a small phase error of the
//! measurement chain (filter delay) does not leak into the poles.
//!
//! Two stages:
//! 1. Rational fraction polynomial (Richardson & Formenti 1982, "Parameter estimation from
//!    frequency response measurements using rational fraction polynomials", IMAC 1), in a
//!    shifted and scaled variable `x = (s - j w_c) / delta` so the band maps onto `j[-1, 1]`
//!    (complex coefficients; this replaces their orthogonal polynomials as the conditioning
//!    device), linearised as in Levy 1959 and re-weighted by `1 / |D_prev|` as in
//!    Sanathanan & Koerner 1963 ("Transfer function synthesis as a ratio of two complex
//!    polynomials", IEEE Trans. Automatic Control 8(1)). Gives starting poles.
//! 2. Nonlinear least squares on the pole-residue model above: the residues and residual
//!    terms enter linearly and are eliminated (variable projection, Golub & Pereyra 1973,
//!    "The differentiation of pseudo-inverses and nonlinear least squares problems whose
//!    variables separate", SIAM J. Numer. Anal. 10(2)); the poles are refined by
//!    Levenberg-Marquardt (Marquardt 1963, SIAM J. Appl. Math. 11(2)). With white complex
//!    noise on the FRF this is the maximum-likelihood estimate of the poles.
//!
//! All linear solves use nalgebra's SVD.

mod budget;
mod order;
mod solver;

pub use budget::{FIT_TIME, FIT_WORK, FIT_WORK_PER_BAND, FIT_WORK_TRIALS, FitBudget};
pub use order::{SPLIT_MIN_ERROR, group_seeds, refine_modes};
pub(crate) use solver::pole_residue_basis;
use solver::{Problem, SVD_MAX_ITERATIONS, levenberg_marquardt};

use super::{Flag, Mode};
use crate::spectra::{Curve, remove_window_damping};
use nalgebra::{DMatrix, DVector};
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

const J: Complex64 = Complex64::new(0.0, 1.0);

/// A starting point for one mode (apparent values, as read from the windowed curve).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Seed {
    pub frequency_hz: f64,
    pub damping_ratio: f64,
}

/// The fit of one band. Poles are apparent: the exponential window's damping is still in.
#[derive(Debug, Clone, PartialEq)]
pub struct BandFit {
    /// Poles `s = -sigma + j w_d` in rad/s (upper half plane), sorted by frequency.
    pub poles: Vec<Complex64>,
    /// Residue of the curve at each pole, curve unit x rad/s.
    pub residues: Vec<Complex64>,
    /// Lower residual term `L` (curve unit).
    pub lower_residual: Complex64,
    /// Upper residual coefficient `U` of `(w / w_c)^2` (curve unit).
    pub upper_residual: Complex64,
    /// Reference angular frequency `w_c` of the upper residual, rad/s.
    pub omega_c: f64,
    pub band_hz: (f64, f64),
    /// Spectral lines used.
    pub lines: usize,
    /// Normalised residual `||H - H_fit|| / ||H||` over the band.
    pub error: f64,
    /// Correlation `|<H, H_fit>|^2 / (||H||^2 ||H_fit||^2)`, 1 for a perfect fit.
    pub correlation: f64,
    pub iterations: usize,
}

impl BandFit {
    /// The fitted model at frequency `f_hz`.
    pub fn evaluate(&self, f_hz: f64) -> Complex64 {
        let w = 2.0 * PI * f_hz;
        let jw = J * w;
        let modal: Complex64 = self
            .poles
            .iter()
            .zip(&self.residues)
            .map(|(s, r)| r / (jw - s) + r.conj() / (jw - s.conj()))
            .sum();
        modal + self.lower_residual + self.upper_residual * (w / self.omega_c).powi(2)
    }
}

/// Settings of the band fit inside `find_modes`.
#[derive(Debug, Clone, PartialEq)]
pub struct FitConfig {
    /// Half-width of a mode's band in half-power bandwidths (`2 zeta f`).
    pub bandwidths: f64,
    /// ... but at least this many true resolution lines.
    pub min_half_lines: f64,
    /// ... and at most this fraction of the mode's frequency.
    pub max_half_fraction: f64,
    /// A fit is used only if its correlation reaches this.
    pub min_correlation: f64,
    pub max_iterations: usize,
}

impl Default for FitConfig {
    /// Band of +-3 half-power bandwidths, at least +-6 lines: common practice, no source.
    fn default() -> Self {
        FitConfig {
            bandwidths: 3.0,
            min_half_lines: 6.0,
            max_half_fraction: 0.2,
            min_correlation: 0.9,
            max_iterations: 60,
        }
    }
}

/// One mode's fitted values as stored in the mode list (window's damping removed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FittedMode {
    pub frequency_hz: f64,
    /// Damping ratio with the window's share removed (negative: window-dominated).
    pub damping_ratio: f64,
    /// Damping ratio the exponential window added.
    pub window_damping: f64,
    /// Residue of the curve at the pole `[re, im]`, curve unit x rad/s.
    pub residue: [f64; 2],
    /// Modal constant `[re, im]` read as for an accelerance: `A = 2j w_d R / s^2` with the
    /// true pole `s`, so that a mode `A / (w_n^2 - w^2 + 2j zeta w_n w)` in receptance gives
    /// back `A` (Ewins 2000, sec. 2.2 and 2.6). Real for a proportionally damped mode.
    pub modal_constant: [f64; 2],
    pub band_hz: (f64, f64),
    /// Modes fitted together in this band.
    pub modes_in_band: usize,
    pub lines: usize,
    pub error: f64,
    pub correlation: f64,
}

/// Lines of `freqs` inside `band_hz`, skipping DC.
fn band_lines(freqs: &[f64], band_hz: (f64, f64)) -> Vec<usize> {
    (0..freqs.len())
        .filter(|&k| freqs[k] > 0.0 && freqs[k] >= band_hz.0 && freqs[k] <= band_hz.1)
        .collect()
}

/// Rational fraction polynomial poles in the band (stage 1). `n` modes.
pub fn rfp_poles(omega: &[f64], h: &[Complex64], n: usize) -> Option<Vec<Complex64>> {
    if n == 0 || omega.len() < 3 * n + 3 {
        return None;
    }
    let (lo, hi) = (omega[0], omega[omega.len() - 1]);
    let wc = 0.5 * (lo + hi);
    let delta = 0.5 * (hi - lo);
    if delta <= 0.0 {
        return None;
    }
    let x: Vec<Complex64> = omega.iter().map(|w| J * ((w - wc) / delta)).collect();
    let nb = n + 2; // numerator degree n + 1: a background slope beside the modes
    let m = nb + n;
    let mut weights = vec![1.0; omega.len()];
    let mut roots = None;
    for _pass in 0..4 {
        let mut a = DMatrix::<Complex64>::zeros(omega.len(), m);
        let mut b = DVector::<Complex64>::zeros(omega.len());
        for (k, (&xk, &hk)) in x.iter().zip(h).enumerate() {
            let wk = weights[k];
            let mut p = Complex64::new(1.0, 0.0);
            for i in 0..nb {
                if i < nb {
                    a[(k, i)] = p * wk;
                }
                if i < n {
                    a[(k, nb + i)] = -hk * p * wk;
                }
                if i == n {
                    b[k] = hk * p * wk;
                }
                p *= xk;
            }
        }
        if !(a.iter().all(|v| v.is_finite()) && b.iter().all(|v| v.is_finite())) {
            return None;
        }
        let coef = a
            .try_svd(true, true, 1e-15, SVD_MAX_ITERATIONS)?
            .solve(&b, 1e-13)
            .ok()?;
        let den: Vec<Complex64> = (0..n).map(|i| coef[nb + i]).collect();
        // Next weights: 1 / |D(x_k)| (Sanathanan & Koerner 1963).
        for (k, &xk) in x.iter().enumerate() {
            // Horner on D(x) = x^n + sum a_i x^i.
            let d = den
                .iter()
                .rev()
                .fold(Complex64::new(1.0, 0.0), |d, c| d * xk + c);
            weights[k] = 1.0 / d.norm().max(1e-12);
        }
        let wmax = weights.iter().cloned().fold(0.0, f64::max);
        weights.iter_mut().for_each(|w| *w /= wmax);
        roots = polynomial_roots(&den);
    }
    let roots = roots?;
    Some(roots.iter().map(|r| J * wc + r * delta).collect())
}

/// Roots of the monic polynomial `x^n + c[n-1] x^(n-1) + ... + c[0]` (companion matrix
/// eigenvalues, complex Schur form in nalgebra).
fn polynomial_roots(c: &[Complex64]) -> Option<Vec<Complex64>> {
    let n = c.len();
    if n == 1 {
        return Some(vec![-c[0]]);
    }
    let mut m = DMatrix::<Complex64>::zeros(n, n);
    for i in 1..n {
        m[(i, i - 1)] = Complex64::new(1.0, 0.0);
    }
    for i in 0..n {
        m[(i, n - 1)] = -c[i];
    }
    let ev = nalgebra::linalg::Schur::try_new(m, 1e-14, 10_000)?.eigenvalues()?;
    Some(ev.iter().copied().collect())
}

/// Fit the modes of `seeds` jointly over `band_hz` of the complex curve `h` (one value per
/// line of `freqs`). Returns `None` when the band is too short or the fit degenerates.
pub fn fit_band(
    freqs: &[f64],
    h: &[Complex64],
    band_hz: (f64, f64),
    seeds: &[Seed],
    max_iterations: usize,
) -> Option<BandFit> {
    let budget = FitBudget::new(FIT_WORK, None);
    fit_band_within(freqs, h, band_hz, seeds, max_iterations, &budget)
}

/// `fit_band` drawing on a shared budget (`None` when it runs out).
pub fn fit_band_within(
    freqs: &[f64],
    h: &[Complex64],
    band_hz: (f64, f64),
    seeds: &[Seed],
    max_iterations: usize,
    budget: &FitBudget,
) -> Option<BandFit> {
    fit_band_limited(
        freqs,
        h,
        band_hz,
        seeds,
        max_iterations,
        budget,
        FIT_WORK_PER_BAND,
        Start::RfpFirst,
        false,
    )
}

/// Where the iterations of a band fit start.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Start {
    /// From the rational-fraction poles paired with the seeds, then from the seeds.
    RfpFirst,
    /// From the seeds (values of an earlier fit), then from the rational-fraction poles.
    SeedsFirst,
}

/// `fit_band_within` with at most `limit` units of work for this fit; `trial` for a trial of
/// more modes (listed apart when it runs out).
#[allow(clippy::too_many_arguments)]
fn fit_band_limited(
    freqs: &[f64],
    h: &[Complex64],
    band_hz: (f64, f64),
    seeds: &[Seed],
    max_iterations: usize,
    budget: &FitBudget,
    limit: u64,
    start: Start,
    trial: bool,
) -> Option<BandFit> {
    budget.start_band(limit.min(FIT_WORK_PER_BAND));
    let fit = fit_band_inner(freqs, h, band_hz, seeds, max_iterations, budget, start);
    if budget.end_band(band_hz, seeds.len(), trial) {
        return None;
    }
    fit
}

fn fit_band_inner(
    freqs: &[f64],
    h: &[Complex64],
    band_hz: (f64, f64),
    seeds: &[Seed],
    max_iterations: usize,
    budget: &FitBudget,
    start: Start,
) -> Option<BandFit> {
    let n = seeds.len();
    let idx = band_lines(freqs, band_hz);
    if n == 0 || idx.len() < 2 * n + 6 {
        return None;
    }
    let omega: Vec<f64> = idx.iter().map(|&k| 2.0 * PI * freqs[k]).collect();
    let hb: Vec<Complex64> = idx.iter().map(|&k| h[k]).collect();
    let k = omega.len();
    let mut y = DVector::<f64>::zeros(2 * k);
    for (i, v) in hb.iter().enumerate() {
        y[i] = v.re;
        y[k + i] = v.im;
    }
    let (w_lo, w_hi) = (omega[0], omega[k - 1]);
    let prob = Problem {
        omega: &omega,
        y,
        wc: 0.5 * (w_lo + w_hi),
        delta: 0.5 * (w_hi - w_lo),
        n,
        budget,
    };
    let seed_poles: Vec<Complex64> = seeds
        .iter()
        .map(|s| {
            let w = 2.0 * PI * s.frequency_hz;
            let z = s.damping_ratio.clamp(1e-4, 0.5);
            Complex64::new(-z * w, w * (1.0 - z * z).sqrt())
        })
        .collect();
    let rfp_start = || {
        let rfp = rfp_poles(&omega, &hb, n)?;
        // Pair each seed with the nearest stable in-band RFP pole not taken yet.
        let mut pool: Vec<Complex64> = rfp
            .into_iter()
            .filter(|s| s.re < 0.0 && s.im > w_lo - prob.delta && s.im < w_hi + prob.delta)
            .filter(|s| -s.re < 0.5 * s.im)
            .collect();
        let mut paired = Vec::with_capacity(n);
        for sp in &seed_poles {
            let best = (0..pool.len()).min_by(|&a, &b| {
                (pool[a].im - sp.im)
                    .abs()
                    .total_cmp(&(pool[b].im - sp.im).abs())
            });
            match best {
                Some(i) => paired.push(pool.swap_remove(i)),
                None => paired.push(*sp),
            }
        }
        Some(paired)
    };
    let valid = |poles: &[Complex64]| {
        let ok = poles.iter().all(|s| {
            s.re < 0.0
                && -s.re < 0.7 * s.im.abs()
                && s.im > w_lo - 0.25 * prob.delta
                && s.im < w_hi + 0.25 * prob.delta
        });
        // Two poles on top of each other describe one mode twice.
        let distinct = poles.iter().enumerate().all(|(i, a)| {
            poles[i + 1..]
                .iter()
                .all(|b| (a - b).norm() > 0.05 * (-a.re).min(-b.re))
        });
        ok && distinct
    };
    let mut best: Option<(f64, Vec<f64>, usize)> = None;
    let order = match start {
        Start::RfpFirst => [true, false],
        Start::SeedsFirst => [false, true],
    };
    for from_rfp in order {
        let begin = if from_rfp {
            rfp_start()
        } else {
            Some(seed_poles.clone())
        };
        let Some(begin) = begin else { continue };
        if let Some((p, cost, it)) = levenberg_marquardt(&prob, prob.params(&begin), max_iterations)
        {
            let poles = prob.poles(&p);
            if valid(&poles) && best.as_ref().is_none_or(|b| cost < b.0) {
                best = Some((cost, p, it));
                // The first start converged to a valid set: the other would only repeat it.
                break;
            }
        }
    }
    let (_, p, iterations) = best?;
    let mut poles = prob.poles(&p);
    let (coef, r) = prob.solve(&poles)?;
    let mut residues: Vec<Complex64> = (0..n)
        .map(|i| Complex64::new(coef[2 * i], coef[2 * i + 1]))
        .collect();
    let c0 = 2 * n;
    let lower_residual = Complex64::new(coef[c0], coef[c0 + 1]);
    let upper_residual = Complex64::new(coef[c0 + 2], coef[c0 + 3]);
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| poles[a].im.total_cmp(&poles[b].im));
    poles = order.iter().map(|&i| poles[i]).collect();
    residues = order.iter().map(|&i| residues[i]).collect();
    let y_norm2 = prob.y.norm_squared();
    let fitted = &prob.y - &r;
    // <H, H_fit> in complex form from the stacked real parts.
    let (mut cross_re, mut cross_im) = (0.0, 0.0);
    for i in 0..k {
        let a = Complex64::new(prob.y[i], prob.y[k + i]);
        let b = Complex64::new(fitted[i], fitted[k + i]);
        let c = a * b.conj();
        cross_re += c.re;
        cross_im += c.im;
    }
    let fit_norm2 = fitted.norm_squared();
    let correlation = if y_norm2 > 0.0 && fit_norm2 > 0.0 {
        (cross_re * cross_re + cross_im * cross_im) / (y_norm2 * fit_norm2)
    } else {
        0.0
    };
    Some(BandFit {
        poles,
        residues,
        lower_residual,
        upper_residual,
        omega_c: prob.wc,
        band_hz: (freqs[idx[0]], freqs[idx[k - 1]]),
        lines: k,
        error: (r.norm_squared() / y_norm2.max(f64::MIN_POSITIVE)).sqrt(),
        correlation,
        iterations,
    })
}

/// The complex curve `magnitude e^(j phase)`, or `None` without phase.
pub fn complex_curve(curve: &Curve) -> Option<Vec<Complex64>> {
    let ph = curve.phase_deg.as_ref()?;
    Some(
        curve
            .magnitude
            .iter()
            .zip(ph)
            .map(|(m, p)| Complex64::from_polar(*m, p.to_radians()))
            .collect(),
    )
}

/// Convert a fitted apparent pole and residue into the stored values, removing the window.
pub fn fitted_mode(fit: &BandFit, i: usize, tau_s: Option<f64>) -> FittedMode {
    let s = fit.poles[i];
    let wn_app = s.norm();
    let z_app = -s.re / wn_app;
    let (f, z) = remove_window_damping(wn_app / (2.0 * PI), z_app, tau_s);
    let w = 2.0 * PI * f;
    let s_true = Complex64::new(-z * w, s.im);
    let res = fit.residues[i];
    let a = 2.0 * J * s.im * res / (s_true * s_true);
    FittedMode {
        frequency_hz: f,
        damping_ratio: z,
        window_damping: z_app - z,
        residue: [res.re, res.im],
        modal_constant: [a.re, a.im],
        band_hz: fit.band_hz,
        modes_in_band: fit.poles.len(),
        lines: fit.lines,
        error: fit.error,
        correlation: fit.correlation,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Receptance modal sum (Ewins 2000, *Modal Testing*, 2nd ed., eq. 2.33 form):
    /// `H(w) = sum A_r / (w_r^2 - w^2 + 2j zeta_r w_r w)`.
    fn receptance(modes: &[(f64, f64, f64)], f: f64) -> Complex64 {
        let w = 2.0 * PI * f;
        modes
            .iter()
            .map(|&(fr, z, a)| {
                let wr = 2.0 * PI * fr;
                a / Complex64::new(wr * wr - w * w, 2.0 * z * wr * w)
            })
            .sum()
    }

    #[test]
    fn rfp_alone_finds_two_poles() {
        let modes = [(100.0, 0.01, 1.0), (104.0, 0.02, 0.7)];
        let freqs: Vec<f64> = (0..400).map(|k| 90.0 + k as f64 * 0.06).collect();
        let h: Vec<Complex64> = freqs.iter().map(|&f| receptance(&modes, f)).collect();
        let omega: Vec<f64> = freqs.iter().map(|f| 2.0 * PI * f).collect();
        let mut poles = rfp_poles(&omega, &h, 2).expect("poles");
        poles.sort_by(|a, b| a.im.total_cmp(&b.im));
        for (s, &(fr, z, _)) in poles.iter().zip(&modes) {
            let f = s.norm() / (2.0 * PI);
            let zeta = -s.re / s.norm();
            assert!((f - fr).abs() < 0.05, "rfp f {f} vs {fr}");
            assert!((zeta - z).abs() < 0.1 * z, "rfp zeta {zeta} vs {z}");
        }
    }

    #[test]
    fn budget_refuses_a_fit_that_needs_more() {
        let modes = [(100.0, 0.01, 1.0), (140.0, 0.02, 0.5)];
        let freqs: Vec<f64> = (0..400).map(|k| k as f64 * 0.5).collect();
        let h: Vec<Complex64> = freqs.iter().map(|&f| receptance(&modes, f)).collect();
        let seeds = [
            Seed {
                frequency_hz: 101.0,
                damping_ratio: 0.012,
            },
            Seed {
                frequency_hz: 139.0,
                damping_ratio: 0.018,
            },
        ];
        let ample = FitBudget::new(FIT_WORK, None);
        let fit = fit_band_within(&freqs, &h, (80.0, 160.0), &seeds, 60, &ample);
        assert!(fit.is_some() && !ample.exhausted());
        // One solve of this band is 2 x 161 lines x 8^2 columns, about 20 000 units: a
        // budget of 10 000 does not cover the first.
        let tight = FitBudget::new(10_000, None);
        let fit = fit_band_within(&freqs, &h, (80.0, 160.0), &seeds, 60, &tight);
        assert!(fit.is_none());
        assert_eq!(tight.refused(), vec![((80.0, 160.0), 2)]);
    }

    #[test]
    fn short_band_is_refused() {
        let freqs: Vec<f64> = (0..5).map(|k| 100.0 + k as f64).collect();
        let h = vec![Complex64::new(1.0, 0.0); 5];
        let seed = Seed {
            frequency_hz: 102.0,
            damping_ratio: 0.01,
        };
        assert!(fit_band(&freqs, &h, (99.0, 106.0), &[seed], 20).is_none());
    }

    #[test]
    fn overlapping_bands_group() {
        let cfg = FitConfig::default();
        let s = |f: f64| Seed {
            frequency_hz: f,
            damping_ratio: 0.01,
        };
        let g = group_seeds(&[s(300.0), s(100.0), s(102.0)], 0.5, &cfg);
        assert_eq!(g.len(), 2);
        assert_eq!(g[0].1, vec![1, 2]);
        assert_eq!(g[1].1, vec![0]);
    }
}
