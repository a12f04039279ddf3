//! Soft-mount fit on analytic base-excitation transmissibility curves.
//!
//! Reference: `T(r) = (1 + 2j zeta r) / (1 - r^2 + 2j zeta r)` (Rao, *Mechanical
//! Vibrations*, 5th ed., sec. 3.6; Inman, *Engineering Vibration*, 4th ed., sec. 2.4;
//! section numbers from memory), and `|T(sqrt 2)| = 1` for any damping.

use realfft::num_complex::Complex64;
use std::f64::consts::PI;
use tapmodes::modes::softmount::{
    fit_mount, isolation_band_db, isolation_db, transmissibility, transmissibility_s,
};
use tapmodes::spectra::{Basis, Curve};

fn curve(t: &[Complex64], phase: bool) -> Curve {
    Curve {
        basis: Basis::Transmissibility,
        magnitude: t.iter().map(|z| z.norm()).collect(),
        phase_deg: phase.then(|| t.iter().map(|z| z.arg().to_degrees()).collect()),
        coherence: None,
        spread_db: None,
        unit: "ratio".into(),
    }
}

#[test]
fn mount_recovered_with_window_and_gain() {
    let (fn_hz, zeta, gain, tau) = (88.0, 0.09, 1.07, 0.43);
    let freqs: Vec<f64> = (0..2000).map(|k| k as f64 * 0.5).collect();
    // Measured through the exponential window: T evaluated at jw + 1/tau.
    let t: Vec<Complex64> = freqs
        .iter()
        .map(|&f| gain * transmissibility_s(Complex64::new(1.0 / tau, 2.0 * PI * f), fn_hz, zeta))
        .collect();
    let fit = fit_mount(&freqs, &curve(&t, true), None, Some(tau)).expect("fit");
    assert!(
        (fit.natural_frequency_hz - fn_hz).abs() < 1e-6 * fn_hz,
        "{fit:?}"
    );
    assert!((fit.damping_ratio - zeta).abs() < 1e-6 * zeta, "{fit:?}");
    assert!((fit.gain - gain).abs() < 1e-6);
    assert!(fit.error < 1e-6);
    assert!((fit.isolation_onset_hz() - 2f64.sqrt() * fn_hz).abs() < 1e-9);
}

#[test]
fn magnitude_only_fit_and_isolation() {
    let (fn_hz, zeta) = (152.0, 0.07);
    let freqs: Vec<f64> = (0..2000).map(|k| k as f64 * 0.5).collect();
    let t: Vec<Complex64> = freqs
        .iter()
        .map(|&f| transmissibility(f / fn_hz, zeta))
        .collect();
    let c = curve(&t, false);
    let fit = fit_mount(&freqs, &c, Some((40.0, 600.0)), None).expect("fit");
    assert!(fit.magnitude_only);
    assert!(
        (fit.natural_frequency_hz - fn_hz).abs() < 1e-5 * fn_hz,
        "{fit:?}"
    );
    assert!((fit.damping_ratio - zeta).abs() < 1e-4 * zeta, "{fit:?}");
    // Isolation at 600 Hz: measured curve and model agree with the closed form.
    let exact = 20.0 * transmissibility(600.0 / fn_hz, zeta).norm().log10();
    let measured = isolation_db(&freqs, &c, 600.0).expect("in range");
    assert!((measured - exact).abs() < 1e-9, "{measured} vs {exact}");
    assert!((fit.model_db(600.0) - exact).abs() < 1e-3);
    assert!(exact < -15.0, "a 152 Hz mount isolates 600 Hz: {exact}");
    // Band average: power mean of |T|^2 over the lines.
    let band = isolation_band_db(&freqs, &c, (400.0, 800.0)).expect("band");
    let model_band = fit.model_band_db((400.0, 800.0));
    assert!((band - model_band).abs() < 0.05, "{band} vs {model_band}");
    // Right at sqrt(2) f_n the curve passes 0 dB.
    let at_onset = isolation_db(&freqs, &c, fit.isolation_onset_hz()).expect("in range");
    assert!(at_onset.abs() < 0.02, "{at_onset}");
}

#[test]
fn an_elastomer_mount_is_fitted_with_its_loss_factor() {
    // Complex stiffness k (1 + j eta): T(r) = (1 + j eta) / (1 - r^2 + j eta) (Rao,
    // *Mechanical Vibrations*, 5th ed., sec. 2.9, hysteretic damping; from memory). The
    // viscous model cannot follow it above resonance (its T falls as 1/r there, the
    // hysteretic one as 1/r^2), so the hysteretic model is kept, with eta recovered.
    use tapmodes::modes::softmount::MountModel;
    let (fn_hz, eta) = (97.0, 0.19);
    let freqs: Vec<f64> = (0..2000).map(|k| k as f64 * 0.5).collect();
    let t: Vec<Complex64> = freqs
        .iter()
        .map(|&f| {
            let r = f / fn_hz;
            Complex64::new(1.0, eta) / Complex64::new(1.0 - r * r, eta)
        })
        .collect();
    let fit = fit_mount(&freqs, &curve(&t, true), None, None).expect("fit");
    assert_eq!(fit.model, MountModel::Hysteretic, "{fit:?}");
    assert!(
        (fit.natural_frequency_hz - fn_hz).abs() < 1e-4 * fn_hz,
        "{fit:?}"
    );
    assert!(
        (fit.loss_factor.unwrap() - eta).abs() < 1e-3 * eta,
        "{fit:?}"
    );
    assert!(
        fit.other_model_error.unwrap() > 10.0 * fit.error.max(1e-9),
        "{fit:?}"
    );
}
