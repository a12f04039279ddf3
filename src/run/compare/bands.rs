//! Modes against the motors' excitation bands across variants: which paired modes moved into
//! or out of a band, and how their margin changed.
//!
//! Every run is judged against one set of bands (the command line's drive, else the
//! baseline's, else the first variant's that has one), so a change of verdict comes from the
//! mode moving, not from a different drive. The verdicts are recomputed with
//! `drive::verdicts` from the stored drive description; a run analysed with another drive
//! gets a warning.

use super::{Comparison, VariantComparison};
use crate::drive::{Band, BandVerdict, Drive, Verdict, judge};
use crate::error::Result;
use crate::run::RunFile;
use serde::Serialize;

/// How a paired mode's place against the bands changed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Movement {
    /// Outside every band in the baseline, inside one in the variant.
    MovedIn,
    /// Inside a band in the baseline, outside every band in the variant.
    MovedOut,
    StillInside,
    StillOutside,
}

impl Movement {
    pub fn label(self) -> &'static str {
        match self {
            Movement::MovedIn => "moved in",
            Movement::MovedOut => "moved out",
            Movement::StillInside => "still in",
            Movement::StillOutside => "still out",
        }
    }
}

/// One paired mode before and after.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BandChange {
    pub baseline_mode: usize,
    pub variant_mode: usize,
    pub baseline_hz: f64,
    pub variant_hz: f64,
    pub baseline: BandVerdict,
    pub variant: BandVerdict,
    pub movement: Movement,
    /// Variant margin minus baseline margin, percentage points (positive = more room).
    pub margin_change_pct: f64,
}

/// A variant's modes that have no partner but sit inside or near a band.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnpairedInBand {
    pub variant_mode: usize,
    pub frequency_hz: f64,
    pub verdict: BandVerdict,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VariantBands {
    pub label: String,
    pub changes: Vec<BandChange>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub unpaired_in_band: Vec<UnpairedInBand>,
}

/// The comparison's `bands` section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BandComparison {
    /// Where the bands come from.
    pub drive_from: String,
    pub drive: String,
    pub near_pct: f64,
    pub bands: Vec<Band>,
    pub variants: Vec<VariantBands>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

impl BandComparison {
    /// The band changes of the variant labelled `label`.
    pub fn of_variant(&self, label: &str) -> Option<&VariantBands> {
        self.variants.iter().find(|x| x.label == label)
    }
}

impl VariantBands {
    /// The band change of the pair `m` (its baseline and variant mode numbers).
    pub fn change_of(&self, m: &super::MatchedMode) -> Option<&BandChange> {
        self.changes
            .iter()
            .find(|x| x.baseline_mode == m.baseline_mode && x.variant_mode == m.variant_mode)
    }
}

/// The drive to judge with: the given one, else the first run's that has one.
fn choose(runs: &[(String, RunFile)], given: Option<&Drive>) -> Result<Option<(Drive, String)>> {
    if let Some(d) = given {
        return Ok(Some((d.clone(), "the command line".into())));
    }
    for (file, run) in runs {
        if let Some(s) = &run.drive {
            s.description
                .check()
                .map_err(|e| e.context(format!("the drive stored in '{file}'")))?;
            return Ok(Some((
                s.description.clone(),
                format!("the run '{}' ({file})", run.variant.label),
            )));
        }
    }
    Ok(None)
}

fn one_variant(v: &VariantComparison, bands: &crate::drive::Bands) -> VariantBands {
    let changes = v
        .matched
        .iter()
        .filter_map(|m| {
            let a = judge(bands, m.baseline_hz)?;
            let b = judge(bands, m.variant_hz)?;
            let (ia, ib) = (a.verdict == Verdict::Inside, b.verdict == Verdict::Inside);
            let movement = match (ia, ib) {
                (false, true) => Movement::MovedIn,
                (true, false) => Movement::MovedOut,
                (true, true) => Movement::StillInside,
                (false, false) => Movement::StillOutside,
            };
            Some(BandChange {
                baseline_mode: m.baseline_mode,
                variant_mode: m.variant_mode,
                baseline_hz: m.baseline_hz,
                variant_hz: m.variant_hz,
                margin_change_pct: b.margin_pct - a.margin_pct,
                baseline: a,
                variant: b,
                movement,
            })
        })
        .collect();
    let unpaired_in_band = v
        .unpaired_variant
        .iter()
        .filter_map(|u| {
            let j = judge(bands, u.frequency_hz)?;
            (j.verdict != Verdict::Clear).then_some(UnpairedInBand {
                variant_mode: u.mode,
                frequency_hz: u.frequency_hz,
                verdict: j,
            })
        })
        .collect();
    VariantBands {
        label: v.label.clone(),
        changes,
        unpaired_in_band,
    }
}

/// The band section of a comparison; `None` when no drive is given or stored.
pub fn compare_bands(
    c: &Comparison,
    runs: &[(String, RunFile)],
    given: Option<&Drive>,
) -> Result<Option<BandComparison>> {
    let Some((drive, from)) = choose(runs, given)? else {
        return Ok(None);
    };
    let bands = drive.bands();
    let mut warnings = Vec::new();
    for (file, run) in runs {
        match &run.drive {
            Some(s) if s.description != drive => warnings.push(format!(
                "'{}' ({file}) was analysed with another drive ({}); judged here against {from}",
                run.variant.label,
                s.description.describe()
            )),
            None if given.is_none() => warnings.push(format!(
                "'{}' ({file}) has no drive; judged here against {from}",
                run.variant.label
            )),
            _ => {}
        }
    }
    Ok(Some(BandComparison {
        drive_from: from,
        drive: drive.describe(),
        near_pct: bands.near_pct,
        variants: c.variants.iter().map(|v| one_variant(v, &bands)).collect(),
        bands: bands.bands,
        warnings,
    }))
}

/// The table lines (80 columns).
pub fn render(b: &BandComparison) -> String {
    use super::render::{short, wrap};
    let mut s = wrap(&format!("{}:", b.drive_from), "motor bands from ", "  ");
    s += &wrap(&b.drive, "  ", "    ");
    for x in &b.bands {
        s += &format!("  {:<12} {:>7.1}-{:.1} Hz\n", x.name, x.hz.0, x.hz.1);
    }
    for v in &b.variants {
        s += &wrap(
            &format!(
                "{}: modes against the bands, before->after (margin to the nearest edge)",
                short(&v.label)
            ),
            "",
            "  ",
        );
        s += " pair  f Hz            verdict         margin %      change\n";
        for ch in &v.changes {
            s += &format!(
                "{:>2}-{:<2}{:>7.1}->{:<7.1}{:>6}->{:<7}{:>+6.1}->{:<+6.1}{:>+6.1} {}\n",
                ch.baseline_mode,
                ch.variant_mode,
                ch.baseline_hz,
                ch.variant_hz,
                ch.baseline.verdict.label(),
                ch.variant.verdict.label(),
                ch.baseline.margin_pct,
                ch.variant.margin_pct,
                ch.margin_change_pct,
                match ch.movement {
                    Movement::MovedIn => format!("into {}", ch.variant.name),
                    Movement::MovedOut => format!("out of {}", ch.baseline.name),
                    m => m.label().to_string(),
                }
            );
        }
        for u in &v.unpaired_in_band {
            s += &format!(
                "  new mode {} at {:.1} Hz is {} {} ({:+.1} %)\n",
                u.variant_mode,
                u.frequency_hz,
                u.verdict.verdict.label(),
                u.verdict.name,
                u.verdict.margin_pct
            );
        }
    }
    for w in &b.warnings {
        s += &wrap(w, "warning: ", "  ");
    }
    s += "note: bands are estimates from nameplate values; a verdict is guidance, not a\n      substitute for a careful first hover\n";
    s
}
