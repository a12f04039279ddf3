//! Comparison of variants: pair modes as the physics allows, judge each change against the
//! hit-to-hit spread and a repeatability floor, correct stiffness for mass, compare mounts
//! and predictions.

pub mod bands;
pub mod matching;
mod mount;
pub mod predicted;
pub mod render;
mod repeats;
mod table_csv;
mod variant;

pub use mount::{IsolationChange, MountComparison, MountSide};
pub use repeats::Repeatability;
pub use variant::{candidates, stiffness_ratio};

use super::RunFile;
use crate::error::Result;
use crate::modes::Mode;
use matching::How;
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
    /// Drive to judge every run's modes against (else the one stored in the runs).
    pub drive: Option<crate::drive::Drive>,
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
            drive: None,
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
    /// Beyond the floor, but one of the two estimates is flagged (low coherence, few lines,
    /// window-dominated, no half-power band, or an overlap without a band fit), or, for a
    /// mount, one of the two mount fits is poor (`softmount::DOUBTFUL_ERROR`): not called
    /// real.
    Doubtful,
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
    /// As `judge`, but a change between flagged estimates beyond the floor is `Doubtful`.
    pub fn judge_modes(
        change_pct: f64,
        floor_pct: f64,
        significant: Option<bool>,
        a: &Mode,
        b: &Mode,
    ) -> Verdict {
        let v = Verdict::judge(change_pct, floor_pct, significant);
        if v != Verdict::WithinFloor && (doubtful(a) || doubtful(b)) {
            Verdict::Doubtful
        } else {
            v
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
            Verdict::Doubtful => "doubt",
        }
    }
}

/// A mode whose estimate carries a flag that makes its frequency or damping unreliable.
pub fn doubtful(m: &Mode) -> bool {
    use crate::modes::Flag;
    m.flags.iter().any(|f| match f {
        Flag::LowCoherence | Flag::FewLines | Flag::WindowDominated | Flag::NoHalfPower => true,
        Flag::Overlap => m.method != "fit",
        Flag::FitOnly => false,
    })
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
    /// With a drive: the modes against the motors' excitation bands, before and after.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub bands: Option<bands::BandComparison>,
}

/// What the residue evidence is, in the output's words.
pub const RESIDUE_EVIDENCE: &str = "residue sign: the sign of the fitted modal constant's real part (when the band fit exists and the constant is mostly real), else the sign of sin(phase) of the FRF at the peak (+90 deg for a positive modal constant on an accelerance); used only when both runs read modes from the same curve at the same response channel. At a driving point all signs agree; at a transfer point the sign flips between in-phase and anti-phase modes, so two modes that swap order keep their signs";

/// Mode-number pairs of one variant: pins and forbids as indices from 0.
pub(crate) type Rules = (Vec<(usize, usize)>, Vec<(usize, usize)>);

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
    let mut c = compare_resolved(runs, o, &rules);
    c.bands = bands::compare_bands(&c, runs, o.drive.as_ref())?;
    Ok(c)
}

fn compare_resolved(runs: &[(String, RunFile)], o: &CompareOptions, rules: &[Rules]) -> Comparison {
    let (base_file, base) = &runs[0];
    let variants: Vec<VariantComparison> = runs[1..]
        .iter()
        .enumerate()
        .map(|(k, (file, run))| {
            variant::compare_one(base, file, run, o, &rules[k], k + 2, runs.len() > 2)
        })
        .collect();
    let repeatability = o.repeats.then(|| repeats::repeatability(&variants));
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
        bands: None,
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
