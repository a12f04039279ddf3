//! Hit-to-hit uncertainty of the modes: the estimator is run again on every accepted hit's
//! own FRF, and the spread of those per-hit values gives a standard deviation and a 95 %
//! confidence interval for the mean (Student t with n - 1 degrees of freedom, since n is
//! small: Montgomery & Runger, *Applied Statistics and Probability for Engineers*, sec. 8.2,
//! from memory).
//!
//! The interval is centred on the mean of the per-hit estimates; the reported mode value
//! (from the averaged FRF) normally lies close to it. It describes the scatter between taps
//! (noise, tap-to-tap variation); a bias common to every hit is not in it.

use super::fit::{FitBudget, FitConfig, Seed, fit_band_within, fitted_mode};
use super::{Mode, halfpower};
use crate::spectra::{Basis, Curve, HitSpectra, LineSet, SpectralAverager, remove_window_damping};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Mean, spread and confidence interval of one quantity over hits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    pub mean: f64,
    /// Sample standard deviation of the per-hit values.
    pub std_dev: f64,
    /// 95 % confidence interval of the mean.
    pub low: f64,
    pub high: f64,
}

impl Interval {
    /// Standard error of the mean.
    pub fn std_error(&self, n: usize) -> f64 {
        self.std_dev / (n as f64).sqrt()
    }
}

/// The per-mode uncertainty stored on `Mode`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Uncertainty {
    /// Hits whose estimate succeeded (the intervals' n).
    pub hits: usize,
    /// Which estimator ran per hit ("fit" or "half_power").
    pub method: String,
    pub frequency_hz: Interval,
    pub damping_ratio: Option<Interval>,
}

/// `A(t | nu) = P(|T| < t)` for Student's t with integer `nu` degrees of freedom, by the
/// finite series of Abramowitz & Stegun 1964, *Handbook of Mathematical Functions*,
/// 26.7.3 (odd nu) and 26.7.4 (even nu), with `theta = atan(t / sqrt(nu))`.
pub fn student_t_two_sided(t: f64, nu: u32) -> f64 {
    let nu = nu.max(1);
    let theta = (t.abs() / (nu as f64).sqrt()).atan();
    let (s, c) = theta.sin_cos();
    if nu % 2 == 1 {
        // (2/pi) [theta + sin cos (1 + 2/3 cos^2 + 2.4/(3.5) cos^4 + ...)], nu - 2 terms.
        let mut sum = 0.0;
        if nu > 1 {
            let mut term = c;
            sum = term;
            let mut k = 1;
            while 2 * k < nu - 1 {
                term *= c * c * (2 * k) as f64 / (2 * k + 1) as f64;
                sum += term;
                k += 1;
            }
        }
        2.0 / PI * (theta + s * sum)
    } else {
        // sin [1 + 1/2 cos^2 + 1.3/(2.4) cos^4 + ...], up to cos^(nu-2).
        let mut term = 1.0;
        let mut sum = 1.0;
        let mut k = 1;
        while 2 * k < nu {
            term *= c * c * (2 * k - 1) as f64 / (2 * k) as f64;
            sum += term;
            k += 1;
        }
        s * sum
    }
}

/// The two-sided `confidence` quantile of Student's t (e.g. 0.95 -> t_0.975), by bisection
/// on `student_t_two_sided`.
pub fn student_t_quantile(confidence: f64, nu: u32) -> f64 {
    let (mut lo, mut hi) = (0.0, 1e7);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if student_t_two_sided(mid, nu) < confidence {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Mean, sample standard deviation and t-interval of the mean at 95 %; `None` for n < 2.
pub fn interval(values: &[f64]) -> Option<Interval> {
    let n = values.len();
    if n < 2 {
        return None;
    }
    let mean = values.iter().sum::<f64>() / n as f64;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
    let sd = var.sqrt();
    let half = student_t_quantile(0.95, (n - 1) as u32) * sd / (n as f64).sqrt();
    Some(Interval {
        mean,
        std_dev: sd,
        low: mean - half,
        high: mean + half,
    })
}

/// The lines the per-hit estimators of `modes` read (see `estimate_hit`): each fitted
/// band's lines, and the magnitude everywhere when a mode is read at half power.
pub fn hit_lines(modes: &[Mode], freqs: &[f64]) -> LineSet {
    let ranges = fitted_bands(modes)
        .into_iter()
        .map(|band| band_lines(freqs, band))
        .filter(|r| !r.is_empty())
        .collect();
    LineSet {
        ranges,
        magnitude_everywhere: modes.iter().any(|m| m.method != "fit"),
    }
}

/// The bands of the modes read by the band fit.
fn fitted_bands(modes: &[Mode]) -> Vec<(f64, f64)> {
    (modes.iter())
        .filter(|m| m.method == "fit")
        .filter_map(|m| m.fit.as_ref().map(|f| f.band_hz))
        .collect()
}

/// The lines of `freqs` in `lo..=hi` Hz.
fn band_lines(freqs: &[f64], (lo, hi): (f64, f64)) -> std::ops::Range<usize> {
    let a = freqs.partition_point(|&f| f < lo);
    let b = freqs.partition_point(|&f| f <= hi);
    a..b.max(a)
}

/// Per-hit curves from accepted hits' transforms (made once by the run's averager, see
/// `SpectralAverager::transform`), each read on `basis` as an averager of that one hit
/// would, on the lines `lines` only (`hit_lines`; zero elsewhere); on all cores.
/// Coherence of a single hit is 1 and carries no information, so none is made.
pub fn hit_curves<H: AsRef<HitSpectra> + Sync>(
    averager: &SpectralAverager,
    hits: &[H],
    basis: Basis,
    lines: &LineSet,
) -> Vec<Curve> {
    crate::parallel::map(hits, |hs| {
        averager.single_curve_on(hs.as_ref(), basis, lines)
    })
    .into_iter()
    .flatten()
    .collect()
}

/// One hit's (frequency, damping) of one mode, `None` where the estimator failed.
type HitEstimate = Option<(f64, Option<f64>)>;

/// One hit's (frequency, damping) for every mode of `modes`, by the mode's own method.
fn estimate_hit(
    freqs: &[f64],
    curve: &Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    modes: &[Mode],
    cfg: &FitConfig,
) -> Vec<HitEstimate> {
    let mut out = vec![None; modes.len()];
    // The refits read only their bands' lines: the complex curve is made there alone (the
    // same values; zero elsewhere), which spares a sine and cosine on every other line.
    let h = complex_curve_within(curve, freqs, &fitted_bands(modes));
    // Each hit's refits get the budget of one mode search.
    let budget = FitBudget::standard();
    // Fitted modes: refit each band of the averaged fit, seeded by the averaged poles.
    if let Some(h) = &h {
        let mut done = vec![false; modes.len()];
        for i in 0..modes.len() {
            let Some(f0) = modes[i].fit.as_ref().filter(|_| modes[i].method == "fit") else {
                continue;
            };
            if done[i] {
                continue;
            }
            let members: Vec<usize> = (0..modes.len())
                .filter(|&j| {
                    modes[j]
                        .fit
                        .as_ref()
                        .is_some_and(|f| f.band_hz == f0.band_hz)
                })
                .collect();
            let mut pairs: Vec<(usize, Seed)> = members
                .iter()
                .filter_map(|&j| {
                    let f = modes[j].fit.as_ref()?;
                    Some((
                        j,
                        Seed {
                            frequency_hz: f.frequency_hz,
                            damping_ratio: (f.damping_ratio + f.window_damping).max(1e-4),
                        },
                    ))
                })
                .collect();
            pairs.sort_by(|a, b| a.1.frequency_hz.total_cmp(&b.1.frequency_hz));
            let seeds: Vec<Seed> = pairs.iter().map(|p| p.1).collect();
            if let Some(fit) =
                fit_band_within(freqs, h, f0.band_hz, &seeds, cfg.max_iterations, &budget)
            {
                // Poles come back sorted by frequency, like the seeds.
                for (k, &(j, _)) in pairs.iter().enumerate() {
                    let fm = fitted_mode(&fit, k, tau_s);
                    if modes[j].method == "fit" {
                        out[j] = Some((fm.frequency_hz, Some(fm.damping_ratio)));
                    }
                }
            }
            for &j in &members {
                done[j] = true;
            }
        }
    }
    // Half-power modes: the local maximum nearest the mode, refined, then its band.
    if modes.iter().all(|m| m.method == "fit") {
        return out;
    }
    let db: Vec<f64> = curve
        .magnitude
        .iter()
        .map(|m| 20.0 * m.max(1e-300).log10())
        .collect();
    let df = freqs.get(1).map_or(1.0, |f| f - freqs[0]);
    for (j, m) in modes.iter().enumerate() {
        if m.method == "fit" || freqs.len() < 3 {
            continue;
        }
        let k0 = freqs.partition_point(|&f| f < m.frequency_hz);
        let reach = ((resolution_hz / df).ceil() as usize).max(1);
        let lo = k0.saturating_sub(reach).max(1);
        let hi = (k0 + reach).min(freqs.len() - 2);
        let Some(k) = (lo..=hi).max_by(|&a, &b| db[a].total_cmp(&db[b])) else {
            continue;
        };
        let refined = halfpower::refine_peak(freqs, &db, k);
        let z = halfpower::half_power(freqs, &db, k, refined.level_db)
            .ok()
            .map(|b| halfpower::damping_from_band(b.0, b.1, refined.frequency_hz));
        let (f, zc) = match z {
            Some(z) => {
                let (f, zc) = remove_window_damping(refined.frequency_hz, z, tau_s);
                (f, Some(zc))
            }
            None => (refined.frequency_hz, None),
        };
        out[j] = Some((f, zc));
    }
    out
}

/// Run the modes' estimators on every hit curve and store the spread and 95 % intervals
/// in `Mode::uncertainty`. `hit_curves` are per-hit curves on the same basis and lines as
/// the averaged curve the modes came from (see `hit_curves`). Needs two or more hits.
pub fn attach(
    modes: &mut [Mode],
    freqs: &[f64],
    hit_curves: &[Curve],
    resolution_hz: f64,
    tau_s: Option<f64>,
) {
    let cfg = FitConfig::default();
    let per_hit: Vec<Vec<HitEstimate>> = crate::parallel::map(hit_curves, |c| {
        estimate_hit(freqs, c, resolution_hz, tau_s, modes, &cfg)
    });
    for (j, m) in modes.iter_mut().enumerate() {
        let vals: Vec<(f64, Option<f64>)> = per_hit.iter().filter_map(|h| h[j]).collect();
        // Guard against a hit that locked onto another peak: keep values within 5 % (or
        // within the half-power band) of the mode (common practice, no source).
        let tol = m.frequency_hz * 0.05;
        let vals: Vec<(f64, Option<f64>)> = vals
            .into_iter()
            .filter(|(f, _)| (f - m.frequency_hz).abs() <= tol)
            .collect();
        let freqs_hit: Vec<f64> = vals.iter().map(|v| v.0).collect();
        let damp_hit: Vec<f64> = vals.iter().filter_map(|v| v.1).collect();
        m.uncertainty = interval(&freqs_hit).map(|fi| Uncertainty {
            hits: freqs_hit.len(),
            method: m.method.clone(),
            frequency_hz: fi,
            damping_ratio: (damp_hit.len() == freqs_hit.len())
                .then(|| interval(&damp_hit))
                .flatten(),
        });
    }
}

/// Welch's two-sample t-test at 5 % on two intervals: `|m_a - m_b| > t_{0.975, nu} se`,
/// `se^2 = s_a^2/n_a + s_b^2/n_b`, nu by Welch-Satterthwaite (Welch 1947, "The
/// generalization of Student's problem when several different population variances are
/// involved", Biometrika 34), rounded down.
pub fn welch_significant(a: &Interval, na: usize, b: &Interval, nb: usize) -> Option<bool> {
    if na < 2 || nb < 2 {
        return None;
    }
    let va = a.std_dev.powi(2) / na as f64;
    let vb = b.std_dev.powi(2) / nb as f64;
    let se2 = va + vb;
    let d = (a.mean - b.mean).abs();
    if se2 <= 0.0 {
        return Some(d > 0.0);
    }
    let nu = se2 * se2 / (va * va / (na - 1) as f64 + vb * vb / (nb - 1) as f64);
    let nu = (nu.floor() as u32).max(1);
    Some(d > student_t_quantile(0.95, nu) * se2.sqrt())
}

/// Whether two modes' frequencies differ significantly (Welch test at 5 %); `None` when
/// either lacks per-hit uncertainty.
pub fn difference_significant(a: &Mode, b: &Mode) -> Option<bool> {
    let (ua, ub) = (a.uncertainty.as_ref()?, b.uncertainty.as_ref()?);
    welch_significant(&ua.frequency_hz, ua.hits, &ub.frequency_hz, ub.hits)
}

/// Whether two modes' damping ratios differ significantly (Welch test at 5 %).
pub fn damping_difference_significant(a: &Mode, b: &Mode) -> Option<bool> {
    let (ua, ub) = (a.uncertainty.as_ref()?, b.uncertainty.as_ref()?);
    welch_significant(
        ua.damping_ratio.as_ref()?,
        ua.hits,
        ub.damping_ratio.as_ref()?,
        ub.hits,
    )
}

/// `complex_curve` on the lines inside `bands` only (zero elsewhere); `None` without phase.
fn complex_curve_within(
    curve: &Curve,
    freqs: &[f64],
    bands: &[(f64, f64)],
) -> Option<Vec<realfft::num_complex::Complex64>> {
    use realfft::num_complex::Complex64;
    let ph = curve.phase_deg.as_ref()?;
    let mut h = vec![Complex64::new(0.0, 0.0); curve.magnitude.len()];
    for &band in bands {
        let r = band_lines(freqs, band);
        let b = r.end.min(h.len()).min(ph.len());
        for k in r.start..b {
            h[k] = Complex64::from_polar(curve.magnitude[k], ph[k].to_radians());
        }
    }
    Some(h)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// nu = 1 is Cauchy: P(|T| < t) = 2 atan(t) / pi, so t_0.975 = tan(0.475 pi).
    /// nu = 2: P(|T| < t) = t / sqrt(2 + t^2), so t = sqrt(2 A^2 / (1 - A^2)).
    #[test]
    fn t_quantiles_exact_cases() {
        let t1 = student_t_quantile(0.95, 1);
        assert!((t1 - (0.475 * PI).tan()).abs() < 1e-6, "{t1}");
        let t2 = student_t_quantile(0.95, 2);
        let exact = (2.0 * 0.95f64.powi(2) / (1.0 - 0.95f64.powi(2))).sqrt();
        assert!((t2 - exact).abs() < 1e-9, "{t2}");
    }

    /// Large nu tends to the normal quantile 1.959964 (A&S table 26.1, from memory), and
    /// t_0.975 with 9 degrees of freedom is 2.262 (A&S table 26.10, from memory).
    #[test]
    fn t_quantiles_tables() {
        assert!((student_t_quantile(0.95, 9) - 2.262).abs() < 1e-3);
        assert!((student_t_quantile(0.95, 2000) - 1.96).abs() < 2e-3);
        // Monotone decreasing in nu.
        let q: Vec<f64> = (1..30).map(|n| student_t_quantile(0.95, n)).collect();
        assert!(q.windows(2).all(|w| w[0] > w[1]));
    }

    #[test]
    fn welch_detects_shift_only_when_large() {
        let a = Interval {
            mean: 100.0,
            std_dev: 0.5,
            low: 0.0,
            high: 0.0,
        };
        let mut b = a.clone();
        b.mean = 100.2;
        assert_eq!(welch_significant(&a, 10, &b, 10), Some(false));
        b.mean = 101.0;
        assert_eq!(welch_significant(&a, 10, &b, 10), Some(true));
        assert_eq!(welch_significant(&a, 1, &b, 10), None);
    }
}
