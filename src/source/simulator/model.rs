//! The simulated structure and hammer: modes driven by half-sine impacts, solved in closed form.
//!
//! Each mode r is a viscously damped single-degree-of-freedom system with receptance
//! `A_r / (w_r^2 - w^2 + 2j z_r w_r w)` (Ewins 2000, *Modal Testing*, 2nd ed., sec. 2.2 and 2.6).
//! Its unit impulse response is `h_r(t) = A_r/w_d e^(-z w t) sin(w_d t) = A_r/w_d Im(e^(s t))`
//! with pole `s = -z w + j w_d`. The acceleration response to a force `f` is
//! `a(t) = A_r f(t) + A_r/w_d Im(s^2 I(t))`, `I(t) = int_0^t e^(s (t - u)) f(u) du`
//! (the `A_r f(t)` term comes from the jump of `h'` at t = 0). For a half-sine pulse the
//! integral is closed form, and after the pulse `I` only rotates by `e^(s dt)` per sample, so
//! the sampled response is exact (no integrator, no discretisation error).

use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// Standard gravity, m/s^2 per g (ISO 80000-3).
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// One structural mode as the simulator uses it (the "truth" of a simulated run).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SimMode {
    pub frequency_hz: f64,
    /// Viscous damping ratio as a fraction (0.012 = 1.2 %).
    pub damping_ratio: f64,
    /// Modal constant at each response channel, in (m/s^2)/N per unit of accelerance
    /// numerator, i.e. 1/kg (receptance numerator `A_r`).
    pub modal_constants: Vec<f64>,
}

impl SimMode {
    pub fn pole(&self) -> Complex64 {
        let w = 2.0 * std::f64::consts::PI * self.frequency_hz;
        let z = self.damping_ratio;
        Complex64::new(-z * w, w * (1.0 - z * z).sqrt())
    }
}

/// One hammer impact: a half-sine force pulse.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Impact {
    /// Time of pulse start in seconds from the start of the stream.
    pub time_s: f64,
    /// Peak force in N.
    pub peak_n: f64,
    /// Pulse width in seconds (set by the tip hardness).
    pub width_s: f64,
}

impl Impact {
    /// Force in N at time t (seconds from stream start).
    pub fn force(&self, t: f64) -> f64 {
        let u = t - self.time_s;
        if (0.0..=self.width_s).contains(&u) {
            self.peak_n * (std::f64::consts::PI * u / self.width_s).sin()
        } else {
            0.0
        }
    }

    /// `I(t) = int e^(s (t - u)) f(u) du` over the pulse up to time t, closed form.
    pub fn convolution(&self, s: Complex64, t: f64) -> Complex64 {
        let tl = t - self.time_s;
        if tl <= 0.0 {
            return Complex64::new(0.0, 0.0);
        }
        let u = tl.min(self.width_s);
        let omega = std::f64::consts::PI / self.width_s;
        let j = Complex64::new(0.0, 1.0);
        let a = j * omega - s;
        let b = -j * omega - s;
        let part = |c: Complex64| ((c * u).exp() - 1.0) / c;
        (s * tl).exp() * (part(a) - part(b)) / (2.0 * j) * self.peak_n
    }
}

/// A part on a soft mount: its acceleration is the base point's acceleration through the
/// base-excitation transmissibility `T(s) = (2 z wm s + wm^2) / (s^2 + 2 z wm s + wm^2)`
/// (Rao, *Mechanical Vibrations*, 5th ed., sec. 3.6, base excitation; section from memory).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Mount {
    /// Response point (index among the non-force sensors) the mount sits on.
    pub base_point: usize,
    /// Response point on the mounted part.
    pub mounted_point: usize,
    pub frequency_hz: f64,
    pub damping_ratio: f64,
}

/// The part rests free (on foam): its rigid-body motion adds a constant accelerance 1/M to
/// every point not on a mount (Ewins 2000, ch. 2, free-free mass line; from memory).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RigidBody {
    pub mass_kg: f64,
}

impl Mount {
    fn pole(&self) -> Complex64 {
        SimMode {
            frequency_hz: self.frequency_hz,
            damping_ratio: self.damping_ratio,
            modal_constants: Vec::new(),
        }
        .pole()
    }

    fn numerator(&self, s: Complex64) -> Complex64 {
        let wm = 2.0 * std::f64::consts::PI * self.frequency_hz;
        s * (2.0 * self.damping_ratio * wm) + wm * wm
    }

    /// The transmissibility at complex frequency s.
    pub fn transmissibility(&self, s: Complex64) -> Complex64 {
        let q = self.pole();
        self.numerator(s) / ((s - q) * (s - q.conj()))
    }
}

/// Exact acceleration response to a train of impacts, sample by sample, for any transfer
/// function written in pole-residue form `G(s) = D + sum_p R_p/(s - p) + conj(R_p)/(s - conj p)`:
/// `y(t) = D f(t) + sum_p 2 Re(R_p I_p(t))`. A mode with receptance numerator `A` has
/// accelerance residue `A p^2 / (p - conj p)` and direct term `A`; a mounted point's
/// residues follow from `T(s) G_base(s)` by partial fractions.
#[derive(Debug, Clone)]
pub struct ModalResponder {
    poles: Vec<Complex64>,
    /// `residues[pole][point]`.
    residues: Vec<Vec<Complex64>>,
    direct: Vec<f64>,
    step: Vec<Complex64>,
    /// Per pole: the decaying contribution of all impacts already finished.
    settled: Vec<Complex64>,
    /// Impacts still in progress (or not started).
    pending: Vec<Impact>,
    dt: f64,
}

impl ModalResponder {
    pub fn new(
        modes: &[SimMode],
        mount: Option<&Mount>,
        rigid: Option<RigidBody>,
        points: usize,
        sample_rate: f64,
    ) -> Self {
        let dt = 1.0 / sample_rate;
        let mut poles = Vec::new();
        let mut residues = Vec::new();
        let rigid_term = rigid.map_or(0.0, |r| 1.0 / r.mass_kg);
        let mut direct: Vec<f64> = (0..points)
            .map(|c| {
                if mount.is_some_and(|m| m.mounted_point == c) {
                    0.0
                } else {
                    rigid_term
                }
            })
            .collect();
        let constant = |m: &SimMode, c: usize| m.modal_constants.get(c).copied().unwrap_or(0.0);
        for m in modes {
            let p = m.pole();
            let mut row = vec![Complex64::new(0.0, 0.0); points];
            for (c, r) in row.iter_mut().enumerate() {
                if mount.is_some_and(|mt| mt.mounted_point == c) {
                    continue;
                }
                *r = constant(m, c) * p * p / (p - p.conj());
                direct[c] += constant(m, c);
            }
            if let Some(mt) = mount {
                let base = constant(m, mt.base_point) * p * p / (p - p.conj());
                row[mt.mounted_point] = mt.transmissibility(p) * base;
            }
            poles.push(p);
            residues.push(row);
        }
        if let Some(mt) = mount {
            let q = mt.pole();
            let g_base: Complex64 = modes
                .iter()
                .map(|m| {
                    let wr = 2.0 * std::f64::consts::PI * m.frequency_hz;
                    constant(m, mt.base_point) * q * q
                        / (q * q + q * (2.0 * m.damping_ratio * wr) + wr * wr)
                })
                .sum::<Complex64>()
                + rigid_term;
            let mut row = vec![Complex64::new(0.0, 0.0); points];
            row[mt.mounted_point] = g_base * mt.numerator(q) / (q - q.conj());
            poles.push(q);
            residues.push(row);
        }
        let step = poles.iter().map(|s| (s * dt).exp()).collect();
        let settled = vec![Complex64::new(0.0, 0.0); poles.len()];
        ModalResponder {
            poles,
            residues,
            direct,
            step,
            settled,
            pending: Vec::new(),
            dt,
        }
    }

    pub fn add_impact(&mut self, impact: Impact) {
        self.pending.push(impact);
    }

    /// The transfer function (acceleration per force) at point c and frequency f in Hz.
    pub fn transfer(&self, c: usize, f: f64) -> Complex64 {
        let s = Complex64::new(0.0, 2.0 * std::f64::consts::PI * f);
        self.poles
            .iter()
            .zip(&self.residues)
            .map(|(p, r)| r[c] / (s - p) + r[c].conj() / (s - p.conj()))
            .sum::<Complex64>()
            + self.direct[c]
    }

    /// Force (N) and acceleration (m/s^2) at each response point for sample index n.
    /// Must be called with n = 0, 1, 2, ... in order.
    pub fn sample(&mut self, n: u64, accel_out: &mut [f64]) -> f64 {
        let t = n as f64 * self.dt;
        for (state, step) in self.settled.iter_mut().zip(&self.step) {
            *state *= step;
        }
        // Impacts that have ended fold into the settled state, exactly at this sample.
        let mut i = 0;
        while i < self.pending.len() {
            let imp = self.pending[i];
            if t > imp.time_s + imp.width_s {
                for (state, s) in self.settled.iter_mut().zip(&self.poles) {
                    *state += imp.convolution(*s, t);
                }
                self.pending.swap_remove(i);
            } else {
                i += 1;
            }
        }
        let force: f64 = self.pending.iter().map(|imp| imp.force(t)).sum();
        for (a, d) in accel_out.iter_mut().zip(&self.direct) {
            *a = d * force;
        }
        for (k, &p) in self.poles.iter().enumerate() {
            let mut conv = self.settled[k];
            for imp in &self.pending {
                conv += imp.convolution(p, t);
            }
            for (a, r) in accel_out.iter_mut().zip(&self.residues[k]) {
                *a += 2.0 * (r * conv).re;
            }
        }
        force
    }
}

/// Accelerance `a/F` of the modal sum at frequency f (Hz), analytic: `-w^2` times receptance.
pub fn accelerance(modes: &[SimMode], point: usize, f: f64) -> Complex64 {
    let w = 2.0 * std::f64::consts::PI * f;
    modes
        .iter()
        .map(|m| {
            let wr = 2.0 * std::f64::consts::PI * m.frequency_hz;
            let den = Complex64::new(wr * wr - w * w, 2.0 * m.damping_ratio * wr * w);
            -w * w * m.modal_constants[point] / den
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The closed form must match a brute-force convolution of the impulse response.
    #[test]
    fn closed_form_matches_numerical_convolution() {
        let mode = SimMode {
            frequency_hz: 180.0,
            damping_ratio: 0.02,
            modal_constants: vec![3.0],
        };
        let fs = 20_000.0;
        let imp = Impact {
            time_s: 0.001,
            peak_n: 2.0,
            width_s: 0.0008,
        };
        let mut resp = ModalResponder::new(std::slice::from_ref(&mode), None, None, 1, fs);
        resp.add_impact(imp);
        let n_total = 2000;
        let mut exact = vec![0.0; n_total];
        let mut a = [0.0];
        for (n, e) in exact.iter_mut().enumerate() {
            resp.sample(n as u64, &mut a);
            *e = a[0];
        }
        // Reference: displacement by fine trapezoidal convolution, then acceleration by
        // central second differences; both converge to the exact answer as the grid refines.
        let s = mode.pole();
        let wd = s.im;
        let h = |t: f64| {
            if t <= 0.0 {
                0.0
            } else {
                3.0 / wd * (s.re * t).exp() * (wd * t).sin()
            }
        };
        let disp = |t: f64| {
            let m = 4000;
            let du = imp.width_s / m as f64;
            (0..=m)
                .map(|k| {
                    let u = imp.time_s + k as f64 * du;
                    let w = if k == 0 || k == m { 0.5 } else { 1.0 };
                    w * h(t - u) * imp.force(u) * du
                })
                .sum::<f64>()
        };
        let dt = 1.0 / fs;
        for n in [40usize, 200, 800, 1500] {
            let t = n as f64 * dt;
            let e = 1e-6;
            let acc = (disp(t + e) - 2.0 * disp(t) + disp(t - e)) / (e * e);
            let scale = exact.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            assert!(
                (acc - exact[n]).abs() < 2e-3 * scale,
                "n={n}: numeric {acc} vs closed form {}",
                exact[n]
            );
        }
    }
}

#[cfg(test)]
mod mount_tests {
    use super::*;

    /// The mounted point's transfer function is exactly T(jw) times the base point's.
    #[test]
    fn mounted_point_is_base_times_transmissibility() {
        let modes = vec![
            SimMode {
                frequency_hz: 310.0,
                damping_ratio: 0.02,
                modal_constants: vec![4.0, 0.0],
            },
            SimMode {
                frequency_hz: 720.0,
                damping_ratio: 0.03,
                modal_constants: vec![3.0, 0.0],
            },
        ];
        let mount = Mount {
            base_point: 0,
            mounted_point: 1,
            frequency_hz: 90.0,
            damping_ratio: 0.1,
        };
        let r = ModalResponder::new(
            &modes,
            Some(&mount),
            Some(RigidBody { mass_kg: 0.5 }),
            2,
            8000.0,
        );
        for f in [20.0, 90.0, 300.0, 1000.0] {
            let s = Complex64::new(0.0, 2.0 * std::f64::consts::PI * f);
            let want = mount.transmissibility(s) * r.transfer(0, f);
            let got = r.transfer(1, f);
            assert!(
                (got - want).norm() < 1e-9 * want.norm().max(1e-12),
                "{f} Hz: {got} vs {want}"
            );
            let free = accelerance(&modes, 0, f) + 2.0;
            assert!((r.transfer(0, f) - free).norm() < 1e-9 * free.norm());
        }
    }
}
