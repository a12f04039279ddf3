//! Averaged auto and cross spectra over accepted hits, and the estimators built on them.
//!
//! Scaling (documented once, used everywhere):
//! - `X[k]` is the real DFT of the windowed, zero-padded record times `dt`, an estimate of
//!   the Fourier transform (unit x s).
//! - Auto and cross spectra are one-sided energy spectral densities per hit,
//!   `G_xy[k] = c_k conj(X[k]) Y[k] * scale`, with `c_k = 2` except at DC and Nyquist (1);
//!   with the default `Scaling::Energy`, `scale = 1` and the unit is unit_x unit_y s/Hz.
//!   `Scaling::Density` multiplies by `fs / sum(w^2)` so that the values equal the one-sided
//!   power spectral density of a windowed segment (unit^2/Hz), as scipy.signal.csd gives.
//! - Averages are plain means over the records added. Ratios (H1, H2, transmissibility) do
//!   not depend on `scale`.

use realfft::num_complex::Complex64;
use realfft::{RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// How auto and cross spectra are scaled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scaling {
    /// One-sided energy spectral density of a transient (unit^2 s/Hz).
    Energy,
    /// One-sided power spectral density of a stationary segment (unit^2/Hz), normalised by
    /// the sum of squares of this window (Welch 1967; scipy.signal "density" scaling).
    Density { window_power: f64 },
}

/// Running sums of the spectra between an input channel (a) and an output channel (b).
#[derive(Debug, Clone)]
pub struct CrossAccumulator {
    pub gaa: Vec<f64>,
    pub gbb: Vec<f64>,
    /// `conj(A) B`: input-to-output cross spectrum.
    pub gab: Vec<Complex64>,
    pub count: usize,
}

impl CrossAccumulator {
    pub fn new(lines: usize) -> Self {
        CrossAccumulator {
            gaa: vec![0.0; lines],
            gbb: vec![0.0; lines],
            gab: vec![Complex64::new(0.0, 0.0); lines],
            count: 0,
        }
    }

    pub fn add(&mut self, a: &[Complex64], b: &[Complex64]) {
        let sums = self.gaa.iter_mut().zip(&mut self.gbb).zip(&mut self.gab);
        for (((gaa, gbb), gab), (a, b)) in sums.zip(a.iter().zip(b)) {
            *gaa += a.norm_sqr();
            *gbb += b.norm_sqr();
            *gab += a.conj() * b;
        }
        self.count += 1;
    }

    /// Averaged, scaled spectra (Gaa, Gbb, Gab); `factor[k]` holds the one-sided factor
    /// and the scale.
    pub fn averaged(&self, factor: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<Complex64>) {
        let n = self.count.max(1) as f64;
        let gaa = self
            .gaa
            .iter()
            .zip(factor)
            .map(|(g, c)| g * c / n)
            .collect();
        let gbb = self
            .gbb
            .iter()
            .zip(factor)
            .map(|(g, c)| g * c / n)
            .collect();
        let gab = self
            .gab
            .iter()
            .zip(factor)
            .map(|(g, c)| g * c / n)
            .collect();
        (gaa, gbb, gab)
    }
}

/// H1 = Gab/Gaa: unbiased by output noise (Bendat & Piersol, *Random Data*, 4th ed., sec. 9.1).
pub fn h1(gaa: &[f64], gab: &[Complex64]) -> Vec<Complex64> {
    gab.iter()
        .zip(gaa)
        .map(|(g, a)| g / a.max(f64::MIN_POSITIVE))
        .collect()
}

/// H2 = Gbb/Gba = Gbb/conj(Gab): unbiased by input noise (Bendat & Piersol, sec. 9.1).
pub fn h2(gbb: &[f64], gab: &[Complex64]) -> Vec<Complex64> {
    gab.iter()
        .zip(gbb)
        .map(|(g, b)| {
            let d = g.conj();
            if d.norm_sqr() > 0.0 {
                Complex64::new(*b, 0.0) / d
            } else {
                Complex64::new(0.0, 0.0)
            }
        })
        .collect()
}

/// Ordinary coherence |Gab|^2 / (Gaa Gbb), in [0, 1] (Bendat & Piersol, sec. 9.2.3).
pub fn coherence(gaa: &[f64], gbb: &[f64], gab: &[Complex64]) -> Vec<f64> {
    gab.iter()
        .zip(gaa.iter().zip(gbb))
        .map(|(g, (a, b))| {
            let d = a * b;
            if d > 0.0 {
                (g.norm_sqr() / d).min(1.0)
            } else {
                0.0
            }
        })
        .collect()
}

/// A real FFT of fixed size with its buffers, producing `dt`-scaled spectra.
pub struct Transformer {
    fft: Arc<dyn RealToComplex<f64>>,
    input: Vec<f64>,
    scratch: Vec<Complex64>,
    dt: f64,
}

/// FFT plans are costly to make and immutable once made: one per size for the process.
fn plan(n_fft: usize) -> Arc<dyn RealToComplex<f64>> {
    use std::sync::{Mutex, OnceLock};
    static PLANNER: OnceLock<Mutex<RealFftPlanner<f64>>> = OnceLock::new();
    let planner = PLANNER.get_or_init(|| Mutex::new(RealFftPlanner::new()));
    match planner.lock() {
        Ok(mut p) => p.plan_fft_forward(n_fft),
        // A panic elsewhere while planning leaves the planner usable for a fresh one.
        Err(_) => RealFftPlanner::<f64>::new().plan_fft_forward(n_fft),
    }
}

impl Transformer {
    pub fn new(n_fft: usize, fs: f64) -> Self {
        let fft = plan(n_fft);
        Transformer {
            input: fft.make_input_vec(),
            scratch: fft.make_scratch_vec(),
            fft,
            dt: 1.0 / fs,
        }
    }

    /// Another transformer of the same plan with its own buffers (one per thread).
    pub fn fresh(&self) -> Self {
        Transformer {
            fft: Arc::clone(&self.fft),
            input: self.fft.make_input_vec(),
            scratch: self.fft.make_scratch_vec(),
            dt: self.dt,
        }
    }

    pub fn n_fft(&self) -> usize {
        self.input.len()
    }

    pub fn lines(&self) -> usize {
        self.input.len() / 2 + 1
    }

    /// Transform `x` times `window` (zero-padded to the FFT size) into `out`.
    pub fn transform(&mut self, x: &[f64], window: &[f64], out: &mut [Complex64]) {
        let n = x.len().min(self.input.len());
        for i in 0..n {
            self.input[i] = x[i] * window[i];
        }
        self.input[n..].iter_mut().for_each(|v| *v = 0.0);
        // Sizes are fixed at construction, so the transform cannot fail.
        let _ = self
            .fft
            .process_with_scratch(&mut self.input, out, &mut self.scratch);
        for v in out.iter_mut() {
            *v *= self.dt;
        }
    }
}

/// One-sided factor times scale for every line.
pub fn line_factors(n_fft: usize, fs: f64, scaling: Scaling) -> Vec<f64> {
    let lines = n_fft / 2 + 1;
    let scale = match scaling {
        Scaling::Energy => 1.0,
        // X carries dt; |X|^2 / dt^2 / (fs sum w^2) is scipy's density.
        Scaling::Density { window_power } => fs / window_power,
    };
    (0..lines)
        .map(|k| {
            let edge = k == 0 || (n_fft.is_multiple_of(2) && k == lines - 1);
            scale * if edge { 1.0 } else { 2.0 }
        })
        .collect()
}

/// Per-line mean and spread of a quantity across hits (Welford's algorithm).
#[derive(Debug, Clone)]
pub struct Spread {
    mean: Vec<f64>,
    m2: Vec<f64>,
    count: usize,
}

impl Spread {
    pub fn new(lines: usize) -> Self {
        Spread {
            mean: vec![0.0; lines],
            m2: vec![0.0; lines],
            count: 0,
        }
    }

    pub fn add(&mut self, values: impl Iterator<Item = f64>) {
        self.count += 1;
        let n = self.count as f64;
        for (k, v) in values.enumerate() {
            let d = v - self.mean[k];
            self.mean[k] += d / n;
            self.m2[k] += d * (v - self.mean[k]);
        }
    }

    /// Sample standard deviation per line (0 with fewer than two records).
    pub fn std_dev(&self) -> Vec<f64> {
        if self.count < 2 {
            return vec![0.0; self.mean.len()];
        }
        let d = (self.count - 1) as f64;
        self.m2.iter().map(|m| (m / d).sqrt()).collect()
    }
}
