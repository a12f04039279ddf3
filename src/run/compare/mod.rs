//! Comparison of variants: pair modes as the physics allows, judge each change against the
//! hit-to-hit spread and a repeatability floor, correct stiffness for mass, compare mounts
//! and predictions.

pub mod matching;
pub mod predicted;
pub mod render;

use super::RunFile;
use crate::error::Result;
use crate::modes::Mode;
use crate::spectra::Basis;
use matching::{Candidate, How, MatchRules, pair_modes};
use serde::Serialize;

/// Largest shift a pair may have by default: 50 %, so that the 15-40 % shifts of stiffening
/// swaps pair (common practice, no source).
pub const DEFAULT_MAX_SHIFT: f64 = 0.5;
/// Repeatability floor of a frequency, percent. Remounting the sensor, re-clamping the part
/// and a few degrees of temperature typically move the modes of a small frame part by a few
/// tenths of a percent: 1 % is a safe default (common practice, no source). Measure yours
/// with `--repeats` on two remounted tests of one part.
pub const DEFAULT_FLOOR_FREQUENCY_PCT: f64 = 1.0;
/// Repeatability floor of a damping ratio, percent of the baseline's value. Damping repeats
/// far worse than frequency (clamping, sensor cable, tip): 25 % (common practice, no source).
pub const DEFAULT_FLOOR_DAMPING_PCT: f64 = 25.0;

/// A pairing the user fixed or ruled out, by mode numbers (from 1, in frequency order).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairRule {
    /// Position of the variant on the command line (2 = the first after the baseline);
    /// `None` when only one variant is compared.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run: Option<usize>,
    pub baseline_mode: usize,
    pub variant_mode: usize,
}

/// Everything `compare` can be told.
#[derive(Debug, Clone)]
pub struct CompareOptions {
    /// Largest relative shift of a pair (fraction).
    pub max_shift: f64,
    pub floor_frequency_pct: f64,
    pub floor_damping_pct: f64,
    /// True when the floors are the user's.
    pub floor_from_user: bool,
    pub pins: Vec<PairRule>,
    pub forbids: Vec<PairRule>,
    /// The runs are repeats of one part: report the floor they imply.
    pub repeats: bool,
    /// Band of interest for the mounts' isolation (Hz; LO = HI for one frequency).
    pub isolation_band: Option<(f64, f64)>,
    /// Predicted modes (finite-element model or an earlier test) and where they came from.
    pub predicted: Option<(String, Vec<predicted::PredictedMode>)>,
}

impl Default for CompareOptions {
    fn default() -> Self {
        CompareOptions {
            max_shift: DEFAULT_MAX_SHIFT,
            floor_frequency_pct: DEFAULT_FLOOR_FREQUENCY_PCT,
            floor_damping_pct: DEFAULT_FLOOR_DAMPING_PCT,
            floor_from_user: false,
            pins: Vec::new(),
            forbids: Vec::new(),
            repeats: false,
            isolation_band: None,
            predicted: None,
        }
    }
}

/// Is a change real? Real means beyond the repeatability floor and beyond the hit-to-hit
/// spread; a change within the floor is never called real.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Beyond the floor and beyond the hit-to-hit spread (Welch test at 95 %).
    Real,
    /// Beyond the floor; no hit-to-hit spread stored to test against.
    RealUntested,
    /// Beyond the floor but within the hit-to-hit spread.
    WithinSpread,
    /// Within the repeatability floor.
    WithinFloor,
}

impl Verdict {
    pub fn judge(change_pct: f64, floor_pct: f64, significant: Option<bool>) -> Verdict {
        if change_pct.abs() <= floor_pct {
            Verdict::WithinFloor
        } else {
            match significant {
                Some(true) => Verdict::Real,
                Some(false) => Verdict::WithinSpread,
                None => Verdict::RealUntested,
            }
        }
    }
    pub fn is_real(self) -> bool {
        matches!(self, Verdict::Real | Verdict::RealUntested)
    }
    pub fn short(self) -> &'static str {
        match self {
            Verdict::Real => "real",
            Verdict::RealUntested => "real*",
            Verdict::WithinSpread => "spread",
            Verdict::WithinFloor => "floor",
        }
    }
}

/// One matched mode between the baseline and a variant.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MatchedMode {
    pub baseline_hz: f64,
    pub variant_hz: f64,
    /// (f_b - f_a) / f_a in percent.
    pub frequency_change_pct: f64,
    pub baseline_damping: Option<f64>,
    pub variant_damping: Option<f64>,
    /// Difference of damping ratios (variant - baseline), as a fraction.
    pub damping_change: Option<f64>,
    /// (f_b / f_a)^2: the stiffness ratio at equal mass (k = m w^2).
    pub stiffness_ratio: f64,
    /// Whether the frequency change exceeds the hit-to-hit spread (Welch t-test at 95 %),
    /// when both runs carry an uncertainty.
    pub frequency_change_significant: Option<bool>,
    pub damping_change_significant: Option<bool>,
    /// Mode numbers (from 1, in frequency order) in the baseline and the variant.
    pub baseline_mode: usize,
    pub variant_mode: usize,
    /// (m_b / m_a)(f_b / f_a)^2 when both masses are known: k = m w^2 with the modal mass
    /// taken proportional to the part's mass (a change spread like the part's own mass).
    pub stiffness_ratio_mass_corrected: Option<f64>,
    /// Damping change relative to the baseline's damping, percent.
    pub damping_change_pct: Option<f64>,
    pub frequency_verdict: Verdict,
    pub damping_verdict: Option<Verdict>,
    pub pairing: How,
    /// How sure the matcher is of this pair, 0.5 (a toss-up) to 1 (see `matching::Pair`).
    pub confidence: f64,
    /// Whether the residue (modal constant) signs agree; None when not known for both.
    pub residue_sign_agrees: Option<bool>,
}

/// A mode left without a partner, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Unpaired {
    pub mode: usize,
    pub frequency_hz: f64,
    pub damping_ratio: Option<f64>,
    pub reason: String,
}

/// The mount of one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MountSide {
    pub natural_frequency_hz: f64,
    pub damping_ratio: f64,
    /// Normalised residual of the mount fit (0 = perfect).
    pub fit_error: f64,
    /// `sqrt(2) f_n`: above it the mount isolates.
    pub isolation_onset_hz: f64,
}

/// Transmissibility of both mounts over the band of interest.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IsolationChange {
    pub band_hz: (f64, f64),
    /// From each fitted mount model, dB (negative = isolation).
    pub baseline_model_db: f64,
    pub variant_model_db: f64,
    /// variant - baseline, dB (negative = the variant isolates better).
    pub model_change_db: f64,
    /// Measured values, when both run files stored them for this band.
    pub baseline_measured_db: Option<f64>,
    pub variant_measured_db: Option<f64>,
}

/// The soft mounts of the baseline and a variant, compared like a mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MountComparison {
    pub baseline: Option<MountSide>,
    pub variant: Option<MountSide>,
    pub frequency_change_pct: Option<f64>,
    /// (f_b / f_a)^2: the mount's stiffness ratio for the same supported mass.
    pub stiffness_ratio: Option<f64>,
    pub damping_change: Option<f64>,
    pub frequency_verdict: Option<Verdict>,
    pub damping_verdict: Option<Verdict>,
    pub isolation: Option<IsolationChange>,
    /// What could not be compared.
    pub note: Option<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VariantComparison {
    pub label: String,
    pub file: String,
    pub matched: Vec<MatchedMode>,
    /// Modes with no partner, in Hz.
    pub only_in_baseline: Vec<f64>,
    pub only_in_variant: Vec<f64>,
    /// Setup differences that make the comparison less direct.
    pub warnings: Vec<String>,
    /// The variant's mass in grams, when the run file has one.
    pub mass_g: Option<f64>,
    /// The unpaired modes with their numbers and the reason.
    pub unpaired_baseline: Vec<Unpaired>,
    pub unpaired_variant: Vec<Unpaired>,
    /// Pairings the user pinned or forbade for this variant.
    pub pins: Vec<PairRule>,
    pub forbids: Vec<PairRule>,
    pub mount: Option<MountComparison>,
    /// One sentence: what changed for real.
    pub summary: String,
}

/// The settings the verdicts rest on.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Settings {
    pub max_shift_pct: f64,
    pub floor_frequency_pct: f64,
    pub floor_damping_pct: f64,
    /// Where the floors come from.
    pub floor_source: String,
    /// What the residue evidence of the pairing is.
    pub residue_evidence: String,
}

/// What repeats of one part say about the repeatability floor.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Repeatability {
    pub pairs: usize,
    pub rms_frequency_change_pct: f64,
    pub largest_frequency_change_pct: f64,
    /// max(largest change, 1.96 x RMS change), rounded up to 0.1 %.
    pub implied_floor_frequency_pct: f64,
    pub rms_damping_change_pct: Option<f64>,
    pub largest_damping_change_pct: Option<f64>,
    pub implied_floor_damping_pct: Option<f64>,
    pub advice: String,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    pub baseline: String,
    pub baseline_file: String,
    /// Largest relative frequency distance for a match (fraction).
    pub match_tolerance: f64,
    pub variants: Vec<VariantComparison>,
    pub baseline_mass_g: Option<f64>,
    pub settings: Settings,
    /// With `--repeats`: the floor these runs imply.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub repeatability: Option<Repeatability>,
    /// With predicted modes: each run against the prediction.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub predicted: Option<predicted::PredictionReport>,
}

/// What the residue evidence is, in the output's words.
pub const RESIDUE_EVIDENCE: &str = "residue sign: the sign of the fitted modal constant's real part (when the band fit exists and the constant is mostly real), else the sign of sin(phase) of the FRF at the peak (+90 deg for a positive modal constant on an accelerance); used only when both runs read modes from the same curve at the same response channel. At a driving point all signs agree; at a transfer point the sign flips between in-phase and anti-phase modes, so two modes that swap order keep their signs";

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

/// Mode-number pairs of one variant: pins and forbids as indices from 0.
type Rules = (Vec<(usize, usize)>, Vec<(usize, usize)>);

fn rule_text(kind: &str, r: &PairRule) -> String {
    match r.run {
        Some(n) => format!("--{kind} {n}:{}={}", r.baseline_mode, r.variant_mode),
        None => format!("--{kind} {}={}", r.baseline_mode, r.variant_mode),
    }
}

/// Check the user's pins and forbids against the runs and sort them by variant.
pub fn resolve_rules(runs: &[(String, RunFile)], o: &CompareOptions) -> Result<Vec<Rules>> {
    let mut out: Vec<Rules> = vec![(Vec::new(), Vec::new()); runs.len().saturating_sub(1)];
    let base = &runs[0].1;
    for (kind, list) in [("pin", &o.pins), ("forbid", &o.forbids)] {
        for r in list {
            let text = rule_text(kind, r);
            let v = match r.run {
                None if runs.len() > 2 => crate::fail!(
                    "{text}: with more than one variant, say which run it is for, e.g. --{kind} 2:{}={} (2 = the first run after the baseline)",
                    r.baseline_mode,
                    r.variant_mode
                ),
                None => 1,
                Some(n) if n >= 2 && n <= runs.len() => n - 1,
                Some(n) => crate::fail!(
                    "{text}: run {n} does not exist; the variants are runs 2 to {} on the command line",
                    runs.len()
                ),
            };
            let var = &runs[v].1;
            for (what, run, k) in [
                ("baseline", base, r.baseline_mode),
                ("variant", var, r.variant_mode),
            ] {
                if k == 0 || k > run.modes.len() {
                    crate::fail!(
                        "{text}: the {what} '{}' has {} modes (numbers 1 to {}), so there is no mode {k}",
                        run.variant.label,
                        run.modes.len(),
                        run.modes.len()
                    );
                }
            }
            let pair = (r.baseline_mode - 1, r.variant_mode - 1);
            let (pins, forbids) = &mut out[v - 1];
            if kind == "pin" {
                if let Some(p) = pins.iter().find(|p| p.0 == pair.0 || p.1 == pair.1) {
                    crate::fail!(
                        "{text}: baseline mode {} or variant mode {} is already pinned ({}={})",
                        pair.0 + 1,
                        pair.1 + 1,
                        p.0 + 1,
                        p.1 + 1
                    );
                }
                pins.push(pair);
            } else {
                if pins.contains(&pair) {
                    crate::fail!("{text}: that pair is also pinned; keep one of the two");
                }
                forbids.push(pair);
            }
        }
    }
    Ok(out)
}

/// Compare every variant against the first run with the default settings (the app's
/// comparison; `tolerance` is the largest shift of a pair, a fraction).
pub fn compare(runs: &[(String, RunFile)], tolerance: f64) -> Comparison {
    let o = CompareOptions {
        max_shift: tolerance,
        ..CompareOptions::default()
    };
    let rules = vec![(Vec::new(), Vec::new()); runs.len().saturating_sub(1)];
    compare_resolved(runs, &o, &rules)
}

/// Compare every variant against the first run.
pub fn compare_with(runs: &[(String, RunFile)], o: &CompareOptions) -> Result<Comparison> {
    if runs.len() < 2 {
        crate::fail!("compare needs at least two run files: a baseline and a variant");
    }
    let rules = resolve_rules(runs, o)?;
    Ok(compare_resolved(runs, o, &rules))
}

fn compare_resolved(runs: &[(String, RunFile)], o: &CompareOptions, rules: &[Rules]) -> Comparison {
    let (base_file, base) = &runs[0];
    let variants: Vec<VariantComparison> = runs[1..]
        .iter()
        .enumerate()
        .map(|(k, (file, run))| compare_one(base, file, run, o, &rules[k], k + 2, runs.len() > 2))
        .collect();
    let repeatability = o.repeats.then(|| repeatability(&variants));
    let predicted = o
        .predicted
        .as_ref()
        .map(|(src, p)| predicted::report(src, p, runs, o.max_shift));
    Comparison {
        baseline: base.variant.label.clone(),
        baseline_file: base_file.clone(),
        match_tolerance: o.max_shift,
        variants,
        baseline_mass_g: base.variant.mass_g,
        settings: Settings {
            max_shift_pct: 100.0 * o.max_shift,
            floor_frequency_pct: o.floor_frequency_pct,
            floor_damping_pct: o.floor_damping_pct,
            floor_source: if o.floor_from_user {
                "set by the user".into()
            } else {
                "default (common practice, no source); measure yours with --repeats".into()
            },
            residue_evidence: RESIDUE_EVIDENCE.into(),
        },
        repeatability,
        predicted,
    }
}

fn compare_one(
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
    // A sensor mounted the other way round flips every sign: compare signs after undoing it.
    let unsigned = |c: &[Candidate]| -> Vec<Candidate> {
        c.iter()
            .map(|c| Candidate {
                sign: None,
                ..c.clone()
            })
            .collect()
    };
    let plain = pair_modes(&unsigned(&ca), &unsigned(&cb), &mr);
    let (agree, differ) = plain.iter().fold((0, 0), |(y, n), p| {
        match ca[p.a].sign.zip(cb[p.b].sign) {
            Some((x, z)) if x == z => (y + 1, n),
            Some(_) => (y, n + 1),
            None => (y, n),
        }
    });
    if differ >= 2 && differ > agree {
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
                reason: unpaired_reason(i, mine, theirs, other, &pairs, side_a, o.max_shift),
            })
            .collect()
    };
    let unpaired_baseline = unpaired(&base.modes, &run.modes, &run.variant.label, true);
    let unpaired_variant = unpaired(&run.modes, &base.modes, &base.variant.label, false);
    let mount = compare_mounts(base, run, o);
    let to_rules = |v: &[(usize, usize)]| -> Vec<PairRule> {
        v.iter()
            .map(|&(a, b)| PairRule {
                run: several.then_some(position),
                baseline_mode: a + 1,
                variant_mode: b + 1,
            })
            .collect()
    };
    let summary = summary(&matched, &unpaired_baseline, &unpaired_variant, mount.as_ref());
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
        pins: to_rules(&rules.0),
        forbids: to_rules(&rules.1),
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
        stiffness_ratio_mass_corrected: masses.map(|(ma, mb)| stiffness_ratio(ma, a.frequency_hz, mb, b.frequency_hz)),
        damping_change_pct: dz_pct,
        frequency_verdict: Verdict::judge(df, o.floor_frequency_pct, f_sig),
        damping_verdict: dz_pct.map(|d| Verdict::judge(d, o.floor_damping_pct, z_sig)),
        pairing: p.how,
        confidence: p.confidence,
        residue_sign_agrees: p.sign_agrees,
    }
}

/// Stiffness ratio `k_b / k_a` from `k = m (2 pi f)^2`: `(m_b / m_a)(f_b / f_a)^2`.
pub fn stiffness_ratio(m_a: f64, f_a: f64, m_b: f64, f_b: f64) -> f64 {
    (m_b / m_a) * (f_b / f_a).powi(2)
}

#[allow(clippy::too_many_arguments)]
fn unpaired_reason(
    i: usize,
    mine: &[Mode],
    theirs: &[Mode],
    other: &str,
    pairs: &[matching::Pair],
    side_a: bool,
    max_shift: f64,
) -> String {
    let f = mine[i].frequency_hz;
    let shift = |g: f64| if side_a { g / f - 1.0 } else { f / g - 1.0 };
    let near = (0..theirs.len())
        .filter(|&j| shift(theirs[j].frequency_hz).abs() <= max_shift)
        .min_by(|&x, &y| {
            (theirs[x].frequency_hz / f)
                .ln()
                .abs()
                .total_cmp(&(theirs[y].frequency_hz / f).ln().abs())
        });
    let w = 100.0 * max_shift;
    match near {
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
                    "pairing it with mode {} of '{other}' ({:.1} Hz) costs more than leaving both unpaired (shift, residue sign or a forbid)",
                    j + 1,
                    theirs[j].frequency_hz
                ),
            }
        }
    }
}

fn compare_mounts(base: &RunFile, run: &RunFile, o: &CompareOptions) -> Option<MountComparison> {
    let side = |r: &RunFile| {
        r.mount.as_ref().map(|m| MountSide {
            natural_frequency_hz: m.natural_frequency_hz,
            damping_ratio: m.damping_ratio,
            fit_error: m.error,
            isolation_onset_hz: m.isolation_onset_hz(),
        })
    };
    let (sa, sb) = (side(base), side(run));
    if sa.is_none() && sb.is_none() {
        return None;
    }
    let mut c = MountComparison {
        baseline: sa.clone(),
        variant: sb.clone(),
        frequency_change_pct: None,
        stiffness_ratio: None,
        damping_change: None,
        frequency_verdict: None,
        damping_verdict: None,
        isolation: None,
        note: None,
    };
    let (Some(ma), Some(mb)) = (base.mount.as_ref(), run.mount.as_ref()) else {
        let which = if sa.is_some() { &base.variant.label } else { &run.variant.label };
        c.note = Some(format!(
            "only '{which}' has a mount fit (the other run has no base channel): the mounts are not compared"
        ));
        return Some(c);
    };
    let r = mb.natural_frequency_hz / ma.natural_frequency_hz;
    let df = 100.0 * (r - 1.0);
    c.frequency_change_pct = Some(df);
    c.stiffness_ratio = Some(r * r);
    c.damping_change = Some(mb.damping_ratio - ma.damping_ratio);
    // The mount fit stores no hit-to-hit spread: the floors alone decide.
    c.frequency_verdict = Some(Verdict::judge(df, o.floor_frequency_pct, None));
    if ma.damping_ratio > 0.0 {
        let dz = 100.0 * (mb.damping_ratio - ma.damping_ratio) / ma.damping_ratio;
        c.damping_verdict = Some(Verdict::judge(dz, o.floor_damping_pct, None));
    }
    let band = o.isolation_band.or_else(|| {
        base.isolation
            .as_ref()
            .zip(run.isolation.as_ref())
            .filter(|(x, y)| x.band_hz == y.band_hz)
            .map(|(x, _)| x.band_hz)
    });
    match band {
        Some(b) => {
            let model = |m: &crate::modes::softmount::MountFit| {
                if b.0 == b.1 { m.model_db(b.0) } else { m.model_band_db(b) }
            };
            let measured = |r: &RunFile| {
                r.isolation
                    .as_ref()
                    .filter(|i| i.band_hz == b)
                    .and_then(|i| i.measured_db)
            };
            let (xa, xb) = (model(ma), model(mb));
            c.isolation = Some(IsolationChange {
                band_hz: b,
                baseline_model_db: xa,
                variant_model_db: xb,
                model_change_db: xb - xa,
                baseline_measured_db: measured(base),
                variant_measured_db: measured(run),
            });
        }
        None => {
            c.note = Some(
                "no band of interest: give --isolation LO:HI (the motors' excitation band) to compare isolation"
                    .into(),
            )
        }
    }
    Some(c)
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
            .max_by(|x, y| x.frequency_change_pct.abs().total_cmp(&y.frequency_change_pct.abs()))
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
        s += &format!("; unpaired: {} in baseline, {} in variant", ua.len(), ub.len());
    }
    if let Some(df) = mount.and_then(|c| c.frequency_change_pct) {
        let v = mount.and_then(|c| c.frequency_verdict).map_or("", |v| v.short());
        s += &format!("; mount {df:+.1} % ({v})");
    }
    s
}

/// The floor implied by runs that are repeats of one part.
fn repeatability(variants: &[VariantComparison]) -> Repeatability {
    let all: Vec<&MatchedMode> = variants.iter().flat_map(|v| &v.matched).collect();
    let stats = |x: &[f64]| -> Option<(f64, f64, f64)> {
        if x.is_empty() {
            return None;
        }
        let rms = (x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64).sqrt();
        let big = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let floor = (10.0 * big.max(1.96 * rms)).ceil() / 10.0;
        Some((rms, big, floor.max(0.1)))
    };
    let f: Vec<f64> = all.iter().map(|m| m.frequency_change_pct).collect();
    let z: Vec<f64> = all.iter().filter_map(|m| m.damping_change_pct).collect();
    let (rf, bf, ff) = stats(&f).unwrap_or((0.0, 0.0, 0.0));
    let zs = stats(&z);
    let unpaired: usize = variants
        .iter()
        .map(|v| v.unpaired_baseline.len() + v.unpaired_variant.len())
        .sum();
    let mut advice = if f.is_empty() {
        "no mode paired across the repeats: no floor can be read from them".to_string()
    } else {
        format!(
            "these repeats imply a floor of {ff:.1} % in frequency{}; pass --floor {ff:.1}{} when comparing variants measured the same way",
            zs.map_or(String::new(), |z| format!(" and {:.0} % in damping", z.2)),
            zs.map_or(String::new(), |z| format!(" --floor-damping {:.0}", z.2))
        )
    };
    if f.len() < 4 && !f.is_empty() {
        advice += &format!(" (only {} pairs: a rough figure; more repeats tighten it)", f.len());
    }
    if unpaired > 0 {
        advice += &format!(
            "; {unpaired} mode(s) were found in only one repeat: their detection is not repeatable"
        );
    }
    Repeatability {
        pairs: f.len(),
        rms_frequency_change_pct: rf,
        largest_frequency_change_pct: bf,
        implied_floor_frequency_pct: ff,
        rms_damping_change_pct: zs.map(|z| z.0),
        largest_damping_change_pct: zs.map(|z| z.1),
        implied_floor_damping_pct: zs.map(|z| (10.0 * z.2).ceil() / 10.0),
        advice,
    }
}

/// Differences between two setups that a reader of the comparison must know about.
pub fn setup_warnings(a: &RunFile, b: &RunFile) -> Vec<String> {
    let (sa, sb) = (&a.setup, &b.setup);
    let mut w = Vec::new();
    if sa.sample_rate_hz != sb.sample_rate_hz {
        w.push(format!(
            "sample rates differ ({} vs {} Hz)",
            sa.sample_rate_hz, sb.sample_rate_hz
        ));
    }
    let resp = |r: &RunFile| {
        let c = &r.setup.channels[r.setup.roles.response.min(r.setup.channels.len() - 1)];
        (c.name.clone(), c.unit.clone())
    };
    let (ra, rb) = (resp(a), resp(b));
    if ra.0 != rb.0 {
        w.push(format!(
            "response channels differ ('{}' vs '{}')",
            ra.0, rb.0
        ));
    }
    if ra.1 != rb.1 {
        w.push(format!("response units differ ({} vs {})", ra.1, rb.1));
    }
    if sa.roles.force.is_some() != sb.roles.force.is_some() {
        w.push("one run has a force channel and the other does not".into());
    }
    if sa.basis != sb.basis {
        w.push(format!(
            "modes were read from different curves ({} vs {})",
            sa.basis.label(),
            sb.basis.label()
        ));
    } else if sa.estimator != sb.estimator && sa.roles.force.is_some() {
        w.push(format!(
            "estimators differ ({:?} vs {:?})",
            sa.estimator, sb.estimator
        ));
    }
    if sa.band_hz != sb.band_hz {
        w.push(format!(
            "search bands differ ({:.0}-{:.0} vs {:.0}-{:.0} Hz)",
            sa.band_hz.0, sa.band_hz.1, sb.band_hz.0, sb.band_hz.1
        ));
    }
    if sa.fft.resolution_hz != sb.fft.resolution_hz {
        w.push(format!(
            "resolutions differ ({:.3} vs {:.3} Hz)",
            sa.fft.resolution_hz, sb.fft.resolution_hz
        ));
    }
    if sa.windows != sb.windows {
        w.push("windows differ".into());
    }
    if sa.source.split_whitespace().next() != sb.source.split_whitespace().next() {
        w.push(format!("sources differ ({} vs {})", sa.source, sb.source));
    }
    w
}

