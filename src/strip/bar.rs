//! A free-free rectangular bar of known E and G, from beam theory (independent of the
//! E1876 formulas), and recordings of hammer taps on it for checks and demonstrations.
//!
//! Flexure (Euler-Bernoulli, free-free): `f_n = lambda_n^2 / (2 pi L^2) sqrt(E I / (rho A))`,
//! `I = b t^3 / 12`, with `lambda_n` = 4.7300, 7.8532, 10.9956, 14.1372 (Blevins 1979,
//! *Formulas for Natural Frequency and Mode Shape*, Table 8-1; from memory). Mode shapes
//! normalised so that the mean square over the length is 1 have the value 2 at a free end,
//! with sign `(-1)^(n+1)` at the far end (symmetric modes odd n).
//!
//! Torsion (Saint-Venant, free-free, no warping restraint): `f_k = k / (2 L) sqrt(G K / (rho Ip))`
//! with the polar moment `Ip = b t (b^2 + t^2) / 12` and the torsion constant of a rectangle
//! `K = (b t^3 / 3) [1 - (192 / pi^5) (t / b) sum_{n odd} tanh(n pi b / (2 t)) / n^5]`
//! (Timoshenko & Goodier, *Theory of Elasticity*, 3rd ed., sec. 109; from memory). The twist
//! is `theta_k(x) = cos(k pi x / L)`, a corner at `y = +-b/2` moves `theta y`.

use crate::rng::Rng;
use crate::source::simulator::model::Impact;
use realfft::num_complex::Complex64;
use std::f64::consts::PI;

/// Free-free Euler-Bernoulli eigenvalues `lambda_n` (Blevins 1979, Table 8-1; from memory).
pub const FREE_FREE_LAMBDA: [f64; 4] = [4.7300, 7.8532, 10.9956, 14.1372];

/// A uniform bar of known elastic constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bar {
    pub length_m: f64,
    pub width_m: f64,
    pub thickness_m: f64,
    pub density: f64,
    pub youngs_pa: f64,
    pub shear_pa: f64,
}

impl Bar {
    pub fn mass_kg(&self) -> f64 {
        self.density * self.length_m * self.width_m * self.thickness_m
    }

    /// Flexural frequency n (1-based, out of plane, through the thickness), Hz.
    pub fn flexural_hz(&self, n: usize) -> f64 {
        let (l, b, t) = (self.length_m, self.width_m, self.thickness_m);
        let lam = FREE_FREE_LAMBDA[n - 1];
        let i = b * t.powi(3) / 12.0;
        let rho_a = self.density * b * t;
        lam * lam / (2.0 * PI * l * l) * (self.youngs_pa * i / rho_a).sqrt()
    }

    /// Saint-Venant torsion constant of the rectangle, m^4.
    pub fn torsion_constant(&self) -> f64 {
        let (b, t) = (self.width_m, self.thickness_m);
        let mut sum = 0.0;
        for n in (1..200).step_by(2) {
            let n = n as f64;
            sum += (n * PI * b / (2.0 * t)).tanh() / n.powi(5);
        }
        b * t.powi(3) / 3.0 * (1.0 - 192.0 / PI.powi(5) * (t / b) * sum)
    }

    /// Torsional frequency k (1-based), Hz.
    pub fn torsional_hz(&self, k: usize) -> f64 {
        let (l, b, t) = (self.length_m, self.width_m, self.thickness_m);
        let ip = b * t * (b * b + t * t) / 12.0;
        k as f64 / (2.0 * l)
            * (self.shear_pa * self.torsion_constant() / (self.density * ip)).sqrt()
    }

    /// Modes (frequency, modal constant in 1/kg) for a tap at `(x_tap, y_tap)` and a sensor
    /// at `(x_sensor, y_sensor)`, both measured perpendicular to the face, x along the
    /// length from one end (only the ends 0 and L are supported: 0 or 1 in units of L), y
    /// across the width from the centre line (+-b/2 at the edges).
    /// Flexure: generalised mass m (mean-square-1 shapes); torsion: generalised mass
    /// `m (b^2 + t^2) / 24` (half the polar inertia, for `cos` twist).
    pub fn modes_for(&self, tap: (f64, f64), sensor: (f64, f64)) -> Vec<(f64, f64)> {
        let m = self.mass_kg();
        let end = |n: usize, x: f64| -> f64 {
            // 2 at x = 0; (-1)^(n+1) 2 at x = L.
            if x >= 0.5 && n.is_multiple_of(2) {
                -2.0
            } else {
                2.0
            }
        };
        let mut out = Vec::new();
        for n in 1..=3 {
            out.push((self.flexural_hz(n), end(n, tap.0) * end(n, sensor.0) / m));
        }
        let mt = m * (self.width_m.powi(2) + self.thickness_m.powi(2)) / 24.0;
        for k in 1..=2 {
            let th = |x: f64| (k as f64 * PI * x).cos();
            out.push((
                self.torsional_hz(k),
                th(tap.0) * tap.1 * th(sensor.0) * sensor.1 / mt,
            ));
        }
        out
    }
}

/// How to tap the simulated bar.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TapPlan {
    pub sample_rate: f64,
    pub taps: usize,
    /// Seconds between taps.
    pub spacing_s: f64,
    pub peak_force_n: f64,
    pub pulse_width_s: f64,
    pub damping_ratio: f64,
    /// Noise RMS on each channel, as a fraction of that channel's peak.
    pub noise: f64,
    pub seed: u64,
}

impl Default for TapPlan {
    fn default() -> Self {
        TapPlan {
            sample_rate: 48_000.0,
            taps: 6,
            spacing_s: 1.5,
            peak_force_n: 20.0,
            pulse_width_s: 1.0e-4,
            damping_ratio: 0.004,
            noise: 1e-4,
            seed: 16,
        }
    }
}

/// Samples of force (N) and acceleration (m/s^2) for taps on modes `(f_hz, A)` with
/// receptance `A / (w^2 - w_n^2 ... )`: the closed-form half-sine response of the project's
/// simulator (`source::simulator::model`), summed over modes, plus Gaussian noise.
pub fn synthesise(modes: &[(f64, f64)], plan: &TapPlan) -> (Vec<f64>, Vec<f64>) {
    let fs = plan.sample_rate;
    let n = ((plan.taps as f64 + 0.5) * plan.spacing_s * fs) as usize;
    let impacts: Vec<Impact> = (0..plan.taps)
        .map(|i| Impact {
            time_s: 0.5 + i as f64 * plan.spacing_s,
            peak_n: plan.peak_force_n,
            width_s: plan.pulse_width_s,
        })
        .collect();
    let mut force = vec![0.0; n];
    let mut accel = vec![0.0; n];
    for (i, f) in force.iter_mut().enumerate() {
        let t = i as f64 / fs;
        *f = impacts.iter().map(|imp| imp.force(t)).sum();
    }
    for &(f_hz, a) in modes {
        let w = 2.0 * PI * f_hz;
        let z = plan.damping_ratio;
        let wd = w * (1.0 - z * z).sqrt();
        let s = Complex64::new(-z * w, wd);
        for imp in &impacts {
            let first = (imp.time_s * fs).ceil() as usize;
            // a(t) = A f(t) + A / w_d Im(s^2 I(t)); I rotates by e^(s dt) after the pulse.
            let end_pulse = imp.time_s + imp.width_s;
            let step = (s / fs).exp();
            let mut state: Option<Complex64> = None;
            for (i, out) in accel.iter_mut().enumerate().skip(first) {
                let t = i as f64 / fs;
                let conv = match state {
                    Some(c) if t > end_pulse => c * step,
                    _ => imp.convolution(s, t),
                };
                state = Some(conv);
                let v = a * imp.force(t) + a / wd * (s * s * conv).im;
                *out += v;
                if t > end_pulse + 30.0 / (z * w) {
                    break;
                }
            }
        }
    }
    let mut rng = Rng::new(plan.seed);
    for ch in [&mut force, &mut accel] {
        let peak = ch.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for v in ch.iter_mut() {
            *v += plan.noise * peak * rng.normal();
        }
    }
    (force, accel)
}

/// Write two channels (force, acceleration) as a 32-bit float WAV, each scaled so that its
/// peak is 0.5 of the float full scale (1.0); returns the two scale factors (file value per
/// N and per m/s^2). Only frequencies matter to the strip test, so the scale is free.
pub fn write_wav(
    path: &std::path::Path,
    fs: f64,
    force: &[f64],
    accel: &[f64],
) -> crate::error::Result<(f64, f64)> {
    let gain = |ch: &[f64]| {
        let peak = ch.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        if peak > 0.0 { 0.5 / peak } else { 1.0 }
    };
    let (gf, ga) = (gain(force), gain(accel));
    write_wav_scaled(path, fs, force, accel, (gf, ga))?;
    Ok((gf, ga))
}

/// Write two channels as a 32-bit float WAV with the given scale factors (file value per
/// channel unit), so several recordings keep their relative levels.
pub fn write_wav_scaled(
    path: &std::path::Path,
    fs: f64,
    force: &[f64],
    accel: &[f64],
    (gf, ga): (f64, f64),
) -> crate::error::Result<()> {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: fs.round() as u32,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let err = |e: hound::Error| {
        crate::error::Error::new(format!("cannot write '{}': {e}", path.display()))
    };
    let mut w = hound::WavWriter::create(path, spec).map_err(err)?;
    for (f, a) in force.iter().zip(accel) {
        w.write_sample((f * gf) as f32).map_err(err)?;
        w.write_sample((a * ga) as f32).map_err(err)?;
    }
    w.finalize().map_err(err)
}
