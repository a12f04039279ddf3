//! The repeatability floor implied by repeats of one part.

use super::{MatchedMode, VariantComparison};
use serde::Serialize;

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

/// The floor implied by runs that are repeats of one part.
pub(super) fn repeatability(variants: &[VariantComparison]) -> Repeatability {
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
            zs.map_or(String::new(), |z| format!(" and {:.1} % in damping", z.2)),
            zs.map_or(String::new(), |z| format!(" --floor-damping {:.1}", z.2))
        )
    };
    if f.len() < 4 && !f.is_empty() {
        advice += &format!(
            " (only {} pairs: a rough figure; more repeats tighten it)",
            f.len()
        );
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
