//! Mode shapes from several measurement points: a fit that shares poles across all points'
//! FRFs (residues per point), shapes as normalised signed residues, and the modal assurance
//! criterion (MAC) that compares shapes.
//!
//! Model per point p (pole-residue form with residual terms, as in `modes::fit`; Ewins 2000,
//! *Modal Testing*, 2nd ed., sec. 2.6 and 4.4):
//! `H_p(w) = sum_r [R_pr / (jw - s_r) + conj(R_pr) / (jw - conj(s_r))] + L_p + U_p (w/w_c)^2`
//! with the poles `s_r` common to all points. Given the poles, every point's residues and
//! residual terms are linear and the basis is the same for all points, so one projection
//! serves them all (variable projection, Golub & Pereyra 1973); the poles are refined by
//! Levenberg-Marquardt on the summed squared residual of all points, started from the
//! single-curve fit (`modes::fit::fit_band`) of the point where the modes show best.

pub mod frf;
pub mod picture;
pub mod plan_fit;
pub mod points;

use crate::modes::fit::{self, Seed};
use nalgebra::{DMatrix, DVector};
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Modal assurance criterion of two real shapes (Allemang & Brown 1982, "A correlation
/// coefficient for modal vector analysis", IMAC 1):
/// `MAC = (a . b)^2 / ((a . a)(b . b))`, 1 for the same shape at any scale or sign, 0 for
/// orthogonal shapes. `None` when the lengths differ or a shape is all zero.
pub fn mac(a: &[f64], b: &[f64]) -> Option<f64> {
    if a.len() != b.len() || a.is_empty() {
        return None;
    }
    let dot = |x: &[f64], y: &[f64]| x.iter().zip(y).map(|(p, q)| p * q).sum::<f64>();
    let (aa, bb) = (dot(a, a), dot(b, b));
    if aa <= 0.0 || bb <= 0.0 {
        return None;
    }
    Some(dot(a, b).powi(2) / (aa * bb))
}

/// MAC of complex shapes: `|a^H b|^2 / ((a^H a)(b^H b))` (Allemang & Brown 1982).
pub fn mac_complex(a: &[Complex64], b: &[Complex64]) -> Option<f64> {
    if a.len() != b.len() || a.is_empty() {
        return None;
    }
    let dot: Complex64 = a.iter().zip(b).map(|(p, q)| p.conj() * q).sum();
    let aa: f64 = a.iter().map(|p| p.norm_sqr()).sum();
    let bb: f64 = b.iter().map(|p| p.norm_sqr()).sum();
    if aa <= 0.0 || bb <= 0.0 {
        return None;
    }
    Some(dot.norm_sqr() / (aa * bb))
}

/// One mode's shape over the points.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Shape {
    pub frequency_hz: f64,
    /// Apparent damping ratio of the shared pole (any exponential window's share still in).
    pub damping_ratio: f64,
    /// Residue at each point, rotated so the largest is real and positive, real part,
    /// divided by the largest magnitude: -1..1 with sign.
    pub amplitudes: Vec<f64>,
    /// Residues as fitted `[re, im]`, curve unit x rad/s.
    pub residues: Vec<[f64; 2]>,
    /// How real the rotated residues are: `sum Re^2 / sum |R|^2` (1 for a real, normal mode
    /// shape; common practice, no source).
    pub realness: f64,
}

/// The fit of all points.
#[derive(Debug, Clone, PartialEq)]
pub struct SharedFit {
    pub poles: Vec<Complex64>,
    /// `residues[p][r]`.
    pub residues: Vec<Vec<Complex64>>,
    /// `||H - H_fit|| / ||H||` over all points.
    pub error: f64,
    pub band_hz: (f64, f64),
}

struct Shared<'a> {
    omega: &'a [f64],
    ys: Vec<DVector<f64>>,
    wc: f64,
}

impl Shared<'_> {
    fn basis(&self, poles: &[Complex64]) -> DMatrix<f64> {
        crate::modes::fit::pole_residue_basis(self.omega, self.wc, poles)
    }

    /// Coefficients per point and the stacked residual of all points.
    fn solve(&self, poles: &[Complex64]) -> Option<(Vec<DVector<f64>>, DVector<f64>)> {
        let a = self.basis(poles);
        if !a.iter().all(|v| v.is_finite()) {
            return None;
        }
        let svd = a.clone().try_svd(true, true, 1e-15, 500)?;
        let smax = svd.singular_values.max();
        let mut coefs = Vec::new();
        let rows = a.nrows();
        let mut r = DVector::<f64>::zeros(rows * self.ys.len());
        for (p, y) in self.ys.iter().enumerate() {
            let c = svd.solve(y, 1e-12 * smax).ok()?;
            let res = y - &a * &c;
            r.rows_mut(p * rows, rows).copy_from(&res);
            coefs.push(c);
        }
        Some((coefs, r))
    }

    fn poles(p: &[f64]) -> Vec<Complex64> {
        p.chunks(2)
            .map(|c| Complex64::new(-c[1].exp(), c[0]))
            .collect()
    }

    fn params(poles: &[Complex64]) -> Vec<f64> {
        poles
            .iter()
            .flat_map(|s| [s.im, (-s.re).max(1e-9).ln()])
            .collect()
    }
}

/// Fit `n` shared poles over `band_hz` to the complex FRFs of all points (`frfs[p][line]`
/// on the lines `freqs`), seeded by `seeds`. `None` when the band is too short or the fit
/// degenerates.
pub fn fit_shared(
    freqs: &[f64],
    frfs: &[Vec<Complex64>],
    band_hz: (f64, f64),
    seeds: &[Seed],
) -> Option<SharedFit> {
    let n = seeds.len();
    let idx: Vec<usize> = (0..freqs.len())
        .filter(|&k| freqs[k] > 0.0 && freqs[k] >= band_hz.0 && freqs[k] <= band_hz.1)
        .collect();
    if n == 0 || frfs.is_empty() || idx.len() < 2 * n + 6 {
        return None;
    }
    let omega: Vec<f64> = idx.iter().map(|&k| 2.0 * PI * freqs[k]).collect();
    let k = omega.len();
    let ys: Vec<DVector<f64>> = frfs
        .iter()
        .map(|h| {
            let mut y = DVector::<f64>::zeros(2 * k);
            for (i, &l) in idx.iter().enumerate() {
                y[i] = h[l].re;
                y[k + i] = h[l].im;
            }
            y
        })
        .collect();
    let prob = Shared {
        omega: &omega,
        ys,
        wc: 0.5 * (omega[0] + omega[k - 1]),
    };
    // Starting poles: every point's own fit; the one that explains its point best.
    let mut start: Option<(f64, Vec<Complex64>)> = None;
    for h in frfs {
        if let Some(f) = fit::fit_band(freqs, h, band_hz, seeds, 60)
            && f.poles.len() == n
            && start.as_ref().is_none_or(|s| f.error < s.0)
        {
            start = Some((f.error, f.poles));
        }
    }
    let start = start.map(|s| s.1).unwrap_or_else(|| {
        seeds
            .iter()
            .map(|s| {
                let w = 2.0 * PI * s.frequency_hz;
                Complex64::new(-s.damping_ratio * w, w)
            })
            .collect()
    });
    let mut p = Shared::params(&start);
    let (_, mut r) = prob.solve(&Shared::poles(&p))?;
    let mut cost = r.norm_squared();
    let mut lambda = 1e-3;
    for _ in 0..100 {
        let m = p.len();
        let mut jac = DMatrix::<f64>::zeros(r.len(), m);
        for j in 0..m {
            let h = 1e-6 * p[j].abs().max(1e-3);
            let mut q = p.clone();
            q[j] += h;
            let (_, rq) = prob.solve(&Shared::poles(&q))?;
            jac.set_column(j, &((rq - &r) / h));
        }
        let jtj = jac.transpose() * &jac;
        let jtr = jac.transpose() * &r;
        let mut improved = false;
        for _ in 0..10 {
            let mut a = jtj.clone();
            for d in 0..m {
                a[(d, d)] += lambda * jtj[(d, d)].max(1e-300);
            }
            let Some(step) = a.lu().solve(&(-&jtr)) else {
                lambda *= 10.0;
                continue;
            };
            let q: Vec<f64> = p.iter().zip(step.iter()).map(|(x, d)| x + d).collect();
            if let Some((_, rq)) = prob.solve(&Shared::poles(&q)) {
                let c = rq.norm_squared();
                if c < cost {
                    let rel = (cost - c) / cost.max(f64::MIN_POSITIVE);
                    p = q;
                    r = rq;
                    cost = c;
                    lambda = (lambda / 10.0).max(1e-12);
                    improved = rel > 1e-12;
                    break;
                }
            }
            lambda *= 10.0;
        }
        if !improved {
            break;
        }
    }
    let poles = Shared::poles(&p);
    if !poles.iter().all(|s| s.re < 0.0 && s.im > 0.0) {
        return None;
    }
    let (coefs, r) = prob.solve(&poles)?;
    let total: f64 = prob.ys.iter().map(|y| y.norm_squared()).sum();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| poles[a].im.total_cmp(&poles[b].im));
    Some(SharedFit {
        poles: order.iter().map(|&i| poles[i]).collect(),
        residues: coefs
            .iter()
            .map(|c| {
                order
                    .iter()
                    .map(|&i| Complex64::new(c[2 * i], c[2 * i + 1]))
                    .collect()
            })
            .collect(),
        error: (r.norm_squared() / total.max(f64::MIN_POSITIVE)).sqrt(),
        band_hz: (freqs[idx[0]], freqs[idx[k - 1]]),
    })
}

/// Shapes of the fitted modes: residues normalised to the largest, rotated real, with sign.
pub fn shapes(fit: &SharedFit) -> Vec<Shape> {
    (0..fit.poles.len())
        .map(|r| {
            let col: Vec<Complex64> = fit.residues.iter().map(|row| row[r]).collect();
            let big = col
                .iter()
                .copied()
                .max_by(|a, b| a.norm().total_cmp(&b.norm()))
                .unwrap_or(Complex64::new(1.0, 0.0));
            let rot = if big.norm() > 0.0 {
                big.conj() / big.norm()
            } else {
                Complex64::new(1.0, 0.0)
            };
            let turned: Vec<Complex64> = col.iter().map(|c| c * rot).collect();
            let scale = big.norm().max(f64::MIN_POSITIVE);
            let re2: f64 = turned.iter().map(|c| c.re * c.re).sum();
            let all2: f64 = turned.iter().map(|c| c.norm_sqr()).sum();
            let s = fit.poles[r];
            let wn = s.norm();
            Shape {
                frequency_hz: wn / (2.0 * PI),
                damping_ratio: -s.re / wn,
                amplitudes: turned.iter().map(|c| c.re / scale).collect(),
                residues: col.iter().map(|c| [c.re, c.im]).collect(),
                realness: if all2 > 0.0 { re2 / all2 } else { 0.0 },
            }
        })
        .collect()
}

/// The MAC of every pair of shapes of two sets, `[i][j]`.
pub fn mac_matrix(a: &[Vec<f64>], b: &[Vec<f64>]) -> Vec<Vec<Option<f64>>> {
    a.iter()
        .map(|x| b.iter().map(|y| mac(x, y)).collect())
        .collect()
}
