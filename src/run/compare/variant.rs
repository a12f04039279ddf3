//! One variant against the baseline: evidence, pairing, verdicts, unpaired modes, summary.

use super::matching::{self, Candidate, MatchRules, pair_modes};
use super::{
    CompareOptions, MatchedMode, MountComparison, PairRule, Rules, Unpaired, VariantComparison,
    Verdict, mount::compare_mounts, rule_text, setup_warnings,
};
use crate::modes::Mode;
use crate::run::RunFile;
use crate::spectra::Basis;

/// Residue evidence of each mode of a run: sign and modal-constant magnitude.
pub fn candidates(run: &RunFile) -> Vec<Candidate> {
    run.modes
        .iter()
        .map(|m| {
            let (mut sign, mut magnitude) = (None, None);
            if let Some(fit) = &m.fit {
                let [re, im] = fit.modal_constant;
                let mag = re.hypot(im);
                if mag > 0.0 && mag.is_finite() {
                    magnitude = Some(mag);
                    if re.abs() >= 0.5 * mag {
                        sign = Some(if re > 0.0 { 1 } else { -1 });
                    }
                }
            } else if let (Some(ph), Basis::Frf(_)) = (m.phase_deg, run.setup.basis) {
                let s = ph.to_radians().sin();
                if s.abs() >= 0.5 {
                    sign = Some(if s > 0.0 { 1 } else { -1 });
                }
            }
            Candidate {
                frequency_hz: m.frequency_hz,
                sign,
                magnitude,
                // Single-point runs carry no shapes; `tapmodes shapes-compare` pairs
                // multi-point shape files with the same matcher and MAC evidence.
                shape: None,
            }
        })
        .collect()
}

/// The point both runs measured, for the residue evidence to apply.
fn same_point(a: &RunFile, b: &RunFile) -> bool {
    let resp = |r: &RunFile| {
        r.setup
            .channels
            .get(r.setup.roles.response)
            .map(|c| (c.name.clone(), c.unit.clone()))
    };
    let force_unit = |r: &RunFile| {
        r.setup
            .roles
            .force
            .and_then(|f| r.setup.channels.get(f))
            .map(|c| c.unit.clone())
    };
    a.setup.basis == b.setup.basis && resp(a) == resp(b) && force_unit(a) == force_unit(b)
}

pub(super) fn compare_one(
    base: &RunFile,
    file: &str,
    run: &RunFile,
    o: &CompareOptions,
    rules: &Rules,
    position: usize,
    several: bool,
) -> VariantComparison {
    let mut warnings = setup_warnings(base, run);
    let mut ca = candidates(base);
    let mut cb = candidates(run);
    if !same_point(base, run) {
        for c in ca.iter_mut().chain(cb.iter_mut()) {
            c.sign = None;
            c.magnitude = None;
        }
    }
    let mr = MatchRules {
        max_shift: o.max_shift,
        pins: rules.0.clone(),
        forbids: rules.1.clone(),
    };
    // A sensor mounted the other way round flips every sign: when three or more in-order
    // pairs all disagree and none agrees, compare signs after undoing it.
    let unsigned = |c: &[Candidate]| -> Vec<Candidate> {
        c.iter()
            .map(|c| Candidate {
                sign: None,
                ..c.clone()
            })
            .collect()
    };
    let plain = pair_modes(&unsigned(&ca), &unsigned(&cb), &mr);
    let (agree, differ) =
        plain
            .iter()
            .fold((0, 0), |(y, n), p| match ca[p.a].sign.zip(cb[p.b].sign) {
                Some((x, z)) if x == z => (y + 1, n),
                Some(_) => (y, n + 1),
                None => (y, n),
            });
    if differ >= 3 && agree == 0 {
        for c in cb.iter_mut() {
            c.sign = c.sign.map(|s| -s);
        }
        warnings.push(format!(
            "{differ} of {} residue signs are reversed: the response polarity seems flipped (sensor turned over?); signs compared after undoing it",
            agree + differ
        ));
    }
    let pairs = pair_modes(&ca, &cb, &mr);
    let masses = base.variant.mass_g.zip(run.variant.mass_g);
    if base.variant.mass_g.is_some() != run.variant.mass_g.is_some() {
        warnings.push(format!(
            "only one of '{}' and '{}' has a mass: the stiffness ratio is at equal mass only (set it with `tapmodes amend RUN.json --mass GRAMS`)",
            base.variant.label, run.variant.label
        ));
    }
    let to_rules = |v: &[(usize, usize)]| -> Vec<PairRule> {
        v.iter()
            .map(|&(a, b)| PairRule {
                run: several.then_some(position),
                baseline_mode: a + 1,
                variant_mode: b + 1,
            })
            .collect()
    };
    let (pins, forbids) = (to_rules(&rules.0), to_rules(&rules.1));
    // A pin is obeyed whatever its shift, but one beyond the window is said.
    for r in &pins {
        let (fa, fb) = (
            base.modes[r.baseline_mode - 1].frequency_hz,
            run.modes[r.variant_mode - 1].frequency_hz,
        );
        let shift = fb / fa - 1.0;
        if shift.abs() > o.max_shift {
            warnings.push(format!(
                "{} pairs {fa:.1} Hz with {fb:.1} Hz, a shift of {:+.0} %, beyond --max-shift {:.0} %: kept because it is pinned, but check that the two are one mode",
                rule_text("pin", r),
                100.0 * shift,
                100.0 * o.max_shift
            ));
        }
    }
    let matched: Vec<MatchedMode> = pairs
        .iter()
        .map(|p| {
            let (a, b) = (&base.modes[p.a], &run.modes[p.b]);
            matched_mode(a, b, p, masses, o)
        })
        .collect();
    let unpaired = |mine: &[Mode], theirs: &[Mode], other: &str, side_a: bool| -> Vec<Unpaired> {
        (0..mine.len())
            .filter(|&i| {
                !pairs
                    .iter()
                    .any(|p| if side_a { p.a == i } else { p.b == i })
            })
            .map(|i| Unpaired {
                mode: i + 1,
                frequency_hz: mine[i].frequency_hz,
                damping_ratio: mine[i].damping_ratio,
                reason: unpaired_reason(
                    i,
                    (mine, theirs, other),
                    &pairs,
                    &forbids,
                    side_a,
                    o.max_shift,
                ),
            })
            .collect()
    };
    let unpaired_baseline = unpaired(&base.modes, &run.modes, &run.variant.label, true);
    let unpaired_variant = unpaired(&run.modes, &base.modes, &base.variant.label, false);
    let mount = compare_mounts(base, run, o);
    let summary = summary(
        &matched,
        &unpaired_baseline,
        &unpaired_variant,
        mount.as_ref(),
    );
    VariantComparison {
        label: run.variant.label.clone(),
        file: file.to_string(),
        only_in_baseline: unpaired_baseline.iter().map(|u| u.frequency_hz).collect(),
        only_in_variant: unpaired_variant.iter().map(|u| u.frequency_hz).collect(),
        matched,
        warnings,
        mass_g: run.variant.mass_g,
        unpaired_baseline,
        unpaired_variant,
        pins,
        forbids,
        mount,
        summary,
    }
}

fn matched_mode(
    a: &Mode,
    b: &Mode,
    p: &matching::Pair,
    masses: Option<(f64, f64)>,
    o: &CompareOptions,
) -> MatchedMode {
    use crate::modes::uncertainty::{damping_difference_significant, difference_significant};
    let r = b.frequency_hz / a.frequency_hz;
    let df = 100.0 * (r - 1.0);
    let f_sig = difference_significant(a, b);
    let z_sig = damping_difference_significant(a, b);
    let dz = a.damping_ratio.zip(b.damping_ratio);
    let dz_pct = dz
        .filter(|(x, _)| *x > 0.0)
        .map(|(x, y)| 100.0 * (y - x) / x);
    MatchedMode {
        baseline_hz: a.frequency_hz,
        variant_hz: b.frequency_hz,
        frequency_change_pct: df,
        baseline_damping: a.damping_ratio,
        variant_damping: b.damping_ratio,
        damping_change: dz.map(|(x, y)| y - x),
        stiffness_ratio: r * r,
        frequency_change_significant: f_sig,
        damping_change_significant: z_sig,
        baseline_mode: p.a + 1,
        variant_mode: p.b + 1,
        stiffness_ratio_mass_corrected: masses
            .map(|(ma, mb)| stiffness_ratio(ma, a.frequency_hz, mb, b.frequency_hz)),
        damping_change_pct: dz_pct,
        frequency_verdict: Verdict::judge_modes(df, o.floor_frequency_pct, f_sig, a, b),
        damping_verdict: dz_pct.map(|d| Verdict::judge_modes(d, o.floor_damping_pct, z_sig, a, b)),
        pairing: p.how,
        confidence: p.confidence,
        residue_sign_agrees: p.sign_agrees,
    }
}

/// Stiffness ratio `k_b / k_a` from `k = m (2 pi f)^2`: `(m_b / m_a)(f_b / f_a)^2`.
pub fn stiffness_ratio(m_a: f64, f_a: f64, m_b: f64, f_b: f64) -> f64 {
    (m_b / m_a) * (f_b / f_a).powi(2)
}

/// Why mode `i` of `mine` has no partner among `theirs` (the run labelled `other`).
fn unpaired_reason(
    i: usize,
    (mine, theirs, other): (&[Mode], &[Mode], &str),
    pairs: &[matching::Pair],
    forbids: &[PairRule],
    side_a: bool,
    max_shift: f64,
) -> String {
    if theirs.is_empty() {
        return format!("'{other}' has no modes");
    }
    let f = mine[i].frequency_hz;
    let shift = |g: f64| if side_a { g / f - 1.0 } else { f / g - 1.0 };
    let within = |j: usize| shift(theirs[j].frequency_hz).abs() <= max_shift;
    // The forbids that kept this mode from a partner within the window: (theirs index, text).
    let forbidden: Vec<(usize, String)> = forbids
        .iter()
        .filter_map(|r| {
            let (a, b) = (r.baseline_mode - 1, r.variant_mode - 1);
            let (me, them) = if side_a { (a, b) } else { (b, a) };
            (me == i && them < theirs.len() && within(them)).then(|| {
                (
                    them,
                    format!(
                        "forbidden by {} from pairing with mode {} of '{other}' ({:.1} Hz)",
                        rule_text("forbid", r),
                        them + 1,
                        theirs[them].frequency_hz
                    ),
                )
            })
        })
        .collect();
    let near = (0..theirs.len()).filter(|&j| within(j)).min_by(|&x, &y| {
        (theirs[x].frequency_hz / f)
            .ln()
            .abs()
            .total_cmp(&(theirs[y].frequency_hz / f).ln().abs())
    });
    let w = 100.0 * max_shift;
    let general = match near {
        None => format!("no mode of '{other}' within {w:.0} %"),
        Some(j) => {
            let partner = pairs
                .iter()
                .find(|p| if side_a { p.b == j } else { p.a == j })
                .map(|p| if side_a { p.a } else { p.b });
            match partner {
                Some(k) => format!(
                    "the nearest mode of '{other}' ({}, {:.1} Hz) pairs better with mode {}",
                    j + 1,
                    theirs[j].frequency_hz,
                    k + 1
                ),
                None => format!(
                    "pairing it with mode {} of '{other}' ({:.1} Hz) costs more than leaving both unpaired ({})",
                    j + 1,
                    theirs[j].frequency_hz,
                    if forbids.is_empty() {
                        "shift or residue sign"
                    } else {
                        "shift, residue sign or another forbid"
                    }
                ),
            }
        }
    };
    let texts: Vec<String> = forbidden.iter().map(|(_, t)| t.clone()).collect();
    if texts.is_empty() {
        general
    } else if near.is_some_and(|j| forbidden.iter().any(|(k, _)| *k == j)) {
        texts.join("; ")
    } else {
        format!("{}; {general}", texts.join("; "))
    }
}

fn summary(
    m: &[MatchedMode],
    ua: &[Unpaired],
    ub: &[Unpaired],
    mount: Option<&MountComparison>,
) -> String {
    let real: Vec<&MatchedMode> = m.iter().filter(|x| x.frequency_verdict.is_real()).collect();
    let up = real.iter().filter(|x| x.frequency_change_pct > 0.0).count();
    let mut s = if real.is_empty() {
        format!("no real frequency change in {} paired modes", m.len())
    } else {
        let big = real
            .iter()
            .max_by(|x, y| {
                x.frequency_change_pct
                    .abs()
                    .total_cmp(&y.frequency_change_pct.abs())
            })
            .map_or(0.0, |x| x.frequency_change_pct);
        format!(
            "{} of {} paired modes moved for real ({} up, {} down; largest {:+.1} %)",
            real.len(),
            m.len(),
            up,
            real.len() - up,
            big
        )
    };
    if !ua.is_empty() || !ub.is_empty() {
        s += &format!(
            "; unpaired: {} in baseline, {} in variant",
            ua.len(),
            ub.len()
        );
    }
    if let Some(df) = mount.and_then(|c| c.frequency_change_pct) {
        let v = mount
            .and_then(|c| c.frequency_verdict)
            .map_or("", |v| v.short());
        s += &format!("; mount {df:+.1} % ({v})");
    }
    s
}
