//! Ring-down damping on known decays.
//!
//! Reference: a viscously damped SDOF released from rest decays as
//! `e^(-zeta w_n t) cos(w_d t)`, `w_d = w_n sqrt(1 - zeta^2)` (Inman, *Engineering
//! Vibration*, 4th ed., sec. 1.3, from memory).

use std::f64::consts::PI;
use tapmodes::modes::ringdown::{RingdownConfig, ringdown, ringdown_hits};
use tapmodes::rng::Rng;

fn decay(fs: f64, n: usize, t0: f64, modes: &[(f64, f64, f64)], noise: f64, seed: u64) -> Vec<f64> {
    let mut rng = Rng::new(seed);
    (0..n)
        .map(|i| {
            let t = i as f64 / fs - t0;
            let clean: f64 = if t < 0.0 {
                0.0
            } else {
                modes
                    .iter()
                    .map(|&(f, z, a)| {
                        let w = 2.0 * PI * f;
                        a * (-z * w * t).exp() * (w * (1.0 - z * z).sqrt() * t).cos()
                    })
                    .sum()
            };
            clean + noise * rng.normal()
        })
        .collect()
}

#[test]
fn single_known_decay() {
    let fs = 8000.0;
    for &(f, z) in &[(150.0, 0.005), (600.0, 0.02), (1200.0, 0.05)] {
        let x = decay(fs, 8000, 0.01, &[(f, z, 1.0)], 1e-4, 3);
        let r = ringdown(&x, fs, f, &RingdownConfig::default()).expect("ringdown");
        assert!(
            (r.damping_ratio - z).abs() < 0.02 * z,
            "f {f}: zeta {} vs {z}",
            r.damping_ratio
        );
        assert!(
            (r.frequency_hz - f).abs() < 1e-3 * f,
            "f {}",
            r.frequency_hz
        );
        assert!(r.r_squared > 0.999, "R^2 {}", r.r_squared);
        assert!(r.fit_end_s > r.fit_start_s);
    }
}

/// Two modes a factor 2.4 apart: the band-pass separates them.
#[test]
fn two_modes_separated_by_the_band_pass() {
    let fs = 8000.0;
    let modes = [(250.0, 0.01, 1.0), (600.0, 0.02, 0.8)];
    let x = decay(fs, 8000, 0.01, &modes, 1e-4, 5);
    for &(f, z, _) in &modes {
        let r = ringdown(&x, fs, f, &RingdownConfig::default()).expect("ringdown");
        assert!(
            (r.damping_ratio - z).abs() < 0.03 * z,
            "f {f}: zeta {} vs {z}",
            r.damping_ratio
        );
    }
}

/// An explicit fit range is honoured, and a record without decay is refused.
#[test]
fn explicit_range_and_refusal() {
    let fs = 8000.0;
    let x = decay(fs, 8000, 0.01, &[(400.0, 0.01, 1.0)], 1e-5, 7);
    let cfg = RingdownConfig {
        range_s: Some((0.05, 0.25)),
        ..RingdownConfig::default()
    };
    let r = ringdown(&x, fs, 400.0, &cfg).expect("ringdown");
    assert!((r.fit_start_s - 0.05).abs() < 1e-3 && (r.fit_end_s - 0.25).abs() < 1e-3);
    assert!((r.damping_ratio - 0.01).abs() < 0.01 * 0.01);
    let noise = decay(fs, 8000, 0.01, &[], 1.0, 9);
    assert!(ringdown(&noise, fs, 400.0, &RingdownConfig::default()).is_err());
    // Several hits: the mean over the hits.
    let hits: Vec<Vec<f64>> = (0..4)
        .map(|s| decay(fs, 8000, 0.01, &[(400.0, 0.01, 1.0)], 1e-3, 20 + s))
        .collect();
    let refs: Vec<&[f64]> = hits.iter().map(|h| h.as_slice()).collect();
    let sum = ringdown_hits(&refs, fs, 400.0, &RingdownConfig::default()).expect("summary");
    assert_eq!(sum.hits, 4);
    assert!((sum.damping_ratio - 0.01).abs() < 0.02 * 0.01);
}
