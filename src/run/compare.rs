//! Comparison of variants: match modes by frequency, report shifts and setup differences.

use super::RunFile;
use crate::modes::Mode;
use serde::Serialize;

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
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    pub baseline: String,
    pub baseline_file: String,
    /// Largest relative frequency distance for a match (fraction).
    pub match_tolerance: f64,
    pub variants: Vec<VariantComparison>,
}

/// Pair modes greedily by relative frequency distance, closest pairs first.
pub fn match_modes(a: &[Mode], b: &[Mode], tolerance: f64) -> Vec<(usize, usize)> {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, ma) in a.iter().enumerate() {
        for (j, mb) in b.iter().enumerate() {
            let d = (mb.frequency_hz - ma.frequency_hz).abs() / ma.frequency_hz;
            if d <= tolerance {
                pairs.push((d, i, j));
            }
        }
    }
    pairs.sort_by(|x, y| x.0.total_cmp(&y.0));
    let (mut used_a, mut used_b) = (vec![false; a.len()], vec![false; b.len()]);
    let mut out = Vec::new();
    for (_, i, j) in pairs {
        if !used_a[i] && !used_b[j] {
            used_a[i] = true;
            used_b[j] = true;
            out.push((i, j));
        }
    }
    out.sort();
    out
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

/// Compare every variant against the first run.
pub fn compare(runs: &[(String, RunFile)], tolerance: f64) -> Comparison {
    let (base_file, base) = &runs[0];
    let variants = runs[1..]
        .iter()
        .map(|(file, run)| {
            let pairs = match_modes(&base.modes, &run.modes, tolerance);
            let matched = pairs
                .iter()
                .map(|&(i, j)| {
                    let (a, b) = (&base.modes[i], &run.modes[j]);
                    let r = b.frequency_hz / a.frequency_hz;
                    MatchedMode {
                        baseline_hz: a.frequency_hz,
                        variant_hz: b.frequency_hz,
                        frequency_change_pct: 100.0 * (r - 1.0),
                        baseline_damping: a.damping_ratio,
                        variant_damping: b.damping_ratio,
                        damping_change: a.damping_ratio.zip(b.damping_ratio).map(|(x, y)| y - x),
                        stiffness_ratio: r * r,
                        frequency_change_significant:
                            crate::modes::uncertainty::difference_significant(a, b),
                        damping_change_significant:
                            crate::modes::uncertainty::damping_difference_significant(a, b),
                    }
                })
                .collect();
            let only_in_baseline = (0..base.modes.len())
                .filter(|i| !pairs.iter().any(|p| p.0 == *i))
                .map(|i| base.modes[i].frequency_hz)
                .collect();
            let only_in_variant = (0..run.modes.len())
                .filter(|j| !pairs.iter().any(|p| p.1 == *j))
                .map(|j| run.modes[j].frequency_hz)
                .collect();
            VariantComparison {
                label: run.variant.label.clone(),
                file: file.clone(),
                matched,
                only_in_baseline,
                only_in_variant,
                warnings: setup_warnings(base, run),
            }
        })
        .collect();
    Comparison {
        baseline: base.variant.label.clone(),
        baseline_file: base_file.clone(),
        match_tolerance: tolerance,
        variants,
    }
}

fn pct(z: Option<f64>) -> String {
    z.map_or("-".into(), |z| format!("{:.2}", 100.0 * z))
}

/// The comparison as a plain-text table.
pub fn render_table(c: &Comparison) -> String {
    let mut s = String::new();
    for v in &c.variants {
        s += &format!("{} -> {}\n", c.baseline, v.label);
        s += &format!(
            "  {:>10} {:>10} {:>8} {:>8} {:>8} {:>9} {:>9}  {}\n",
            "f_base Hz",
            "f_var Hz",
            "df %",
            "z_base %",
            "z_var %",
            "dz pts",
            "k ratio",
            "beyond spread"
        );
        for m in &v.matched {
            let sig = |x: Option<bool>| match x {
                Some(true) => "yes",
                Some(false) => "no",
                None => "?",
            };
            s += &format!(
                "  {:>10.1} {:>10.1} {:>+8.2} {:>8} {:>8} {:>9} {:>9.3}  f {} / z {}\n",
                m.baseline_hz,
                m.variant_hz,
                m.frequency_change_pct,
                pct(m.baseline_damping),
                pct(m.variant_damping),
                m.damping_change
                    .map_or("-".into(), |d| format!("{:+.2}", 100.0 * d)),
                m.stiffness_ratio,
                sig(m.frequency_change_significant),
                sig(m.damping_change_significant)
            );
        }
        let list = |v: &[f64]| {
            v.iter()
                .map(|f| format!("{f:.1}"))
                .collect::<Vec<_>>()
                .join(", ")
        };
        if !v.only_in_baseline.is_empty() {
            s += &format!(
                "  only in {}: {} Hz\n",
                c.baseline,
                list(&v.only_in_baseline)
            );
        }
        if !v.only_in_variant.is_empty() {
            s += &format!("  only in {}: {} Hz\n", v.label, list(&v.only_in_variant));
        }
        for w in &v.warnings {
            s += &format!("  warning: {w}\n");
        }
        s += "  k ratio = (f_var/f_base)^2, the stiffness ratio at equal mass (k ~ m f^2 if masses differ)\n";
        s += "  beyond spread: the change exceeds the hit-to-hit 95 % spread (Welch t-test); ? = no spread stored\n";
    }
    s
}
