//! Ring-down damping for response-only tests: band-pass around one mode with zero phase,
//! take the envelope from the analytic signal, fit a line to its logarithm.
//!
//! - Band-pass: the band-pass biquad of Bristow-Johnson's "Cookbook formulae for audio EQ
//!   biquad filter coefficients" (constant 0 dB peak gain form), two sections in cascade,
//!   run forwards and then backwards over the record, so the phase cancels (forward-backward
//!   filtering, Gustafsson 1996, "Determining the initial states in forward-backward
//!   filtering", IEEE Trans. Signal Processing 44(4); here started from rest, since a tap
//!   record starts and ends near zero). A decaying sinusoid `e^(s t)` through a stable linear filter stays `H(s) e^(s t)`
//!   once the filter's own transient has died out, in either time direction, so the filter
//!   does not change the decay rate; it only needs to be wider than the mode.
//! - Envelope: `|x + j Hx|` with the discrete Hilbert transform computed by FFT (Marple 1999,
//!   "Computing the discrete-time analytic signal via FFT", IEEE Trans. Signal Processing
//!   47(9)): multiply the positive-frequency bins by `-j`, zero DC and Nyquist, transform
//!   back. The record is zero-padded to twice its length against wrap-around.
//! - Decay: `|x(t)| = C e^(-sigma t)` so `ln env` is a line of slope `-sigma`; the damped
//!   frequency is the slope of the unwrapped phase; `zeta = sigma / sqrt(sigma^2 + w_d^2)`
//!   (Inman, *Engineering Vibration*, 4th ed., sec. 1.6, logarithmic decrement, from memory).

use realfft::RealFftPlanner;
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Settings of one ring-down estimate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RingdownConfig {
    /// Band-pass half-width as a fraction of the mode frequency (the -3 dB band of each
    /// biquad is `2 x` this).
    pub half_band_fraction: f64,
    /// The band is widened to 4 half-power bandwidths of the measured damping (so the
    /// filter's own transient dies out faster than the mode), but not beyond this fraction.
    pub max_half_band_fraction: f64,
    /// Start the fit this far (dB) below the envelope peak (skips the tap and the filter's
    /// start-up).
    pub start_db: f64,
    /// Stop the fit this far (dB) below the envelope peak ...
    pub end_db: f64,
    /// ... or this far (dB) above the envelope's noise floor, whichever comes first.
    pub floor_margin_db: f64,
    /// Explicit fit range in seconds from the record start; overrides the levels.
    pub range_s: Option<(f64, f64)>,
}

impl Default for RingdownConfig {
    /// Levels: start 3 dB down, stop 40 dB down or 10 dB over the floor: common practice,
    /// no source.
    fn default() -> Self {
        RingdownConfig {
            half_band_fraction: 0.1,
            max_half_band_fraction: 0.45,
            start_db: 3.0,
            end_db: 40.0,
            floor_margin_db: 10.0,
            range_s: None,
        }
    }
}

/// The result of one ring-down fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Ringdown {
    /// Natural frequency `sqrt(w_d^2 + sigma^2) / 2 pi`.
    pub frequency_hz: f64,
    pub damping_ratio: f64,
    /// Decay rate `sigma`, 1/s.
    pub decay_rate: f64,
    /// Fit range in seconds from the record start.
    pub fit_start_s: f64,
    pub fit_end_s: f64,
    /// Coefficient of determination of the log-envelope line.
    pub r_squared: f64,
    pub points: usize,
}

/// Ring-down over several hits, as stored on a mode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RingdownSummary {
    pub frequency_hz: f64,
    /// Mean damping ratio over the hits.
    pub damping_ratio: f64,
    /// Hit-to-hit sample standard deviation of the damping ratio (0 for one hit).
    pub damping_std: f64,
    pub hits: usize,
    /// Smallest R^2 over the hits.
    pub r_squared: f64,
    /// Fit range of the first hit, seconds from its record start.
    pub fit_start_s: f64,
    pub fit_end_s: f64,
}

/// Why no ring-down could be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RingdownError {
    /// Fewer samples than the filter and fit need.
    TooShort,
    /// The envelope never fell through the fit range.
    NoDecay,
    /// The fit range holds too few samples or the envelope grows.
    BadRange,
}

/// Band-pass biquad coefficients `(b0, b1, b2, a1, a2)`, normalised by `a0`
/// (Bristow-Johnson, cookbook, "BPF constant 0 dB peak gain").
pub fn bandpass_biquad(f0: f64, q: f64, fs: f64) -> [f64; 5] {
    let w0 = 2.0 * PI * f0 / fs;
    let alpha = w0.sin() / (2.0 * q);
    let a0 = 1.0 + alpha;
    [
        alpha / a0,
        0.0,
        -alpha / a0,
        -2.0 * w0.cos() / a0,
        (1.0 - alpha) / a0,
    ]
}

/// Run a biquad (direct form II transposed) over `x` in place, from rest.
fn biquad_in_place(c: &[f64; 5], x: &mut [f64]) {
    let (mut z1, mut z2) = (0.0, 0.0);
    for v in x.iter_mut() {
        let u = *v;
        let y = c[0] * u + z1;
        z1 = c[1] * u - c[3] * y + z2;
        z2 = c[2] * u - c[4] * y;
        *v = y;
    }
}

/// Zero-phase band-pass: two cookbook band-pass sections at `f0`, forwards then backwards.
pub fn zero_phase_bandpass(x: &[f64], fs: f64, f0: f64, half_band_fraction: f64) -> Vec<f64> {
    let q = 1.0 / (2.0 * half_band_fraction.max(1e-3));
    let c = bandpass_biquad(f0, q, fs);
    let mut y = x.to_vec();
    biquad_in_place(&c, &mut y);
    biquad_in_place(&c, &mut y);
    y.reverse();
    biquad_in_place(&c, &mut y);
    biquad_in_place(&c, &mut y);
    y.reverse();
    y
}

/// Discrete Hilbert transform of `x` by FFT (Marple 1999), zero-padded to `2 len`.
pub fn hilbert(x: &[f64]) -> Vec<f64> {
    let n = (2 * x.len()).max(2);
    let mut planner = RealFftPlanner::<f64>::new();
    let fwd = planner.plan_fft_forward(n);
    let inv = planner.plan_fft_inverse(n);
    let mut input = fwd.make_input_vec();
    input[..x.len()].copy_from_slice(x);
    let mut spec = fwd.make_output_vec();
    // Sizes come from the plans, so the transforms cannot fail.
    let _ = fwd.process(&mut input, &mut spec);
    let last = spec.len() - 1;
    for (k, v) in spec.iter_mut().enumerate() {
        *v = if k == 0 || k == last {
            Complex64::new(0.0, 0.0)
        } else {
            Complex64::new(v.im, -v.re) // -j v
        };
    }
    let mut out = inv.make_output_vec();
    let _ = inv.process(&mut spec, &mut out);
    out.truncate(x.len());
    out.iter_mut().for_each(|v| *v /= n as f64);
    out
}

/// Least-squares line `y = a + b t`: returns (a, b, R^2).
fn line_fit(t: &[f64], y: &[f64]) -> (f64, f64, f64) {
    let n = t.len() as f64;
    let mt = t.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let (mut stt, mut sty, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in t.iter().zip(y) {
        stt += (a - mt) * (a - mt);
        sty += (a - mt) * (b - my);
        syy += (b - my) * (b - my);
    }
    let b = sty / stt;
    let r2 = if syy > 0.0 {
        sty * sty / (stt * syy)
    } else {
        1.0
    };
    (my - b * mt, b, r2)
}

/// Ring-down damping of the mode near `f_hz` in the response record `x` (sample rate `fs`;
/// no window applied).
pub fn ringdown(
    x: &[f64],
    fs: f64,
    f_hz: f64,
    cfg: &RingdownConfig,
) -> Result<Ringdown, RingdownError> {
    let mut frac = cfg.half_band_fraction.min(cfg.max_half_band_fraction);
    let mut r = ringdown_once(x, fs, f_hz, frac, cfg)?;
    // Widen the band for a well-damped mode and measure again (at most twice).
    for _ in 0..2 {
        let want = (4.0 * r.damping_ratio).min(cfg.max_half_band_fraction);
        if want <= frac * 1.05 {
            break;
        }
        frac = want;
        r = ringdown_once(x, fs, f_hz, frac, cfg)?;
    }
    Ok(r)
}

fn ringdown_once(
    x: &[f64],
    fs: f64,
    f_hz: f64,
    half_band_fraction: f64,
    cfg: &RingdownConfig,
) -> Result<Ringdown, RingdownError> {
    let period = fs / f_hz;
    if (x.len() as f64) < 20.0 * period || x.len() < 64 {
        return Err(RingdownError::TooShort);
    }
    let y = zero_phase_bandpass(x, fs, f_hz, half_band_fraction);
    let hy = hilbert(&y);
    let env: Vec<f64> = y.iter().zip(&hy).map(|(a, b)| a.hypot(*b)).collect();
    let (start, end) = match cfg.range_s {
        Some((a, b)) => {
            let a = ((a * fs).round().max(0.0) as usize).min(x.len());
            let b = ((b * fs).round().max(0.0) as usize).min(x.len());
            (a, b)
        }
        None => level_range(&env, cfg)?,
    };
    let min_points = (2.0 * period).max(16.0) as usize;
    if end <= start || end - start < min_points {
        return Err(RingdownError::BadRange);
    }
    let t: Vec<f64> = (start..end).map(|i| i as f64 / fs).collect();
    let log_env: Vec<f64> = env[start..end].iter().map(|e| e.max(1e-300).ln()).collect();
    let (_, slope, r_squared) = line_fit(&t, &log_env);
    let sigma = -slope;
    if sigma <= 0.0 || !sigma.is_finite() {
        return Err(RingdownError::BadRange);
    }
    // Unwrapped phase of the analytic signal; its slope is the damped angular frequency.
    let mut phase = Vec::with_capacity(end - start);
    let mut prev = 0.0;
    let mut offset = 0.0;
    for i in start..end {
        let p = hy[i].atan2(y[i]);
        if i > start {
            let d = p - prev;
            if d > PI {
                offset -= 2.0 * PI;
            } else if d < -PI {
                offset += 2.0 * PI;
            }
        }
        prev = p;
        phase.push(p + offset);
    }
    let (_, wd, _) = line_fit(&t, &phase);
    let wd = wd.abs();
    let wn = (wd * wd + sigma * sigma).sqrt();
    Ok(Ringdown {
        frequency_hz: wn / (2.0 * PI),
        damping_ratio: sigma / wn,
        decay_rate: sigma,
        fit_start_s: start as f64 / fs,
        fit_end_s: end as f64 / fs,
        r_squared,
        points: end - start,
    })
}

/// Fit range from the envelope levels (see `RingdownConfig`).
fn level_range(env: &[f64], cfg: &RingdownConfig) -> Result<(usize, usize), RingdownError> {
    let n = env.len();
    // Ignore the last 5 % (the backward pass starts there) when looking for the peak.
    let usable = n - n / 20;
    let (i_pk, &pk) = env[..usable]
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .ok_or(RingdownError::TooShort)?;
    // Noise floor: median envelope of the last 10 % of the record.
    let mut tail: Vec<f64> = env[n - n / 10..].to_vec();
    tail.sort_by(f64::total_cmp);
    let floor = tail.get(tail.len() / 2).copied().unwrap_or(0.0);
    let start_level = pk * 10f64.powf(-cfg.start_db / 20.0);
    let end_level =
        (pk * 10f64.powf(-cfg.end_db / 20.0)).max(floor * 10f64.powf(cfg.floor_margin_db / 20.0));
    if end_level >= start_level {
        return Err(RingdownError::NoDecay);
    }
    let start = (i_pk..usable)
        .find(|&i| env[i] <= start_level)
        .ok_or(RingdownError::NoDecay)?;
    let end = (start..usable)
        .find(|&i| env[i] <= end_level)
        .ok_or(RingdownError::NoDecay)?;
    Ok((start, end))
}

/// Ring-down over several records (one response vector per accepted hit); hits where it
/// fails are skipped. `None` when it fails on every hit.
pub fn ringdown_hits(
    records: &[&[f64]],
    fs: f64,
    f_hz: f64,
    cfg: &RingdownConfig,
) -> Option<RingdownSummary> {
    let fits: Vec<Ringdown> = records
        .iter()
        .filter_map(|x| ringdown(x, fs, f_hz, cfg).ok())
        .collect();
    let first = fits.first()?;
    let n = fits.len() as f64;
    let mean = |v: &dyn Fn(&Ringdown) -> f64| fits.iter().map(v).sum::<f64>() / n;
    let z = mean(&|r| r.damping_ratio);
    let std = if fits.len() > 1 {
        (fits
            .iter()
            .map(|r| (r.damping_ratio - z).powi(2))
            .sum::<f64>()
            / (n - 1.0))
            .sqrt()
    } else {
        0.0
    };
    Some(RingdownSummary {
        frequency_hz: mean(&|r| r.frequency_hz),
        damping_ratio: z,
        damping_std: std,
        hits: fits.len(),
        r_squared: fits.iter().map(|r| r.r_squared).fold(1.0, f64::min),
        fit_start_s: first.fit_start_s,
        fit_end_s: first.fit_end_s,
    })
}

/// Ring-down on every mode of a list. The band-pass half-width is the configured fraction,
/// widened to 4 half-power bandwidths for a well-damped mode and never wider than half the
/// distance to the nearest neighbour (common practice, no source).
pub fn attach_ringdown(
    modes: &mut [super::Mode],
    responses: &[&[f64]],
    fs: f64,
    cfg: &RingdownConfig,
) {
    let freqs: Vec<f64> = modes.iter().map(|m| m.frequency_hz).collect();
    for (i, m) in modes.iter_mut().enumerate() {
        let f = m.frequency_hz;
        let mut limit = cfg.max_half_band_fraction;
        for (j, &g) in freqs.iter().enumerate() {
            if j != i {
                limit = limit.min(0.5 * (g - f).abs() / f);
            }
        }
        let c = RingdownConfig {
            half_band_fraction: cfg
                .half_band_fraction
                .max(4.0 * m.damping_ratio.unwrap_or(0.0))
                .min(limit),
            max_half_band_fraction: limit,
            ..cfg.clone()
        };
        m.ringdown = ringdown_hits(responses, fs, f, &c);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hilbert_of_cosine_is_sine() {
        let n = 4000;
        let x: Vec<f64> = (0..n).map(|i| (0.05 * i as f64).cos()).collect();
        let h = hilbert(&x);
        // Away from the ends (finite record), H cos = sin.
        for i in (n / 4..3 * n / 4).step_by(97) {
            assert!((h[i] - (0.05 * i as f64).sin()).abs() < 0.02, "i {i}");
        }
    }

    #[test]
    fn bandpass_peak_gain_is_one() {
        let c = bandpass_biquad(500.0, 5.0, 8000.0);
        let w = 2.0 * PI * 500.0 / 8000.0;
        let z = Complex64::from_polar(1.0, -w);
        let h = (c[0] + c[1] * z + c[2] * z * z) / (1.0 + c[3] * z + c[4] * z * z);
        assert!((h.norm() - 1.0).abs() < 1e-12);
    }
}
