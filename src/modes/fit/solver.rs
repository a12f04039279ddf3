//! Stage 2 of the band fit: the separable least-squares problem and Levenberg-Marquardt.

use super::J;
use super::budget::FitBudget;
use nalgebra::{DMatrix, DVector};
use realfft::num_complex::Complex64;

/// nalgebra's SVD iterates without limit by default; a bounded count turns a pathological
/// matrix into a failed fit instead of a hang.
pub(super) const SVD_MAX_ITERATIONS: usize = 500;

/// Linear coefficients, residual vector and (when asked) an orthonormal basis of the model's
/// column space.
type Solved = (DVector<f64>, DVector<f64>, Option<DMatrix<f64>>);

/// The separable least-squares problem of stage 2.
pub(super) struct Problem<'a> {
    pub(super) omega: &'a [f64],
    /// Stacked [Re H; Im H].
    pub(super) y: DVector<f64>,
    pub(super) wc: f64,
    pub(super) delta: f64,
    pub(super) n: usize,
    pub(super) budget: &'a FitBudget,
}

impl Problem<'_> {
    /// Parameters `[u_r, q_r]`: `w_d = w_c + delta u`, `sigma = delta exp(q)`.
    pub(super) fn poles(&self, p: &[f64]) -> Vec<Complex64> {
        p.chunks(2)
            .map(|c| Complex64::new(-self.delta * c[1].exp(), self.wc + self.delta * c[0]))
            .collect()
    }

    pub(super) fn params(&self, poles: &[Complex64]) -> Vec<f64> {
        poles
            .iter()
            .flat_map(|s| {
                [
                    (s.im - self.wc) / self.delta,
                    (-s.re / self.delta).max(1e-9).ln(),
                ]
            })
            .collect()
    }

    /// Real basis: per mode the responses to residue 1 and j, then L, jL, U, jU.
    fn basis(&self, poles: &[Complex64]) -> DMatrix<f64> {
        pole_residue_basis(self.omega, self.wc, poles)
    }

    /// Linear coefficients and the residual vector for given poles.
    pub(super) fn solve(&self, poles: &[Complex64]) -> Option<(DVector<f64>, DVector<f64>)> {
        self.solve_with(poles, false).map(|(c, r, _)| (c, r))
    }

    /// `solve`, and with `basis` also an orthonormal basis of the model's column space
    /// (for the projected Jacobian).
    fn solve_with(&self, poles: &[Complex64], basis: bool) -> Option<Solved> {
        let (rows, cols) = (2 * self.omega.len() as u64, 2 * self.n as u64 + 4);
        let work = rows * cols * cols * if basis { 2 } else { 1 };
        if !self.budget.spend(work) {
            return None;
        }
        let mut a = self.basis(poles);
        if !a.iter().all(|v| v.is_finite()) {
            return None;
        }
        let norms: Vec<f64> = (0..a.ncols())
            .map(|c| a.column(c).norm().max(1e-300))
            .collect();
        for (c, nrm) in norms.iter().enumerate() {
            a.column_mut(c).scale_mut(1.0 / nrm);
        }
        // Least squares by QR (Householder), falling back to SVD when R is singular.
        let qr = a.clone().qr();
        let qty = qr.q().transpose() * &self.y;
        let (mut coef, q) = match qr.r().solve_upper_triangular(&qty) {
            Some(c) if c.iter().all(|v| v.is_finite()) => (c, basis.then(|| qr.q())),
            _ => {
                let svd = a.clone().try_svd(true, true, 1e-15, SVD_MAX_ITERATIONS)?;
                let smax = svd.singular_values.max();
                let c = svd.solve(&self.y, 1e-12 * smax).ok()?;
                let q = basis.then(|| {
                    let u = svd.u.as_ref().expect("SVD computed with U");
                    let keep: Vec<usize> = (0..svd.singular_values.len())
                        .filter(|&i| svd.singular_values[i] > 1e-12 * smax)
                        .collect();
                    u.select_columns(keep.iter())
                });
                (c, q)
            }
        };
        let r = &self.y - &a * &coef;
        for (c, nrm) in norms.iter().enumerate() {
            coef[c] /= nrm;
        }
        Some((coef, r, q))
    }

    /// The Jacobian of the projected residual `r(p) = y - A(p) c(p)` in Kaufman's form,
    /// `J = -P (dA/dp) c` with `P` the projector off the model's column space (Kaufman
    /// 1975, "A variable projection method for solving separable nonlinear least squares
    /// problems", BIT 15; Golub & Pereyra 2003, "Separable nonlinear least squares: the
    /// variable projection method and its applications", Inverse Problems 19, sec. 3).
    /// Mode `r` contributes `R/(jw - s) + conj(R)/(jw - conj s)`; with `s = -delta e^q +
    /// j (w_c + delta u)`, `ds/du = j delta` and `ds/dq = -delta e^q`.
    fn jacobian(&self, p: &[f64], coef: &DVector<f64>, q: &DMatrix<f64>) -> DMatrix<f64> {
        let k = self.omega.len();
        let poles = self.poles(p);
        let mut jac = DMatrix::<f64>::zeros(2 * k, p.len());
        for (i, s) in poles.iter().enumerate() {
            let res = Complex64::new(coef[2 * i], coef[2 * i + 1]);
            let sigma = -s.re;
            for (row, &w) in self.omega.iter().enumerate() {
                let jw = J * w;
                let a = 1.0 / (jw - s);
                let b = 1.0 / (jw - s.conj());
                let d_s = res * a * a;
                let d_sc = res.conj() * b * b;
                let du = (d_s - d_sc) * J * self.delta;
                let dq = -(d_s + d_sc) * sigma;
                jac[(row, 2 * i)] = -du.re;
                jac[(k + row, 2 * i)] = -du.im;
                jac[(row, 2 * i + 1)] = -dq.re;
                jac[(k + row, 2 * i + 1)] = -dq.im;
            }
        }
        let along = q * (q.transpose() * &jac);
        jac - along
    }

    pub(super) fn cost(&self, p: &[f64]) -> Option<(f64, DVector<f64>)> {
        // Decay rates beyond e^(+-40) of the band half-width are not modes.
        if !p.iter().all(|v| v.is_finite() && v.abs() < 40.0) {
            return None;
        }
        let (_, r) = self.solve(&self.poles(p))?;
        Some((r.norm_squared(), r))
    }
}

/// The pole-residue model's real basis at `omega` (rad/s) for `poles`: per mode the
/// responses to residue 1 and j, then the residual terms L, jL, U, jU (`U` scaled by
/// `(w / wc)^2`); rows are the real parts, then the imaginary parts. Shared by the band fit
/// and the multi-point shape fit.
pub(crate) fn pole_residue_basis(omega: &[f64], wc: f64, poles: &[Complex64]) -> DMatrix<f64> {
    let k = omega.len();
    let n = poles.len();
    let mut a = DMatrix::<f64>::zeros(2 * k, 2 * n + 4);
    for (i, &w) in omega.iter().enumerate() {
        let jw = J * w;
        let mut put = |c: usize, v: Complex64| {
            a[(i, c)] = v.re;
            a[(k + i, c)] = v.im;
        };
        for (r, s) in poles.iter().enumerate() {
            let p = 1.0 / (jw - s);
            let q = 1.0 / (jw - s.conj());
            put(2 * r, p + q);
            put(2 * r + 1, J * p - J * q);
        }
        let u = (w / wc).powi(2);
        let c0 = 2 * n;
        put(c0, Complex64::new(1.0, 0.0));
        put(c0 + 1, J);
        put(c0 + 2, Complex64::new(u, 0.0));
        put(c0 + 3, J * u);
    }
    a
}

/// A step that lowers the cost by less than this fraction ends the iterations: the poles
/// then move by far less than their statistical uncertainty.
const CONVERGED: f64 = 1e-10;

/// Levenberg-Marquardt on the projected cost with Kaufman's Jacobian (`Problem::jacobian`):
/// one factorisation per iteration besides the trial steps.
/// Returns (parameters, cost, iterations).
pub(super) fn levenberg_marquardt(
    prob: &Problem,
    mut p: Vec<f64>,
    max_iterations: usize,
) -> Option<(Vec<f64>, f64, usize)> {
    let (mut cost, mut r) = prob.cost(&p)?;
    let m = p.len();
    let mut lambda = 1e-3;
    let mut it = 0;
    while it < max_iterations {
        it += 1;
        let (coef, _, q) = prob.solve_with(&prob.poles(&p), true)?;
        let jac = prob.jacobian(&p, &coef, &q?);
        let jtj = jac.transpose() * &jac;
        let g = jac.transpose() * &r;
        let mut improved = false;
        while lambda < 1e12 {
            let mut a = jtj.clone();
            for d in 0..m {
                a[(d, d)] += lambda * jtj[(d, d)].max(1e-12);
            }
            let step = a
                .try_svd(true, true, 1e-15, SVD_MAX_ITERATIONS)
                .and_then(|d| d.solve(&(-&g), 1e-300).ok());
            let Some(step) = step.filter(|v| v.iter().all(|x| x.is_finite())) else {
                lambda *= 10.0;
                continue;
            };
            let trial: Vec<f64> = p.iter().zip(step.iter()).map(|(a, b)| a + b).collect();
            match prob.cost(&trial) {
                Some((c, rt)) if c.is_finite() && c < cost => {
                    let gain = (cost - c) / cost.max(f64::MIN_POSITIVE);
                    p = trial;
                    cost = c;
                    r = rt;
                    lambda = (lambda / 3.0).max(1e-12);
                    improved = true;
                    if gain < CONVERGED {
                        return Some((p, cost, it));
                    }
                    break;
                }
                _ => lambda *= 4.0,
            }
        }
        if !improved {
            break;
        }
    }
    Some((p, cost, it))
}
