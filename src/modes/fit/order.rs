//! Band fits of a mode list: grouping of seeds into bands, model order, adoption.

use super::*;

/// Half-width in Hz of the band fitted around a seed.
fn half_width(seed: &Seed, resolution_hz: f64, cfg: &FitConfig) -> f64 {
    let bw = 2.0 * seed.damping_ratio * seed.frequency_hz;
    (cfg.bandwidths * bw)
        .max(cfg.min_half_lines * resolution_hz)
        .min(cfg.max_half_fraction * seed.frequency_hz)
}

/// Group seeds whose bands overlap; returns (band, member indices) per group.
pub fn group_seeds(
    seeds: &[Seed],
    resolution_hz: f64,
    cfg: &FitConfig,
) -> Vec<((f64, f64), Vec<usize>)> {
    let mut order: Vec<usize> = (0..seeds.len()).collect();
    order.sort_by(|&a, &b| seeds[a].frequency_hz.total_cmp(&seeds[b].frequency_hz));
    let mut groups: Vec<((f64, f64), Vec<usize>)> = Vec::new();
    for i in order {
        let hw = half_width(&seeds[i], resolution_hz, cfg);
        let (lo, hi) = (seeds[i].frequency_hz - hw, seeds[i].frequency_hz + hw);
        match groups.last_mut() {
            Some((band, members)) if lo <= band.1 => {
                band.1 = band.1.max(hi);
                members.push(i);
            }
            _ => groups.push(((lo.max(0.0), hi), vec![i])),
        }
    }
    groups
}

/// Fit every mode of `modes` (seeded by `seeds`, one per mode, apparent values) and store
/// the result in `Mode::fit`. Modes whose half-power value is flagged unreliable (few
/// lines, overlap, no half-power) take the fitted frequency and damping; `method` says so.
///
/// Model order: while a band's fit leaves more than `SPLIT_MIN_ERROR` of the curve
/// unexplained, one more mode is tried (each fitted mode split in two, and a mode where the
/// fit misses most); the best trial is kept when it leaves at most `KEEP_RATIO` of the
/// residual and each of its poles makes at least `OWN_SHARE` of the curve at its own
/// frequency and lies a bandwidth inside the band, up to `MAX_ADDED` more modes. Added modes join the list with the `Overlap`
/// flag (close modes that merge into one peak). The tests are common practice, no source.
#[allow(clippy::too_many_arguments)]
pub fn refine_modes(
    freqs: &[f64],
    curve: &Curve,
    resolution_hz: f64,
    tau_s: Option<f64>,
    modes: &mut Vec<Mode>,
    seeds: &[Seed],
    cfg: &FitConfig,
    budget: &FitBudget,
) {
    let Some(h) = complex_curve(curve) else {
        return;
    };
    for (band, members) in group_seeds(seeds, resolution_hz, cfg) {
        // group_seeds lists members by frequency.
        let group: Vec<Seed> = members.iter().map(|&i| seeds[i]).collect();
        let Some(fit) = fit_band_within(freqs, &h, band, &group, cfg.max_iterations, budget) else {
            continue;
        };
        // The trials of more modes may together use four times what the band's fit used,
        // at least `FIT_WORK_TRIALS`, at most `FIT_WORK_PER_BAND`.
        let mut trials_left = (4 * budget.band_used()).clamp(FIT_WORK_TRIALS, FIT_WORK_PER_BAND);
        let mut fit = fit;
        let mut band_now = band;
        let width = band.1 - band.0;
        for _ in 0..MAX_ADDED {
            if fit.error <= SPLIT_MIN_ERROR || trials_left == 0 {
                break;
            }
            let mut round: Option<BandFit> = None;
            for (trial, start) in trials_of_one_more(&fit, freqs, &h) {
                // The band widens to hold every seed's own +-3 bandwidths (a mode found at
                // the edge lies partly outside), by at most the first band's width a side.
                let need = (trial.iter()).fold(band_now, |b, t| {
                    let hw = 6.0 * t.damping_ratio * t.frequency_hz;
                    (b.0.min(t.frequency_hz - hw), b.1.max(t.frequency_hz + hw))
                });
                let trial_band = (
                    need.0.max(band.0 - width).max(0.0),
                    need.1.min(band.1 + width),
                );
                // On a widened band the residual to beat is the present modes' on that band.
                let reference = if trial_band == band_now {
                    fit.error
                } else {
                    let base = fit_band_limited(
                        freqs,
                        &h,
                        trial_band,
                        &seeds_of(&fit),
                        cfg.max_iterations,
                        budget,
                        trials_left,
                        Start::SeedsFirst,
                        true,
                    );
                    trials_left -= budget.band_used().min(trials_left);
                    base.map_or(fit.error, |b| b.error.max(fit.error))
                };
                let tried = fit_band_limited(
                    freqs,
                    &h,
                    trial_band,
                    &trial,
                    cfg.max_iterations,
                    budget,
                    trials_left,
                    start,
                    true,
                );
                trials_left -= budget.band_used().min(trials_left);
                if let Some(f2) = tried
                    && f2.error < KEEP_RATIO * reference
                    && every_pole_shows(&f2)
                {
                    band_now = trial_band;
                    round = Some(f2);
                }
                // The first trial that passes is taken: the next round can still improve it.
                if trials_left == 0 || round.is_some() {
                    break;
                }
            }
            match round {
                Some(f2) => fit = f2,
                None => break,
            }
        }
        if fit.correlation < cfg.min_correlation {
            continue;
        }
        let owner = assign_poles(&fit, &group, resolution_hz);
        let added = fit.poles.len() > members.len();
        for (pole, who) in owner.iter().enumerate() {
            match who {
                Some(k) => {
                    let m = &mut modes[members[*k]];
                    if added && !m.flags.contains(&Flag::Overlap) {
                        m.flags.push(Flag::Overlap);
                    }
                    adopt(m, fitted_mode(&fit, pole, tau_s));
                }
                None => {
                    // A mode the peaks did not show (close modes merged into one peak):
                    // a new entry, read at its own line; unless a widened band reached a
                    // mode of another band (within the pole's half-power bandwidth).
                    let f_pole = fit.poles[pole].im / (2.0 * PI);
                    let bw = (-fit.poles[pole].re / PI).max(resolution_hz);
                    if (modes.iter().enumerate())
                        .any(|(i, m)| !members.contains(&i) && (m.frequency_hz - f_pole).abs() < bw)
                    {
                        continue;
                    }
                    let nearest = (0..members.len())
                        .min_by(|&x, &y| {
                            (group[x].frequency_hz - f_pole)
                                .abs()
                                .total_cmp(&(group[y].frequency_hz - f_pole).abs())
                        })
                        .unwrap_or(0);
                    let mut new_mode = modes[members[nearest]].clone();
                    new_mode.flags.retain(|f| *f == Flag::LowCoherence);
                    new_mode.flags.push(Flag::Overlap);
                    new_mode.flags.push(Flag::FitOnly);
                    new_mode.half_power = None;
                    new_mode.half_power_estimate = None;
                    new_mode.uncertainty = None;
                    new_mode.ringdown = None;
                    adopt(&mut new_mode, fitted_mode(&fit, pole, tau_s));
                    let f_new = new_mode.frequency_hz;
                    let j = freqs.partition_point(|&f| f < f_new).min(freqs.len() - 1);
                    new_mode.magnitude = curve.magnitude[j];
                    new_mode.phase_deg = curve.phase_deg.as_ref().map(|p| p[j]);
                    new_mode.coherence = curve.coherence.as_ref().map(|c| c[j]);
                    new_mode.prominence_db = own_over_others_db(&fit, pole);
                    modes.push(new_mode);
                }
            }
        }
    }
}

/// At most this many modes are added to one band's fit.
pub const MAX_ADDED: usize = 3;

/// One more mode is kept when it leaves at most this fraction of the residual before:
/// common practice, no source.
pub const KEEP_RATIO: f64 = 0.7;

/// An added mode must make at least this share of the fitted curve at its own frequency
/// (a pole that only shapes the background is not a mode): common practice, no source.
pub const OWN_SHARE: f64 = 0.5;

/// Seeds (apparent values) of the fit's poles.
fn seeds_of(fit: &BandFit) -> Vec<Seed> {
    fit.poles
        .iter()
        .map(|s| Seed {
            frequency_hz: s.norm() / (2.0 * PI),
            damping_ratio: (-s.re / s.norm()).clamp(1e-4, 0.3),
        })
        .collect()
}

/// Starting points with one more mode: a mode added where the fit misses most (from the
/// rational-fraction poles of the higher order, then from the seeds), then each fitted mode
/// split in two (seeds at `f (1 -+ zeta)`, half the damping).
fn trials_of_one_more(fit: &BandFit, freqs: &[f64], h: &[Complex64]) -> Vec<(Vec<Seed>, Start)> {
    let now = seeds_of(fit);
    let mut out = Vec::with_capacity(now.len() + 1);
    // The line of the largest misfit, its damping the median of the fitted ones.
    let worst = band_lines(freqs, fit.band_hz).into_iter().max_by(|&a, &b| {
        (h[a] - fit.evaluate(freqs[a]))
            .norm()
            .total_cmp(&(h[b] - fit.evaluate(freqs[b])).norm())
    });
    if let Some(k) = worst {
        let mut z: Vec<f64> = now.iter().map(|s| s.damping_ratio).collect();
        z.sort_by(f64::total_cmp);
        let mut trial = now.clone();
        trial.push(Seed {
            frequency_hz: freqs[k],
            damping_ratio: z.get(z.len() / 2).copied().unwrap_or(0.01),
        });
        trial.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
        out.push((trial.clone(), Start::RfpFirst));
        out.push((trial, Start::SeedsFirst));
    }
    for (i, s) in now.iter().enumerate() {
        let z = s.damping_ratio.max(1e-3);
        let mut trial = now.clone();
        trial[i] = Seed {
            frequency_hz: s.frequency_hz * (1.0 - z),
            damping_ratio: 0.5 * z,
        };
        trial.insert(
            i + 1,
            Seed {
                frequency_hz: s.frequency_hz * (1.0 + z),
                damping_ratio: 0.5 * z,
            },
        );
        out.push((trial, Start::SeedsFirst));
    }
    out
}

/// Every pole of the fit makes at least `OWN_SHARE` of the fitted curve at its own
/// frequency and lies at least its own half-power bandwidth inside the band (a pole at the
/// edge stands in for modes outside the band: common practice, no source).
fn every_pole_shows(fit: &BandFit) -> bool {
    fit.poles.iter().zip(&fit.residues).all(|(s, r)| {
        let f = s.im / (2.0 * PI);
        let bw = -s.re / PI;
        let inside = f - bw >= fit.band_hz.0 && f + bw <= fit.band_hz.1;
        let own = r.norm() / (-s.re).max(f64::MIN_POSITIVE);
        inside && own >= OWN_SHARE * fit.evaluate(f).norm()
    })
}

/// How far a pole's own contribution stands over the rest of the fitted curve at its own
/// frequency, dB: the prominence of a mode the peaks did not show.
fn own_over_others_db(fit: &BandFit, i: usize) -> f64 {
    let (s, r) = (fit.poles[i], fit.residues[i]);
    let jw = J * s.im;
    let own = r / (jw - s) + r.conj() / (jw - s.conj());
    let others = fit.evaluate(s.im / (2.0 * PI)) - own;
    20.0 * (own.norm() / others.norm().max(f64::MIN_POSITIVE)).log10()
}

/// Which picked peak (index into `group`) each pole of the fit belongs to; `None` for a pole
/// the peaks did not show. Each peak takes, among the poles within one half-power
/// bandwidth of it, the one standing highest (`|R| / sigma`), else the nearest; peaks are
/// served in order of frequency.
fn assign_poles(fit: &BandFit, group: &[Seed], resolution_hz: f64) -> Vec<Option<usize>> {
    let mut owner = vec![None; fit.poles.len()];
    let height = |i: usize| fit.residues[i].norm() / (-fit.poles[i].re).max(f64::MIN_POSITIVE);
    let f_of = |i: usize| fit.poles[i].im / (2.0 * PI);
    for (k, seed) in group.iter().enumerate() {
        let bw = (2.0 * seed.damping_ratio * seed.frequency_hz).max(resolution_hz);
        let free: Vec<usize> = (0..fit.poles.len())
            .filter(|&i| owner[i].is_none())
            .collect();
        let near: Vec<usize> = (free.iter().copied())
            .filter(|&i| (f_of(i) - seed.frequency_hz).abs() <= bw)
            .collect();
        let pick = if near.is_empty() {
            free.into_iter().min_by(|&a, &b| {
                (f_of(a) - seed.frequency_hz)
                    .abs()
                    .total_cmp(&(f_of(b) - seed.frequency_hz).abs())
            })
        } else {
            near.into_iter()
                .max_by(|&a, &b| height(a).total_cmp(&height(b)))
        };
        if let Some(i) = pick {
            owner[i] = Some(k);
        }
    }
    owner
}

/// A band fit leaving more than this fraction of the curve's norm unexplained is tried
/// with one more mode.
pub const SPLIT_MIN_ERROR: f64 = 0.02;

/// Store a fit on a mode and report it when the half-power value is unreliable.
/// Report the fit's frequency and damping: it accounts for neighbouring modes and
/// residuals, where half-power reads one peak in isolation (it stays in
/// `half_power_estimate` as the cross-check). The caller only offers fits that explain the
/// band (correlation at least the configured minimum).
fn adopt(mode: &mut Mode, fm: FittedMode) {
    {
        mode.frequency_hz = fm.frequency_hz;
        mode.window_damping = fm.window_damping;
        mode.flags.retain(|f| *f != Flag::WindowDominated);
        if fm.damping_ratio > 0.0 {
            mode.damping_ratio = Some(fm.damping_ratio);
        } else {
            mode.damping_ratio = None;
            mode.flags.push(Flag::WindowDominated);
        }
        mode.q = mode.damping_ratio.map(|z| 1.0 / (2.0 * z));
        mode.method = "fit".into();
    }
    mode.fit = Some(fm);
}
