//! Response only: the taps turned to one time origin, and how well they agree.
//!
//! Without a hammer sensor each tap's response spectrum `X_i` is the structure's response to
//! an unknown force. Turned to a time origin at its trigger (`Y_i = X_i e^(j w t_trig)`), the
//! taps share the structure's phase near every mode; noise does not. So:
//! - the mean `M = (1/N) sum Y_i` reads as a sum of poles (the band fit uses it);
//! - the agreement `A = |sum Z_i|^2 / (N sum |Z_i|^2)` at each line, with `Z_i` the tap
//!   scaled to unit energy over the band (a harder tap does not count more), is 1 where every
//!   tap shows the same phase and shape and about `1/N` for noise. It plays the part the
//!   coherence plays for an FRF. For taps of complex Gaussian noise it is the share of an
//!   N-dimensional complex Gaussian vector's energy along one direction, Beta(1, N-1)
//!   distributed: the same law as the coherence of two unrelated signals averaged N times
//!   (Carter, Knapp & Nuttall 1973, IEEE Trans. Audio and Electroacoustics 21(4); from
//!   memory), so its chance level is `modes::noise_coherence(N)`.
//!
//! The trigger fires on a whole sample, so a tap's true onset is up to a sample off its
//! trigger: the phase of line `f` wanders by up to `pi f / fs` from tap to tap. That lowers
//! the agreement near the top of a slow sensor's band (about 0.9 at a fifth of the sample
//! rate), never raises it: the agreement can fail to vouch for a real weak peak there, not
//! vouch for noise.

use realfft::num_complex::Complex64;
use std::f64::consts::PI;

/// The taps on one time origin (see the module's notes).
#[derive(Debug, Clone, PartialEq)]
pub struct AlignedTaps {
    /// Mean of the taps' complex spectra, each turned to its trigger.
    pub mean: Vec<Complex64>,
    /// `e^(j w t_trig)` per line: turns a tap's spectrum to its trigger.
    pub turn: Vec<Complex64>,
    /// Per line, the agreement of the taps scaled to equal energy over the band, in [0, 1].
    pub agreement: Vec<f64>,
}

/// Turn the taps to their triggers. `origin_s`: the trigger's time in each record (the
/// pre-trigger length); `band`: the lines over which each tap's energy is measured for the
/// agreement. `None` with fewer than two taps.
pub fn align(
    freqs: &[f64],
    taps: &[&[Complex64]],
    origin_s: f64,
    band: (f64, f64),
) -> Option<AlignedTaps> {
    let n = taps.len();
    if n < 2 || freqs.is_empty() {
        return None;
    }
    let turn = turn_to(freqs, origin_s);
    let lo = freqs.partition_point(|&f| f < band.0);
    let hi = freqs.partition_point(|&f| f <= band.1).max(lo);
    let mut sum = vec![Complex64::new(0.0, 0.0); freqs.len()];
    let mut scaled = vec![Complex64::new(0.0, 0.0); freqs.len()];
    let mut power = vec![0.0; freqs.len()];
    for x in taps {
        let energy: f64 = (x.get(lo..hi.min(x.len())).unwrap_or(&[]).iter())
            .map(|v| v.norm_sqr())
            .sum();
        let w = if energy > 0.0 {
            energy.sqrt().recip()
        } else {
            0.0
        };
        for (k, (x, r)) in x.iter().zip(&turn).enumerate() {
            let y = x * r;
            sum[k] += y;
            scaled[k] += y * w;
            power[k] += (y * w).norm_sqr();
        }
    }
    let agreement = (scaled.iter().zip(&power))
        .map(|(s, p)| {
            if *p > 0.0 {
                (s.norm_sqr() / (n as f64 * p)).clamp(0.0, 1.0)
            } else {
                0.0
            }
        })
        .collect();
    Some(AlignedTaps {
        mean: sum.into_iter().map(|s| s / n as f64).collect(),
        turn,
        agreement,
    })
}

/// `e^(j w t)` per line: moves a record's time origin to `t`.
pub fn turn_to(freqs: &[f64], t: f64) -> Vec<Complex64> {
    (freqs.iter())
        .map(|f| Complex64::from_polar(1.0, 2.0 * PI * f * t))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Taps of one decaying mode, of different strengths and delayed a whole number of
    /// samples behind the record's start: at the mode they agree; taps of noise agree
    /// about as well as chance allows.
    #[test]
    fn agreement_high_at_the_mode_and_chance_for_noise() {
        let dt = 1.0 / 3200.0;
        let n_lines = 3201;
        let freqs: Vec<f64> = (0..n_lines).map(|k| k as f64 * 0.5).collect();
        let mut rng = crate::rng::Rng::new(7);
        let origin = 32.0 * dt;
        let taps: Vec<Vec<Complex64>> = (0..6)
            .map(|i| {
                let gain = 1.0 + 0.2 * i as f64;
                freqs
                    .iter()
                    .map(|&f| {
                        let w = 2.0 * PI * f;
                        let wn = 2.0 * PI * 600.0;
                        let h = Complex64::new(1.0, 0.0)
                            / Complex64::new(wn * wn - w * w, 2.0 * 0.02 * wn * w);
                        let noise = Complex64::new(rng.normal(), rng.normal()) * 1e-9;
                        gain * h * Complex64::from_polar(1.0, -w * origin) * 1e6 + noise
                    })
                    .collect()
            })
            .collect();
        let refs: Vec<&[Complex64]> = taps.iter().map(|t| t.as_slice()).collect();
        let a = align(&freqs, &refs, origin, (20.0, 1280.0)).unwrap();
        assert!(a.agreement[1200] > 0.999, "{}", a.agreement[1200]);
        // The mean is the taps' mean response with the delay taken out.
        let mean_gain = (0..6).map(|i| 1.0 + 0.2 * i as f64).sum::<f64>() / 6.0;
        let w = 2.0 * PI * 600.0;
        let h = 1e6 / Complex64::new(0.0, 2.0 * 0.02 * w * w);
        assert!((a.mean[1200] - h * mean_gain).norm() < 1e-6 * h.norm());
        // Noise alone: about 1/N on average, and Beta(1, 5) puts one line in a thousand over
        // 1 - 0.001^(1/5) = 0.749 (allow a few more).
        let noise: Vec<Vec<Complex64>> = (0..6)
            .map(|_| {
                (0..n_lines)
                    .map(|_| Complex64::new(rng.normal(), rng.normal()))
                    .collect()
            })
            .collect();
        let refs: Vec<&[Complex64]> = noise.iter().map(|t| t.as_slice()).collect();
        let a = align(&freqs, &refs, 0.0, (20.0, 1280.0)).unwrap();
        let mean = a.agreement.iter().sum::<f64>() / a.agreement.len() as f64;
        assert!((0.12..0.25).contains(&mean), "{mean}");
        let chance = crate::modes::noise_coherence(6);
        assert!((chance - (1.0 - 1e-3f64.powf(0.2))).abs() < 1e-12);
        let over = a.agreement.iter().filter(|&&v| v > chance).count();
        assert!(
            over < 12,
            "{over} of {n_lines} noise lines over the chance level"
        );
    }
}
