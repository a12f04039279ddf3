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
/// Model order: when a band's fit leaves more than `SPLIT_MIN_ERROR` of the curve
/// unexplained, each of its modes in turn is tried as two (seeds at `f (1 -+ zeta)`, half
/// the damping); the best split is kept if it at least halves the residual, and the extra
/// mode is added to the list with the `Overlap` flag (close modes that merge into one
/// peak). The test on the residual is common practice, no source.
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
        // The trials of one more mode may together use what the band's fit used, or
        // `FIT_WORK_TRIALS`, whichever is more.
        let mut trials_left = budget.band_used().max(FIT_WORK_TRIALS);
        let mut best: (BandFit, Option<usize>) = (fit, None);
        if best.0.error > SPLIT_MIN_ERROR {
            for split in 0..group.len() {
                let s = group[split];
                let z = s.damping_ratio.max(1e-3);
                let mut trial = group.clone();
                trial[split] = Seed {
                    frequency_hz: s.frequency_hz * (1.0 - z),
                    damping_ratio: 0.5 * z,
                };
                trial.insert(
                    split + 1,
                    Seed {
                        frequency_hz: s.frequency_hz * (1.0 + z),
                        damping_ratio: 0.5 * z,
                    },
                );
                let tried = fit_band_limited(
                    freqs,
                    &h,
                    band,
                    &trial,
                    cfg.max_iterations,
                    budget,
                    trials_left,
                );
                trials_left -= budget.band_used().min(trials_left);
                if let Some(f2) = tried
                    && f2.error < 0.5 * best.0.error
                    && (best.1.is_none() || f2.error < best.0.error)
                {
                    best = (f2, Some(split));
                }
            }
        }
        let (fit, split) = best;
        if fit.correlation < cfg.min_correlation {
            continue;
        }
        let mut pole = 0;
        for (k, &mode_i) in members.iter().enumerate() {
            if split == Some(k) {
                // The larger residue stays with the picked peak; the other is a new mode.
                let (a, b) = (pole, pole + 1);
                let (keep, extra) = if fit.residues[a].norm() >= fit.residues[b].norm() {
                    (a, b)
                } else {
                    (b, a)
                };
                let mut new_mode = modes[mode_i].clone();
                for m in [&mut modes[mode_i], &mut new_mode] {
                    if !m.flags.contains(&Flag::Overlap) {
                        m.flags.push(Flag::Overlap);
                    }
                }
                adopt(&mut modes[mode_i], fitted_mode(&fit, keep, tau_s));
                new_mode.half_power = None;
                new_mode.half_power_estimate = None;
                new_mode.uncertainty = None;
                new_mode.ringdown = None;
                adopt(&mut new_mode, fitted_mode(&fit, extra, tau_s));
                let f_new = new_mode.frequency_hz;
                let j = freqs.partition_point(|&f| f < f_new).min(freqs.len() - 1);
                new_mode.magnitude = curve.magnitude[j];
                new_mode.phase_deg = curve.phase_deg.as_ref().map(|p| p[j]);
                new_mode.coherence = curve.coherence.as_ref().map(|c| c[j]);
                modes.push(new_mode);
                pole += 2;
            } else {
                adopt(&mut modes[mode_i], fitted_mode(&fit, pole, tau_s));
                pole += 1;
            }
        }
    }
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

