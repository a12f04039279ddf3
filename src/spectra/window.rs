//! Time windows for tap records: the force window and the exponential (response) window.

use serde::{Deserialize, Serialize};

/// Window settings, as stored in the run file. Times in seconds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WindowConfig {
    /// The force window is 1 from the record start to `force_s` after the trigger, then a
    /// half-cosine taper of `force_taper_s`, then 0: it keeps the pulse and drops the noise.
    pub force_s: f64,
    pub force_taper_s: f64,
    /// Value of the exponential window at the record end (1.0 = no exponential window).
    pub exponential_end: f64,
}

impl Default for WindowConfig {
    fn default() -> Self {
        WindowConfig {
            force_s: 0.005,
            force_taper_s: 0.002,
            exponential_end: 0.1,
        }
    }
}

/// The windows for one record layout, computed once and reused for every hit.
#[derive(Debug, Clone, PartialEq)]
pub struct Windows {
    pub force: Vec<f64>,
    pub exponential: Vec<f64>,
    /// Time constant of the exponential window in s (`None` when it is off).
    pub tau_s: Option<f64>,
}

impl Windows {
    /// `n` samples per record, trigger at sample `trigger`, sample rate `fs` in Hz.
    ///
    /// The exponential window is `exp(-(t - t_trigger) / tau)` over the whole record (a
    /// little above 1 in the pre-trigger part). Applied to force and response alike, it
    /// turns the measured system into `h(t) exp(-t/tau)`: every pole moves left by exactly
    /// `1/tau` rad/s, which `remove_window_damping` undoes (Fladung & Rost 1997, "Application
    /// and correction of the exponential window for frequency response functions", Mech.
    /// Systems and Signal Processing 11(1); Ewins 2000, *Modal Testing*, sec. 3.11).
    pub fn new(cfg: &WindowConfig, n: usize, trigger: usize, fs: f64) -> Self {
        let dt = 1.0 / fs;
        let flat_end = trigger as f64 + cfg.force_s * fs;
        let taper = (cfg.force_taper_s * fs).max(1.0);
        let force = (0..n)
            .map(|i| {
                let i = i as f64;
                if i <= flat_end {
                    1.0
                } else if i < flat_end + taper {
                    0.5 * (1.0 + (std::f64::consts::PI * (i - flat_end) / taper).cos())
                } else {
                    0.0
                }
            })
            .collect();
        let span = (n.saturating_sub(1 + trigger)).max(1) as f64 * dt;
        let tau_s = (cfg.exponential_end > 0.0 && cfg.exponential_end < 1.0)
            .then(|| span / -cfg.exponential_end.ln());
        let exponential = (0..n)
            .map(|i| match tau_s {
                Some(tau) => (-((i as f64 - trigger as f64) * dt) / tau).exp(),
                None => 1.0,
            })
            .collect();
        Windows {
            force,
            exponential,
            tau_s,
        }
    }
}

/// Undo the exponential window's added damping on a measured mode.
///
/// Input: the apparent natural frequency (Hz) and damping ratio read from the windowed FRF.
/// The apparent pole is `-z w + j w sqrt(1 - z^2)`; its real part lost `1/tau`, its imaginary
/// part is unchanged. Returns the corrected (frequency Hz, damping ratio); the damping is
/// negative when the window's share exceeds what was measured (a flag for the caller).
pub fn remove_window_damping(f_hz: f64, zeta: f64, tau_s: Option<f64>) -> (f64, f64) {
    let Some(tau) = tau_s else {
        return (f_hz, zeta);
    };
    let w = 2.0 * std::f64::consts::PI * f_hz;
    let sigma = zeta * w - 1.0 / tau;
    let wd = w * (1.0 - zeta * zeta).max(0.0).sqrt();
    let wn = (sigma * sigma + wd * wd).sqrt();
    (wn / (2.0 * std::f64::consts::PI), sigma / wn)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn window_shapes() {
        let cfg = WindowConfig::default();
        let w = Windows::new(&cfg, 1000, 100, 1000.0);
        assert_eq!(w.force[100], 1.0);
        assert_eq!(w.force[999], 0.0);
        assert!((w.exponential[100] - 1.0).abs() < 1e-12);
        assert!((w.exponential[999] - 0.1).abs() < 1e-9);
    }

    /// Exponential-window damping correction on a known decay (Fladung & Rost 1997):
    /// a decaying cosine with known pole, windowed, has apparent damping sigma + 1/tau;
    /// the correction must give back the true frequency and damping.
    #[test]
    fn correction_recovers_known_pole() {
        let (f, z) = (250.0, 0.008);
        let tau = 0.05;
        let w = 2.0 * std::f64::consts::PI * f;
        let sigma_m = z * w + 1.0 / tau;
        let wd = w * (1.0 - z * z).sqrt();
        let wn_m = (sigma_m * sigma_m + wd * wd).sqrt();
        let (f2, z2) = remove_window_damping(
            wn_m / (2.0 * std::f64::consts::PI),
            sigma_m / wn_m,
            Some(tau),
        );
        assert!((f2 - f).abs() < 1e-9 * f);
        assert!((z2 - z).abs() < 1e-12);
    }
}
