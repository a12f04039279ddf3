//! Coverage of the 95 % intervals from per-hit estimates on simulated repeats.
//!
//! Each repeat: n hits, each an analytic single-mode accelerance (Ewins 2000, *Modal
//! Testing*, 2nd ed., ch. 2) plus independent complex white noise per line. Modes come
//! from the averaged curve, the intervals from the per-hit curves. If the intervals are
//! right, the true value lies inside about 95 % of them; with 200 repeats the binomial
//! standard deviation of the coverage is 1.5 %, so [0.90, 0.99] is a -3.2 / +2.6 sigma
//! acceptance band.

use realfft::num_complex::Complex64;
use tapmodes::modes::uncertainty::{attach, difference_significant};
use tapmodes::modes::{ModeConfig, find_modes};
use tapmodes::rng::Rng;
use tapmodes::source::simulator::model::{SimMode, accelerance};
use tapmodes::spectra::{Basis, Curve, Estimator};

fn curve_of(h: &[Complex64]) -> Curve {
    Curve {
        basis: Basis::Frf(Estimator::H1),
        magnitude: h.iter().map(|z| z.norm()).collect(),
        phase_deg: Some(h.iter().map(|z| z.arg().to_degrees()).collect()),
        coherence: None,
        spread_db: None,
        unit: "-".into(),
    }
}

struct Outcome {
    f_in: usize,
    z_in: usize,
    runs: usize,
}

fn coverage(truth: &SimMode, repeats: usize, hits: usize, seed: u64) -> Outcome {
    let df = 0.25;
    let freqs: Vec<f64> = (0..1600).map(|k| k as f64 * df).collect();
    let clean: Vec<Complex64> = freqs
        .iter()
        .map(|&f| accelerance(std::slice::from_ref(truth), 0, f))
        .collect();
    let peak = clean.iter().map(|z| z.norm()).fold(0.0, f64::max);
    let sigma = 0.02 * peak;
    let mut rng = Rng::new(seed);
    let cfg = ModeConfig {
        band_hz: (50.0, 350.0),
        ..ModeConfig::default()
    };
    let mut out = Outcome {
        f_in: 0,
        z_in: 0,
        runs: 0,
    };
    for _ in 0..repeats {
        let per_hit: Vec<Vec<Complex64>> = (0..hits)
            .map(|_| {
                clean
                    .iter()
                    .map(|h| h + Complex64::new(rng.normal(), rng.normal()) * sigma)
                    .collect()
            })
            .collect();
        let avg: Vec<Complex64> = (0..freqs.len())
            .map(|k| per_hit.iter().map(|h| h[k]).sum::<Complex64>() / hits as f64)
            .collect();
        // Resolution 1 Hz: the 2 Hz half-power band is "few lines", so the fit reports.
        let mut modes = find_modes(&freqs, &curve_of(&avg), 1.0, None, &cfg);
        let curves: Vec<Curve> = per_hit.iter().map(|h| curve_of(h)).collect();
        attach(&mut modes, &freqs, &curves, 1.0, None);
        let Some(m) = modes
            .iter()
            .find(|m| (m.frequency_hz - truth.frequency_hz).abs() < 2.0)
        else {
            continue;
        };
        assert_eq!(m.method, "fit");
        let Some(u) = &m.uncertainty else { continue };
        assert_eq!(u.hits, hits);
        out.runs += 1;
        if u.frequency_hz.low <= truth.frequency_hz && truth.frequency_hz <= u.frequency_hz.high {
            out.f_in += 1;
        }
        if let Some(z) = &u.damping_ratio
            && z.low <= truth.damping_ratio
            && truth.damping_ratio <= z.high
        {
            out.z_in += 1;
        }
    }
    out
}

#[test]
fn ninety_five_percent_intervals_cover() {
    let truth = SimMode {
        frequency_hz: 120.0,
        damping_ratio: 0.01,
        modal_constants: vec![1.0],
    };
    let o = coverage(&truth, 200, 6, 11);
    assert!(o.runs >= 196, "runs {}", o.runs);
    let fc = o.f_in as f64 / o.runs as f64;
    let zc = o.z_in as f64 / o.runs as f64;
    assert!((0.90..=0.99).contains(&fc), "frequency coverage {fc}");
    assert!((0.90..=0.99).contains(&zc), "damping coverage {zc}");
}

/// Two variants 0.08 % apart in frequency with 10 hits each are told apart; the same
/// variant measured twice is not (Welch test at 5 %).
#[test]
fn significance_of_a_variant_difference() {
    let run = |f: f64, seed: u64| {
        let truth = SimMode {
            frequency_hz: f,
            damping_ratio: 0.01,
            modal_constants: vec![1.0],
        };
        let freqs: Vec<f64> = (0..1600).map(|k| k as f64 * 0.25).collect();
        let mut rng = Rng::new(seed);
        let clean: Vec<Complex64> = freqs
            .iter()
            .map(|&x| accelerance(std::slice::from_ref(&truth), 0, x))
            .collect();
        let sigma = 0.02 * clean.iter().map(|z| z.norm()).fold(0.0, f64::max);
        let hits: Vec<Vec<Complex64>> = (0..10)
            .map(|_| {
                clean
                    .iter()
                    .map(|h| h + Complex64::new(rng.normal(), rng.normal()) * sigma)
                    .collect()
            })
            .collect();
        let avg: Vec<Complex64> = (0..freqs.len())
            .map(|k| hits.iter().map(|h| h[k]).sum::<Complex64>() / 10.0)
            .collect();
        let cfg = ModeConfig {
            band_hz: (50.0, 350.0),
            ..ModeConfig::default()
        };
        let mut modes = find_modes(&freqs, &curve_of(&avg), 1.0, None, &cfg);
        let curves: Vec<Curve> = hits.iter().map(|h| curve_of(h)).collect();
        attach(&mut modes, &freqs, &curves, 1.0, None);
        // Noise can raise a spurious peak where the accelerance is small: take the mode.
        let i = modes
            .iter()
            .position(|m| (m.frequency_hz - f).abs() < 1.0)
            .expect("the mode");
        modes.remove(i)
    };
    let a = run(120.0, 1);
    let b = run(120.1, 2);
    let a2 = run(120.0, 3);
    assert_eq!(difference_significant(&a, &b), Some(true));
    assert_eq!(difference_significant(&a, &a2), Some(false));
}
