//! The analysis core checked against outside results: textbook SDOF relations, scipy's
//! spectra, the exponential-window correction, and Euler-Bernoulli beam eigenvalues.

use crate::common::*;
use realfft::num_complex::Complex64;
use tapmodes::modes::{ModeConfig, find_modes};
use tapmodes::pipeline::{Analysis, AnalysisConfig};
use tapmodes::signal::{Block, RoleChoice};
use tapmodes::source::Source;
use tapmodes::source::simulator::Simulator;
use tapmodes::source::simulator::presets::preset;
use tapmodes::spectra::averager::{
    CrossAccumulator, Scaling, Transformer, coherence, h1, h2, line_factors,
};
use tapmodes::spectra::{Basis, Curve, Estimator};

/// SDOF accelerance `-w^2 / (k - m w^2 + j c w)` (Ewins 2000, *Modal Testing*, 2nd ed.,
/// ch. 2, SDOF receptance, times -w^2 for accelerance), sampled finely, read by the
/// half-power method (Ewins 2000, ch. 4, peak-amplitude method; section from memory).
#[test]
fn sdof_closed_form_half_power() {
    for &(fn_hz, zeta) in &[(150.0, 0.01), (420.0, 0.02), (900.0, 0.05)] {
        let df = 0.02;
        let freqs: Vec<f64> = (0..100_000).map(|k| k as f64 * df).collect();
        let wn = 2.0 * std::f64::consts::PI * fn_hz;
        let m = 0.05;
        let k = m * wn * wn;
        let c = 2.0 * zeta * m * wn;
        let h: Vec<Complex64> = freqs
            .iter()
            .map(|f| {
                let w = 2.0 * std::f64::consts::PI * f;
                -w * w / Complex64::new(k - m * w * w, c * w)
            })
            .collect();
        let curve = Curve {
            basis: Basis::Frf(Estimator::H1),
            magnitude: h.iter().map(|z| z.norm()).collect(),
            phase_deg: Some(h.iter().map(|z| z.arg().to_degrees()).collect()),
            coherence: None,
            spread_db: None,
            unit: "m/s^2/N".into(),
        };
        let cfg = ModeConfig {
            band_hz: (20.0, 1900.0),
            ..ModeConfig::default()
        };
        let modes = find_modes(&freqs, &curve, df, None, &cfg);
        assert_eq!(modes.len(), 1, "{fn_hz} Hz: {modes:?}");
        let got = &modes[0];
        // Read on mobility, the natural frequency is exact for a viscous SDOF: within 0.05 %.
        assert!(
            (got.frequency_hz / fn_hz - 1.0).abs() < 5e-4,
            "{fn_hz}: {}",
            got.frequency_hz
        );
        // Mobility half-power damping is exact up to the line interpolation: within 1 %.
        let z = got.damping_ratio.unwrap();
        assert!(
            (z / zeta - 1.0).abs() < 0.01,
            "{fn_hz}: damping {z} vs {zeta}"
        );
        assert!(got.flags.is_empty(), "{:?}", got.flags);
    }
}

fn read_csv(name: &str) -> Vec<Vec<f64>> {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records()
        .map(|rec| {
            rec.unwrap()
                .iter()
                .map(|v| v.parse::<f64>().unwrap())
                .collect()
        })
        .collect()
}

/// H1, H2 and coherence against scipy.signal 1.11.4 (welch, csd, coherence; density
/// scaling, 8 segments of 256, no overlap, no detrend), fixture made by
/// tests/reference/make_scipy_spectra.py with numpy 1.26.4.
#[test]
fn spectra_match_scipy() {
    let signals = read_csv("scipy_signals.csv");
    let x: Vec<f64> = signals.iter().map(|r| r[0]).collect();
    let y: Vec<f64> = signals.iter().map(|r| r[1]).collect();
    let n = 256;
    let fs = 1000.0;
    for name in ["boxcar", "hann"] {
        // scipy's default windows are periodic ("DFT-even").
        let w: Vec<f64> = (0..n)
            .map(|i| match name {
                "hann" => 0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos(),
                _ => 1.0,
            })
            .collect();
        let power: f64 = w.iter().map(|v| v * v).sum();
        let mut t = Transformer::new(n, fs);
        let mut acc = CrossAccumulator::new(t.lines());
        let mut a = vec![Complex64::new(0.0, 0.0); t.lines()];
        let mut b = a.clone();
        for s in 0..8 {
            t.transform(&x[s * n..(s + 1) * n], &w, &mut a);
            t.transform(&y[s * n..(s + 1) * n], &w, &mut b);
            acc.add(&a, &b);
        }
        let factors = line_factors(
            n,
            fs,
            Scaling::Density {
                window_power: power,
            },
        );
        let (gxx, gyy, gxy) = acc.averaged(&factors);
        let (hh1, hh2, coh) = (h1(&gxx, &gxy), h2(&gyy, &gxy), coherence(&gxx, &gyy, &gxy));
        let reference = read_csv(&format!("scipy_spectra_{name}.csv"));
        assert_eq!(reference.len(), gxx.len());
        let close = |got: f64, want: f64, scale: f64, what: &str, k: usize| {
            assert!(
                (got - want).abs() <= 1e-9 * scale.max(1e-12),
                "{name} {what} line {k}: {got} vs scipy {want}"
            );
        };
        let max_p = reference.iter().map(|r| r[1].max(r[2])).fold(0.0, f64::max);
        for (k, r) in reference.iter().enumerate() {
            close(gxx[k], r[1], max_p, "Pxx", k);
            close(gyy[k], r[2], max_p, "Pyy", k);
            close(gxy[k].re, r[3], max_p, "Re Pxy", k);
            close(gxy[k].im, r[4], max_p, "Im Pxy", k);
            close(coh[k], r[5], 1.0, "coherence", k);
            let hs = Complex64::new(r[6], r[7]).norm().max(1.0);
            close(hh1[k].re, r[6], hs, "Re H1", k);
            close(hh1[k].im, r[7], hs, "Im H1", k);
            let hs2 = Complex64::new(r[8], r[9]).norm().max(1.0);
            close(hh2[k].re, r[8], hs2, "Re H2", k);
            close(hh2[k].im, r[9], hs2, "Im H2", k);
        }
    }
}

fn analyse_samples(
    chans: &[Vec<f64>],
    src: &Simulator,
    cfg: AnalysisConfig,
    block: usize,
) -> Analysis {
    let info = src.info().clone();
    let roles = RoleChoice::default().resolve(&info).unwrap();
    let mut a = Analysis::new(&info, roles, cfg, false).unwrap();
    let n = chans[0].len();
    let mut start = 0;
    while start < n {
        let end = (start + block).min(n);
        a.push(&Block {
            start: start as u64,
            channels: chans.iter().map(|c| c[start..end].to_vec()).collect(),
        });
        start = end;
    }
    a
}

/// A lightly damped mode (0.4 %) needs a strong exponential window to decay within a
/// 1 s record; the window adds 1/(tau w) of damping, which must be removed again
/// (Fladung & Rost 1997, Mech. Systems and Signal Processing 11(1); Ewins 2000, sec. 3.11,
/// section from memory).
#[test]
fn exponential_window_damping_is_removed() {
    let (f0, z0) = (310.0, 0.004);
    let plan = plan_with_modes(&[(f0, z0, 5.0)], 3);
    let (chans, plan) = simulate(plan, 14.0);
    let sim = Simulator::new(plan, None, false);
    let mut cfg = AnalysisConfig::default();
    cfg.spectra.windows.exponential_end = 0.01;
    cfg.spectra.pad = 4;
    cfg.checks.residual_limit = 0.5;
    let a = analyse_samples(&chans, &sim, cfg, 4096);
    let r = a.result();
    let s = &r.spectra;
    let modes = r.modes().to_vec();
    let m = modes
        .iter()
        .find(|m| (m.frequency_hz - f0).abs() < 5.0)
        .expect("mode found");
    let tau = s.tau_s.unwrap();
    let added = 1.0 / (tau * 2.0 * std::f64::consts::PI * f0);
    assert!(
        added > z0 / 2.0,
        "the window must matter in this test: {added}"
    );
    assert!(
        (m.window_damping - added).abs() < 0.1 * added,
        "{} vs {added}",
        m.window_damping
    );
    let z = m.damping_ratio.unwrap();
    assert!(
        (z / z0 - 1.0).abs() < 0.15,
        "corrected damping {z} vs true {z0}"
    );
    assert!((m.frequency_hz / f0 - 1.0).abs() < 0.002);
}

/// Clamped-free Euler-Bernoulli beam: f_i = (lambda_i L)^2 / (2 pi L^2) sqrt(EI/(rho A))
/// with lambda_i L = 1.87510, 4.69409, 7.85476 (Blevins, *Formulas for Natural Frequency
/// and Mode Shape*, 1979, table 8-1). The simulated bar's picked modes must match.
#[test]
fn cantilever_bar_matches_euler_bernoulli() {
    let plan = preset("bar-cantilever", 5).unwrap();
    let (chans, plan) = simulate(plan, 16.0);
    let sim = Simulator::new(plan, None, false);
    let a = analyse_samples(&chans, &sim, AnalysisConfig::default(), 3000);
    let r = a.result();
    assert!(r.spectra.hits >= 5, "hits {}", r.spectra.hits);
    let modes = r.modes().to_vec();
    // Geometry of the test bar, written out here rather than taken from the simulator.
    let (l, b, h, e, rho): (f64, f64, f64, f64, f64) = (0.150, 0.020, 0.003, 69e9, 2700.0);
    let root = (e * (b * h.powi(3) / 12.0) / (rho * b * h)).sqrt();
    for lam in [1.87510_f64, 4.69409, 7.85476] {
        let f = lam * lam / (2.0 * std::f64::consts::PI * l * l) * root;
        let best = modes
            .iter()
            .map(|m| m.frequency_hz)
            .min_by(|x, y| (x - f).abs().total_cmp(&(y - f).abs()))
            .unwrap();
        assert!(
            (best / f - 1.0).abs() < 0.005,
            "analytic {f:.2} Hz, picked {best:.2} Hz"
        );
    }
}

/// Live equals offline: the same samples in small random blocks and in one block give
/// identical hits and modes (no source needed: common practice, no source).
#[test]
fn block_size_does_not_change_results() {
    let plan = preset("tm9-arm-holed", 11).unwrap();
    let (chans, plan) = simulate(plan, 12.0);
    let sim = Simulator::new(plan, None, false);
    let whole = analyse_samples(&chans, &sim, AnalysisConfig::default(), usize::MAX / 2);
    for block in [1usize, 7, 256, 4097] {
        let parts = analyse_samples(&chans, &sim, AnalysisConfig::default(), block);
        assert_eq!(parts.hits(), whole.hits(), "block {block}");
        assert_eq!(parts.result(), whole.result(), "block {block}");
    }
    assert!(whole.accepted() >= 3);
}

/// Blocks of samples held in memory, as a source (for the offline drain).
struct Blocks {
    info: tapmodes::signal::StreamInfo,
    chans: Vec<Vec<f64>>,
    at: usize,
    block: usize,
}

impl Source for Blocks {
    fn info(&self) -> &tapmodes::signal::StreamInfo {
        &self.info
    }
    fn next_block(&mut self) -> tapmodes::error::Result<Option<Block>> {
        let n = self.chans[0].len();
        if self.at >= n {
            return Ok(None);
        }
        let end = (self.at + self.block).min(n);
        let b = Block {
            start: self.at as u64,
            channels: self
                .chans
                .iter()
                .map(|c| c[self.at..end].to_vec())
                .collect(),
        };
        self.at = end;
        Ok(Some(b))
    }
    fn paced(&self) -> bool {
        false
    }
}

/// The offline drain transforms accepted records in batches on all cores; its spectra,
/// hits and modes are exactly those of pushing the blocks one by one (sums in stream
/// order), and the last hit keeps its record.
#[test]
fn batched_drain_equals_block_by_block() {
    let plan = preset("tm9-arm-solid", 4).unwrap();
    let (chans, plan) = simulate(plan, 30.0);
    let sim = Simulator::new(plan, None, false);
    let mut one_by_one = analyse_samples(&chans, &sim, AnalysisConfig::default(), 4096);
    one_by_one.finish();
    let info = sim.info().clone();
    let roles = RoleChoice::default().resolve(&info).unwrap();
    let mut src = Blocks {
        info: info.clone(),
        chans: chans.clone(),
        at: 0,
        block: 4096,
    };
    let batched =
        tapmodes::pipeline::analyse_source(&mut src, roles, AnalysisConfig::default(), false)
            .unwrap();
    assert!(batched.accepted() > 8, "accepted {}", batched.accepted());
    assert_eq!(batched.hits(), one_by_one.hits());
    assert_eq!(batched.result(), one_by_one.result());
    let (la, lb) = (batched.last_hit().unwrap(), one_by_one.last_hit().unwrap());
    assert_eq!(la.record, lb.record);
    assert!(!la.record[0].is_empty());
}

/// `simulate` then analyse recovers well-separated modes: frequency within 0.5 % and
/// damping within 15 % relative for damping ratios 1-5 % at moderate noise.
#[test]
fn simulated_modes_are_recovered() {
    let truth = [
        (95.0, 0.01, 8.0),
        (260.0, 0.02, 4.0),
        (700.0, 0.035, 3.0),
        (1500.0, 0.05, 2.0),
    ];
    let plan = plan_with_modes(&truth, 21);
    let (chans, plan) = simulate(plan, 24.0);
    let sim = Simulator::new(plan, None, false);
    let a = analyse_samples(&chans, &sim, AnalysisConfig::default(), 8192);
    let modes = a.result().modes().to_vec();
    for m in &modes {
        eprintln!(
            "{:.2} Hz {:?} {} {:?} hp {:?}",
            m.frequency_hz, m.damping_ratio, m.method, m.flags, m.half_power_estimate
        );
    }
    for (f, z, _) in truth {
        let m = modes
            .iter()
            .min_by(|x, y| {
                (x.frequency_hz - f)
                    .abs()
                    .total_cmp(&(y.frequency_hz - f).abs())
            })
            .unwrap();
        assert!(
            (m.frequency_hz / f - 1.0).abs() < 0.005,
            "{f}: {}",
            m.frequency_hz
        );
        let got = m.damping_ratio.unwrap();
        assert!((got / z - 1.0).abs() < 0.15, "{f} Hz: damping {got} vs {z}");
    }
}
